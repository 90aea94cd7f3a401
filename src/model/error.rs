//! What went wrong while reading or compiling a model: one error type for the whole stage,
//! drawn by the renderer of [`crate::diag`] against the text its span points into.

use super::spec::Origin;
use crate::diag::{Diagnostic, Source};
use crate::language::compile::ExprError;
use std::fmt;

/// What went wrong while reading or compiling a model.
#[derive(Debug, Clone, PartialEq)]
pub struct ModelError {
    /// The error in words.
    pub diagnostic: Box<Diagnostic>,
    /// The text its span points into: (name, text, offset).
    pub source: Option<(String, String, usize)>,
    /// Whether the error is one of an expression of the model (a syntax error, an unknown
    /// name) rather than of the model's structure; programs that sort errors by stage read it.
    pub from_expression: bool,
}

impl ModelError {
    pub(crate) fn plain(d: Diagnostic) -> ModelError {
        ModelError {
            diagnostic: Box::new(d),
            source: None,
            from_expression: false,
        }
    }

    pub(crate) fn in_file(d: Diagnostic, name: &str, text: &str) -> ModelError {
        ModelError {
            diagnostic: Box::new(d),
            source: Some((name.to_string(), text.to_string(), 0)),
            from_expression: false,
        }
    }

    /// An expression error, pointing into the file it came from when there is one.
    pub fn from_expr(e: ExprError, origin: &Origin) -> ModelError {
        let d = e.diagnostic();
        match &origin.file_text {
            Some(file) => ModelError {
                diagnostic: Box::new(d),
                source: Some((origin.name.clone(), file.to_string(), origin.offset)),
                from_expression: true,
            },
            None => ModelError {
                diagnostic: Box::new(d),
                source: Some((e.origin.clone(), e.text.clone(), 0)),
                from_expression: true,
            },
        }
    }

    /// Drawn with the source line and carets.
    pub fn render(&self) -> String {
        match &self.source {
            Some((name, text, offset)) => self.diagnostic.render(Some(&Source {
                origin: name,
                text,
                offset: *offset,
            })),
            None => self.diagnostic.render(None),
        }
    }
}

impl fmt::Display for ModelError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.diagnostic.message)
    }
}

impl std::error::Error for ModelError {}
