#!/usr/bin/env python3
"""Exact eigenvalues of one step's amplification matrix, for stepgauge's accuracy tests.

The roots of the characteristic polynomial of the generalised-alpha family (Newmark-beta,
HHT-alpha, WBZ-alpha and generalised-alpha as members) and of the central difference, computed
with mpmath at 50 significant digits from the parameters as stored in double precision, and
written correctly rounded to double precision. Nothing of stepgauge is used: the polynomial is
formed here from the step equations, `P(z) = M(z) (z - 1)^2 + 2 xi Omega E(z) G(z) (z - 1)
+ Omega^2 E(z) N(z)` with

    M(z) = (1 - alpha_m) z + alpha_m,   E(z) = (1 - alpha_f) z + alpha_f,
    G(z) = gamma z + 1 - gamma,         N(z) = beta z^2 + (gamma + 1/2 - 2 beta) z + 1/2 - gamma + beta,

which follows from `(z - 1) U = V + ((1/2 - beta) + beta z) A`, `(z - 1) V = ((1 - gamma) +
gamma z) A` and the alpha-weighted balance `((1 - alpha_m) z + alpha_m) A + 2 xi Omega ((1 -
alpha_f) z + alpha_f) V + Omega^2 ((1 - alpha_f) z + alpha_f) U = 0` (Chung & Hulbert 1993,
J. Appl. Mech. 60:371-375, eqs. for the generalised-alpha method; Newmark 1959, Hilber, Hughes &
Taylor 1977 and Wood, Bossak & Zienkiewicz 1980 as its members). The central difference in its
half-step form has `z^3 + (Omega^2 + Z - 2) z^2 + (1 - Z) z` (damping force from the lagged
half-step velocity) and `z^3 + (Omega^2 + 3 Z / 2 - 2) z^2 + (1 - 2 Z) z + Z / 2` (predicted
velocity), `Z = 2 xi Omega` (the stepping equations of docs/explicit.md).

Four kinds of points:
- `random`: a scheme drawn from a family (its parameter drawn uniformly), `Omega` log-uniform on
  [1e-4, 1e6], `xi` uniform on [0, 1] (Python's `random.Random` with a fixed seed: the same
  draws on every platform);
- `cluster`: points next to where two roots meet (the cubic's discriminant changes sign as
  `Omega` grows, found by bisection in mpmath), at relative offsets 1e-2 .. 1e-12 on both sides:
  roots `sqrt(offset)` apart, the hardest points for any eigenvalue method;
- `found`: single points that a search found hard (listed in `FOUND` with where they came from);
- `coalescence`: for the schemes and damping ratios of `COALESCENCE` (the central difference in
  both forms at xi 0, 0.01, 0.1, 0.3 and 0.6; Newmark's linear acceleration; generalised-alpha
  with rho_inf = 0; Newmark with gamma = 0.6, unconditionally and conditionally stable), every
  sign change of the discriminant located to about 50 digits in exact arithmetic on the binary
  inputs, then the doubles within two units in the last place of it and at relative offsets
  1e-15 .. 1e-6 on both sides: roots about 1e-8 .. 1e-3 apart (and, where there is no sign
  change, generalised-alpha with rho_inf = 0 at Omega 1e2 .. 1e8, closing in on a triple root).

Run from the repository root:

    python3 tests/data/exact_roots.py            # regenerate tests/data/exact_roots.csv
    python3 tests/data/exact_roots.py OUT.csv    # write it elsewhere
    python3 tests/data/exact_roots.py --check    # regenerate into a scratch folder and compare

`--check` exits with status 1 and names the differences when a fresh run differs from the
committed table: the inputs must be equal as written, the roots within 4e-16 of the largest
modulus (they are correctly rounded from 50 digits, so a rerun gives the same digits). The
header's version line may differ.
Requirements: tests/data/requirements.txt (mpmath)
"""
import argparse
import math
import os
import random
import shutil
import sys
import tempfile

import mpmath as mp

mp.mp.dps = 50

COMMITTED = "tests/data/exact_roots.csv"
SEED = 20261202
RANDOM_POINTS = 3000
CHECK_TOL = 4e-16


