//! The compiled [`Model`]: parameters resolved, V and K lowered onto one graph with sqrt(K)
//! and dV/dphi, compiled to one tape whose outputs the model's [`Layout`] names.

use super::error::ModelError;
use super::fields;
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
    /// The start of a model of several fields (`[start]`), in field order.
    start: Option<Vec<f64>>,
    /// The start velocity dphi^a/dN of a model of several fields (`[start.velocity]`), if given.
    start_velocity: Option<Vec<f64>>,
    /// A model of several fields: a second tape of what the background needs alone.
    background: Option<BackgroundTape>,
}

/// The part of a model's tape that the background of several fields evaluates at every step:
/// V, d_a V, G_ab and d_c G_ab (not the Hessian of V nor the metric's second partials, which
/// only the perturbations need), compiled from the same graph.
#[derive(Debug, Clone)]
pub struct BackgroundTape {
    /// The tape.
    pub tape: Tape,
    /// For each of its outputs, the index of the same quantity on the model's tape (in
    /// [`Model::layout`]).
    pub outputs: Vec<usize>,
}

impl BackgroundTape {
    /// The background part of a tape of several fields laid out by `layout`.
    fn of(compiled: &Compiled, layout: Layout) -> BackgroundTape {
        let n = layout.fields();
        let mut outputs = vec![layout.v()];
        outputs.extend((0..n).filter_map(|a| layout.grad(a)));
        for a in 0..n {
            for b in a..n {
                outputs.extend(layout.component(a, b));
                outputs.extend((0..n).filter_map(|c| layout.metric_partial(a, b, c)));
            }
        }
        let roots: Vec<_> = outputs.iter().map(|&i| compiled.roots[i]).collect();
        BackgroundTape {
            tape: Tape::compile(&compiled.graph, &roots),
            outputs,
        }
    }
}

impl Model {
    /// Compiles a model: parameters first (each an expression of `pi` and earlier ones), then V
    /// and K, then the range. A model of several fields (`fields = [...]`) compiles V and its
    /// geometry ([`Layout::with_geometry`]) and checks its start; one written with
    /// `fields = ["phi"]` is the one-field model `field = "phi"` with `kinetic` its
    /// `[metric]` entry.
    pub fn build(spec: &ModelSpec, config: &Config) -> Result<Model, ModelError> {
        if let Some(one) = fields::one_field_form(spec)? {
            return Model::build_one(&one, config);
        }
        if spec.fields.len() > 1 {
            return Model::build_several(spec, config);
        }
        Model::build_one(spec, config)
    }

    /// A model of several fields: the names, the parameters, V and the geometry, the start.
    fn build_several(spec: &ModelSpec, config: &Config) -> Result<Model, ModelError> {
        let names = fields::field_names(spec)?;
        if spec.range.is_some() {
            return Err(ModelError::plain(
                Diagnostic::new("a field range is for one field; this model has several").with_hint(
                    "leave out `range` (and --range): a model of several fields starts at its [start] point",
                ),
            ));
        }
        let table = resolve_params(spec, config)?;
        let geometry = fields::compile_geometry(spec, &names, table.names(), config)?;
        let (start, start_velocity) = Model::resolve_start(spec, &names, &table, config)?;
        let (_, values) = table.into_parts();
        let at = fields::StartAt {
            names: &names,
            tape: &geometry.compiled.tape,
            layout: geometry.layout,
            params: &values,
            start: &start,
            velocity: start_velocity.as_deref(),
        };
        fields::check_start(spec, at)?;
        let background = Some(BackgroundTape::of(&geometry.compiled, geometry.layout));
        Ok(Model {
            spec: spec.clone(),
            scope: geometry.scope,
            params: values,
            compiled: geometry.compiled,
            range: None,
            layout: geometry.layout,
            start: Some(start),
            start_velocity,
            background,
        })
    }

    /// The start point and, if given, the start velocity, in field order.
    fn resolve_start(
        spec: &ModelSpec,
        names: &[String],
        table: &super::params::ParamTable,
        config: &Config,
    ) -> Result<(Vec<f64>, Option<Vec<f64>>), ModelError> {
        let start = fields::field_values(&spec.start_point, spec, names, table, config, "the start")?;
        let velocity = match spec.start_velocity.is_empty() {
            true => None,
            false => Some(fields::field_values(
                &spec.start_velocity,
                spec,
                names,
                table,
                config,
                "the start velocity",
            )?),
        };
        Ok((start, velocity))
    }

