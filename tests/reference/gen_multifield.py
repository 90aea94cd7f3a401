#!/usr/bin/env python3
"""Reference multi-field predictions: exact background and Mukhanov-Sasaki modes, delta-N.

Needs: Python 3 with numpy, scipy, sympy and mpmath. In a virtual environment:

    python3 -m venv /work/venv-ref && /work/venv-ref/bin/pip install numpy scipy sympy mpmath
    /work/venv-ref/bin/python tests/reference/gen_multifield.py > tests/reference/multifield.json

One process, one core. All models with their check runs take about twelve minutes; the
committed JSON was made model by model and joined (same numbers):

    for m in A B C D E F checks; do
        /work/venv-ref/bin/python tests/reference/gen_multifield.py $m > /tmp/mf_$m.json
    done
    /work/venv-ref/bin/python tests/reference/gen_multifield.py --merge /tmp/mf_*.json \
        > tests/reference/multifield.json

(`checks` is the power-law test of the mode equations, the test of the curvature term on the
Poincare disk and the closed-form pole check.)

Everything here is computed from the equations written below, in the original field
coordinates, with every geometric quantity derived by sympy from the V and G as written; see
MULTIFIELD.md beside this file for the models and the accuracy of each number.

Units and conventions: reduced Planck units (M_p = 1); L = 1/2 G_ab dphi^a dphi^b - V; N is the
number of e-folds counted forward in time; pi^a = dphi^a/dN; N_* counts back from the end of
inflation, eps = 1.

Equations (reference beside each use below):
  background  eps = G_ab pi^a pi^b / 2,  H^2 = V/(3 - eps),
              D_N pi^a = dpi^a/dN + Gamma^a_bc pi^b pi^c = -(3 - eps)(pi^a + G^ab V_b/V)
              (Sasaki & Stewart, Prog. Theor. Phys. 95 (1996) 71, written in e-folds; from memory)
  modes       D_N D_N Q^a + (3 - eps) D_N Q^a + (k/aH)^2 Q^a + (M^a_b/H^2) Q^b = 0,
              M^a_b/H^2 = G^ac V_;cb/H^2 - R^a_cdb pi^c pi^d + (3 - eps) pi^a pi_b
                          + (V^a pi_b + pi^a V_b)/H^2
              (Sasaki & Stewart 1996; covariant form Gong & Tanaka, JCAP 03 (2011) 015; from
              memory; the e-fold form and the signs re-derived here, see `mass_matrix`)
  spectra     zeta_alpha = pi_a Q^a_alpha/(2 eps), P_zeta = k^3/(2 pi^2) sum_alpha |zeta_alpha|^2
              at the end of inflation (common practice); tensors h'' + (3 - eps) h' +
              (k/aH)^2 h = 0, P_t = 2 x 4 x k^3/(2 pi^2) |h|^2 (see `tensor_bd`);
              k_* = a_* H_* at N_* before the end; n_s - 1, alpha_s, n_t from the five-point
              stencil in ln k (step 0.05) on ln P; r = P_t/P_zeta at k_*.
  isocurvature  (two fields) s^a = T^a turned by +90 degrees in the (x, y) plane, T = pi/|pi|,
              both at the end of inflation; S_alpha = s_a Q^a_alpha/sqrt(2 eps) (the same
              normalisation as zeta = T_a Q^a/sqrt(2 eps)); P_iso = k^3/(2 pi^2) sum |S_alpha|^2,
              P_cross = k^3/(2 pi^2) Re sum zeta_alpha S_alpha^*, cross_correlation =
              P_cross/sqrt(P_iso P_zeta) (common practice). With more fields: P_iso_total, the
              same with the whole part of Q normal to T.
  modes start at k/aH = 100 (`bunch_davies`, with the first two Hankel terms), and each mode
              is integrated with its own copy of the background from there to eps = 1.
"""
import json
import math
import os
import sys
import time

import mpmath as mp
import numpy as np
import sympy as sp
from scipy.integrate import solve_ivp
from scipy.optimize import brentq, minimize_scalar

TWO_PI = 2.0 * math.pi

# Tolerances of the reference run and of the check run ("halved").
TOL = {"bg_rtol": 1e-12, "mode_rtol": 1e-11, "z0": 100.0}
TOL_HALF = {"bg_rtol": 5e-13, "mode_rtol": 5e-12, "z0": 100.0}
TOL_Z1000 = {"bg_rtol": 1e-12, "mode_rtol": 1e-11, "z0": 1000.0}
STEP = 0.05  # step in ln k of the five-point stencil
N_STARS = (50.0, 55.0, 60.0)


# ----------------------------------------------------------------------------------------------
# Models: sympy expressions for V and G, compiled to one numpy function returning the non-zero
# entries of V, V_a, V_ab, G_ab, G^ab, Gamma^a_bc and R^a_bcd.
# ----------------------------------------------------------------------------------------------

class Model:
    def __init__(self, name, fields, V, G, start, notes=""):
        self.name = name
        self.X = list(fields)
        self.n = n = len(fields)
        self.V = V
        self.G = G
        self.notes = notes
        X = self.X
        Gi = G.inv() if not G.is_diagonal() else sp.diag(*[1 / G[i, i] for i in range(n)])
        dV = [sp.diff(V, x) for x in X]
        ddV = [[sp.diff(dV[a], X[b]) for b in range(n)] for a in range(n)]
        # Gamma^a_bc = 1/2 G^ad (d_b G_dc + d_c G_db - d_d G_bc)  (common practice)
        Gam = [[[sp.cancel(sum(Gi[a, d] * (sp.diff(G[d, c], X[b]) + sp.diff(G[d, b], X[c])
                                            - sp.diff(G[b, c], X[d])) for d in range(n)) / 2)
                 for c in range(n)] for b in range(n)] for a in range(n)]
        # R^a_bcd = d_c Gamma^a_db - d_d Gamma^a_cb + Gamma^a_ce Gamma^e_db - Gamma^a_de Gamma^e_cb
        # (Misner, Thorne & Wheeler 1973 convention; from memory; positive for a sphere)
        Riem = {}
        for a in range(n):
            for b in range(n):
                for c in range(n):
                    for d in range(c + 1, n):
                        e = (sp.diff(Gam[a][d][b], X[c]) - sp.diff(Gam[a][c][b], X[d])
                             + sum(Gam[a][c][f] * Gam[f][d][b] - Gam[a][d][f] * Gam[f][c][b]
                                   for f in range(n)))
                        if e != 0:
                            e = sp.simplify(e)
                        if e != 0:
                            Riem[(a, b, c, d)] = e
                            Riem[(a, b, d, c)] = -e
        self.flat = not Riem
        entries = [("V", (), V)]
        entries += [("dV", (a,), dV[a]) for a in range(n) if dV[a] != 0]
        entries += [("ddV", (a, b), ddV[a][b]) for a in range(n) for b in range(n)
                    if ddV[a][b] != 0]
        entries += [("G", (a, b), G[a, b]) for a in range(n) for b in range(n) if G[a, b] != 0]
        entries += [("Gi", (a, b), Gi[a, b]) for a in range(n) for b in range(n)
                    if Gi[a, b] != 0]
        entries += [("Gam", (a, b, c), Gam[a][b][c]) for a in range(n) for b in range(n)
                    for c in range(n) if Gam[a][b][c] != 0]
        entries += [("R", k, e) for k, e in Riem.items()]
        self._f = sp.lambdify([X], [e for _, _, e in entries], "numpy")
        self._slots = {}
        for i, (kind, idx, _) in enumerate(entries):
            self._slots.setdefault(kind, []).append((i, idx))
        self._index = {k: (np.array([i for i, _ in v]),
                           tuple(np.array([idx[j] for _, idx in v], dtype=int)
                                 for j in range(len(v[0][1]))))
                       for k, v in self._slots.items()}
        self.start = np.array([float(s) for s in start])

    def geom(self, phi):
        """V, V_a, V_ab, G_ab, G^ab, Gamma^a_bc, R^a_bcd (None if flat) at phi."""
        n = self.n
        vals = np.array(self._f(phi), dtype=float)
        out = {"V": vals[0]}
        for kind, shape in (("dV", (n,)), ("ddV", (n, n)), ("G", (n, n)), ("Gi", (n, n)),
                            ("Gam", (n, n, n)), ("R", (n, n, n, n))):
            if kind in self._index:
                arr = np.zeros(shape)
                pos, idx = self._index[kind]
                arr[idx] = vals[pos]
            else:
                arr = None if kind in ("Gam", "R") else np.zeros(shape)
            out[kind] = arr
        return out

    def attractor_velocity(self, phi):
        """Slow-roll attractor start pi^a = -G^ab V_b/V (common practice)."""
        g = self.geom(phi)
        return -g["Gi"] @ g["dV"] / g["V"]


