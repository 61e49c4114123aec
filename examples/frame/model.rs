//! The planar frame of the `frame` example: two-node Euler-Bernoulli frame elements with
//! consistent mass, the assembly into sparse matrices on the free DOFs, the generalised
//! eigenproblem, the synthesised base acceleration and the linear model of the base-excited
//! frame. No I/O here: `main.rs` runs it, `tests/example_frame.rs` checks it.
//!
//! Every dimension, section, mass and signal below is invented for this example.
//!
//! DOFs: three per node, `(u, v, theta)` = horizontal and vertical translation and rotation,
//! node `i` owning global DOFs `3 i, 3 i + 1, 3 i + 2`. Nodes listed as fixed are removed from
//! the equations (the frame is clamped at its base); the model's DOFs are the remaining ones, in
//! global order.

#![allow(dead_code)] // the example and the test each use a part of this file

use nalgebra::{DMatrix, DVector, SymmetricEigen};
use sprs::{CsMat, TriMat};
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::linalg::SparseCholesky;
use stepgauge::model::{Damping, LinearModel, Load, TimeFunction};
use stepgauge::params::AlphaParams;
use stepgauge::run::{Flow, RecordOptions, RunOptions, StepControl, run};
use stepgauge::{Error, Result, State};

/// Standard gravity (m/s^2), to express accelerations in g (common practice: 9.80665).
pub const G: f64 = 9.80665;

/// Material and section of a member (all values of the example are invented).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Section {
    /// Young's modulus E (Pa).
    pub modulus: f64,
    /// Density rho (kg/m^3).
    pub density: f64,
    /// Cross-section area A (m^2).
    pub area: f64,
    /// Second moment of area I about the bending axis (m^4).
    pub inertia: f64,
}

/// A 6 x 6 element matrix in the order `(u1, v1, theta1, u2, v2, theta2)`.
pub type Mat6 = [[f64; 6]; 6];

/// Direction cosines and length of the member from `(x1, y1)` to `(x2, y2)`.
fn geometry(p1: (f64, f64), p2: (f64, f64)) -> Result<(f64, f64, f64)> {
    let (dx, dy) = (p2.0 - p1.0, p2.1 - p1.1);
    let l = dx.hypot(dy);
    if !(l.is_finite() && l > 0.0) {
        return Err(Error::InvalidParameter {
            name: "element length",
            value: l,
            expected: "two distinct, finite end points",
        });
    }
    Ok((dx / l, dy / l, l))
}

/// `T^T A T` with the rotation `T` from global `(u, v, theta)` to local axes (local x along the
/// member): `u_l = c u + s v`, `v_l = -s u + c v`, `theta_l = theta` at each node.
fn rotate(local: &Mat6, c: f64, s: f64) -> Mat6 {
    let mut t = [[0.0; 6]; 6];
    for n in 0..2 {
        let o = 3 * n;
        t[o][o] = c;
        t[o][o + 1] = s;
        t[o + 1][o] = -s;
        t[o + 1][o + 1] = c;
        t[o + 2][o + 2] = 1.0;
    }
    let mut at = [[0.0; 6]; 6]; // A T
    for i in 0..6 {
        for j in 0..6 {
            at[i][j] = (0..6).map(|k| local[i][k] * t[k][j]).sum();
        }
    }
    let mut out = [[0.0; 6]; 6]; // T^T (A T)
    for i in 0..6 {
        for j in 0..6 {
            out[i][j] = (0..6).map(|k| t[k][i] * at[k][j]).sum();
        }
    }
    out
}

