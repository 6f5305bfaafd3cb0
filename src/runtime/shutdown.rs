//! Shutdown signals: the first SIGTERM or SIGINT cancels the service's token (drain, flush, commit); a second one exits the process at once.

use tokio_util::sync::CancellationToken;

/// Exit code when a second signal cuts the drain short.
pub const SECOND_SIGNAL_EXIT: i32 = 130;

/// Spawn the signal watcher (call inside a tokio runtime).
pub fn watch_signals(token: CancellationToken) -> std::io::Result<()> {
    use tokio::signal::unix::{signal, SignalKind};
    let mut term = signal(SignalKind::terminate())?;
    let mut int = signal(SignalKind::interrupt())?;
    tokio::spawn(async move {
        let mut seen = 0u32;
        loop {
            let name = tokio::select! {
                _ = term.recv() => "SIGTERM",
                _ = int.recv() => "SIGINT",
            };
            seen += 1;
            if seen == 1 {
                tracing::warn!("{name}: draining in-flight records, then flushing and committing");
                eprintln!("sieveline: {name} received, draining (send it again to exit at once)");
                token.cancel();
            } else {
                eprintln!("sieveline: second signal ({name}), exiting at once");
                std::process::exit(SECOND_SIGNAL_EXIT);
            }
        }
    });
    Ok(())
}
