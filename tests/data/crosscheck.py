#!/usr/bin/env python3
"""Independent SciPy cross-check data for stepgauge's verification suite.

Writes two files, computed with NumPy and SciPy only (nothing here calls or copies stepgauge):

1. tests/data/scipy_reference_solutions.csv -- the motion of the observed DOF of every reference
   problem of `stepgauge::reference::all()` except the hardening oscillator (which has its own SciPy
   table, tests/data/duffing_reference.py), integrated from the equations of motion with
   scipy.integrate.solve_ivp (DOP853, rtol 1e-13) and checked against a second method of another
   family (Radau IIA, rtol 1e-12). Columns: problem,t,u,v (problem = stepgauge's `name()`).
   The bar is the semi-discrete chain that `BarImpact::model()` builds (N lumped elements, driven
   end at constant speed), not the continuum bar.

2. tests/data/scipy_amplification.csv -- the eigenvalues of one step's amplification matrix of
   each scheme on a grid of Omega = omega dt and damping ratios xi, the matrices built from the
   defining recurrences (not from stepgauge's simplified entries). Columns:
   set,alpha_m,alpha_f,beta,gamma,omega,xi,rho,l1_re,l1_im,l2_re,l2_im,l3_re,l3_im.

Run from the repository root:

    python3 tests/data/crosscheck.py            # regenerate both files
    python3 tests/data/crosscheck.py --check    # regenerate into a scratch folder and compare

`--check` exits with status 1 and a message naming the first differences when the regenerated
data differ from the committed files beyond round-off (see `compare_*` below for the tolerances).
Requirements: tests/data/requirements.txt. Run time: about 15 s (the Radau runs take most of it).
"""
import argparse
import functools
import math
import os
import shutil
import sys
import tempfile

import numpy as np
import scipy
import scipy.linalg
import scipy.sparse
from scipy.integrate import solve_ivp

COMMAND = "python3 tests/data/crosscheck.py"
SOLUTIONS = "tests/data/scipy_reference_solutions.csv"
AMPLIFICATION = "tests/data/scipy_amplification.csv"

# Output times per problem: N_OUT + 1 equally spaced times on [0, t_end] (plus the end of the pulse
# for the half-sine problems).
N_OUT = 60

# Integration tolerances. DOP853 is an explicit 8th-order Runge-Kutta method (Dormand & Prince);
# Radau is the implicit 5th-order Radau IIA method: two methods of different families. A third,
# exact route (the matrix exponential of the linear system, scipy.linalg.expm) checks the DOP853
# values to round-off. Radau is run at 1e-10, and at 1e-7 on the two problems with a fast mode
# (stiff-soft: omega_2 t_end = 1.3e3 rad; bar-impact: 100 modes up to omega t_end = 800 rad),
# where a tighter Radau run alone takes minutes: there the exact propagator is the tight check.
DOP853_RTOL = 1e-13
RADAU_RTOL = {"default": 1e-10, "stiff-soft": 1e-7, "bar-impact": 1e-7}
# The absolute tolerances are these fractions of each component's scale (the problem's largest
# displacement / velocity), so that they are "tiny" in every problem's units.
DOP853_ATOL = 1e-15
RADAU_ATOL = 1e-2  # x rtol x scale

SOURCES_SOLUTIONS = [
    "sources: the equations of motion m u'' + c u' + k u = f(t) (single DOF, c = 2 xi sqrt(k m))"
    " and M u'' + K u = f (two DOFs, bar chain);",
    "  integration: scipy.integrate.solve_ivp, DOP853 (Dormand & Prince 8(5,3)) and Radau"
    " (Radau IIA, order 5); parameters restated from stepgauge's src/reference/*.rs",
]

SOURCES_AMPLIFICATION = [
    "sources: Newmark 1959, J. Eng. Mech. Div. ASCE 85:67-94 (Newmark-beta updates);",
    "  Hilber, Hughes & Taylor 1977, Earthquake Eng. Struct. Dyn. 5:283-292 (HHT-alpha:"
    " beta = (1 - alpha)^2/4, gamma = 1/2 - alpha);",
    "  Wood, Bossak & Zienkiewicz 1980, Int. J. Numer. Meth. Eng. 15:1562-1566 (WBZ-alpha:"
    " beta = (1 - alpha_m)^2/4, gamma = 1/2 - alpha_m);",
    "  Chung & Hulbert 1993, J. Appl. Mech. 60:371-375 (generalised-alpha balance at"
    " n+1-alpha_m / n+1-alpha_f; eq. (25) alpha_m = (2 rho_inf - 1)/(rho_inf + 1),"
    " alpha_f = rho_inf/(rho_inf + 1), and the WBZ alpha_m = (rho_inf - 1)/(rho_inf + 1));",
    "  central difference: the half-step stepping equations of stepgauge's docs/explicit.md"
    " (common practice)",
]


