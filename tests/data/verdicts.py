#!/usr/bin/env python3
"""Stability verdicts of parameter sets by an exact scan, for stepgauge's verdict tests.

For each parameter set and damping ratio of `CASES` (sets of our own: off-family and
first-order sets, Newmark with gamma < 1/2, the published families as controls), the spectral
radius of one step's amplification matrix is computed with mpmath at 60 significant digits from
the parameters as stored in double precision (mpf of the double: the exact binary inputs), on a
log grid of Omega = omega dt from 1e-6 to 1e8 (200 points a decade). A point counts as unstable
when the spectral radius exceeds 1 + 1e-45 (the margin only absorbs the 60-digit rounding of
roots that lie on the unit circle, such as the trapezoidal rule's). Then:

- unstable at the first grid point and the next two: "unstable" (for every small step), and
  the first stable point after them, if any, bisected ("stable again from");
- otherwise the first unstable grid point, and the critical Omega bisected (100 halvings, in
  mpmath) between it and the stable point before it; then, scanning on, the first stable point
  after it, if any, bisected likewise ("stable again from");
- no unstable point: "unconditional", confirmed by the spectral radius at Omega = 1e30 (the limit
  rho_inf) not exceeding 1 + 1e-45.

Nothing of stepgauge is used: the characteristic polynomial is formed here from the step
equations, `P(z) = M(z) (z - 1)^2 + 2 xi Omega E(z) G(z) (z - 1) + Omega^2 E(z) N(z)` with

    M(z) = (1 - alpha_m) z + alpha_m,   E(z) = (1 - alpha_f) z + alpha_f,
    G(z) = gamma z + 1 - gamma,         N(z) = beta z^2 + (gamma + 1/2 - 2 beta) z + 1/2 - gamma + beta

(Chung & Hulbert 1993, J. Appl. Mech. 60:371-375, with Newmark 1959, Hilber, Hughes & Taylor
1977 and Wood, Bossak & Zienkiewicz 1980 as members), and for the central difference in its
half-step form `z^3 + (Omega^2 + Z - 2) z^2 + (1 - Z) z` (lagged damping velocity) or
`z^3 + (Omega^2 + 3 Z / 2 - 2) z^2 + (1 - 2 Z) z + Z / 2` (predicted), `Z = 2 xi Omega` (the
stepping equations of docs/explicit.md).

A scan can miss an unstable window narrower than its grid (1.2 % of Omega here); the Rust test
compares the scan's verdicts with stepgauge's exact criterion, which would then report a window
the scan did not see and fail, so that a miss is found, not hidden.

Run from the repository root:

    python3 tests/data/verdicts.py            # regenerate tests/data/verdicts.csv
    python3 tests/data/verdicts.py OUT.csv    # write it elsewhere
    python3 tests/data/verdicts.py --check    # regenerate into a scratch folder and compare

`--check` exits with status 1 and names the differences when a fresh run differs from the
committed table (verdicts equal, critical values within 1e-12 relative). The header's version
line may differ.
Requirements: tests/data/requirements.txt (mpmath)
"""
import argparse
import os
import shutil
import sys
import tempfile

import mpmath as mp

mp.mp.dps = 60

COMMITTED = "tests/data/verdicts.csv"
PER_DECADE = 200
LOG_MIN, LOG_MAX = -6, 8
MARGIN = mp.mpf("1e-45")
CHECK_TOL = 1e-12


def alpha(am, af, b, g):
    return ("alpha", am, af, b, g)


CD_LAGGED = ("cd_lagged", 0.0, 0.0, 0.0, 0.0)
CD_PREDICTED = ("cd_predicted", 0.0, 0.0, 0.0, 0.0)


def generalized_alpha(rho):
    am = (2.0 * rho - 1.0) / (rho + 1.0)
    af = rho / (rho + 1.0)
    return alpha(am, af, 0.25 * (1.0 - am + af) ** 2, 0.5 - am + af)


_ga08 = generalized_alpha(0.8)

