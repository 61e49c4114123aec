//! Section "Explicit step": one central-difference step on a linear model (1D spring chain and 3D
//! seven-point stencil, lumped mass) against
//!
//! * a hand-written loop doing the same arithmetic on the same data (the honest minimum for the
//!   work of a step; see [`Hand`]),
//! * a STREAM-style triad `a[i] = b[i] + s c[i]` on arrays of the same total size (the practical
//!   memory bandwidth of the machine),
//! * itself on one thread (the speed-up on two),
//!
//! and the peak heap of an explicit run per DOF.
//!
//! # Bytes a step must move
//! For an undamped, unloaded linear model with lumped mass the step reads `u, v, a` and writes
//! `u_{n+1}, v_{n+1/2}` (pass 1), then reads the stiffness matrix (row pointers `8 (n + 1)`,
//! column indices `4 nnz`, values `8 nnz` bytes), `u_{n+1}` (once: the neighbours' entries are
//! reused from cache), `v_{n+1/2}`, the mass `m` and its inverse `1/m` (for the kinetic energy and
//! the acceleration), and writes `a_{n+1}, v_{n+1}` (pass 2):
//!
//! ```text
//! bytes = 8 (5 + 6) n + 8 (n + 1) + 12 nnz
//! ```
//!
//! Each array is counted once, reads and writes alike; the write-allocate traffic of the
//! processor's caches is not counted, as STREAM does not count it for the triad (`24` bytes per
//! entry) either.
//!
//! # Fairness of the timing
//! The hand loop runs on two identical copies, one allocated before the integrator and one
//! after it, and every round of samples starts with another of the timed loops (step, hand,
//! hand copy, triad): where the buffers lie and which loop runs first then count for neither
//! side. The control column `hand copy / hand` must read about 1.00; its spread is the
//! resolution of the step / hand ratio.

use std::fmt::Write as _;
use std::hint::black_box;
use std::time::Instant;

use rayon::prelude::*;
use sprs::CsMat;
use stepgauge::State;
use stepgauge::explicit::{
    CentralDifference, CentralDifferenceOptions, StableLimit, omega_max_gershgorin,
};
use stepgauge::linalg::{CHUNK, CsrMatrix, Parallelism};
use stepgauge::model::{LinearModel, Model};

use crate::{Section, Settings, Target, alloc};

/// The step / hand-loop target (at most).
const HAND_TARGET: f64 = 1.05;
/// The step / triad bandwidth target beyond the last-level cache (at least).
const BANDWIDTH_TARGET: f64 = 0.8;
/// The two-thread speed-up target for `n >= 1e6` (at least).
const SPEEDUP_TARGET: f64 = 1.7;
/// The peak heap per DOF of an explicit run beyond the model, in doubles (at most).
const MEMORY_TARGET: f64 = 10.0;

/// A 1D chain of `n` unit masses joined by unit springs, held by springs at both ends
/// (`K = tridiag(-1, 2, -1)`, `M = I`); `omega_max < 2`.
pub fn chain_model(n: usize) -> LinearModel {
    let mut indptr = Vec::with_capacity(n + 1);
    let mut indices = Vec::with_capacity(3 * n);
    let mut data = Vec::with_capacity(3 * n);
    indptr.push(0);
    for i in 0..n {
        if i > 0 {
            indices.push(i - 1);
            data.push(-1.0);
        }
        indices.push(i);
        data.push(2.0);
        if i + 1 < n {
            indices.push(i + 1);
            data.push(-1.0);
        }
        indptr.push(indices.len());
    }
    linear_model(n, indptr, indices, data)
}

/// A cube of `m^3` unit masses on a grid, each joined to its six neighbours by unit springs and
/// held at the faces (the seven-point stencil `K`: 6 on the diagonal, -1 per neighbour; `M = I`);
/// `omega_max < sqrt(12)`.
pub fn cube_model(m: usize) -> LinearModel {
    let n = m * m * m;
    let mut indptr = Vec::with_capacity(n + 1);
    let mut indices = Vec::with_capacity(7 * n);
    let mut data = Vec::with_capacity(7 * n);
    indptr.push(0);
    for z in 0..m {
        for y in 0..m {
            for x in 0..m {
                let i = (z * m + y) * m + x;
                let mut push = |j: usize, v: f64| {
                    indices.push(j);
                    data.push(v);
                };
                if z > 0 {
                    push(i - m * m, -1.0);
                }
                if y > 0 {
                    push(i - m, -1.0);
                }
                if x > 0 {
                    push(i - 1, -1.0);
                }
                push(i, 6.0);
                if x + 1 < m {
                    push(i + 1, -1.0);
                }
                if y + 1 < m {
                    push(i + m, -1.0);
                }
                if z + 1 < m {
                    push(i + m * m, -1.0);
                }
                indptr.push(indices.len());
            }
        }
    }
    linear_model(n, indptr, indices, data)
}

