//! Unit tests of the stable step and the Lanczos estimate.

mod estimates {
    use super::super::*;
    use crate::linalg::lanczos::*;
    use crate::linalg::{CHUNK, Parallelism};
    use crate::model::{Constraints, LinearModel};
    use nalgebra::{DMatrix, SymmetricEigen};
    use proptest::prelude::*;
    use sprs::{CsMat, TriMat};
    use std::f64::consts::PI;

    /// Relative difference `|a - b| / |b|`.
    fn rel(a: f64, b: f64) -> f64 {
        (a - b).abs() / b.abs()
    }

    /// Stiffness of a chain of `n = springs.len() - 1` masses as a sprs matrix: `springs[0]` ties
    /// mass 0 to the left wall, `springs[i]` (0 < i < n) couples masses `i - 1` and `i`, and
    /// `springs[n]` ties mass `n - 1` to the right wall (a zero spring means no wall).
    fn chain_sprs(springs: &[f64]) -> CsMat<f64> {
        let n = springs.len() - 1;
        let mut t = TriMat::new((n, n));
        for (s, &k) in springs.iter().enumerate() {
            if s > 0 {
                t.add_triplet(s - 1, s - 1, k);
            }
            if s < n {
                t.add_triplet(s, s, k);
            }
            if s > 0 && s < n {
                t.add_triplet(s - 1, s, -k);
                t.add_triplet(s, s - 1, -k);
            }
        }
        t.to_csr()
    }

    fn chain(springs: &[f64]) -> CsrMatrix {
        CsrMatrix::from_sprs("K", &chain_sprs(springs)).unwrap()
    }

    fn diag_sprs(v: &[f64]) -> CsMat<f64> {
        let mut t = TriMat::new((v.len(), v.len()));
        for (i, &x) in v.iter().enumerate() {
            t.add_triplet(i, i, x);
        }
        t.to_csr()
    }

    fn lanczos(
        k: &CsrMatrix,
        mass: &[f64],
        mask: Option<&[bool]>,
        options: &EigenOptions,
    ) -> Result<OmegaMaxEstimate> {
        omega_max_lanczos(
            mass,
            mask,
            |x, y| {
                k.mul_vec(x, y, Parallelism::serial());
                Ok(())
            },
            options,
            &Execution::default(),
        )
    }

    /// Largest eigenvalue of `D^-1/2 K D^-1/2` on the free DOFs by a dense solve.
    fn dense_lambda_max(k: &CsrMatrix, mass: &[f64], mask: Option<&[bool]>) -> f64 {
        let free: Vec<usize> = (0..mass.len())
            .filter(|&i| !mask.is_some_and(|c| c[i]))
            .collect();
        let pos = |i: usize| free.iter().position(|&f| f == i);
        let mut a = DMatrix::<f64>::zeros(free.len(), free.len());
        for (r, &i) in free.iter().enumerate() {
            for (j, v) in k.row(i) {
                if let Some(c) = pos(j) {
                    a[(r, c)] += v / (mass[i] * mass[j]).sqrt();
                }
            }
        }
        SymmetricEigen::new(a).eigenvalues.max()
    }

    /// A deterministic sequence in `[lo, hi)` (the generator of `start_vector` with another seed).
    fn lcg_values(seed: u64, len: usize, lo: f64, hi: f64) -> Vec<f64> {
        let mut s = seed;
        (0..len)
            .map(|_| {
                s = s
                    .wrapping_mul(6_364_136_223_846_793_005)
                    .wrapping_add(1_442_695_040_888_963_407);
                lo + (hi - lo) * ((s >> 11) as f64 / (1_u64 << 53) as f64)
            })
            .collect()
    }

