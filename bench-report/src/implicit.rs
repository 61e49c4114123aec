//! Section "Implicit step": one linear implicit step (average acceleration, sparse Cholesky, the
//! factor reused) against the work it cannot avoid, and one Newton iteration on a nonlinear chain
//! against the work of an iteration, measured in the same run.
//!
//! The unavoidable work of a linear step is one forward-backward solve with the factor of the
//! iteration matrix and the matrix products that form the right-hand side and the new internal
//! force: `M x` once and `K x` once (the models here are undamped; a damped model adds `C x`).
//! Both are timed here by hand, with stepgauge's own [`SparseCholesky::solve_in_place`] on a factor
//! of the same matrix and [`CsrMatrix::mul_vec`] with the integrator's parallelism.

use std::fmt::Write as _;

use sprs::CsMat;
use stepgauge::ModelError;
use stepgauge::State;
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::linalg::{CsrMatrix, LinearSolver, Parallelism, SparseCholesky};
use stepgauge::model::{LinearModel, Model, Tangent};
use stepgauge::params::AlphaParams;

use std::time::Instant;

use crate::timing::median_secs;
use crate::{Section, Settings, Target};

/// Target of the linear step: step / (solve + products) at most this.
const LINEAR_TARGET: f64 = 1.1;

/// A symmetric CSR matrix from its sorted rows (`rows[i]` = (column, value) pairs, columns
/// increasing).
fn csr_from_rows(n: usize, nnz: usize, row: impl Fn(usize, &mut Vec<(usize, f64)>)) -> CsMat<f64> {
    let mut indptr = Vec::with_capacity(n + 1);
    let mut indices = Vec::with_capacity(nnz);
    let mut data = Vec::with_capacity(nnz);
    let mut r = Vec::new();
    indptr.push(0);
    for i in 0..n {
        r.clear();
        row(i, &mut r);
        for &(j, v) in &r {
            indices.push(j);
            data.push(v);
        }
        indptr.push(indices.len());
    }
    CsMat::new((n, n), indptr, indices, data)
}

/// The unit diagonal mass.
pub fn unit_mass(n: usize) -> CsMat<f64> {
    csr_from_rows(n, n, |i, r| r.push((i, 1.0)))
}

/// Stiffness of a chain of `n` unit springs fixed at both ends: `tridiag(-1, 2, -1)`.
pub fn chain_stiffness(n: usize) -> CsMat<f64> {
    csr_from_rows(n, 3 * n, |i, r| {
        if i > 0 {
            r.push((i - 1, -1.0));
        }
        r.push((i, 2.0));
        if i + 1 < n {
            r.push((i + 1, -1.0));
        }
    })
}

/// Five-point stencil on an `m x m` grid (fixed edges), row-major numbering: the stiffness of a
/// membrane, SPD.
pub fn stencil_2d(m: usize) -> CsMat<f64> {
    let n = m * m;
    csr_from_rows(n, 5 * n, |p, r| {
        let (i, j) = (p / m, p % m);
        if i > 0 {
            r.push((p - m, -1.0));
        }
        if j > 0 {
            r.push((p - 1, -1.0));
        }
        r.push((p, 4.0));
        if j + 1 < m {
            r.push((p + 1, -1.0));
        }
        if i + 1 < m {
            r.push((p + m, -1.0));
        }
    })
}

/// A smooth initial displacement with some roughness, so that every mode moves.
pub fn initial_u(n: usize) -> Vec<f64> {
    (0..n)
        .map(|i| 1e-3 * ((i % 97) as f64 - 48.0) + (i as f64 * 1e-4).sin())
        .collect()
}

/// One case of the linear-step table.
struct Case {
    name: &'static str,
    n: usize,
    model: LinearModel,
}

fn case(name: &'static str, n_target: usize) -> Case {
    match name {
        "chain" => Case {
            name,
            n: n_target,
            model: LinearModel::new(&unit_mass(n_target), &chain_stiffness(n_target)).unwrap(),
        },
        _ => {
            let m = (n_target as f64).sqrt().round() as usize;
            let n = m * m;
            Case {
                name,
                n,
                model: LinearModel::new(&unit_mass(n), &stencil_2d(m)).unwrap(),
            }
        }
    }
}

/// The step size of the linear runs (`Omega_max = omega_max dt` about 4 for the chain, 5.7 for the
/// stencil: far beyond the explicit limit of 2).
pub const DT: f64 = 2.0;

/// Timings of one linear case (seconds, medians).
struct LinearRow {
    name: &'static str,
    n: usize,
    step: f64,
    solve: f64,
    base: f64,
    factor_len: Option<usize>,
}