fn linear_model(n: usize, indptr: Vec<usize>, indices: Vec<usize>, data: Vec<f64>) -> LinearModel {
    let k = CsMat::new((n, n), indptr, indices, data);
    let mass = CsMat::new((n, n), (0..=n).collect(), (0..n).collect(), vec![1.0; n]);
    LinearModel::new(&mass, &k).expect("the bench models are valid")
}

/// A smooth initial displacement (a few sine modes), at rest.
pub fn initial_state(n: usize) -> State {
    let u0: Vec<f64> = (0..n)
        .map(|i| {
            let x = (i as f64 + 0.5) / n as f64 * std::f64::consts::PI;
            1e-3 * (x.sin() + 0.3 * (7.0 * x).sin() + 0.1 * (i % 13) as f64)
        })
        .collect();
    State::new(0.0, u0, vec![0.0; n]).expect("finite initial state")
}

/// The guaranteed stable step `2 / omega_max` of a model (Gershgorin bound) times 0.9.
pub fn safe_step(model: &LinearModel) -> f64 {
    let w = omega_max_gershgorin(model.stiffness_matrix(), model.lumped(), None)
        .expect("the bench models are valid");
    0.9 * 2.0 / w
}

/// Bytes of a CSR matrix's arrays.
pub fn csr_bytes(k: &CsrMatrix) -> usize {
    8 * k.indptr().len() + 4 * k.indices().len() + 8 * k.data().len()
}

/// The bytes one explicit step must move (see the module documentation).
fn step_bytes(k: &CsrMatrix) -> f64 {
    let n = k.nrows() as f64;
    8.0 * 11.0 * n + csr_bytes(k) as f64
}

/// The size of the last-level cache (the largest cache level of CPU 0), if the OS tells.
pub fn llc_bytes() -> Option<usize> {
    let dir = std::fs::read_dir("/sys/devices/system/cpu/cpu0/cache").ok()?;
    let mut best: Option<(u32, usize)> = None;
    for e in dir.flatten() {
        let p = e.path();
        if !p
            .file_name()
            .and_then(|s| s.to_str())
            .is_some_and(|s| s.starts_with("index"))
        {
            continue;
        }
        let read = |f: &str| std::fs::read_to_string(p.join(f)).ok();
        let Some(level) = read("level").and_then(|s| s.trim().parse::<u32>().ok()) else {
            continue;
        };
        if read("type").is_some_and(|t| t.trim() == "Instruction") {
            continue;
        }
        let Some(size) = read("size").and_then(|s| parse_size(s.trim())) else {
            continue;
        };
        if best.is_none_or(|(l, _)| level > l) {
            best = Some((level, size));
        }
    }
    best.map(|(_, s)| s)
}

fn parse_size(s: &str) -> Option<usize> {
    let (num, mult) = match s.chars().last()? {
        'K' => (&s[..s.len() - 1], 1024),
        'M' => (&s[..s.len() - 1], 1024 * 1024),
        'G' => (&s[..s.len() - 1], 1024 * 1024 * 1024),
        _ => (s, 1),
    };
    num.parse::<usize>().ok().map(|v| v * mult)
}

/// The hand-written loop: what one central-difference step of an undamped, unloaded linear model
/// with lumped mass must do, written directly on the same CSR arrays and vectors of the same size,
/// with the same operations in the same order (so it produces the same numbers):
///
/// * pass 1, per entry: `vh = v + (dt/2) a`, `u' = u + dt vh`, and the sum of `u'` (the step's
///   finiteness guard);
/// * pass 2, per row: `f = sum_k K_ik u'_k` (stored order), `a' = (0 - f) / m` (as a product with
///   the stored `1/m`), `v' = vh + (dt/2) a'`, and the energy sums `vh f`, `v' f`, `a' f`,
///   `m v'^2`;
/// * then the vectors are swapped into place, as the integrator accepts a step.
///
/// Both passes run over the fixed chunks of `stepgauge::linalg::CHUNK` entries, on rayon's pool
/// when the integrator's default [`Parallelism`] goes parallel, serially otherwise, with one
/// partial-sum slot per chunk (no allocation per step).
pub struct Hand {
    m: Vec<f64>,
    minv: Vec<f64>,
    u: Vec<f64>,
    v: Vec<f64>,
    /// The current acceleration.
    pub a: Vec<f64>,
    un: Vec<f64>,
    vh: Vec<f64>,
    vn: Vec<f64>,
    an: Vec<f64>,
    p1: Vec<f64>,
    p4: Vec<[f64; 4]>,
    /// The sums of the last step (kept so that the work cannot be optimised away).
    pub sums: [f64; 5],
}