# (name, scheme, damping ratios): our own sets, each chosen to test a rule of the verdicts.
CASES = [
    # gamma above the second-order value: the Chung & Hulbert bound does not apply; rho_inf > 1.
    ("ga-gamma-0.9", alpha(-0.001, 0.0, 0.2505, 0.9), (0.0, 0.05, 0.2)),
    # Newmark with gamma < 1/2: unstable without damping, conditionally stable with it.
    ("newmark-gamma-0.4", alpha(0.0, 0.0, 0.25, 0.4), (0.0, 0.01, 0.05, 0.2)),
    ("newmark-gamma-0.45", alpha(0.0, 0.0, 0.3, 0.45), (0.0, 0.1)),
    # Newmark, conditionally stable (gamma >= 1/2 > 2 beta / gamma); the closed forms.
    ("newmark-beta-0.2-gamma-0.6", alpha(0.0, 0.0, 0.2, 0.6), (0.0, 0.05, 0.2)),
    ("linear-acceleration", alpha(0.0, 0.0, 1.0 / 6.0, 0.5), (0.0, 0.1)),
    ("explicit-newmark", alpha(0.0, 0.0, 0.0, 0.5), (0.0, 0.1)),
    ("explicit-newmark-gamma-0.6", alpha(0.0, 0.0, 0.0, 0.6), (0.0, 0.1)),
    # HHT relations with alpha outside [-1/3, 0].
    ("hht-alpha-minus-0.4", alpha(0.0, 0.4, 0.49, 0.9), (0.0, 0.05)),
    # Second-order gamma, outside the Chung & Hulbert bound.
    ("ga-alpha-m-above-alpha-f", alpha(0.3, 0.1, 0.3, 0.3), (0.0, 0.05)),
    ("ga-alpha-f-above-half", alpha(0.6, 0.6, 0.3, 0.5), (0.0, 0.05)),
    ("ga-beta-below-bound", alpha(-0.2, 0.1, 0.3, 0.8), (0.0, 0.05)),
    # First-order gamma on a generalised-alpha set.
    ("ga-0.8-gamma-plus-0.1", alpha(_ga08[1], _ga08[2], _ga08[3], _ga08[4] + 0.1), (0.0, 0.05)),
    # Off-family sets.
    ("off-family-a", alpha(0.2, 0.35, 0.33, 0.62), (0.0, 0.1)),
    ("off-family-b", alpha(-0.5, 0.2, 0.15, 1.1), (0.0, 0.1)),
    ("off-family-c", alpha(-0.3, 0.0, 0.3, 0.55), (0.0, 0.1)),
    # The central difference in both forms (closed forms: 2 (sqrt(1 + xi^2) - xi) lagged).
    ("central-difference-lagged", CD_LAGGED, (0.0, 0.1, 0.5)),
    ("central-difference-predicted", CD_PREDICTED, (0.0, 0.1, 0.5)),
    # Controls: unconditionally stable published sets.
    ("trapezoidal", alpha(0.0, 0.0, 0.25, 0.5), (0.0, 0.1)),
    ("generalized-alpha-0.8", _ga08, (0.0, 0.3)),
]


def coefficients(scheme, omega, xi):
    """Coefficients [P3, P2, P1, P0] of the characteristic polynomial, in mpmath."""
    kind, am, af, b, g = scheme
    o, x = mp.mpf(omega), mp.mpf(xi)
    z = 2 * x * o
    if kind == "cd_lagged":
        return [mp.mpf(1), o**2 + z - 2, 1 - z, mp.mpf(0)]
    if kind == "cd_predicted":
        return [mp.mpf(1), o**2 + mp.mpf(3) / 2 * z - 2, 1 - 2 * z, z / 2]
    am, af, b, g = (mp.mpf(v) for v in (am, af, b, g))
    half = mp.mpf(1) / 2
    m1, m0 = 1 - am, am
    e1, e0 = 1 - af, af
    g1, g0 = g, 1 - g
    n2, n1, n0 = b, g + half - 2 * b, half - g + b
    # P = M (z - 1)^2 + Z E G (z - 1) + Omega^2 E N, expanded by hand (highest degree first).
    mzz = [m1, m0 - 2 * m1, m1 - 2 * m0, m0]
    eg = [e1 * g1, e1 * g0 + e0 * g1, e0 * g0]
    egz = [eg[0], eg[1] - eg[0], eg[2] - eg[1], -eg[2]]
    en = [e1 * n2, e1 * n1 + e0 * n2, e1 * n0 + e0 * n1, e0 * n0]
    return [mzz[i] + z * egz[i] + o**2 * en[i] for i in range(4)]


def rho(scheme, omega, xi):
    c = coefficients(scheme, omega, xi)
    if c[3] == 0:
        r = mp.polyroots(c[:3], maxsteps=200, extraprec=200)
    else:
        r = mp.polyroots(c, maxsteps=400, extraprec=400)
    return max(abs(x) for x in r)


def unstable(scheme, omega, xi):
    return rho(scheme, omega, xi) > 1 + MARGIN


def bisect(scheme, xi, lo, hi, lo_unstable):
    """The point where `unstable` changes between lo (with value lo_unstable) and hi."""
    a, b = mp.mpf(lo), mp.mpf(hi)
    for _ in range(100):
        m = (a + b) / 2
        if unstable(scheme, m, xi) == lo_unstable:
            a = m
        else:
            b = m
    return (a + b) / 2