# ------------------------------------------------------------------------------------------------
# Part a: reference solutions
# ------------------------------------------------------------------------------------------------


class Linear:
    """M u'' + C u' + K u = f(t) with diagonal M, one observed DOF.

    `force(t)` returns the load vector; `prescribed` (optional) is (dof, u(t), v(t), a(t)) of a DOF
    whose motion is given: it is removed from the unknowns and its coupling moved to the load.
    `breaks` are times where the load has a kink; the integration restarts there.

    `generators(piece)` describes the same loading (prescribed motion included) as the output of
    a linear system, for the exact propagator: it returns (G, g, B) with g' = G g, g = the
    generator's state at the piece's start, and the load on the free DOFs B g.
    """

    def __init__(self, name, mass, stiffness, damping, force, u0, v0, t_end, observed,
                 generators, breaks=(), prescribed=None):
        self.name = name
        self.generators = generators
        self.mass = np.asarray(mass, dtype=float)
        self.k = np.asarray(stiffness, dtype=float)
        self.c = np.asarray(damping, dtype=float)
        self.force = force
        self.u0 = np.asarray(u0, dtype=float)
        self.v0 = np.asarray(v0, dtype=float)
        self.t_end = t_end
        self.observed = observed
        self.breaks = tuple(breaks)
        self.prescribed = prescribed
        n = len(self.mass)
        if prescribed is None:
            self.free = np.arange(n)
        else:
            self.free = np.array([i for i in range(n) if i != prescribed[0]])
        f = self.free
        self.kff = self.k[np.ix_(f, f)]
        self.cff = self.c[np.ix_(f, f)]
        self.mf = self.mass[f]
        self.n_free = len(f)

    def full_load(self, t):
        """The load on the free DOFs, including the coupling to a prescribed DOF."""
        load = np.asarray(self.force(t), dtype=float)[self.free]
        if self.prescribed is not None:
            d, ug, vg, _ = self.prescribed
            load = load - self.k[self.free, d] * ug(t) - self.c[self.free, d] * vg(t)
        return load

    def rhs(self, t, y):
        n = self.n_free
        u, v = y[:n], y[n:]
        a = (self.full_load(t) - self.kff @ u - self.cff @ v) / self.mf
        return np.concatenate([v, a])

    def jacobian(self):
        """The constant Jacobian of rhs, sparse (Radau takes a constant sparse matrix)."""
        n = self.n_free
        j = np.zeros((2 * n, 2 * n))
        j[:n, n:] = np.eye(n)
        j[n:, :n] = -self.kff / self.mf[:, None]
        j[n:, n:] = -self.cff / self.mf[:, None]
        return scipy.sparse.csc_matrix(j)

    def output_times(self):
        times = {self.t_end * i / N_OUT for i in range(N_OUT + 1)}
        times.update(b for b in self.breaks if 0.0 < b < self.t_end)
        return np.array(sorted(times))

    def solve(self, method, rtol, atol_factor, u_scale, v_scale):
        """(times, u, v) of the observed DOF, integrated piecewise between the breaks."""
        n = self.n_free
        f = list(self.free)
        y = np.concatenate([self.u0[self.free], self.v0[self.free]])
        atol = np.concatenate([np.full(n, atol_factor * u_scale), np.full(n, atol_factor * v_scale)])
        times = self.output_times()
        edges = [0.0] + [b for b in self.breaks if 0.0 < b < self.t_end] + [self.t_end]
        us, vs = [], []
        kwargs = {"jac": self.jacobian()} if method == "Radau" else {}
        if self.prescribed is not None and self.observed == self.prescribed[0]:
            raise RuntimeError("the observed DOF must be free")
        k = f.index(self.observed)
        for lo, hi in zip(edges[:-1], edges[1:]):
            # Output times in [lo, hi); the last piece also takes t_end. The piece's end is
            # always evaluated: the next piece starts from the state there.
            last = hi == self.t_end
            sel = times[(times >= lo) & ((times <= hi) if last else (times < hi))]
            t_eval = np.unique(np.append(sel, hi))
            sol = solve_ivp(self.rhs, (lo, hi), y, method=method, t_eval=t_eval, rtol=rtol,
                            atol=atol, **kwargs)
            if not sol.success:
                raise RuntimeError(f"{self.name}: {method} failed: {sol.message}")
            if len(sol.t) != len(t_eval) or np.any(sol.t != t_eval):
                raise RuntimeError(f"{self.name}: {method} did not return the output times")
            keep = np.isin(sol.t, sel)
            us.extend(sol.y[k][keep])
            vs.extend(sol.y[n + k][keep])
            y = sol.y[:, -1]
        return times, np.array(us), np.array(vs)


    def exact(self):
        """(times, u, v) of the observed DOF by the exact propagator: the augmented system
        y = (u, v, g), y' = A y, advanced by scipy.linalg.expm (Pade approximation with scaling
        and squaring: exact up to round-off, and a different route from any step-by-step
        integrator), from output time to output time."""
        n = self.n_free
        k = list(self.free).index(self.observed)
        y = np.concatenate([self.u0[self.free], self.v0[self.free]])
        times = self.output_times()
        edges = [0.0] + [b for b in self.breaks if 0.0 < b < self.t_end] + [self.t_end]
        us, vs = [], []
        for piece, (lo, hi) in enumerate(zip(edges[:-1], edges[1:])):
            g_mat, g0, b_mat = self.generators(piece)
            g_mat = np.atleast_2d(np.asarray(g_mat, dtype=float))
            g0 = np.asarray(g0, dtype=float)
            b_mat = np.atleast_2d(np.asarray(b_mat, dtype=float))
            ng = len(g0)
            a = np.zeros((2 * n + ng, 2 * n + ng))
            a[:n, n:2 * n] = np.eye(n)
            a[n:2 * n, :n] = -self.kff / self.mf[:, None]
            a[n:2 * n, n:2 * n] = -self.cff / self.mf[:, None]
            a[n:2 * n, 2 * n:] = b_mat / self.mf[:, None]
            a[2 * n:, 2 * n:] = g_mat
            y0 = np.concatenate([y, g0])
            last = hi == self.t_end
            sel = times[(times >= lo) & ((times <= hi) if last else (times < hi))]
            # Each output time from the previous one: the grid's spacing t_end / N_OUT (to
            # round-off in t) with one propagator computed once; other gaps with their own.
            h = self.t_end / N_OUT
            step = scipy.linalg.expm(a * h)
            yt, t_prev = y0, lo
            for t in sel:
                gap = t - t_prev
                if abs(gap - h) <= 1e-13 * self.t_end:
                    yt = step @ yt
                elif gap != 0.0:
                    yt = scipy.linalg.expm(a * gap) @ yt
                t_prev = t
                us.append(yt[k])
                vs.append(yt[n + k])
            y = (scipy.linalg.expm(a * (hi - lo)) @ y0)[:2 * n]
        return times, np.array(us), np.array(vs)


