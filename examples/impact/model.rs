//! The billet model of the impact example: plane-strain four-node quadrilaterals with one-point
//! (reduced) integration, stiffness-based hourglass control, small-strain J2 plasticity with linear
//! isotropic hardening, and penalty contact against the rigid floor `y = 0`. No I/O here: the
//! program (`main.rs`) and the test (`tests/example_impact.rs`) share this file.
//!
//! Small strain throughout: the strain is `sym grad u` on the undeformed geometry. This is
//! adequate for the scenario (strains of a few per cent, no large rotation); a large-deformation
//! code would use a rate form with an objective stress update instead.

// The program and the test each use a part of this file.
#![allow(dead_code)]
// Loops over the four nodes / four tensor components read like the formulas with an index.
#![allow(clippy::needless_range_loop)]

use stepgauge::ModelError;
use stepgauge::explicit::element_stable_step;
use stepgauge::model::{Hints, Model};

/// An isotropic elastic-plastic material (plane strain).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Material {
    /// Young's modulus (Pa).
    pub young: f64,
    /// Poisson's ratio.
    pub poisson: f64,
    /// Density (kg/m^3).
    pub density: f64,
    /// Initial yield stress (Pa); `f64::INFINITY` keeps the material elastic.
    pub yield_stress: f64,
    /// Linear isotropic hardening modulus `H` (Pa): flow stress `sigma_y + H * alpha`, with
    /// `alpha` the equivalent plastic strain.
    pub hardening: f64,
}

impl Material {
    /// Lame's constants `(lambda, mu)`.
    pub fn lame(&self) -> (f64, f64) {
        let (e, nu) = (self.young, self.poisson);
        (
            e * nu / ((1.0 + nu) * (1.0 - 2.0 * nu)),
            e / (2.0 * (1.0 + nu)),
        )
    }

    /// Dilatational (plane-strain P-) wave speed `c = sqrt((lambda + 2 mu) / rho)`
    /// (common practice).
    pub fn wave_speed(&self) -> f64 {
        let (l, m) = self.lame();
        ((l + 2.0 * m) / self.density).sqrt()
    }
}

/// The material state at one integration point. Tensors are stored as `[xx, yy, zz, xy]`
/// (tensor, not engineering, shear); plane strain keeps `sigma_zz` and `eps_p,zz`.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Point {
    /// Plastic strain.
    pub plastic_strain: [f64; 4],
    /// Equivalent plastic strain `alpha`.
    pub alpha: f64,
    /// Stress.
    pub stress: [f64; 4],
}

fn dot4(a: &[f64; 4], b: &[f64; 4]) -> f64 {
    // The shear component counts twice in the full tensor contraction.
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2] + 2.0 * a[3] * b[3]
}

/// Radial return for small-strain J2 plasticity with linear isotropic hardening, from the
/// accepted point `old` to the total strain `eps` (`[xx, yy, zz, xy]`, `zz = 0` in plane strain).
///
/// Simo & Hughes (1998), *Computational Inelasticity*, sec. 3.3, box 3.2 (from memory):
///
/// ```text
/// trial:   s_tr = 2 mu dev(eps - eps_p,n),   p = K tr(eps)   (plastic flow is isochoric)
///          f_tr = |s_tr| - sqrt(2/3) (sigma_y + H alpha_n)
/// if f_tr <= 0: elastic, s = s_tr
/// else:    dgamma = f_tr / (2 mu + 2 H / 3),  n = s_tr / |s_tr|
///          s = s_tr - 2 mu dgamma n,  eps_p = eps_p,n + dgamma n,  alpha = alpha_n + sqrt(2/3) dgamma
/// ```
pub fn radial_return(m: &Material, old: &Point, eps: &[f64; 4]) -> Point {
    let (lambda, mu) = m.lame();
    let bulk = lambda + 2.0 * mu / 3.0;
    let tr = eps[0] + eps[1] + eps[2];
    let mean = tr / 3.0;
    let mut s = [0.0; 4];
    for k in 0..4 {
        let dev = if k < 3 { eps[k] - mean } else { eps[k] };
        s[k] = 2.0 * mu * (dev - old.plastic_strain[k]);
    }
    let norm = dot4(&s, &s).sqrt();
    let radius = (2.0f64 / 3.0).sqrt() * (m.yield_stress + m.hardening * old.alpha);
    let mut new = *old;
    let f = norm - radius;
    if f > 0.0 && norm > 0.0 {
        let dgamma = f / (2.0 * mu + 2.0 * m.hardening / 3.0);
        for k in 0..4 {
            let n = s[k] / norm;
            s[k] -= 2.0 * mu * dgamma * n;
            new.plastic_strain[k] += dgamma * n;
        }
        new.alpha += (2.0f64 / 3.0).sqrt() * dgamma;
    }
    let p = bulk * tr;
    new.stress = [s[0] + p, s[1] + p, s[2] + p, s[3]];
    new
}

/// Elastic strain energy density `1/2 sigma : C^-1 : sigma = 1/2 eps_e : C : eps_e` of a point
/// whose total strain is `eps`.
pub fn elastic_energy_density(m: &Material, point: &Point, eps: &[f64; 4]) -> f64 {
    let (lambda, mu) = m.lame();
    let mut ee = [0.0; 4];
    for k in 0..4 {
        ee[k] = eps[k] - point.plastic_strain[k];
    }
    let tr = ee[0] + ee[1] + ee[2];
    0.5 * (lambda * tr * tr + 2.0 * mu * dot4(&ee, &ee))
}

