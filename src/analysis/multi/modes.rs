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
    /// The length of one wavenumber's part (Q~, D_N Q~, h~, h~').
    fn block(&self) -> usize {
        self.len() - 2 * self.n
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
        let curved = l.curved && l.riemann.iter().any(|r| *r != 0.0);
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

/// The right-hand side of the background with the modes of each ln k (one block of
/// [`Layout::block`] after the background per wavenumber), into dy: the geometry is
/// evaluated once for all of them.
fn rhs(
    flow: &mut Flow<'_>,
    sc: &mut Scratch,
    ln_ks: &[f64],
    nn: f64,
    y: &[f64],
    dy: &mut [f64],
) -> Result<(), AnalysisError> {
    let n = flow.n();
    let lay = Layout { n };
    let eps = flow.rhs_full(&y[..2 * n], &mut dy[..2 * n])?;
    let l = &flow.local;
    let pi = &y[n..2 * n];
    let h2 = l.v / (3.0 - eps);
    sc.fill(l, pi, eps, h2);
    let w = lay.block();
    for (j, ln_k) in ln_ks.iter().enumerate() {
        let z2 = (2.0 * (ln_k - nn)).exp() / h2;
        let at = 2 * n + j * w;
        mode_rhs(sc, n, eps, z2, &y[at..at + w], &mut dy[at..at + w]);
    }
    Ok(())
}

/// One wavenumber's block of the right-hand side (Q~, D_N Q~, h~, h~' from offset 0), with
/// z2 = (k/aH)^2 and the scratch filled at the background point.
fn mode_rhs(sc: &Scratch, n: usize, eps: f64, z2: f64, y: &[f64], dy: &mut [f64]) {
    let lay = Layout { n };
    let (q0, p0) = (lay.q() - 2 * n, lay.p() - 2 * n);
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
    let h0 = lay.h() - 2 * n;
    for i in 0..2 {
        dy[h0 + i] = y[h0 + 2 + i];
        dy[h0 + 2 + i] = -(3.0 - eps) * y[h0 + 2 + i] - z2 * y[h0 + i];
    }
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
    Ok(modes(flow, run, &[ln_k], limits)?[0])
}

/// The modes of several wavenumbers ln k (close together, as a stencil's), integrated as one
/// state on one background: each mode joins with its Bunch–Davies state where its own k/aH
/// falls to `limits.k_start`, lowest k first, so every mode starts exactly as it would alone,
/// and from then on the geometry is evaluated once a step for all of them (the step control
/// holds every mode to `mode_rtol`). Spectra in the order of `ln_ks`.
pub fn modes(
    flow: &mut Flow<'_>,
    run: &Run,
    ln_ks: &[f64],
    limits: &MultiLimits,
) -> Result<Vec<ModeSpectra>, AnalysisError> {
    let n = flow.n();
    let lay = Layout { n };
    let mut order: Vec<usize> = (0..ln_ks.len()).collect();
    order.sort_by(|&i, &j| ln_ks[i].total_cmp(&ln_ks[j]));
    let mut joined: Vec<f64> = Vec::with_capacity(ln_ks.len());
    let (mut t, mut y, mut steps) = (f64::NAN, Vec::new(), 0);
    let mut amplitude = 0.0;
    for &j in &order {
        let (nj, y_bg) = crossing(flow, run, ln_ks[j], limits.k_start, limits)?;
        if !joined.is_empty() && nj > t {
            let seg = Segment {
                ln_ks: &joined,
                amplitude,
                limits,
            };
            let end = seg.run(flow, t, &y, nj, ln_ks[j].exp())?;
            if end.event {
                return Err(ErrorKind::StartsTooLate {
                    kappa: ln_ks[j].exp(),
                    k_over_ah: limits.k_start,
                }
                .into());
            }
            (t, y, steps) = (end.t, end.y, steps + end.steps);
        }
        let l = flow.at(&y_bg[..n])?;
        let h = (l.v / (3.0 - super::background::eps_h(l, &y_bg[n..]))).sqrt();
        let z = (ln_ks[j] - nj - h.ln()).exp();
        let start = bunch_davies(l, &y_bg, z)?;
        if joined.is_empty() {
            (t, y, amplitude) = (nj, y_bg, h / (2.0 * PI));
        }
        y.extend_from_slice(&start[2 * n..]);
        joined.push(ln_ks[j]);
    }
    let kappa = ln_ks[order[0]].exp();
    let seg = Segment {
        ln_ks: &joined,
        amplitude,
        limits,
    };
    let end = seg.run(flow, t, &y, run.n_end + 5.0, kappa)?;
    if !end.event {
        return Err(ErrorKind::ModeExitsLate { kappa, k_over_ah: 0.0 }.into());
    }
    let l = flow.at(&end.y[..n])?;
    let w = lay.block();
    let mut out = vec![None; ln_ks.len()];
    for (m, &j) in order.iter().enumerate() {
        let one = [&end.y[..2 * n], &end.y[2 * n + m * w..2 * n + (m + 1) * w]].concat();
        out[j] = Some(spectra(l, &one, steps + end.steps));
    }
    Ok(out.into_iter().map(|s| s.expect("every mode joined")).collect())
}

/// One stretch of the joint integration of the modes of `ln_ks` (in the order their blocks
/// follow the background), to the end of inflation or a time.
struct Segment<'a> {
    ln_ks: &'a [f64],
    /// H/(2 pi) where the first mode starts: the scale of the modes' absolute tolerance.
    amplitude: f64,
    limits: &'a MultiLimits,
}

impl Segment<'_> {
    /// From (t0, y0) to t1 or the end of inflation (eps_H = 1), whichever comes first;
    /// failures name the wavenumber `kappa`.
    fn run(
        &self,
        flow: &mut Flow<'_>,
        t0: f64,
        y0: &[f64],
        t1: f64,
        kappa: f64,
    ) -> Result<super::ode::End, AnalysisError> {
        let n = flow.n();
        let limits = self.limits;
        let mut atol = vec![1e-3 * limits.bg_rtol; y0.len()];
        for a in atol.iter_mut().skip(2 * n) {
            *a = 1e-3 * self.amplitude * limits.mode_rtol;
        }
        let tol = Tolerances {
            rtol: limits.mode_rtol,
            atol,
            h_max: limits.free_step,
            max_steps: 1_000_000,
        };
        let flow = RefCell::new(flow);
        let mut sc = Scratch::new(n);
        let ln_ks = self.ln_ks;
        integrate_extrapolated(
            &mut |nn: f64, y: &[f64], dy: &mut [f64]| rhs(&mut flow.borrow_mut(), &mut sc, ln_ks, nn, y, dy),
            t0,
            y0,
            t1,
            &tol,
            &mut |_, y| Some(flow.borrow().eps_last(&y[..2 * n]) - 1.0),
        )
        .map_err(|f| match f {
            super::ode::Failure::Rhs(e) => e,
            super::ode::Failure::Numeric(error) => ErrorKind::ModeIntegration { kappa, error }.into(),
        })
    }
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
