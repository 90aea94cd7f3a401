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
                self.broken = Some(
                    crate::analysis::error::ErrorKind::Rebound {
                        message: e.diagnostic.message.clone(),
                    }
                    .into(),
                );
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
        Ok(self
            .survey
            .get_or_init(|| branch_survey(&mut self.model.evaluator(), &iv)))
    }

    /// The branches, in ascending order of position.
    pub fn branches(&self) -> Result<&[Branch], AnalysisError> {
        Ok(&self.branch_survey()?.branches)
    }

    /// The minimum of V in the domain's interval ([`minimum_of_v`]), if there is one.
    pub fn minimum_of_v(&self) -> Result<Option<f64>, AnalysisError> {
        let iv = self.interval()?;
        Ok(*self
            .minimum
            .get_or_init(|| minimum_of_v(&mut self.model.evaluator(), &iv)))
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::drivers::predict::{predict, Prediction};
    use crate::model::{ModelSpec, Text};

    /// The order-2 pole in the field phi with the pole at phi = w, w = sqrt(6 alpha) a derived
    /// parameter, and the range [0, w] following it.
    fn pole_spec() -> ModelSpec {
        let mut spec = ModelSpec::inline("phi^2/(6*alpha)", Some("1/(1 - (phi/w)^2)^2"));
        spec.set_param("alpha", "1");
        spec.set_param("w", "sqrt(6*alpha)");
        spec.range = Some((Text::inline("lo", "0"), Text::inline("hi", "w")));
        spec
    }

    /// Every number of a prediction, as bits, and its verdict.
    fn bits(p: &Prediction) -> (Vec<(&'static str, u64)>, crate::drivers::predict::Verdict) {
        (
            p.numbers().into_iter().map(|(k, x)| (k, x.to_bits())).collect(),
            p.verdict,
        )
    }

    fn built_at(spec: &ModelSpec, alpha: f64, config: &Config) -> Result<Model, ModelError> {
        let mut spec = spec.clone();
        spec.set_param("alpha", &format!("{alpha:e}"));
        Model::build(&spec, config)
    }

    #[test]
    fn a_rebound_model_predicts_the_bits_of_a_fresh_build() {
        let config = Config::default();
        let spec = pole_spec();
        let model = Model::build(&spec, &config).unwrap();
        let mut prep = Prepared::new(&model);
        let opts = Options {
            n_stars: vec![50.0, 60.0],
            second_order: true,
            ..Default::default()
        };
        // alpha values whose `{:e}` text is not the shortest form of the value (1/3), far
        // from the start in both directions, and the start itself again at the end.
        for alpha in [1.0 / 3.0, 0.01, 2.5, 40.0, 1.0] {
            prep.rebind(&[("alpha", alpha)], &config).unwrap();
            let fresh = built_at(&spec, alpha, &config).unwrap();
            assert_eq!(prep.model().params, fresh.params, "alpha = {alpha}");
            assert_eq!(
                prep.model().params[1].to_bits(),
                (6.0 * alpha).sqrt().to_bits(),
                "the derived w followed alpha = {alpha}"
            );
            assert_eq!(prep.model().range, fresh.range, "alpha = {alpha}");
            let want = predict(&fresh, &opts, &config).unwrap();
            let got = prep.predict(&opts, &config).unwrap();
            assert_eq!(got.predictions.len(), 2);
            for (g, w) in got.predictions.iter().zip(&want.predictions) {
                assert_eq!(bits(g), bits(w), "alpha = {alpha}");
            }
            assert_eq!(got.warnings, want.warnings);
            assert_eq!(got.branch.branch, want.branch.branch);
            // the prepared analysis is reused, not changed, by a second use
            let again = prep.predict(&opts, &config).unwrap();
            assert_eq!(bits(&again.predictions[0]), bits(&want.predictions[0]));
            let (ins_got, ins_want) = (
                prep.inspect(&config, Some(4)).unwrap(),
                crate::drivers::inspect::inspect(&fresh, &config, Some(4)).unwrap(),
            );
            assert_eq!(
                serde_json::to_string(&ins_got).unwrap(),
                serde_json::to_string(&ins_want).unwrap(),
                "alpha = {alpha}"
            );
        }
    }

    #[test]
    fn what_is_kept_is_what_the_analyses_return() {
        let config = Config::default();
        let model = Model::build(&pole_spec(), &config).unwrap();
        let prep = Prepared::new(&model);
        let mut ev = model.evaluator();
        let domain = find_domain(&model, &mut ev).unwrap();
        assert_eq!(prep.domain().unwrap(), &domain);
        let iv = domain.interval;
        assert_eq!(prep.branch_survey().unwrap(), &branch_survey(&mut ev, &iv));
        assert_eq!(prep.minimum_of_v().unwrap(), minimum_of_v(&mut ev, &iv));
        assert_eq!(
            prep.negative_regions().unwrap(),
            negative_regions(&mut ev, &iv).as_slice()
        );
        // the pole at sqrt(6) is the top of the one branch, which rolls to the minimum at 0
        assert_eq!(prep.branches().unwrap().len(), 1);
        assert_eq!(prep.minimum_of_v().unwrap(), Some(0.0));
    }

    #[test]
    fn a_failed_rebind_says_what_a_failed_build_says_and_stops_the_analysis() {
        let config = Config::default();
        let spec = pole_spec();
        let model = Model::build(&spec, &config).unwrap();
        let mut prep = Prepared::new(&model);
        // alpha < 0: w = sqrt(6 alpha) is not a number, so the derived parameter fails.
        let fresh = built_at(&spec, -1.0, &config).unwrap_err();
        let rebound = prep.rebind(&[("alpha", -1.0)], &config).unwrap_err();
        assert_eq!(rebound.diagnostic.message, fresh.diagnostic.message);
        // no prediction from the values before the failed rebind
        let e = prep.predict(&Options::default(), &config).unwrap_err();
        assert_eq!(e.message, fresh.diagnostic.message);
        assert!(prep.inspect(&config, None).is_err());
        // a good rebind makes it usable again
        prep.rebind(&[("alpha", 2.0)], &config).unwrap();
        let want = predict(&built_at(&spec, 2.0, &config).unwrap(), &Options::default(), &config).unwrap();
        let got = prep.predict(&Options::default(), &config).unwrap();
        assert_eq!(bits(&got.predictions[1]), bits(&want.predictions[1]));
        // an unknown name is an error, and the model is unchanged
        assert!(prep.rebind(&[("beta", 1.0)], &config).is_err());
        assert!(prep.predict(&Options::default(), &config).is_err());
    }

    #[test]
    fn no_branch_on_the_start_side_is_an_error_not_a_panic() {
        // V falls toward the upper end of the given range, where V is lowest: the minimum is
        // that end, and no branch lies above it.
        let mut spec = ModelSpec::inline("2 - phi", None);
        spec.range = Some((Text::inline("lo", "0"), Text::inline("hi", "1")));
        spec.start = Some(crate::model::Side::Above);
        let model = Model::build(&spec, &Config::default()).unwrap();
        let e = predict(&model, &Options::default(), &Config::default()).unwrap_err();
        assert_eq!(
            e.message,
            "the model starts the field above the minimum of V (phi = 1), and no branch lies above it"
        );
        assert!(e.hints[0].contains("start = \"below\""), "{:?}", e.hints);
        // from below, the one branch is tried (where V = 2 - phi never ends inflation)
        spec.start = Some(crate::model::Side::Below);
        let model = Model::build(&spec, &Config::default()).unwrap();
        let e = predict(&model, &Options::default(), &Config::default()).unwrap_err();
        assert!(!e.message.contains("no branch lies"), "{}", e.message);
    }
}