    /// A model of one field: V, K, sqrt(K) and dV/dphi.
    fn build_one(spec: &ModelSpec, config: &Config) -> Result<Model, ModelError> {
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
            start: None,
            start_velocity: None,
            background: None,
        })
    }

    /// Rebinds the model to new parameter values without compiling V and K again (the
    /// parameters are inputs of the compiled tape): each `(name, value)` replaces that
    /// parameter's value, then every parameter defined from others, and the range, are resolved
    /// again. A name the model does not have, or a value that is not finite, is an error; so
    /// is a new value that leaves a derived parameter or the range without a value. After an
    /// error the model is unchanged.
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
            if !value.is_finite() {
                return Err(ModelError::plain(
                    Diagnostic::new(format!("parameter `{name}`: {value} is not a finite number"))
                        .with_hint("give every parameter a finite value"),
                ));
            }
            spec.set_param(name, &format!("{value:e}"));
        }
        let table = resolve_params(&spec, config)?;
        let (start, start_velocity) = match self.n_fields() {
            1 => (None, None),
            _ => {
                let (start, velocity) = Model::resolve_start(&spec, &self.scope.fields, &table, config)?;
                let at = fields::StartAt {
                    names: &self.scope.fields,
                    tape: &self.compiled.tape,
                    layout: self.layout,
                    params: &table.clone().into_parts().1,
                    start: &start,
                    velocity: velocity.as_deref(),
                };
                fields::check_start(&spec, at)?;
                (Some(start), velocity)
            }
        };
        let (names, values) = table.into_parts();
        debug_assert_eq!(names, self.scope.params, "set_param keeps the parameter order");
        self.range = resolve_range(&spec, &names, &values, config)?;
        self.params = values;
        self.spec = spec;
        self.start = start;
        self.start_velocity = start_velocity;
        Ok(())
    }

    /// An evaluator bound to the model's parameters: `eval(phi)` returns V; the other outputs
    /// are read where [`Model::layout`] puts them (`output(layout.k())` is K, and so on).
    pub fn evaluator(&self) -> Evaluator<'_> {
        self.compiled.tape.evaluator(&self.params)
    }

    /// For a model of several fields, an evaluator of the background's part of the tape
    /// ([`BackgroundTape`]), bound to the parameters, with the layout index of each of its
    /// outputs; `None` for one field.
    pub fn background_evaluator(&self) -> Option<(Evaluator<'_>, &[usize])> {
        let b = self.background.as_ref()?;
        Some((b.tape.evaluator(&self.params), &b.outputs))
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

    /// The number of fields: 1 for a model written with `field` (or `fields = ["phi"]`).
    pub fn n_fields(&self) -> usize {
        self.scope.n_fields()
    }

    /// The fields' names, in order (the coordinates of a point of field space).
    pub fn field_names(&self) -> &[String] {
        &self.scope.fields
    }

    /// The `[start]` point of a model of several fields, in field order (`None` for one field).
    pub fn start(&self) -> Option<&[f64]> {
        self.start.as_deref()
    }

    /// The `[start.velocity]` dphi^a/dN of a model of several fields, in field order; `None`
    /// when not given (start on the slow-roll attractor, dphi^a/dN = -G^ab d_b V / V) or for
    /// one field.
    pub fn start_velocity(&self) -> Option<&[f64]> {
        self.start_velocity.as_deref()
    }

    /// Refuses a model of several fields for a command that analyses one field (`command`
    /// names it, e.g. `efold predict`): an error pointing at the model's `fields`, saying how
    /// many fields it has and what the command supports. `Ok` for a model of one field.
    pub fn one_field_only(&self, command: &str) -> Result<(), ModelError> {
        let n = self.n_fields();
        if n == 1 {
            return Ok(());
        }
        let names = self
            .field_names()
            .iter()
            .map(|f| format!("`{f}`"))
            .collect::<Vec<_>>()
            .join(", ");
        let d = Diagnostic::new(format!(
            "the model `{}` has {n} fields ({names}): `{command}` analyses models of one field only",
            self.spec.name
        ))
        .with_hint(format!(
            "`{command}` takes a model with one field: `field` and `kinetic`, or `fields = [\"phi\"]` with one [metric] entry"
        ))
        .with_hint("`efold predict`, `efold inspect` and `efold spectrum` take models of several fields");
        Err(match self.spec.fields.first() {
            Some(first) => fields::error_in(
                first,
                crate::diag::Span::new(0, first.text.len().max(1)),
                d,
                "several fields",
            ),
            None => ModelError::plain(d),
        })
    }

    /// The field's name (the first field's, for several).
    pub fn field(&self) -> &str {
        self.scope.field()
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::ModelSpec;

    /// lambda is defined from m, and the range's upper end is m.
    fn derived() -> Model {
        let text = "potential = \"lambda*phi^4\"\n[params]\nm = 2\nlambda = \"m^2/4\"\n\
                    [settings]\nrange = [\"0\", \"m\"]\n";
        Model::build(&ModelSpec::from_toml(text, "m.toml").unwrap(), &Config::default()).unwrap()
    }

    /// Every output at a few points, as bits.
    fn outputs(m: &Model) -> Vec<u64> {
        let mut ev = m.evaluator();
        let mut bits = Vec::new();
        for phi in [0.25, 1.0, 1.5] {
            ev.eval_each(&[phi], |_, out| bits.extend(out.iter().map(|x| x.to_bits())));
        }
        bits
    }

    #[test]
    fn the_tape_has_the_layout_of_one_field() {
        let m = derived();
        assert_eq!(m.layout(), Layout::ONE_FIELD);
        assert_eq!(m.compiled.tape.n_outputs(), m.layout().n_outputs());
        let mut ev = m.evaluator();
        // lambda = 1 at m = 2: V = phi^4, K = 1, dV/dphi = 4 phi^3 (own derivation).
        assert_eq!(ev.eval(1.5), 1.5f64.powi(4));
        assert_eq!(ev.output(m.layout().k()), 1.0);
        assert_eq!(ev.output(m.layout().sqrt_k()), 1.0);
        assert_eq!(ev.output(m.layout().dv()), 4.0 * 1.5f64.powi(3));
    }

    #[test]
    fn a_parameter_defined_from_another_follows_a_rebind() {
        let mut m = derived();
        let tape = m.compiled.tape.to_string();
        m.rebind(&[("m", 4.0)], &Config::default()).unwrap();
        assert_eq!(m.params, vec![4.0, 4.0]); // lambda = m^2/4
        assert_eq!(m.range, Some((0.0, 4.0)));
        assert_eq!(m.evaluator().eval(1.0), 4.0);
        assert_eq!(m.compiled.tape.to_string(), tape, "the tape is not compiled again");
        // The same numbers as a model built with m = 4 from the start.
        let mut spec = derived().spec;
        spec.set_param("m", "4");
        let fresh = Model::build(&spec, &Config::default()).unwrap();
        assert_eq!((&fresh.params, fresh.range), (&m.params, m.range));
        assert_eq!(outputs(&fresh), outputs(&m));
        // A value that is not a short decimal comes through exactly.
        m.rebind(&[("m", 1.0 / 3.0)], &Config::default()).unwrap();
        assert_eq!(m.params, vec![1.0 / 3.0, (1.0 / 3.0) * (1.0 / 3.0) / 4.0]);
        // Rebinding the derived parameter itself fixes it, whatever m is.
        m.rebind(&[("lambda", 0.5), ("m", 3.0)], &Config::default()).unwrap();
        assert_eq!(m.params, vec![3.0, 0.5]);
    }

    #[test]
    fn a_failed_rebind_leaves_the_model_unchanged() {
        let mut m = derived();
        let before = (m.spec.clone(), m.params.clone(), m.range, outputs(&m));
        let unchanged = |m: &Model| (m.spec.clone(), m.params.clone(), m.range, outputs(m));
        // An unknown name, after a known one: nothing is applied.
        let e = m.rebind(&[("m", 3.0), ("mu", 1.0)], &Config::default()).unwrap_err();
        assert_eq!(e.to_string(), "the model has no parameter `mu`");
        assert!(e.render().contains("--param NAME=VALUE"), "{}", e.render());
        assert_eq!(unchanged(&m), before);
        // A value that empties the range [0, m].
        let e = m.rebind(&[("m", -1.0)], &Config::default()).unwrap_err();
        assert!(e.to_string().contains("the range is empty"), "{e}");
        assert_eq!(unchanged(&m), before);
        // A value that is not a finite number.
        for x in [f64::NAN, f64::INFINITY] {
            let e = m.rebind(&[("m", x)], &Config::default()).unwrap_err();
            assert_eq!(e.to_string(), format!("parameter `m`: {x} is not a finite number"));
            assert_eq!(unchanged(&m), before);
        }
    }
}