def constant_load(load):
    """Generator of a load held from t = 0: g = 1."""
    return lambda piece: ([[0.0]], [1.0], np.asarray(load, dtype=float).reshape(-1, 1))


def sine_generator(f0, w, t0=0.0):
    """Generator of f0 sin(w t) on one DOF: g = (sin(w t), cos(w t)), g' = [[0, w], [-w, 0]] g."""
    return ([[0.0, w], [-w, 0.0]], [math.sin(w * t0), math.cos(w * t0)], [[f0, 0.0]])


NO_LOAD = ([[0.0]], [0.0], [[0.0]])


def sdof(name, m, k, xi, force, u0, v0, t_end, generators, breaks=()):
    c = 2.0 * xi * math.sqrt(k * m)
    return Linear(name, [m], [[k]], [[c]], lambda t: [force(t)], [u0], [v0], t_end, 0,
                  generators, breaks)


def problems():
    """The reference problems, with the parameters restated from stepgauge's constructors."""
    out = []
    # SdofFree::standard_undamped / standard_damped (src/reference/sdof.rs): m = 2, k = 200,
    # u0 = 0.02, v0 = -0.3, xi = 0 / 0.05; t_end = three undamped periods.
    m, k = 2.0, 200.0
    t_end = 3.0 * 2.0 * math.pi / math.sqrt(k / m)
    for name, xi in [("sdof-free-undamped", 0.0), ("sdof-free-underdamped", 0.05)]:
        out.append(sdof(name, m, k, xi, lambda t: 0.0, 0.02, -0.3, t_end,
                        lambda piece: NO_LOAD))
    # SdofHarmonic::standard_damped: m = 1.5, k = 60, xi = 0.05, f0 = 10, w = 4;
    # t_end = three periods of the longer of the natural and the load period.
    m, k, xi, f0, w = 1.5, 60.0, 0.05, 10.0, 4.0
    t_end = 3.0 * 2.0 * math.pi / min(math.sqrt(k / m), w)
    out.append(sdof("sdof-harmonic-damped", m, k, xi, lambda t, f0=f0, w=w: f0 * math.sin(w * t),
                    0.0, 0.0, t_end, lambda piece, f0=f0, w=w: sine_generator(f0, w)))
    # SdofHarmonic::standard_resonant: m = 1, k = 16, xi = 0, f0 = 8, w = 4 (resonance).
    m, k, xi, f0, w = 1.0, 16.0, 0.0, 8.0, 4.0
    t_end = 3.0 * 2.0 * math.pi / min(math.sqrt(k / m), w)
    out.append(sdof("sdof-harmonic-resonant", m, k, xi,
                    lambda t, f0=f0, w=w: f0 * math.sin(w * t), 0.0, 0.0, t_end,
                    lambda piece, f0=f0, w=w: sine_generator(f0, w)))
    # SdofHalfSine::standard_undamped / standard_damped: m = 0.5, k = 50, f0 = 20, t_d = 0.5,
    # xi = 0 / 0.05; f = f0 sin(pi t / t_d) for 0 <= t < t_d, 0 after; t_end = t_d + two
    # natural periods. Integrated piecewise across t_d (the load's slope jumps there).
    m, k, f0, t_d = 0.5, 50.0, 20.0, 0.5
    t_end = t_d + 2.0 * 2.0 * math.pi / math.sqrt(k / m)

    def pulse(t, f0=f0, t_d=t_d):
        return f0 * math.sin(math.pi * t / t_d) if 0.0 <= t < t_d else 0.0

    for name, xi in [("sdof-half-sine-undamped", 0.0), ("sdof-half-sine-damped", 0.05)]:
        out.append(sdof(name, m, k, xi, pulse, 0.0, 0.0, t_end,
                        lambda piece, f0=f0, t_d=t_d: (sine_generator(f0, math.pi / t_d)
                                                       if piece == 0 else NO_LOAD),
                        breaks=(t_d,)))
    # TwoDofStep (src/reference/modal.rs): M = diag(2, 1), K = [[6, -2], [-2, 4]], load [0, 10]
    # held from t = 0, from rest; observed DOF 1; t_end = 2 sqrt(2) pi.
    out.append(Linear("two-dof-step", [2.0, 1.0], [[6.0, -2.0], [-2.0, 4.0]], np.zeros((2, 2)),
                      lambda t: [0.0, 10.0], [0.0, 0.0], [0.0, 0.0],
                      2.0 * math.sqrt(2.0) * math.pi, 1, constant_load([0.0, 10.0])))
    # StiffSoft::standard: m1 = m2 = 1, k_soft = 1, k_stiff = 1e4, u0 = [1, 1.01], v0 = 0;
    # observed DOF 1; t_end = one period of the soft mode. The soft frequency from the
    # characteristic equation m1 m2 w^4 - (m1 k22 + m2 k11) w^2 + det K = 0 (smaller root as
    # det K / (m1 m2 w_hi^2), free of cancellation).
    m1, m2, ks, kk = 1.0, 1.0, 1.0, 1e4
    k11, k22 = ks + kk, kk
    half_trace = 0.5 * (m1 * k22 + m2 * k11) / (m1 * m2)
    disc = math.sqrt(half_trace**2 - ks * kk / (m1 * m2))
    w_lo2 = ks * kk / (m1 * m2 * (half_trace + disc))
    out.append(Linear("stiff-soft", [m1, m2], [[k11, -kk], [-kk, k22]], np.zeros((2, 2)),
                      lambda t: [0.0, 0.0], [1.0, 1.01], [0.0, 0.0],
                      2.0 * math.pi / math.sqrt(w_lo2), 1, lambda piece: NO_LOAD))
    # BarImpact::standard (src/reference/bar.rs): 100 two-node elements, L = 0.5, E = 210e9,
    # rho = 7850, unit section, row-sum lumped mass (rho h / 2 per element end), element stiffness
    # E / h; node 0 driven at v0 = 2 from t = 0 (u0(t) = v0 t), node N free; observed node N;
    # t_end = 4 L / c, c = sqrt(E / rho). The semi-discrete chain, not the continuum.
    ne, length, modulus, density, v0 = 100, 0.5, 210e9, 7850.0, 2.0
    n = ne + 1
    h = length / ne
    me, ke = density * h, modulus / h
    mass = np.zeros(n)
    kmat = np.zeros((n, n))
    for e in range(ne):
        mass[e] += 0.5 * me
        mass[e + 1] += 0.5 * me
        kmat[e, e] += ke
        kmat[e + 1, e + 1] += ke
        kmat[e, e + 1] -= ke
        kmat[e + 1, e] -= ke
    u0 = np.zeros(n)
    vel0 = np.zeros(n)
    vel0[0] = v0
    c_wave = math.sqrt(modulus / density)
    # Generator of the driven end's coupling: g = (t, 1), load on the free nodes -K_f0 v0 t.
    k_f0 = kmat[1:, 0]
    bar_gen = ([[0.0, 1.0], [0.0, 0.0]], [0.0, 1.0], np.column_stack([-k_f0 * v0, np.zeros(ne)]))
    out.append(Linear("bar-impact", mass, kmat, np.zeros((n, n)), lambda t: np.zeros(n), u0, vel0,
                      4.0 * length / c_wave, ne, lambda piece: bar_gen,
                      prescribed=(0, lambda t: v0 * t, lambda t: v0, lambda t: 0.0)))
    return out