# Parameters of the family members in double precision (the formulas of the papers cited in
# `src/params.rs`); only the resulting doubles matter: they are written to the table, and the
# tests step and analyse exactly those values.
def generalized_alpha(rho):
    am = (2.0 * rho - 1.0) / (rho + 1.0)
    af = rho / (rho + 1.0)
    g = 0.5 - am + af
    return ("alpha", am, af, 0.25 * (1.0 - am + af) ** 2, g)


def hht(rho):
    a = (1.0 - rho) / (1.0 + rho)
    return ("alpha", 0.0, a, 0.25 * (1.0 + a) ** 2, 0.5 + a)


def wbz(rho):
    am = (rho - 1.0) / (rho + 1.0)
    return ("alpha", am, 0.0, 0.25 * (1.0 - am) ** 2, 0.5 - am)


def newmark(beta, gamma):
    return ("alpha", 0.0, 0.0, beta, gamma)


CD_LAGGED = ("cd_lagged", 0.0, 0.0, 0.0, 0.0)
CD_PREDICTED = ("cd_predicted", 0.0, 0.0, 0.0, 0.0)

NAMED = (
    [generalized_alpha(r) for r in (0.0, 0.3, 0.5, 0.8, 0.95, 1.0)]
    + [hht(r) for r in (0.5, 0.7, 0.9, 1.0)]
    + [wbz(r) for r in (0.0, 0.2, 0.5, 0.9)]
    + [newmark(0.25, 0.5), newmark(1.0 / 6.0, 0.5), newmark(0.3025, 0.6), newmark(0.4, 0.7)]
    + [CD_LAGGED, CD_PREDICTED]
)
CLUSTER_XI = (0.0, 0.01, 0.05, 0.2, 0.7, 1.0)
OFFSETS = [s * 10.0 ** -k for k in (2, 4, 6, 8, 10, 12) for s in (-1.0, 1.0)]

# Where roots meet, sampled much closer (the coalescence rows): each scheme at each damping ratio,
# every Omega in [1e-4, 1e6] where the discriminant changes sign found in exact arithmetic on the
# binary parameters and damping ratio (mpf of the double, never of a decimal string: one unit in
# the last place of an input moves a double root by about 1e-8), then the doubles nearest to it
# (the nearest and two on each side) and Omega (1 +/- s) rounded to double for s = 1e-15 .. 1e-6.
COALESCENCE = (
    [(CD_LAGGED, xi) for xi in (0.0, 0.01, 0.1, 0.3, 0.6)]
    + [(CD_PREDICTED, xi) for xi in (0.0, 0.01, 0.1, 0.3, 0.6)]
    + [(newmark(1.0 / 6.0, 0.5), xi) for xi in (0.0, 0.05)]
    + [(generalized_alpha(0.0), xi) for xi in (0.0, 0.05, 1.0)]
    + [(newmark(0.3025, 0.6), xi) for xi in (0.0, 0.05)]
    + [(newmark(0.2, 0.6), xi) for xi in (0.0, 0.05)]
)
COALESCENCE_OFFSETS = [s * 10.0 ** -k for k in range(6, 16) for s in (-1.0, 1.0)]
COALESCENCE_ULPS = (-2, -1, 0, 1, 2)
# Generalised-alpha with rho_inf = 0 has no sign change at xi = 0 or 0.05: its three roots close
# in on a triple root at 0 as Omega grows (about Omega^(-2/3) apart). Rows at these Omega.
TRIPLE = [(generalized_alpha(0.0), xi, 10.0 ** k) for xi in (0.0, 0.05) for k in range(2, 9)]

# (scheme, Omega, xi, where it came from)
FOUND = [
    (("alpha", -0.8410994801324284, 0.0, 0.8474118239359745, 1.3410994801324283),
     214855.5745088225, 0.0010943700573361297,
     "proptest in CI, 2026-12-02: a WBZ pair 1.6e-4 apart at large Omega"),
    (("alpha", 0.46525754793179913, 0.488419182643933, 0.26171493268670154, 0.523161634712134),
     303.70880511611296, 0.8050776598051473,
     "random search, 2e6 points: the closed form's largest error"),
    (("alpha", 0.0, 0.0, 0.03989719109090939, 0.6332107442216107),
     2.2714148164001453, 0.31000111405721253,
     "random search, 2e6 points: a large error of the Schur form"),
]