/// Geometry of one quadrilateral with one-point integration (Flanagan & Belytschko 1981, "A
/// uniform strain hexahedron and quadrilateral with orthogonal hourglass control", Int. J. Numer.
/// Meth. Eng. 17, 679-706: the mean gradient vectors and the hourglass shape vector).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct QuadGeometry {
    /// Area `A = ((x3 - x1)(y4 - y2) - (x4 - x2)(y3 - y1)) / 2` (counter-clockwise nodes).
    pub area: f64,
    /// Mean shape-function gradients `b_x,I = dN_I/dx`:
    /// `b_x = (y2 - y4, y3 - y1, y4 - y2, y1 - y3) / (2A)`.
    pub bx: [f64; 4],
    /// `b_y = (x4 - x2, x1 - x3, x2 - x4, x3 - x1) / (2A)`.
    pub by: [f64; 4],
    /// Hourglass shape vector `gamma = (h - (h.x) b_x - (h.y) b_y) / 4` with `h = (1, -1, 1, -1)`;
    /// it is orthogonal to every linear field (`gamma . 1 = gamma . x = gamma . y = 0`).
    pub gamma: [f64; 4],
}

impl QuadGeometry {
    /// The geometry of the quad with nodes `x` (counter-clockwise), or `None` when its area is not
    /// positive (an inverted or collapsed element).
    pub fn new(x: &[[f64; 2]; 4]) -> Option<Self> {
        let area = 0.5
            * ((x[2][0] - x[0][0]) * (x[3][1] - x[1][1])
                - (x[3][0] - x[1][0]) * (x[2][1] - x[0][1]));
        if !(area > 0.0 && area.is_finite()) {
            return None;
        }
        let s = 0.5 / area;
        let bx = [
            s * (x[1][1] - x[3][1]),
            s * (x[2][1] - x[0][1]),
            s * (x[3][1] - x[1][1]),
            s * (x[0][1] - x[2][1]),
        ];
        let by = [
            s * (x[3][0] - x[1][0]),
            s * (x[0][0] - x[2][0]),
            s * (x[1][0] - x[3][0]),
            s * (x[2][0] - x[0][0]),
        ];
        let h = [1.0, -1.0, 1.0, -1.0];
        let hx: f64 = (0..4).map(|i| h[i] * x[i][0]).sum();
        let hy: f64 = (0..4).map(|i| h[i] * x[i][1]).sum();
        let mut gamma = [0.0; 4];
        for i in 0..4 {
            gamma[i] = 0.25 * (h[i] - hx * bx[i] - hy * by[i]);
        }
        Some(QuadGeometry {
            area,
            bx,
            by,
            gamma,
        })
    }

    /// `lambda_max` of the 2x2 matrix `G G^T`, `G` the 2x4 matrix of gradient rows.
    fn gradient_norm2(&self) -> f64 {
        let a: f64 = self.bx.iter().map(|b| b * b).sum();
        let b: f64 = self.by.iter().map(|b| b * b).sum();
        let c: f64 = self.bx.iter().zip(&self.by).map(|(p, q)| p * q).sum();
        0.5 * (a + b) + (0.25 * (a - b) * (a - b) + c * c).sqrt()
    }

    /// `sum_I |grad N_I|^2`.
    fn gradient_sum2(&self) -> f64 {
        self.bx.iter().chain(&self.by).map(|b| b * b).sum()
    }

    /// The small strain `[xx, yy, zz, xy]` (tensor shear, `zz = 0`) of nodal displacements `u`.
    pub fn strain(&self, u: &[[f64; 2]; 4]) -> [f64; 4] {
        let mut e = [0.0; 4];
        for i in 0..4 {
            e[0] += self.bx[i] * u[i][0];
            e[1] += self.by[i] * u[i][1];
            e[3] += 0.5 * (self.by[i] * u[i][0] + self.bx[i] * u[i][1]);
        }
        e
    }
}

/// The billet: a `width x height` block of `nx x ny` quads, thickness `thickness` (plane strain),
/// its bottom face at height `gap` above the rigid floor `y = 0`.
#[derive(Debug, Clone)]
pub struct Billet {
    /// Elements along x and y.
    pub nx: usize,
    /// Elements along y.
    pub ny: usize,
    /// Undeformed node positions.
    pub nodes: Vec<[f64; 2]>,
    /// Element connectivity, counter-clockwise.
    pub elements: Vec<[usize; 4]>,
    /// The material.
    pub material: Material,
    /// Plane-strain thickness (m).
    pub thickness: f64,
    /// Hourglass coefficient `epsilon_hg` (see [`Billet::hourglass_stiffness`]).
    pub hourglass_coefficient: f64,
    /// Nodal penalty stiffness of the floor (N/m).
    pub contact_stiffness: f64,
    /// Penetration over which the penalty stiffness ramps up from zero to `contact_stiffness`
    /// (m; 0 for the plain penalty spring). See [`Billet::contact_force`].
    pub contact_smoothing: f64,
    /// Undeformed element geometry.
    geometry: Vec<QuadGeometry>,
    /// Material points of the last accepted step (one per element).
    accepted: Vec<Point>,
    /// Trial points of the last internal-force evaluation.
    trial: Vec<Point>,
    /// Plastic work `sum sigma : d eps_p * V` up to the last accepted step (J).
    plastic_work: f64,
    /// Internal-force evaluations so far.
    pub evaluations: u64,
    /// Accepted steps so far.
    pub accepted_steps: u64,
    /// Element characteristic lengths and wave speeds for the stable-step estimate.
    lengths: Vec<f64>,
    speeds: Vec<f64>,
}