def radau_rtol(p):
    return RADAU_RTOL.get(p.name, RADAU_RTOL["default"])


def solve_problem(p):
    """The DOP853 solution and its largest differences from the exact propagator and from Radau,
    relative to max|u| and max|v| of the problem: (t, u, v, [du_exact, dv_exact, du_radau,
    dv_radau])."""
    te, ue, ve = p.exact()
    u_scale, v_scale = np.max(np.abs(ue)), np.max(np.abs(ve))
    t, u, v = p.solve("DOP853", DOP853_RTOL, DOP853_ATOL, u_scale, v_scale)
    rt = radau_rtol(p)
    tr, ur, vr = p.solve("Radau", rt, RADAU_ATOL * rt, u_scale, v_scale)
    if not (np.array_equal(t, te) and np.array_equal(t, tr)):
        raise RuntimeError(f"{p.name}: the methods returned different times")
    diffs = [np.max(np.abs(u - ue)) / u_scale, np.max(np.abs(v - ve)) / v_scale,
             np.max(np.abs(u - ur)) / u_scale, np.max(np.abs(v - vr)) / v_scale]
    return t, u, v, diffs


def write_solutions(path):
    lines = []
    measured = []
    for p in problems():
        t, u, v, d = solve_problem(p)
        measured.append(f"# measured: {p.name}: max|u| = {np.max(np.abs(u)):.6e},"
                        f" max|v| = {np.max(np.abs(v)):.6e}; DOP853 vs expm: {d[0]:.1e} (u),"
                        f" {d[1]:.1e} (v); vs Radau rtol={radau_rtol(p):.0e}: {d[2]:.1e} (u),"
                        f" {d[3]:.1e} (v) (largest difference / max over the run)")
        for ti, ui, vi in zip(t, u, v):
            lines.append(f"{p.name},{float(ti)!r},{float(ui)!r},{float(vi)!r}")
    with open(path, "w") as f:
        f.write(f"# command: {COMMAND}\n")
        f.write(versions_line())
        f.write("# holds: the observed DOF's displacement u and velocity v of stepgauge's reference"
                " problems (name = ReferenceProblem::name), integrated by SciPy from the"
                " equations of motion\n")
        f.write(f"# method: solve_ivp DOP853 rtol={DOP853_RTOL!r} atol={DOP853_ATOL!r} x scale"
                " (scale = max|u| or max|v| of the problem); checked against the exact propagator"
                " (scipy.linalg.expm of the linear system augmented with its load generator) and"
                f" against solve_ivp Radau (rtol 1e-10, 1e-7 for stiff-soft and bar-impact, atol"
                f" {RADAU_ATOL!r} x rtol x scale); the half-sine problems integrated piecewise"
                " across t_d\n")
        f.write("# bar-impact is the semi-discrete chain of BarImpact::model() (100 lumped"
                " elements), not the continuum bar\n")
        for s in SOURCES_SOLUTIONS:
            f.write(f"# {s}\n")
        for m in measured:
            f.write(m + "\n")
        f.write("problem,t,u,v\n")
        for line in lines:
            f.write(line + "\n")


