//! No public function panics, hangs or accepts nonsense: every entry point that takes numbers,
//! slices or matrices is fed values drawn from {NaN, +-infinity, 0, -0, negative, tiny, huge,
//! ordinary} and lengths {0, 1, mismatched}, inside `std::panic::catch_unwind`. A panic fails the
//! test naming the function and its input; where the documentation names the invalid inputs,
//! they must give `Err` (valid input may give `Ok` or a typed `Err`). Functions that return a
//! plain `f64` may return NaN for NaN input, but must return.
//!
//! Regression cases for the panics and endless loops this harness found are at the end of the
//! file (`regression_*`), one per fixed function, with the input that failed.

// The validity conditions are written as the documentation states them ("not positive and
// finite"), which reads better than their De Morgan forms.
#![allow(clippy::nonminimal_bool)]

mod common;

use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::PathBuf;

use proptest::prelude::*;
use sprs::{CsMat, TriMat};
use stepgauge::energy::EnergyLedger;
use stepgauge::explicit::stable_step::{EigenOptions, StableStepOptions, estimate};
use stepgauge::explicit::{
    CentralDifference, CentralDifferenceOptions, ForceVelocity, StableLimit, critical_step,
    element_stable_step, omega_max_gershgorin, omega_max_lanczos,
};
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions, NewtonOptions, NewtonVariant};
use stepgauge::linalg::{
    CgOptions, ConjugateGradient, CsrMatrix, Execution, LinearSolver, Parallelism, SparseCholesky,
    SparseLu, dot, norm2, spmv,
};
use stepgauge::model::{
    Constraints, Damping, LinearModel, Load, LoadTable, Model, Tangent, TimeFunction,
};
use stepgauge::params::AlphaParams;
use stepgauge::reference::{
    BarImpact, Duffing, ReferenceProblem, SdofFree, SdofHalfSine, SdofHarmonic, StiffSoft,
    TwoDofStep,
};
use stepgauge::run::{Flow, Record, RecordOptions, RunOptions, StepControl, run};
use stepgauge::spectral::{
    self, CheckContext, Scheme, alpha_amplification, bracket_check, cd_amplification,
    characteristic_polynomial, eigenvalues, eigenvalues3, largest_step_for_damping,
    largest_step_for_period_error, log_space, metrics, newmark_stability_map,
    omega_crit_closed_form, omega_crit_numeric, order_of_accuracy, rho_inf, spectral_radius, sweep,
};
use stepgauge::{Error, State};

const CASES: u32 = 64;

/// The values every numeric argument is drawn from.
const VALUES: [f64; 16] = [
    f64::NAN,
    f64::INFINITY,
    f64::NEG_INFINITY,
    0.0,
    -0.0,
    -1.5,
    -1e300,
    1e-300,
    5e-324,
    1e300,
    f64::MAX,
    1.0,
    0.25,
    0.7,
    2.0,
    37.0,
];

fn num() -> impl Strategy<Value = f64> + Clone {
    prop::sample::select(VALUES.to_vec())
}

fn vec_of(len: std::ops::Range<usize>) -> impl Strategy<Value = Vec<f64>> + Clone {
    prop::collection::vec(num(), len)
}

fn finite(x: f64) -> bool {
    x.is_finite()
}

fn all_finite(x: &[f64]) -> bool {
    x.iter().all(|v| v.is_finite())
}

/// Runs `f`, failing the test (with the function and its input) if it panics.
fn guard<T>(what: &str, input: &dyn std::fmt::Debug, f: impl FnOnce() -> T) -> T {
    match catch_unwind(AssertUnwindSafe(f)) {
        Ok(v) => v,
        Err(e) => {
            let msg = e
                .downcast_ref::<String>()
                .cloned()
                .or_else(|| e.downcast_ref::<&str>().map(|s| s.to_string()))
                .unwrap_or_default();
            panic!("{what} panicked on {input:?}: {msg}");
        }
    }
}

/// Asserts `Err` for invalid input (and nothing for valid input).
fn refused<T: std::fmt::Debug>(what: &str, input: &dyn std::fmt::Debug, r: &stepgauge::Result<T>) {
    assert!(r.is_err(), "{what} accepted invalid input {input:?}: {r:?}");
}

fn diag(v: &[f64]) -> CsMat<f64> {
    common::diag(v)
}

/// The diagonal `sym(n, d, ..)` stores: `d` repeated (1 where `d` is empty).
fn used(n: usize, d: &[f64]) -> Vec<f64> {
    (0..n)
        .map(|i| if d.is_empty() { 1.0 } else { d[i % d.len()] })
        .collect()
}

/// A square sparse matrix of size `n` with the diagonal `used(n, d)` and one off-diagonal pair.
fn sym(n: usize, d: &[f64], off: f64) -> CsMat<f64> {
    let mut t = TriMat::new((n, n));
    for (i, x) in used(n, d).into_iter().enumerate() {
        t.add_triplet(i, i, x);
    }
    if n > 1 {
        t.add_triplet(0, 1, off);
        t.add_triplet(1, 0, off);
    }
    t.to_csr()
}

/// A small valid model: a chain of unit masses, the given spring.
fn chain(n: usize, k: f64) -> LinearModel {
    LinearModel::new(
        &diag(&vec![1.0; n]),
        &common::chain_stiffness(n, k, true, false),
    )
    .unwrap()
}

/// Bitwise equality of two states (NaN equals NaN).
fn same_bits(a: &State, b: &State) -> bool {
    let bits = |s: &State| -> Vec<u64> {
        std::iter::once(s.t)
            .chain(s.u.iter().copied())
            .chain(s.v.iter().copied())
            .chain(s.a.iter().copied())
            .map(f64::to_bits)
            .collect()
    };
    a.step == b.step && bits(a) == bits(b)
}

fn explicit_opts(stable: StableLimit) -> CentralDifferenceOptions {
    {
        let mut o = CentralDifferenceOptions::default();
        o.stable_limit = stable;
        o
    }
}

/// A unique scratch directory, removed when dropped.
struct Scratch(PathBuf);