impl Billet {
    /// A structured mesh of the billet. `contact_factor` sets the floor's penalty stiffness
    /// `k_c = contact_factor * E * t`.
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        width: f64,
        height: f64,
        thickness: f64,
        nx: usize,
        ny: usize,
        gap: f64,
        material: Material,
        hourglass_coefficient: f64,
        contact_factor: f64,
    ) -> Result<Self, ModelError> {
        if nx == 0 || ny == 0 || !(width > 0.0 && height > 0.0 && thickness > 0.0) {
            return Err(ModelError::failed(
                "the billet needs a positive size and mesh",
            ));
        }
        let mut nodes = Vec::with_capacity((nx + 1) * (ny + 1));
        for j in 0..=ny {
            for i in 0..=nx {
                nodes.push([
                    width * i as f64 / nx as f64,
                    gap + height * j as f64 / ny as f64,
                ]);
            }
        }
        let id = |i: usize, j: usize| j * (nx + 1) + i;
        let mut elements = Vec::with_capacity(nx * ny);
        for j in 0..ny {
            for i in 0..nx {
                elements.push([id(i, j), id(i + 1, j), id(i + 1, j + 1), id(i, j + 1)]);
            }
        }
        Self::from_mesh(
            nodes,
            elements,
            material,
            thickness,
            hourglass_coefficient,
            contact_factor * material.young * thickness,
        )
        .map(|mut b| {
            b.nx = nx;
            b.ny = ny;
            b
        })
    }

    /// A model on any mesh of counter-clockwise quads.
    pub fn from_mesh(
        nodes: Vec<[f64; 2]>,
        elements: Vec<[usize; 4]>,
        material: Material,
        thickness: f64,
        hourglass_coefficient: f64,
        contact_stiffness: f64,
    ) -> Result<Self, ModelError> {
        let mut geometry = Vec::with_capacity(elements.len());
        for (e, conn) in elements.iter().enumerate() {
            if conn.iter().any(|&n| n >= nodes.len()) {
                return Err(ModelError::failed(format!(
                    "element {e} names a missing node"
                )));
            }
            let x = conn.map(|n| nodes[n]);
            geometry.push(
                QuadGeometry::new(&x).ok_or_else(|| {
                    ModelError::failed(format!("element {e} has no positive area"))
                })?,
            );
        }
        let ne = elements.len();
        Ok(Billet {
            nx: 0,
            ny: 0,
            nodes,
            elements,
            material,
            thickness,
            hourglass_coefficient,
            contact_stiffness,
            contact_smoothing: 0.0,
            geometry,
            accepted: vec![Point::default(); ne],
            trial: vec![Point::default(); ne],
            plastic_work: 0.0,
            evaluations: 0,
            accepted_steps: 0,
            lengths: vec![0.0; ne],
            speeds: vec![0.0; ne],
        })
    }

    /// Hourglass stiffness of an element,
    /// `k_hg = epsilon_hg (lambda + 2 mu) t A sum_I |grad N_I|^2`: the scaling of Flanagan &
    /// Belytschko (1981) (modulus times thickness times `A b.b`), with our coefficient
    /// `epsilon_hg`. For a square element `A sum |grad N|^2 = 2`.
    pub fn hourglass_stiffness(&self, g: &QuadGeometry) -> f64 {
        let (l, m) = self.material.lame();
        self.hourglass_coefficient * (l + 2.0 * m) * self.thickness * g.area * g.gradient_sum2()
    }

    fn nodal(u: &[f64], conn: &[usize; 4]) -> [[f64; 2]; 4] {
        conn.map(|n| [u[2 * n], u[2 * n + 1]])
    }

    /// The material points of the last accepted step.
    pub fn points(&self) -> &[Point] {
        &self.accepted
    }

    /// Element geometry (undeformed).
    pub fn geometry(&self) -> &[QuadGeometry] {
        &self.geometry
    }

    /// Plastic work `sum sigma : d eps_p * V` up to the last accepted step (J); with linear
    /// hardening it includes the energy held by the hardening, `1/2 H alpha^2` per volume.
    pub fn plastic_work(&self) -> f64 {
        self.plastic_work
    }

    /// Elastic strain energy `sum 1/2 sigma : C^-1 : sigma * V` of the accepted state at `u` (J).
    pub fn elastic_energy(&self, u: &[f64]) -> f64 {
        let mut w = 0.0;
        for ((conn, g), p) in self.elements.iter().zip(&self.geometry).zip(&self.accepted) {
            let eps = g.strain(&Self::nodal(u, conn));
            w += elastic_energy_density(&self.material, p, &eps) * g.area * self.thickness;
        }
        w
    }

    /// Energy stored in the hourglass springs at `u`, `sum 1/2 k_hg (q_x^2 + q_y^2)` (J).
    pub fn hourglass_energy(&self, u: &[f64]) -> f64 {
        let mut w = 0.0;
        for (conn, g) in self.elements.iter().zip(&self.geometry) {
            let ue = Self::nodal(u, conn);
            let qx: f64 = (0..4).map(|i| g.gamma[i] * ue[i][0]).sum();
            let qy: f64 = (0..4).map(|i| g.gamma[i] * ue[i][1]).sum();
            w += 0.5 * self.hourglass_stiffness(g) * (qx * qx + qy * qy);
        }
        w
    }

    /// The floor's push on a node that penetrates by `p` (N, upward), and the energy stored in
    /// its spring (J). With a smoothing length `d > 0` the stiffness grows linearly from zero to
    /// `k_c` over the first `d` of penetration and is `k_c` beyond:
    ///
    /// ```text
    /// F(p) = k_c p^2 / (2 d)         phi(p) = k_c p^3 / (6 d)                 for 0 <= p <= d
    /// F(p) = k_c (p - d / 2)         phi(p) = k_c (p^2 / 2 - d p / 2 + d^2 / 6)  for p > d
    /// ```
    ///
    /// (a penalty law with a continuous stiffness, common practice). Its stiffness never exceeds
    /// `k_c`, so the stable-step bound is that of the plain spring. The ramp matters for the energy
    /// account: with the plain spring, whose force has a kink at `p = 0`, the step on which a node
    /// arrives or leaves books a work error of the order of `k_c p (v dt) / 2`.
    pub fn contact_force(&self, p: f64) -> (f64, f64) {
        let (k, d) = (self.contact_stiffness, self.contact_smoothing);
        if p <= 0.0 {
            (0.0, 0.0)
        } else if p <= d {
            (k * p * p / (2.0 * d), k * p * p * p / (6.0 * d))
        } else {
            (
                k * (p - 0.5 * d),
                k * (0.5 * p * p - 0.5 * d * p + d * d / 6.0),
            )
        }
    }

    /// Energy stored in the floor's penalty springs at `u` (J).
    pub fn contact_energy(&self, u: &[f64]) -> f64 {
        (0..self.nodes.len())
            .map(|n| self.contact_force(-(self.nodes[n][1] + u[2 * n + 1])).1)
            .sum()
    }

    /// Largest penetration of a node into the floor at `u` (m; 0 without contact).
    pub fn penetration(&self, u: &[f64]) -> f64 {
        (0..self.nodes.len())
            .map(|n| -(self.nodes[n][1] + u[2 * n + 1]))
            .fold(0.0, f64::max)
    }

    /// Number of nodes below the floor at `u`.
    pub fn nodes_in_contact(&self, u: &[f64]) -> usize {
        (0..self.nodes.len())
            .filter(|&n| self.nodes[n][1] + u[2 * n + 1] < 0.0)
            .count()
    }

    /// Total mass (kg).
    pub fn total_mass(&self) -> f64 {
        self.geometry.iter().map(|g| g.area).sum::<f64>() * self.thickness * self.material.density
    }

    /// The centre-of-mass velocity `sum m v / sum m` of velocities `v` with lumped masses `mass`.
    pub fn centre_velocity(mass: &[f64], v: &[f64]) -> [f64; 2] {
        let mut p = [0.0; 2];
        let mut m = 0.0;
        for (n, pair) in v.chunks_exact(2).enumerate() {
            p[0] += mass[2 * n] * pair[0];
            p[1] += mass[2 * n + 1] * pair[1];
            m += mass[2 * n];
        }
        [p[0] / m, p[1] / m]
    }

    /// Bound on the squared highest frequency of element `g` (one-point quad plus its hourglass
    /// springs) with a quarter of its mass at each node:
    ///
    /// ```text
    /// omega_e^2 <= (8 (lambda + mu) / rho) lambda_max(G G^T) + 4 k_hg |gamma|^2 / m_e
    /// ```
    ///
    /// Derived for this example from the Rayleigh quotient: the element's strain energy is
    /// `A t (lambda tr(eps)^2 + 2 mu eps:eps)`, at most `2 (lambda + mu) A t |grad u|^2`, and
    /// `|grad u|^2 <= lambda_max(G G^T) |u|^2` (exact for a square element, whose dilatation mode
    /// reaches the bound); the hourglass springs add at most `k_hg |gamma|^2 |u|^2`.
    fn omega2(&self, g: &QuadGeometry) -> f64 {
        let (l, m) = self.material.lame();
        let rho = self.material.density;
        let me = rho * g.area * self.thickness;
        let gamma2: f64 = g.gamma.iter().map(|x| x * x).sum();
        8.0 * (l + m) / rho * g.gradient_norm2() + 4.0 * self.hourglass_stiffness(g) * gamma2 / me
    }

    /// The smallest nodal mass (kg).
    fn min_nodal_mass(&self) -> f64 {
        let mut m = vec![0.0; 2 * self.nodes.len()];
        self.lumped_mass(&mut m);
        m.iter().step_by(2).fold(f64::INFINITY, |a, &b| a.min(b))
    }
}