fn repeats_for(n: usize, quick: bool) -> usize {
    match (quick, n) {
        (true, _) => 5,
        (false, n) if n >= 500_000 => 7,
        _ => 21,
    }
}

/// Calls per timing sample, so that a sample lasts a millisecond or more.
fn inner_for(n: usize) -> usize {
    (200_000 / n.max(1)).clamp(1, 200)
}

fn median_of(repeats: usize, inner: usize, mut f: impl FnMut()) -> f64 {
    median_secs(repeats, || {
        for _ in 0..inner {
            f();
        }
    }) / inner as f64
}

/// Times `f` and `g` alternately, `repeats` samples of `inner` calls each, after one warm-up
/// call of each, and returns the two medians (seconds per call). On a loaded machine the two
/// see the same load, so their ratio is steadier than that of separate runs.
pub fn paired_medians(
    repeats: usize,
    inner: usize,
    mut f: impl FnMut(),
    mut g: impl FnMut(),
) -> (f64, f64) {
    f();
    g();
    let inner = inner.max(1);
    let mut tf = Vec::with_capacity(repeats);
    let mut tg = Vec::with_capacity(repeats);
    for _ in 0..repeats.max(1) {
        let t = Instant::now();
        for _ in 0..inner {
            f();
        }
        tf.push(t.elapsed().as_secs_f64() / inner as f64);
        let t = Instant::now();
        for _ in 0..inner {
            g();
        }
        tg.push(t.elapsed().as_secs_f64() / inner as f64);
    }
    tf.sort_by(f64::total_cmp);
    tg.sort_by(f64::total_cmp);
    if std::env::var_os("BENCH_DEV").is_some() {
        eprintln!(
            "      min {:.3e} / {:.3e} = {:.3}",
            tf[0],
            tg[0],
            tf[0] / tg[0]
        );
    }
    (tf[tf.len() / 2], tg[tg.len() / 2])
}

fn measure_linear(c: Case, quick: bool) -> LinearRow {
    let Case { name, n, mut model } = c;
    let par = Parallelism::default();
    let repeats = repeats_for(n, quick);
    let inner = inner_for(n);
    let p = AlphaParams::average_acceleration();
    let mut state = State::new(0.0, initial_u(n), vec![0.0; n]).unwrap();
    let mut it = AlphaIntegrator::new(
        &mut model,
        &mut state,
        p,
        Box::new(SparseCholesky::new()),
        ImplicitOptions::default(),
    )
    .unwrap();
    // The unavoidable work, by hand: J = (1 - alpha_m)/(beta dt^2) M + (1 - alpha_f) K, factored
    // once; then one solve and the products M x, K x.
    let m = model.mass_matrix().clone();
    let k = model.stiffness_matrix().clone();
    let cm = (1.0 - p.alpha_m()) / (p.beta() * DT * DT);
    let jac = sum_matrix(&m, cm, &k, 1.0 - p.alpha_f());
    let mut chol = SparseCholesky::new();
    chol.analyze(&jac).unwrap();
    chol.factor(&jac).unwrap();
    let factor_len = chol.factor_len();
    let mut x = initial_u(n);
    let mut y = vec![0.0; n];
    let mut z = vec![0.0; n];
    let rhs = initial_u(n);
    // The first step factors; every later one reuses the factor.
    it.step(&mut model, &mut state, DT).unwrap();
    let (step, base) = paired_medians(
        repeats,
        inner,
        || {
            it.step(&mut model, &mut state, DT).unwrap();
        },
        || {
            x.copy_from_slice(&rhs);
            chol.solve_in_place(&mut x).unwrap();
            m.mul_vec(&rhs, &mut y, par);
            k.mul_vec(&y, &mut z, par);
        },
    );
    let solve = median_of(repeats, inner, || {
        x.copy_from_slice(&rhs);
        chol.solve_in_place(&mut x).unwrap();
    });
    std::hint::black_box((&x, &z));
    LinearRow {
        name,
        n,
        step,
        solve,
        base,
        factor_len,
    }
}

/// `a * A + b * B` for two matrices (pattern union).
pub fn sum_matrix(a: &CsrMatrix, sa: f64, b: &CsrMatrix, sb: f64) -> CsrMatrix {
    let mut s = CsrMatrix::pattern_union(&[a, b]).unwrap();
    for (mat, scale) in [(a, sa), (b, sb)] {
        let map = mat.positions_in(&s).unwrap();
        for (k, pos) in map.iter().enumerate() {
            s.data_mut()[*pos] += scale * mat.data()[k];
        }
    }
    s
}