# ----------------------------------------------------------------------------------------------
# Background
# ----------------------------------------------------------------------------------------------

def bg_rhs(model, N, y, g=None):
    n = model.n
    phi, pi = y[:n], y[n:2 * n]
    if g is None:
        g = model.geom(phi)
    eps = 0.5 * pi @ g["G"] @ pi                       # eps = G_ab pi^a pi^b / 2 (Sasaki & Stewart 1996)
    A = None if g["Gam"] is None else g["Gam"] @ pi   # A^a_c = Gamma^a_cb pi^b (= Gamma^a_bc pi^b)
    dpi = -(3.0 - eps) * (pi + g["Gi"] @ g["dV"] / g["V"])
    if A is not None:
        dpi -= A @ pi
    return np.concatenate([pi, dpi]), eps, A, g


def eps_of(model, y):
    n = model.n
    g = model.geom(y[:n])
    pi = y[n:2 * n]
    return 0.5 * pi @ g["G"] @ pi


class Background:
    """The exact background from the model's start (attractor velocity) to eps = 1."""

    def __init__(self, model, rtol, phi0=None, N_stop=None):
        self.model = model
        n = model.n
        phi0 = model.start if phi0 is None else np.asarray(phi0, float)
        y0 = np.concatenate([phi0, model.attractor_velocity(phi0)])
        self.rtol = rtol
        self.atol = rtol * 1e-3

        def f(N, y):
            return bg_rhs(model, N, y)[0]

        def end(N, y):
            return eps_of(model, y) - 1.0
        end.terminal = True
        end.direction = 1
        span = (0.0, 1e4 if N_stop is None else N_stop)
        sol = solve_ivp(f, span, y0, method="DOP853", rtol=rtol, atol=self.atol,
                        events=None if N_stop else end, dense_output=True)
        if N_stop is None:
            if sol.status != 1:
                raise RuntimeError(f"{model.name}: inflation does not end")
            self.N_end = sol.t_events[0][0]
            self.y_end = sol.y_events[0][0]
        else:
            self.N_end = N_stop
            self.y_end = sol.y[:, -1]
        self.sol = sol
        self.ts = sol.t
        self.ys = sol.y

    def state(self, N):
        """State at N: from the nearest accepted step before N, integrated on to N (more accurate
        than the dense-output interpolant)."""
        i = max(0, np.searchsorted(self.ts, N) - 1)
        if self.ts[i] == N:
            return self.ys[:, i].copy()
        model = self.model
        s = solve_ivp(lambda t, y: bg_rhs(model, t, y)[0], (self.ts[i], N), self.ys[:, i],
                      method="DOP853", rtol=self.rtol, atol=self.atol)
        return s.y[:, -1]

    def lnH(self, N, y=None):
        model = self.model
        y = self.sol.sol(N) if y is None else y
        g = model.geom(y[:model.n])
        eps = 0.5 * y[model.n:] @ g["G"] @ y[model.n:]
        return 0.5 * math.log(g["V"] / (3.0 - eps))    # H^2 = V/(3 - eps) (Sasaki & Stewart 1996)

    def N_where_z(self, lnk, z0):
        """N at which k/(aH) = z0, with a = e^N (the normalisation of a drops out of every
        observable: only k/k_* enters)."""
        f = lambda N: lnk - N - self.lnH(N) - math.log(z0)
        lo, hi = self.ts[0], self.N_end
        if f(lo) < 0:
            raise RuntimeError(f"{self.model.name}: mode k/aH = {z0} before the start")
        Nz = brentq(f, lo, hi, xtol=1e-14, rtol=1e-15)
        # polish on the accurate state
        for _ in range(2):
            y = self.state(Nz)
            Nz = Nz + (lnk - Nz - self.lnH(Nz, y) - math.log(z0)) / (1.0 - self.eps_at(y))
        return Nz

    def eps_at(self, y):
        return eps_of(self.model, y)


# ----------------------------------------------------------------------------------------------
# Perturbations
# ----------------------------------------------------------------------------------------------

def mass_matrix(g, pi, eps, H2):
    """M^a_b / H^2 of the flat-gauge equation.

    In cosmic time (Sasaki & Stewart 1996, from memory):
        D_t D_t Q^a + 3H D_t Q^a + k^2/a^2 Q^a
          + [V^a_;b - R^a_cdb phidot^c phidot^d - a^-3 D_t(a^3 phidot^a phidot_b / H)] Q^b = 0.
    Own derivation of the e-fold form: with phidot = H pi, D_t = H D_N, dH/dN = -eps H,
    d(a^3/H)/dt = a^3 (3 + eps) and D_t phidot^a = -3H phidot^a - V^a,
        -a^-3 D_t(a^3 phidot^a phidot_b/H) = H^2 (3 - eps) pi^a pi_b + H (V^a pi_b + pi^a V_b),
    and dividing by H^2 gives the matrix below; the friction 3H D_t becomes (3 - eps) D_N.
    Riemann sign: with R^a_bcd of the MTW convention and a space of constant curvature K,
    -R^a_cdb pi^c pi^d = K (pi^2 delta^a_b - pi^a pi_b), so the mass of a perturbation normal
    to the trajectory gains + K pi^2 H^2 = eps R H^2 (R = 2K), the geometric contribution to the
    entropic mass (Renaux-Petel & Turzynski, PRL 117 (2016) 141301; from memory): the sign is
    the one that destabilises on a hyperbolic space. (All models A-F are flat in field space,
    so this term is zero there; `hyperbolic_disk_check` tests it on a curved space.)
    """
    Gi, dV, V = g["Gi"], g["dV"], g["V"]
    hessV = g["ddV"]
    if g["Gam"] is not None:
        hessV = hessV - np.tensordot(dV, g["Gam"], (0, 0))   # V_;ab = V_,ab - Gamma^c_ab V_c
    pil = g["G"] @ pi
    Vup = Gi @ dV
    M = ((Gi @ hessV + Vup[:, None] * pil[None, :] + pi[:, None] * dV[None, :]) / H2
         + (3.0 - eps) * pi[:, None] * pil[None, :])
    if g["R"] is not None:
        M -= np.tensordot(pi, np.tensordot(pi, g["R"], (0, 1)), (0, 1))   # R^a_cdb pi^c pi^d
    return M


def hankel_start(A1, z, eps, s=0.0):
    """The start of a mode from the large-argument expansion of the Hankel function, own
    derivation. For constant eps, x = -k tau = z/(1 - eps) with z = k/(aH), and a mode of index
    nu behaves as e^{ix} (1 + i a1/x - a2/x^2 + ...), a1 = (4 nu^2 - 1)/8 = (nu^2 - 1/4)/2,
    a2 = (4 nu^2 - 1)(4 nu^2 - 9)/128 = a1 (a1 - 1)/2 (Abramowitz & Stegun 9.2.7; from memory);
    A1 may be a matrix (mass matrix in an orthonormal frame). Returns F = z (1 + i A1/x -
    A2/x^2) and dF/dN, for a mode f(N) e^{-ik tau} F/z with d ln f/dN = -1 - s (s = 0 for Q,
    s = d ln sqrt(2 eps)/dN for zeta); d(-ik tau)/dN = -i z, d(1/x)/dN = (1 - eps)/x. In de
    Sitter with a massless field (a1 = 1, a2 = 0) this is exact."""
    A1 = np.atleast_2d(A1)
    I = np.eye(A1.shape[0])
    A2 = 0.5 * A1 @ (A1 - I)
    x = z / (1.0 - eps)
    F = I + 1j * A1 / x - A2 / x ** 2
    dF = (-(1.0 + s) - 1j * z) * F + (1.0 - eps) * (1j * A1 / x - 2.0 * A2 / x ** 2)
    return z * F, z * dF