/// Stiffness matrix of a two-node frame element (bar + Euler-Bernoulli beam) in global axes.
///
/// Local matrix: axial `EA/L [[1, -1], [-1, 1]]` and bending
/// `EI/L^3 [[12, 6L, -12, 6L], [6L, 4L^2, -6L, 2L^2], [-12, -6L, 12, -6L], [6L, 2L^2, -6L, 4L^2]]`
/// (Przemieniecki 1968, *Theory of Matrix Structural Analysis*, ch. 5; Cook, Malkus, Plesha &
/// Witt 2002, *Concepts and Applications of Finite Element Analysis*, 4th ed., ch. 2; from
/// memory), rotated as `T^T k T`.
///
/// # Errors
/// [`Error::InvalidParameter`] for coincident end points.
pub fn element_stiffness(sec: &Section, p1: (f64, f64), p2: (f64, f64)) -> Result<Mat6> {
    let (c, s, l) = geometry(p1, p2)?;
    let ea = sec.modulus * sec.area / l;
    let b = sec.modulus * sec.inertia / (l * l * l);
    let mut k = [[0.0; 6]; 6];
    k[0][0] = ea;
    k[0][3] = -ea;
    k[3][0] = -ea;
    k[3][3] = ea;
    let bend = [
        [12.0, 6.0 * l, -12.0, 6.0 * l],
        [6.0 * l, 4.0 * l * l, -6.0 * l, 2.0 * l * l],
        [-12.0, -6.0 * l, 12.0, -6.0 * l],
        [6.0 * l, 2.0 * l * l, -6.0 * l, 4.0 * l * l],
    ];
    let idx = [1, 2, 4, 5];
    for (a, &i) in idx.iter().enumerate() {
        for (bb, &j) in idx.iter().enumerate() {
            k[i][j] = b * bend[a][bb];
        }
    }
    Ok(rotate(&k, c, s))
}

/// Consistent mass matrix of a two-node frame element in global axes.
///
/// Local matrix: axial `rho A L / 6 [[2, 1], [1, 2]]` and bending `rho A L / 420 [[156, 22L, 54,
/// -13L], [22L, 4L^2, 13L, -3L^2], [54, 13L, 156, -22L], [-13L, -3L^2, -22L, 4L^2]]` (the cubic
/// Hermite shape functions of the stiffness; Przemieniecki 1968, ch. 11; Cook et al. 2002,
/// ch. 11; from memory), rotated as `T^T m T`. Rotary inertia of the section is neglected
/// (Euler-Bernoulli).
///
/// # Errors
/// [`Error::InvalidParameter`] for coincident end points.
pub fn element_mass(sec: &Section, p1: (f64, f64), p2: (f64, f64)) -> Result<Mat6> {
    let (c, s, l) = geometry(p1, p2)?;
    let m = sec.density * sec.area * l;
    let mut k = [[0.0; 6]; 6];
    k[0][0] = m / 3.0;
    k[0][3] = m / 6.0;
    k[3][0] = m / 6.0;
    k[3][3] = m / 3.0;
    let bend = [
        [156.0, 22.0 * l, 54.0, -13.0 * l],
        [22.0 * l, 4.0 * l * l, 13.0 * l, -3.0 * l * l],
        [54.0, 13.0 * l, 156.0, -22.0 * l],
        [-13.0 * l, -3.0 * l * l, -22.0 * l, 4.0 * l * l],
    ];
    let idx = [1, 2, 4, 5];
    for (a, &i) in idx.iter().enumerate() {
        for (bb, &j) in idx.iter().enumerate() {
            k[i][j] = m / 420.0 * bend[a][bb];
        }
    }
    Ok(rotate(&k, c, s))
}

/// A mesh of frame elements.
#[derive(Debug, Clone, Default)]
pub struct Mesh {
    /// Node coordinates (m).
    pub nodes: Vec<(f64, f64)>,
    /// Elements: end nodes and section.
    pub elements: Vec<(usize, usize, Section)>,
    /// Clamped nodes (all three DOFs fixed).
    pub fixed: Vec<usize>,
    /// Added point masses (kg) on both translations of a node (no rotary inertia).
    pub point_masses: Vec<(usize, f64)>,
}

impl Mesh {
    fn node(&mut self, p: (f64, f64)) -> usize {
        self.nodes.push(p);
        self.nodes.len() - 1
    }

