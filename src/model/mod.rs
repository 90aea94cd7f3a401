//! Stage 2: a model: field name, parameters, V(phi), K(phi) and an optional field range, read
//! from a TOML file or given inline, then compiled to one tape with outputs V, K, sqrt(K) and
//! dV/dphi, which the model's [`Layout`] names.
//!
//! The file format (all keys but `potential` optional):
//!
//! ```toml
//! name = "pole-order-2-quadratic"
//! description = "Quadratic potential in the pole variable"
//! field = "phi"                                  # default phi
//! potential = "phi^2/(6*alpha)"
//! kinetic = "1/(1 - phi^2/(6*alpha))^2"          # default 1
//!
//! [params]                                       # a number, or an expression of earlier ones
//! alpha = 1
//!
//! [scan]                                         # default ranges for scans: [lo, hi] or [lo, hi, "log"]
//! alpha = [0.1, 100, "log"]
//!
//! [settings]
//! range = ["0", "sqrt(6*alpha)"]                 # field interval to consider; "-inf"/"inf" allowed
//! start = "above"                                # field starts above (larger phi) or below the minimum of V
//! efolds = [50, 55, 60]                          # default N_* values
//! ```
//!
//! ```
//! use efold::model::{ModelSpec, Model};
//! let spec = ModelSpec::from_toml("potential = \"phi^2\"\n", "inline.toml")?;
//! let model = Model::build(&spec, &Default::default())?;
//! let mut ev = model.evaluator();
//! assert_eq!(ev.eval(3.0), 9.0); // V
//! assert_eq!(ev.output(model.layout().k()), 1.0); // K
//! assert_eq!(ev.output(model.layout().dv()), 6.0); // dV/dphi
//! # Ok::<(), efold::model::ModelError>(())
//! ```

//!
//! A model of several fields writes `fields = ["x", "y"]` instead of `field`, a `[metric]`
//! table instead of `kinetic` (`x = "..."` for G_xx, `"x y" = "..."` for G_xy; missing
//! off-diagonal entries are 0), a `[start]` point and optionally `[start.velocity]`
//! (dphi^a/dN; default the slow-roll attractor). It compiles with its geometry
//! ([`Layout::with_geometry`], [`fields`]).
//!
//! The stage in parts: [`spec`] (the model as written, TOML reading), [`params`] (parameter
//! values and the range), [`build`] (the compiled [`Model`] and [`Model::rebind`]),
//! [`layout`] (which tape output holds what) and [`metric`] (the kinetic part as a field-space
//! metric, evaluated and checked at a point). Every item is re-exported here, so that
//! `efold::model::ModelSpec` and the like name them directly.

pub mod build;
pub mod error;
pub mod fields;
pub mod layout;
pub mod metric;
pub mod params;
pub mod spec;

pub use build::Model;
pub use error::ModelError;
pub use layout::{Layout, MetricShape};
pub use metric::{Metric, MetricError, MetricValue};
pub use params::{ConstantError, ParamTable};
pub(crate) use spec::toml_message;
pub use spec::{FieldValue, MetricEntry, ModelParts, ModelSpec, Origin, ParamSpec, Side, Text};