impl Hand {
    /// The loop's own copies of the mass and of a state.
    pub fn new(mass: &[f64], state: &State) -> Self {
        let n = mass.len();
        let chunks = n.div_ceil(CHUNK);
        Hand {
            m: mass.to_vec(),
            minv: mass.iter().map(|m| 1.0 / m).collect(),
            u: state.u.clone(),
            v: state.v.clone(),
            a: state.a.clone(),
            un: vec![0.0; n],
            vh: vec![0.0; n],
            vn: vec![0.0; n],
            an: vec![0.0; n],
            p1: vec![0.0; chunks],
            p4: vec![[0.0; 4]; chunks],
            sums: [0.0; 5],
        }
    }

    /// One step of size `dt` with the stiffness `k`.
    pub fn step(&mut self, k: &CsrMatrix, dt: f64) {
        let half = 0.5 * dt;
        let par = Parallelism::default().parallel_for(self.u.len());
        {
            let (u, v, a) = (&self.u[..], &self.v[..], &self.a[..]);
            let pass1 = |c: usize, un: &mut [f64], vh: &mut [f64], p: &mut f64| {
                let start = c * CHUNK;
                let end = start + un.len();
                let (u, v, a) = (&u[start..end], &v[start..end], &a[start..end]);
                let mut s = 0.0;
                for j in 0..un.len() {
                    let h = v[j] + half * a[j];
                    let x = u[j] + dt * h;
                    vh[j] = h;
                    un[j] = x;
                    s += x;
                }
                *p = s;
            };
            if par {
                self.un
                    .par_chunks_mut(CHUNK)
                    .zip(self.vh.par_chunks_mut(CHUNK))
                    .zip(self.p1.par_iter_mut())
                    .enumerate()
                    .for_each(|(c, ((un, vh), p))| pass1(c, un, vh, p));
            } else {
                self.un
                    .chunks_mut(CHUNK)
                    .zip(self.vh.chunks_mut(CHUNK))
                    .zip(self.p1.iter_mut())
                    .enumerate()
                    .for_each(|(c, ((un, vh), p))| pass1(c, un, vh, p));
            }
        }
        {
            let (indptr, indices, data) = (k.indptr(), k.indices(), k.data());
            let (un, vh, m, minv) = (&self.un[..], &self.vh[..], &self.m[..], &self.minv[..]);
            // What makes the unchecked row products sound, with CsrMatrix's invariant (row
            // pointers non-decreasing up to `indices.len() == data.len()`, columns below ncols).
            assert!(k.nrows() == un.len() && k.ncols() == un.len());
            let pass2 = |c: usize, an: &mut [f64], vn: &mut [f64], p: &mut [f64; 4]| {
                let start = c * CHUNK;
                let end = start + an.len();
                let (vh, m, minv) = (&vh[start..end], &m[start..end], &minv[start..end]);
                let ptr = &indptr[start..=end];
                let mut s = [0.0; 4];
                let mut lo = ptr[0];
                for j in 0..an.len() {
                    let hi = ptr[j + 1];
                    let mut f = 0.0;
                    for q in lo..hi {
                        // SAFETY: `lo..hi` lies inside `indices` and `data`, and each column
                        // index is below `ncols == un.len()` (asserted above; CsrMatrix's
                        // invariant).
                        unsafe {
                            let col = *indices.get_unchecked(q) as usize;
                            f += data.get_unchecked(q) * un.get_unchecked(col);
                        }
                    }
                    lo = hi;
                    let acc = (0.0 - f) * minv[j];
                    let vel = vh[j] + half * acc;
                    an[j] = acc;
                    vn[j] = vel;
                    s[0] += vh[j] * f;
                    s[1] += vel * f;
                    s[2] += acc * f;
                    s[3] += m[j] * vel * vel;
                }
                *p = s;
            };
            if par {
                self.an
                    .par_chunks_mut(CHUNK)
                    .zip(self.vn.par_chunks_mut(CHUNK))
                    .zip(self.p4.par_iter_mut())
                    .enumerate()
                    .for_each(|(c, ((an, vn), p))| pass2(c, an, vn, p));
            } else {
                self.an
                    .chunks_mut(CHUNK)
                    .zip(self.vn.chunks_mut(CHUNK))
                    .zip(self.p4.iter_mut())
                    .enumerate()
                    .for_each(|(c, ((an, vn), p))| pass2(c, an, vn, p));
            }
        }
        let mut sums = [self.p1.iter().sum::<f64>(), 0.0, 0.0, 0.0, 0.0];
        for p in &self.p4 {
            for q in 0..4 {
                sums[q + 1] += p[q];
            }
        }
        self.sums = sums;
        std::mem::swap(&mut self.u, &mut self.un);
        std::mem::swap(&mut self.v, &mut self.vn);
        std::mem::swap(&mut self.a, &mut self.an);
    }