def bunch_davies(g, pi, eps, H, z, n):
    """Initial Q^a_alpha and D_N Q^a_alpha, normalised so that P = sum |.|^2 directly
    (Q~ = sqrt(k^3/2pi^2) Q).

    Leading order: Q = e^{-ik tau}/(a sqrt(2k)) along an orthonormal frame e^a_alpha
    (e e^T = G^-1); Bunch & Davies 1978 (common practice); then Q~ = (H/2pi) z e. Hankel
    corrections (`hankel_start`): in quasi de Sitter v = aQ solves v'' + (k^2 - (nu^2 -
    1/4)/tau^2) v = 0, a''/a = a^2 H^2 (2 - eps), so that for constant eps (own derivation)
        nu^2 - 1/4 = (2 - eps - M/H^2)/(1 - eps)^2     (a matrix in the frame e).
    Returns real arrays n x 2n: columns 0..n-1 the real parts, n..2n-1 the imaginary parts of
    the n modes, and the same for D_N Q.
    """
    M = mass_matrix(g, pi, eps, H * H)
    e = np.linalg.cholesky(g["Gi"])
    Mf = np.linalg.solve(e, M @ e)               # the mass matrix in the frame e
    A1 = 0.5 * ((2.0 - eps) * np.eye(n) - Mf) / (1.0 - eps) ** 2
    F, dF = hankel_start(A1, z, eps)
    c = H / TWO_PI
    Qc, Pc = c * e @ F, c * e @ dF
    return np.hstack([Qc.real, Qc.imag]), np.hstack([Pc.real, Pc.imag])


def tensor_bd(eps, H, z):
    """The tensor mode h~ with P_t = 8 |h~|^2: each polarisation of h_ij = h e_ij has the action
    (1/8) int a^3 (h_t^2 - (grad h)^2/a^2), so v = a h/2 is canonical and h solves the massless
    equation with twice its normalisation; two polarisations give P_t = 2 x 4 x k^3/(2 pi^2)
    |Q_massless|^2 -> 2 H^2/pi^2 (common practice; with P_zeta = H^2/(8 pi^2 eps) it gives
    r = 16 eps at leading order)."""
    A1 = 0.5 * (2.0 - eps) / (1.0 - eps) ** 2
    F, dF = hankel_start(A1, z, eps)
    c = H / TWO_PI
    return c * np.array([F[0, 0].real, F[0, 0].imag]), c * np.array([dF[0, 0].real, dF[0, 0].imag])


def normal_frame(G, pi):
    """Unit tangent T and, for two fields, the unit normal s = T turned by +90 degrees in the
    (x, y) plane: s^a = (-T_1, T_0)/sqrt(det G) (own construction)."""
    T = pi / math.sqrt(pi @ G @ pi)
    if len(pi) != 2:
        return T, None
    Tl = G @ T
    s = np.array([-Tl[1], Tl[0]]) / math.sqrt(np.linalg.det(G))
    return T, s


def run_mode(bg, lnk, tol, N_stop=None):
    """Integrate the background together with the n modes and the tensor mode of wavenumber k
    from k/aH = z0 to the end of inflation; return the spectra there."""
    model = bg.model
    n = model.n
    z0 = tol["z0"]
    N0 = bg.N_where_z(lnk, z0)
    y_bg = bg.state(N0)
    phi, pi = y_bg[:n], y_bg[n:]
    g = model.geom(phi)
    eps = 0.5 * pi @ g["G"] @ pi
    H = math.sqrt(g["V"] / (3.0 - eps))
    z = math.exp(lnk - N0 - math.log(H))
    Q, P = bunch_davies(g, pi, eps, H, z, n)
    h, hp = tensor_bd(eps, H, z)
    y0 = np.concatenate([y_bg, Q.ravel(), P.ravel(), h, hp])
    nn = 2 * n * n
    i_Q, i_P, i_h = 2 * n, 2 * n + nn, 2 * n + 2 * nn
    scale = np.concatenate([np.full(2 * n, bg.atol),
                            np.full(2 * nn + 4, 1e-3 * H / TWO_PI * tol["mode_rtol"])])

    def f(N, y):
        dbg, eps, A, g = bg_rhs(model, N, y[:2 * n])
        pi = y[n:2 * n]
        H2 = g["V"] / (3.0 - eps)
        z2 = math.exp(2.0 * (lnk - N) - math.log(H2))
        Q = y[i_Q:i_P].reshape(n, 2 * n)
        P = y[i_P:i_h].reshape(n, 2 * n)
        M = mass_matrix(g, pi, eps, H2)
        dQ = P                                                 # dQ/dN = D_N Q - Gamma pi Q
        dP = -(3.0 - eps) * P - z2 * Q - M @ Q                 # the mode equation above
        if A is not None:
            dQ = dQ - A @ Q
            dP -= A @ P
        h, hp = y[i_h:i_h + 2], y[i_h + 2:]
        dh, dhp = hp, -(3.0 - eps) * hp - z2 * h               # h'' + (3 - eps) h' + (k/aH)^2 h = 0
        return np.concatenate([dbg, dQ.ravel(), dP.ravel(), dh, dhp])

    def end(N, y):
        return eps_of(model, y[:2 * n]) - 1.0
    end.terminal = True
    end.direction = 1
    sol = solve_ivp(f, (N0, (N_stop if N_stop else bg.N_end + 5.0)), y0, method="DOP853",
                    rtol=tol["mode_rtol"], atol=scale, events=None if N_stop else end)
    if N_stop:
        yend = sol.y[:, -1]
        N_e = N_stop
    else:
        if sol.status != 1:
            raise RuntimeError("mode run: no end of inflation")
        yend = sol.y_events[0][0]
        N_e = sol.t_events[0][0]
    phi, pi = yend[:n], yend[n:2 * n]
    g = model.geom(phi)
    eps = 0.5 * pi @ g["G"] @ pi
    Q = yend[i_Q:i_P].reshape(n, 2 * n)
    pil = g["G"] @ pi
    zeta = pil @ Q / (2.0 * eps)            # zeta_alpha = pi_a Q^a_alpha / (2 eps) (common practice)
    Pz = float(zeta @ zeta)                  # P_zeta = k^3/(2 pi^2) sum_alpha |zeta_alpha|^2
    h = yend[i_h:i_h + 2]
    Pt = float(8.0 * (h @ h))                # two polarisations, h_ij normalised as below
    out = {"P_zeta": Pz, "P_t": Pt, "N_end_mode": N_e, "steps": int(sol.t.size)}
    T, s = normal_frame(g["G"], pi)
    if s is not None:
        S = (g["G"] @ s) @ Q / math.sqrt(2.0 * eps)
        out["P_iso"] = float(S @ S)
        out["P_cross"] = float(zeta @ S)
    else:
        Qperp = Q - np.outer(T, (g["G"] @ T) @ Q)
        out["P_iso_total"] = float(np.einsum("ai,ab,bi->", Qperp, g["G"], Qperp) / (2.0 * eps))
    return out


def stencil(f):
    """First and second derivatives from five equally spaced values (step STEP), fourth order
    (common practice)."""
    h = STEP
    d1 = (f[0] - 8 * f[1] + 8 * f[3] - f[4]) / (12 * h)
    d2 = (-f[0] + 16 * f[1] - 30 * f[2] + 16 * f[3] - f[4]) / (12 * h * h)
    return d1, d2


