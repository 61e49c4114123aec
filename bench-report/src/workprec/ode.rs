//! The chain as a first-order system for diffsol, with its own equation struct.
//!
//! With `y = (u, v)` (length `2N`), `y' = f(t, y) = (v, M^-1 (f_ext - K u))` and the constant
//! Jacobian
//!
//! ```text
//! J = [    0      I ]
//!     [ -M^-1 K   0 ]
//! ```
//!
//! **Sparsity pattern stated, not probed.** [`ChainRhs`] implements diffsol's operator traits
//! itself: `call_inplace` (the right-hand side), `jac_mul_inplace` (`J w`), `jacobian_sparsity`
//! (the `N` entries of the identity block and the `3N - 2` entries of the tridiagonal `-M^-1 K`
//! block, given from `K`'s pattern) and `jacobian_inplace` (writes the stored values into the
//! matrix diffsol allocated with that pattern). So diffsol never probes the Jacobian column by
//! column and works with `FaerSparseMat` (faer's sparse CSC matrix) and its sparse LU
//! (`FaerSparseLU`) throughout.

use diffsol::matrix::sparsity::MatrixSparsity;
use diffsol::{
    ConstantOp, DiffsolError, FaerContext, FaerSparseLU, FaerSparseMat, FaerVec, Matrix,
    NonLinearOp, NonLinearOpJacobian, OdeBuilder, OdeEquations, OdeEquationsRef, OdeSolverMethod,
    OdeSolverStopReason, Op, UnitCallable, Vector, VectorCommon,
};
use std::time::Instant;

use sprs::CsMat;

use super::chain::Problem;

/// diffsol's sparse matrix type used here.
pub type Mat = FaerSparseMat<f64>;
/// diffsol's vector type used here.
pub type Vec64 = FaerVec<f64>;
type Ctx = FaerContext;
type Sparsity = <Mat as Matrix>::Sparsity;

/// The right-hand side `f(t, y) = (v, M^-1 (f_ext - K u))` with its Jacobian.
pub struct ChainRhs {
    /// Number of masses; the state has `2 n` entries.
    n: usize,
    ctx: Ctx,
    /// `M^-1 K` in CSR (rows of the mass-scaled stiffness).
    indptr: Vec<usize>,
    indices: Vec<usize>,
    k_over_m: Vec<f64>,
    /// `M^-1 f_ext` (constant load).
    f_over_m: Vec<f64>,
    /// The Jacobian's pattern and its values in that pattern's (CSC) order.
    sparsity: Sparsity,
    jac_values: Vec<f64>,
}

impl ChainRhs {
    /// From the stiffness (CSR), the lumped masses and the constant load.
    ///
    /// # Panics
    /// When the sizes disagree or `K` is not square (programmer errors of the report).
    pub fn new(k: &CsMat<f64>, mass: &[f64], load: &[f64]) -> ChainRhs {
        let n = mass.len();
        assert!(k.rows() == n && k.cols() == n && load.len() == n);
        let k = k.to_csr();
        let mut indptr = Vec::with_capacity(n + 1);
        let mut indices = Vec::with_capacity(k.nnz());
        let mut k_over_m = Vec::with_capacity(k.nnz());
        indptr.push(0);
        for (i, row) in k.outer_iterator().enumerate() {
            for (j, v) in row.iter() {
                indices.push(j);
                k_over_m.push(v / mass[i]);
            }
            indptr.push(indices.len());
        }
        // J's pattern: (i, n + i) for the identity block, (n + i, j) for -M^-1 K.
        let mut ij: Vec<(usize, usize)> = (0..n).map(|i| (i, n + i)).collect();
        for i in 0..n {
            for p in indptr[i]..indptr[i + 1] {
                ij.push((n + i, indices[p]));
            }
        }
        let sparsity = <Sparsity as MatrixSparsity<Mat>>::try_from_indices(2 * n, 2 * n, ij)
            .expect("the chain's Jacobian pattern is valid");
        // Values in the pattern's own order (column by column).
        let jac_values = <Sparsity as MatrixSparsity<Mat>>::indices(&sparsity)
            .into_iter()
            .map(|(r, c)| {
                if r < n {
                    debug_assert_eq!(c, n + r);
                    1.0
                } else {
                    let i = r - n;
                    let p = (indptr[i]..indptr[i + 1])
                        .find(|&p| indices[p] == c)
                        .expect("entry of K's pattern");
                    -k_over_m[p]
                }
            })
            .collect();
        ChainRhs {
            n,
            ctx: Ctx::default(),
            indptr,
            indices,
            k_over_m,
            f_over_m: load.iter().zip(mass).map(|(f, m)| f / m).collect(),
            sparsity,
            jac_values,
        }
    }

