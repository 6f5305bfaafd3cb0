//! Command-line definitions (clap) only; no I/O happens here.

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand};

#[derive(Debug, Parser)]
#[command(name = "sieveline", version, about = "Classify text records as they stream: rules for the cold start, Naive Bayes in log space, learning from reviewers' labels.")]
pub struct Cli {
    /// Settings file (TOML), merged over the built-in defaults.
    #[arg(long, global = true, env = "SIEVELINE_CONFIG")]
    pub config: Option<PathBuf>,
    /// More log output (repeat for more).
    #[arg(short, long, global = true, action = clap::ArgAction::Count)]
    pub verbose: u8,
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Train a model from a labelled file (JSONL, CSV or TSV) and write a snapshot.
    Train(TrainArgs),
    /// Classify records from a file or stdin; decisions as JSON lines on stdout.
    Classify(ClassifyArgs),
    /// Evaluate on a test file, a holdout or k folds; optionally tune α by cross-validation.
    Eval(EvalArgs),
    /// Show what a model file holds: classes, counts, vocabulary, top terms.
    Inspect(InspectArgs),
    /// Check a rules file: validate it and summarise its rules, or list every problem with its line.
    RulesCheck(RulesCheckArgs),
    /// Test a rules file on a labelled file: per-rule fires, precision and class shares; conflicts; coverage.
    RulesTest(RulesTestArgs),
    /// Explain one record: the decision, the rules that fired and why, the model's top terms.
    Explain(ExplainArgs),
    /// Learning curve on labelled train/test files: model only against rules blended with the model.
    RulesCurve(RulesCurveArgs),
    /// Run the streaming service: consume, score, route, review and dead-letter (see docs/service.md).
    Run(RunArgs),
    /// Measure the service end to end through a Kafka broker beside a pass-through copy.
    BenchStream(BenchStreamArgs),
    /// Write the demo scenario's seeded streams: records, ground truth, label events, manifest.
    Generate(GenerateArgs),
    /// Run the whole job in process on the invented demo scenario: rules on day one, reviewers'
    /// labels teaching the model, drift, a live status page; no broker needed.
    Demo(DemoArgs),
    /// Produce a JSON-lines file to a Kafka topic, keyed by a field (murmur2, like Java clients).
    Feed(FeedArgs),
    /// Measure replicas of `run` in one consumer group: records/s for 1, 2, 3 … replicas, and coverage time after a replica's loss.
    BenchScale(BenchScaleArgs),
    /// Check a settings file before a deploy: settings, rules and model files; with --connect, the brokers, topics and consumer group.
    CheckConfig(CheckConfigArgs),
}

/// How to read an input file.
#[derive(Debug, Args, Clone)]
pub struct InputArgs {
    /// Input format: jsonl, csv, tsv or text (default: from the extension, else jsonl).
    #[arg(long)]
    pub format: Option<String>,
    /// A text field and its weight, NAME or NAME=WEIGHT; repeat for several. Replaces input.fields.
    #[arg(long = "field", value_name = "NAME[=WEIGHT]")]
    pub fields: Vec<String>,
    /// The label field (default: input.label_field).
    #[arg(long)]
    pub label_field: Option<String>,
    /// The id field (default: input.id_field).
    #[arg(long)]
    pub id_field: Option<String>,
    /// CSV/TSV files have no header row; fields are then column numbers from 0.
    #[arg(long)]
    pub no_header: bool,
    /// Stop at the first malformed row instead of reporting and skipping it.
    #[arg(long)]
    pub strict: bool,
}

/// Model hyper-parameters that override [model] settings.
#[derive(Debug, Args, Clone)]
pub struct ModelArgs {
    /// Lidstone smoothing α.
    #[arg(long)]
    pub alpha: Option<f64>,
    /// multinomial or complement.
    #[arg(long)]
    pub kind: Option<String>,
    /// learned, uniform or given.
    #[arg(long)]
    pub priors: Option<String>,
}