def predict(bg, N_star, tol, N_stop=None, N_ref=None):
    """Observables at the pivot N_* e-folds before the end (or before N_ref)."""
    model = bg.model
    n = model.n
    N_piv = (bg.N_end if N_ref is None else N_ref) - N_star
    y = bg.state(N_piv)
    lnH = bg.lnH(N_piv, y)
    lnk_star = N_piv + lnH                          # k_* = a_* H_*
    runs = [run_mode(bg, lnk_star + (j - 2) * STEP, tol, N_stop) for j in range(5)]
    lnPz = [math.log(r["P_zeta"]) for r in runs]
    lnPt = [math.log(r["P_t"]) for r in runs]
    d1, d2 = stencil(lnPz)
    t1, _ = stencil(lnPt)
    g = model.geom(y[:n])
    pi = y[n:]
    eps = 0.5 * pi @ g["G"] @ pi
    res = {"n_s": 1.0 + d1, "r": runs[2]["P_t"] / runs[2]["P_zeta"], "alpha_s": d2, "n_t": t1,
           "P_zeta": runs[2]["P_zeta"], "P_t": runs[2]["P_t"],
           "phi_pivot": y[:n].tolist(), "pi_pivot": pi.tolist(), "eps_pivot": eps,
           "H_pivot": math.exp(lnH), "N_pivot_from_start": N_piv,
           "steps_per_mode": [r["steps"] for r in runs]}
    for key in ("P_iso", "P_cross", "P_iso_total"):
        if key in runs[2]:
            res[key] = runs[2][key]
    if "P_iso" in res:
        res["cross_correlation"] = res["P_cross"] / math.sqrt(res["P_iso"] * res["P_zeta"])
    return res


# ----------------------------------------------------------------------------------------------
# One-field route, independent of the multi-field code: canonical field chi, and the
# Mukhanov-Sasaki equation written for zeta itself.
# ----------------------------------------------------------------------------------------------

class OneField:
    """L = 1/2 chi'^2 - V(chi).  Background chi'' = -(3 - eps)(chi' + V_chi/V), eps = chi'^2/2;
    zeta'' + (3 - eps + eps'/eps) zeta' + (k/aH)^2 zeta = 0 from the second-order action
    S = int a^3 eps (zeta_t^2 - (grad zeta)^2/a^2) (Maldacena, JHEP 05 (2003) 013; from memory),
    written in e-folds (own step)."""

    def __init__(self, name, chi, V, chi0):
        self.name = name
        self.fV = sp.lambdify(chi, [V, sp.diff(V, chi), sp.diff(V, chi, 2)], "numpy")
        self.chi0 = float(chi0)

    def acc(self, y):
        V, V1, _ = self.fV(y[0])
        eps = 0.5 * y[1] ** 2
        return -(3.0 - eps) * (y[1] + V1 / V), eps, V

    def background(self, rtol):
        V, V1, _ = self.fV(self.chi0)
        y0 = np.array([self.chi0, -V1 / V])

        def f(N, y):
            return [y[1], self.acc(y)[0]]

        def end(N, y):
            return 0.5 * y[1] ** 2 - 1.0
        end.terminal = True
        end.direction = 1
        sol = solve_ivp(f, (0, 1e4), y0, method="DOP853", rtol=rtol, atol=rtol * 1e-3,
                        events=end, dense_output=True)
        self.sol, self.N_end, self.rtol = sol, sol.t_events[0][0], rtol
        return self

    def state(self, N):
        ts, ys = self.sol.t, self.sol.y
        i = max(0, np.searchsorted(ts, N) - 1)
        s = solve_ivp(lambda t, y: [y[1], self.acc(y)[0]], (ts[i], N), ys[:, i],
                      method="DOP853", rtol=self.rtol, atol=self.rtol * 1e-3)
        return s.y[:, -1]

    def lnH(self, y):
        a, eps, V = self.acc(y)
        return 0.5 * math.log(V / (3.0 - eps))

    def mode(self, lnk, tol):
        z0 = tol["z0"]
        f = lambda N: lnk - N - self.lnH(self.sol.sol(N)) - math.log(z0)
        N0 = brentq(f, self.sol.t[0], self.N_end, xtol=1e-14, rtol=1e-15)
        for _ in range(2):
            y = self.state(N0)
            N0 += (lnk - N0 - self.lnH(y) - math.log(z0)) / (1.0 - 0.5 * y[1] ** 2)
        y = self.state(N0)
        acc, eps, V = self.acc(y)
        H = math.sqrt(V / (3.0 - eps))
        z = math.exp(lnk - N0) / H
        s = acc / y[1]                      # s = d ln sqrt(2 eps)/dN = chi''/chi'
        # nu^2 - 1/4 = tau^2 z''/z for z_MS = a sqrt(2 eps): own derivation,
        # tau^2 z''/z = [2 - eps + (3 - eps) s + s^2 + s'] / (1 - eps)^2, s' dropped (second
        # order); Hankel corrections as in `hankel_start`.
        A1 = 0.5 * (2.0 - eps + (3.0 - eps) * s + s * s) / (1.0 - eps) ** 2
        F, dF = hankel_start(A1, z, eps, s)
        c = H / TWO_PI / math.sqrt(2.0 * eps)
        zeta = c * np.array([F[0, 0].real, F[0, 0].imag])
        dzeta = c * np.array([dF[0, 0].real, dF[0, 0].imag])
        h, hp = tensor_bd(eps, H, z)

        def rhs(N, u):
            acc, eps, V = self.acc(u[:2])
            H2 = V / (3.0 - eps)
            z2 = math.exp(2.0 * (lnk - N)) / H2
            fr = 3.0 - eps + 2.0 * acc / u[1]          # eps'/eps = 2 chi''/chi'
            return np.concatenate([[u[1], acc], u[4:6], -fr * u[4:6] - z2 * u[2:4],
                                   u[8:10], -(3.0 - eps) * u[8:10] - z2 * u[6:8]])

        def end(N, u):
            return 0.5 * u[1] ** 2 - 1.0
        end.terminal = True
        end.direction = 1
        u0 = np.concatenate([y, zeta, dzeta, h, hp])
        sc = np.concatenate([[self.rtol * 1e-3] * 2, [1e-3 * c * tol["mode_rtol"]] * 4,
                             [1e-3 * H / TWO_PI * tol["mode_rtol"]] * 4])
        sol = solve_ivp(rhs, (N0, self.N_end + 5), u0, method="DOP853", rtol=tol["mode_rtol"],
                        atol=sc, events=end)
        ue = sol.y_events[0][0]
        return float(ue[2:4] @ ue[2:4]), float(8.0 * ue[6:8] @ ue[6:8])

    def predict(self, N_star, tol):
        N_piv = self.N_end - N_star
        y = self.state(N_piv)
        lnk = N_piv + self.lnH(y)
        runs = [self.mode(lnk + (j - 2) * STEP, tol) for j in range(5)]
        d1, d2 = stencil([math.log(p) for p, _ in runs])
        t1, _ = stencil([math.log(t) for _, t in runs])
        return {"n_s": 1.0 + d1, "r": runs[2][1] / runs[2][0], "alpha_s": d2, "n_t": t1,
                "P_zeta": runs[2][0], "P_t": runs[2][1], "chi_pivot": float(y[0])}


# ----------------------------------------------------------------------------------------------
# delta-N
# ----------------------------------------------------------------------------------------------

def efolds_to_end(model, phi, rtol):
    """e-folds from phi, started with its own attractor velocity, to eps = 1 (the slow-roll
    delta-N of Sasaki & Stewart 1996)."""
    bg = Background(model, rtol, phi0=phi)
    return bg.N_end