impl Model for Billet {
    fn dofs(&self) -> usize {
        2 * self.nodes.len()
    }

    /// Lumped mass: a quarter of each element's mass `rho A t` to each of its nodes
    /// (Flanagan & Belytschko 1981).
    fn lumped_mass(&self, out: &mut [f64]) {
        out.fill(0.0);
        for (conn, g) in self.elements.iter().zip(&self.geometry) {
            let m = 0.25 * self.material.density * g.area * self.thickness;
            for &n in conn {
                out[2 * n] += m;
                out[2 * n + 1] += m;
            }
        }
    }

    /// `f_I = A t sigma grad N_I` with the stress of a radial return from the accepted state
    /// (trial values only; [`Model::accept_step`] makes them permanent).
    fn internal_force(
        &mut self,
        _t: f64,
        u: &[f64],
        _v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        self.evaluations += 1;
        out.fill(0.0);
        for (e, (conn, g)) in self.elements.iter().zip(&self.geometry).enumerate() {
            // Small strain on the undeformed geometry, but an element turned inside out is not a
            // state this model can describe.
            let x = conn.map(|n| [self.nodes[n][0] + u[2 * n], self.nodes[n][1] + u[2 * n + 1]]);
            if QuadGeometry::new(&x).is_none() {
                return Err(ModelError::failed(format!("element {e} is inverted")));
            }
            let eps = g.strain(&Self::nodal(u, conn));
            let p = radial_return(&self.material, &self.accepted[e], &eps);
            self.trial[e] = p;
            let s = p.stress;
            let at = g.area * self.thickness;
            for (i, &n) in conn.iter().enumerate() {
                out[2 * n] += at * (s[0] * g.bx[i] + s[3] * g.by[i]);
                out[2 * n + 1] += at * (s[3] * g.bx[i] + s[1] * g.by[i]);
            }
        }
        Ok(())
    }

    fn extra_force_names(&self) -> Vec<String> {
        vec!["hourglass".into(), "contact".into()]
    }

    /// 0: hourglass force `f_iI = k_hg gamma_I q_i`, `q_i = sum_J gamma_J u_iJ` (stiffness form
    /// of Flanagan & Belytschko 1981); 1: floor contact, `f_y = -k_c * penetration` at each node
    /// below `y = 0` (a nodal penalty spring, common practice).
    fn extra_force(
        &mut self,
        index: usize,
        _t: f64,
        u: &[f64],
        _v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        out.fill(0.0);
        match index {
            0 => {
                for (conn, g) in self.elements.iter().zip(&self.geometry) {
                    let ue = Self::nodal(u, conn);
                    let qx: f64 = (0..4).map(|i| g.gamma[i] * ue[i][0]).sum();
                    let qy: f64 = (0..4).map(|i| g.gamma[i] * ue[i][1]).sum();
                    let k = self.hourglass_stiffness(g);
                    for (i, &n) in conn.iter().enumerate() {
                        out[2 * n] += k * g.gamma[i] * qx;
                        out[2 * n + 1] += k * g.gamma[i] * qy;
                    }
                }
                Ok(())
            }
            1 => {
                for (n, x) in self.nodes.iter().enumerate() {
                    let y = x[1] + u[2 * n + 1];
                    if y < 0.0 {
                        // Resisting force (the ledger's sign): negative pushes the node up.
                        out[2 * n + 1] = -self.contact_force(-y).0;
                    }
                }
                Ok(())
            }
            _ => Err(ModelError::NotProvided("extra_force")),
        }
    }