#[derive(Debug, Args)]
pub struct TrainArgs {
    /// Labelled input file, or - for stdin.
    #[arg(long, short, required_unless_present_any = ["labels", "from_topic", "classes"], conflicts_with_all = ["labels", "from_topic", "classes"])]
    pub input: Option<PathBuf>,
    /// Day one, no labels yet: write an empty model of these classes (comma-separated), for
    /// the service to start from while rules decide and the learner fills it from the label log.
    #[arg(long, value_name = "CLASS,...", value_delimiter = ',', conflicts_with_all = ["labels", "from_topic"])]
    pub classes: Option<Vec<String>>,
    /// Fold a label log instead: a JSONL file of complete label events (with corrections),
    /// learned in file order exactly as the service folds its label log.
    #[arg(long, value_name = "FILE", conflicts_with = "from_topic")]
    pub labels: Option<PathBuf>,
    /// Fold the learned-label topic (default: learning.label_topic) up to its current end,
    /// with the service's own folding code: rebuilds a model from the source of truth.
    #[arg(long, value_name = "TOPIC", num_args = 0..=1, default_missing_value = "")]
    pub from_topic: Option<String>,
    /// With --labels or --from-topic: fold on top of this model file, from the label-log
    /// offsets it records (default: an empty model with the classes the log names).
    #[arg(long, value_name = "FILE")]
    pub base: Option<PathBuf>,
    /// With --labels or --from-topic: add classes first seen in the log instead of refusing them.
    #[arg(long)]
    pub add_classes: bool,
    /// With --input: the label-log offsets the model records, so a service that loads it
    /// knows where to replay from. `beginning` (default): the labels in the log are not in
    /// the training file, fold them all on top. `end`: the training file already holds
    /// every label in the log so far (needs the broker, or learning.label_path).
    #[arg(long, value_name = "beginning|end", default_value = "beginning")]
    pub label_offsets: String,
    /// Where to write the model snapshot.
    #[arg(long, short)]
    pub out: PathBuf,
    #[command(flatten)]
    pub io: InputArgs,
    #[command(flatten)]
    pub model: ModelArgs,
    /// A version string stored in the model (default: date and count fingerprint).
    #[arg(long)]
    pub model_version: Option<String>,
    /// Also write the per-record term-count matrix as JSON (for reference checks).
    #[arg(long, value_name = "FILE")]
    pub dump_counts: Option<PathBuf>,
}

#[derive(Debug, Args)]
pub struct ClassifyArgs {
    /// Model snapshot to score with.
    #[arg(long, short)]
    pub model: PathBuf,
    /// Records to classify (default: stdin).
    #[arg(long, short, default_value = "-")]
    pub input: PathBuf,
    #[command(flatten)]
    pub io: InputArgs,
    /// Add the joint log likelihood per class and the known terms to each decision.
    #[arg(long)]
    pub scores: bool,
    /// Echo the original record in each decision.
    #[arg(long)]
    pub echo: bool,
}

