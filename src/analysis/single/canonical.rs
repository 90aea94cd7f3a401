//! The one field in canonical variables: derivatives with respect to the canonical field chi
//! (d chi / d phi = sqrt(K)) and the canonical map chi(phi) with its inverse. Units: reduced
//! Planck units throughout (M_p = 1).

use crate::analysis::single::domain::sqrt_k_batch;
use crate::config::Config;
use crate::language::tape::{jet_derivative, jet_div, Evaluator, Jet};
use crate::model::{Layout, Model};
use crate::numerics::quad::{gauss_kronrod_batch, tanh_sinh};
use crate::numerics::roots::safeguarded_newton;
use crate::numerics::{Estimate, NumericError};

/// Where the one-field evaluators this module takes hold V, K, sqrt(K) and dV/dphi.
const OUT: Layout = Layout::ONE_FIELD;

/// V and its first four derivatives with respect to chi, at a point: `[V, V_chi, V_chichi,
/// V_chichichi, V_chi^4]`, from the jets of V and sqrt(K) by the chain rule
/// d/dchi = K^(-1/2) d/dphi (no inversion of chi(phi) needed). Entries above `order` are zero.
pub fn chi_derivatives(ev: &mut Evaluator<'_>, phi: f64, order: usize) -> [f64; 5] {
    let order = order.min(4);
    ev.eval_jet(phi, order);
    let v = *ev.jet_output(OUT.v());
    let s = *ev.jet_output(OUT.sqrt_k());
    chain_rule(&v, &s, order)
}

/// [`chi_derivatives`] of V scaled by the exact power of two that brings V at `phi` to [1, 2)
/// ([`crate::numerics::pow2_normaliser`]), and that factor. The chain rule is linear in V, so
/// the scaled derivatives are the unscaled ones times the factor, bit for bit wherever those
/// are normal numbers; ratios such as V_chi / V keep their bits, and products such as
/// V_chi V_chichichi no longer underflow or overflow when V itself is tiny or huge.
pub fn chi_derivatives_normalised(ev: &mut Evaluator<'_>, phi: f64, order: usize) -> ([f64; 5], f64) {
    let order = order.min(4);
    ev.eval_jet(phi, order);
    let mut v = *ev.jet_output(OUT.v());
    let s = *ev.jet_output(OUT.sqrt_k());
    let factor = crate::numerics::pow2_normaliser(v[0]);
    for c in v.iter_mut() {
        *c *= factor;
    }
    (chain_rule(&v, &s, order), factor)
}

/// The chain rule on truncated Taylor series: W_0 = V, W_{k+1} = (d W_k / d phi) / s, each
/// step losing one order; the tape's own jet arithmetic ([`jet_derivative`], [`jet_div`]).
pub fn chain_rule(v: &Jet, s: &Jet, order: usize) -> [f64; 5] {
    let mut out = [0.0; 5];
    let mut w = *v;
    out[0] = w[0];
    for k in 1..order.min(4) + 1 {
        let n = order - k; // orders left after this derivative
        w = jet_div(&jet_derivative(&w, n), s, n);
        out[k] = w[0];
    }
    out
}

/// The canonical map: chi(phi) = integral of sqrt(K) from a reference point.
pub struct CanonicalMap<'m> {
    ev: Evaluator<'m>,
    /// The field value where chi = 0.
    pub phi_ref: f64,
    tol: crate::numerics::quad::Tolerance,
}