    /// `min_e L_e / c` with `c` the dilatational wave speed and `L_e = 2 c / omega`, where
    /// `omega^2 = omega_e^2 + k_c / m_min`: the element bound (see `omega2`) in both the undeformed
    /// and the current geometry (the larger is taken), plus the floor spring on the lightest node
    /// (the Rayleigh quotient of `K + K_c` is at most that of `K` plus `max_n k_c / m_n`).
    fn element_stable_step(&mut self, _t: f64, u: &[f64]) -> Option<f64> {
        let c = self.material.wave_speed();
        let contact = self.contact_stiffness / self.min_nodal_mass();
        for e in 0..self.elements.len() {
            let conn = self.elements[e];
            let x = conn.map(|n| [self.nodes[n][0] + u[2 * n], self.nodes[n][1] + u[2 * n + 1]]);
            let now = QuadGeometry::new(&x).map_or(f64::INFINITY, |g| self.omega2(&g));
            let w2 = self.omega2(&self.geometry[e]).max(now) + contact;
            self.lengths[e] = 2.0 * c / w2.sqrt();
            self.speeds[e] = c;
        }
        element_stable_step(&self.lengths, &self.speeds).ok()
    }

    fn hints(&self) -> Hints<'_> {
        Hints::default().unloaded()
    }

    /// Makes the trial points of the last internal-force evaluation permanent and adds their
    /// plastic work `(sigma_n + sigma_{n+1}) / 2 : (eps_p,n+1 - eps_p,n) V`: the trapezoidal rule,
    /// as the energy ledger integrates the internal work. Since the elastic energy changes by
    /// exactly `(sigma_n + sigma_{n+1}) / 2 : d eps_e V` (linear elasticity), elastic energy plus
    /// plastic work then equals the ledger's internal work up to rounding, provided that the
    /// accepted points belong to the force of every accepted step: the check in the test.
    fn accept_step(&mut self, _t: f64) {
        self.accepted_steps += 1;
        for ((old, new), g) in self
            .accepted
            .iter_mut()
            .zip(&self.trial)
            .zip(&self.geometry)
        {
            let mut d = [0.0; 4];
            let mut mean = [0.0; 4];
            for k in 0..4 {
                d[k] = new.plastic_strain[k] - old.plastic_strain[k];
                mean[k] = 0.5 * (old.stress[k] + new.stress[k]);
            }
            self.plastic_work += dot4(&mean, &d) * g.area * self.thickness;
            *old = *new;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn steel() -> Material {
        Material {
            young: 200e9,
            poisson: 0.3,
            density: 7850.0,
            yield_stress: 250e6,
            hardening: 1e9,
        }
    }

    /// A 3 x 3 patch with distorted interior nodes.
    fn patch() -> Billet {
        let mut nodes = Vec::new();
        for j in 0..4 {
            for i in 0..4 {
                let (mut x, mut y) = (0.01 * i as f64, 0.01 * j as f64);
                if (1..3).contains(&i) && (1..3).contains(&j) {
                    x += 0.002 * ((i * 7 + j * 3) % 5) as f64 / 4.0 - 0.001;
                    y += 0.002 * ((i * 3 + j * 5) % 7) as f64 / 6.0 - 0.001;
                }
                nodes.push([x, y + 0.001]);
            }
        }
        let mut elements = Vec::new();
        for j in 0..3 {
            for i in 0..3 {
                let n = |i: usize, j: usize| j * 4 + i;
                elements.push([n(i, j), n(i + 1, j), n(i + 1, j + 1), n(i, j + 1)]);
            }
        }
        Billet::from_mesh(nodes, elements, steel(), 1.0, 0.1, 200e9).unwrap()
    }

    /// Patch test (common practice): a linear displacement field gives every element the exact
    /// uniform strain and stress, no hourglass force, and no force at the interior nodes.
    #[test]
    fn patch_test_uniform_strain() {
        let mut b = patch();
        let (exx, eyy, gxy) = (1e-4, -2e-4, 3e-4);
        let u: Vec<f64> = b
            .nodes
            .iter()
            .flat_map(|x| [exx * x[0] + 0.5 * gxy * x[1], eyy * x[1] + 0.5 * gxy * x[0]])
            .collect();
        let n = b.dofs();
        let mut f = vec![0.0; n];
        b.internal_force(0.0, &u, &vec![0.0; n], &mut f).unwrap();
        let (l, m) = steel().lame();
        let sxx = (l + 2.0 * m) * exx + l * eyy;
        let syy = l * exx + (l + 2.0 * m) * eyy;
        let szz = l * (exx + eyy);
        let sxy = m * gxy;
        for p in &b.trial {
            let want = [sxx, syy, szz, sxy];
            for k in 0..4 {
                assert!((p.stress[k] - want[k]).abs() < 1e-9 * sxx.abs(), "{p:?}");
            }
        }
        // Interior nodes 5, 6, 9, 10 carry no net force.
        let scale = sxx.abs() * 0.01;
        for node in [5, 6, 9, 10] {
            assert!(f[2 * node].abs() < 1e-9 * scale && f[2 * node + 1].abs() < 1e-9 * scale);
        }
        let mut h = vec![0.0; n];
        b.extra_force(0, 0.0, &u, &vec![0.0; n], &mut h).unwrap();
        let k = b.hourglass_stiffness(&b.geometry[4]);
        assert!(h.iter().all(|x| x.abs() < 1e-12 * k * 1e-4 * 0.01), "{h:?}");
        // An hourglass mode is resisted.
        let mut uh = vec![0.0; n];
        for (i, s) in [(0usize, 1.0), (1, -1.0), (5, 1.0), (4, -1.0)] {
            uh[2 * i] = 1e-6 * s;
        }
        b.extra_force(0, 0.0, &uh, &vec![0.0; n], &mut h).unwrap();
        assert!(h.iter().any(|x| x.abs() > 1e-3 * k * 1e-6));
    }

    /// Rigid-body motion (translation plus an infinitesimal rotation) gives no force.
    #[test]
    fn rigid_body_motion_gives_no_force() {
        let mut b = patch();
        let w = 1e-5;
        let u: Vec<f64> = b
            .nodes
            .iter()
            .flat_map(|x| [0.3 - w * x[1], -0.2 + w * x[0]])
            .collect();
        let n = b.dofs();
        let mut f = vec![0.0; n];
        b.internal_force(0.0, &u, &vec![0.0; n], &mut f).unwrap();
        // Force scale of a strain w: E w times a side.
        let scale = 200e9 * w * 0.01;
        assert!(f.iter().all(|x| x.abs() < 1e-9 * scale), "{f:?}");
        b.extra_force(0, 0.0, &u, &vec![0.0; n], &mut f).unwrap();
        assert!(f.iter().all(|x| x.abs() < 1e-9 * scale), "{f:?}");
    }

    /// Radial return along a uniaxial strain path (`eps_yy = e`, all else zero) against the closed
    /// form, derived for this test: yield at `e_y = sigma_y / (2 mu)`, then
    /// `q = sigma_y + (2H/3)(2 mu e - sigma_y) / (2 mu + 2H/3)`, `sigma_yy = K e + 2q/3`,
    /// `sigma_xx = K e - q/3`, `alpha = sqrt(2/3) sqrt(2/3) (2 mu e - sigma_y) / (2 mu + 2H/3)`.
    #[test]
    fn radial_return_matches_uniaxial_strain_closed_form() {
        let m = steel();
        let (l, mu) = m.lame();
        let k = l + 2.0 * mu / 3.0;
        let h = m.hardening;
        let mut p = Point::default();
        let steps = 400;
        let e_max = 0.01;
        let mut yielded = 0;
        for s in 1..=steps {
            let e = e_max * s as f64 / steps as f64;
            p = radial_return(&m, &p, &[0.0, e, 0.0, 0.0]);
            let (q, alpha) = if 2.0 * mu * e <= m.yield_stress {
                (2.0 * mu * e, 0.0)
            } else {
                yielded += 1;
                let x = (2.0 * mu * e - m.yield_stress) / (2.0 * mu + 2.0 * h / 3.0);
                (m.yield_stress + 2.0 * h / 3.0 * x, 2.0 / 3.0 * x)
            };
            let want = [k * e - q / 3.0, k * e + 2.0 * q / 3.0, k * e - q / 3.0, 0.0];
            for c in 0..4 {
                assert!(
                    (p.stress[c] - want[c]).abs() < 1e-9 * want[1].abs(),
                    "e = {e}: {:?} vs {want:?}",
                    p.stress
                );
            }
            assert!((p.alpha - alpha).abs() < 1e-12, "{} vs {alpha}", p.alpha);
        }
        // The path goes well into the plastic range.
        assert!(yielded > steps / 2);
        // An elastic material never yields.
        let mut elastic = m;
        elastic.yield_stress = f64::INFINITY;
        let pe = radial_return(&elastic, &Point::default(), &[0.0, e_max, 0.0, 0.0]);
        assert_eq!(pe.alpha, 0.0);
        assert!((pe.stress[1] - (l + 2.0 * mu) * e_max).abs() < 1e-6);
    }

    /// A re-evaluation with the same displacement gives the same force (trial values are computed
    /// from the accepted state), and `accept_step` makes them permanent.
    #[test]
    fn trial_evaluations_repeat_until_the_step_is_accepted() {
        let mut b = patch();
        let n = b.dofs();
        let u: Vec<f64> = b.nodes.iter().flat_map(|x| [0.0, -0.02 * x[1]]).collect();
        let (mut f1, mut f2) = (vec![0.0; n], vec![0.0; n]);
        b.internal_force(0.0, &u, &vec![0.0; n], &mut f1).unwrap();
        b.internal_force(0.0, &u, &vec![0.0; n], &mut f2).unwrap();
        assert_eq!(f1, f2);
        assert!(b.trial.iter().all(|p| p.alpha > 0.0));
        assert!(b.accepted.iter().all(|p| p.alpha == 0.0));
        b.accept_step(1.0);
        assert!(b.plastic_work() > 0.0);
        assert_eq!(b.accepted, b.trial);
    }

    /// The smoothed contact law: the force is the derivative of the stored energy (central
    /// differences, 1e-6 relative), continuous at `p = d` with a continuous slope, and reaches
    /// the full stiffness beyond `d`.
    #[test]
    fn contact_force_is_the_energy_gradient() {
        let mut b = patch();
        b.contact_smoothing = 10e-6;
        let k = b.contact_stiffness;
        assert_eq!(b.contact_force(-1e-6), (0.0, 0.0));
        for p in [1e-7, 3e-6, 9.9e-6, 10e-6, 10.1e-6, 4e-5] {
            let h = 1e-4 * p;
            let de = (b.contact_force(p + h).1 - b.contact_force(p - h).1) / (2.0 * h);
            let f = b.contact_force(p).0;
            assert!(
                (de - f).abs() <= 1e-6 * f.max(k * 1e-9),
                "p = {p}: {de} vs {f}"
            );
        }
        let d = 10e-6;
        let (below, above) = (
            b.contact_force(d * (1.0 - 1e-9)),
            b.contact_force(d * (1.0 + 1e-9)),
        );
        assert!((below.0 - above.0).abs() < 1e-6 * below.0);
        let slope = (b.contact_force(3e-5).0 - b.contact_force(2e-5).0) / 1e-5;
        assert!((slope - k).abs() < 1e-6 * k);
    }

    /// The element stable step never exceeds the critical step `2 / omega_max` of the assembled
    /// mesh, computed by stepgauge's Lanczos estimate on finite differences of the internal force
    /// (distorted patch, no hourglass or contact springs, which that estimate does not see), and
    /// is not far below it (above 70 %; measured 80 %: an element bound ignores that neighbours
    /// share the nodal masses).
    #[test]
    fn element_step_is_below_the_assembled_critical_step() {
        use stepgauge::explicit::stable_step::{StableStepMethod, StableStepOptions, estimate};
        let mut b = patch();
        b.material.yield_stress = f64::INFINITY;
        b.hourglass_coefficient = 0.0;
        b.contact_stiffness = 0.0;
        let n = b.dofs();
        let state = stepgauge::State::at_rest(n, 0.0);
        let elements = b.element_stable_step(0.0, &state.u).unwrap();
        let mut options = StableStepOptions::default();
        options.prefer_elements = false;
        let s = estimate(
            &mut b,
            &state,
            &options,
            &stepgauge::linalg::Execution::default(),
        )
        .unwrap();
        assert_eq!(s.method, StableStepMethod::FiniteDifferenceLanczos);
        assert!(
            elements <= s.dt_critical * (1.0 + 1e-6),
            "{elements} vs {}",
            s.dt_critical
        );
        assert!(
            elements > 0.7 * s.dt_critical,
            "{elements} vs {}",
            s.dt_critical
        );
    }

    /// The element bound is the exact highest frequency of a free square element (its
    /// dilatation mode), checked against that mode's Rayleigh quotient `8 (lambda + mu) / (rho h^2)`.
    #[test]
    fn element_bound_is_sharp_for_a_square() {
        let h = 0.005;
        let nodes = vec![[0.0, 1.0], [h, 1.0], [h, 1.0 + h], [0.0, 1.0 + h]];
        let mut elastic = steel();
        elastic.yield_stress = f64::INFINITY;
        let mut b = Billet::from_mesh(nodes, vec![[0, 1, 2, 3]], elastic, 1.0, 0.0, 0.0).unwrap();
        let (l, mu) = steel().lame();
        let w2 = 8.0 * (l + mu) / (7850.0 * h * h);
        let dt = b.element_stable_step(0.0, &[0.0; 8]).unwrap();
        assert!((dt - 2.0 / w2.sqrt()).abs() < 1e-12 * dt);
        // The dilatation mode u_I = grad N_I reaches it: K u = omega^2 M u.
        let g = b.geometry[0];
        let u: Vec<f64> = (0..4).flat_map(|i| [g.bx[i], g.by[i]]).collect();
        let mut f = vec![0.0; 8];
        b.internal_force(0.0, &u, &[0.0; 8], &mut f).unwrap();
        let m = 0.25 * 7850.0 * h * h;
        for k in 0..8 {
            assert!((f[k] - w2 * m * u[k]).abs() < 1e-9 * (w2 * m * u[k]).abs());
        }
    }
}

/// The scenario of the example (all values invented for it).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Scenario {
    /// Billet width (m).
    pub width: f64,
    /// Billet height (m).
    pub height: f64,
    /// Elements along x.
    pub nx: usize,
    /// Elements along y.
    pub ny: usize,
    /// Initial gap between the billet and the floor (m).
    pub gap: f64,
    /// Impact speed (m/s), downward.
    pub speed: f64,
    /// Material.
    pub material: Material,
    /// Hourglass coefficient.
    pub hourglass: f64,
    /// Penalty stiffness of the floor in units of `E t`.
    pub contact_factor: f64,
    /// Smoothing length of the contact law (m).
    pub contact_smoothing: f64,
    /// Fraction of the stable step used.
    pub safety: f64,
    /// Simulated time after first contact (s).
    pub after_contact: f64,
}