    /// Adds a straight member from node `a` to node `b` split into `parts` equal elements;
    /// returns the node ids along it, `a` first and `b` last.
    fn member(&mut self, a: usize, b: usize, parts: usize, sec: Section) -> Vec<usize> {
        let (pa, pb) = (self.nodes[a], self.nodes[b]);
        let mut ids = vec![a];
        for k in 1..parts {
            let f = k as f64 / parts as f64;
            ids.push(self.node((pa.0 + f * (pb.0 - pa.0), pa.1 + f * (pb.1 - pa.1))));
        }
        ids.push(b);
        for w in ids.windows(2) {
            self.elements.push((w[0], w[1], sec));
        }
        ids
    }

    /// Total structural mass (elements plus point masses), kg.
    pub fn total_mass(&self) -> f64 {
        let elements: f64 = self
            .elements
            .iter()
            .map(|&(a, b, s)| {
                let (pa, pb) = (self.nodes[a], self.nodes[b]);
                s.density * s.area * (pb.0 - pa.0).hypot(pb.1 - pa.1)
            })
            .sum();
        elements + self.point_masses.iter().map(|p| p.1).sum::<f64>()
    }
}

/// The frame's layout: storeys, bays, members and masses (all invented).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FrameLayout {
    /// Number of storeys.
    pub storeys: usize,
    /// Storey height (m).
    pub storey_height: f64,
    /// Number of bays.
    pub bays: usize,
    /// Bay width (m).
    pub bay_width: f64,
    /// Column section.
    pub column: Section,
    /// Beam section.
    pub beam: Section,
    /// Added floor mass per floor (kg), spread equally over the nodes of that floor's beams.
    pub floor_mass: f64,
    /// Elements per member (column of one storey, beam of one bay).
    pub elements_per_member: usize,
}

/// Steel: E = 210 GPa, rho = 7850 kg/m^3 (common practice).
pub const STEEL_E: f64 = 210e9;
/// Steel density (kg/m^3, common practice).
pub const STEEL_RHO: f64 = 7850.0;

impl FrameLayout {
    /// The example's frame: 3 storeys of 3.2 m, 2 bays of 6 m, steel columns A = 1.5e-2 m^2,
    /// I = 2.5e-4 m^4, beams A = 1.0e-2 m^2, I = 3.0e-4 m^4, 24 t of added mass per floor (all
    /// invented), `elements_per_member` elements per member.
    pub fn example(elements_per_member: usize) -> Self {
        FrameLayout {
            storeys: 3,
            storey_height: 3.2,
            bays: 2,
            bay_width: 6.0,
            column: Section {
                modulus: STEEL_E,
                density: STEEL_RHO,
                area: 1.5e-2,
                inertia: 2.5e-4,
            },
            beam: Section {
                modulus: STEEL_E,
                density: STEEL_RHO,
                area: 1.0e-2,
                inertia: 3.0e-4,
            },
            floor_mass: 24_000.0,
            elements_per_member,
        }
    }