def delta_n(model, phi, rtol, h=0.02):
    """N_a and N_ab by central differences at steps h and h/2, Richardson-extrapolated (error
    O(h^4)); the difference between the extrapolated value and the h/2 value is the error
    estimate (common practice). The step in coordinate a is h/sqrt(G_aa) at the pivot, a field
    distance h (the metrics here are diagonal), so that no step crosses a pole."""
    n = model.n
    N0 = efolds_to_end(model, phi, rtol)
    unit = 1.0 / np.sqrt(np.diag(model.geom(phi)["G"]))
    cache = {}

    def N_at(steps, hh):
        key = (steps, hh)
        if key not in cache:
            p = np.array(phi, float)
            for a, sgn in steps:
                p[a] += sgn * hh * unit[a]
            cache[key] = efolds_to_end(model, p, rtol)
        return cache[key]

    def derivs(hh):
        Na = np.zeros(n)
        Nab = np.zeros((n, n))
        for a in range(n):
            Np, Nm = N_at(((a, 1),), hh), N_at(((a, -1),), hh)
            Na[a] = (Np - Nm) / (2 * hh * unit[a])
            Nab[a, a] = (Np - 2 * N0 + Nm) / (hh * unit[a]) ** 2
            for b in range(a + 1, n):
                Nab[a, b] = Nab[b, a] = (N_at(((a, 1), (b, 1)), hh) - N_at(((a, 1), (b, -1)), hh)
                                         - N_at(((a, -1), (b, 1)), hh)
                                         + N_at(((a, -1), (b, -1)), hh)) / (4 * hh * hh * unit[a] * unit[b])
        return Na, Nab

    Na1, Nab1 = derivs(h)
    Na2, Nab2 = derivs(h / 2)
    Na = (4 * Na2 - Na1) / 3
    Nab = (4 * Nab2 - Nab1) / 3
    return N0, Na, Nab, float(np.max(np.abs(Na - Na2))), float(np.max(np.abs(Nab - Nab2)))


def delta_n_observables(model, y_piv, N0, Na, Nab):
    """P_zeta = (H_*/2pi)^2 G^ab N_a N_b, r = 8/(G^ab N_a N_b),
    n_s - 1 = -2 eps - 2/(N^a N_a) + 2 N^a N^b V_;ab/(V N^c N_c),
    f_NL = (5/6) N^a N^b N_;ab/(N^c N_c)^2
    (Sasaki & Stewart 1996; Lyth & Rodriguez, PRL 95 (2005) 121302; from memory). H_* and eps
    are those of the exact background at the pivot."""
    n = model.n
    phi, pi = y_piv[:n], y_piv[n:]
    g = model.geom(phi)
    eps = 0.5 * pi @ g["G"] @ pi
    H2 = g["V"] / (3.0 - eps)
    Nup = g["Gi"] @ Na
    NN = Na @ Nup
    hessV, hessN = g["ddV"], Nab
    if g["Gam"] is not None:
        hessV = hessV - np.tensordot(g["dV"], g["Gam"], (0, 0))   # V_;ab = V_,ab - Gamma^c_ab V_c
        hessN = hessN - np.tensordot(Na, g["Gam"], (0, 0))        # N_;ab likewise
    return {"N_a": Na.tolist(), "N_ab": Nab.tolist(),
            "P_zeta": H2 / TWO_PI ** 2 * NN, "r": 8.0 / NN,
            "n_s": 1.0 - 2 * eps - 2.0 / NN + 2 * Nup @ hessV @ Nup / (g["V"] * NN),
            "f_NL": 5.0 / 6.0 * Nup @ hessN @ Nup / NN ** 2,
            "N_from_pivot_on_attractor": N0}


# ----------------------------------------------------------------------------------------------
# Trajectory diagnostics
# ----------------------------------------------------------------------------------------------

def turn_rate(model, y):
    """eta_perp/H = |D_N T|, T = pi/|pi| (common practice). D_N T is the part of D_N pi normal
    to T divided by |pi| (own step), with D_N pi from the equation of motion, so no numerical
    derivative is needed."""
    n = model.n
    phi, pi = y[:n], y[n:]
    g = model.geom(phi)
    G = g["G"]
    eps = 0.5 * pi @ G @ pi
    Dpi = -(3.0 - eps) * (pi + g["Gi"] @ g["dV"] / g["V"])
    norm = math.sqrt(pi @ G @ pi)
    T = pi / norm
    perp = Dpi - T * (T @ G @ Dpi)
    return math.sqrt(max(perp @ G @ perp, 0.0)) / norm


def max_turn(bg):
    Ns = np.linspace(bg.ts[0], bg.N_end, 20001)
    w = np.array([turn_rate(bg.model, bg.sol.sol(N)) for N in Ns])
    i = int(np.argmax(w))
    lo, hi = Ns[max(i - 1, 0)], Ns[min(i + 1, len(Ns) - 1)]
    res = minimize_scalar(lambda N: -turn_rate(bg.model, bg.state(N)), bounds=(lo, hi),
                          method="bounded", options={"xatol": 1e-9})
    N = res.x
    y = bg.state(N)
    return {"eta_perp_over_H_max": turn_rate(bg.model, y), "N_before_end": bg.N_end - N,
            "phi": y[:bg.model.n].tolist()}


# ----------------------------------------------------------------------------------------------
# Runner
# ----------------------------------------------------------------------------------------------

def changes(a, b):
    """Change of every number two result dictionaries share: absolute for n_s, alpha_s, n_t,
    f_NL and the like, relative (key suffixed "_rel") for the amplitudes P_* and r."""
    out = {}
    for k, v in a.items():
        if k in b and isinstance(v, float) and isinstance(b[k], float):
            if (k.startswith("P_") and k != "P_cross") or k == "r":
                out[k + "_rel"] = abs(v - b[k]) / abs(v) if v != 0 else abs(b[k])
            else:
                out[k] = abs(v - b[k])
    return out


def full_prediction(model, tol, N_stars=N_STARS):
    t0, c0 = time.perf_counter(), time.process_time()
    bg = Background(model, tol["bg_rtol"])
    preds = {f"{Ns:g}": predict(bg, Ns, tol) for Ns in N_stars}
    return bg, preds, (time.perf_counter() - t0, time.process_time() - c0)


def run_model(model, N_stars=N_STARS, z1000_stars=(55.0,)):
    log(f"model {model.name}")
    bg, ref, (wall, cpu) = full_prediction(model, TOL, N_stars)
    log(f"  reference run {wall:.1f} s wall, {cpu:.1f} s cpu")
    _, half, wall_half = full_prediction(model, TOL_HALF, N_stars)
    log(f"  halved tolerances done {wall_half[0]:.1f} s")
    _, z1000, wall_z = full_prediction(model, TOL_Z1000, z1000_stars)
    log(f"  k/aH = 1000 done {wall_z[0]:.1f} s")
    n = model.n
    out = {"name": model.name, "fields": [str(x) for x in model.X], "V": str(model.V),
           "G_diagonal": [str(model.G[i, i]) for i in range(n)] if model.G.is_diagonal()
           else str(model.G), "field_space_flat": model.flat, "notes": model.notes,
           "start": model.start.tolist(), "start_velocity": model.attractor_velocity(model.start).tolist(),
           "N_total": bg.N_end - bg.ts[0], "phi_end": bg.y_end[:n].tolist(),
           "pi_end": bg.y_end[n:].tolist(),
           "wall_time_s_full_prediction_three_N_star": wall,
           "cpu_time_s_full_prediction_three_N_star": cpu,
           "timing_note": "one process on a shared machine; the cpu time is the fairer figure",
           "predictions": ref,
           "change_halved_tolerances": {k: changes(ref[k], half[k]) for k in ref},
           "change_modes_from_k_over_aH_1000": {k: changes(ref[k], z1000[k])
                                                         for k in z1000}}
    return bg, out


def log(msg):
    sys.stderr.write(msg + "\n")
    sys.stderr.flush()


def pole_metric(u, a):
    """g(u) = 1/(1 - u^2/(6a))^2, the one-field pole metric (Kallosh & Linde, JCAP 07 (2013)
    002; from memory)."""
    return 1 / (1 - u ** 2 / (6 * a)) ** 2