impl Scenario {
    /// The steel billet of the example: 40 mm x 20 mm, 20 m/s, `nx x ny` elements; `plastic =
    /// false` makes the yield stress infinite.
    pub fn steel_billet(nx: usize, ny: usize, plastic: bool) -> Self {
        let material = Material {
            young: 200e9,
            poisson: 0.3,
            density: 7850.0,
            yield_stress: if plastic { 250e6 } else { f64::INFINITY },
            hardening: 1e9,
        };
        Scenario {
            width: 0.040,
            height: 0.020,
            nx,
            ny,
            gap: 0.0002,
            speed: 20.0,
            material,
            // Low end of the common 0.05-0.15 range (from memory): it keeps the hourglass energy
            // at about 1 % of the internal energy on the coarse mesh and adds only 3.5 % to the
            // element's omega^2 bound (2 eps_hg c^2 / h^2 against 5.7 c^2 / h^2 for a square).
            hourglass: 0.1,
            // k_c = E t: the stiffness scale of one element (a square plane-strain element under
            // uniform compression has a stiffness of the order of E t). It keeps penetrations at
            // about 0.5 % of the coarse element size at 20 m/s, and adds k_c / m_node = 4 E / (rho
            // h^2) to omega^2 at a corner node against 8 (lambda + mu) / (rho h^2) = 7.7 E /
            // (rho h^2) of the element, so it lowers the stable step by about 20 %. A stiffer
            // floor (10 E t, tried) excites the mesh's highest modes more: the energy balance and
            // the elastic rebound get worse, not better, at a 2.5 times smaller step.
            contact_factor: 1.0,
            // About the travel of one step at 20 m/s on the coarse mesh.
            contact_smoothing: 10e-6,
            // The balance error of the central-difference ledger grows like (omega dt)^2 in the
            // energy held by the highest modes, which an impact excites: 0.6 keeps the coarse
            // elastic run under 1 % (0.9: 1.5 %).
            safety: 0.6,
            // About six transits of a dilatational wave across the height (2 H / c = 6.8 us is
            // the contact time of a one-dimensional elastic bar): contact, rebound, free flight.
            after_contact: 40e-6,
        }
    }
}

