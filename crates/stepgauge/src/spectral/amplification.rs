//! Amplification matrices of the generalised-alpha family.

use nalgebra::linalg::Schur;
use nalgebra::{Complex, Matrix3};

use crate::params::AlphaParams;

/// The amplification matrix `A(Omega, xi)` of the generalised-alpha family on the scaled state
/// `x_n = (u_n, dt v_n, dt^2 a_n)` of one mode (`x_{n+1} = A x_n`), `Omega = omega dt`, `xi` the
/// physical damping ratio.
///
/// With `D = (1 - alpha_m) + 2 xi Omega (1 - alpha_f) gamma + Omega^2 (1 - alpha_f) beta`, every
/// entry is written over `D` with its numerator simplified by hand, so that no entry is formed as
/// `1 - (large)/(large)`: the matrix keeps its accuracy at large `Omega` (derivation in
/// `docs/implicit.md`).
///
/// # Reference
/// Chung & Hulbert (1993), eqs. (9)-(12), for the family; Hughes (1987), *The Finite Element
/// Method*, sec. 9.3, for the amplification-matrix analysis.
pub fn alpha_amplification(p: &AlphaParams, omega_dt: f64, xi: f64) -> [[f64; 3]; 3] {
    let (am, af, b, g) = (p.alpha_m, p.alpha_f, p.beta, p.gamma);
    let o = omega_dt;
    let o2 = o * o;
    let z = 2.0 * xi * o; // 2 xi Omega
    let d = (1.0 - am) + z * (1.0 - af) * g + o2 * (1.0 - af) * b;
    // Acceleration row: a_{n+1} = -(c_u U + c_v V + c_a A) / D.
    let c_u = o2;
    let c_v = z + o2 * (1.0 - af);
    let c_a = am + z * (1.0 - af) * (1.0 - g) + o2 * (1.0 - af) * (0.5 - b);
    // One reciprocal instead of nine divisions (each entry differs from the quotient by at
    // most one rounding).
    let r = 1.0 / d;
    [
        [
            ((1.0 - am) + z * (1.0 - af) * g - af * b * o2) * r,
            ((1.0 - am) + z * ((1.0 - af) * g - b)) * r,
            ((0.5 - b - 0.5 * am) + z * (1.0 - af) * (0.5 * g - b)) * r,
        ],
        [
            -g * c_u * r,
            ((1.0 - am) - z * g * af + o2 * (1.0 - af) * (b - g)) * r,
            ((1.0 - g - am) + o2 * (1.0 - af) * (b - 0.5 * g)) * r,
        ],
        [-c_u * r, -c_v * r, -c_a * r],
    ]
}

/// Iterations allowed to the real Schur decomposition of [`eigenvalues3`] (a 3x3 matrix converges
/// in a handful; the limit only stops a pathological case).
const SCHUR_MAX_ITERATIONS: usize = 10_000;

/// The three eigenvalues of a 3x3 real matrix.
///
/// Computed from the real Schur form (shifted QR iterations, [`nalgebra::linalg::Schur`]) of the
/// matrix scaled by a power of two when its largest entry is far from 1, so that entries near the
/// overflow or underflow limits keep their eigenvalues finite. A matrix with a non-finite entry
/// (NaN or infinity), or one whose decomposition does not converge within 10,000 iterations,
/// gives three NaN eigenvalues: never a panic or an endless loop (the QR iteration on a NaN
/// entry would not end).
///
/// The matrix is balanced first, as LAPACK's `geev` does: a diagonal similarity by powers of two
/// (exact in floating point, so the eigenvalues are unchanged) that brings each row and column to
/// comparable norms (Parlett & Reinsch 1969, "Balancing a matrix for calculation of eigenvalues
/// and eigenvectors", *Numer. Math.* 13, 293-304; citation from memory). At large `Omega` the
/// family's matrices have entries from `1/Omega^2` to order one around a nearly defective cluster
/// of roots; unbalanced, the QR iteration lost up to 1e-8 there (generalised-alpha with
/// `rho_inf = 1` showed a spectral radius of `1 + 9.7e-9` at `Omega = 1e4`, found by the
/// cross-check with NumPy in `verification`); balanced, the roots are right to round-off.
pub fn eigenvalues3(a: &[[f64; 3]; 3]) -> [Complex<f64>; 3] {
    let nan = Complex::new(f64::NAN, f64::NAN);
    if a.iter().flatten().any(|x| !x.is_finite()) {
        return [nan; 3];
    }
    let amax = a.iter().flatten().fold(0.0_f64, |m, x| m.max(x.abs()));
    // A power of two, so that the scaling is exact.
    let scale = if amax > 2f64.powi(500) || (amax > 0.0 && amax < 2f64.powi(-500)) {
        let e = (amax.log2().floor() as i32).clamp(-1022, 1023);
        f64::from_bits(((e + 1023) as u64) << 52)
    } else {
        1.0
    };
    let mut scaled = *a;
    scaled.iter_mut().flatten().for_each(|x| *x /= scale);
    let b = balance3(&scaled);
    let m = Matrix3::new(
        b[0][0], b[0][1], b[0][2], b[1][0], b[1][1], b[1][2], b[2][0], b[2][1], b[2][2],
    );
    match Schur::try_new(m, f64::EPSILON, SCHUR_MAX_ITERATIONS) {
        Some(schur) => {
            let (_, t) = schur.unpack();
            let e = quasi_triangular_eigenvalues(&t);
            [e[0] * scale, e[1] * scale, e[2] * scale]
        }
        None => [nan; 3],
    }
}

