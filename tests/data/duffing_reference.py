#!/usr/bin/env python3
"""Reference solution of the hardening (Duffing-type) oscillator used by stepgauge's tests.

    m u'' + c u' + k u + k3 u^3 = F0 sin(w t),   u(0) = u0, u'(0) = v0

integrated by SciPy's DOP853 (an 8th-order Runge-Kutta method) at tight tolerances, independently
of stepgauge. Writes two tables with a header that records the command line, the parameters and
the library versions: tests/data/duffing_reference.csv (released from u0 = 0.5) and
tests/data/duffing_from_rest.csv (the same oscillator and load from rest, u0 = v0 = 0: the load
starts at zero, so an implicit run's first Newton steps see almost no force).

Run from the repository root:

    python3 tests/data/duffing_reference.py            # regenerate the tables
    python3 tests/data/duffing_reference.py DIR        # write them into another folder
    python3 tests/data/duffing_reference.py --check    # regenerate into a scratch folder and
                                                       # compare with the committed tables

`--check` exits with status 1 and names the differences when a fresh run differs from the
committed table beyond round-off (same times exactly; u and v within 1e-9 of the run's largest
|u| and |v|: a rerun with other library versions moves the values by about the integration
error, which Radau bounds at ~1e-12, while any real change moves them by far more). The header's
version line and the measured agreement are allowed to differ.
Requirements: tests/data/requirements.txt
"""
import argparse
import os
import shutil
import sys
import tempfile

import numpy as np
import scipy
from scipy.integrate import solve_ivp

# Parameters of our own (a scenario for the tests, not a physical system).
M, C, K, K3 = 1.0, 0.1, 1.0, 5.0
F0, W = 2.0, 1.2
T_END, DT_OUT = 10.0, 0.1
# The tables: file name and start (u0, v0).
TABLES = [("duffing_reference.csv", 0.5, 0.0), ("duffing_from_rest.csv", 0.0, 0.0)]


def rhs(t, y):
    u, v = y
    return [v, (F0 * np.sin(W * t) - C * v - K * u - K3 * u**3) / M]


COMMITTED_DIR = "tests/data"
CHECK_TOL = 1e-9


def write(out, U0, V0):
    times = np.round(np.arange(0.0, T_END + 0.5 * DT_OUT, DT_OUT), 12)
    sol = solve_ivp(rhs, (0.0, T_END), [U0, V0], method="DOP853", t_eval=times,
                    rtol=1e-13, atol=1e-15)
    assert sol.success, sol.message
    # Independent check with an implicit method of another family (Radau IIA, order 5).
    check = solve_ivp(rhs, (0.0, T_END), [U0, V0], method="Radau", t_eval=times,
                      rtol=1e-12, atol=1e-14)
    assert check.success, check.message
    diff = np.max(np.abs(check.y - sol.y))
    assert diff < 1e-8, f"DOP853 and Radau differ by {diff}"
    with open(out, "w") as f:
        f.write("# command: python3 tests/data/duffing_reference.py\n")
        f.write(f"# python {sys.version.split()[0]}, numpy {np.__version__}, scipy {scipy.__version__}\n")
        f.write("# solve_ivp DOP853 rtol=1e-13 atol=1e-15; Radau rtol=1e-12 agrees within "
                f"{diff:.1e}\n")
        f.write(f"# m={M} c={C} k={K} k3={K3} F0={F0} w={W} u0={U0} v0={V0}\n")
        f.write("t,u,v\n")
        for t, u, v in zip(sol.t, sol.y[0], sol.y[1]):
            f.write(f"{float(t)!r},{float(u)!r},{float(v)!r}\n")


def read(path):
    """(stable header lines, column line, rows): the version line and the measured agreement
    are left out of the header."""
    header, columns, rows = [], None, []
    with open(path) as f:
        for line in f:
            line = line.rstrip("\n")
            if line.startswith("#"):
                if not line.startswith("# python ") and "agrees within" not in line:
                    header.append(line)
            elif columns is None:
                columns = line
            elif line:
                rows.append(line.split(","))
    return header, columns, rows


def check():
    status = 0
    for name, u0, v0 in TABLES:
        status = max(status, check_one(name, u0, v0))
    return status


def check_one(name, u0, v0):
    COMMITTED = os.path.join(COMMITTED_DIR, name)
    errors = []
    tmp = tempfile.mkdtemp()
    try:
        fresh = os.path.join(tmp, name)
        write(fresh, u0, v0)
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
        scale = [max(abs(float(r[j])) for r in r0) for j in (1, 2)]
        for a, b in zip(r0, r1):
            if a[0] != b[0]:
                errors.append(f"times differ: {a[0]} vs {b[0]}")
                continue
            for j, name in [(1, "u"), (2, "v")]:
                d = abs(float(a[j]) - float(b[j]))
                if not d <= CHECK_TOL * scale[j - 1]:
                    errors.append(f"t={a[0]}: {name} differs by {d:.2e}")
    if errors:
        print(f"duffing_reference.py --check: {COMMITTED} differs from a fresh run "
              f"({len(errors)} differences; regenerate with "
              "`python3 tests/data/duffing_reference.py` and commit, or find what changed):",
              file=sys.stderr)
        for e in errors[:20]:
            print("  " + e, file=sys.stderr)
        return 1
    print(f"duffing_reference.py --check: {COMMITTED} agrees with a fresh run within round-off")
    return 0


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("out", nargs="?", default=COMMITTED_DIR,
                        help="the folder to write the tables into")
    parser.add_argument("--check", action="store_true",
                        help="regenerate into a scratch folder and compare with the committed "
                             "table; exit 1 on a difference beyond round-off")
    args = parser.parse_args()
    if args.check:
        return check()
    for name, u0, v0 in TABLES:
        write(os.path.join(args.out, name), u0, v0)
    return 0


if __name__ == "__main__":
    sys.exit(main())
