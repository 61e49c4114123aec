//! The Lanczos estimate's product budget and its margin on uniform chains.

use super::super::*;
use crate::linalg::Parallelism;
use crate::linalg::lanczos::*;
use sprs::TriMat;

/// `tridiag(-1, 2, -1)` of size `n` (unit springs, both ends fixed).
fn uniform_chain(n: usize) -> CsrMatrix {
    let mut t = TriMat::new((n, n));
    for i in 0..n {
        t.add_triplet(i, i, 2.0);
        if i + 1 < n {
            t.add_triplet(i, i + 1, -1.0);
            t.add_triplet(i + 1, i, -1.0);
        }
    }
    CsrMatrix::from_sprs("K", &t.to_csr()).unwrap()
}

/// A uniform chain has a cluster of eigenvalues at the top of its spectrum (relative gap
/// about `(pi / (n + 1))^2 / 4` between the two largest), where the residual falls very
/// slowly. Out of budget, the estimate is returned when its bound is within
/// `tolerance_at_budget`, and it is right to that bound against the closed form
/// `lambda_max = 4 sin^2(n pi / (2 (n + 1)))` (the fixed-fixed chain's eigenvalues
/// `4 sin^2(k pi / (2 (n + 1)))`, common practice); with `tolerance_at_budget = 0` the same run
/// is an error.
#[test]
fn clustered_top_is_accepted_at_budget_within_its_bound() {
    let n = 1500;
    let k = uniform_chain(n);
    let mass = vec![1.0; n];
    let apply = |x: &[f64], y: &mut [f64]| {
        k.mul_vec(x, y, Parallelism::serial());
        Ok(())
    };
    let options = EigenOptions {
        max_products: 150,
        tolerance_at_budget: 1e-3,
        ..Default::default()
    };
    let est = omega_max_lanczos(&mass, None, apply, &options, &Execution::default()).unwrap();
    assert_eq!(est.products, 150, "the budget was spent");
    assert!(
        est.error_estimate > options.tolerance && est.error_estimate <= options.tolerance_at_budget,
        "{}",
        est.error_estimate
    );
    let exact = 4.0
        * (n as f64 * std::f64::consts::PI / (2.0 * (n + 1) as f64))
            .sin()
            .powi(2);
    let rel = (exact - est.lambda_max) / exact;
    assert!(
        rel >= -1e-14 && rel <= est.error_estimate,
        "{rel} vs {}",
        est.error_estimate
    );

    let strict = EigenOptions {
        tolerance_at_budget: 0.0,
        ..options
    };
    let e = omega_max_lanczos(&mass, None, apply, &strict, &Execution::default()).unwrap_err();
    match e {
        Error::EigenNotConverged {
            iterations,
            residual,
        } => {
            assert_eq!(iterations, 150);
            assert!((residual - est.error_estimate).abs() <= 1e-12 * est.error_estimate);
        }
        e => panic!("{e}"),
    }
    let bad = EigenOptions {
        tolerance_at_budget: f64::NAN,
        ..options
    };
    let e = omega_max_lanczos(&mass, None, apply, &bad, &Execution::default()).unwrap_err();
    assert!(
        matches!(
            e,
            Error::InvalidParameter {
                name: "tolerance_at_budget",
                ..
            }
        ),
        "{e}"
    );
}