/// The eigenvalues of a 3x3 real quasi-triangular matrix (a real Schur form: 1x1 and 2x2
/// diagonal blocks, zero below the first subdiagonal).
///
/// Written here rather than taken from `Schur::complex_eigenvalues` (nalgebra 0.35), which
/// assumes that every 2x2 block it meets has complex eigenvalues and takes the square root of the
/// negated discriminant: a block whose recomputed discriminant is positive by a rounding (a nearly
/// double real root, such as the trapezoidal rule's at critical damping, `xi = 1`) gave NaN
/// imaginary parts. A 2x2 block `[[a, b], [c, d]]` has the roots `(a + d)/2 +/- sqrt(disc)` with
/// `disc = ((a - d)/2)^2 + b c` (the form that cannot go negative for a symmetric block): the
/// complex pair when `disc < 0`; otherwise two real roots, the larger in modulus by the formula
/// with the sign that does not cancel and the other as the determinant over it.
fn quasi_triangular_eigenvalues(t: &Matrix3<f64>) -> [Complex<f64>; 3] {
    let block = |m: usize| -> [Complex<f64>; 2] {
        let (a, b, c, d) = (t[(m, m)], t[(m, m + 1)], t[(m + 1, m)], t[(m + 1, m + 1)]);
        let half_trace = 0.5 * (a + d);
        let half_diff = 0.5 * (a - d);
        let disc = half_diff * half_diff + b * c;
        if disc >= 0.0 {
            // The root of larger modulus without cancellation, the other from the determinant.
            let big = half_trace + disc.sqrt().copysign(half_trace);
            let small = if big == 0.0 {
                0.0
            } else {
                (a * d - b * c) / big
            };
            [Complex::new(big, 0.0), Complex::new(small, 0.0)]
        } else {
            let s = (-disc).sqrt();
            [Complex::new(half_trace, s), Complex::new(half_trace, -s)]
        }
    };
    if t[(1, 0)] != 0.0 {
        let [z0, z1] = block(0);
        [z0, z1, Complex::new(t[(2, 2)], 0.0)]
    } else if t[(2, 1)] != 0.0 {
        let [z1, z2] = block(1);
        [Complex::new(t[(0, 0)], 0.0), z1, z2]
    } else {
        [
            Complex::new(t[(0, 0)], 0.0),
            Complex::new(t[(1, 1)], 0.0),
            Complex::new(t[(2, 2)], 0.0),
        ]
    }
}