def pole_start(n_fields, a, N_sr):
    """A point on the diagonal u_i = u of n equal pole fields, each with parameter a, that lies
    N_sr slow-roll e-folds before the end. Own derivation of the reduction: on the diagonal the
    kinetic term is n/2 g(u) u'^2; with phi = sqrt(n) u it is 1/2 phi'^2/(1 - phi^2/(6 n a))^2,
    the one-field pole model with alpha = n a in its pole variable phi. Its canonical field is
    chi = sqrt(6 alpha) artanh(phi/sqrt(6 alpha)), and with V = phi^2/(6 alpha) = tanh^2(x),
    x = chi/sqrt(6 alpha), the slow-roll e-folds are N = (3 alpha/4)(cosh 2x - cosh 2x_end),
    sinh 2x_end = 2/sqrt(3 alpha) (Kallosh & Linde 2013; from memory)."""
    alpha = n_fields * a
    x_end = 0.5 * math.asinh(2 / math.sqrt(3 * alpha))
    x0 = 0.5 * math.acosh(math.cosh(2 * x_end) + 4 * N_sr / (3 * alpha))
    phi0 = math.sqrt(6 * alpha) * math.tanh(x0)
    return phi0 / math.sqrt(n_fields), math.sqrt(6 * alpha) * x0, alpha


def pole_slow_roll(alpha, N):
    """Closed-form slow-roll n_s, r of V = tanh^2(chi/sqrt(6 alpha)) (Kallosh & Linde 2013;
    from memory): x = chi/sqrt(6 alpha), eps_V = 4/(3 alpha sinh^2 2x),
    eta_V = V_chichi/V = (1/(3 alpha)) (1/(sinh^2 x cosh^2 x) - 2/cosh^2 x) (own derivation),
    n_s = 1 - 6 eps_V + 2 eta_V, r = 16 eps_V (Liddle & Lyth 2000, ch. 3), at
    cosh 2x_* = cosh 2x_end + 4N/(3 alpha), sinh 2x_end = 2/sqrt(3 alpha). mpmath, 30 digits."""
    mp.mp.dps = 30
    al = mp.mpf(alpha)
    x_end = mp.asinh(2 / mp.sqrt(3 * al)) / 2
    x = mp.acosh(mp.cosh(2 * x_end) + 4 * mp.mpf(N) / (3 * al)) / 2
    eps = 4 / (3 * al * mp.sinh(2 * x) ** 2)
    eta = (1 / (mp.sinh(x) ** 2 * mp.cosh(x) ** 2) - 2 / mp.cosh(x) ** 2) / (3 * al)
    r_closed = 64 / (3 * al * (mp.cosh(2 * x) ** 2 - 1))
    return {"n_s": float(1 - 6 * eps + 2 * eta), "r": float(16 * eps),
            "r_closed_form": float(r_closed), "x_star": float(x)}


def vernizzi_wands_quadratic(m2, phi, N_star_exact=None):
    """Slow-roll delta-N of V = sum_i m_i^2 phi_i^2/2 (sum-separable, G = 1), Vernizzi & Wands,
    JCAP 05 (2006) 019 (from memory): N = sum_i int V_i/V_i' dphi_i = sum_i (phi_i^2 -
    phi_i,e^2)/4, so without the end surface N_i = phi_i/2, N_ij = delta_ij/2,
    f_NL = (5/6) N_i N_j N_ij/(N_k N_k)^2 = (5/12)/sum N_i^2.

    End surface, own derivation for two fields: slow-roll trajectories keep
    C = ln(phi_1)/m_1^2 - ln(phi_2)/m_2^2 (from dphi_i/dN = -m_i^2 phi_i/V); the end point
    (phi_1e, phi_2e) is where that trajectory meets eps_V = |grad V|^2/(2 V^2) = 1, so
    N = (phi_1^2 + phi_2^2)/4 - E(C), E = (phi_1e^2 + phi_2e^2)/4, and with
    dC/dphi_1 = 1/(m_1^2 phi_1), dC/dphi_2 = -1/(m_2^2 phi_2) the chain rule gives the
    corrections to N_i and N_ij below. E(C) is solved with mpmath (50 digits) and differentiated
    numerically by mpmath.diff."""
    mp.mp.dps = 50
    m1, m2_ = mp.mpf(m2[0]), mp.mpf(m2[1])
    p1, p2 = mp.mpf(phi[0]), mp.mpf(phi[1])

    def end_point(C):
        # phi_1e = exp(m1 (C + ln(phi_2e)/m2)); solve eps_V = 1 in t = ln phi_2e
        def F(t):
            y2 = mp.e ** t
            y1 = mp.e ** (m1 * (C + t / m2_))
            V = (m1 * y1 ** 2 + m2_ * y2 ** 2) / 2
            return (m1 ** 2 * y1 ** 2 + m2_ ** 2 * y2 ** 2) / (2 * V ** 2) - 1
        # bracket: start from the one-field end of field 1 (phi_1e = sqrt 2)
        t0 = (mp.log(mp.sqrt(2)) / m1 - C) * m2_
        t = mp.findroot(F, t0)
        y2 = mp.e ** t
        y1 = mp.e ** (m1 * (C + t / m2_))
        return y1, y2

    def E(C):
        y1, y2 = end_point(C)
        return (y1 ** 2 + y2 ** 2) / 4

    C = mp.log(p1) / m1 - mp.log(p2) / m2_
    E1 = mp.diff(E, C, 1)
    E2 = mp.diff(E, C, 2)
    c1, c2 = 1 / (m1 * p1), -1 / (m2_ * p2)          # dC/dphi_i
    c11, c22 = -1 / (m1 * p1 ** 2), 1 / (m2_ * p2 ** 2)  # d2C/dphi_i^2
    Na = [p1 / 2 - E1 * c1, p2 / 2 - E1 * c2]
    Nab = [[mp.mpf(1) / 2 - E2 * c1 * c1 - E1 * c11, -E2 * c1 * c2],
           [-E2 * c1 * c2, mp.mpf(1) / 2 - E2 * c2 * c2 - E1 * c22]]
    NN = Na[0] ** 2 + Na[1] ** 2
    fnl = mp.mpf(5) / 6 * sum(Na[i] * Na[j] * Nab[i][j] for i in range(2) for j in range(2)) / NN ** 2
    V = (m1 * p1 ** 2 + m2_ * p2 ** 2) / 2
    epsV = (m1 ** 2 * p1 ** 2 + m2_ ** 2 * p2 ** 2) / (2 * V ** 2)
    ns = 1 - 2 * epsV - 2 / NN + 2 * (m1 * Na[0] ** 2 + m2_ * Na[1] ** 2) / (V * NN)
    y1e, y2e = end_point(C)
    return {"N_a": [float(v) for v in Na], "N_ab": [[float(v) for v in row] for row in Nab],
            "N_a_without_end_surface": [float(p1 / 2), float(p2 / 2)],
            "end_surface_dE_dC": float(E1), "end_surface_d2E_dC2": float(E2),
            "end_point": [float(y1e), float(y2e)],
            "N_from_pivot": float((p1 ** 2 + p2 ** 2) / 4 - E(C)),
            "f_NL": float(fnl), "f_NL_without_end_surface": float(mp.mpf(5) / 12 / ((p1 ** 2 + p2 ** 2) / 4)),
            "r": float(8 / NN), "n_s": float(ns),
            "note": "slow-roll eps_V in the n_s formula; pivot fields from the exact background"}


def delta_n_block(model, bg, N_stars=N_STARS, rtol=1e-12):
    out = {}
    for Ns in N_stars:
        y = bg.state(bg.N_end - Ns)
        N0, Na, Nab, eNa, eNab = delta_n(model, y[:model.n], rtol)
        res = delta_n_observables(model, y, N0, Na, Nab)
        res["richardson_error_N_a"] = eNa
        res["richardson_error_N_ab"] = eNab
        if Ns == 55.0:
            # the same at half the step and at half the background tolerance
            N0b, Nab_a, Nab_ab, _, _ = delta_n(model, y[:model.n], rtol / 2, h=0.01)
            resb = delta_n_observables(model, y, N0b, Nab_a, Nab_ab)
            res["change_step_halved_rtol_halved"] = changes(res, resb)
        out[f"{Ns:g}"] = res
    return out


def trajectory_directions(model, y):
    """Unit tangent in the orthonormal frame sqrt(g_ii) dphi^i (diagonal G)."""
    n = model.n
    g = model.geom(y[:n])
    v = np.sqrt(np.diag(g["G"])) * y[n:]
    return (v / np.linalg.norm(v)).tolist()


