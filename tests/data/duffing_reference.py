#!/usr/bin/env python3
"""Reference solution of the hardening (Duffing-type) oscillator used by tempora's tests.

    m u'' + c u' + k u + k3 u^3 = F0 sin(w t),   u(0) = u0, u'(0) = v0

integrated by SciPy's DOP853 (an 8th-order Runge-Kutta method) at tight tolerances, independently
of tempora. Writes tests/data/duffing_reference.csv with a header that records the command line,
the parameters and the library versions.

Run from the repository root:  python3 tests/data/duffing_reference.py
Requirements: tests/data/requirements.txt
"""
import sys

import numpy as np
import scipy
from scipy.integrate import solve_ivp

# Parameters of our own (a scenario for the tests, not a physical system).
M, C, K, K3 = 1.0, 0.1, 1.0, 5.0
F0, W = 2.0, 1.2
U0, V0 = 0.5, 0.0
T_END, DT_OUT = 10.0, 0.1


def rhs(t, y):
    u, v = y
    return [v, (F0 * np.sin(W * t) - C * v - K * u - K3 * u**3) / M]


def main():
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
    out = sys.argv[1] if len(sys.argv) > 1 else "tests/data/duffing_reference.csv"
    with open(out, "w") as f:
        f.write("# command: python3 tests/data/duffing_reference.py\n")
        f.write(f"# python {sys.version.split()[0]}, numpy {np.__version__}, scipy {scipy.__version__}\n")
        f.write("# solve_ivp DOP853 rtol=1e-13 atol=1e-15; Radau rtol=1e-12 agrees within "
                f"{diff:.1e}\n")
        f.write(f"# m={M} c={C} k={K} k3={K3} F0={F0} w={W} u0={U0} v0={V0}\n")
        f.write("t,u,v\n")
        for t, u, v in zip(sol.t, sol.y[0], sol.y[1]):
            f.write(f"{float(t)!r},{float(u)!r},{float(v)!r}\n")


if __name__ == "__main__":
    main()