    /// Number of stored entries of the Jacobian (`4N - 2` for the chain).
    #[cfg(test)]
    pub fn jacobian_nnz(&self) -> usize {
        self.jac_values.len()
    }

    /// `out = -M^-1 K u` (row range of the lower block), plus `M^-1 f` when `with_load`.
    fn lower(&self, u: &[f64], out: &mut [f64], with_load: bool) {
        for i in 0..self.n {
            let mut s = if with_load { self.f_over_m[i] } else { 0.0 };
            for p in self.indptr[i]..self.indptr[i + 1] {
                s -= self.k_over_m[p] * u[self.indices[p]];
            }
            out[i] = s;
        }
    }

    /// Applies `(x, y) -> (x_v, lower(x_u))` to every batch column of `x` into `y`.
    fn apply(&self, x: &Vec64, y: &mut Vec64, with_load: bool) {
        let n = self.n;
        let (xm, ym) = (x.inner(), y.inner_mut());
        for b in 0..xm.ncols() {
            let xs = xm.col_as_slice(b);
            let ys = ym.col_as_slice_mut(b);
            let (top, bottom) = ys.split_at_mut(n);
            top.copy_from_slice(&xs[n..2 * n]);
            self.lower(&xs[..n], bottom, with_load);
        }
    }
}

impl Op for ChainRhs {
    type T = f64;
    type V = Vec64;
    type M = Mat;
    type C = Ctx;
    fn context(&self) -> &Ctx {
        &self.ctx
    }
    fn nstates(&self) -> usize {
        2 * self.n
    }
    fn nout(&self) -> usize {
        2 * self.n
    }
    fn nparams(&self) -> usize {
        0
    }
}

impl NonLinearOp for ChainRhs {
    fn call_inplace(&self, x: &Vec64, _t: f64, y: &mut Vec64) {
        self.apply(x, y, true);
    }
}

impl NonLinearOpJacobian for ChainRhs {
    fn jac_mul_inplace(&self, _x: &Vec64, _t: f64, v: &Vec64, y: &mut Vec64) {
        self.apply(v, y, false);
    }

    fn jacobian_sparsity(&self) -> Option<Sparsity> {
        Some(self.sparsity.clone())
    }

    fn jacobian_inplace(&self, _x: &Vec64, _t: f64, y: &mut Mat) {
        for m in y.inner_mut() {
            let vals = m.val_mut();
            assert_eq!(vals.len(), self.jac_values.len(), "Jacobian pattern");
            vals.copy_from_slice(&self.jac_values);
        }
    }
}

/// The initial state `y0 = (u0, v0)`.
pub struct ChainInit {
    y0: Vec<f64>,
    ctx: Ctx,
}

impl Op for ChainInit {
    type T = f64;
    type V = Vec64;
    type M = Mat;
    type C = Ctx;
    fn context(&self) -> &Ctx {
        &self.ctx
    }
    fn nstates(&self) -> usize {
        self.y0.len()
    }
    fn nout(&self) -> usize {
        self.y0.len()
    }
    fn nparams(&self) -> usize {
        0
    }
}

impl ConstantOp for ChainInit {
    fn call_inplace(&self, _t: f64, y: &mut Vec64) {
        let m = y.inner_mut();
        for b in 0..m.ncols() {
            m.col_as_slice_mut(b).copy_from_slice(&self.y0);
        }
    }
}

/// The chain's equations for diffsol: identity mass (none given), no root, output or reset.
pub struct ChainOde {
    rhs: ChainRhs,
    init: ChainInit,
    p: Vec64,
}

impl ChainOde {
    /// The equations of `problem` with stiffness `k`.
    pub fn new(problem: &Problem, k: &CsMat<f64>) -> ChainOde {
        let c = problem.chain;
        let mass = vec![c.m; c.n];
        let rhs = ChainRhs::new(k, &mass, &problem.load);
        let mut y0 = problem.u0.clone();
        y0.extend_from_slice(&problem.v0);
        let ctx = Ctx::default();
        ChainOde {
            rhs,
            init: ChainInit { y0, ctx },
            p: Vec64::zeros(0, ctx),
        }
    }

    /// The right-hand side operator.
    #[cfg(test)]
    pub fn rhs_op(&self) -> &ChainRhs {
        &self.rhs
    }
}