/// A chain of unit masses joined by springs with a hardening cubic law
/// `f = k d + k3 d^3` on the stretch `d`, fixed at both ends: the nonlinear model of the Newton
/// row.
pub struct CubicChain {
    n: usize,
    k: f64,
    k3: f64,
    pattern: CsrMatrix,
}

impl CubicChain {
    /// `n` masses, `n + 1` springs.
    pub fn new(n: usize, k: f64, k3: f64) -> Self {
        let pattern = CsrMatrix::from_sprs("K", &chain_stiffness(n)).unwrap();
        CubicChain { n, k, k3, pattern }
    }

    /// Stretch of spring `s` (between mass `s - 1` and mass `s`; the walls are fixed).
    fn stretch(&self, u: &[f64], s: usize) -> f64 {
        let left = if s == 0 { 0.0 } else { u[s - 1] };
        let right = if s == self.n { 0.0 } else { u[s] };
        right - left
    }
}

impl Model for CubicChain {
    fn dofs(&self) -> usize {
        self.n
    }

    fn lumped_mass(&self, out: &mut [f64]) {
        out.fill(1.0);
    }

    fn internal_force(
        &mut self,
        _t: f64,
        u: &[f64],
        _v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        let n = self.n;
        let f = |d: f64| self.k * d + self.k3 * d * d * d;
        let mut left = f(self.stretch(u, 0));
        for (i, o) in out.iter_mut().enumerate().take(n) {
            let right = f(self.stretch(u, i + 1));
            *o = left - right;
            left = right;
        }
        Ok(())
    }

}

impl Tangent for CubicChain {
    fn tangent_pattern(&self) -> &CsrMatrix {
        &self.pattern
    }

    fn tangent_stiffness(
        &mut self,
        _t: f64,
        u: &[f64],
        _v: &[f64],
        out: &mut CsrMatrix,
    ) -> Result<(), ModelError> {
        let n = self.n;
        let kt = |d: f64| self.k + 3.0 * self.k3 * d * d;
        let mut left = kt(self.stretch(u, 0));
        let data = out.data_mut();
        let mut pos = 0;
        for i in 0..n {
            let right = kt(self.stretch(u, i + 1));
            if i > 0 {
                data[pos] = -left;
                pos += 1;
            }
            data[pos] = left + right;
            pos += 1;
            if i + 1 < n {
                data[pos] = -right;
                pos += 1;
            }
            left = right;
        }
        Ok(())
    }
}

struct NewtonRow {
    n: usize,
    per_iteration: f64,
    work: f64,
    iterations: f64,
}

fn measure_newton(n: usize, quick: bool) -> NewtonRow {
    let repeats = if quick { 5 } else { 11 };
    let inner = inner_for(n);
    let mut model = CubicChain::new(n, 1.0, 10.0);
    let p = AlphaParams::average_acceleration();
    let u0: Vec<f64> = (0..n).map(|i| 0.3 * (i as f64 * 0.01).sin()).collect();
    let mut state = State::new(0.0, u0, vec![0.0; n]).unwrap();
    let mut it = AlphaIntegrator::new(
        &mut model,
        &mut state,
        p,
        Box::new(SparseCholesky::new()),
        ImplicitOptions::default(),
    )
    .unwrap();
    let dt = 0.05;
    it.step(&mut model, &mut state, dt).unwrap();
    // The work of one iteration by hand, on a second copy of the model at the current state:
    // internal force (the residual), tangent, assembly of J = 4/dt^2 M + K_t, numeric
    // factorisation, one solve.
    let mut hand = CubicChain::new(n, 1.0, 10.0);
    let mut kt = hand.tangent_pattern().clone();
    let mut jac = sum_matrix(&CsrMatrix::from_diagonal(&vec![1.0; n]), 1.0, &kt, 1.0);
    let map = kt.positions_in(&jac).unwrap();
    let diag: Vec<usize> = (0..n).map(|i| jac.position(i, i).unwrap()).collect();
    let mut chol = SparseCholesky::new();
    chol.analyze(&jac).unwrap();
    let u = state.u.clone();
    let v = state.v.clone();
    let mut f = vec![0.0; n];
    let mut x = vec![0.0; n];
    let cm = 1.0 / (p.beta() * dt * dt);
    // Time steps and count their iterations; the ratio is time per iteration.
    let mut iters = 0usize;
    let mut steps = 0usize;
    let (step, work) = paired_medians(
        repeats,
        inner,
        || {
            it.step(&mut model, &mut state, dt).unwrap();
            iters += it.last_report().iterations;
            steps += 1;
        },
        || {
            hand.internal_force(0.0, &u, &v, &mut f).unwrap();
            hand.tangent_stiffness(0.0, &u, &v, &mut kt).unwrap();
            let data = jac.data_mut();
            data.fill(0.0);
            for (k, pos) in map.iter().enumerate() {
                data[*pos] += kt.data()[k];
            }
            for &d in &diag {
                data[d] += cm;
            }
            chol.factor(&jac).unwrap();
            x.copy_from_slice(&f);
            chol.solve_in_place(&mut x).unwrap();
        },
    );
    let iterations = iters as f64 / steps as f64;
    std::hint::black_box(&x);
    NewtonRow {
        n,
        per_iteration: step / iterations,
        work,
        iterations,
    }
}