# ------------------------------------------------------------------------------------------------
# Part b: amplification eigenvalues
# ------------------------------------------------------------------------------------------------


def newmark(beta, gamma):
    return (0.0, 0.0, beta, gamma)


def hht(alpha):
    """Hilber, Hughes & Taylor (1977), original sign convention alpha in [-1/3, 0]: in the
    family's notation alpha_m = 0, alpha_f = -alpha."""
    return (0.0, -alpha, (1.0 - alpha) ** 2 / 4.0, 0.5 - alpha)


def wbz(rho_inf):
    """Wood, Bossak & Zienkiewicz (1980) with alpha_m from rho_inf (Chung & Hulbert 1993)."""
    am = (rho_inf - 1.0) / (rho_inf + 1.0)
    return (am, 0.0, (1.0 - am) ** 2 / 4.0, 0.5 - am)


def generalized_alpha(rho_inf):
    """Chung & Hulbert (1993), eq. (25) and the second-order gamma, beta."""
    am = (2.0 * rho_inf - 1.0) / (rho_inf + 1.0)
    af = rho_inf / (rho_inf + 1.0)
    return (am, af, (1.0 - am + af) ** 2 / 4.0, 0.5 - am + af)


# (set name, parameters or the central difference's damping treatment)
ALPHA_SETS = [
    ("average-acceleration", newmark(0.25, 0.5)),
    ("linear-acceleration", newmark(1.0 / 6.0, 0.5)),
    ("fox-goodwin", newmark(1.0 / 12.0, 0.5)),
    ("newmark-beta0.3025-gamma0.6", newmark(0.3025, 0.6)),
    ("hht-alpha-minus0.1", hht(-0.1)),
    ("hht-alpha-minus0.3", hht(-0.3)),
    ("wbz-rho0.8", wbz(0.8)),
    ("generalized-alpha-rho1", generalized_alpha(1.0)),
    ("generalized-alpha-rho0.8", generalized_alpha(0.8)),
    ("generalized-alpha-rho0.5", generalized_alpha(0.5)),
    ("generalized-alpha-rho0", generalized_alpha(0.0)),
]
CD_SETS = [
    ("central-difference-lagged", "lagged"),
    ("central-difference-predicted", "predicted"),
]