def models():
    x, y = sp.symbols("x y")
    half = sp.Rational(1, 2)
    out = {}
    out["A"] = Model("two-field-quadratic-equal-masses", [x, y], (x ** 2 + y ** 2) / 2, sp.eye(2),
                     [15, 12], "start (15, 12) on the attractor: the point (10, 8) "
                     "gives only 40.5 e-folds, too few for N_* = 60; (15, 12) is the same "
                     "direction, and the motion is radial")
    out["B"] = Model("two-field-quadratic-mass-ratio", [x, y], (x ** 2 + 9 * y ** 2) / 2, sp.eye(2),
                     [12, 12])
    a = half
    u0, chi0, al = pole_start(2, float(a), 80.0)
    out["C"] = Model("two-pole-fields-merging", [x, y], (x ** 2 + y ** 2) / (12 * a),
                     sp.diag(pole_metric(x, a), pole_metric(y, a)), [u0, u0],
                     f"a = 1/2; start on the diagonal 80 slow-roll e-folds before the end "
                     f"(one-field pole variable phi = sqrt(2) u, alpha = 2a = 1)")
    out["C"].chi0, out["C"].alpha = chi0, al
    a7 = sp.Rational(1, 3)
    us = sp.symbols("u1:8")
    u0, chi0, al = pole_start(7, float(a7), 80.0)
    out["D"] = Model("seven-equal-pole-fields", list(us),
                     sum(u ** 2 for u in us) / (7 * 6 * a7),
                     sp.diag(*[pole_metric(u, a7) for u in us]), [u0] * 7,
                     "a = 1/3; V = sum u_i^2/(42 a) = sum u_i^2/14, which on the diagonal is "
                     "phi^2/(6 alpha) with phi = sqrt(7) u, alpha = 7a = 7/3; start on the "
                     "diagonal 80 slow-roll e-folds before the end")
    out["D"].chi0, out["D"].alpha = chi0, al
    aE, bE, cE = sp.Rational(1, 6), sp.Integer(2), sp.Integer(1)
    chi1, chi2 = 3.5, 5.3
    out["E"] = Model("two-alphas-turning", [x, y], x ** 2 / (6 * aE) + cE * y ** 2 / (6 * bE),
                     sp.diag(pole_metric(x, aE), pole_metric(y, bE)),
                     [math.sqrt(6 * float(aE)) * math.tanh(chi1 / math.sqrt(6 * float(aE))),
                      math.sqrt(6 * float(bE)) * math.tanh(chi2 / math.sqrt(6 * float(bE)))],
                     "a = 1/6, b = 2, c = 1; start at canonical fields (chi_x, chi_y) = (3.5, 5.3), "
                     "x = tanh(chi_x), y = sqrt(12) tanh(chi_y/sqrt(12)): y (the alpha = 2 "
                     "direction) rolls first while x stays near its pole, then the trajectory "
                     "turns into x (alpha = 1/6) about 30 e-folds before the end")
    out["E"].alphas = (float(aE), float(bE))
    out["F"] = Model("heavy-spectator", [x, y], x ** 2 / 2 + 900 * y ** 2 / 2, sp.eye(2), [18, 0],
                     "y starts at its minimum with zero velocity and stays there")
    return out


def hyperbolic_disk_check(N_star=55.0):
    """A numerical test of the Riemann term (own construction). Two fields on the Poincare disk
    G = 6 alpha (dx^2 + dy^2)/(1 - x^2 - y^2)^2, alpha = 1, V = x^2 + y^2, started on the x axis:
    by symmetry the motion stays on the axis, a geodesic, with no turn. In geodesic polar
    coordinates (rho, theta), ds^2 = drho^2 + f^2 dtheta^2, f = (sqrt(6 alpha)/2)
    sinh(2 rho/sqrt(6 alpha)), x = tanh(rho/sqrt(6 alpha)), V = tanh^2(rho/sqrt(6 alpha)), the
    perturbation normal to the trajectory decouples, with (own derivation; curvature term as
    in `mass_matrix`, Renaux-Petel & Turzynski 2016, from memory)
        m_s^2/H^2 = V_;ss/H^2 + 2 eps K,  V_;ss = (f'/f) V_rho,  K = -2/(3 alpha),
    the last two from the closed-form geometry, not from sympy. The single equation
    S'' + (3 - eps) S' + ((k/aH)^2 + m_s^2/H^2) S = 0 is integrated on the canonical one-field
    background and P_iso = |S|^2/(2 eps) at the end compared with the full two-field route,
    which uses the sympy Riemann tensor. The same with the opposite sign of 2 eps K shows how
    much the term matters."""
    x, y = sp.symbols("x y")
    al = 1.0
    G = sp.diag(6 / (1 - x ** 2 - y ** 2) ** 2, 6 / (1 - x ** 2 - y ** 2) ** 2)
    _, chi0, _ = pole_start(1, al, 80.0)
    r0 = math.tanh(chi0 / math.sqrt(6 * al))
    m = Model("hyperbolic-disk-radial", [x, y], x ** 2 + y ** 2, G, [r0, 0.0])
    bg = Background(m, TOL["bg_rtol"])
    N_piv = bg.N_end - N_star
    yp = bg.state(N_piv)
    lnk = N_piv + bg.lnH(N_piv, yp)
    multi = run_mode(bg, lnk, TOL)

    chi = sp.symbols("chi")
    c6 = math.sqrt(6 * al)
    of = OneField("pole", chi, sp.tanh(chi / sp.sqrt(6)) ** 2, chi0).background(TOL["bg_rtol"])
    K = -2.0 / (3.0 * al)

    def single(sign):
        y1 = of.state(of.N_end - N_star)
        lnk1 = of.N_end - N_star + of.lnH(y1)
        z0 = TOL["z0"]
        f = lambda N: lnk1 - N - of.lnH(of.sol.sol(N)) - math.log(z0)
        N0 = brentq(f, of.sol.t[0], of.N_end, xtol=1e-14, rtol=1e-15)
        for _ in range(2):
            u = of.state(N0)
            N0 += (lnk1 - N0 - of.lnH(u) - math.log(z0)) / (1.0 - 0.5 * u[1] ** 2)
        u = of.state(N0)

        def ms2(u):
            acc, eps, V = of.acc(u)
            _, V1, _ = of.fV(u[0])
            H2 = V / (3.0 - eps)
            fpf = (2.0 / c6) / math.tanh(2.0 * u[0] / c6)
            return fpf * V1 / H2 + sign * 2.0 * eps * K, eps, H2

        m2, eps, H2 = ms2(u)
        H = math.sqrt(H2)
        z = math.exp(lnk1 - N0) / H
        F, dF = hankel_start(0.5 * (2.0 - eps - m2) / (1.0 - eps) ** 2, z, eps)
        cst = H / TWO_PI
        w0 = np.concatenate([u, cst * np.array([F[0, 0].real, F[0, 0].imag]),
                             cst * np.array([dF[0, 0].real, dF[0, 0].imag])])

        def rhs(N, w):
            m2, eps, H2 = ms2(w[:2])
            acc = of.acc(w[:2])[0]
            z2 = math.exp(2.0 * (lnk1 - N)) / H2
            return np.concatenate([[w[1], acc], w[4:6], -(3.0 - eps) * w[4:6] - (z2 + m2) * w[2:4]])

        def end(N, w):
            return 0.5 * w[1] ** 2 - 1.0
        end.terminal = True
        end.direction = 1
        sc = np.concatenate([[of.rtol * 1e-3] * 2, [1e-3 * cst * TOL["mode_rtol"]] * 4])
        sol = solve_ivp(rhs, (N0, of.N_end + 5), w0, method="DOP853", rtol=TOL["mode_rtol"],
                        atol=sc, events=end)
        we = sol.y_events[0][0]
        return float(we[2:4] @ we[2:4]) / (2.0 * 0.5 * we[1] ** 2)

    P_single = single(+1.0)
    P_flipped = single(-1.0)
    return {"model": "G = 6 (dx^2 + dy^2)/(1 - x^2 - y^2)^2, V = x^2 + y^2, start (%r, 0)" % r0,
            "N_star": N_star, "field_space_flat": m.flat,
            "P_iso_two_field_route": multi["P_iso"], "P_iso_single_mode": P_single,
            "relative_difference": multi["P_iso"] / P_single - 1.0,
            "P_iso_single_mode_curvature_sign_flipped": P_flipped,
            "P_zeta_two_field_route": multi["P_zeta"]}


