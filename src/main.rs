//! The `sieveline` binary: parse flags, load settings once, dispatch, and map errors to documented exit codes.
//!
//! Exit codes: 0 success; 1 runtime or I/O failure; 2 bad usage, settings or rules file;
//! 3 bad input data (with `--strict`, an unknown field, no usable rows);
//! 4 a model file was refused (corrupt, truncated, foreign, other analyzer).
//! `run` also exits 130 when a second SIGTERM/SIGINT cuts its drain short.

use std::process::ExitCode;

use clap::Parser;
use sieveline::cli::{Cli, Command};
use sieveline::commands;
use sieveline::error::{DatasetError, SettingsError, SnapshotError};
use sieveline::rules::RulesError;
use sieveline::settings::Settings;

fn main() -> ExitCode {
    let cli = Cli::parse();
    init_tracing(cli.verbose);
    match run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e:#}");
            ExitCode::from(exit_code(&e))
        }
    }
}

fn run(cli: Cli) -> anyhow::Result<()> {
    let settings = Settings::load(cli.config.as_deref())?;
    match &cli.command {
        Command::Train(a) => commands::train::run(settings, a),
        Command::Classify(a) => commands::classify::run(settings, a),
        Command::Eval(a) => commands::eval::run(settings, a),
        Command::Inspect(a) => commands::inspect::run(settings, a),
        Command::RulesCheck(a) => commands::rules_check::run(settings, a),
        Command::RulesTest(a) => commands::rules_test::run(settings, a),
        Command::Explain(a) => commands::explain::run(settings, a),
        Command::RulesCurve(a) => commands::rules_curve::run(settings, a),
        Command::Run(a) => commands::run::run(settings, a),
        Command::BenchStream(a) => commands::bench_stream::run(settings, a),
        Command::Generate(a) => commands::generate::run(a),
        Command::Demo(a) => commands::demo::run(a),
    }
}

fn exit_code(e: &anyhow::Error) -> u8 {
    for cause in e.chain() {
        if let Some(code) = commands::run::exit_code_of(cause) {
            return code;
        }
        if cause.is::<SettingsError>() || cause.is::<RulesError>() {
            return 2;
        }
        if cause.is::<SnapshotError>() {
            return 4;
        }
        if cause.is::<DatasetError>() {
            return 3;
        }
    }
    1
}

fn init_tracing(verbose: u8) {
    let default = match verbose {
        0 => "warn",
        1 => "info",
        _ => "debug",
    };
    let filter = tracing_subscriber::EnvFilter::try_from_env("SIEVELINE_LOG").unwrap_or_else(|_| tracing_subscriber::EnvFilter::new(default));
    let _ = tracing_subscriber::fmt().with_env_filter(filter).with_writer(std::io::stderr).try_init();
}
