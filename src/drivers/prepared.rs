//! A prepared analysis: a compiled model with what every driver derives from it first (the
//! domain, its negative regions, the branch survey, the minimum of V), each computed once, on
//! first use, and kept. Rebinding the parameters recomputes them (again on first use) without
//! parsing or compiling V and K again, so a scan or a fit pays for the analysis of each
//! parameter point and nothing more, and a command that needs a prediction, an inspection and
//! a figure of one model surveys its domain once.

use crate::analysis::error::AnalysisError;
use crate::analysis::single::branches::{branch_survey, Branch, BranchSurvey};
use crate::analysis::single::domain::{find_domain, minimum_of_v, negative_regions, Domain, Interval};
use crate::config::Config;
use crate::drivers::inspect::Inspection;
use crate::drivers::predict::{Options, Report};
use crate::model::{Model, ModelError};
use std::borrow::Cow;
use std::cell::OnceCell;

/// A model and the analyses derived from it once: see the module documentation.
///
/// Every derived quantity is what the analysis function of the same name returns for the
/// model as it is now ([`find_domain`], [`branch_survey`] and [`minimum_of_v`] on the
/// domain's interval, [`negative_regions`]), bit for bit: the prepared analysis only keeps
/// them.
///
/// ```
/// use efold::config::Config;
/// use efold::drivers::prepared::Prepared;
/// use efold::model::{Model, ModelSpec};
/// let mut spec = ModelSpec::inline("m^2 * phi^2 / 2", None);
/// spec.set_param("m", "1");
/// let model = Model::build(&spec, &Config::default())?;
/// let mut prep = Prepared::new(&model);
/// let opts = efold::predict::Options::default();
/// let n_s = prep.predict(&opts, &Config::default()).unwrap().predictions[0].n_s;
/// prep.rebind(&[("m", 2.0)], &Config::default())?; // no parsing, no compiling
/// let again = prep.predict(&opts, &Config::default()).unwrap().predictions[0].n_s;
/// assert_eq!(n_s, again); // n_s of a monomial does not depend on its scale
/// # Ok::<(), efold::model::ModelError>(())
/// ```
#[derive(Debug, Clone)]
pub struct Prepared<'m> {
    model: Cow<'m, Model>,
    domain: OnceCell<Result<Domain, AnalysisError>>,
    negative_v: OnceCell<Vec<(f64, f64)>>,
    survey: OnceCell<BranchSurvey>,
    minimum: OnceCell<Option<f64>>,
    /// Why the model is not usable, after a rebind that failed.
    broken: Option<AnalysisError>,
}

impl<'m> Prepared<'m> {
    /// Prepares a borrowed model (the first [`Prepared::rebind`] takes a copy of it).
    pub fn new(model: &'m Model) -> Prepared<'m> {
        Prepared::from_cow(Cow::Borrowed(model))
    }

    /// Prepares a model it then owns.
    pub fn owned(model: Model) -> Prepared<'static> {
        Prepared::from_cow(Cow::Owned(model))
    }

    fn from_cow(model: Cow<'m, Model>) -> Prepared<'m> {
        Prepared {
            model,
            domain: OnceCell::new(),
            negative_v: OnceCell::new(),
            survey: OnceCell::new(),
            minimum: OnceCell::new(),
            broken: None,
        }
    }

    /// The model.
    pub fn model(&self) -> &Model {
        &self.model
    }

    /// New parameter values, as [`Model::rebind`] sets them (the same values, bit for bit, as
    /// `ModelSpec::set_param` with `{value:e}` and a new build); everything derived is
    /// dropped and recomputed on first use. On an error (an unknown name, a derived
    /// parameter or a range end that fails at these values) the error is returned, and every
    /// later analysis fails with its message until a rebind succeeds.
    pub fn rebind(&mut self, assignments: &[(&str, f64)], config: &Config) -> Result<(), ModelError> {
        self.domain = OnceCell::new();
        self.negative_v = OnceCell::new();
        self.survey = OnceCell::new();
        self.minimum = OnceCell::new();
        match self.model.to_mut().rebind(assignments, config) {
            Ok(()) => {
                self.broken = None;
                Ok(())
            }
            Err(e) => {
                self.broken = Some(crate::analysis::error::fail(e.diagnostic.message.clone(), &[]));
                Err(e)
            }
        }
    }

    /// The domain ([`find_domain`]); `negative_v` is left empty, as `find_domain` leaves it
    /// (see [`Prepared::negative_regions`]).
    pub fn domain(&self) -> Result<&Domain, AnalysisError> {
        if let Some(e) = &self.broken {
            return Err(e.clone());
        }
        self.domain
            .get_or_init(|| find_domain(&self.model, &mut self.model.evaluator()))
            .as_ref()
            .map_err(Clone::clone)
    }

    /// The interval of the domain.
    pub fn interval(&self) -> Result<Interval, AnalysisError> {
        Ok(self.domain()?.interval)
    }

    /// Where V < 0 inside the domain's interval ([`negative_regions`]).
    pub fn negative_regions(&self) -> Result<&[(f64, f64)], AnalysisError> {
        let iv = self.interval()?;
        Ok(self
            .negative_v
            .get_or_init(|| negative_regions(&mut self.model.evaluator(), &iv)))
    }

    /// The branch survey of the domain's interval ([`branch_survey`]).
    pub fn branch_survey(&self) -> Result<&BranchSurvey, AnalysisError> {
        let iv = self.interval()?;
        Ok(self.survey.get_or_init(|| branch_survey(&mut self.model.evaluator(), &iv)))
    }

    /// The branches, in ascending order of position.
    pub fn branches(&self) -> Result<&[Branch], AnalysisError> {
        Ok(&self.branch_survey()?.branches)
    }

    /// The minimum of V in the domain's interval ([`minimum_of_v`]), if there is one.
    pub fn minimum_of_v(&self) -> Result<Option<f64>, AnalysisError> {
        let iv = self.interval()?;
        Ok(*self.minimum.get_or_init(|| minimum_of_v(&mut self.model.evaluator(), &iv)))
    }

    /// The predictions ([`crate::drivers::predict::predict`]) from this analysis.
    pub fn predict(&self, opts: &Options, config: &Config) -> Result<Report, AnalysisError> {
        crate::drivers::predict::predict_prepared(self, opts, config)
    }

    /// The canonical analysis ([`crate::drivers::inspect::inspect`]) from this analysis;
    /// `table` asks for that many rows of (phi, chi, V).
    pub fn inspect(&self, config: &Config, table: Option<usize>) -> Result<Inspection, AnalysisError> {
        crate::drivers::inspect::inspect_prepared(self, config, table)
    }
}