    /// The mesh, and the roof node at the top of the first column line.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] for no storey, no bay, no element per member, or a
    /// non-positive size or mass.
    pub fn mesh(&self) -> Result<(Mesh, usize)> {
        for (name, v) in [
            ("storeys", self.storeys as f64),
            ("bays", self.bays as f64),
            ("elements_per_member", self.elements_per_member as f64),
        ] {
            if v < 1.0 {
                return Err(Error::InvalidParameter {
                    name,
                    value: v,
                    expected: "at least 1",
                });
            }
        }
        for (name, v) in [
            ("storey_height", self.storey_height),
            ("bay_width", self.bay_width),
        ] {
            if !(v.is_finite() && v > 0.0) {
                return Err(Error::InvalidParameter {
                    name,
                    value: v,
                    expected: "a positive, finite length",
                });
            }
        }
        if !(self.floor_mass.is_finite() && self.floor_mass >= 0.0) {
            return Err(Error::InvalidParameter {
                name: "floor_mass",
                value: self.floor_mass,
                expected: "a non-negative, finite mass",
            });
        }
        let mut mesh = Mesh::default();
        let p = self.elements_per_member;
        // Joint nodes: grid[level][line].
        let mut grid = vec![vec![0usize; self.bays + 1]; self.storeys + 1];
        for (level, row) in grid.iter_mut().enumerate() {
            for (line, id) in row.iter_mut().enumerate() {
                *id = mesh.node((
                    line as f64 * self.bay_width,
                    level as f64 * self.storey_height,
                ));
            }
        }
        mesh.fixed = grid[0].clone();
        for pair in grid.windows(2) {
            for (&bottom, &top) in pair[0].iter().zip(&pair[1]) {
                mesh.member(bottom, top, p, self.column);
            }
        }
        for row in grid.iter().skip(1) {
            let mut floor = vec![row[0]];
            for bay in 0..self.bays {
                let ids = mesh.member(row[bay], row[bay + 1], p, self.beam);
                floor.extend_from_slice(&ids[1..]);
            }
            let share = self.floor_mass / floor.len() as f64;
            mesh.point_masses.extend(floor.iter().map(|&n| (n, share)));
        }
        let roof = grid[self.storeys][0];
        Ok((mesh, roof))
    }
}

/// A cantilever column along y, clamped at the base, of `elements` equal elements; returns the
/// mesh and the tip node.
///
/// # Errors
/// [`Error::InvalidParameter`] for no element or a non-positive length.
pub fn cantilever(length: f64, elements: usize, sec: Section) -> Result<(Mesh, usize)> {
    if elements == 0 || !(length.is_finite() && length > 0.0) {
        return Err(Error::InvalidParameter {
            name: "cantilever",
            value: length,
            expected: "a positive, finite length and at least one element",
        });
    }
    let mut mesh = Mesh::default();
    let a = mesh.node((0.0, 0.0));
    let b = mesh.node((0.0, length));
    mesh.member(a, b, elements, sec);
    mesh.fixed = vec![a];
    Ok((mesh, b))
}

/// The assembled equations on the free DOFs.
#[derive(Debug, Clone)]
pub struct Assembled {
    /// Stiffness on the free DOFs.
    pub k: CsMat<f64>,
    /// Consistent mass (with the point masses) on the free DOFs.
    pub m: CsMat<f64>,
    /// Global DOF of each free DOF.
    pub free: Vec<usize>,
    /// Free-DOF index of each global DOF (`None`: fixed).
    pub index: Vec<Option<usize>>,
    /// Influence vector r: 1 on the free horizontal translations.
    pub r: Vec<f64>,
    /// Row `b` with `b . u` = the sum of the horizontal elastic forces at the clamped nodes
    /// (the sum of the base rows `u` of `K_bf`): the elastic base shear.
    pub base_shear_row: Vec<f64>,
}

impl Assembled {
    /// Number of free DOFs.
    pub fn dofs(&self) -> usize {
        self.free.len()
    }

    /// Free-DOF index of DOF `local` (0 = u, 1 = v, 2 = theta) of `node`, if it is free.
    pub fn dof(&self, node: usize, local: usize) -> Option<usize> {
        self.index.get(3 * node + local).copied().flatten()
    }

    /// The elastic base shear `b . u`: the sum of the horizontal reactions the clamped nodes
    /// give the structure, from the end forces of the elements attached to them (damping forces
    /// left out).
    pub fn base_shear(&self, u: &[f64]) -> f64 {
        self.base_shear_row.iter().zip(u).map(|(b, x)| b * x).sum()
    }

    /// Horizontal mass on the free DOFs, `r^T M r` (kg): the mass whose inertia passes through
    /// the columns (the consistent-mass share of the clamped nodes goes straight to the ground).
    pub fn horizontal_mass(&self) -> f64 {
        let mr = mat_vec(&self.m, &self.r);
        self.r.iter().zip(&mr).map(|(a, b)| a * b).sum()
    }
}

