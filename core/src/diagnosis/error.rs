//! Why a diagnosis could not be made.

/// Why a diagnosis could not be made.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum DiagnosisError {
    /// More relations or quantities than the method holds, or sizes that
    /// do not match.
    Size,
    /// A quantity is not a finite number.
    NotFinite,
    /// The window holds no integrated time, or no heat on one side, so
    /// its mean temperatures are undefined.
    NoWindow,
    /// The relations' covariance cannot be inverted: two relations say the
    /// same thing, or no uncertain quantity enters one.
    Singular,
}

impl core::fmt::Display for DiagnosisError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(match self {
            DiagnosisError::Size => "the diagnosis was given more relations or quantities than it holds",
            DiagnosisError::NotFinite => "a quantity of the window is not a finite number",
            DiagnosisError::NoWindow => {
                "no window to diagnose yet: no integrated time, or no heat flow on one side"
            }
            DiagnosisError::Singular => {
                "the relations' uncertainties cannot be separated (two relations say the same thing, or one has no uncertainty)"
            }
        })
    }
}

impl core::error::Error for DiagnosisError {}