impl Op for ChainOde {
    type T = f64;
    type V = Vec64;
    type M = Mat;
    type C = Ctx;
    fn context(&self) -> &Ctx {
        &self.rhs.ctx
    }
    fn nstates(&self) -> usize {
        self.rhs.nstates()
    }
    fn nout(&self) -> usize {
        self.rhs.nout()
    }
    fn nparams(&self) -> usize {
        0
    }
}

impl<'a> OdeEquationsRef<'a> for ChainOde {
    type Mass = &'a UnitCallable<Mat>;
    type Rhs = &'a ChainRhs;
    type Root = &'a UnitCallable<Mat>;
    type Init = &'a ChainInit;
    type Out = &'a UnitCallable<Mat>;
    type Reset = &'a UnitCallable<Mat>;
}

impl OdeEquations for ChainOde {
    fn rhs(&self) -> &ChainRhs {
        &self.rhs
    }
    fn mass(&self) -> Option<&UnitCallable<Mat>> {
        None
    }
    fn init(&self) -> &ChainInit {
        &self.init
    }
    fn set_params(&mut self, p: &Vec64) {
        self.p.copy_from(p);
    }
    fn get_params(&self, p: &mut Vec64) {
        p.copy_from(&self.p);
    }
}

/// diffsol's implicit methods compared.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Variable-order (1 to 5) BDF.
    Bdf,
    /// SDIRK with the TR-BDF2 tableau (second order, embedded error estimate).
    TrBdf2,
    /// ESDIRK with the ESDIRK34 tableau (third order, embedded error estimate).
    Esdirk34,
}

impl Method {
    /// Name in the report.
    pub fn name(self) -> &'static str {
        match self {
            Method::Bdf => "BDF",
            Method::TrBdf2 => "TR-BDF2",
            Method::Esdirk34 => "ESDIRK34",
        }
    }
}

/// Tolerances of one diffsol run: `rtol`, and `atol` per state as `atol_factor * rtol` times
/// the problem's displacement scale (for `u`) or velocity scale (for `v`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tolerances {
    /// Relative tolerance.
    pub rtol: f64,
    /// Absolute tolerance relative to `rtol` times each state's scale.
    pub atol_factor: f64,
}

/// Builds the equations and the solver, steps to the horizon, and writes the free end's
/// displacement at the sample times into `out` (diffsol's own interpolation between its
/// steps, the same way its `solve_dense` does). Returns the number of steps taken, or `None`
/// when the run passed `deadline` (checked every 64 steps) before the horizon.
///
/// diffsol's options are its defaults except the step limit (5000 by default), lifted so
/// that tight tolerances can finish.
///
/// # Errors
/// diffsol's errors (for example a step size that fell too small).
pub fn run(
    problem: &Problem,
    k: &CsMat<f64>,
    method: Method,
    tol: Tolerances,
    out: &mut [f64],
    deadline: Option<Instant>,
) -> Result<Option<usize>, DiffsolError> {
    let n = problem.chain.n;
    let eqn = ChainOde::new(problem, k);
    let su = tol.atol_factor * tol.rtol * problem.displacement_scale();
    let sv = tol.atol_factor * tol.rtol * problem.velocity_scale;
    let atol: Vec<f64> = (0..2 * n).map(|i| if i < n { su } else { sv }).collect();
    let mut ode = OdeBuilder::<Mat>::new()
        .t0(0.0)
        .rtol(tol.rtol)
        .atol(atol)
        .build_from_eqn(eqn)?;
    ode.ode_options.max_number_timesteps = usize::MAX;
    match method {
        Method::Bdf => drive(ode.bdf::<FaerSparseLU<f64>>()?, problem, out, deadline),
        Method::TrBdf2 => drive(ode.tr_bdf2::<FaerSparseLU<f64>>()?, problem, out, deadline),
        Method::Esdirk34 => drive(ode.esdirk34::<FaerSparseLU<f64>>()?, problem, out, deadline),
    }
}

