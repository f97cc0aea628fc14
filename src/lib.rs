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

/// Every C file of `fixtures/` with its bytes, in walk order: the corpus the unit tests that
/// compare two ways of reading a file run over.
#[cfg(test)]
pub(crate) fn fixture_sources() -> Vec<(String, Vec<u8>)> {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures");
    walkdir::WalkDir::new(&root)
        .into_iter()
        .flatten()
        .filter(|e| {
            matches!(
                e.path().extension().and_then(|x| x.to_str()),
                Some("c" | "h")
            )
        })
        .filter_map(|e| {
            let bytes = std::fs::read(e.path()).ok()?;
            Some((e.path().display().to_string(), bytes))
        })
        .collect()
}