    /// The current displacement.
    #[cfg(test)]
    pub fn u(&self) -> &[f64] {
        &self.u
    }
}

/// The STREAM triad `a[i] = b[i] + s c[i]` on three arrays of `len` entries, over the same
/// chunks and with the same threading rule as the step.
pub struct Triad {
    a: Vec<f64>,
    b: Vec<f64>,
    c: Vec<f64>,
}

impl Triad {
    /// Three arrays of `len` entries, touched once (so that their pages exist).
    pub fn new(len: usize) -> Self {
        Triad {
            a: vec![0.5; len],
            b: vec![1.0; len],
            c: vec![2.0; len],
        }
    }

    /// Bytes one triad moves (STREAM's count: 24 per entry).
    pub fn bytes(&self) -> f64 {
        24.0 * self.a.len() as f64
    }

    /// One triad.
    pub fn run(&mut self, s: f64) {
        let (b, c) = (&self.b[..], &self.c[..]);
        let body = |k: usize, a: &mut [f64]| {
            let start = k * CHUNK;
            let (b, c) = (&b[start..start + a.len()], &c[start..start + a.len()]);
            for ((x, y), z) in a.iter_mut().zip(b).zip(c) {
                *x = y + s * z;
            }
        };
        if Parallelism::default().parallel_for(self.a.len()) {
            self.a
                .par_chunks_mut(CHUNK)
                .enumerate()
                .for_each(|(k, a)| body(k, a));
        } else {
            self.a
                .chunks_mut(CHUNK)
                .enumerate()
                .for_each(|(k, a)| body(k, a));
        }
        black_box(&self.a);
    }
}

/// Times `f(0), f(1), .., f(count - 1)`, each `inner` times per sample, taking turns (round `r`
/// starts with `f(r mod count)`), `repeats` samples each after one warm-up round; returns the
/// samples (the time of one call) of each.
pub fn interleaved_samples(
    repeats: usize,
    inner: usize,
    count: usize,
    mut f: impl FnMut(usize),
) -> Vec<Vec<f64>> {
    let inner = inner.max(1);
    let mut samples = vec![Vec::with_capacity(repeats); count];
    for round in 0..=repeats.max(1) {
        // Each round starts with another loop, so that none always runs first (or after the
        // same neighbour).
        for i in 0..count {
            let which = (round + i) % count;
            let s = &mut samples[which];
            let t = Instant::now();
            for _ in 0..inner {
                f(which);
            }
            if round > 0 {
                s.push(t.elapsed().as_secs_f64() / inner as f64);
            }
        }
    }
    samples
}

/// [`interleaved_samples`]' medians.
pub fn interleaved(repeats: usize, inner: usize, count: usize, f: impl FnMut(usize)) -> Vec<f64> {
    interleaved_samples(repeats, inner, count, f)
        .into_iter()
        .map(median)
        .collect()
}

/// The median of samples.
fn median(mut s: Vec<f64>) -> f64 {
    s.sort_by(f64::total_cmp);
    s[s.len() / 2]
}

/// The driver of `bench-report --explicit-steps WHICH MODEL N STEPS` (for instruction counts
/// with an external tool, see `bench-report/explicit-instructions.sh`): sets up `MODEL`
/// (`chain` or `cube`, `N` DOFs; the cube's edge is the rounded cube root), the integrator and
/// the hand loop exactly as [`section`] does, then takes `STEPS` steps of `WHICH` (`step`: the
/// integrator; `hand`: the hand loop). The set-up is the same for both, so the difference of two
/// runs with different `STEPS` is the cost of the steps alone.
pub fn drive_steps(which: &str, model: &str, n: usize, steps: usize) -> Result<(), String> {
    let mut model = match model {
        "chain" => chain_model(n),
        "cube" => cube_model((n as f64).cbrt().round() as usize),
        other => return Err(format!("unknown model `{other}` (chain or cube)")),
    };
    let n = model.dofs();
    let dt = safe_step(&model);
    let mut state = initial_state(n);
    let mut opts = CentralDifferenceOptions::default();
    opts.stable_limit = StableLimit::Given(dt / 0.9);
    let mut cd = CentralDifference::new(&mut model, &mut state, opts).map_err(|e| e.to_string())?;
    let mut hand = Hand::new(model.lumped(), &state);
    match which {
        "step" => {
            for _ in 0..steps {
                cd.step(&mut model, &mut state, dt)
                    .map_err(|e| e.to_string())?;
            }
        }
        "hand" => {
            for _ in 0..steps {
                hand.step(model.stiffness_matrix(), dt);
            }
        }
        other => return Err(format!("unknown loop `{other}` (step or hand)")),
    }
    black_box((&state, hand.sums));
    Ok(())
}

