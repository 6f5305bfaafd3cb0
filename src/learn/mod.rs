//! Online learning, pure part: label events, folding the label log into counts in log order, and the bounded recent-record cache that resolves id-only labels.
//!
//! - `event`: the label-event contract (complete and id-only) and its validation;
//! - `fold`: `Folder`, which applies complete events in log order (with
//!   corrections) and records the label-log offsets it has folded;
//! - `recent`: the bounded, expiring cache of recently scored records;
//! - `resolve`: an id-only label joined with the cache into a complete event.
//!
//! Counts depend only on the label log: folding the same events in the same
//! order from the same snapshot gives bit-identical counts on every replica.

pub mod event;
pub mod fold;
pub mod recent;
pub mod resolve;

pub use event::{IdOnlyLabel, LabelEvent, LabelReject, LabelSource};
pub use fold::{FoldOutcome, Folder, UnknownClassPolicy};
pub use recent::{CachedRecord, PackedTerms, RecentCache, RecentStats};
pub use resolve::resolve;