/// `A x` for a sprs matrix.
pub fn mat_vec(a: &CsMat<f64>, x: &[f64]) -> Vec<f64> {
    let mut y = vec![0.0; a.rows()];
    for (i, row) in a.outer_iterator().enumerate() {
        y[i] = row.iter().map(|(j, v)| v * x[j]).sum();
    }
    y
}

/// Assembles the mesh's stiffness and consistent mass on its free DOFs.
///
/// # Errors
/// [`Error::InvalidParameter`] for a zero-length element or a node out of range;
/// [`Error::EmptyModel`] when every DOF is fixed.
pub fn assemble(mesh: &Mesh) -> Result<Assembled> {
    let nn = mesh.nodes.len();
    let mut fixed = vec![false; nn];
    for &f in &mesh.fixed {
        if f >= nn {
            return Err(Error::InvalidParameter {
                name: "fixed node",
                value: f as f64,
                expected: "a node of the mesh",
            });
        }
        fixed[f] = true;
    }
    let mut index = vec![None; 3 * nn];
    let mut free = Vec::new();
    for g in 0..3 * nn {
        if !fixed[g / 3] {
            index[g] = Some(free.len());
            free.push(g);
        }
    }
    let n = free.len();
    if n == 0 {
        return Err(Error::EmptyModel);
    }
    let mut k = TriMat::new((n, n));
    let mut m = TriMat::new((n, n));
    let mut base_shear_row = vec![0.0; n];
    for &(a, b, sec) in &mesh.elements {
        if a >= nn || b >= nn {
            return Err(Error::InvalidParameter {
                name: "element node",
                value: a.max(b) as f64,
                expected: "a node of the mesh",
            });
        }
        let ke = element_stiffness(&sec, mesh.nodes[a], mesh.nodes[b])?;
        let me = element_mass(&sec, mesh.nodes[a], mesh.nodes[b])?;
        let g = [3 * a, 3 * a + 1, 3 * a + 2, 3 * b, 3 * b + 1, 3 * b + 2];
        for i in 0..6 {
            for j in 0..6 {
                match (index[g[i]], index[g[j]]) {
                    (Some(p), Some(q)) => {
                        k.add_triplet(p, q, ke[i][j]);
                        m.add_triplet(p, q, me[i][j]);
                    }
                    // A horizontal row of a clamped node against a free column: K_bf.
                    (None, Some(q)) if g[i] % 3 == 0 => base_shear_row[q] += ke[i][j],
                    _ => {}
                }
            }
        }
    }
    for &(node, mass) in &mesh.point_masses {
        for l in 0..2 {
            if let Some(p) = index.get(3 * node + l).copied().flatten() {
                m.add_triplet(p, p, mass);
            }
        }
    }
    let r = free
        .iter()
        .map(|g| if g % 3 == 0 { 1.0 } else { 0.0 })
        .collect();
    Ok(Assembled {
        k: k.to_csr(),
        m: m.to_csr(),
        free,
        index,
        r,
        base_shear_row,
    })
}

