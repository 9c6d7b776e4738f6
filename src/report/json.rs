//! JSON renderer: one object per command, keys as in the README's contract; a rate that does not
//! apply is `null`, never omitted.

use serde::Serialize;

/// Pretty JSON text of a report.
///
/// # Panics
/// Never for the report types of this crate (they contain only maps of strings to numbers, strings,
/// options and vectors; non-finite floats are written as null by serde_json).
pub fn render<T: Serialize>(report: &T) -> String {
    serde_json::to_string_pretty(report).expect("report types always serialize")
}