fn sci(n: usize) -> String {
    let e = (n as f64).log10();
    if (e - e.round()).abs() < 1e-9 {
        format!("1e{}", e.round())
    } else {
        format!("{n}")
    }
}

/// Measures and renders the section.
pub fn section(settings: Settings) -> Section {
    let sizes: &[usize] = if settings.quick {
        &[1_000, 10_000]
    } else {
        &[10_000, 100_000, 1_000_000]
    };
    let mut rows = Vec::new();
    for name in ["chain", "2D stencil"] {
        for &n in sizes {
            let row = measure_linear(case(name, n), settings.quick);
            eprintln!(
                "   {name} n = {}: step {:.3e} s, solve + products {:.3e} s (solve {:.3e} s)",
                row.n, row.step, row.base, row.solve
            );
            rows.push(row);
        }
    }
    let newton_n = if settings.quick { 10_000 } else { 100_000 };
    let newton = measure_newton(newton_n, settings.quick);

    let mut body = String::new();
    let _ = writeln!(
        body,
        "One linear implicit step (average acceleration, `AlphaIntegrator` with `SparseCholesky`, \
         `LinearModel` with a unit diagonal mass, undamped, `dt = {DT}`), timed after the first \
         step so that the factor is reused, against the work no implementation of the step can \
         avoid, timed by hand in the same run: one forward-backward solve with a factor of the \
         same matrix (`SparseCholesky::solve_in_place`) and the products `M x` and `K x` \
         (`CsrMatrix::mul_vec`, same parallelism), the step and this work timed alternately so that \
         both see the same load (the solve alone is timed separately, for information). Chain: `n` unit springs fixed at both ends \
         (`tridiag(-1, 2, -1)`); 2D stencil: five-point stencil on an `m x m` grid, fixed edges. \
         Medians of repeats.\n"
    );
    let _ = writeln!(
        body,
        "| model | n | factor entries | step (ms) | solve + M x + K x (ms) | of which solve (ms) | step / (solve + products) |"
    );
    let _ = writeln!(body, "|---|---|---|---|---|---|---|");
    let mut targets = Vec::new();
    for r in &rows {
        let ratio = r.step / r.base;
        let _ = writeln!(
            body,
            "| {} | {} | {} | {:.3} | {:.3} | {:.3} | {:.2} |",
            r.name,
            r.n,
            r.factor_len.map_or("-".into(), |l| l.to_string()),
            r.step * 1e3,
            r.base * 1e3,
            r.solve * 1e3,
            ratio
        );
        targets.push(Target {
            threads: rayon::current_num_threads().to_string(),
            what: format!(
                "implicit linear step / (solve + products), {}, n = {}",
                r.name,
                sci(r.n)
            ),
            measured: format!("{ratio:.2}"),
            target: format!("<= {LINEAR_TARGET}"),
            met: ratio <= LINEAR_TARGET,
        });
    }
    let nr = &newton;
    let ratio = nr.per_iteration / nr.work;
    let _ = writeln!(
        body,
        "\nOne Newton iteration on a nonlinear chain (`n = {}` unit masses, springs \
         `f = d + 10 d^3`, average acceleration, `dt = 0.05`, full Newton, {:.1} iterations per \
         step on average): the step's time divided by its iterations, against the work of one \
         iteration done by hand in the same run (internal force, tangent, assembly of \
         `4/dt^2 M + K_t`, numeric factorisation, one solve).\n",
        nr.n, nr.iterations
    );
    let _ = writeln!(
        body,
        "| n | time per iteration (ms) | residual + tangent + factor + solve (ms) | ratio |"
    );
    let _ = writeln!(body, "|---|---|---|---|");
    let _ = writeln!(
        body,
        "| {} | {:.3} | {:.3} | {:.2} |",
        nr.n,
        nr.per_iteration * 1e3,
        nr.work * 1e3,
        ratio
    );
    Section {
        title: "Implicit step".to_string(),
        body,
        targets,
    }
}