/// `D^-1 A D` with `D` diagonal, powers of two, chosen by the Parlett-Reinsch iteration (radix 2,
/// a scaling kept only when it reduces the row plus column norm below 0.95 of what it was; at
/// most 64 sweeps). Rows or columns that are zero off the diagonal, or not finite, are left alone.
fn balance3(a: &[[f64; 3]; 3]) -> [[f64; 3]; 3] {
    let mut b = *a;
    for _ in 0..64 {
        let mut done = true;
        for i in 0..3 {
            let (mut c, mut r) = (0.0f64, 0.0f64);
            for j in (0..3).filter(|&j| j != i) {
                c += b[j][i].abs();
                r += b[i][j].abs();
            }
            if !(c.is_finite() && r.is_finite() && c > 0.0 && r > 0.0) {
                continue;
            }
            let s = c + r;
            let mut f = 1.0;
            while c < r / 2.0 {
                f *= 2.0;
                c *= 4.0;
            }
            while c >= r * 2.0 {
                f /= 2.0;
                c /= 4.0;
            }
            if (c + r) / f < 0.95 * s {
                done = false;
                for j in 0..3 {
                    b[i][j] /= f;
                    b[j][i] *= f;
                }
            }
        }
        if done {
            break;
        }
    }
    b
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Direct construction of the amplification matrix by solving the step equations for each
    /// unit state (independent of the hand-simplified entries).
    fn direct(p: &AlphaParams, o: f64, xi: f64) -> [[f64; 3]; 3] {
        let (am, af, b, g) = (p.alpha_m, p.alpha_f, p.beta, p.gamma);
        let mut m = [[0.0; 3]; 3];
        for j in 0..3 {
            let mut x = [0.0; 3];
            x[j] = 1.0;
            let (u0, v0, a0) = (x[0], x[1], x[2]);
            // (1-am) A1 + am A0 + 2 xi O ((1-af) V1 + af V0) + O^2 ((1-af) U1 + af U0) = 0
            // with U1 = u0 + v0 + (1/2-b) a0 + b A1, V1 = v0 + (1-g) a0 + g A1.
            let lhs = (1.0 - am) + 2.0 * xi * o * (1.0 - af) * g + o * o * (1.0 - af) * b;
            let rhs = -(am * a0
                + 2.0 * xi * o * ((1.0 - af) * (v0 + (1.0 - g) * a0) + af * v0)
                + o * o * ((1.0 - af) * (u0 + v0 + (0.5 - b) * a0) + af * u0));
            let a1 = rhs / lhs;
            m[0][j] = u0 + v0 + (0.5 - b) * a0 + b * a1;
            m[1][j] = v0 + (1.0 - g) * a0 + g * a1;
            m[2][j] = a1;
        }
        m
    }

    /// The trapezoidal rule at critical damping (`xi = 1`) maps the double eigenvalue
    /// `s = -omega` of the oscillator to the double root `(2 - Omega) / (2 + Omega)` (its
    /// Cayley transform `z = (1 + s dt / 2) / (1 - s dt / 2)`; common practice), with the third
    /// root 0. The balanced Schur form gave NaN imaginary parts near `Omega = 3.7e-4` (the 2x2
    /// block's discriminant came out positive by a rounding; found against the exact roots of
    /// `tests/data/exact_roots.csv`). A double root moves by about the square root of the
    /// perturbation, so the pair is checked to `1e-7` (`2e-5` where it meets the root 0).
    #[test]
    fn trapezoidal_critical_damping_double_root_is_finite() {
        let p = AlphaParams::average_acceleration();
        let mut omegas: Vec<f64> = (0..=400)
            .map(|i| 10f64.powf(-6.0 + 0.03 * i as f64))
            .collect();
        omegas.push(0.000_369_823_481_093_83);
        for o in omegas {
            let z = eigenvalues3(&alpha_amplification(&p, o, 1.0));
            let exact = (2.0 - o) / (2.0 + o);
            let mut by_modulus = z;
            by_modulus.sort_by(|a, b| b.norm().total_cmp(&a.norm()));
            // Near Omega = 2 the pair meets the root 0: three roots together move by about
            // the cube root of the perturbation (`f64::EPSILON^(1/3) = 6e-6`).
            let tol = if exact.abs() >= 1e-2 { 1e-7 } else { 2e-5 };
            for r in &by_modulus[..2] {
                assert!(r.re.is_finite() && r.im.is_finite(), "Omega {o}: {z:?}");
                assert!((r - exact).norm() <= tol, "Omega {o}: {z:?}");
            }
            assert!(by_modulus[2].norm() <= tol.min(1e-9), "Omega {o}: {z:?}");
        }
    }

    #[test]
    fn simplified_entries_equal_the_direct_construction() {
        let sets = [
            AlphaParams::average_acceleration(),
            AlphaParams::linear_acceleration(),
            AlphaParams::hht(-0.2).unwrap(),
            AlphaParams::wbz(-0.3).unwrap(),
            AlphaParams::generalized_alpha(0.6).unwrap(),
            AlphaParams::raw(0.1, 0.3, 0.4, 0.7).unwrap(),
        ];
        for p in &sets {
            for &(o, xi) in &[(0.01, 0.0), (0.5, 0.05), (3.0, 0.2), (40.0, 0.0)] {
                let a = alpha_amplification(p, o, xi);
                let d = direct(p, o, xi);
                for i in 0..3 {
                    for j in 0..3 {
                        assert!((a[i][j] - d[i][j]).abs() < 1e-12, "{p:?} {o} {xi}: {i}{j}");
                    }
                }
            }
        }
    }

    /// Non-finite entries give NaN eigenvalues (the QR iteration would never end on them); entries
    /// near the overflow limit keep their eigenvalues finite (exact: a rotation-scaling block
    /// `[[s, s], [-s, s]]` has the eigenvalues `s (1 +/- i)`, and a diagonal entry is an eigenvalue).
    #[test]
    fn non_finite_and_extreme_matrices() {
        for bad in [f64::NAN, f64::INFINITY, f64::NEG_INFINITY] {
            let mut a = [[1.0, 0.5, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 2.0]];
            a[1][2] = bad;
            assert!(eigenvalues3(&a).iter().all(|z| z.re.is_nan()), "{bad}");
        }
        for s in [1e300, 1e-300, 1e-310] {
            let a = [[s, s, 0.0], [-s, s, 0.0], [0.0, 0.0, 0.5 * s]];
            let mut ev = eigenvalues3(&a);
            ev.sort_by(|x, y| x.im.total_cmp(&y.im));
            let want = [(s, -s), (0.5 * s, 0.0), (s, s)];
            for (z, (re, im)) in ev.iter().zip(want) {
                assert!(
                    (z.re - re).abs() <= 1e-12 * s && (z.im - im).abs() <= 1e-12 * s,
                    "{s}: {ev:?}"
                );
            }
        }
        assert_eq!(eigenvalues3(&[[0.0; 3]; 3]), [Complex::new(0.0, 0.0); 3]);
    }

    /// Generalised-alpha with rho_inf = 1 (alpha_m = alpha_f = 1/2, beta = 1/4, gamma = 1/2) has
    /// every root on the unit circle at every Omega (Chung & Hulbert 1993: its principal roots
    /// have modulus one and its spurious root is -alpha_f / (1 - alpha_f) = -1): the computed
    /// spectral radius is 1 to round-off even at large Omega, where the matrix is badly scaled
    /// and nearly defective (without balancing it reached 1 + 9.7e-9 at Omega = 1e4).
    #[test]
    fn balanced_eigenvalues_stay_on_the_unit_circle_at_large_omega() {
        let p = AlphaParams::generalized_alpha(1.0).unwrap();
        for o in [1.0, 1e2, 1e3, 1e4, 1e5, 1e6] {
            for z in eigenvalues3(&alpha_amplification(&p, o, 0.0)) {
                assert!((z.norm() - 1.0).abs() < 1e-14, "Omega {o}: {z}");
            }
        }
        // Balancing is a similarity: it keeps the trace and leaves a balanced matrix alone.
        let a = alpha_amplification(&p, 1e4, 0.0);
        let b = balance3(&a);
        assert!((a[0][0] + a[1][1] + a[2][2] - (b[0][0] + b[1][1] + b[2][2])).abs() < 1e-15);
        assert_eq!(balance3(&b), b);
        let nan = [[f64::NAN; 3]; 3];
        assert!(balance3(&nan)[0][0].is_nan());
    }

    /// The trapezoidal rule has spectral radius 1 at every Omega (Hughes 1987, sec. 9.3).
    #[test]
    fn trapezoidal_rule_has_unit_spectral_radius() {
        let p = AlphaParams::average_acceleration();
        for o in [0.1, 1.0, 10.0, 1e3] {
            let rho = eigenvalues3(&alpha_amplification(&p, o, 0.0))
                .iter()
                .map(|z| z.norm())
                .fold(0.0, f64::max);
            assert!((rho - 1.0).abs() < 1e-9, "{o}");
        }
    }
}
