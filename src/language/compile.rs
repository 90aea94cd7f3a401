//! The front half of the pipeline in one call: text → syntax → IR → tape.
//!
//! ```
//! use efold::{compile::compile, ir::Scope};
//! let scope = Scope::new("phi", &["alpha"]);
//! let c = compile(&[("potential", "phi^2/(6*alpha)"), ("kinetic", "1/(1 - phi^2/(6*alpha))^2")], &scope, &Default::default())?;
//! let mut ev = c.tape.evaluator(&[1.0]);
//! let v = ev.eval(1.0);
//! let k = ev.output(1);
//! assert!((v - 1.0 / 6.0).abs() < 1e-15 && (k - 1.44).abs() < 1e-12);
//! # Ok::<(), efold::compile::ExprError>(())
//! ```

use crate::config::Limits;
use crate::diag::{Diagnostic, Source};
use crate::language::ir::{Graph, Id, NameError, Scope};
use crate::language::syntax::{self, Expr, SyntaxError};
use crate::language::tape::Tape;
use std::fmt;

/// A syntax or name error in one named expression, with the text it refers to.
#[derive(Debug, Clone, PartialEq)]
pub struct ExprError {
    /// Which expression: `potential`, `--kinetic`, a file's key, ...
    pub origin: String,
    /// The expression's text.
    pub text: String,
    /// What went wrong.
    pub error: Box<StageError>,
}

/// The stage an expression failed in.
#[derive(Debug, Clone, PartialEq)]
pub enum StageError {
    /// Parsing.
    Syntax(SyntaxError),
    /// Name resolution and arity.
    Name(NameError),
}

impl ExprError {
    /// The diagnostic, spans relative to the expression's text.
    pub fn diagnostic(&self) -> Diagnostic {
        match self.error.as_ref() {
            StageError::Syntax(e) => e.diagnostic(),
            StageError::Name(e) => e.diagnostic(),
        }
    }

    /// Drawn with carets under the offending part of the expression.
    pub fn render(&self) -> String {
        self.diagnostic().render(Some(&Source::new(&self.origin, &self.text)))
    }
}

impl fmt::Display for ExprError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "in {}: {}", self.origin, self.diagnostic().message)
    }
}

impl std::error::Error for ExprError {}

/// Expressions compiled together over one scope: their syntax trees, the shared DAG, the roots
/// (one per expression, in order) and the tape (one output per expression).
#[derive(Debug, Clone)]
pub struct Compiled {
    /// Syntax trees, one per expression.
    pub asts: Vec<Expr>,
    /// The shared DAG.
    pub graph: Graph,
    /// Each expression's root in the DAG.
    pub roots: Vec<Id>,
    /// The compiled evaluator.
    pub tape: Tape,
}

/// Parses and lowers one expression into a graph; errors name `origin`.
pub fn lower_into(graph: &mut Graph, origin: &str, text: &str, limits: &Limits) -> Result<(Expr, Id), ExprError> {
    let wrap = |error| ExprError {
        origin: origin.to_string(),
        text: text.to_string(),
        error: Box::new(error),
    };
    let ast = syntax::parse(text, limits).map_err(|e| wrap(StageError::Syntax(e)))?;
    let id = graph.lower(&ast).map_err(|e| wrap(StageError::Name(e)))?;
    Ok((ast, id))
}

/// Compiles named expressions `(origin, text)` into one tape with one output each.
pub fn compile(exprs: &[(&str, &str)], scope: &Scope, limits: &Limits) -> Result<Compiled, ExprError> {
    let mut graph = Graph::new(scope.clone());
    let mut asts = Vec::with_capacity(exprs.len());
    let mut roots = Vec::with_capacity(exprs.len());
    for (origin, text) in exprs {
        let (ast, id) = lower_into(&mut graph, origin, text, limits)?;
        asts.push(ast);
        roots.push(id);
    }
    let tape = Tape::compile(&graph, &roots);
    Ok(Compiled {
        asts,
        graph,
        roots,
        tape,
    })
}

/// Compiles one expression with the default limits.
pub fn compile_one(text: &str, scope: &Scope) -> Result<Compiled, ExprError> {
    compile(&[("expression", text)], scope, &Limits::default())
}