def mul(u, v):
    """Product of two polynomials given as coefficient lists, highest degree first."""
    out = [mp.mpf(0)] * (len(u) + len(v) - 1)
    for i, ui in enumerate(u):
        for j, vj in enumerate(v):
            out[i + j] += ui * vj
    return out


def add(*ps):
    """Sum of polynomials given as coefficient lists, highest degree first."""
    width = max(len(q) for q in ps)
    out = [mp.mpf(0)] * width
    for q in ps:
        for i, qi in enumerate(q):
            out[width - len(q) + i] += qi
    return out


def coefficients(scheme, omega, xi):
    """Monic coefficients [c2, c1, c0] of det(z I - A) in mpmath."""
    kind, am, af, b, g = scheme
    o, x = mp.mpf(omega), mp.mpf(xi)
    z = 2 * x * o
    if kind == "cd_lagged":
        return [o**2 + z - 2, 1 - z, mp.mpf(0)]
    if kind == "cd_predicted":
        return [o**2 + mp.mpf(3) / 2 * z - 2, 1 - 2 * z, z / 2]
    am, af, b, g = (mp.mpf(v) for v in (am, af, b, g))
    half = mp.mpf(1) / 2
    # P(z) = M (z - 1)^2 + Z E G (z - 1) + Omega^2 E N.
    m = [1 - am, am]
    e = [1 - af, af]
    gg = [g, 1 - g]
    n = [b, g + half - 2 * b, half - g + b]
    zm1 = [mp.mpf(1), mp.mpf(-1)]
    poly = add(mul(m, mul(zm1, zm1)), [z * c for c in mul(e, mul(gg, zm1))],
               [o**2 * c for c in mul(e, n)])
    lead = poly[0]
    return [c / lead for c in poly[1:]]


def discriminant(c):
    a, b, d = c
    return 18 * a * b * d - 4 * a**3 * d + a**2 * b**2 - 4 * b**3 - 27 * d**2


def roots(scheme, omega, xi):
    c = coefficients(scheme, omega, xi)
    if c[2] == 0:
        # The lagged central difference: a root at 0 and the quadratic's two.
        z = mp.polyroots([1, c[0], c[1]], maxsteps=200, extraprec=200) + [mp.mpf(0)]
    else:
        z = mp.polyroots([1] + c, maxsteps=400, extraprec=400)
    z = [mp.mpc(r) for r in z]
    # Decreasing modulus, then decreasing imaginary part.
    z.sort(key=lambda r: (-abs(r), -r.imag))
    return z


def sign_changes(scheme, xi, steps=140):
    """The Omega in [1e-4, 1e6] where the discriminant changes sign, as mpf, bisected `steps`
    times from a grid of 401 points (140: to about 40 digits; more for the coalescence rows)."""
    grid = [10.0 ** (-4.0 + 10.0 * i / 400) for i in range(401)]
    disc = [discriminant(coefficients(scheme, o, xi)) for o in grid]
    out = []
    for lo, hi, dlo, dhi in zip(grid, grid[1:], disc, disc[1:]):
        if dlo == 0 or dhi == 0 or (dlo > 0) == (dhi > 0):
            continue
        a, b = mp.mpf(lo), mp.mpf(hi)
        for _ in range(steps):
            mid = (a + b) / 2
            dm = discriminant(coefficients(scheme, mid, xi))
            if (dm > 0) == (dlo > 0):
                a = mid
            else:
                b = mid
        out.append((a + b) / 2)
    return out


def cluster_omegas(scheme, xi):
    """The Omega in [1e-4, 1e6] where the discriminant changes sign (to 40 digits)."""
    return [float(o) for o in sign_changes(scheme, xi)]


