//! The analyzer: text → weighted terms. Tokenise, collapse volatile terms into class tokens, fold case, filter, add bigrams.
//!
//! Stages, each in its own file, chained by [`Analyzer`] from settings:
//! - `tokenizer`: whitespace chunks, hard separators, word pieces;
//! - `collapse/`: one file per family of volatile terms (numbers, ids, addresses, …);
//! - `patterns`: user-defined collapsing patterns (regex), tried first;
//! - `fold`: Unicode case folding with an ASCII fast path;
//! - `stopwords`: the optional built-in stop-word list;
//! - `bag`: the `TermBag` a record's terms are written into, without a
//!   string allocation per term.

pub mod analyzer;
pub mod bag;
pub mod collapse;
pub mod fold;
pub mod patterns;
pub mod stopwords;
pub mod tokenizer;

pub use analyzer::{Analyzer, AnalyzerScratch};
pub use bag::TermBag;