impl<'m> CanonicalMap<'m> {
    /// A map with chi = 0 at `phi_ref`.
    pub fn new(model: &'m Model, phi_ref: f64, config: &Config) -> CanonicalMap<'m> {
        CanonicalMap {
            ev: model.evaluator(),
            phi_ref,
            tol: config.quad,
        }
    }

    /// chi between two points of the interior (adaptive Gauss–Kronrod, relative tolerance
    /// `config.quad.rel`), with its error estimate.
    pub fn between(&mut self, a: f64, b: f64) -> Result<Estimate, NumericError> {
        let ev = &mut self.ev;
        gauss_kronrod_batch(|xs, ys| sqrt_k_batch(ev, xs, ys), a, b, &self.tol)
    }

    /// chi(phi), measured from `phi_ref`.
    pub fn chi(&mut self, phi: f64) -> Result<Estimate, NumericError> {
        self.between(self.phi_ref, phi)
    }

    /// chi from `phi_ref` to a finite end of the interval where sqrt(K) may be singular
    /// (double-exponential rule); `Ok(None)` if the integral diverges (an infinite distance).
    pub fn to_end(&mut self, end: f64) -> Result<Estimate, NumericError> {
        let ev = &mut self.ev;
        let (a, b) = (self.phi_ref.min(end), self.phi_ref.max(end));
        let r = tanh_sinh(
            |x, _| {
                ev.eval(x);
                ev.output(OUT.sqrt_k())
            },
            a,
            b,
            &self.tol,
        )?;
        let sign = if end >= self.phi_ref { 1.0 } else { -1.0 };
        Ok(Estimate {
            value: sign * r.value,
            error: r.error,
        })
    }

    /// The inverse map phi(chi) inside (lo, hi), by Newton's method on chi(phi) - target with
    /// d chi/d phi = sqrt(K), safeguarded by bisection.
    pub fn phi_of_chi(&mut self, target: f64, lo: f64, hi: f64) -> Result<Estimate, NumericError> {
        // Expand a bracket from phi_ref toward the side of the target.
        let dir = if target >= 0.0 { 1.0 } else { -1.0 };
        let limit = if dir > 0.0 { hi } else { lo };
        let mut a = self.phi_ref;
        let mut chi_a = 0.0;
        let mut step = 0.1 * self.phi_ref.abs().max(1.0);
        let mut b;
        let mut chi_b;
        loop {
            b = a + dir * step;
            if (dir > 0.0 && b >= limit) || (dir < 0.0 && b <= limit) {
                b = if limit.is_finite() { a + 0.5 * (limit - a) } else { b };
            }
            if step > 1e12 || (b - a).abs() < 1e-15 * b.abs().max(1.0) {
                return Err(NumericError::NoConvergence {
                    what: "bracketing phi(chi): chi does not reach the target inside the interval",
                    estimate: b,
                    error: f64::INFINITY,
                    iterations: 0,
                });
            }
            chi_b = chi_a + self.between(a, b)?.value;
            if (chi_b - target) * dir >= 0.0 {
                break;
            }
            a = b;
            chi_a = chi_b;
            step *= 2.0;
        }
        let (base, chi_base) = (a, chi_a);
        let tol = self.tol;
        let ev = &mut self.ev;
        let mut chi_at = |x: f64| {
            let r = gauss_kronrod_batch(|ts, ys| sqrt_k_batch(ev, ts, ys), base, x, &tol);
            let c = r.map(|e| e.value).unwrap_or(f64::NAN);
            ev.eval(x);
            (chi_base + c - target, ev.output(OUT.sqrt_k()))
        };
        safeguarded_newton(
            &mut chi_at,
            a.min(b),
            a.max(b),
            0.5 * (a + b),
            1e-14 * b.abs().max(1.0),
            100,
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::language::tape::JET_LEN;

    #[test]
    fn chain_rule_on_a_canonical_field_is_plain_differentiation() {
        // s = 1: the chi-derivatives are the phi-derivatives, V = exp(phi) at 0.
        let mut v = [0.0; JET_LEN];
        let mut f = 1.0;
        for (k, c) in v.iter_mut().enumerate().take(5) {
            if k > 0 {
                f *= k as f64;
            }
            *c = 1.0 / f;
        }
        let mut s = [0.0; JET_LEN];
        s[0] = 1.0;
        assert_eq!(chain_rule(&v, &s, 4), [1.0, 1.0, 1.0, 1.0, 1.0]);
    }
}