/// Natural circular frequencies (ascending, rad/s) and M-normalised mode shapes (columns) of
/// `K phi = omega^2 M phi`, by the Cholesky factor `M = L L^T` and the dense symmetric
/// eigensolver on `L^-1 K L^-T` (nalgebra; the problem is small).
///
/// # Errors
/// [`Error::InvalidMatrix`] when `M` is not positive definite.
pub fn modes(k: &CsMat<f64>, m: &CsMat<f64>) -> Result<(Vec<f64>, DMatrix<f64>)> {
    let n = k.rows();
    let dense = |a: &CsMat<f64>| {
        let mut d = DMatrix::zeros(n, n);
        for (i, row) in a.outer_iterator().enumerate() {
            for (j, v) in row.iter() {
                d[(i, j)] += *v;
            }
        }
        d
    };
    let (kd, md) = (dense(k), dense(m));
    let chol = md.cholesky().ok_or_else(|| Error::InvalidMatrix {
        what: "mass",
        problem: "not positive definite".into(),
    })?;
    let l = chol.l();
    let not_invertible = || Error::InvalidMatrix {
        what: "mass",
        problem: "its Cholesky factor is singular".into(),
    };
    let a = l.solve_lower_triangular(&kd).ok_or_else(not_invertible)?; // L^-1 K
    let b = l
        .solve_lower_triangular(&a.transpose())
        .ok_or_else(not_invertible)?; // L^-1 K L^-T
    let sym = (&b + b.transpose()) * 0.5;
    let eig = SymmetricEigen::new(sym);
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&i, &j| eig.eigenvalues[i].total_cmp(&eig.eigenvalues[j]));
    let lt = l.transpose();
    let mut shapes = DMatrix::zeros(n, n);
    let mut omegas = Vec::with_capacity(n);
    for (c, &i) in order.iter().enumerate() {
        omegas.push(eig.eigenvalues[i].max(0.0).sqrt());
        let y: DVector<f64> = eig.eigenvectors.column(i).into_owned();
        let phi = lt.solve_upper_triangular(&y).ok_or_else(not_invertible)?; // L^-T y
        shapes.set_column(c, &phi);
    }
    Ok((omegas, shapes))
}

/// Horizontal effective modal mass of each mode, `(phi^T M r)^2` for M-normalised modes (kg).
pub fn effective_masses(asm: &Assembled, shapes: &DMatrix<f64>) -> Vec<f64> {
    let mr = mat_vec(&asm.m, &asm.r);
    (0..shapes.ncols())
        .map(|c| {
            let g: f64 = shapes.column(c).iter().zip(&mr).map(|(p, q)| p * q).sum();
            g * g
        })
        .collect()
}