def coalescence_omegas(scheme, xi):
    """The doubles next to each coalescence point (exact to the working precision): the nearest
    ones, and Omega (1 +/- s) rounded to double."""
    out = []
    for oc in sign_changes(scheme, xi, steps=170):
        nearest = float(oc)
        for k in COALESCENCE_ULPS:
            o = nearest
            for _ in range(abs(k)):
                o = math.nextafter(o, math.inf if k > 0 else -math.inf)
            out.append(o)
        for s in COALESCENCE_OFFSETS:
            out.append(float(oc * (1 + mp.mpf(s))))
    return out


def points():
    rng = random.Random(SEED)
    pts = []
    families = [
        lambda: generalized_alpha(rng.random()),
        lambda: hht(0.5 + 0.5 * rng.random()),
        lambda: wbz(rng.random()),
        lambda: newmark(0.5 * rng.random(), 0.5 + 0.3 * rng.random()),
        lambda: CD_LAGGED,
        lambda: CD_PREDICTED,
    ]
    for _ in range(RANDOM_POINTS):
        scheme = families[rng.randrange(len(families))]()
        omega = 10.0 ** (-4.0 + 10.0 * rng.random())
        xi = rng.random()
        pts.append(("random", scheme, omega, xi))
    for scheme in NAMED:
        for xi in CLUSTER_XI:
            for o in cluster_omegas(scheme, xi):
                for s in OFFSETS:
                    pts.append(("cluster", scheme, o * (1.0 + s), xi))
    for scheme, omega, xi, _ in FOUND:
        pts.append(("found", scheme, omega, xi))
    for scheme, xi in COALESCENCE:
        for o in coalescence_omegas(scheme, xi):
            pts.append(("coalescence", scheme, o, xi))
    for scheme, xi, o in TRIPLE:
        pts.append(("coalescence", scheme, o, xi))
    return pts


def write(out):
    pts = points()
    with open(out, "w") as f:
        f.write("# Exact eigenvalues of one step's amplification matrix (50-digit mpmath, correctly\n")
        f.write("# rounded to double): decreasing modulus, then decreasing imaginary part.\n")
        f.write("# command: python3 tests/data/exact_roots.py\n")
        f.write(f"# python {sys.version.split()[0]}, mpmath {mp.__version__}\n")
        f.write(f"# {RANDOM_POINTS} random points (seed {SEED}), cluster points next to each "
                "sign change of the discriminant, the found points, and coalescence points "
                "(1e-15 .. 1e-6 and 0..2 ulps from each sign change, for the COALESCENCE "
                "schemes of the script):\n")
        for scheme, omega, xi, why in FOUND:
            f.write(f"#   found at Omega {omega!r}, xi {xi!r}: {why}\n")
        f.write("kind,scheme,alpha_m,alpha_f,beta,gamma,omega,xi,"
                "z1_re,z1_im,z2_re,z2_im,z3_re,z3_im\n")
        for kind, scheme, omega, xi in pts:
            z = roots(scheme, omega, xi)
            name, am, af, b, g = scheme
            vals = [repr(v) for v in (am, af, b, g, omega, xi)]
            for r in z:
                vals += [repr(float(r.real)), repr(float(r.imag))]
            f.write(",".join([kind, name] + vals) + "\n")


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
        fresh = os.path.join(tmp, "exact_roots.csv")
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
                errors.append(f"row {i + 1}: inputs differ: {a[:8]} vs {b[:8]}")
                continue
            za = [complex(float(a[8 + 2 * k]), float(a[9 + 2 * k])) for k in range(3)]
            zb = [complex(float(b[8 + 2 * k]), float(b[9 + 2 * k])) for k in range(3)]
            scale = max(1.0, max(abs(z) for z in za))
            d = max(abs(x - y) for x, y in zip(za, zb))
            if not d <= CHECK_TOL * scale:
                errors.append(f"row {i + 1}: roots differ by {d / scale:.2e} of the scale")
    if errors:
        print(f"exact_roots.py --check: {COMMITTED} differs from a fresh run "
              f"({len(errors)} differences; regenerate with `python3 tests/data/exact_roots.py` "
              "and commit, or find what changed):", file=sys.stderr)
        for e in errors[:20]:
            print("  " + e, file=sys.stderr)
        return 1
    print(f"exact_roots.py --check: {COMMITTED} agrees with a fresh run")
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