impl Scratch {
    fn new(tag: &str) -> Self {
        let dir = std::env::temp_dir().join(format!(
            "stepgauge-no-panic-{tag}-{}-{:?}",
            std::process::id(),
            std::thread::current().id()
        ));
        std::fs::create_dir_all(&dir).unwrap();
        Scratch(dir)
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

// ---------------------------------------------------------------------------------------------
// State, models, loads, damping

proptest! {
    #![proptest_config(ProptestConfig { cases: CASES, ..ProptestConfig::default() })]

    #[test]
    fn state_new(t0 in num(), u in vec_of(0..3), v in vec_of(0..3)) {
        let input = (t0, &u, &v);
        let r = guard("State::new", &input, || State::new(t0, u.clone(), v.clone()));
        let valid = u.len() == v.len() && finite(t0) && all_finite(&u) && all_finite(&v);
        if valid {
            prop_assert!(r.is_ok(), "{input:?}: {r:?}");
        } else {
            refused("State::new", &input, &r);
        }
        let s = guard("State::at_rest", &0, || State::at_rest(u.len(), t0));
        prop_assert_eq!(s.dofs(), u.len());
    }

    #[test]
    fn linear_model_new_and_builders(
        nm in 0..4usize, nk in 0..4usize, dm in vec_of(1..3), dk in vec_of(1..3), off in num(),
        a0 in num(), a1 in num(), pattern in vec_of(0..4), dof in 0..5usize,
        times in vec_of(0..3), values in vec_of(0..4),
    ) {
        let input = (nm, nk, &dm, &dk, off);
        let (m, k) = (sym(nm, &dm, 0.0), sym(nk, &dk, off));
        let r = guard("LinearModel::new", &input, || LinearModel::new(&m, &k));
        let valid = nm == nk && nm > 0 && all_finite(&used(nm, &dm)) && all_finite(&used(nk, &dk))
            && (nk < 2 || finite(off));
        if !valid {
            refused("LinearModel::new", &input, &r);
        }
        let Ok(model) = r else { return Ok(()) };
        let n = nm;
        // Rayleigh coefficients.
        let r = guard("with_rayleigh", &(a0, a1), || model.clone().with_rayleigh(a0, a1));
        if !(finite(a0) && finite(a1) && a0 >= 0.0 && a1 >= 0.0) {
            refused("with_rayleigh", &(a0, a1), &r);
        }
        // Load pattern of any length and value.
        let load = Load::Pattern { pattern: pattern.clone(), factor: TimeFunction::Constant(1.0) };
        let r = guard("with_load(Pattern)", &pattern, || model.clone().with_load(load));
        if pattern.len() != n || !all_finite(&pattern) {
            refused("with_load(Pattern)", &pattern, &r);
        }
        // Load table on any DOF.
        let input = (&times, dof, &values);
        let t = guard("LoadTable::new", &input,
            || LoadTable::new(times.clone(), vec![dof], values.clone()));
        let sorted = times.windows(2).all(|w| w[0] < w[1]);
        if times.is_empty() || !all_finite(&times) || !sorted || values.len() != times.len()
            || !all_finite(&values)
        {
            refused("LoadTable::new", &input, &t);
        }
        if let Ok(table) = t {
            for out_len in [0, 1, n] {
                let mut out = vec![0.0; out_len];
                for tt in VALUES {
                    let r = guard("LoadTable::eval", &(tt, out_len), || table.eval(tt, &mut out));
                    if dof >= out_len {
                        refused("LoadTable::eval", &(tt, out_len), &r);
                    }
                }
            }
            let r = guard("with_load(Table)", &input,
                || model.clone().with_load(Load::Table(table.clone())));
            if dof >= n {
                refused("with_load(Table)", &input, &r);
            }
            let r = guard("io::csv::validate_dofs", &input,
                || stepgauge::io::csv::validate_dofs(&table, n));
            if dof >= n {
                refused("validate_dofs", &input, &r);
            }
        }
        // Damping matrix of another size, constraints out of range or duplicated.
        let c = diag(&vec![1.0; (n + dof) % 4 + 1]);
        let r = guard("with_damping_matrix", &dof, || model.clone().with_damping_matrix(&c));
        if c.rows() != n {
            refused("with_damping_matrix", &dof, &r);
        }
        let cons = Constraints::new().fix(dof).fix(dof % 2);
        let r = guard("with_constraints", &dof, || model.clone().with_constraints(cons.clone()));
        let bad = dof >= n || dof % 2 >= n || dof == dof % 2;
        if bad {
            refused("with_constraints", &dof, &r);
        }
        let r = guard("Constraints::validate", &dof, || cons.validate(n));
        prop_assert_eq!(r.is_err(), bad);
    }

    /// The `Model` methods of the ready-made models with buffers of every length.
    #[test]
    fn model_methods_with_wrong_buffers(
        n in 1..4usize, lens in prop::collection::vec(0..5usize, 4), t in num(), x in num(),
        which in 0..2usize,
    ) {
        let mut models: Vec<Box<dyn Tangent>> = vec![
            Box::new(
                chain(n, 2.0)
                    .with_load(Load::Table(LoadTable::new(vec![0.0, 1.0], vec![n - 1], vec![0.0, 1.0]).unwrap()))
                    .unwrap()
                    .with_damping_matrix(&diag(&vec![0.1; n]))
                    .unwrap(),
            ),
            Box::new(Duffing::reference()),
        ];
        let model = &mut models[which];
        let nd = model.dofs();
        let mk = |i: usize| vec![x; lens[i]];
        let (u, v, xx) = (mk(0), mk(1), mk(2));
        let mut out = vec![0.0; lens[3]];
        let input = (which, &lens, t, x);
        let all_right = lens.iter().all(|&l| l == nd);
        let r = guard("Model::internal_force", &input, || model.internal_force(t, &u, &v, &mut out));
        if lens[0] != nd || lens[1] != nd || lens[3] != nd {
            prop_assert!(r.is_err(), "internal_force {input:?}");
        }
        let r = guard("Model::external_force", &input, || model.external_force(t, &mut out));
        if lens[3] != nd {
            prop_assert!(r.is_err(), "external_force {input:?}");
        }
        let r = guard("Model::stiffness_product", &input,
            || model.stiffness_product(t, &u, &xx, &mut out));
        if lens[0] != nd || lens[2] != nd || lens[3] != nd {
            prop_assert!(r.is_err(), "stiffness_product {input:?}");
        }
        let r = guard("Model::damping_force", &input, || model.damping_force(t, &u, &v, &mut out));
        if lens[0] != nd || lens[1] != nd || lens[3] != nd {
            prop_assert!(r.is_err(), "damping_force {input:?}");
        }
        guard("Model::lumped_mass", &input, || model.lumped_mass(&mut out));
        if lens[3] != nd {
            prop_assert!(out.iter().all(|m| m.is_nan()), "lumped_mass {input:?}: {out:?}");
        }
        let e = guard("Model::stored_energy", &input, || model.stored_energy(&u));
        if lens[0] != nd {
            prop_assert!(e.is_none());
        }
        let mut tangent = CsrMatrix::from_diagonal(&vec![0.0; lens[2]]);
        let r = guard("Model::tangent_stiffness", &input,
            || model.tangent_stiffness(t, &u, &v, &mut tangent));
        if lens[2] != nd || lens[0] != nd || lens[1] != nd {
            prop_assert!(r.is_err(), "tangent_stiffness {input:?}");
        }
        let _ = all_right;
    }

    #[test]
    fn damping_and_time_functions(
        w1 in num(), xi1 in num(), w2 in num(), xi2 in num(), t in num(),
        times in vec_of(0..4), values in vec_of(0..4),
    ) {
        let input = (w1, xi1, w2, xi2);
        let r = guard("Damping::rayleigh_from_modes", &input,
            || Damping::rayleigh_from_modes(w1, xi1, w2, xi2));
        let valid = finite(w1) && finite(w2) && w1 > 0.0 && w2 > 0.0 && finite(xi1) && finite(xi2)
            && xi1 >= 0.0 && xi2 >= 0.0 && w1 != w2;
        if !valid {
            refused("rayleigh_from_modes", &input, &r);
        }
        if let Ok(Damping::Rayleigh { a0, a1 }) = r {
            prop_assert!(a0.is_finite() && a1.is_finite(), "{input:?}: {a0} {a1}");
        }
        for d in [Damping::None, Damping::Force, Damping::Rayleigh { a0: xi1, a1: xi2 }] {
            guard("Damping::ratio_at", &(d, w1), || d.ratio_at(w1));
        }
        let input = (&times, &values);
        let f = guard("TimeFunction::table", &input,
            || TimeFunction::table(times.clone(), values.clone()));
        let sorted = times.windows(2).all(|w| w[0] < w[1]);
        if times.is_empty() || !all_finite(&times) || !sorted || times.len() != values.len()
            || !all_finite(&values)
        {
            refused("TimeFunction::table", &input, &f);
        }
        if let Ok(f) = f {
            guard("TimeFunction::value", &t, || f.value(t));
        }
        guard("TimeFunction::Constant", &t, || TimeFunction::Constant(t).value(t));
    }
}

// ---------------------------------------------------------------------------------------------
// Parameters and the integrators

proptest! {
    #![proptest_config(ProptestConfig { cases: CASES, ..ProptestConfig::default() })]

    #[test]
    fn alpha_params_constructors(a in num(), b in num(), c in num(), d in num()) {
        let unit = |x: f64| (0.0..=1.0).contains(&x);
        // Parameters of magnitude up to PARAMETER_LIMIT (1e6) are accepted.
        let finite = |x: f64| x.is_finite() && x.abs() <= stepgauge::params::PARAMETER_LIMIT;
        let checks: Vec<(&str, stepgauge::Result<AlphaParams>, bool)> = vec![
            ("newmark", guard("AlphaParams::newmark", &(a, b), || AlphaParams::newmark(a, b)),
             finite(a) && finite(b) && a >= 0.0 && b >= 0.0),
            ("hht", guard("AlphaParams::hht", &a, || AlphaParams::hht(a)),
             (-1.0 / 3.0..=0.0).contains(&a)),
            ("hht_from_rho_inf", guard("hht_from_rho_inf", &a, || AlphaParams::hht_from_rho_inf(a)),
             (0.5..=1.0).contains(&a)),
            ("wbz", guard("AlphaParams::wbz", &a, || AlphaParams::wbz(a)), (-1.0..=0.0).contains(&a)),
            ("wbz_from_rho_inf", guard("wbz_from_rho_inf", &a, || AlphaParams::wbz_from_rho_inf(a)),
             unit(a)),
            ("generalized_alpha", guard("generalized_alpha", &a, || AlphaParams::generalized_alpha(a)),
             unit(a)),
            ("raw", guard("AlphaParams::raw", &(a, b, c, d), || AlphaParams::raw(a, b, c, d)),
             [a, b, c, d].iter().all(|&x| finite(x)) && a < 1.0 && b < 1.0 && c >= 0.0
                 && d >= 0.0),
        ];
        for (name, r, valid) in checks {
            if valid {
                prop_assert!(r.is_ok(), "{name}({a}, {b}, {c}, {d}): {r:?}");
            } else {
                refused(name, &(a, b, c, d), &r);
            }
        }
        // A set read from JSON (a checkpoint edited by hand) is checked as the constructors
        // check; a set that passes is then judged for stepping.
        let json = serde_json::json!({"alpha_m": a, "alpha_f": b, "beta": c, "gamma": d, "family": "custom"});
        let read = guard("AlphaParams from JSON", &json, || serde_json::from_value::<AlphaParams>(json.clone()));
        let raw_ok = AlphaParams::raw(a, b, c, d).is_ok();
        prop_assert_eq!(read.is_ok(), raw_ok, "{:?}", read);
        if let Ok(p) = read {
            let r = guard("validate_for_stepping", &p, || p.validate_for_stepping());
            if c <= 0.0 {
                refused("validate_for_stepping", &p, &r);
            }
        }
        // A label that does not fit the values is refused.
        let json = serde_json::json!({"alpha_m": 0.1, "alpha_f": 0.0, "beta": 0.3, "gamma": 0.6, "family": "newmark"});
        prop_assert!(serde_json::from_value::<AlphaParams>(json).is_err());
    }

    /// The central difference: construction with any masses, stiffness, options and start, then
    /// steps of any size on the right or a wrong-sized state.
    #[test]
    fn central_difference_new_and_step(
        n in 1..4usize, m in num(), k in num(), u0 in num(), v0 in num(),
        given in num(), tol in num(), growth in num(), dt in num(), which in 0..3usize,
        predicted in any::<bool>(), wrong in 0..4usize, g in num(),
    ) {
        let input = (n, m, k, u0, v0, given, tol, growth, which, g);
        let Ok(model) = LinearModel::new(&diag(&vec![m; n]), &diag(&vec![k; n])) else {
            prop_assert!(!(finite(m) && finite(k)));
            return Ok(());
        };
        // A prescribed motion and a load that return any value (user closures).
        let mut model = model
            .with_constraints(Constraints::new().prescribe_displacement(n - 1, TimeFunction::function(move |t| g * t)))
            .unwrap()
            .with_load(Load::Function(std::sync::Arc::new(move |_t: f64, out: &mut [f64]| out.fill(g))))
            .unwrap();
        let stable_limit = [StableLimit::Given(given), StableLimit::Unchecked, StableLimit::Estimate][which];
        let mut options = CentralDifferenceOptions::default();
        options.stable_limit = stable_limit;
        options.balance_tolerance = (which == 1).then_some(tol);
        options.growth_limit = growth;
        options.force_velocity = if predicted { ForceVelocity::Predicted } else { ForceVelocity::Lagged };
        let mut state = State::at_rest(n, 0.0);
        state.u.fill(u0);
        state.v.fill(v0);
        let before = state.clone();
        let r = guard("CentralDifference::new", &input,
            || CentralDifference::new(&mut model, &mut state, options.clone()));
        // The last DOF is constrained: its mass may be zero.
        let free_mass_bad = n > 1 && !(finite(m) && m > 0.0);
        let invalid = free_mass_bad || !(finite(m) && m >= 0.0)
            || !finite(u0) || !finite(v0)
            || (which == 0 && !(finite(given) && given > 0.0))
            || (which == 1 && !(finite(tol) && tol > 0.0))
            || growth.is_nan() || growth <= 0.0;
        if invalid {
            refused("CentralDifference::new", &input, &r);
            prop_assert!(same_bits(&state, &before), "a failed new changed the state");
        }
        let Ok(mut cd) = r else { return Ok(()) };
        let r = guard("CentralDifference::step", &(input, dt), || cd.step(&mut model, &mut state, dt));
        if !(finite(dt) && dt > 0.0) {
            refused("CentralDifference::step", &dt, &r);
        }
        // A state of another size, or one whose public fields were set to nonsense.
        let mut other = State::at_rest(wrong, 0.0);
        if wrong == n {
            other.t = f64::NAN;
        }
        let r = guard("CentralDifference::step (bad state)", &(input, wrong),
            || cd.step(&mut model, &mut other, 0.01));
        refused("CentralDifference::step (bad state)", &wrong, &r);
        let r = guard("set_stable_limit", &given, || cd.set_stable_limit(StableLimit::Given(given)));
        if !(finite(given) && given > 0.0) {
            refused("set_stable_limit", &given, &r);
        }
        let r = guard("reestimate_stable_step", &wrong, || cd.update_stable_step(&mut model, &other));
        refused("reestimate_stable_step (bad state)", &wrong, &r);
        // Resume with an edited ledger.
        let mut ledger = cd.energy().clone();
        ledger.extra_names.push("ghost".into());
        guard("EnergyLedger::extra", &"ghost", || ledger.extra("ghost"));
        guard("EnergyLedger::relative_balance_error", &0, || ledger.relative_balance_error());
        let r = guard("CentralDifference::resume", &input,
            || CentralDifference::resume(&mut model, &state, ledger.clone(), options.clone()));
        refused("CentralDifference::resume (edited ledger)", &input, &r);
    }

    /// The implicit family: any parameter set, options, solver, start and step.
    #[test]
    fn alpha_integrator_new_and_step(
        n in 1..4usize, m in num(), k in num(), u0 in num(),
        am in num(), beta in num(), growth in num(), rtol in num(), max_iter in 0..3usize,
        dt in num(), solver in 0..4usize, wrong in 0..4usize, consistent in any::<bool>(),
    ) {
        // Sets the constructors refuse cannot be made; the integrator judges the rest.
        let Ok(p) = AlphaParams::raw(am.min(0.9), 0.0, beta, 0.5) else {
            return Ok(());
        };
        let input = (n, m, k, u0, p, growth, rtol, max_iter, solver, consistent);
        let mass = if consistent && n > 1 { sym(n, &[m], 0.1) } else { diag(&vec![m; n]) };
        let Ok(mut model) = LinearModel::new(&mass, &common::chain_stiffness(n, k, true, false)) else {
            return Ok(());
        };
        let mut options = ImplicitOptions::default();
        options.growth_limit = growth;
        options.newton = {
            let mut o = NewtonOptions::default();
            o.residual_tolerance = rtol;
            o.max_iterations = max_iter;
            o.variant = NewtonVariant::Modified { refresh_every: 0 };
            o
        };
        let solver: Box<dyn LinearSolver> = match solver {
            0 => Box::new(SparseCholesky::new()),
            1 => Box::new(SparseLu::new()),
            2 => Box::new(ConjugateGradient::new(CgOptions::default()).unwrap()),
            _ => common::DenseLu::boxed(),
        };
        let mut state = State::at_rest(n, 0.0);
        state.u.fill(u0);
        let before = state.clone();
        let r = guard("AlphaIntegrator::new", &input,
            || AlphaIntegrator::new(&mut model, &mut state, p, solver, options.clone()));
        let invalid = !(finite(beta) && beta > 0.0)
            || !finite(u0)
            || growth.is_nan() || growth <= 0.0
            || rtol.is_nan() || rtol <= 0.0 || max_iter == 0;
        if invalid {
            refused("AlphaIntegrator::new", &input, &r);
            prop_assert!(same_bits(&state, &before), "a failed new changed the state");
        }
        let Ok(mut it) = r else { return Ok(()) };
        let r = guard("AlphaIntegrator::step", &(input, dt), || it.step(&mut model, &mut state, dt));
        if !(finite(dt) && dt > 0.0) {
            refused("AlphaIntegrator::step", &dt, &r);
        }
        let mut other = State::at_rest(wrong, 0.0);
        if wrong == n {
            other.t = f64::INFINITY;
        }
        let r = guard("AlphaIntegrator::step (bad state)", &(input, wrong),
            || it.step(&mut model, &mut other, 0.01));
        refused("AlphaIntegrator::step (bad state)", &wrong, &r);
        let mut ledger = it.energy().clone();
        ledger.extra_work.push(1.0);
        let r = guard("AlphaIntegrator::resume", &input, || AlphaIntegrator::resume(
            &mut model, &state, ledger.clone(), p, common::DenseLu::boxed(), options.clone()));
        refused("AlphaIntegrator::resume (edited ledger)", &input, &r);
    }

    /// `run` with any end time, step control and recording.
    #[test]
    fn run_options(t_end in num(), dt in num(), safety in num(), every in 0..3u64, dof in 0..4usize,
                   auto in any::<bool>(), t0 in num()) {
        let mut model = chain(2, 4.0);
        let mut state = State::new(0.0, vec![0.1, 0.0], vec![0.0; 2]).unwrap();
        let mut cd = CentralDifference::new(&mut model, &mut state, explicit_opts(StableLimit::Estimate)).unwrap();
        state.t = t0;
        let step = if auto { StepControl::Auto { safety, reestimate_every: 3 } } else { StepControl::Fixed(dt) };
        let mut opts = RunOptions::new(t_end, step);
        opts.max_steps = Some(50);
        opts.record = {
            let mut o = RecordOptions::default();
            o.dofs = Some(vec![dof]);
            o.every = every;
            o
        };
        let input = (t_end, step, every, dof, t0);
        let r = guard("run", &input, || run(&mut cd, &mut model, &mut state, &opts, |_| Flow::Continue));
        let invalid = !finite(t_end) || !finite(t0) || every == 0 || dof >= 2
            || (!auto && !(finite(dt) && dt > 0.0))
            || (auto && !(safety > 0.0 && safety <= 1.0));
        if invalid {
            refused("run", &input, &r);
        }
        if let Ok(out) = r {
            guard("Record::u_column", &dof, || out.record.u_column(dof).count());
        }
    }
}

// ---------------------------------------------------------------------------------------------
// The stable step

proptest! {
    #![proptest_config(ProptestConfig { cases: CASES, ..ProptestConfig::default() })]

    #[test]
    fn stable_step_functions(
        w in num(), xi in num(), lengths in vec_of(0..3), speeds in vec_of(0..3),
        mass in vec_of(0..4), kd in num(), mask_len in 0..5usize, tol in num(),
        krylov in 0..4usize, products in 0..3usize, product_value in num(), safety in num(),
    ) {
        let r = guard("critical_step", &(w, xi), || critical_step(w, xi));
        if !(finite(w) && w >= 0.0 && finite(xi) && xi >= 0.0) {
            refused("critical_step", &(w, xi), &r);
        }
        let input = (&lengths, &speeds);
        let r = guard("element_stable_step", &input, || element_stable_step(&lengths, &speeds));
        if lengths.len() != speeds.len() || lengths.is_empty() || !all_finite(&lengths)
            || !all_finite(&speeds) || lengths.iter().chain(&speeds).any(|x| *x <= 0.0)
        {
            refused("element_stable_step", &input, &r);
        }
        let n = mass.len();
        let k = CsrMatrix::from_diagonal(&vec![kd; n.max(1)]);
        let mask: Vec<bool> = (0..mask_len).map(|i| i % 2 == 1).collect();
        let input = (&mass, kd, mask_len);
        let r = guard("omega_max_gershgorin", &input, || omega_max_gershgorin(&k, &mass, Some(&mask)));
        let free_mass_bad = mass.iter().enumerate().any(|(i, m)| !mask.get(i).copied().unwrap_or(false) && !(finite(*m) && *m > 0.0));
        if n == 0 || mask_len != n || free_mass_bad || !finite(kd) {
            refused("omega_max_gershgorin", &input, &r);
        }
        let mut eig = EigenOptions::default();
        eig.tolerance = tol;
        eig.krylov_dim = krylov;
        eig.max_products = products;
        let input = (&mass, mask_len, eig, product_value);
        let r = guard("omega_max_lanczos", &input, || omega_max_lanczos(&mass, Some(&mask), |x, out| {
            for (o, xi) in out.iter_mut().zip(x) {
                *o = product_value * xi;
            }
            Ok(())
        }, &eig, &Execution::default()));
        if !(finite(tol) && tol > 0.0 && tol < 1.0) || krylov < 2 || products == 0 || n == 0
            || mask_len != n || free_mass_bad
        {
            refused("omega_max_lanczos", &input, &r);
        }
        // `estimate` on a model, with any safety fraction and state.
        let mut model = chain(2, 3.0);
        let mut state = State::at_rest(2, 0.0);
        state.u[0] = product_value;
        let mut opts = StableStepOptions::default();
        opts.eigen.krylov_dim = krylov.max(2);
        let ex = Execution::default();
        let r = guard("stable_step::estimate", &product_value, || estimate(&mut model, &state, &opts, &ex));
        if !finite(product_value) {
            refused("estimate", &product_value, &r);
        }
        if let Ok(est) = r {
            let r = guard("StableStep::recommended", &safety, || est.recommended(safety));
            if !(finite(safety) && safety > 0.0 && safety <= 1.0) {
                refused("recommended", &safety, &r);
            }
        }
        let short = State::at_rest(mask_len % 2, 0.0);
        let r = guard("stable_step::estimate (short state)", &mask_len, || estimate(&mut model, &short, &StableStepOptions::default(), &ex));
        refused("estimate (short state)", &mask_len, &r);
        guard("ForceVelocity::critical_omega_dt", &xi, || {
            (ForceVelocity::Lagged.critical_omega_dt(xi), ForceVelocity::Predicted.critical_omega_dt(xi))
        });
    }
}

// ---------------------------------------------------------------------------------------------
// Spectral analysis

fn any_scheme() -> impl Strategy<Value = Scheme> {
    prop_oneof![
        Just(Scheme::CentralDifference(ForceVelocity::Lagged)),
        Just(Scheme::CentralDifference(ForceVelocity::Predicted)),
        Just(Scheme::Alpha(AlphaParams::average_acceleration())),
        Just(Scheme::Alpha(AlphaParams::generalized_alpha(0.3).unwrap())),
        Just(Scheme::Alpha(AlphaParams::newmark(0.0, 0.5).unwrap())),
        (num(), num(), num(), num()).prop_filter_map(
            "a set the constructors accept",
            |(alpha_m, alpha_f, beta, gamma)| {
                AlphaParams::raw(alpha_m, alpha_f, beta, gamma)
                    .ok()
                    .map(Scheme::Alpha)
            }
        ),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig { cases: CASES, ..ProptestConfig::default() })]

    #[test]
    fn spectral_functions(
        scheme in any_scheme(), o in num(), xi in num(), scan in num(), target in num(),
        w in num(), dt in num(), a in prop::collection::vec(num(), 9),
    ) {
        let input = (scheme, o, xi);
        guard("eigenvalues", &input, || eigenvalues(&scheme, o, xi));
        let rho = guard("spectral_radius", &input, || spectral_radius(&scheme, o, xi));
        prop_assert!(rho.is_nan() || rho >= 0.0);
        let m = guard("metrics", &input, || metrics(&scheme, o, xi));
        prop_assert!(m.spectral_radius.to_bits() == rho.to_bits() || (m.spectral_radius.is_nan() && rho.is_nan()));
        guard("characteristic_polynomial", &input, || characteristic_polynomial(&scheme, o, xi));
        guard("Scheme::amplification", &input, || scheme.amplification(o, xi));
        guard("rho_inf", &scheme, || rho_inf(&scheme));
        guard("order_of_accuracy", &(scheme, xi), || order_of_accuracy(&scheme, xi));
        guard("omega_crit_closed_form", &(scheme, xi), || omega_crit_closed_form(&scheme, xi));
        guard("bracket_check", &input, || bracket_check(&scheme, xi, o, 1e-6));
        guard("Scheme::name/parameters/is_explicit", &scheme, || (scheme.name(), scheme.parameters(), scheme.is_explicit()));
        guard("cd_amplification", &(o, xi), || cd_amplification(ForceVelocity::Lagged, o, xi));
        if let Scheme::Alpha(p) = scheme {
            guard("alpha_amplification", &input, || alpha_amplification(&p, o, xi));
        }
        let mat = [[a[0], a[1], a[2]], [a[3], a[4], a[5]], [a[6], a[7], a[8]]];
        let ev = guard("eigenvalues3", &mat, || eigenvalues3(&mat));
        if !all_finite(&a) {
            prop_assert!(ev.iter().all(|z| z.re.is_nan()), "{mat:?}: {ev:?}");
        }
        // The scan is bounded by its limit: keep the limit small unless it is not finite.
        let scan_limit = if scan.is_finite() { scan.min(40.0) } else { scan };
        if !scan.is_finite() && scan > 0.0 {
            // An infinite limit scans up to f64::MAX: only for a scheme that leaves the scan
            // early (explicit schemes are unstable at Omega = 2 or so).
            if scheme.is_explicit() && xi.is_finite() {
                guard("omega_crit_numeric", &(scheme, xi, scan), || omega_crit_numeric(&scheme, xi, scan));
            }
        } else {
            let r = guard("omega_crit_numeric", &(scheme, xi, scan_limit), || omega_crit_numeric(&scheme, xi, scan_limit));
            if scan.is_nan() {
                prop_assert!(r.is_none());
            }
        }
        let input = (scheme, w, xi, target);
        let r = guard("largest_step_for_period_error", &input, || largest_step_for_period_error(&scheme, w, xi, target));
        if !(finite(w) && w > 0.0 && finite(target) && target > 0.0) {
            refused("largest_step_for_period_error", &input, &r);
        }
        let r = guard("largest_step_for_damping", &input, || largest_step_for_damping(&scheme, w, xi, target));
        if !(finite(w) && w > 0.0 && finite(target) && target > 0.0) {
            refused("largest_step_for_damping", &input, &r);
        }
        let mut ctx = CheckContext::default();
        ctx.omega_max = Some(w);
        ctx.dt = Some(dt);
        ctx.omega_interest = None;
        ctx.period_error_target = None;
        let input = (scheme, xi, w, dt);
        let r = guard("spectral::check", &input, || spectral::check(&scheme, xi, &ctx));
        let params_bad = match scheme {
            Scheme::Alpha(p) => AlphaParams::raw(p.alpha_m(), p.alpha_f(), p.beta(), p.gamma()).is_err(),
            Scheme::CentralDifference(_) => false,
        };
        if !(finite(xi) && xi >= 0.0 && finite(w) && w > 0.0 && finite(dt) && dt > 0.0) || params_bad {
            refused("spectral::check", &input, &r);
        }
    }

    #[test]
    fn spectral_sweeps(lo in num(), hi in num(), points in 0..4usize, betas in vec_of(0..3),
                       gammas in vec_of(0..3), xi in num()) {
        let v = guard("log_space", &(lo, hi, points), || log_space(lo, hi, points));
        prop_assert_eq!(v.len(), points);
        let omegas: Vec<f64> = v.into_iter().map(|o| if o.is_finite() { o.min(1e3) } else { o }).collect();
        let schemes = [Scheme::Alpha(AlphaParams::average_acceleration()), Scheme::CentralDifference(ForceVelocity::Lagged)];
        let s = guard("sweep", &(&omegas, xi), || sweep(&schemes, &omegas, xi));
        prop_assert_eq!(s.len(), 2);
        let input = (&betas, &gammas, xi);
        let r = guard("newmark_stability_map", &input, || newmark_stability_map(&betas, &gammas, xi));
        let bad = betas.iter().chain(&gammas).any(|x| !(finite(*x) && *x >= 0.0));
        if (!betas.is_empty() && !gammas.is_empty()) && (bad || !(finite(xi) && xi >= 0.0)) {
            refused("newmark_stability_map", &input, &r);
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Reference problems

proptest! {
    #![proptest_config(ProptestConfig { cases: CASES, ..ProptestConfig::default() })]

    #[test]
    fn reference_problems(f in prop::collection::vec(num(), 6), t in num(), elements in prop::sample::select(vec![0usize, 1, 2, 7, usize::MAX])) {
        let problems: Vec<Box<dyn ReferenceProblem>> = vec![
            Box::new(SdofFree { m: f[0], k: f[1], xi: f[2], u0: f[3], v0: f[4] }),
            Box::new(SdofHarmonic { m: f[0], k: f[1], xi: f[2], f0: f[3], w: f[4] }),
            Box::new(SdofHalfSine { m: f[0], k: f[1], xi: f[2], f0: f[3], t_d: f[4] }),
            Box::new(StiffSoft { m1: f[0], m2: f[1], k_soft: f[2], k_stiff: f[3], u0: [f[4], f[5]], v0: [f[5], f[4]] }),
            Box::new(BarImpact { elements, length: f[0], modulus: f[1], density: f[2], v0: f[3] }),
            Box::new(TwoDofStep),
            Box::new(stepgauge_cli::problems::hardening()),
        ];
        for p in &problems {
            let input = (p.name(), &f, t, elements);
            let valid = guard("ReferenceProblem::validate", &input, || p.validate());
            let model = guard("ReferenceProblem::model", &input, || p.model());
            // A valid problem may still have no model (Rayleigh coefficients that overflow).
            match model {
                Err(_) => {}
                Ok(_) if valid.is_err() => {
                    prop_assert!(false, "{input:?}: the model of an invalid problem was built");
                }
                Ok(model) => prop_assert_eq!(model.dofs(), p.initial_state().dofs()),
            }
            guard("ReferenceProblem::exact", &input, || (p.exact(t), p.exact_velocity(t)));
            guard("ReferenceProblem::initial_state", &input, || p.initial_state());
            guard("ReferenceProblem::t_end/observed_dof", &input, || (p.t_end(), p.observed_dof()));
            guard("ReferenceProblem::natural_frequencies", &input, || p.natural_frequencies());
            guard("ReferenceProblem::tabulated_times", &input, || p.tabulated_times().map(|x| x.len()));
        }
        let input = &f;
        let r = guard("Duffing::new", input, || Duffing::new(f[0], f[1], f[2], f[3], f[4], f[5]));
        if !(all_finite(&f) && f[0] > 0.0 && f[1] >= 0.0) {
            refused("Duffing::new", input, &r);
        }
        let mut d = Duffing::reference();
        let r = guard("Duffing::set_c", &f[1], || d.set_c(f[1]));
        if !(finite(f[1]) && f[1] >= 0.0) {
            refused("Duffing::set_c", &f[1], &r);
        }
        guard("Duffing::acceleration", &(t, f[0], f[1]), || d.acceleration(t, f[0], f[1]));
        guard("Hardening::response", &t, || stepgauge_cli::problems::hardening().response(t));
        let bar = BarImpact { elements, length: f[0], modulus: f[1], density: f[2], v0: f[3] };
        guard("BarImpact::displacement_at/velocity_at", &(bar, f[4], t),
            || (bar.displacement_at(f[4], t), bar.velocity_at(f[4], t), bar.wave_speed(), bar.element_length(), bar.period()));
        guard("TwoDofStep::displacement/velocity", &t, || (TwoDofStep.displacement(t), TwoDofStep.velocity(t)));
    }
}

// ---------------------------------------------------------------------------------------------
// Linear algebra

proptest! {
    #![proptest_config(ProptestConfig { cases: CASES, ..ProptestConfig::default() })]

    #[test]
    fn csr_matrices(
        nrows in prop::sample::select(vec![0usize, 1, 2, 3, usize::MAX]), ncols in 0..4usize,
        indptr in prop::collection::vec(0..5usize, 0..5), indices in prop::collection::vec(0..5u32, 0..5),
        data in vec_of(0..5), i in 0..5usize, j in 0..5usize, xlen in 0..4usize, ylen in 0..4usize,
    ) {
        let input = (nrows, ncols, &indptr, &indices, &data);
        let r = guard("CsrMatrix::try_from_csr", &input, || CsrMatrix::try_from_csr(
            "fuzz", nrows, ncols, indptr.clone(), indices.clone(), data.clone()));
        if !all_finite(&data) || data.len() != indices.len() || nrows == usize::MAX {
            refused("try_from_csr", &input, &r);
        }
        let a = match r {
            Ok(a) => a,
            Err(_) => CsrMatrix::from_diagonal(&data),
        };
        guard("CsrMatrix accessors", &(i, j), || {
            (a.position(i, j), a.row(i).count(), a.row_sums(), a.diagonal(), a.is_diagonal(), a.nnz())
        });
        let x = vec![1.0; xlen];
        let mut y = vec![0.0; ylen];
        guard("CsrMatrix::mul_vec", &(xlen, ylen), || a.mul_vec(&x, &mut y, Parallelism::serial()));
        if xlen != a.ncols() || ylen != a.nrows() {
            prop_assert!(y.iter().all(|v| v.is_nan()));
        }
        guard("spmv", &(xlen, ylen), || spmv(&a, &x, &mut y, Parallelism { threshold: 1 }));
        let d = guard("dot", &(xlen, ylen), || dot(&x, &y, &Execution::serial()));
        if xlen != ylen {
            prop_assert!(d.is_nan());
        }
        guard("norm2", &xlen, || norm2(&x, &Execution::serial()));
        let b = CsrMatrix::from_diagonal(&vec![1.0; j]);
        let r = guard("CsrMatrix::pattern_union", &(i, j), || CsrMatrix::pattern_union(&[&a, &b]));
        if a.nrows() != j || a.ncols() != j {
            refused("pattern_union", &(a.nrows(), a.ncols(), j), &r);
        }
        let r = guard("CsrMatrix::pattern_union (none)", &0, || CsrMatrix::pattern_union(&[]));
        refused("pattern_union (none)", &0, &r);
        let r = guard("CsrMatrix::positions_in", &(i, j), || a.positions_in(&b));
        let _ = r;
        let s = sym(ncols.max(1), &data, 1.0);
        let r = guard("CsrMatrix::from_sprs", &input, || CsrMatrix::from_sprs("fuzz", &s));
        if !all_finite(&used(ncols.max(1), &data)) {
            refused("from_sprs", &input, &r);
        }
        guard("Parallelism", &i, || (Parallelism { threshold: i }.parallel_for(j), stepgauge::linalg::chunk_count(i)));
    }

    /// Every solver through the `LinearSolver` seam: out of order, with patterns that change,
    /// non-square matrices, NaN values and right-hand sides of the wrong length.
    #[test]
    fn linear_solvers(
        which in 0..3usize, n in 1..4usize, d in vec_of(1..3), off in num(),
        rhs in vec_of(0..5), order in prop::collection::vec(0..4usize, 1..6), cg_tol in num(),
        cg_iter in prop::option::of(0..3usize),
    ) {
        let cg = guard("ConjugateGradient::new", &cg_tol, || ConjugateGradient::new({
            let mut o = CgOptions::default();
            o.relative_tolerance = cg_tol;
            o.max_iterations = cg_iter;
            o
        }));
        if !(cg_tol > 0.0 && cg_tol < 1.0) {
            refused("ConjugateGradient::new", &cg_tol, &cg);
        }
        let mut solver: Box<dyn LinearSolver> = match (which, cg) {
            (0, _) => Box::new(SparseCholesky::new()),
            (1, _) => Box::new(SparseLu::new()),
            (_, Ok(cg)) => Box::new(cg),
            (_, Err(_)) => Box::new(ConjugateGradient::new(CgOptions::default()).unwrap()),
        };
        let a = CsrMatrix::from_sprs("a", &sym(n, &d.iter().map(|x| if x.is_finite() { *x } else { 1.0 }).collect::<Vec<_>>(), if off.is_finite() { off } else { 0.5 })).unwrap();
        let mut nan = a.clone();
        nan.data_mut()[0] = if d[0].is_finite() { f64::NAN } else { d[0] };
        let other = CsrMatrix::from_diagonal(&vec![1.0; n + 1]);
        let rect = CsrMatrix::try_from_csr("rect", 1, 2, vec![0, 1], vec![1], vec![1.0]).unwrap();
        let input = (which, n, &d, off, &rhs, &order);
        let mut x = rhs.clone();
        for op in &order {
            let r = guard("LinearSolver", &(input, op), || match op {
                0 => solver.analyze(&a).map(|_| ()),
                1 => solver.factor(&a).map(|_| ()),
                2 => solver.solve_in_place(&mut x).map(|_| ()),
                _ => solver.factor(&nan).map(|_| ()),
            });
            if *op == 3 {
                refused("factor (NaN)", &input, &r);
            }
            if *op == 2 && x.len() != n {
                refused("solve_in_place (wrong length)", &input, &r);
            }
        }
        let r = guard("LinearSolver::factor (other pattern)", &input, || solver.factor(&other));
        refused("factor (other pattern)", &input, &r);
        for m in [&other, &rect] {
            let r = guard("LinearSolver::analyze (other)", &input, || {
                solver.analyze(m).and_then(|_| solver.factor(m))
            });
            if m.nrows() != m.ncols() {
                refused("analyze (rectangular)", &input, &r);
            }
        }
        let mut short = vec![1.0; n + 2];
        let r = guard("LinearSolver::solve_in_place (wrong length)", &input, || solver.solve_in_place(&mut short));
        refused("solve_in_place (wrong length)", &input, &r);
    }
}

// ---------------------------------------------------------------------------------------------
// Files

proptest! {
    #![proptest_config(ProptestConfig { cases: 24, ..ProptestConfig::default() })]

    #[test]
    fn io_functions(
        x in num(), n in prop::sample::select(vec![0usize, 1, 3, usize::MAX]), rows in 0..3usize,
        w in 0..3usize, ulen in 0..5usize, velocity in any::<bool>(), bytes in prop::collection::vec(any::<u8>(), 0..64),
        symmetric in any::<bool>(),
    ) {
        use stepgauge::io::*;
        let dir = Scratch::new("io");
        let file = dir.0.join("f");
        let missing = dir.0.join("none/such");
        std::fs::write(&file, &bytes).unwrap();
        for p in [&file, &missing, &dir.0] {
            let _ = guard("read_matrix_market", p, || read_matrix_market(p).map(|_| ()));
            let _ = guard("read_load_table", p, || read_load_table(p).map(|_| ()));
            let _ = guard("read_initial", &(p, n), || read_initial(p, n).map(|_| ()));
            let r = guard("read_checkpoint", p, || read_checkpoint(p));
            prop_assert!(r.is_err(), "random bytes read as a checkpoint: {bytes:?}");
        }
        let text = String::from_utf8_lossy(&bytes).to_string();
        let _ = guard("parse_initial", &(&text, n), || parse_initial(&text, "f", n).map(|_| ()));
        let _ = guard("Hardening::from_table", &text, || stepgauge::reference::Hardening::from_table("f", &text).map(|_| ()));
        // The committed table (ASCII) cut anywhere.
        let table = stepgauge_cli::problems::HARDENING_TABLE;
        let cut = &table[..table.len() * bytes.len() / 64];
        let r = guard("Hardening::from_table (cut)", &cut.len(), || stepgauge::reference::Hardening::from_table("f", cut).map(|_| ()));
        if cut.lines().filter(|l| !l.starts_with(['#', 't'])).count() < 2 {
            refused("Hardening::from_table (cut)", &cut.len(), &r);
        }
        // A record whose columns do not match its rows.
        let record = Record {
            dofs: (0..w).collect(),
            steps: vec![0; rows],
            times: vec![x; rows],
            u: vec![x; ulen],
            v: vec![x; if velocity { ulen } else { 0 }],
            ..Record::default()
        };
        let input = (rows, w, ulen, velocity, x);
        let r = guard("write_record_csv", &input, || write_record_csv(&dir.0.join("r.csv"), &record, velocity, false));
        if ulen != rows * w {
            refused("write_record_csv", &input, &r);
        }
        let r = guard("write_record_csv (unrecorded)", &input, || write_record_csv(&dir.0.join("r.csv"), &record, true, true));
        if rows * w > 0 {
            refused("write_record_csv (unrecorded)", &input, &r);
        }
        let mut ledger_model = chain(1, 1.0);
        let mut s = State::at_rest(1, 0.0);
        let cd = CentralDifference::new(&mut ledger_model, &mut s, explicit_opts(StableLimit::Unchecked)).unwrap();
        let sample = stepgauge::run::EnergySample::of(x, cd.energy());
        let _ = guard("write_energy_csv", &x, || write_energy_csv(&dir.0.join("e.csv"), &[sample, sample]));
        for target in [&missing, &dir.0, &PathBuf::from("")] {
            let r = guard("write_energy_csv (bad path)", target, || write_energy_csv(target, &[sample]));
            refused("write_energy_csv (bad path)", target, &r);
        }
        // Matrix Market writer: values of any kind, square or not.
        let m = sym(n.clamp(1, 3), &[x], x);
        let r = guard("write_matrix_market", &(x, symmetric), || write_matrix_market(&dir.0.join("m.mtx"), &m, symmetric));
        if !finite(x) {
            refused("write_matrix_market", &x, &r);
        }
        let mut rect = TriMat::new((1, 2));
        rect.add_triplet(0, 1, 1.0);
        let r = guard("write_matrix_market (rectangular, symmetric)", &0, || write_matrix_market(&dir.0.join("m.mtx"), &rect.to_csr(), true));
        refused("write_matrix_market (rectangular, symmetric)", &0, &r);
        // Checkpoints holding values JSON cannot carry, or edited ledgers.
        let mut state = s.clone();
        state.u[0] = x;
        let ledger: EnergyLedger = cd.energy().clone();
        let c = Checkpoint::new("fuzz", state, ledger, serde_json::Value::Null);
        let r = guard("write_checkpoint", &x, || write_checkpoint(&dir.0.join("c.ckpt"), &c));
        if !finite(x) {
            refused("write_checkpoint", &x, &r);
        }
        let mut wrong = c.clone();
        wrong.format_version += 1;
        let r = guard("write_checkpoint (version)", &0, || write_checkpoint(&dir.0.join("c.ckpt"), &wrong));
        refused("write_checkpoint (version)", &0, &r);
        let r = guard("write_atomically", &0, || write_atomically(&PathBuf::from("/"), |w| std::io::Write::write_all(w, b"x")));
        refused("write_atomically (no file name)", &0, &r);
    }
}

// ---------------------------------------------------------------------------------------------
// Verification helpers (formatting of any value)

proptest! {
    #![proptest_config(ProptestConfig { cases: CASES, ..ProptestConfig::default() })]

    #[test]
    fn verification_helpers(x in num(), y in num(), z in num()) {
        use stepgauge_cli::verification::{Check, Kind, fixed, sci};
        guard("sci/fixed", &x, || (sci(x), fixed(x)));
        let c = guard("Check::at_most", &(x, y), || Check::at_most("a.b", Kind::ClosedForm, "w", "s", "m", x, y, "s"));
        prop_assert!(!c.passed || (x.is_finite() && x <= y));
        let c = guard("Check::near", &(x, y, z), || Check::near("a.b", Kind::ClosedForm, "w", "s", "m", x, y, z));
        prop_assert!(!c.passed || x.is_finite());
    }
}

// ---------------------------------------------------------------------------------------------
// Regressions: each input that made a function panic or never return before it was fixed.

/// `eigenvalues3` looped for ever on a NaN entry (the QR iteration of the Schur form has no
/// iteration limit there), so `spectral_radius(.., NaN or infinite Omega, ..)` never returned;
/// and it overflowed to an infinite imaginary part for entries near 1e300.
#[test]
fn regression_eigenvalues3_on_nan_and_huge_entries() {
    let ev = eigenvalues3(&[[f64::NAN; 3]; 3]);
    assert!(ev.iter().all(|z| z.re.is_nan() && z.im.is_nan()));
    let s = 1e300;
    let ev = eigenvalues3(&[[s, s, 0.0], [-s, s, 0.0], [0.0, 0.0, 1.0]]);
    assert!(
        ev.iter().all(|z| z.re.is_finite() && z.im.is_finite()),
        "{ev:?}"
    );
    let aa = Scheme::Alpha(AlphaParams::average_acceleration());
    assert!(spectral_radius(&aa, f64::INFINITY, 0.0).is_nan());
    assert!(spectral_radius(&aa, 1.0, f64::NAN).is_nan());
    // NaN is not hidden behind f64::max: metrics say NaN too.
    assert!(metrics(&aa, f64::NAN, 0.0).spectral_radius.is_nan());
}

/// `omega_crit_numeric` with an infinite or NaN scan limit never ended for a scheme that is
/// stable at every finite Omega.
#[test]
fn regression_omega_crit_numeric_with_unbounded_scan() {
    let aa = Scheme::Alpha(AlphaParams::average_acceleration());
    assert_eq!(omega_crit_numeric(&aa, 0.0, f64::NAN), None);
    // Ends (the amplification matrix overflows to NaN near Omega = 1e154, counted as no
    // instability, and the scan stops at f64::MAX); whatever it reports there is round-off.
    let _ = omega_crit_numeric(&aa, 0.0, f64::INFINITY);
    let cd = Scheme::CentralDifference(ForceVelocity::Lagged);
    let o = omega_crit_numeric(&cd, 0.0, f64::INFINITY).unwrap();
    assert!((o - 2.0).abs() < 1e-9, "{o}");
}

/// `spectral::check` gave a verdict ("unconditionally stable") for parameters with NaN in them.
/// Such a set can no longer be made: the constructors and deserialisation refuse it.
#[test]
fn regression_check_refuses_nan_parameters() {
    let e = AlphaParams::raw(0.0, 0.0, f64::NAN, 0.5).unwrap_err();
    assert!(
        matches!(e, Error::InvalidParameter { name: "beta", .. }),
        "{e}"
    );
    let json =
        r#"{"alpha_m": 0.0, "alpha_f": 0.0, "beta": 1e400, "gamma": 0.5, "family": "custom"}"#;
    assert!(serde_json::from_str::<AlphaParams>(json).is_err());
    let p = AlphaParams::raw(0.0, 0.0, 0.25, 0.5).unwrap();
    let e = spectral::check(&Scheme::Alpha(p), f64::NAN, &CheckContext::default()).unwrap_err();
    assert!(matches!(e, Error::InvalidParameter { .. }), "{e}");
}

/// `BarImpact::exact` summed image sources for ever for a bar of zero length or an infinite
/// time, and for ever in practice for a late time; `initial_state` and `model` overflowed
/// `elements + 1` for `usize::MAX` elements.
#[test]
fn regression_bar_impact_ends_and_refuses() {
    let flat = BarImpact {
        length: 0.0,
        ..BarImpact::standard()
    };
    assert!(flat.exact(1e-3).is_nan());
    assert!(BarImpact::standard().exact(f64::INFINITY).is_nan());
    let late = BarImpact::standard().exact(1e6);
    assert!(late.is_finite() && late > 0.0);
    let huge = BarImpact {
        elements: usize::MAX,
        ..BarImpact::standard()
    };
    assert!(matches!(
        huge.validate(),
        Err(Error::InvalidParameter {
            name: "elements",
            ..
        })
    ));
    assert_eq!(huge.initial_state().dofs(), 0);
}

/// `LoadTable::eval` indexed past an output buffer shorter than its DOFs, and `LinearModel`'s
/// `Model` methods panicked (in the sparse product or a slice copy) on buffers of the wrong
/// length; `Duffing`'s indexed `u[0]`, `out[0]` on empty buffers.
#[test]
fn regression_models_refuse_wrong_buffers() {
    let table = LoadTable::new(vec![0.0], vec![2], vec![1.0]).unwrap();
    let mut out = vec![0.0; 2];
    assert!(matches!(
        table.eval(0.0, &mut out),
        Err(Error::DofOutOfRange { dof: 2, n: 2, .. })
    ));
    let mut m = chain(3, 1.0);
    let mut short = vec![0.0; 2];
    assert!(
        m.internal_force(0.0, &[0.0; 3], &[0.0; 3], &mut short)
            .is_err()
    );
    assert!(
        m.stiffness_product(0.0, &[0.0; 3], &[0.0; 2], &mut [0.0; 3])
            .is_err()
    );
    assert!(m.stored_energy(&[1.0]).is_none());
    m.lumped_mass(&mut short);
    assert!(short.iter().all(|x| x.is_nan()));
    let mut d = Duffing::reference();
    assert!(d.internal_force(0.0, &[], &[], &mut []).is_err());
    let mut empty = CsrMatrix::from_diagonal(&[]);
    assert!(
        d.tangent_stiffness(0.0, &[1.0], &[0.0], &mut empty)
            .is_err()
    );
    assert_eq!(d.stored_energy(&[]), None);
}

/// `CsrMatrix::try_from_csr` sliced past the column indices when a middle row pointer exceeded
/// them, and overflowed `nrows + 1` for `usize::MAX` rows; `position` and `row` indexed past the
/// row pointers; `pattern_union` and `positions_in` asserted; `spmv` and `dot` asserted on
/// lengths.
#[test]
fn regression_csr_matrix_refuses_bad_arrays() {
    let e = CsrMatrix::try_from_csr("a", 2, 3, vec![0, 5, 3], vec![0, 1, 2], vec![1.0; 3]);
    assert!(matches!(e, Err(Error::InvalidMatrix { .. })), "{e:?}");
    let e = CsrMatrix::try_from_csr("a", usize::MAX, 3, vec![0], vec![], vec![]);
    assert!(e.is_err());
    let a = CsrMatrix::from_diagonal(&[1.0, 2.0]);
    assert_eq!(a.position(7, 0), None);
    assert_eq!(a.row(2).count(), 0);
    assert!(CsrMatrix::pattern_union(&[]).is_err());
    let b = CsrMatrix::from_diagonal(&[1.0; 3]);
    assert!(matches!(
        CsrMatrix::pattern_union(&[&a, &b]),
        Err(Error::DimensionMismatch { .. })
    ));
    assert!(b.positions_in(&a).is_err());
    let mut y = vec![0.0; 2];
    a.mul_vec(&[1.0; 3], &mut y, Parallelism::serial());
    assert!(y.iter().all(|v| v.is_nan()));
    assert!(dot(&[1.0], &[1.0, 2.0], &Execution::serial()).is_nan());
}

/// A step from a state whose (public) time was set to NaN or infinity made the implicit
/// sub-step loop run for ever, as did a step below the rounding of the time (`t + dt == t`),
/// which `run` then repeated for ever.
#[test]
fn regression_steps_that_cannot_advance_the_time_are_refused() {
    let mut model = chain(2, 1.0);
    let mut state = State::at_rest(2, 0.0);
    let mut it = AlphaIntegrator::new(
        &mut model,
        &mut state,
        AlphaParams::average_acceleration(),
        common::DenseLu::boxed(),
        ImplicitOptions::default(),
    )
    .unwrap();
    state.t = f64::NAN;
    assert!(matches!(
        it.step(&mut model, &mut state, 0.1),
        Err(Error::NonFiniteInput { .. })
    ));
    state.t = 1e20;
    assert!(matches!(
        it.step(&mut model, &mut state, 1e-10),
        Err(Error::InvalidParameter { name: "dt", .. })
    ));
    let mut state = State::new(1e20, vec![0.1, 0.0], vec![0.0; 2]).unwrap();
    let mut cd = CentralDifference::new(
        &mut model,
        &mut state,
        explicit_opts(StableLimit::Unchecked),
    )
    .unwrap();
    let out = run(
        &mut cd,
        &mut model,
        &mut state,
        &RunOptions::new(2e20, StepControl::Fixed(1e-3)),
        |_| Flow::Continue,
    )
    .unwrap();
    assert!(
        matches!(
            out.stop,
            stepgauge::run::StopReason::Failed(Error::InvalidParameter { name: "dt", .. })
        ),
        "{:?}",
        out.stop
    );
}

/// `EnergyLedger::extra` indexed `extra_work` with a position in `extra_names`, which a user can
/// make longer; `AlphaIntegrator::resume` did not check the ledger's names against the model.
#[test]
fn regression_edited_ledgers() {
    let mut model = chain(1, 1.0);
    let mut state = State::at_rest(1, 0.0);
    let cd = CentralDifference::new(
        &mut model,
        &mut state,
        explicit_opts(StableLimit::Unchecked),
    )
    .unwrap();
    let mut ledger = cd.energy().clone();
    ledger.extra_names.push("ghost".into());
    assert_eq!(ledger.extra("ghost"), None);
    let e = AlphaIntegrator::resume(
        &mut model,
        &state,
        ledger,
        AlphaParams::average_acceleration(),
        common::DenseLu::boxed(),
        ImplicitOptions::default(),
    )
    .unwrap_err();
    assert!(matches!(e, Error::DimensionMismatch { .. }), "{e}");
}

/// `Damping::rayleigh_from_modes` returned NaN coefficients for frequencies near the overflow
/// limit.
#[test]
fn regression_rayleigh_from_modes_overflow() {
    let e = Damping::rayleigh_from_modes(1e300, 0.05, 1e305, 0.05).unwrap_err();
    assert!(matches!(e, Error::InvalidParameter { .. }), "{e}");
}
