//! The multi-field Mukhanov–Sasaki modes in flat gauge, covariantly (tests/reference/
//! MULTIFIELD.md; Sasaki & Stewart 1996, covariant form Gong & Tanaka 2011, from memory):
//!
//! ```text
//! D_N D_N Q^a + (3 - eps) D_N Q^a + (k/aH)^2 Q^a + (M^a_b / H^2) Q^b = 0,
//! M^a_b/H^2 = G^ac V_;cb/H^2 - R^a_cdb pi^c pi^d + (3 - eps) pi^a pi_b + (V^a pi_b + pi^a V_b)/H^2,
//! ```
//!
//! with D_N Q^a = dQ^a/dN + Gamma^a_bc pi^b Q^c. The n x n mode matrix Q^a_alpha (alpha the
//! n independent Bunch–Davies vacua along an orthonormal frame e, e e^T = G^-1) is stored as
//! Q~ = sqrt(k^3/2 pi^2) Q, so that spectra are sums of squares: columns 0..n-1 the real
//! parts, n..2n-1 the imaginary parts. Each mode is integrated with its own copy of the
//! background from k/aH = k_start to eps_H = 1; there zeta_alpha = pi_a Q^a_alpha/(2 eps),
//! P_zeta = sum |zeta_alpha|^2, and the tensor h'' + (3 - eps) h' + (k/aH)^2 h = 0 gives
//! P_t = 8 |h~|^2 (two polarisations, h normalised like a massless field; common practice).
//! Isocurvature: S_alpha = s_a Q^a_alpha/sqrt(2 eps) with the normal s of
//! [`super::trajectory::normal`]; P_iso is the whole part of Q normal to T (the same for two
//! fields), P_cross = sum zeta_alpha S_alpha (two fields).
//!
//! The modes are integrated by extrapolation steps ([`super::ode::integrate_extrapolated`],
//! error of order 16) at `mode_rtol`: some 150 steps per mode where the fifth-order pair needs
//! some 8 500 at the same tolerance.
//!
//! Wavenumbers: a = e^N with N counted from the start of the background, so ln k =
//! ln(k/aH) + N + ln H; only k/k_* enters the observables.

use super::background::{failure, quad_form, Flow, Run};
use super::ode::{integrate, integrate_extrapolated, Tolerances};
use super::Local;
use crate::analysis::error::{AnalysisError, ErrorKind};
use crate::config::MultiLimits;
use nalgebra::DMatrix;
use std::cell::RefCell;
use std::f64::consts::PI;

/// M^a_b/H^2 of the flat-gauge equation at a point with velocity pi (module docs).
pub fn mass_matrix(l: &Local, pi: &[f64], eps: f64, h2: f64) -> DMatrix<f64> {
    let n = l.n();
    let hess = l.covariant_hessian();
    let gi_hess = &l.g_inv * hess;
    let pil: Vec<f64> = (0..n).map(|a| (0..n).map(|b| l.g[(a, b)] * pi[b]).sum()).collect();
    let vup: Vec<f64> = (0..n)
        .map(|a| (0..n).map(|b| l.g_inv[(a, b)] * l.dv[b]).sum())
        .collect();
    DMatrix::from_fn(n, n, |a, b| {
        let mut curv = 0.0;
        for c in 0..n {
            for d in 0..n {
                curv += l.riemann(a, c, d, b) * pi[c] * pi[d];
            }
        }
        (gi_hess[(a, b)] + vup[a] * pil[b] + pi[a] * l.dv[b]) / h2 + (3.0 - eps) * pi[a] * pil[b] - curv
    })
}

/// The spectra of one mode at the end of inflation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ModeSpectra {
    /// P_zeta.
    pub p_zeta: f64,
    /// P_t.
    pub p_t: f64,
    /// P_iso (the part of Q normal to the trajectory).
    pub p_iso: f64,
    /// P_cross (two fields).
    pub p_cross: Option<f64>,
    /// Accepted integrator steps.
    pub steps: usize,
}

/// The large-argument Hankel start F = z (1 + i A1/x - A2/x^2), dF/dN (own derivation, as in
/// tests/reference/MULTIFIELD.md: x = z/(1 - eps), A2 = A1 (A1 - 1)/2, d ln f/dN = -1; exact in
/// de Sitter for a massless field): (Re F, Im F, Re dF, Im dF).
fn hankel(a1: &DMatrix<f64>, z: f64, eps: f64) -> [DMatrix<f64>; 4] {
    let n = a1.nrows();
    let id = DMatrix::<f64>::identity(n, n);
    let a2 = 0.5 * a1 * (a1 - &id);
    let x = z / (1.0 - eps);
    let fr = &id - &a2 / (x * x);
    let fi = a1 / x;
    let dfr = -&fr + z * &fi - 2.0 * (1.0 - eps) * &a2 / (x * x);
    let dfi = -&fi - z * &fr + (1.0 - eps) * a1 / x;
    [fr * z, fi * z, dfr * z, dfi * z]
}