/// One model of the section at one size.
struct Row {
    model: &'static str,
    n: usize,
    step: f64,
    /// The hand loop: the median over both copies' samples.
    hand: f64,
    /// The copy allocated after the integrator / the one allocated before it.
    control: f64,
    gbs: f64,
    triad_gbs: f64,
    beyond_llc: bool,
    /// (step 1 thread, step 2 threads, triad 1 thread, triad 2 threads), seconds.
    threads: Option<[f64; 4]>,
    error: Option<String>,
}

fn measure(
    name: &'static str,
    mut model: LinearModel,
    settings: Settings,
    llc: Option<usize>,
    pools: Option<&(rayon::ThreadPool, rayon::ThreadPool)>,
) -> Row {
    let n = model.dofs();
    let dt = safe_step(&model);
    let mut state = initial_state(n);
    let mut opts = CentralDifferenceOptions::default();
    opts.stable_limit = StableLimit::Given(dt / 0.9);
    let mut row = Row {
        model: name,
        n,
        step: f64::NAN,
        hand: f64::NAN,
        control: f64::NAN,
        gbs: f64::NAN,
        triad_gbs: f64::NAN,
        beyond_llc: false,
        threads: None,
        error: None,
    };
    // One hand loop allocated before the integrator, one after (the integrator takes over the
    // state's vectors; the hand loops copy the state's values, which the start does not change
    // for an unconstrained model, and the start's acceleration is recomputed below).
    let mut hand_before = Hand::new(model.lumped(), &state);
    let mut cd = match CentralDifference::new(&mut model, &mut state, opts) {
        Ok(cd) => cd,
        Err(e) => {
            row.error = Some(e.to_string());
            return row;
        }
    };
    hand_before.a.copy_from_slice(&state.a);
    let mut hand_after = Hand::new(model.lumped(), &state);
    let bytes = step_bytes(model.stiffness_matrix());
    row.beyond_llc = llc.is_some_and(|l| bytes > l as f64);
    let mut triad = Triad::new((bytes / 24.0).ceil() as usize);

    // Enough inner steps for about 5 ms per sample at 1 ns per entry.
    let inner = (5_000_000 / (n * model.stiffness_matrix().nnz() / n).max(1)).max(1);
    let repeats = if settings.quick { 5 } else { 9 };
    let mut error: Option<String> = None;
    let mut step = |model: &mut LinearModel, state: &mut State| {
        if let Err(e) = cd.step(model, state, dt) {
            error.get_or_insert(e.to_string());
        }
    };
    let mut hand_samples = Vec::new();
    let times = interleaved_samples(repeats, inner, 4, |which| match which {
        0 => step(&mut model, &mut state),
        1 => hand_before.step(model.stiffness_matrix(), dt),
        2 => hand_after.step(model.stiffness_matrix(), dt),
        _ => triad.run(3.0),
    });
    black_box((hand_before.sums, hand_after.sums));
    hand_samples.extend_from_slice(&times[1]);
    hand_samples.extend_from_slice(&times[2]);
    let times: Vec<f64> = times.into_iter().map(median).collect();
    row.step = times[0];
    row.hand = median(hand_samples);
    row.control = times[2] / times[1];
    row.gbs = bytes / times[0] / 1e9;
    row.triad_gbs = triad.bytes() / times[3] / 1e9;

    if let Some((p1, p2)) = pools {
        // Step and triad on 1 thread, then on 2 threads, taking turns.
        let times = interleaved(repeats, inner, 4, |which| match which {
            0 => p1.install(|| step(&mut model, &mut state)),
            1 => p2.install(|| step(&mut model, &mut state)),
            2 => p1.install(|| triad.run(3.0)),
            _ => p2.install(|| triad.run(3.0)),
        });
        row.threads = Some([times[0], times[1], times[2], times[3]]);
    }
    row.error = error;
    row
}