# Omega grid: 31 values 10^(k/5 - 3), k = 0..30 (1e-3 to 1e3, five per decade), each rounded to
# four significant digits so that the keys are short decimal literals that parse to the same
# double on every platform. The central difference: the values up to 1, then steps through and
# beyond its stability limits (2 without damping; 1.9025 / 1.8100 at xi = 0.05 and
# 1.6198 / 1.4031 at xi = 0.2, lagged / predicted).
OMEGAS = [float(f"{10.0 ** (k / 5.0 - 3.0):.4g}") for k in range(31)]
CD_OMEGAS = [o for o in OMEGAS if o <= 1.0] + [1.2, 1.4, 1.5, 1.6, 1.7, 1.8, 1.85, 1.9, 1.95,
                                               1.99, 2.01, 2.1, 2.5, 3.0]
XIS = [0.0, 0.05, 0.2]

# Eigenvalues closer than this (relative to max(1, |lambda|max)) count as clustered: a general
# eigen-solver then loses digits (about half at a double root), so such points are compared on
# the characteristic polynomial and the spectral radius (see compare_amplification).
CLUSTER = 1e-3


def alpha_matrix(params, omega, xi):
    """Amplification matrix on x = (u, dt v, dt^2 a) from the defining recurrences.

    Chung & Hulbert (1993): the balance at n+1-alpha_m (inertia) / n+1-alpha_f (damping and
    stiffness) of one mode, u'' + 2 xi w u' + w^2 u = 0, times dt^2, with Omega = w dt:

        (1-am) A1 + am A0 + 2 xi Omega ((1-af) V1 + af V0) + Omega^2 ((1-af) U1 + af U0) = 0

    and Newmark's updates (Newmark 1959)

        U1 = U0 + V0 + (1/2 - beta) A0 + beta A1,     V1 = V0 + (1 - gamma) A0 + gamma A1.

    Written as L x1 = R x0 and solved with numpy (rows scaled to unit largest entry of L, which
    changes nothing in exact arithmetic and keeps the solve accurate at large Omega).
    """
    am, af, b, g = params
    z = 2.0 * xi * omega
    o2 = omega * omega
    lhs = np.array([
        [1.0, 0.0, -b],
        [0.0, 1.0, -g],
        [o2 * (1.0 - af), z * (1.0 - af), 1.0 - am],
    ])
    rhs = np.array([
        [1.0, 1.0, 0.5 - b],
        [0.0, 1.0, 1.0 - g],
        [-o2 * af, -z * af, -am],
    ])
    scale = np.max(np.abs(lhs), axis=1)
    return np.linalg.solve(lhs / scale[:, None], rhs / scale[:, None])


def cd_step(x, omega, xi, treatment):
    """One central-difference step of one mode on x = (U, V, A) = (u, dt v, dt^2 a), from the
    stepping equations (docs/explicit.md):

        v_{n+1/2} = v_n + (dt/2) a_n,      u_{n+1} = u_n + dt v_{n+1/2},
        a_{n+1} = -w^2 u_{n+1} - 2 xi w vd,   v_{n+1} = v_{n+1/2} + (dt/2) a_{n+1},

    with the damping velocity vd = v_{n+1/2} (lagged) or v_{n+1/2} + (dt/2) a_n (predicted).
    """
    u, v, a = x
    v_half = v + 0.5 * a
    u1 = u + v_half
    vd = v_half if treatment == "lagged" else v_half + 0.5 * a
    a1 = -omega * omega * u1 - 2.0 * xi * omega * vd
    v1 = v_half + 0.5 * a1
    return np.array([u1, v1, a1])


def cd_matrix(treatment, omega, xi):
    """The central difference's amplification matrix: its columns are the steps of the unit
    states."""
    return np.column_stack([cd_step(e, omega, xi, treatment) for e in np.eye(3)])


def canonical(eigs):
    """Eigenvalues in the canonical order: decreasing modulus; moduli within 1e-12 relative count
    as equal and are ordered by decreasing imaginary part (a conjugate pair: + first)."""
    def cmp(x, y):
        mx, my = abs(x), abs(y)
        if abs(mx - my) > 1e-12 * max(1.0, mx, my):
            return -1 if mx > my else 1
        if x.imag != y.imag:
            return -1 if x.imag > y.imag else 1
        return -1 if x.real > y.real else (1 if x.real < y.real else 0)
    return sorted((complex(e) for e in eigs), key=functools.cmp_to_key(cmp))