/// Where the layout of a mode state puts its parts: background 0..2n, Q, D_N Q, h, h'.
struct Layout {
    n: usize,
}

impl Layout {
    fn q(&self) -> usize {
        2 * self.n
    }
    fn p(&self) -> usize {
        2 * self.n + 2 * self.n * self.n
    }
    fn h(&self) -> usize {
        2 * self.n + 4 * self.n * self.n
    }
    fn len(&self) -> usize {
        self.h() + 4
    }
}

/// The Bunch–Davies start of the modes at a background state y with z = k/aH: the full
/// state (background, Q~, D_N Q~, h~, h~').
fn bunch_davies(l: &Local, y: &[f64], z: f64) -> Result<Vec<f64>, AnalysisError> {
    let n = l.n();
    let lay = Layout { n };
    let pi = &y[n..2 * n];
    let eps = super::background::eps_h(l, pi);
    let h2 = l.v / (3.0 - eps);
    let m = mass_matrix(l, pi, eps, h2);
    let e = l
        .g_inv
        .clone()
        .cholesky()
        .ok_or_else(|| AnalysisError::from(ErrorKind::MultiMetricNotPositive { at: y[..n].to_vec() }))?
        .l();
    let e_inv = e.clone().try_inverse().unwrap_or_else(|| DMatrix::zeros(n, n));
    let mf = &e_inv * m * &e;
    let a1 = 0.5 * ((2.0 - eps) * DMatrix::identity(n, n) - mf) / ((1.0 - eps) * (1.0 - eps));
    let [fr, fi, dfr, dfi] = hankel(&a1, z, eps);
    let c = h2.sqrt() / (2.0 * PI);
    let mut out = vec![0.0; lay.len()];
    out[..2 * n].copy_from_slice(y);
    for (block, (re, im)) in [(lay.q(), (&fr, &fi)), (lay.p(), (&dfr, &dfi))] {
        let (re, im) = (c * &e * re, c * &e * im);
        for a in 0..n {
            for al in 0..n {
                out[block + a * 2 * n + al] = re[(a, al)];
                out[block + a * 2 * n + n + al] = im[(a, al)];
            }
        }
    }
    let a1t = DMatrix::from_element(1, 1, 0.5 * (2.0 - eps) / ((1.0 - eps) * (1.0 - eps)));
    let [tr, ti, dtr, dti] = hankel(&a1t, z, eps);
    out[lay.h()..].copy_from_slice(&[c * tr[(0, 0)], c * ti[(0, 0)], c * dtr[(0, 0)], c * dti[(0, 0)]]);
    Ok(out)
}

/// Scratch of one mode's right-hand side (no allocation per evaluation): M^a_b/H^2 and
/// A^a_c = Gamma^a_cb pi^b, row by row.
struct Scratch {
    m: Vec<f64>,
    a: Vec<f64>,
    hess: Vec<f64>,
    pil: Vec<f64>,
    vup: Vec<f64>,
}

impl Scratch {
    fn new(n: usize) -> Scratch {
        Scratch {
            m: vec![0.0; n * n],
            a: vec![0.0; n * n],
            hess: vec![0.0; n * n],
            pil: vec![0.0; n],
            vup: vec![0.0; n],
        }
    }

    /// M^a_b/H^2 (as [`mass_matrix`], the curvature term skipped where R^a_bcd is zero) and
    /// A^a_c at a point.
    fn fill(&mut self, l: &Local, pi: &[f64], eps: f64, h2: f64) {
        let n = l.n();
        for a in 0..n {
            self.pil[a] = (0..n).map(|b| l.g[(a, b)] * pi[b]).sum();
            self.vup[a] = (0..n).map(|b| l.g_inv[(a, b)] * l.dv[b]).sum();
            for b in 0..n {
                self.hess[a * n + b] = l.ddv[(a, b)] - (0..n).map(|c| l.gamma(c, a, b) * l.dv[c]).sum::<f64>();
                self.a[a * n + b] = (0..n).map(|c| l.gamma(a, b, c) * pi[c]).sum();
            }
        }
        let curved = l.riemann.iter().any(|r| *r != 0.0);
        for a in 0..n {
            for b in 0..n {
                let gh: f64 = (0..n).map(|c| l.g_inv[(a, c)] * self.hess[c * n + b]).sum();
                let mut curv = 0.0;
                if curved {
                    for c in 0..n {
                        for d in 0..n {
                            curv += l.riemann(a, c, d, b) * pi[c] * pi[d];
                        }
                    }
                }
                self.m[a * n + b] =
                    (gh + self.vup[a] * self.pil[b] + pi[a] * l.dv[b]) / h2 + (3.0 - eps) * pi[a] * self.pil[b] - curv;
            }
        }
    }
}

