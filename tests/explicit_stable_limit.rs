//! The stable limit the central difference refuses steps against is a true upper bound on the
//! step: it rests on an upper bound on `omega_max`, not on the Lanczos estimate (a Rayleigh
//! quotient, which approaches `omega_max` from below and so the step from the unsafe side).

use stepgauge::explicit::stable_step::{
    LANCZOS_MARGIN_TARGET, StableStepMethod, StableStepOptions, estimate, lanczos_margin,
};
use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions};
use stepgauge::linalg::Execution;
use stepgauge::model::Model;
use stepgauge::{Error, ModelError, State};

/// A uniform fixed-fixed chain of `n` masses `m` and `n + 1` springs `k`, as a matrix-free model
/// (no assembled stiffness handed over: the estimate is plain Lanczos on its products).
struct Chain {
    n: usize,
    k: f64,
    m: f64,
}

impl Chain {
    fn apply(&self, x: &[f64], out: &mut [f64]) {
        for i in 0..self.n {
            let left = if i > 0 { x[i - 1] } else { 0.0 };
            let right = if i + 1 < self.n { x[i + 1] } else { 0.0 };
            out[i] = self.k * (2.0 * x[i] - left - right);
        }
    }

    /// `lambda_max = (4k/m) sin^2(n pi / (2 (n + 1)))`: the eigenvalues of the tridiagonal
    /// Toeplitz matrix `tridiag(-k, 2k, -k) / m` (Strang 1986, *Introduction to Applied
    /// Mathematics*; common knowledge of the discrete Laplacian).
    fn omega_max(&self) -> f64 {
        let n = self.n as f64;
        let s = (n * std::f64::consts::PI / (2.0 * (n + 1.0))).sin();
        (4.0 * self.k / self.m * s * s).sqrt()
    }
}

impl Model for Chain {
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
    ) -> Result<(), ModelError> {
        self.apply(u, out);
        Ok(())
    }
    fn stiffness_product(
        &mut self,
        _t: f64,
        _u: &[f64],
        x: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        self.apply(x, out);
        Ok(())
    }
}

/// For chains whose top eigenvalues cluster (relative gaps from about 1e-3 to 4e-6), the limit
/// the integrator enforces is never above the exact critical step `2 / omega_max`, while the
/// Lanczos estimate itself may be (it lies below `omega_max`); the limit is within the margin of
/// the estimate; a step at the limit is taken, one a hair above it refused.
#[test]
fn the_enforced_limit_is_below_the_exact_critical_step() {
    for n in [100usize, 400, 1500] {
        let mut chain = Chain {
            n,
            k: 1000.0,
            m: 2.0,
        };
        let exact = 2.0 / chain.omega_max();
        let state = State::at_rest(n, 0.0);
        let s = estimate(
            &mut chain,
            &state,
            &StableStepOptions::default(),
            &Execution::default(),
        )
        .unwrap();
        assert_eq!(s.method, StableStepMethod::Lanczos);
        eprintln!(
            "n {n}: estimate / exact - 1 = {:.1e}, limit / exact - 1 = {:.1e}",
            s.dt_critical / exact - 1.0,
            s.dt_limit / exact - 1.0
        );
        assert!(
            s.dt_limit <= exact,
            "n {n}: limit {} above {exact}",
            s.dt_limit
        );
        assert!(
            s.dt_critical >= exact * (1.0 - 1e-9),
            "n {n}: estimate {}",
            s.dt_critical
        );
        // Within the margin: omega_upper / omega_max <= 1 / sqrt(1 - target).
        assert!(
            s.dt_limit >= s.dt_critical * (1.0 - LANCZOS_MARGIN_TARGET).sqrt() * (1.0 - 1e-12),
            "n {n}: {} vs {}",
            s.dt_limit,
            s.dt_critical
        );
        assert!(s.recommended(1.0).unwrap() <= s.dt_limit_damped);
        let mut state = State::new(0.0, vec![0.0; n], vec![1e-3; n]).unwrap();
        let mut cd =
            CentralDifference::new(&mut chain, &mut state, CentralDifferenceOptions::default())
                .unwrap();
        let limit = cd.stable_limit().unwrap();
        assert_eq!(limit, s.dt_limit_damped, "n {n}");
        let above = limit * (1.0 + 1e-12);
        match cd.step(&mut chain, &mut state, above) {
            Err(Error::StepAboveStableLimit { dt, dt_stable }) => {
                assert_eq!((dt, dt_stable), (above, limit))
            }
            other => panic!("n {n}: {other:?}"),
        }
        cd.step(&mut chain, &mut state, limit).unwrap();
    }
}

/// The margin (Kuczynski & Wozniakowski 1992, from memory) at the numbers its documentation
/// quotes, computed from the formula `(ln(1.648 sqrt(n) / 1e-9) / (2k - 1))^2`.
#[test]
fn the_margin_at_documented_points() {
    let want = |k: f64, n: f64| ((1.648 * n.sqrt() / 1e-9).ln() / (2.0 * k - 1.0)).powi(2);
    for (k, n) in [(40usize, 1e6), (200, 1e6), (1000, 1e6), (100, 1e4)] {
        let got = lanczos_margin(k, n as usize);
        assert!((got - want(k as f64, n)).abs() <= 1e-15, "{k} {n}: {got}");
    }
    assert_eq!(lanczos_margin(1, 1_000_000), 1.0);
    assert_eq!(lanczos_margin(0, 10), 1.0);
}