    /// The uniform fixed-fixed chain of `n` masses `m` and `n + 1` springs `k`: Lanczos against
    /// the closed form, and the Gershgorin bound between the exact value and `sqrt(4k/m)`.
    fn check_fixed_fixed_chain(n: usize) {
        let (k, m) = (1000.0, 2.0);
        let kmat = chain(&vec![k; n + 1]);
        let mass = vec![m; n];
        // Closed form for the tridiagonal Toeplitz matrix tridiag(-k, 2k, -k) / m:
        // lambda_j = (4k/m) sin^2(j pi / (2(n+1))), j = 1..n (Strang, Introduction to Applied
        // Mathematics, 1986; or any text on tridiagonal Toeplitz matrices).
        let lambda_n = 4.0 * k / m * (n as f64 * PI / (2.0 * (n + 1) as f64)).sin().powi(2);
        let omega_exact = lambda_n.sqrt();
        let est = lanczos(&kmat, &mass, None, &EigenOptions::default()).unwrap();
        let err = rel(est.omega_max, omega_exact);
        eprintln!(
            "fixed-fixed chain n = {n}: omega = {:.15e}, exact {omega_exact:.15e}, relative error \
             {err:.2e}, error bound (lambda) {:.2e}, products {}, restarts {}",
            est.omega_max, est.error_estimate, est.products, est.restarts
        );
        assert!(err < 1e-9, "n = {n}: relative error {err:e}");
        assert!(est.error_estimate <= 1e-10);
        // A Ritz value never exceeds the eigenvalue it approximates.
        assert!(est.lambda_max <= lambda_n * (1.0 + 1e-14));
        let bound = omega_max_gershgorin(&kmat, &mass, None).unwrap();
        assert!(bound >= omega_exact, "{bound} < {omega_exact}");
        // For the uniform chain every row sums to at most 4k, so the bound is sqrt(4k/m).
        assert!(bound <= (4.0 * k / m).sqrt(), "{bound}");
        eprintln!(
            "  Gershgorin bound {bound:.6e} = {:.4} x exact",
            bound / omega_exact
        );
    }

    #[test]
    fn fixed_fixed_chain_200_matches_closed_form() {
        check_fixed_fixed_chain(200);
    }

    #[test]
    fn fixed_fixed_chain_1000_matches_closed_form() {
        check_fixed_fixed_chain(1000);
    }