/// The right-hand side of the background with the modes of ln k, into dy.
fn rhs(
    flow: &mut Flow<'_>,
    sc: &mut Scratch,
    ln_k: f64,
    nn: f64,
    y: &[f64],
    dy: &mut [f64],
) -> Result<(), AnalysisError> {
    let n = flow.n();
    let lay = Layout { n };
    let eps = flow.rhs(&y[..2 * n], &mut dy[..2 * n])?;
    let l = &flow.local;
    let pi = &y[n..2 * n];
    let h2 = l.v / (3.0 - eps);
    let z2 = (2.0 * (ln_k - nn)).exp() / h2;
    sc.fill(l, pi, eps, h2);
    let (q0, p0) = (lay.q(), lay.p());
    let w = 2 * n;
    for a in 0..n {
        for col in 0..w {
            let (mut aq, mut ap, mut mq) = (0.0, 0.0, 0.0);
            for b in 0..n {
                let (qb, pb) = (y[q0 + b * w + col], y[p0 + b * w + col]);
                aq += sc.a[a * n + b] * qb;
                ap += sc.a[a * n + b] * pb;
                mq += sc.m[a * n + b] * qb;
            }
            let (q, p) = (y[q0 + a * w + col], y[p0 + a * w + col]);
            dy[q0 + a * w + col] = p - aq;
            dy[p0 + a * w + col] = -(3.0 - eps) * p - z2 * q - mq - ap;
        }
    }
    let h0 = lay.h();
    for i in 0..2 {
        dy[h0 + i] = y[h0 + 2 + i];
        dy[h0 + 2 + i] = -(3.0 - eps) * y[h0 + 2 + i] - z2 * y[h0 + i];
    }
    Ok(())
}

/// (N, background state) where k/aH falls to `target` on a run.
pub fn crossing(
    flow: &mut Flow<'_>,
    run: &Run,
    ln_k: f64,
    target: f64,
    limits: &MultiLimits,
) -> Result<(f64, Vec<f64>), AnalysisError> {
    let kappa_of = |ln_k: f64| ln_k.exp();
    let gap = |flow: &mut Flow<'_>, nn: f64, y: &[f64]| flow.ln_h(y).map(|lh| ln_k - nn - lh - target.ln());
    // k/aH falls monotonically while eps_H < 1 (d ln(aH)/dN = 1 - eps_H): bisect the
    // checkpoints for the first one past the target.
    let cps = &run.checkpoints;
    let (mut lo, mut hi) = (0usize, cps.len());
    while lo < hi {
        let mid = (lo + hi) / 2;
        if gap(flow, cps[mid].0, &cps[mid].1)? < 0.0 {
            hi = mid;
        } else {
            lo = mid + 1;
        }
    }
    let j = (lo < cps.len()).then_some(lo);
    let j = match j {
        Some(0) => {
            return Err(ErrorKind::StartsTooLate {
                kappa: kappa_of(ln_k),
                k_over_ah: target,
            }
            .into())
        }
        Some(j) => j,
        None => {
            return Err(ErrorKind::ModeNeverReaches {
                kappa: kappa_of(ln_k),
                k_over_ah: target,
            }
            .into())
        }
    };
    let (n0, y0) = &run.checkpoints[j - 1];
    let flow = RefCell::new(flow);
    let end = integrate(
        &mut |_: f64, y: &[f64], dy: &mut [f64]| flow.borrow_mut().rhs(y, dy).map(|_| ()),
        *n0,
        y0,
        run.checkpoints[j].0,
        &super::background::tolerances(limits),
        &mut |nn, y| gap(&mut flow.borrow_mut(), nn, y).ok(),
        &mut |_, _| {},
    )
    .map_err(failure)?;
    Ok((end.t, end.y))
}