def amplification_rows():
    rows = []
    for name, params in ALPHA_SETS:
        for xi in XIS:
            for omega in OMEGAS:
                rows.append((name, params, omega, xi, np.linalg.eigvals(alpha_matrix(params, omega, xi))))
    for name, treatment in CD_SETS:
        # Reported as the beta = 0, gamma = 1/2 member it resembles (as stepgauge's
        # Scheme::parameters does), with its own matrix.
        params = (0.0, 0.0, 0.0, 0.5)
        for xi in XIS:
            for omega in CD_OMEGAS:
                rows.append((name, params, omega, xi,
                             np.linalg.eigvals(cd_matrix(treatment, omega, xi))))
    out = []
    for name, params, omega, xi, eigs in rows:
        e = canonical(eigs)
        rho = max(abs(x) for x in e)
        out.append((name, params, omega, xi, rho, e))
    return out


def write_amplification(path):
    rows = amplification_rows()
    with open(path, "w") as f:
        f.write(f"# command: {COMMAND}\n")
        f.write(versions_line())
        f.write("# holds: eigenvalues l1..l3 and spectral radius rho of one step's amplification"
                " matrix on (u, dt v, dt^2 a) of one mode u'' + 2 xi w u' + w^2 u = 0 at"
                " omega = w dt\n")
        f.write("# matrices: generalised-alpha family from L x_{n+1} = R x_n (balance at"
                " n+1-alpha_m / n+1-alpha_f, Newmark updates), solved with numpy.linalg.solve;"
                " central difference from its half-step stepping equations applied to the unit"
                " states (lagged: damping velocity v_{n+1/2}; predicted: v_{n+1/2} + dt a_n / 2),"
                " reported as alpha_m = alpha_f = beta = 0, gamma = 1/2; eigenvalues by"
                " numpy.linalg.eigvals (LAPACK geev)\n")
        f.write("# order: decreasing modulus; moduli within 1e-12 relative ordered by decreasing"
                " imaginary part, then decreasing real part\n")
        f.write("# sets: hht-alpha-minusX is HHT alpha = -X; wbz-rhoX and generalized-alpha-rhoX"
                " have rho_inf = X\n")
        for s in SOURCES_AMPLIFICATION:
            f.write(f"# {s}\n")
        f.write("set,alpha_m,alpha_f,beta,gamma,omega,xi,rho,l1_re,l1_im,l2_re,l2_im,l3_re,l3_im\n")
        for name, params, omega, xi, rho, e in rows:
            nums = list(params) + [omega, xi, rho]
            for x in e:
                nums += [x.real, x.imag]
            f.write(name + "," + ",".join(repr(float(v)) for v in nums) + "\n")


# ------------------------------------------------------------------------------------------------
# Files, headers, --check
# ------------------------------------------------------------------------------------------------


def versions_line():
    return (f"# python {sys.version.split()[0]}, numpy {np.__version__}, "
            f"scipy {scipy.__version__}\n")


def read_csv(path):
    """(header lines, column names, rows as lists of strings)."""
    header, columns, rows = [], None, []
    with open(path) as f:
        for line in f:
            line = line.rstrip("\n")
            if line.startswith("#"):
                header.append(line)
            elif columns is None:
                columns = line.split(",")
            elif line:
                rows.append(line.split(","))
    return header, columns, rows


def stable_header(header):
    """The header lines that must not change between runs: all but the versions and the
    measured figures."""
    return [h for h in header if not h.startswith("# python ") and not h.startswith("# measured:")]


def compare_headers(name, old, new, errors):
    a, b = stable_header(old[0]), stable_header(new[0])
    if a != b:
        errors.append(f"{name}: header differs: committed {a!r} vs regenerated {b!r}")
    if old[1] != new[1]:
        errors.append(f"{name}: columns differ: {old[1]} vs {new[1]}")
    if len(old[2]) != len(new[2]):
        errors.append(f"{name}: {len(old[2])} rows committed, {len(new[2])} regenerated")
        return False
    return True


# Round-off tolerance of --check. The committed numbers differ from a rerun only through
# round-off in the libraries: a different BLAS/LAPACK or NumPy/SciPy version changes the last
# bits of a function evaluation, and with it the integrator's step sizes, so a rerun's solution
# moves by about the integration error, which DOP853 vs Radau bounds at ~1e-12 of the problem's
# scale (see the "measured" header lines). 1e-9 of the scale leaves a factor of about 1000 for
# that, while any real change of a parameter, a formula or a method moves the values by far more.
SOLUTION_TOL = 1e-9


def compare_solutions(old, new, errors):
    if not compare_headers("scipy_reference_solutions.csv", old, new, errors):
        return
    scales = {}
    for r in old[2]:
        s = scales.setdefault(r[0], [0.0, 0.0])
        s[0] = max(s[0], abs(float(r[2])))
        s[1] = max(s[1], abs(float(r[3])))
    for i, (a, b) in enumerate(zip(old[2], new[2])):
        if a[:2] != b[:2]:
            errors.append(f"row {i}: keys differ: {a[:2]} vs {b[:2]}")
            continue
        for j, col in [(2, "u"), (3, "v")]:
            d = abs(float(a[j]) - float(b[j]))
            if not d <= SOLUTION_TOL * scales[a[0]][j - 2]:
                errors.append(f"{a[0]} t={a[1]}: {col} differs by {d:.2e} "
                              f"(> {SOLUTION_TOL:.0e} x {scales[a[0]][j - 2]:.3e})")