def power_law_check():
    """V = exp(-lambda phi), one field, K = 1: an exact solution with eps = lambda^2/2 and
    n_s - 1 = n_t = -2 eps/(1 - eps), r = 16 eps, alpha_s = 0 and
    P_zeta = 2^(2nu - 3) (Gamma(nu)/Gamma(3/2))^2 (1 - eps)^(2nu - 1) H^2/(8 pi^2 eps) at
    k = aH, nu = 3/2 + eps/(1 - eps) (Lucchin & Matarrese, PRD 32 (1985) 1316; Stewart & Lyth,
    PLB 302 (1993) 171; from memory). Power-law inflation never ends: the spectra are taken
    40 e-folds after the start, the pivot 20 e-folds before that."""
    phi = sp.symbols("phi")
    lam = sp.Rational(3, 10)
    m = Model("power-law", [phi], sp.exp(-lam * phi), sp.eye(1), [0])
    bg = Background(m, TOL["bg_rtol"], N_stop=40.0)
    res = predict(bg, 20.0, TOL, N_stop=40.0, N_ref=40.0)
    resh = predict(bg, 20.0, TOL_HALF, N_stop=40.0, N_ref=40.0)
    eps = float(lam) ** 2 / 2
    nu = 1.5 + eps / (1 - eps)
    H2 = res["H_pivot"] ** 2
    Pz = (2 ** (2 * nu - 3) * (math.gamma(nu) / math.gamma(1.5)) ** 2 * (1 - eps) ** (2 * nu - 1)
          * H2 / (8 * math.pi ** 2 * eps))
    exact = {"n_s": 1 - 2 * eps / (1 - eps), "n_t": -2 * eps / (1 - eps), "r": 16 * eps,
             "alpha_s": 0.0, "P_zeta": Pz}
    return {"lambda": float(lam), "eps": eps, "computed": {k: res[k] for k in exact},
            "exact": exact,
            "difference": {k: res[k] - exact[k] for k in exact},
            "relative_difference_P_zeta": res["P_zeta"] / Pz - 1,
            "change_halved_tolerances": changes(res, resh)}


def one_field_block(name, V, chi, chi0, N_stars=N_STARS):
    t0, c0 = time.perf_counter(), time.process_time()
    of = OneField(name, chi, V, chi0).background(TOL["bg_rtol"])
    ref = {f"{Ns:g}": of.predict(Ns, TOL) for Ns in N_stars}
    wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    ofh = OneField(name, chi, V, chi0).background(TOL_HALF["bg_rtol"])
    half = {f"{Ns:g}": ofh.predict(Ns, TOL_HALF) for Ns in N_stars}
    z1 = {"55": of.predict(55.0, TOL_Z1000)}
    return {"V": str(V), "chi0": chi0, "N_total": of.N_end, "predictions": ref,
            "wall_time_s": wall, "cpu_time_s": cpu,
            "change_halved_tolerances": {k: changes(ref[k], half[k]) for k in ref},
            "change_modes_from_k_over_aH_1000": {k: changes(ref[k], z1[k]) for k in z1}}


def compare(multi, one, keys=("n_s", "r", "alpha_s", "n_t", "P_zeta")):
    return {Ns: {k: multi[Ns][k] - one[Ns][k] for k in keys} for Ns in multi}


def merge(paths):
    """Join the outputs of runs of single models into one document."""
    doc = None
    total = 0.0
    for p in paths:
        with open(p) as f:
            part = json.load(f)
        total += part.pop("wall_time_s_total", 0.0)
        if doc is None:
            doc = part
        else:
            doc["models"].update(part.pop("models"))
            doc.update(part)
    doc["models"] = {k: doc["models"][k] for k in sorted(doc["models"])}
    doc["wall_time_s_total"] = total
    json.dump(doc, sys.stdout, indent=1)
    sys.stdout.write("\n")


def main():
    if sys.argv[1:2] == ["--merge"]:
        return merge(sys.argv[2:])
    wanted = set(sys.argv[1:]) or {"A", "B", "C", "D", "E", "F", "checks"}
    t_all = time.perf_counter()
    M = models()
    chi = sp.symbols("chi")
    doc = {"description": "Multi-field reference predictions: exact background and "
                          "Mukhanov-Sasaki modes, and slow-roll delta-N; generated by "
                          "gen_multifield.py (see MULTIFIELD.md)",
           "tolerances": {"reference": TOL, "halved": TOL_HALF, "modes_from_1000": TOL_Z1000,
                          "stencil_step_ln_k": STEP},
           "models": {}}
    if "checks" in wanted:
        log("power-law check")
        doc["power_law_check"] = power_law_check()
        log("hyperbolic-disk check")
        doc["hyperbolic_disk_check"] = hyperbolic_disk_check()
    for key in ("A", "B", "C", "D", "E", "F"):
        if key not in wanted:
            continue
        m = M[key]
        z_stars = (55.0,)
        N_stars = (20.0, 50.0, 55.0, 60.0) if key == "E" else N_STARS
        bg, out = run_model(m, N_stars, z_stars)
        for Ns, p in out["predictions"].items():
            p["direction_at_pivot_orthonormal_frame"] = trajectory_directions(
                m, np.array(p["phi_pivot"] + p["pi_pivot"]))
        if key in ("A", "B", "E"):
            log("  delta-N")
            out["delta_N"] = delta_n_block(m, bg)
            out["max_turn_rate"] = max_turn(bg)
        if key in ("A", "B"):
            m2 = (1.0, 1.0) if key == "A" else (1.0, 9.0)
            out["vernizzi_wands_analytic"] = {
                Ns: vernizzi_wands_quadratic(m2, out["predictions"][Ns]["phi_pivot"])
                for Ns in out["predictions"]}
        if key in ("A", "F"):
            chi0 = math.sqrt(float(m.start @ m.start))
            log("  one-field quadratic")
            one = one_field_block("quadratic", chi ** 2 / 2, chi, chi0)
            out["one_field_quadratic"] = one
            out["multi_minus_one_field"] = compare(out["predictions"], one["predictions"])
        if key in ("C", "D"):
            al = m.alpha
            log("  one-field pole model")
            one = one_field_block("pole", sp.tanh(chi / sp.sqrt(6 * sp.nsimplify(al))) ** 2, chi, m.chi0)
            out["one_field_pole_exact"] = one
            out["alpha_one_field"] = al
            out["multi_minus_one_field"] = compare(out["predictions"], one["predictions"])
            out["one_field_slow_roll_closed_form"] = {f"{Ns:g}": pole_slow_roll(al, Ns)
                                                      for Ns in N_STARS}
        if key == "E":
            out["max_turn_rate"] = max_turn(bg)
            out["twelve_alpha_over_N2"] = {
                Ns: {"alpha_x_1_6": 12 * m.alphas[0] / float(Ns) ** 2,
                     "alpha_y_2": 12 * m.alphas[1] / float(Ns) ** 2,
                     "one_minus_2_over_N": 1 - 2 / float(Ns)} for Ns in out["predictions"]}
        doc["models"][key] = out
        log(f"  model {key} done at {time.perf_counter() - t_all:.0f} s")
    if "checks" in wanted:
        doc["pole_slow_roll_check_alpha1_N55"] = {
            "computed": pole_slow_roll(1.0, 55.0),
            "expected_n_s": 0.963896078133, "expected_r": 0.00380738341749}
    doc["wall_time_s_total"] = time.perf_counter() - t_all
    json.dump(doc, sys.stdout, indent=1, default=float)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