/// Steps `solver` to the last sample time, interpolating at each sample on the way.
fn drive<'a, S: OdeSolverMethod<'a, ChainOde>>(
    mut solver: S,
    problem: &Problem,
    out: &mut [f64],
    deadline: Option<Instant>,
) -> Result<Option<usize>, DiffsolError> {
    let n = problem.chain.n;
    let samples = &problem.samples;
    let mut y = Vec64::zeros(2 * n, *solver.problem().context());
    solver.set_stop_time(problem.horizon)?;
    let mut next = 0;
    let mut count = 0usize;
    loop {
        count += 1;
        if count.is_multiple_of(64)
            && let Some(d) = deadline
            && Instant::now() > d
        {
            return Ok(None);
        }
        let reason = solver.step()?;
        let t = solver.state().t;
        while next < samples.len() && samples[next] <= t {
            solver.interpolate_inplace(samples[next], &mut y)?;
            out[next] = y[n - 1];
            next += 1;
        }
        if matches!(reason, OdeSolverStopReason::TstopReached) {
            break;
        }
    }
    Ok(Some(solver.get_statistics().number_of_steps))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::workprec::chain::{Case, Chain};

    fn small() -> (Problem, CsMat<f64>) {
        let c = Chain {
            n: 9,
            m: 2.0,
            k: 3.0,
        };
        (Problem::new(c, Case::StepLoad, 1.0, 40), c.stiffness())
    }

    fn vec_of(x: &[f64]) -> Vec64 {
        Vec64::from_slice(x, Ctx::default())
    }

    /// The right-hand side is `(v, M^-1 (f - K u))`, `J w` is `(w_v, -M^-1 K w_u)`, and the
    /// stored Jacobian, in the stated pattern, equals `[[0, I], [-M^-1 K, 0]]` entry by entry
    /// (the pattern has exactly the `N + (3N - 2)` structural entries).
    #[test]
    fn rhs_and_jacobian_agree_with_k() {
        let (p, k) = small();
        let n = p.chain.n;
        let m = p.chain.m;
        let ode = ChainOde::new(&p, &k);
        let rhs = ode.rhs_op();
        assert_eq!(rhs.jacobian_nnz(), n + 3 * n - 2);
        // A deterministic, irregular state.
        let y: Vec<f64> = (0..2 * n)
            .map(|i| ((i * 37 % 11) as f64 - 5.0) * 0.3)
            .collect();
        let w: Vec<f64> = (0..2 * n)
            .map(|i| ((i * 13 % 7) as f64 - 3.0) * 0.7)
            .collect();
        let (u, v) = y.split_at(n);
        let mut ku = vec![0.0; n];
        for (val, (i, j)) in k.iter() {
            ku[i] += val * u[j];
        }
        let f = rhs.call(&vec_of(&y), 0.0);
        for i in 0..n {
            assert!((f[i] - v[i]).abs() < 1e-15);
            let want = (p.load[i] - ku[i]) / m;
            assert!(
                (f[n + i] - want).abs() < 1e-13,
                "row {i}: {} vs {want}",
                f[n + i]
            );
        }
        let (wu, wv) = w.split_at(n);
        let mut kw = vec![0.0; n];
        for (val, (i, j)) in k.iter() {
            kw[i] += val * wu[j];
        }
        let jw = rhs.jac_mul(&vec_of(&y), 0.0, &vec_of(&w));
        for i in 0..n {
            assert!((jw[i] - wv[i]).abs() < 1e-15);
            assert!((jw[n + i] + kw[i] / m).abs() < 1e-13);
        }
        // The assembled Jacobian, entry by entry, against K.
        let jac = rhs.jacobian(&vec_of(&y), 0.0);
        let mut dense = vec![vec![0.0; 2 * n]; 2 * n];
        let (ij, vals) = jac.triplet_iter();
        for ((r, c), val) in ij.zip(vals) {
            dense[r][c] = val;
        }
        for r in 0..2 * n {
            for c in 0..2 * n {
                let want = if r < n {
                    if c == n + r { 1.0 } else { 0.0 }
                } else if c < n {
                    -k.get(r - n, c).copied().unwrap_or(0.0) / m
                } else {
                    0.0
                };
                assert_eq!(dense[r][c], want, "J[{r}][{c}]");
            }
        }
    }

    /// diffsol on the equations reproduces the exact modal solution at a tight tolerance, with
    /// each method (so the equations, the sampling and the tolerances are wired correctly).
    #[test]
    fn diffsol_solution_converges_to_the_modal_solution() {
        let (p, k) = small();
        for method in [Method::Bdf, Method::TrBdf2, Method::Esdirk34] {
            let mut out = vec![0.0; p.samples.len()];
            let tight = Tolerances {
                rtol: 1e-9,
                atol_factor: 1.0,
            };
            let steps = run(&p, &k, method, tight, &mut out, None).unwrap().unwrap();
            let e = p.error(&out);
            assert!(e < 1e-5, "{}: error {e} in {steps} steps", method.name());
            let loose = Tolerances {
                rtol: 1e-2,
                atol_factor: 1.0,
            };
            let fewer = run(&p, &k, method, loose, &mut out, None).unwrap().unwrap();
            assert!(fewer < steps, "{}: {fewer} >= {steps}", method.name());
        }
    }
}