impl Scenario {
    /// A slender elastic check case: a 10 mm x 40 mm steel rod landing on its end at 2 m/s
    /// (plasticity on, but the impact stress stays far below yield), `nx x ny` elements.
    pub fn steel_rod(nx: usize, ny: usize) -> Self {
        let mut s = Scenario::steel_billet(nx, ny, true);
        s.width = 0.010;
        s.height = 0.040;
        s.speed = 2.0;
        s.gap = 0.00002;
        // About six transits of the rod's length.
        s.after_contact = 80e-6;
        s
    }
}

/// One row of the energy history.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Sample {
    /// Time (s).
    pub t: f64,
    /// Kinetic energy (J).
    pub kinetic: f64,
    /// Internal energy from the ledger: work against the element stresses (J).
    pub internal: f64,
    /// Elastic strain energy from the stress state (J).
    pub elastic: f64,
    /// Plastic work (J).
    pub plastic: f64,
    /// Ledger work against the hourglass forces (J).
    pub hourglass: f64,
    /// Ledger work against the contact forces (J).
    pub contact: f64,
    /// External work (J, zero here: no applied load, no gravity).
    pub external: f64,
    /// Energy balance error relative to the largest term.
    pub balance: f64,
    /// Centre-of-mass velocity, y (m/s).
    pub vy: f64,
    /// Total momentum `sum m v` (kg m/s, for the 1 m thickness), x and y.
    pub momentum: [f64; 2],
    /// Nodes below the floor.
    pub in_contact: usize,
    /// Largest penetration of a node into the floor (m).
    pub penetration: f64,
    /// Step size used to reach `t` (s).
    pub dt: f64,
}

