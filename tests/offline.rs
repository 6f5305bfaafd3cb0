//! Integration tests that need no broker, in one test binary (one link of the release build instead of one per file): each module is one concern, opening with what it guards.

mod common;
mod deploy_support;
mod support;

mod cli_offline;
mod datasets;
mod reference_sklearn;
mod rules_banking77;
mod rules_blend;
mod rules_semantics;
mod rules_validation;
mod demo_generator;
mod demo_rules;
mod demo_run;
mod learning_lines;
mod service_lines;
mod service_reload;
mod service_bench_smoke;
mod deploy_manifests;
mod drift_promtool;
mod drift_reference;
mod drift_service;
