//! The compiled [`Model`]: parameters resolved, V and K lowered onto one graph with sqrt(K)
//! and dV/dphi, compiled to one tape whose outputs the model's [`Layout`] names.

use super::error::ModelError;
use super::layout::Layout;
use super::metric::Metric;
use super::params::{resolve_params, resolve_range};
use super::spec::ModelSpec;
use crate::config::Config;
use crate::diag::Diagnostic;
use crate::language::compile::{lower_into, Compiled};
use crate::language::ir::{Func, Graph, Scope};
use crate::language::tape::{Evaluator, Tape};

/// A compiled model: one tape with outputs V, K, sqrt(K) and dV/dphi (named by
/// [`Model::layout`]), and the parameter values.
#[derive(Debug, Clone)]
pub struct Model {
    /// The model as written.
    pub spec: ModelSpec,
    /// Field and parameter names.
    pub scope: Scope,
    /// Parameter values, in scope order.
    pub params: Vec<f64>,
    /// The compiled expressions: the roots in the order of [`Model::layout`].
    pub compiled: Compiled,
    /// The field interval given by the user, if any (infinite ends allowed).
    pub range: Option<(f64, f64)>,
    /// Which tape output holds what.
    layout: Layout,
}

impl Model {
    /// Compiles a model: parameters first (each an expression of `pi` and earlier ones), then V
    /// and K, then the range.
    pub fn build(spec: &ModelSpec, config: &Config) -> Result<Model, ModelError> {
        let (names, values) = resolve_params(spec, config)?.into_parts();
        let refs: Vec<&str> = names.iter().map(String::as_str).collect();
        let scope = Scope::new(&spec.field, &refs);
        let mut graph = Graph::new(scope.clone());
        let (v_ast, v) = lower_into(
            &mut graph,
            &spec.potential.origin.name,
            &spec.potential.text,
            &config.limits,
        )
        .map_err(|e| ModelError::from_expr(e, &spec.potential.origin))?;
        let (k_ast, k) = lower_into(
            &mut graph,
            &spec.kinetic.origin.name,
            &spec.kinetic.text,
            &config.limits,
        )
        .map_err(|e| ModelError::from_expr(e, &spec.kinetic.origin))?;
        let sqrt_k = graph.func(Func::Sqrt, k);
        let dv = graph.derivative(v);
        let layout = Layout::ONE_FIELD;
        let mut roots = vec![v; layout.n_outputs()];
        roots[layout.v()] = v;
        roots[layout.k()] = k;
        roots[layout.sqrt_k()] = sqrt_k;
        roots[layout.dv()] = dv;
        let tape = Tape::compile(&graph, &roots);
        let range = resolve_range(spec, &names, &values, config)?;
        Ok(Model {
            spec: spec.clone(),
            scope,
            params: values,
            compiled: Compiled {
                asts: vec![v_ast, k_ast],
                graph,
                roots,
                tape,
            },
            range,
            layout,
        })
    }

    /// Rebinds the model to new parameter values without compiling V and K again (the
    /// parameters are inputs of the compiled tape): each `(name, value)` replaces that
    /// parameter's value, then every parameter defined from others, and the range, are resolved
    /// again. A name the model does not have is an error; the model is then unchanged.
    ///
    /// ```
    /// use efold::config::Config;
    /// use efold::model::{Model, ModelSpec};
    /// let mut spec = ModelSpec::inline("lambda * phi^4", None);
    /// spec.set_param("m", "2");
    /// spec.set_param("lambda", "m^2 / 4");
    /// let mut model = Model::build(&spec, &Config::default())?;
    /// model.rebind(&[("m", 4.0)], &Config::default())?;
    /// assert_eq!(model.evaluator().eval(1.0), 4.0); // lambda followed m
    /// # Ok::<(), efold::model::ModelError>(())
    /// ```
    pub fn rebind(&mut self, assignments: &[(&str, f64)], config: &Config) -> Result<(), ModelError> {
        let mut spec = self.spec.clone();
        for &(name, value) in assignments {
            if !self.scope.params.iter().any(|p| p == name) {
                return Err(ModelError::plain(
                    Diagnostic::new(format!("the model has no parameter `{name}`"))
                        .with_hint("give it in the model's [params] table, or with --param NAME=VALUE"),
                ));
            }
            spec.set_param(name, &format!("{value:e}"));
        }
        let (names, values) = resolve_params(&spec, config)?.into_parts();
        debug_assert_eq!(names, self.scope.params, "set_param keeps the parameter order");
        self.range = resolve_range(&spec, &names, &values, config)?;
        self.params = values;
        self.spec = spec;
        Ok(())
    }

    /// An evaluator bound to the model's parameters: `eval(phi)` returns V; the other outputs
    /// are read where [`Model::layout`] puts them (`output(layout.k())` is K, and so on).
    pub fn evaluator(&self) -> Evaluator<'_> {
        self.compiled.tape.evaluator(&self.params)
    }

    /// Which tape output holds what: for the one-field models built today, V, K, sqrt(K),
    /// dV/dphi in that order ([`Layout::ONE_FIELD`]).
    pub fn layout(&self) -> Layout {
        self.layout
    }

    /// The kinetic part as a field-space metric (for one field, the scalar K), located on the
    /// tape through [`Model::layout`].
    pub fn metric(&self) -> Metric {
        self.layout.metric()
    }

    /// The field's name.
    pub fn field(&self) -> &str {
        &self.scope.field
    }

    /// Parameter names and values.
    pub fn param_pairs(&self) -> impl Iterator<Item = (&str, f64)> {
        self.scope
            .params
            .iter()
            .map(String::as_str)
            .zip(self.params.iter().copied())
    }
}