# Eigenvalues of a well-separated spectrum are computed to a few ulps of max(1, |A|) by LAPACK's
# balanced, backward-stable QR algorithm; a rerun with another LAPACK differs at ~1e-15. 1e-9
# relative to max(1, |lambda|) leaves a wide margin. At clustered points (CLUSTER) a double root
# moves by about sqrt(1e-16) = 1e-8 under round-off: there the characteristic polynomial's
# coefficients (well conditioned functions of the matrix, formed from the eigenvalues) are
# compared at 1e-9 x scale^k for the coefficient of z^(3-k), and the spectral radius at 1e-6
# (the same treatment as stepgauge's check in src/verification/crosscheck.rs).
EIG_TOL = 1e-9
CLUSTER_RHO_TOL = 1e-6


def eig_triple(row):
    v = [float(x) for x in row[8:14]]
    return [complex(v[0], v[1]), complex(v[2], v[3]), complex(v[4], v[5])]


def clustered(e):
    scale = max(1.0, max(abs(x) for x in e))
    return min(abs(e[0] - e[1]), abs(e[0] - e[2]), abs(e[1] - e[2])) < CLUSTER * scale


def poly(e):
    """[c2, c1, c0] of (z - l1)(z - l2)(z - l3) = z^3 + c2 z^2 + c1 z + c0 (real parts)."""
    c2 = -(e[0] + e[1] + e[2])
    c1 = e[0] * e[1] + e[0] * e[2] + e[1] * e[2]
    c0 = -(e[0] * e[1] * e[2])
    return [c2.real, c1.real, c0.real]


def compare_amplification(old, new, errors):
    if not compare_headers("scipy_amplification.csv", old, new, errors):
        return
    for i, (a, b) in enumerate(zip(old[2], new[2])):
        key = a[0] + " omega=" + a[5] + " xi=" + a[6]
        if a[0] != b[0] or a[5:7] != b[5:7]:
            errors.append(f"row {i}: keys differ: {a[0]},{a[5:7]} vs {b[0]},{b[5:7]}")
            continue
        for j in range(1, 5):
            if abs(float(a[j]) - float(b[j])) > 1e-15:
                errors.append(f"{key}: parameter {j} differs: {a[j]} vs {b[j]}")
        ea, eb = eig_triple(a), eig_triple(b)
        scale = max(1.0, max(abs(x) for x in ea))
        if clustered(ea) or clustered(eb):
            d = max(abs(x - y) / scale ** k
                    for k, (x, y) in enumerate(zip(poly(ea), poly(eb)), start=1))
            if not d <= EIG_TOL:
                errors.append(f"{key}: characteristic polynomial differs by {d:.2e}")
            d = abs(float(a[7]) - float(b[7]))
            if not d <= CLUSTER_RHO_TOL * scale:
                errors.append(f"{key}: spectral radius differs by {d:.2e} (clustered roots)")
        else:
            d = max(abs(x - y) for x, y in zip(ea, eb))
            d = max(d, abs(float(a[7]) - float(b[7])))
            if not d <= EIG_TOL * scale:
                errors.append(f"{key}: eigenvalues differ by {d:.2e}")


def check():
    errors = []
    tmp = tempfile.mkdtemp()
    try:
        for committed, write, compare in [
            (SOLUTIONS, write_solutions, compare_solutions),
            (AMPLIFICATION, write_amplification, compare_amplification),
        ]:
            fresh = os.path.join(tmp, os.path.basename(committed))
            write(fresh)
            if not os.path.exists(committed):
                errors.append(f"{committed} is missing")
                continue
            compare(read_csv(committed), read_csv(fresh), errors)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    if errors:
        print(f"crosscheck.py --check: the regenerated data differ from the committed files "
              f"({len(errors)} differences; regenerate with `{COMMAND}` and commit, or find "
              "what changed):", file=sys.stderr)
        for e in errors[:20]:
            print("  " + e, file=sys.stderr)
        if len(errors) > 20:
            print(f"  ... and {len(errors) - 20} more", file=sys.stderr)
        return 1
    print(f"crosscheck.py --check: {SOLUTIONS} and {AMPLIFICATION} agree with a fresh run "
          "within round-off")
    return 0


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--check", action="store_true",
                        help="regenerate into a scratch folder and compare with the committed "
                             "files; exit 1 on a difference beyond round-off")
    args = parser.parse_args()
    if args.check:
        return check()
    write_solutions(SOLUTIONS)
    write_amplification(AMPLIFICATION)
    return 0


if __name__ == "__main__":
    sys.exit(main())