#[derive(Debug, Args)]
pub struct EvalArgs {
    /// Labelled training file.
    #[arg(long, short)]
    pub input: PathBuf,
    /// A separate labelled test file.
    #[arg(long, conflicts_with_all = ["holdout", "holdout_rows"])]
    pub test: Option<PathBuf>,
    /// Hold out this stratified, seeded fraction of the input as test data.
    #[arg(long, conflicts_with = "holdout_rows")]
    pub holdout: Option<f64>,
    /// Hold out rows whose 0-based index i has i % N == R, given as N:R.
    #[arg(long, value_name = "N:R")]
    pub holdout_rows: Option<String>,
    /// Number of folds for cross-validation (tuning, or the whole evaluation without a test set).
    #[arg(long, default_value_t = 5)]
    pub folds: usize,
    /// shuffled (seeded, within class) or contiguous (file order within class).
    #[arg(long, default_value = "shuffled")]
    pub fold_order: String,
    #[arg(long, default_value_t = 42)]
    pub seed: u64,
    /// Tune α over this comma-separated list by k-fold on the training data only.
    #[arg(long, value_delimiter = ',')]
    pub alpha_grid: Vec<f64>,
    /// Tune the model kind too: comma-separated multinomial,complement.
    #[arg(long, value_delimiter = ',')]
    pub kind_grid: Vec<String>,
    /// accuracy or macro_f1.
    #[arg(long, default_value = "accuracy")]
    pub tune_metric: String,
    #[command(flatten)]
    pub io: InputArgs,
    #[command(flatten)]
    pub model: ModelArgs,
    /// Print the report as JSON.
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Args)]
pub struct InspectArgs {
    /// Model snapshot.
    #[arg(long, short)]
    pub model: PathBuf,
    /// Top terms per class.
    #[arg(long, default_value_t = 10)]
    pub top: usize,
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Args)]
pub struct RulesCheckArgs {
    /// Rules file (default: rules.path).
    #[arg(long)]
    pub rules: Option<PathBuf>,
    /// The input fields rules may name, NAME or NAME=WEIGHT; repeat for several. Replaces input.fields.
    #[arg(long = "field", value_name = "NAME[=WEIGHT]")]
    pub fields: Vec<String>,
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Args)]
pub struct RulesTestArgs {
    /// Rules file (default: rules.path).
    #[arg(long)]
    pub rules: Option<PathBuf>,
    /// Labelled file to test on.
    #[arg(long, short)]
    pub input: PathBuf,
    #[command(flatten)]
    pub io: InputArgs,
    /// Only records whose label is a class some rule targets.
    #[arg(long)]
    pub rule_classes_only: bool,
    /// How many untouched and conflicting records to quote.
    #[arg(long, default_value_t = 5)]
    pub examples: usize,
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Args)]
pub struct ExplainArgs {
    /// Rules file (default: rules.path, if set).
    #[arg(long)]
    pub rules: Option<PathBuf>,
    /// Model snapshot.
    #[arg(long, short)]
    pub model: Option<PathBuf>,
    /// The record as a JSON object; its text fields are input.fields.
    #[arg(long, conflicts_with = "text")]
    pub record: Option<String>,
    /// The record as plain text, read as the first input field.
    #[arg(long)]
    pub text: Option<String>,
    /// Input fields, NAME or NAME=WEIGHT; repeat for several. Replaces input.fields.
    #[arg(long = "field", value_name = "NAME[=WEIGHT]")]
    pub fields: Vec<String>,
    /// Blend mode (default: rules.blend): rules_only, rules_first, model_first or takeover.
    #[arg(long)]
    pub blend: Option<String>,
    /// Also list rules that found nothing.
    #[arg(long)]
    pub all: bool,
    /// How many of the model's terms to show.
    #[arg(long, default_value_t = 10)]
    pub top: usize,
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Args)]
pub struct RulesCurveArgs {
    /// Rules file (default: rules.path); its target classes are the curve's classes.
    #[arg(long)]
    pub rules: Option<PathBuf>,
    /// Labelled training file (labels are drawn from it).
    #[arg(long, short)]
    pub input: PathBuf,
    /// Labelled test file.
    #[arg(long)]
    pub test: PathBuf,
    #[command(flatten)]
    pub io: InputArgs,
    /// Labels per class, comma-separated; "all" is every training record.
    #[arg(long, value_delimiter = ',', default_value = "0,5,20,100,all")]
    pub labels: Vec<String>,
    /// First seed of the labelled-example choice.
    #[arg(long, default_value_t = 42)]
    pub seed: u64,
    /// Number of consecutive seeds to average over.
    #[arg(long, default_value_t = 5)]
    pub seeds: u64,
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Args)]
pub struct GenerateArgs {
    /// Seed; the same seed writes byte-identical files.
    #[arg(long, default_value_t = 7)]
    pub seed: u64,
    /// Records per stream.
    #[arg(long, default_value_t = 20_000)]
    pub records: usize,
    /// Output directory (created if missing).
    #[arg(long, short, default_value = "demo-stream")]
    pub out: PathBuf,
    /// Which streams: tickets, logs or both.
    #[arg(long, default_value = "both")]
    pub kind: String,
    /// Phase 2 (new product line) starts at this fraction of the stream.
    #[arg(long, default_value_t = 0.4)]
    pub phase2_at: f64,
    /// Phase 3 (outage) starts at this fraction of the stream.
    #[arg(long, default_value_t = 0.7)]
    pub phase3_at: f64,
    /// Also write labelled training files, one per phase (record fields plus `class`).
    #[arg(long)]
    pub labelled: bool,
}

#[derive(Debug, Args)]
pub struct FeedArgs {
    /// JSON-lines file, one record a line.
    #[arg(long, short)]
    pub file: PathBuf,
    /// Topic to produce to (kafka.bootstrap_servers and kafka properties from settings).
    #[arg(long, short)]
    pub topic: String,
    /// Field whose value keys each record (e.g. id).
    #[arg(long)]
    pub key_field: Option<String>,
    /// Field naming the partition to produce to (id-only labels of records not keyed by id).
    #[arg(long)]
    pub partition_field: Option<String>,
    /// Records per second; 0 for as fast as possible.
    #[arg(long, default_value_t = 0.0)]
    pub rate: f64,
}

