//! tauscan: finds the recursive smoothers in C firmware and says what they really do.
//!
//! The pipeline runs one way: `walk` → `parse` → `index` → `eval` → `recognise` →
//! `context` → `metrics` → `report`. See ARCHITECTURE.md for the map and its invariants.

pub mod cache;
pub mod callgraph;
pub mod check;
pub mod compdb;
pub mod context;
pub mod diff;
pub mod eval;
pub mod figures;
#[doc(hidden)]
pub mod fuzzing;
pub mod index;
pub mod ir;
pub mod metrics;
pub mod parse;
pub mod quantity;
pub mod recognise;
pub mod report;
pub mod rules;
pub mod scan;
pub mod spec;
pub mod units;
pub mod walk;