/// `splitmix64`: a tiny seeded generator for the signal's phases (Steele, Lea & Flood 2014,
/// "Fast splittable pseudorandom number generators", OOPSLA; constants from memory).
fn splitmix64(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The synthesised (invented) ground acceleration: a sum of sines of frequencies 0.6 Hz x
/// 1.5^k (k = 0..7, up to 10.3 Hz), equal amplitudes and seeded random phases, under a
/// trapezoidal envelope (linear rise over `rise`, hold, linear decay to zero at `duration`),
/// scaled so that its peak on a 1 ms grid is `peak`.
#[derive(Debug, Clone, PartialEq)]
pub struct GroundMotion {
    /// (frequency in Hz, phase in rad) of each component.
    pub components: Vec<(f64, f64)>,
    /// Rise time of the envelope (s).
    pub rise: f64,
    /// Start of the decay (s).
    pub hold_end: f64,
    /// End of the record (s); zero afterwards.
    pub duration: f64,
    /// Scale factor from the unit sum to m/s^2.
    pub scale: f64,
}

impl GroundMotion {
    /// The example's record: seed 2026, rise 2 s, hold to 8 s, decay to 12 s, peak 0.3 g.
    pub fn example() -> Self {
        Self::new(2026, 2.0, 8.0, 12.0, 0.3 * G)
    }

    /// A record from a seed, envelope times and peak (m/s^2).
    pub fn new(seed: u64, rise: f64, hold_end: f64, duration: f64, peak: f64) -> Self {
        let mut s = seed;
        let components = (0..8)
            .map(|k| {
                let u = (splitmix64(&mut s) >> 11) as f64 / (1u64 << 53) as f64;
                (0.6 * 1.5f64.powi(k), 2.0 * std::f64::consts::PI * u)
            })
            .collect();
        let mut g = GroundMotion {
            components,
            rise,
            hold_end,
            duration,
            scale: 1.0,
        };
        let steps = (duration / 1e-3).ceil() as usize;
        let max = (0..=steps)
            .map(|i| g.accel(i as f64 * 1e-3).abs())
            .fold(0.0, f64::max);
        g.scale = if max > 0.0 { peak / max } else { 0.0 };
        g
    }

    /// The envelope at `t` (0..1).
    pub fn envelope(&self, t: f64) -> f64 {
        if !(t > 0.0 && t < self.duration) {
            0.0
        } else if t < self.rise {
            t / self.rise
        } else if t <= self.hold_end {
            1.0
        } else {
            (self.duration - t) / (self.duration - self.hold_end)
        }
    }

    /// Ground acceleration a_g(t) (m/s^2).
    pub fn accel(&self, t: f64) -> f64 {
        let e = self.envelope(t);
        if e == 0.0 {
            return 0.0;
        }
        let sum: f64 = self
            .components
            .iter()
            .map(|&(f, phi)| (2.0 * std::f64::consts::PI * f * t + phi).sin())
            .sum();
        self.scale * e * sum
    }
}

/// The base-excited frame in relative coordinates, `M u'' + C u' + K u = -M r a_g(t)`, as a
/// [`LinearModel`] with a fixed load pattern `-M r` scaled by `a_g(t)` and Rayleigh damping.
///
/// # Errors
/// The matrix and damping errors of [`LinearModel`]; [`Error::InvalidParameter`] for a damping
/// other than Rayleigh or none.
pub fn base_excited(
    asm: &Assembled,
    damping: Damping,
    ground: TimeFunction,
) -> Result<LinearModel> {
    let pattern: Vec<f64> = mat_vec(&asm.m, &asm.r).iter().map(|x| -x).collect();
    let model = LinearModel::new(&asm.m, &asm.k)?.with_load(Load::Pattern {
        pattern,
        factor: ground,
    })?;
    match damping {
        Damping::None => Ok(model),
        Damping::Rayleigh { a0, a1 } => model.with_rayleigh(a0, a1),
        Damping::Matrix(_) | Damping::Force => Err(Error::InvalidParameter {
            name: "damping",
            value: f64::NAN,
            expected: "Rayleigh damping or none",
        }),
    }
}

/// The response of one run: the recorded history of every DOF and the two derived series.
#[derive(Debug, Clone)]
pub struct Response {
    /// Times of the rows (s).
    pub times: Vec<f64>,
    /// Horizontal roof displacement (m).
    pub roof: Vec<f64>,
    /// Elastic base shear (N).
    pub base_shear: Vec<f64>,
    /// Every DOF's displacement (and velocity and acceleration), row-major.
    pub record: stepgauge::run::Record,
    /// Largest relative energy-balance error of the run.
    pub max_balance_error: f64,
}

/// Runs the base-excited frame from rest with the implicit integrator (`params`), a sparse
/// Cholesky solver and the fixed step `dt` up to `t_end`, recording every DOF.
///
/// # Errors
/// The integrator's set-up errors and the error of a failed step.
pub fn simulate(
    asm: &Assembled,
    damping: Damping,
    ground: TimeFunction,
    params: AlphaParams,
    dt: f64,
    t_end: f64,
    roof_dof: usize,
) -> Result<Response> {
    let n = asm.dofs();
    if roof_dof >= n {
        return Err(Error::DofOutOfRange {
            what: "roof DOF",
            dof: roof_dof,
            n,
        });
    }
    let mut model = base_excited(asm, damping, ground)?;
    let mut state = State::at_rest(asm.dofs(), 0.0);
    let mut integrator = AlphaIntegrator::new(
        &mut model,
        &mut state,
        params,
        Box::new(SparseCholesky::new()),
        ImplicitOptions::default(),
    )?;
    let mut options = RunOptions::new(t_end, StepControl::Fixed(dt));
    options.record = {
        let mut o = RecordOptions::default();
        o.dofs = None;
        o.every = 1;
        o.velocity = true;
        o.acceleration = true;
        o.energy = false;
        o
    };
    let outcome = run(&mut integrator, &mut model, &mut state, &options, |_| {
        Flow::Continue
    })?
    .into_result()?;
    let record = outcome.record;
    let roof = record.u_column(roof_dof).collect();
    let base_shear = record.u.chunks(n).map(|u| asm.base_shear(u)).collect();
    Ok(Response {
        times: record.times.clone(),
        roof,
        base_shear,
        record,
        max_balance_error: outcome.max_relative_balance_error,
    })
}

/// Largest absolute value of a series.
pub fn peak(x: &[f64]) -> f64 {
    x.iter().fold(0.0, |m, v| m.max(v.abs()))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sec() -> Section {
        Section {
            modulus: 210e9,
            density: 7850.0,
            area: 1.2e-2,
            inertia: 2.0e-4,
        }
    }

    fn mul(a: &Mat6, x: &[f64; 6]) -> [f64; 6] {
        let mut y = [0.0; 6];
        for i in 0..6 {
            y[i] = (0..6).map(|j| a[i][j] * x[j]).sum();
        }
        y
    }

    /// Rigid-body motions (two translations, a small rotation about node 1) give no force; the
    /// matrices are symmetric; the consistent mass carries the member mass in each translation
    /// (Przemieniecki 1968, ch. 5 and 11: properties of the exact element; common practice).
    #[test]
    fn element_matrices_have_rigid_modes_symmetry_and_mass() {
        for &(p1, p2) in &[
            ((0.0, 0.0), (2.0, 0.0)),
            ((1.0, 1.0), (1.0, 4.0)),
            ((0.0, 0.0), (1.5, -2.0)),
        ] {
            let s = sec();
            let k = element_stiffness(&s, p1, p2).unwrap();
            let m = element_mass(&s, p1, p2).unwrap();
            let scale = k.iter().flatten().fold(0.0f64, |a, b| a.max(b.abs()));
            let rot = [0.0, 0.0, 1.0, -(p2.1 - p1.1), p2.0 - p1.0, 1.0];
            for x in [
                [1.0, 0.0, 0.0, 1.0, 0.0, 0.0],
                [0.0, 1.0, 0.0, 0.0, 1.0, 0.0],
                rot,
            ] {
                let f = mul(&k, &x);
                assert!(
                    f.iter().all(|v| v.abs() < 1e-12 * scale),
                    "rigid motion {x:?} gives force {f:?}"
                );
            }
            for i in 0..6 {
                for j in 0..6 {
                    assert!((k[i][j] - k[j][i]).abs() <= 1e-12 * scale);
                    assert!((m[i][j] - m[j][i]).abs() <= 1e-12 * m[0][0].abs().max(1.0));
                }
            }
            let l = (p2.0 - p1.0).hypot(p2.1 - p1.1);
            let member = s.density * s.area * l;
            for x in [
                [1.0, 0.0, 0.0, 1.0, 0.0, 0.0],
                [0.0, 1.0, 0.0, 0.0, 1.0, 0.0],
            ] {
                let mx = mul(&m, &x);
                let total: f64 = x.iter().zip(&mx).map(|(a, b)| a * b).sum();
                assert!(
                    (total - member).abs() < 1e-12 * member,
                    "{total} vs {member}"
                );
            }
            // A bending deformation costs energy: the element is not too soft.
            let bend = [0.0, 0.0, 1.0, 0.0, 0.0, -1.0];
            let e: f64 = bend.iter().zip(mul(&k, &bend)).map(|(a, b)| a * b).sum();
            // Constant curvature 2/L: u^T K u = EI kappa^2 L = 4 EI / L.
            assert!((e - 4.0 * s.modulus * s.inertia / l).abs() < 1e-9 * e);
        }
        assert!(element_stiffness(&sec(), (1.0, 1.0), (1.0, 1.0)).is_err());
    }

    /// The ground record reaches its peak, is zero outside its duration and is reproducible.
    #[test]
    fn ground_motion_is_scaled_and_enveloped() {
        let g = GroundMotion::example();
        let peak = (0..=12_000)
            .map(|i| g.accel(i as f64 * 1e-3).abs())
            .fold(0.0, f64::max);
        assert!((peak - 0.3 * G).abs() < 1e-12 * G);
        assert_eq!(g.accel(-1.0), 0.0);
        assert_eq!(g.accel(12.5), 0.0);
        assert_eq!(g, GroundMotion::example());
    }
}