/// Peak heap of an explicit run beyond the model, per DOF in doubles (and the model's own bytes
/// per DOF): the live bytes when the run starts are subtracted from the peak while the state is
/// made, the integrator created and `steps` steps taken. With `estimate`, the integrator's default
/// options (the Lanczos estimate of the stable step); otherwise the stable step is given, from
/// the Gershgorin bound computed inside the window.
fn memory_per_dof(
    model: &mut LinearModel,
    steps: usize,
    estimate: bool,
) -> (f64, f64, Option<String>) {
    let n = model.dofs();
    let model_bytes = csr_bytes(model.stiffness_matrix())
        + csr_bytes(model.mass_matrix())
        + 8 * model.lumped().len();
    let per_dof = |bytes: usize| bytes as f64 / (8.0 * n as f64);
    let mut error = None;
    let base = alloc::current();
    alloc::reset_peak();
    let mut state = initial_state(n);
    let dt = safe_step(model);
    let opts = if estimate {
        CentralDifferenceOptions::default()
    } else {
        {
            let mut o = CentralDifferenceOptions::default();
            o.stable_limit = StableLimit::Given(dt / 0.9);
            o
        }
    };
    match CentralDifference::new(model, &mut state, opts) {
        Ok(mut cd) => {
            for _ in 0..steps {
                if let Err(e) = cd.step(model, &mut state, dt) {
                    error.get_or_insert(e.to_string());
                    break;
                }
            }
            black_box(&state);
        }
        Err(e) => {
            error.get_or_insert(e.to_string());
        }
    }
    (
        per_dof(alloc::peak().saturating_sub(base)),
        per_dof(model_bytes),
        error,
    )
}

fn fmt_time(s: f64) -> String {
    if !s.is_finite() {
        "-".into()
    } else if s < 1e-3 {
        format!("{:.1} us", s * 1e6)
    } else if s < 1.0 {
        format!("{:.2} ms", s * 1e3)
    } else {
        format!("{s:.2} s")
    }
}

fn exp10(n: usize) -> String {
    let e = (n as f64).log10();
    if (e - e.round()).abs() < 0.02 {
        format!("1e{}", e.round())
    } else {
        format!("{n}")
    }
}