/// Result of [`simulate`].
#[derive(Debug, Clone)]
pub struct Outcome {
    /// The model after the run.
    pub billet: Billet,
    /// One sample per step (the first is the start).
    pub samples: Vec<Sample>,
    /// Displacement snapshots `(label, t, u)`: before contact, at maximum compression, at the end.
    pub snapshots: Vec<(String, f64, Vec<f64>)>,
    /// Steps taken.
    pub steps: u64,
    /// Smallest and largest step (s), the final step that lands on the end time left out.
    pub dt_range: (f64, f64),
}

/// Runs the scenario with the central-difference integrator: the stable step is re-estimated from
/// the elements before every step (`StepControl::Auto` with `reestimate_every: 1` does the same
/// inside `run`; the loop is written out here to sample the model's own energy split each step).
pub fn simulate(s: &Scenario) -> Result<Outcome, stepgauge::Error> {
    use stepgauge::State;
    use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions};
    let mut billet = Billet::new(
        s.width,
        s.height,
        1.0,
        s.nx,
        s.ny,
        s.gap,
        s.material,
        s.hourglass,
        s.contact_factor,
    )
    .map_err(|source| stepgauge::Error::Model {
        step: 0,
        t: 0.0,
        source,
    })?;
    billet.contact_smoothing = s.contact_smoothing;
    let n = billet.dofs();
    let mut state = State::at_rest(n, 0.0);
    for k in 0..n / 2 {
        state.v[2 * k + 1] = -s.speed;
    }
    let mut cd =
        CentralDifference::new(&mut billet, &mut state, CentralDifferenceOptions::default())?;
    let mass = cd.lumped_mass().to_vec();
    let t_end = s.gap / s.speed + s.after_contact;
    let sample = |b: &Billet, st: &State, cd: &CentralDifference, dt: f64| {
        let l = cd.energy();
        let mut p = [0.0; 2];
        for k in 0..n / 2 {
            p[0] += mass[2 * k] * st.v[2 * k];
            p[1] += mass[2 * k + 1] * st.v[2 * k + 1];
        }
        Sample {
            t: st.t,
            kinetic: l.kinetic,
            internal: l.internal(),
            elastic: b.elastic_energy(&st.u),
            plastic: b.plastic_work(),
            hourglass: l.extra("hourglass").unwrap_or(0.0),
            contact: l.extra("contact").unwrap_or(0.0),
            external: l.external_work,
            balance: l.relative_balance_error(),
            vy: Billet::centre_velocity(&mass, &st.v)[1],
            momentum: p,
            in_contact: b.nodes_in_contact(&st.u),
            penetration: b.penetration(&st.u),
            dt,
        }
    };
    let mut samples = vec![sample(&billet, &state, &cd, 0.0)];
    let mut snapshots = Vec::new();
    let mut steps = 0u64;
    let mut dt_range = (f64::INFINITY, 0.0f64);
    let mut touched = false;
    let mut turned = false;
    let mut previous_u = state.u.clone();
    while state.t < t_end {
        cd.update_stable_step(&mut billet, &state)?;
        let limit = cd.stable_limit().unwrap_or(f64::NAN);
        let mut dt = s.safety * limit;
        let last = t_end - state.t <= dt;
        if last {
            dt = t_end - state.t;
        }
        cd.step(&mut billet, &mut state, dt)?;
        steps += 1;
        if !last {
            // The range of the stable steps (not of the shortened landing step).
            dt_range = (dt_range.0.min(dt), dt_range.1.max(dt));
        }
        let row = sample(&billet, &state, &cd, dt);
        if !touched && row.in_contact > 0 {
            touched = true;
            snapshots.push((
                "before contact".to_string(),
                samples.last().map_or(0.0, |r| r.t),
                previous_u.clone(),
            ));
        }
        // Maximum compression: the centre of mass stops moving down.
        if touched && !turned && row.vy >= 0.0 {
            turned = true;
            snapshots.push(("maximum compression".to_string(), state.t, state.u.clone()));
        }
        previous_u.copy_from_slice(&state.u);
        samples.push(row);
    }
    snapshots.push(("end".to_string(), state.t, state.u.clone()));
    Ok(Outcome {
        billet,
        samples,
        snapshots,
        steps,
        dt_range,
    })
}