/// One mode of wavenumber ln k, from k/aH = `limits.k_start` to the end of inflation.
pub fn mode(flow: &mut Flow<'_>, run: &Run, ln_k: f64, limits: &MultiLimits) -> Result<ModeSpectra, AnalysisError> {
    let n = flow.n();
    let lay = Layout { n };
    let (n0, y_bg) = crossing(flow, run, ln_k, limits.k_start, limits)?;
    let l = flow.at(&y_bg[..n])?;
    let h = (l.v / (3.0 - super::background::eps_h(l, &y_bg[n..]))).sqrt();
    let z = (ln_k - n0 - h.ln()).exp();
    let y0 = bunch_davies(l, &y_bg, z)?;
    let mut atol = vec![1e-3 * limits.bg_rtol; lay.len()];
    for a in atol.iter_mut().skip(2 * n) {
        *a = 1e-3 * h / (2.0 * PI) * limits.mode_rtol;
    }
    let tol = Tolerances {
        rtol: limits.mode_rtol,
        atol,
        h_max: limits.free_step,
        max_steps: 1_000_000,
    };
    let flow = RefCell::new(flow);
    let mut sc = Scratch::new(n);
    let end = integrate_extrapolated(
        &mut |nn: f64, y: &[f64], dy: &mut [f64]| rhs(&mut flow.borrow_mut(), &mut sc, ln_k, nn, y, dy),
        n0,
        &y0,
        run.n_end + 5.0,
        &tol,
        &mut |_, y| Some(flow.borrow().eps_last(&y[..2 * n]) - 1.0),
    )
    .map_err(|f| match f {
        super::ode::Failure::Rhs(e) => e,
        super::ode::Failure::Numeric(error) => ErrorKind::ModeIntegration {
            kappa: ln_k.exp(),
            error,
        }
        .into(),
    })?;
    if !end.event {
        return Err(ErrorKind::ModeExitsLate {
            kappa: ln_k.exp(),
            k_over_ah: 0.0,
        }
        .into());
    }
    let flow = flow.into_inner();
    let l = flow.at(&end.y[..n])?;
    Ok(spectra(l, &end.y, end.steps))
}

/// The spectra of a mode state at the end of inflation.
fn spectra(l: &Local, y: &[f64], steps: usize) -> ModeSpectra {
    let n = l.n();
    let lay = Layout { n };
    let w = 2 * n;
    let pi = &y[n..2 * n];
    let eps = super::background::eps_h(l, pi);
    let (t, _) = super::trajectory::tangent(l, pi);
    let pil: Vec<f64> = (0..n).map(|a| (0..n).map(|b| l.g[(a, b)] * pi[b]).sum()).collect();
    let tl: Vec<f64> = (0..n).map(|a| (0..n).map(|b| l.g[(a, b)] * t[b]).sum()).collect();
    let q = |a: usize, col: usize| y[lay.q() + a * w + col];
    let s = (n == 2).then(|| super::trajectory::normal(l, &t));
    let (mut p_zeta, mut p_iso, mut p_cross) = (0.0, 0.0, 0.0);
    for col in 0..w {
        let qc: Vec<f64> = (0..n).map(|a| q(a, col)).collect();
        let zeta = (0..n).map(|a| pil[a] * qc[a]).sum::<f64>() / (2.0 * eps);
        p_zeta += zeta * zeta;
        let along = (0..n).map(|a| tl[a] * qc[a]).sum::<f64>();
        let perp: Vec<f64> = (0..n).map(|a| qc[a] - t[a] * along).collect();
        p_iso += quad_form(&l.g, &perp, &perp) / (2.0 * eps);
        if let Some(s) = &s {
            let sq = quad_form(&l.g, s, &qc) / (2.0 * eps).sqrt();
            p_cross += zeta * sq;
        }
    }
    let h0 = lay.h();
    ModeSpectra {
        p_zeta,
        p_t: 8.0 * (y[h0] * y[h0] + y[h0 + 1] * y[h0 + 1]),
        p_iso,
        p_cross: s.map(|_| p_cross),
        steps,
    }
}

/// n_s - 1 and alpha_s (or n_t) from ln P on five points ln k_* + (j - 2) h (five-point
/// stencils, error O(h^4); common practice).
pub fn stencil(ln_p: &[f64; 5], h: f64) -> (f64, f64) {
    crate::analysis::perturbations::tilts(ln_p, h)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// In de Sitter (eps = 0) a massless mode has A1 = 1, A2 = 0: F = z (1 + i/z), and
    /// dF/dN = z (-(1 + i z)(1 + i/z) + i/z) (own derivation from the exact massless solution
    /// Q ~ (1 + i/x) e^{ix} / a with x = z = k/aH).
    #[test]
    fn hankel_start_is_exact_for_a_massless_field_in_de_sitter() {
        let z = 7.0;
        let [fr, fi, dfr, dfi] = hankel(&DMatrix::from_element(1, 1, 1.0), z, 0.0);
        assert!((fr[(0, 0)] - z).abs() < 1e-14 && (fi[(0, 0)] - 1.0).abs() < 1e-14);
        // -(1 + i z)(1 + i/z) + i/z = -(1 - 1) - i (z + 1/z) + i/z = -i z
        assert!(
            dfr[(0, 0)].abs() < 1e-12 && (dfi[(0, 0)] + z * z).abs() < 1e-12,
            "{dfr} {dfi}"
        );
    }
}