/// Measures and renders the section.
pub fn section(settings: Settings) -> Section {
    let sizes: &[usize] = if settings.quick {
        &[1_000, 10_000, 100_000]
    } else {
        &[1_000, 10_000, 100_000, 1_000_000, 10_000_000]
    };
    let llc = llc_bytes();
    let pools = (
        rayon::ThreadPoolBuilder::new().num_threads(1).build(),
        rayon::ThreadPoolBuilder::new().num_threads(2).build(),
    );
    let pools = match pools {
        (Ok(a), Ok(b)) => Some((a, b)),
        _ => None,
    };
    let mut rows = Vec::new();
    for &n in sizes {
        let threads = if n >= 1_000_000 { pools.as_ref() } else { None };
        let t = Instant::now();
        rows.push(measure("chain", chain_model(n), settings, llc, threads));
        let m = (n as f64).cbrt().round() as usize;
        rows.push(measure("cube", cube_model(m), settings, llc, threads));
        eprintln!("   explicit: n = {n}: {:.1} s", t.elapsed().as_secs_f64());
    }
    let mem_n = if settings.quick { 100_000 } else { 1_000_000 };
    let mut mem_model = chain_model(mem_n);
    let (mem_given, model_per_dof, mem_error) = memory_per_dof(&mut mem_model, 20, false);
    drop(mem_model);
    // The default Lanczos estimate on a smaller cube (it converges there in a fraction of a
    // second; see the note below the table).
    let mut est_model = cube_model(22);
    let est_n = est_model.dofs();
    let (mem_estimated, _, est_error) = memory_per_dof(&mut est_model, 20, true);
    drop(est_model);

    let mut body = String::new();
    let mut targets = Vec::new();
    let _ = writeln!(
        body,
        "One central-difference step (`CentralDifference::step`, default options, the stable \
         step given) on an undamped, unloaded `LinearModel` with unit lumped masses: the 1D \
         spring chain (`K = tridiag(-1, 2, -1)`, 3 entries a row) and the 3D seven-point stencil \
         on a cube of `m^3` DOFs (7 entries a row), at 0.9 of the Gershgorin stable step. \
         **hand** is a hand-written loop doing the same arithmetic on the same CSR arrays and \
         vectors of the same size, in two passes (`v_half, u_new` and the finiteness sum; then \
         per row `f = K u_new` fused with `a, v` and the energy sums `v_half f, v f, a f, m v^2`), \
         serial below stepgauge's parallel threshold ({} entries) and over rayon's pool above it, \
         in the same chunks as the integrator, as stepgauge's step does. **control** times a \
         second, identical copy of the hand loop: one copy is allocated before the integrator \
         and one after it, each round of samples starts with another of the four loops, and \
         **hand** is the median over both copies' samples, so that buffer placement and running \
         order count for neither side; the control must read about 1.00, and its distance from \
         1 is the resolution of **step / hand** on the machine at the time. **GB/s** counts the \
         bytes a step must move, each array once: `8 (5 + 6) n` for the vectors (`u, v, a` read \
         and `u_new, v_half` written; `u_new, v_half, m, 1/m` read and `a, v` written) plus the \
         matrix `8 (n + 1) + 12 nnz`. **triad** is `a[i] = b[i] + s c[i]` on three arrays of the \
         same total size (24 bytes an entry), same \
         threads. Medians of {} samples. Last-level cache: {}.\n",
        Parallelism::default().threshold,
        if settings.quick { 5 } else { 9 },
        llc.map_or("unknown".to_string(), |b| format!("{} MiB", b >> 20)),
    );
    let _ = writeln!(
        body,
        "| model | n | step | hand | step / hand | control: hand copy / hand | GB/s | triad GB/s | GB/s / triad |"
    );
    let _ = writeln!(body, "|---|---|---|---|---|---|---|---|---|");
    for r in &rows {
        let ratio = r.step / r.hand;
        let bw = r.gbs / r.triad_gbs;
        let _ = writeln!(
            body,
            "| {} | {} | {} | {} | {:.3} | {:.3} | {:.1} | {:.1} | {:.2}{} |",
            r.model,
            r.n,
            fmt_time(r.step),
            fmt_time(r.hand),
            ratio,
            r.control,
            r.gbs,
            r.triad_gbs,
            bw,
            if r.beyond_llc { "" } else { " (in cache)" }
        );
        targets.push(Target {
            threads: rayon::current_num_threads().to_string(),
            what: format!("step / hand loop, {} n = {}", r.model, exp10(r.n)),
            measured: format!("{ratio:.3}"),
            target: format!("<= {HAND_TARGET}"),
            met: ratio <= HAND_TARGET,
        });
        if r.beyond_llc {
            targets.push(Target {
                threads: rayon::current_num_threads().to_string(),
                what: format!(
                    "step bandwidth / triad, {} n = {} (beyond LLC)",
                    r.model,
                    exp10(r.n)
                ),
                measured: format!("{bw:.2}"),
                target: format!(">= {BANDWIDTH_TARGET}"),
                met: bw >= BANDWIDTH_TARGET,
            });
        }
    }
    let _ = writeln!(
        body,
        "\nIn cache the timings cannot resolve 5 % (see the control column). Instructions do not \
         depend on the load: `sh bench-report/explicit-instructions.sh` (valgrind's callgrind on \
         `bench-report --explicit-steps`, one thread, the set-up cancelled by the difference of \
         two step counts) counts those of one step and of one hand-loop step. It measured step / \
         hand = 0.949 (chain) and 0.969 (cube) at n = 1e3, 0.939 and 0.962 at n = 1e5 (1.099, \
         1.093, 1.089 and 1.082 before the fused loop held the matrix's arrays in locals and read \
         the row pointers without a bounds check); see the script for the figures on this machine."
    );
    let _ = writeln!(body);

    let threaded: Vec<&Row> = rows.iter().filter(|r| r.threads.is_some()).collect();
    if !threaded.is_empty() {
        let _ = writeln!(
            body,
            "Two threads against one (`rayon::ThreadPool`s of 1 and 2 threads, the step and the \
             triad run inside `install`; stepgauge goes parallel from {} entries, so both sizes \
             run their loops on both threads):\n",
            Parallelism::default().threshold
        );
        let _ = writeln!(
            body,
            "| model | n | step, 1 thread | step, 2 threads | speed-up | triad speed-up |"
        );
        let _ = writeln!(body, "|---|---|---|---|---|---|");
        let mut triad_short = false;
        for r in &threaded {
            let [s1, s2, t1, t2] = r.threads.unwrap_or([f64::NAN; 4]);
            let (sp, tsp) = (s1 / s2, t1 / t2);
            triad_short |= tsp < SPEEDUP_TARGET;
            let _ = writeln!(
                body,
                "| {} | {} | {} | {} | {:.2} | {:.2} |",
                r.model,
                r.n,
                fmt_time(s1),
                fmt_time(s2),
                sp,
                tsp
            );
            targets.push(Target {
                threads: "1 and 2".to_string(),
                what: format!("2-thread speed-up, {} n = {}", r.model, exp10(r.n)),
                measured: format!("{sp:.2} (triad {tsp:.2})"),
                target: format!(">= {SPEEDUP_TARGET}"),
                met: sp >= SPEEDUP_TARGET,
            });
        }
        if triad_short {
            let _ = writeln!(
                body,
                "\nThe triad itself does not reach {SPEEDUP_TARGET} on two threads here: the \
                 step is bound by memory bandwidth, and one core already draws a large share of \
                 what the memory system delivers to two, so no memory-bound loop can reach the \
                 target on this machine; compare the step's speed-up with the triad's."
            );
        }
        let _ = writeln!(body);
    }

    let _ = writeln!(
        body,
        "Peak heap of an explicit run beyond the model (counting allocator: the live bytes when \
         the run starts subtracted from the peak while the state is made, the integrator \
         created and 20 steps taken; the state's three vectors count). The model itself \
         (stiffness and mass matrices, lumped mass) holds {model_per_dof:.1} doubles per DOF for \
         the chain.\n"
    );
    let _ = writeln!(body, "| run | doubles per DOF |");
    let _ = writeln!(body, "|---|---|");
    let _ = writeln!(
        body,
        "| chain, n = {mem_n}, stable step given (Gershgorin bound computed in the run) | {mem_given:.2} |"
    );
    let _ = writeln!(
        body,
        "| cube, n = {est_n}, default options (Lanczos estimate of the stable step) | {mem_estimated:.2} |"
    );
    let _ = writeln!(
        body,
        "\nWith the stable step given, the run holds the state (`u, v, a`) and six vectors of the \
         integrator (lumped mass, its inverse, next displacement, half-step velocity, velocity, \
         acceleration); an unloaded, undamped linear model needs no force vector. The default \
         estimate adds, while it runs, its Krylov basis of up to `EigenOptions::krylov_dim` \
         (40) vectors and three more, once at creation; a smaller `krylov_dim`, or \
         `StableLimit::Given` with the Gershgorin bound (`omega_max_gershgorin`, one vector), \
         avoids it.\n"
    );
    targets.push(Target {
        threads: rayon::current_num_threads().to_string(),
        what: format!(
            "peak heap per DOF of an explicit run beyond the model, chain n = {}",
            exp10(mem_n)
        ),
        measured: format!("{mem_given:.2} doubles (default Lanczos estimate: {mem_estimated:.1})"),
        target: format!("<= {MEMORY_TARGET}"),
        met: mem_given <= MEMORY_TARGET,
    });
    let errors: Vec<String> = rows
        .iter()
        .filter_map(|r| {
            r.error
                .as_ref()
                .map(|e| format!("{} n = {}: {e}", r.model, r.n))
        })
        .chain(mem_error.map(|e| format!("memory run: {e}")))
        .chain(est_error.map(|e| format!("memory run with the estimate: {e}")))
        .collect();
    if !errors.is_empty() {
        let _ = writeln!(body, "\nErrors during the measurement:\n");
        for e in errors {
            let _ = writeln!(body, "- {e}");
        }
    }
    Section {
        title: "Explicit step".to_string(),
        body,
        targets,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The hand loop computes what the integrator computes (bit for bit), so that the comparison
    /// is between equal work.
    #[test]
    fn hand_loop_matches_the_integrator() {
        for mut model in [chain_model(50_000), cube_model(20)] {
            let n = model.dofs();
            let dt = safe_step(&model);
            let mut state = initial_state(n);
            let mut opts = CentralDifferenceOptions::default();
            opts.stable_limit = StableLimit::Unchecked;
            let mut cd = CentralDifference::new(&mut model, &mut state, opts).unwrap();
            let mut hand = Hand::new(model.lumped(), &state);
            let k = model.stiffness_matrix().clone();
            for _ in 0..5 {
                cd.step(&mut model, &mut state, dt).unwrap();
                hand.step(&k, dt);
            }
            assert!(
                state
                    .u
                    .iter()
                    .zip(hand.u())
                    .all(|(a, b)| a.to_bits() == b.to_bits())
            );
            let kinetic = 0.5 * hand.sums[4];
            assert_eq!(kinetic.to_bits(), cd.energy().kinetic.to_bits());
        }
    }

    #[test]
    fn cache_sizes_parse() {
        assert_eq!(parse_size("32768K"), Some(32 << 20));
        assert_eq!(parse_size("2M"), Some(2 << 20));
        assert_eq!(parse_size("x"), None);
    }
}