#[derive(Debug, Args)]
pub struct DemoArgs {
    /// Seed of the scenario; the same seed streams the same records and labels.
    #[arg(long, default_value_t = 7)]
    pub seed: u64,
    /// Records per stream (a longer run: e.g. 30000 with --rate 1000).
    #[arg(long, default_value_t = 6000)]
    pub records: usize,
    /// Records fed per second per stream (so labels and model publishes keep pace, as in a live stream).
    #[arg(long, default_value_t = 300.0)]
    pub rate: f64,
    /// Which streams: tickets, logs or both (each runs its own service).
    #[arg(long, default_value = "both")]
    pub stream: String,
    /// Where decisions, summaries and the demo's model files go.
    #[arg(long, short, default_value = "target/sieveline-demo")]
    pub out: PathBuf,
    /// Keep the status page up after the stream ends, until Ctrl-C.
    #[arg(long)]
    pub keep_open: bool,
    /// Admin port of the first stream (the next stream uses the next port); 0 picks free ports.
    #[arg(long, default_value_t = 0)]
    pub admin_port: u16,
}

#[derive(Debug, Args)]
pub struct RunArgs {
    /// Model snapshot to serve (overrides service.model).
    #[arg(long, short)]
    pub model: Option<PathBuf>,
    /// Read records from this file instead of the configured source (sets source.kind = "file").
    #[arg(long, short)]
    pub input: Option<PathBuf>,
    /// Rules file to decide with, beside the model (overrides rules.path).
    #[arg(long)]
    pub rules: Option<PathBuf>,
}

#[derive(Debug, Args)]
pub struct BenchStreamArgs {
    /// Bootstrap brokers (default: $SIEVELINE_TEST_BROKERS, else kafka.bootstrap_servers).
    #[arg(long)]
    pub brokers: Option<String>,
    /// Records for the throughput runs.
    #[arg(long, default_value_t = 1_000_000)]
    pub records: usize,
    /// Bytes per generated log line.
    #[arg(long, default_value_t = 120)]
    pub record_bytes: usize,
    /// Input partitions.
    #[arg(long, default_value_t = 4)]
    pub partitions: i32,
    /// Offered rate of the latency run, records/s.
    #[arg(long, default_value_t = 20_000)]
    pub rate: u64,
    /// Length of the latency run, seconds.
    #[arg(long, default_value_t = 15)]
    pub latency_secs: u64,
    /// Repeat each throughput run this many times and report medians.
    #[arg(long, default_value_t = 3)]
    pub repeats: usize,
    /// Print the report as JSON.
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Args)]
pub struct CheckConfigArgs {
    /// Model snapshot to check against the settings (overrides service.model); its classes name the class topics.
    #[arg(long, short)]
    pub model: Option<PathBuf>,
    /// Also connect to the brokers and check every configured topic and the consumer group.
    #[arg(long)]
    pub connect: bool,
    /// Time limit of each broker request with --connect, milliseconds.
    #[arg(long, default_value_t = 10_000)]
    pub timeout_ms: u64,
    /// Print the report as JSON.
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Args)]
pub struct BenchScaleArgs {
    /// Bootstrap brokers (default: $SIEVELINE_TEST_BROKERS, else kafka.bootstrap_servers).
    #[arg(long)]
    pub brokers: Option<String>,
    /// Records in the input topic, drained by each run.
    #[arg(long, default_value_t = 300_000)]
    pub records: usize,
    /// Bytes per generated log line.
    #[arg(long, default_value_t = 120)]
    pub record_bytes: usize,
    /// Input partitions.
    #[arg(long, default_value_t = 6)]
    pub partitions: i32,
    /// Replica counts to measure, comma-separated.
    #[arg(long, value_delimiter = ',', default_value = "1,2,3")]
    pub replicas: Vec<usize>,
    /// Runs per replica count (and failover runs); medians are reported.
    #[arg(long, default_value_t = 3)]
    pub repeats: usize,
    /// The replicas' session.timeout.ms: how long the group waits for a silent member.
    #[arg(long, default_value_t = 10_000)]
    pub session_timeout_ms: u64,
    /// Print the report as JSON.
    #[arg(long)]
    pub json: bool,
}