    #[test]
    fn free_free_and_non_uniform_chains_gershgorin_is_an_upper_bound() {
        let n = 120;
        let cases = [
            // Free-free uniform chain (no walls; lambda_min = 0).
            (vec![1.0; n], {
                let mut s = vec![3.0; n + 1];
                s[0] = 0.0;
                s[n] = 0.0;
                s
            }),
            // Non-uniform masses and springs, fixed-fixed.
            (lcg_values(1, n, 0.1, 10.0), lcg_values(2, n + 1, 0.1, 10.0)),
            // Non-uniform, free at the right end.
            (lcg_values(3, n, 0.1, 10.0), {
                let mut s = lcg_values(4, n + 1, 0.1, 10.0);
                s[n] = 0.0;
                s
            }),
            // Masses over four decades, free-free.
            (lcg_values(5, n, 1e-2, 1e2), {
                let mut s = lcg_values(6, n + 1, 0.1, 10.0);
                s[0] = 0.0;
                s[n] = 0.0;
                s
            }),
        ];
        for (case, (mass, springs)) in cases.iter().enumerate() {
            let kmat = chain(springs);
            let dense = dense_lambda_max(&kmat, mass, None);
            let est = lanczos(&kmat, mass, None, &EigenOptions::default()).unwrap();
            let bound = omega_max_gershgorin(&kmat, mass, None).unwrap();
            let err = rel(est.lambda_max, dense);
            eprintln!(
                "case {case}: lambda rel. error {err:.2e}, products {}, Gershgorin / omega = {:.3}",
                est.products,
                bound / est.omega_max
            );
            assert!(err < 1e-10, "case {case}: {err:e}");
            assert!(bound >= est.omega_max, "case {case}");
            assert!(bound >= dense.sqrt() * (1.0 - 1e-12), "case {case}");
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(32))]
        /// Random chains: Lanczos agrees with a dense solve, and Gershgorin is never below it.
        #[test]
        fn random_chains_match_dense_solve(
            (mass, mut springs) in (2usize..60).prop_flat_map(|n| (
                prop::collection::vec(0.1f64..10.0, n),
                prop::collection::vec(0.1f64..10.0, n + 1),
            )),
            left_wall in any::<bool>(),
            right_wall in any::<bool>(),
        ) {
            let n = mass.len();
            if !left_wall {
                springs[0] = 0.0;
            }
            if !right_wall {
                springs[n] = 0.0;
            }
            let kmat = chain(&springs);
            let dense = dense_lambda_max(&kmat, &mass, None);
            let est = lanczos(&kmat, &mass, None, &EigenOptions::default()).unwrap();
            prop_assert!(rel(est.lambda_max, dense) <= 1e-8, "{} vs {}", est.lambda_max, dense);
            let bound = omega_max_gershgorin(&kmat, &mass, None).unwrap();
            prop_assert!(bound >= dense.sqrt() * (1.0 - 1e-12), "{} < {}", bound, dense.sqrt());
        }
    }

    #[test]
    fn constrained_dofs_are_excluded() {
        // A free-free chain of n + 1 masses coupled by n springs k, with DOF 0 fixed (and given
        // zero mass, which a constrained DOF may have): the other n masses form a fixed-free chain.
        let (n, k, m) = (150, 500.0, 0.25);
        let mut springs = vec![k; n + 2];
        springs[0] = 0.0;
        springs[n + 1] = 0.0;
        let kmat = chain(&springs);
        let mut mass = vec![m; n + 1];
        mass[0] = 0.0;
        let mut mask = vec![false; n + 1];
        mask[0] = true;
        // Fixed-free chain: lambda_j = (4k/m) sin^2((2j - 1) pi / (2(2n + 1))), j = 1..n
        // (the tridiagonal matrix with last diagonal entry k instead of 2k; e.g. Yueh, "Eigenvalues
        // of several tridiagonal matrices", Appl. Math. E-Notes 5 (2005) 66-74).
        let lambda_n = 4.0 * k / m
            * ((2 * n - 1) as f64 * PI / (2.0 * (2 * n + 1) as f64))
                .sin()
                .powi(2);
        let est = omega_max_lanczos(
            &mass,
            Some(&mask),
            |x, y| {
                assert!(x[0] == 0.0, "a constrained entry reached the product");
                kmat.mul_vec(x, y, Parallelism::serial());
                y[0] = f64::NAN; // ignored: constrained
                Ok(())
            },
            &EigenOptions::default(),
            &Execution::default(),
        )
        .unwrap();
        let err = rel(est.lambda_max, lambda_n);
        eprintln!(
            "fixed-free chain n = {n}: lambda rel. error {err:.2e}, products {}",
            est.products
        );
        assert!(err < 1e-10, "{err:e}");
        let dense = dense_lambda_max(&kmat, &mass, Some(&mask));
        assert!(rel(dense, lambda_n) < 1e-12);
        let bound = omega_max_gershgorin(&kmat, &mass, Some(&mask)).unwrap();
        assert!(bound >= est.omega_max);
        // Without the mask the zero mass at DOF 0 is refused.
        let e = omega_max_gershgorin(&kmat, &mass, None).unwrap_err();
        assert!(matches!(e, Error::NonPositiveMass { dof: 0, .. }), "{e}");
        let e = lanczos(&kmat, &mass, None, &EigenOptions::default()).unwrap_err();
        assert!(matches!(e, Error::NonPositiveMass { dof: 0, .. }), "{e}");
        // A mask of the wrong length.
        let e = lanczos(&kmat, &mass, Some(&mask[..n]), &EigenOptions::default()).unwrap_err();
        assert!(matches!(e, Error::DimensionMismatch { .. }), "{e}");
    }

    #[test]
    fn gershgorin_takes_the_smaller_of_its_two_bounds() {
        // M = diag(2, 1), K = [[6, -2], [-2, 4]]: M^-1 K has eigenvalues 5 and 2.
        // Symmetric scaling: rows 3 + 2/sqrt(2) and 4 + 2/sqrt(2), so b_sym = 4 + sqrt(2);
        // M^-1 K: rows (6 + 2)/2 = 4 and (4 + 2)/1 = 6, so b_inv = 6.
        let mut t = TriMat::new((2, 2));
        for (i, j, v) in [(0, 0, 6.0), (0, 1, -2.0), (1, 0, -2.0), (1, 1, 4.0)] {
            t.add_triplet(i, j, v);
        }
        let kmat = CsrMatrix::from_sprs("K", &t.to_csr()).unwrap();
        let bound = omega_max_gershgorin(&kmat, &[2.0, 1.0], None).unwrap();
        assert!(rel(bound * bound, 4.0 + 2.0_f64.sqrt()) < 1e-15);
        assert!(bound * bound >= 5.0);
        // Wrong sizes and an empty model.
        let e = omega_max_gershgorin(&kmat, &[1.0; 3], None).unwrap_err();
        assert!(matches!(e, Error::DimensionMismatch { .. }), "{e}");
        let e = omega_max_gershgorin(&kmat, &[], None).unwrap_err();
        assert!(matches!(e, Error::EmptyModel), "{e}");
        // Everything constrained: nothing vibrates.
        let bound = omega_max_gershgorin(&kmat, &[0.0, 0.0], Some(&[true, true])).unwrap();
        assert!(bound == 0.0);
    }

    #[test]
    fn critical_step_formula_and_invalid_inputs() {
        let omega = 1234.5;
        let undamped = critical_step(omega, 0.0).unwrap();
        assert!(rel(undamped, 2.0 / omega) < 1e-15);
        for xi in [1e-3_f64, 0.05, 0.2, 0.5, 1.0, 3.0] {
            // Belytschko, Liu & Moran (2000), ch. 6: dt = (2/omega)(sqrt(1 + xi^2) - xi).
            let direct = 2.0 / omega * ((1.0 + xi * xi).sqrt() - xi);
            let dt = critical_step(omega, xi).unwrap();
            assert!(rel(dt, direct) < 1e-13, "xi = {xi}: {dt} vs {direct}");
            assert!(dt < undamped);
        }
        // Large xi: the direct form cancels, the evaluated one keeps full accuracy
        // (sqrt(1 + xi^2) - xi = 1/(2 xi) - 1/(8 xi^3) + ...).
        let xi = 1e8;
        let dt = critical_step(omega, xi).unwrap();
        assert!(rel(dt, 2.0 / omega * (0.5 / xi)) < 1e-15);
        // No frequency: any step is stable.
        assert!(critical_step(0.0, 0.3).unwrap().is_infinite());
        for (w, xi, name) in [
            (-1.0, 0.0, "omega_max"),
            (f64::NAN, 0.0, "omega_max"),
            (f64::INFINITY, 0.0, "omega_max"),
            (1.0, -0.1, "xi"),
            (1.0, f64::NAN, "xi"),
            (1.0, f64::INFINITY, "xi"),
        ] {
            let e = critical_step(w, xi).unwrap_err();
            assert!(
                matches!(e, Error::InvalidParameter { name: n, .. } if n == name),
                "{w}, {xi}: {e}"
            );
        }
    }

    #[test]
    fn element_stable_step_is_min_length_over_speed_and_refuses_bad_input() {
        let dt = element_stable_step(&[1.0, 0.5, 2.0], &[10.0, 20.0, 5.0]).unwrap();
        assert!(rel(dt, 0.025) < 1e-15);
        let e = element_stable_step(&[1.0, 2.0], &[1.0]).unwrap_err();
        assert!(
            matches!(
                e,
                Error::DimensionMismatch {
                    expected: 2,
                    found: 1,
                    ..
                }
            ),
            "{e}"
        );
        let e = element_stable_step(&[], &[]).unwrap_err();
        assert!(
            matches!(
                e,
                Error::InvalidParameter {
                    name: "element count",
                    ..
                }
            ),
            "{e}"
        );
        let e = element_stable_step(&[1.0, f64::NAN], &[1.0, 1.0]).unwrap_err();
        assert!(
            matches!(
                e,
                Error::NonFiniteInput {
                    what: "element lengths",
                    index: 1,
                    ..
                }
            ),
            "{e}"
        );
        let e = element_stable_step(&[1.0, 1.0], &[f64::INFINITY, 1.0]).unwrap_err();
        assert!(
            matches!(
                e,
                Error::NonFiniteInput {
                    what: "element wave speeds",
                    index: 0,
                    ..
                }
            ),
            "{e}"
        );
        let e = element_stable_step(&[1.0, 0.0], &[1.0, 1.0]).unwrap_err();
        assert!(
            matches!(
                e,
                Error::InvalidParameter {
                    name: "element length",
                    ..
                }
            ),
            "{e}"
        );
        let e = element_stable_step(&[1.0, 1.0], &[1.0, -3.0]).unwrap_err();
        assert!(
            matches!(
                e,
                Error::InvalidParameter {
                    name: "element wave speed",
                    ..
                }
            ),
            "{e}"
        );
    }

    /// A fixed-fixed spring chain that only gives its internal force (no stiffness product), and
    /// optionally an element stable step or a failure.
    struct ForceOnlyChain {
        k: f64,
        m: f64,
        n: usize,
        element_dt: Option<f64>,
        fail: bool,
    }

    impl Model for ForceOnlyChain {
        fn dofs(&self) -> usize {
            self.n
        }

        fn lumped_mass(&self, out: &mut [f64]) {
            out.fill(self.m);
        }

        fn internal_force(
            &mut self,
            _t: f64,
            u: &[f64],
            _v: &[f64],
            out: &mut [f64],
        ) -> std::result::Result<(), ModelError> {
            if self.fail {
                return Err(ModelError::failed("element 3 is inverted"));
            }
            for i in 0..self.n {
                let left = if i > 0 { u[i - 1] } else { 0.0 };
                let right = if i + 1 < self.n { u[i + 1] } else { 0.0 };
                out[i] = self.k * (2.0 * u[i] - left - right);
            }
            Ok(())
        }

        fn element_stable_step(&mut self, _t: f64, _u: &[f64]) -> Option<f64> {
            self.element_dt
        }
    }

    #[test]
    fn loose_gershgorin_bound_leaves_the_estimate_to_lanczos() {
        // Unit springs, masses alternating 1 and 100: lambda_max is close to the diatomic
        // chain's 2 (1 / 1 + 1 / 100) = 2.02, Gershgorin's bound 2 / 1 + 2 / sqrt(100) = 2.2 is
        // 9 % above it (constructed), so the estimate must come from Lanczos at its tolerance.
        let n = 60;
        let mass: Vec<f64> = (0..n)
            .map(|i| if i % 2 == 0 { 1.0 } else { 100.0 })
            .collect();
        let springs = vec![1.0; n + 1];
        let mut model = LinearModel::new(&diag_sprs(&mass), &chain_sprs(&springs)).unwrap();
        let s = estimate(
            &mut model,
            &State::at_rest(n, 0.0),
            &Default::default(),
            &Execution::default(),
        )
        .unwrap();
        assert_eq!(s.method, StableStepMethod::Lanczos);
        let dense = dense_lambda_max(&chain(&springs), &mass, None).sqrt();
        let omega = s.omega_max.unwrap();
        assert!(rel(omega, dense) < 1e-9, "{omega} vs {dense}");
        let g = omega_max_gershgorin(&chain(&springs), &mass, None).unwrap();
        assert!(g * g * (1.0 - GERSHGORIN_MATCH) > omega * omega);
    }

    #[test]
    fn estimate_on_linear_model_with_rayleigh_damping() {
        let (n, k, m) = (60, 1000.0, 2.0);
        let (a0, a1) = (0.5, 1e-4);
        let mut model = LinearModel::new(&diag_sprs(&vec![m; n]), &chain_sprs(&vec![k; n + 1]))
            .unwrap()
            .with_rayleigh(a0, a1)
            .unwrap();
        let state = State::at_rest(n, 0.0);
        let s = estimate(
            &mut model,
            &state,
            &StableStepOptions::default(),
            &Execution::default(),
        )
        .unwrap();
        // Fixed-fixed chain closed form (Strang, Introduction to Applied Mathematics, 1986).
        let omega_exact =
            (4.0 * k / m * (n as f64 * PI / (2.0 * (n + 1) as f64)).sin().powi(2)).sqrt();
        let omega = s.omega_max.unwrap();
        // A uniform chain: Gershgorin's bound 4 k / m is within 1e-3 of lambda_max, so the linear model's estimate is that guaranteed upper bound.
        assert_eq!(s.method, StableStepMethod::LanczosGershgorin);
        let gershgorin = omega_max_gershgorin(&chain(&vec![k; n + 1]), &vec![m; n], None).unwrap();
        assert!(rel(omega, gershgorin) < 1e-15, "{omega} vs {gershgorin}");
        assert!(omega >= omega_exact, "{omega} vs {omega_exact}");
        assert!(rel(omega, omega_exact) < 0.5 * GERSHGORIN_MATCH);
        // Rayleigh damping ratio (Chopra, Dynamics of Structures, § 11.4).
        let xi = a0 / (2.0 * omega) + a1 * omega / 2.0;
        assert!(rel(s.xi.unwrap(), xi) < 1e-15);
        assert!(rel(s.dt_critical, 2.0 / omega) < 1e-15);
        let damped = 2.0 / omega * ((1.0 + xi * xi).sqrt() - xi);
        assert!(rel(s.dt_critical_damped, damped) < 1e-13);
        assert!(
            rel(
                s.recommended(DEFAULT_SAFETY).unwrap(),
                DEFAULT_SAFETY * damped
            ) < 1e-13
        );

        // The same chain built free-free with one more mass and DOF 0 fixed (zero mass there):
        // the fixed-free closed form (Yueh, Appl. Math. E-Notes 5 (2005) 66-74).
        let mut springs = vec![k; n + 2];
        springs[0] = 0.0;
        springs[n + 1] = 0.0;
        let mut mass = vec![m; n + 1];
        mass[0] = 0.0;
        let mut model = LinearModel::new(&diag_sprs(&mass), &chain_sprs(&springs))
            .unwrap()
            .with_constraints(Constraints::new().fix(0))
            .unwrap();
        let s = estimate(
            &mut model,
            &State::at_rest(n + 1, 0.0),
            &Default::default(),
            &Execution::default(),
        )
        .unwrap();
        let lambda = 4.0 * k / m
            * ((2 * n - 1) as f64 * PI / (2.0 * (2 * n + 1) as f64))
                .sin()
                .powi(2);
        assert_eq!(s.method, StableStepMethod::LanczosGershgorin);
        assert!(s.omega_max.unwrap() >= lambda.sqrt());
        assert!(rel(s.omega_max.unwrap(), lambda.sqrt()) < 0.5 * GERSHGORIN_MATCH);
        assert_eq!(s.xi, Some(0.0));
        assert!(rel(s.dt_critical_damped, s.dt_critical) < 1e-15);

        // Without the constraint the zero mass is refused.
        let mut model = LinearModel::new(&diag_sprs(&mass), &chain_sprs(&springs)).unwrap();
        let e = estimate(
            &mut model,
            &State::at_rest(n + 1, 0.0),
            &Default::default(),
            &Execution::default(),
        )
        .unwrap_err();
        assert!(matches!(e, Error::NonPositiveMass { dof: 0, .. }), "{e}");
    }

    #[test]
    fn estimate_falls_back_to_finite_differences_and_prefers_elements() {
        let (n, k, m) = (40, 1000.0, 2.0);
        let mut linear =
            LinearModel::new(&diag_sprs(&vec![m; n]), &chain_sprs(&vec![k; n + 1])).unwrap();
        // A deformed, moving state, so that the finite-difference step is scaled by max|u|.
        let u: Vec<f64> = (0..n).map(|i| 0.05 * (i as f64 * 0.3).sin()).collect();
        let v: Vec<f64> = (0..n).map(|i| (i as f64).cos()).collect();
        let mut state = State::new(0.25, u, v).unwrap();
        state.step = 7;
        let options = StableStepOptions::default();
        let reference = estimate(&mut linear, &state, &options, &Execution::default()).unwrap();

        let mut chain_model = ForceOnlyChain {
            k,
            m,
            n,
            element_dt: Some(1.5e-3),
            fail: false,
        };
        // The element step is used when preferred ...
        let s = estimate(&mut chain_model, &state, &options, &Execution::default()).unwrap();
        assert_eq!(s.method, StableStepMethod::Elements);
        assert!(s.omega_max.is_none() && s.xi.is_none());
        assert!(rel(s.dt_critical, 1.5e-3) < 1e-15 && rel(s.dt_critical_damped, 1.5e-3) < 1e-15);
        assert!(rel(s.recommended(0.9).unwrap(), 0.9 * 1.5e-3) < 1e-15);
        // ... and otherwise the finite-difference Lanczos estimate.
        let no_elements = StableStepOptions {
            prefer_elements: false,
            ..options
        };
        let s = estimate(
            &mut chain_model,
            &state,
            &no_elements,
            &Execution::default(),
        )
        .unwrap();
        assert_eq!(s.method, StableStepMethod::FiniteDifferenceLanczos);
        let err = rel(s.omega_max.unwrap(), reference.omega_max.unwrap());
        eprintln!("finite-difference Lanczos: omega relative error {err:.2e}");
        assert!(err < 1e-6, "{err:e}");

        // An element step that is not positive and finite is refused.
        for bad in [0.0, -1.0, f64::NAN, f64::INFINITY] {
            chain_model.element_dt = Some(bad);
            let e =
                estimate(&mut chain_model, &state, &options, &Execution::default()).unwrap_err();
            assert!(
                matches!(
                    e,
                    Error::InvalidParameter {
                        name: "element stable step",
                        ..
                    }
                ),
                "{e}"
            );
        }
        // A failing model is reported with the step and time.
        chain_model.element_dt = None;
        chain_model.fail = true;
        let e = estimate(&mut chain_model, &state, &options, &Execution::default()).unwrap_err();
        match e {
            Error::Model { step, t, source } => {
                assert_eq!(step, 7);
                assert!(rel(t, 0.25) < 1e-15);
                assert!(matches!(source, ModelError::Failed { .. }));
            }
            e => panic!("{e}"),
        }
        // Invalid safety fractions and states of the wrong size.
        let s = estimate(&mut linear, &state, &options, &Execution::default()).unwrap();
        for safety in [0.0, 1.5, f64::NAN] {
            let e = s.recommended(safety).unwrap_err();
            assert!(
                matches!(e, Error::InvalidParameter { name: "safety", .. }),
                "{e}"
            );
        }
        let e = estimate(
            &mut linear,
            &State::at_rest(n + 1, 0.0),
            &options,
            &Execution::default(),
        )
        .unwrap_err();
        assert!(matches!(e, Error::DimensionMismatch { .. }), "{e}");
    }

    /// An isolated top eigenvalue is found to rounding at once; the process then goes on only as
    /// far as the upper bound needs (`lanczos_margin` at most `LANCZOS_MARGIN_TARGET`), and stops
    /// within one test interval of that.
    #[test]
    fn isolated_top_eigenvalue_converges_and_stops_at_the_margin() {
        // K = diag(d) with d in [0, 1) and one entry 10, unit masses: lambda_max = 10.
        let n = 500;
        let mut d = lcg_values(9, n, 0.0, 1.0);
        d[123] = 10.0;
        let est = omega_max_lanczos(
            &vec![1.0; n],
            None,
            |x, y| {
                for ((yi, xi), di) in y.iter_mut().zip(x).zip(&d) {
                    *yi = di * xi;
                }
                Ok(())
            },
            &EigenOptions::default(),
            &Execution::default(),
        )
        .unwrap();
        eprintln!(
            "isolated eigenvalue: products {}, lambda rel. error {:.2e}, bound {:.2e}",
            est.products,
            rel(est.lambda_max, 10.0),
            est.error_estimate
        );
        assert!(rel(est.lambda_max, 10.0) < 1e-12);
        assert!(lanczos_margin(est.products, n) <= LANCZOS_MARGIN_TARGET);
        // The test interval is at most (krylov_dim - krylov_dim / 2) / 2 = 10 products.
        assert!(
            lanczos_margin(est.products - 10, n) > LANCZOS_MARGIN_TARGET,
            "{}",
            est.products
        );
        // The upper bound lies above the eigenvalue, within the margin.
        assert!(est.lambda_upper >= 10.0);
        assert!(est.lambda_upper <= 10.0 / (1.0 - LANCZOS_MARGIN_TARGET) * (1.0 + 1e-12));
    }

    #[test]
    fn tiny_problems_and_no_free_dof() {
        let opts = EigenOptions::default();
        // 1 x 1: lambda = 6 / 2 = 3.
        let est = omega_max_lanczos(
            &[2.0],
            None,
            |x, y| {
                y[0] = 6.0 * x[0];
                Ok(())
            },
            &opts,
            &Execution::default(),
        )
        .unwrap();
        assert!(rel(est.lambda_max, 3.0) < 1e-15 && est.products == 1);
        assert!(rel(est.omega_max, 3.0_f64.sqrt()) < 1e-15);
        // 2 x 2: M = diag(2, 1), K = [[6, -2], [-2, 4]]; M^-1 K has eigenvalues 5 and 2.
        let est = omega_max_lanczos(
            &[2.0, 1.0],
            None,
            |x, y| {
                y[0] = 6.0 * x[0] - 2.0 * x[1];
                y[1] = -2.0 * x[0] + 4.0 * x[1];
                Ok(())
            },
            &opts,
            &Execution::default(),
        )
        .unwrap();
        assert!(rel(est.lambda_max, 5.0) < 1e-14, "{}", est.lambda_max);
        assert!(est.products == 2);
        // 3 DOFs of which two are fixed: the 1 x 1 problem of the free one.
        let est = omega_max_lanczos(
            &[0.0, 4.0, 0.0],
            Some(&[true, false, true]),
            |x, y| {
                y.fill(f64::NAN);
                y[1] = 8.0 * x[1] + 100.0 * (x[0] + x[2]);
                Ok(())
            },
            &opts,
            &Execution::default(),
        )
        .unwrap();
        assert!(rel(est.lambda_max, 2.0) < 1e-15);
        // All DOFs fixed: omega 0 without a single product.
        let est = omega_max_lanczos(
            &[1.0, 1.0],
            Some(&[true, true]),
            |_, _| panic!("no product expected"),
            &opts,
            &Execution::default(),
        )
        .unwrap();
        assert!(est.omega_max == 0.0 && est.products == 0);
        // Zero stiffness: an invariant subspace at once, omega 0.
        let est = omega_max_lanczos(
            &[1.0; 5],
            None,
            |_, y| {
                y.fill(0.0);
                Ok(())
            },
            &opts,
            &Execution::default(),
        )
        .unwrap();
        assert!(est.omega_max == 0.0 && est.products == 1);
        // An empty model.
        let e =
            omega_max_lanczos(&[], None, |_, _| Ok(()), &opts, &Execution::default()).unwrap_err();
        assert!(matches!(e, Error::EmptyModel), "{e}");
    }

    #[test]
    fn lanczos_errors_and_determinism() {
        let n = 200;
        let kmat = chain(&vec![1.0; n + 1]);
        let mass = vec![1.0; n];
        // Not converged within the product budget.
        let few = EigenOptions {
            max_products: 12,
            ..Default::default()
        };
        let e = lanczos(&kmat, &mass, None, &few).unwrap_err();
        match e {
            Error::EigenNotConverged {
                iterations,
                residual,
            } => {
                assert_eq!(iterations, 12);
                assert!(residual > few.tolerance && residual.is_finite());
            }
            e => panic!("{e}"),
        }
        // Invalid options.
        for (opts, name) in [
            (
                EigenOptions {
                    tolerance: 0.0,
                    ..Default::default()
                },
                "tolerance",
            ),
            (
                EigenOptions {
                    tolerance: f64::NAN,
                    ..Default::default()
                },
                "tolerance",
            ),
            (
                EigenOptions {
                    max_products: 0,
                    ..Default::default()
                },
                "max_products",
            ),
            (
                EigenOptions {
                    krylov_dim: 1,
                    ..Default::default()
                },
                "krylov_dim",
            ),
        ] {
            let e = lanczos(&kmat, &mass, None, &opts).unwrap_err();
            assert!(
                matches!(e, Error::InvalidParameter { name: n, .. } if n == name),
                "{e}"
            );
        }
        // A non-finite product and a failing product.
        let e = omega_max_lanczos(
            &mass,
            None,
            |_, y| {
                y.fill(0.0);
                y[5] = f64::NAN;
                Ok(())
            },
            &few,
            &Execution::default(),
        )
        .unwrap_err();
        assert!(matches!(e, Error::NonFiniteInput { index: 5, .. }), "{e}");
        let e = omega_max_lanczos(
            &mass,
            None,
            |_, _| Err(Error::EmptyModel),
            &few,
            &Execution::default(),
        )
        .unwrap_err();
        assert!(matches!(e, Error::EmptyModel), "{e}");
        // A small Krylov dimension still converges (with more restarts), to the same value.
        let small = EigenOptions {
            krylov_dim: 6,
            ..Default::default()
        };
        let a = lanczos(&kmat, &mass, None, &small).unwrap();
        let b = lanczos(&kmat, &mass, None, &EigenOptions::default()).unwrap();
        assert!(a.restarts > b.restarts);
        assert!(rel(a.lambda_max, b.lambda_max) < 1e-9);
        // The parallel vector kernels give the same bits as the serial ones (a diagonal operator
        // over several reduction chunks; one entry isolated at the top, so it converges quickly).
        let n = 5 * CHUNK + 17;
        let mut d = lcg_values(11, n, 0.0, 1.0);
        d[4321] = 3.0;
        let diag_op = |x: &[f64], y: &mut [f64]| {
            for ((yi, xi), di) in y.iter_mut().zip(x).zip(&d) {
                *yi = di * xi;
            }
            Ok(())
        };
        let serial = Execution::serial();
        let parallel = Execution::serial().with_parallelism(Parallelism { threshold: 1 });
        let mass = vec![1.0; n];
        let o = EigenOptions::default();
        let s = omega_max_lanczos(&mass, None, diag_op, &o, &serial).unwrap();
        let p = omega_max_lanczos(&mass, None, diag_op, &o, &parallel).unwrap();
        assert_eq!(s.lambda_max.to_bits(), p.lambda_max.to_bits());
        assert_eq!(s.products, p.products);
        assert!(rel(s.lambda_max, 3.0) < 1e-12);
    }
}

mod budget_tests;