def verdict(scheme, xi):
    """(verdict, omega_crit or None, stable_again_from or None)."""
    n = (LOG_MAX - LOG_MIN) * PER_DECADE
    grid = [10.0 ** (LOG_MIN + i / PER_DECADE) for i in range(n + 1)]
    def stable_again(i):
        """The first change back to stability after grid point i (unstable), bisected."""
        before = grid[i]
        for o2 in grid[i + 1:]:
            if not unstable(scheme, o2, xi):
                return bisect(scheme, xi, before, o2, True)
            before = o2
        return None

    if all(unstable(scheme, o, xi) for o in grid[:3]):
        return "unstable", None, stable_again(2)
    prev = grid[0]
    for i, o in enumerate(grid):
        if unstable(scheme, o, xi):
            return "conditional", bisect(scheme, xi, prev, o, False), stable_again(i)
        prev = o
    if rho(scheme, mp.mpf("1e30"), xi) > 1 + MARGIN:
        raise SystemExit(f"{scheme} xi {xi}: unstable beyond the scan only")
    return "unconditional", None, None


def fmt(x):
    return "" if x is None else repr(float(x))


def write(out):
    with open(out, "w") as f:
        f.write("# Stability verdicts by an exact scan (mpmath, 60 digits; see the script's docstring)\n")
        f.write("# command: python3 tests/data/verdicts.py\n")
        f.write(f"# python {sys.version.split()[0]}, mpmath {mp.__version__}\n")
        f.write(f"# grid: Omega 1e{LOG_MIN} .. 1e{LOG_MAX}, {PER_DECADE} points a decade; "
                "unstable where rho > 1 + 1e-45; critical values bisected 100 times\n")
        f.write("name,scheme,alpha_m,alpha_f,beta,gamma,xi,verdict,omega_crit,stable_again_from\n")
        for name, scheme, xis in CASES:
            kind, am, af, b, g = scheme
            for xi in xis:
                v, crit, again = verdict(scheme, xi)
                vals = [repr(x) for x in (am, af, b, g, xi)]
                f.write(",".join([name, kind] + vals + [v, fmt(crit), fmt(again)]) + "\n")


def read(path):
    header, columns, rows = [], None, []
    with open(path) as f:
        for line in f:
            line = line.rstrip("\n")
            if line.startswith("#"):
                if not line.startswith("# python"):
                    header.append(line)
            elif columns is None:
                columns = line
            elif line:
                rows.append(line.split(","))
    return header, columns, rows


def check():
    errors = []
    tmp = tempfile.mkdtemp()
    try:
        fresh = os.path.join(tmp, "verdicts.csv")
        write(fresh)
        (h0, c0, r0), (h1, c1, r1) = read(COMMITTED), read(fresh)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    if h0 != h1:
        errors.append(f"header differs: {h0} vs {h1}")
    if c0 != c1:
        errors.append(f"columns differ: {c0} vs {c1}")
    if len(r0) != len(r1):
        errors.append(f"{len(r0)} rows committed, {len(r1)} regenerated")
    else:
        for i, (a, b) in enumerate(zip(r0, r1)):
            if a[:8] != b[:8]:
                errors.append(f"row {i + 1}: {a[:8]} vs {b[:8]}")
                continue
            for k in (8, 9):
                if (a[k] == "") != (b[k] == ""):
                    errors.append(f"row {i + 1}: column {k + 1}: {a[k]!r} vs {b[k]!r}")
                elif a[k] and abs(float(a[k]) - float(b[k])) > CHECK_TOL * abs(float(a[k])):
                    errors.append(f"row {i + 1}: column {k + 1}: {a[k]} vs {b[k]}")
    if errors:
        print(f"verdicts.py --check: {COMMITTED} differs from a fresh run ({len(errors)} "
              "differences; regenerate with `python3 tests/data/verdicts.py` and commit, or find "
              "what changed):", file=sys.stderr)
        for e in errors[:20]:
            print("  " + e, file=sys.stderr)
        return 1
    print(f"verdicts.py --check: {COMMITTED} agrees with a fresh run")
    return 0


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("out", nargs="?", default=COMMITTED, help="where to write the table")
    parser.add_argument("--check", action="store_true",
                        help="regenerate into a scratch folder and compare with the committed "
                             "table; exit 1 on a difference")
    args = parser.parse_args()
    if args.check:
        return check()
    write(args.out)
    return 0


if __name__ == "__main__":
    sys.exit(main())
