//! `sieveline generate`: write the demo scenario's seeded streams (records, ground truth, label events, manifest) to a directory.

use anyhow::{bail, Context, Result};

use crate::cli::GenerateArgs;
use crate::demo::{self, DemoConfig, Kind};

pub fn run(args: &GenerateArgs) -> Result<()> {
    let kinds = match args.kind.as_str() {
        "tickets" => vec![Kind::Tickets],
        "logs" => vec![Kind::Logs],
        "both" => vec![Kind::Tickets, Kind::Logs],
        k => bail!("--kind {k:?}: expected tickets, logs or both"),
    };
    if args.records < 10 {
        bail!(
            "--records {}: need at least 10 records per stream",
            args.records
        );
    }
    if !(0.0 < args.phase2_at && args.phase2_at < args.phase3_at && args.phase3_at < 1.0) {
        bail!(
            "--phase2-at {} and --phase3-at {}: need 0 < phase2 < phase3 < 1",
            args.phase2_at,
            args.phase3_at
        );
    }
    let config = DemoConfig {
        phase2_at: args.phase2_at,
        phase3_at: args.phase3_at,
        ..DemoConfig::new(args.seed, args.records, kinds)
    };
    let generated = demo::generate(&config);
    let written = demo::write::write_streams(&generated, &args.out, args.labelled)
        .with_context(|| format!("writing {}", args.out.display()))?;
    for s in &generated.streams {
        let corrections = s.labels.iter().filter(|l| l.replaces.is_some()).count();
        eprintln!(
            "{}: {} records (phase 2 from {}, phase 3 from {}), {} label events ({} corrections)",
            s.kind.name(),
            s.records.len(),
            s.bounds.phase2_start,
            s.bounds.phase3_start,
            s.labels.len(),
            corrections
        );
    }
    for p in written {
        println!("{}", p.display());
    }
    Ok(())
}
