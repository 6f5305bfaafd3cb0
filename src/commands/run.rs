//! `sieveline run`: the streaming service in a multi-threaded tokio runtime; the first SIGTERM/SIGINT drains and exits 0, a second exits at once.

use anyhow::{Context, Result};
use tokio_util::sync::CancellationToken;

use crate::cli::RunArgs;
use crate::runtime::shutdown::watch_signals;
use crate::runtime::{Service, ServiceError};
use crate::settings::{Settings, SourceKind};

pub fn run(mut settings: Settings, args: &RunArgs) -> Result<()> {
    if let Some(m) = &args.model {
        settings.service.model = m.display().to_string();
    }
    if let Some(r) = &args.rules {
        settings.rules.path = r.display().to_string();
    }
    if let Some(i) = &args.input {
        settings.source.kind = SourceKind::File;
        settings.source.path = i.display().to_string();
    }
    settings.validate().context("flags give invalid settings")?;
    let service = Service::new(settings).context("cannot start the service")?;
    let rt = tokio::runtime::Builder::new_multi_thread().enable_all().build().context("tokio runtime")?;
    let report = rt.block_on(async move {
        let shutdown = CancellationToken::new();
        watch_signals(shutdown.clone()).context("installing signal handlers")?;
        service.run(shutdown).await.context("service stopped")
    })?;
    // Tasks still blocked on I/O (a stdin read) must not hold the exit.
    rt.shutdown_timeout(std::time::Duration::from_millis(100));
    tracing::info!("service stopped after {} records (drained: {})", report.records_in, report.drained);
    Ok(())
}

/// Exit codes for service errors that are the operator's to fix (2), else `None`.
pub fn exit_code_of(e: &(dyn std::error::Error + 'static)) -> Option<u8> {
    match e.downcast_ref::<ServiceError>()? {
        ServiceError::NoModel | ServiceError::MissingTopic { .. } | ServiceError::Rules(_) => Some(2),
        _ => None,
    }
}
