//! The analyses' error: a message with hints, turned into a [`crate::diag::Diagnostic`] by
//! the one renderer.

use crate::numerics::NumericError;

/// A failure of the canonical analysis, with a diagnosis.
#[derive(Debug, Clone, PartialEq)]
pub struct AnalysisError {
    /// What went wrong.
    pub message: String,
    /// How to fix or what it means.
    pub hints: Vec<String>,
}

impl AnalysisError {
    fn new(message: impl Into<String>, hint: impl Into<String>) -> AnalysisError {
        AnalysisError {
            message: message.into(),
            hints: vec![hint.into()],
        }
    }

    /// As a diagnostic.
    pub fn diagnostic(&self) -> crate::diag::Diagnostic {
        let mut d = crate::diag::Diagnostic::new(self.message.clone());
        for h in &self.hints {
            d = d.with_hint(h.clone());
        }
        d
    }
}

impl std::fmt::Display for AnalysisError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for AnalysisError {}

impl From<NumericError> for AnalysisError {
    fn from(e: NumericError) -> Self {
        AnalysisError::new(
            format!("numerical failure: {e}"),
            "tighten the range with --range, or report the model",
        )
    }
}

/// Why the slow-roll computation failed on a branch.
pub fn fail(message: String, hints: &[&str]) -> AnalysisError {
    AnalysisError {
        message,
        hints: hints.iter().map(|h| h.to_string()).collect(),
    }
}
