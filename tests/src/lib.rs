//! Verification of heatbound against outside sources.
//!
//! The suites live in `tests/`; this library holds nothing but shared
//! helpers for them.
#![deny(unsafe_code)]
#![warn(missing_docs)]

/// Relative difference `|a − b| / max(|a|, |b|)`, or the absolute difference
/// when both are zero-ish. Used by the suites to state tolerances uniformly.
pub fn rel_diff(a: f64, b: f64) -> f64 {
    let scale = a.abs().max(b.abs());
    if scale < 1e-300 {
        (a - b).abs()
    } else {
        (a - b).abs() / scale
    }
}
