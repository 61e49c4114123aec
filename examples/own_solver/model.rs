//! The scenario of the `own_solver` example: a tensioned membrane strip under a pressure
//! pulse, as a stepgauge `LinearModel`. No I/O here, so that `tests/example_own_solver.rs` can
//! include this file with `#[path]`.
//!
//! All dimensions, materials and the load are invented for this example: a strip 6 m long and
//! 0.6 m wide, clamped on its whole edge, pre-tensioned to 2 kN/m in both directions, 1.2 kg/m^2;
//! a pressure of 200 Pa acts as a half-sine pulse of 20 ms on a 0.6 m x 0.6 m patch (the whole
//! width) centred 1 m from the left end. The out-of-plane deflection `w` obeys
//! `rho_s w_tt = T (w_xx + w_yy) + p(x, y, t)` (membrane theory, common practice), discretised
//! with bilinear four-node elements: consistent mass and stiffness by 2 x 2 Gauss quadrature,
//! pressure lumped a quarter of each element's resultant to each node. Only the interior nodes
//! are unknowns (the clamped edge has `w = 0`). Rayleigh damping gives 2 % of critical at the
//! first mode and at five times its frequency.
//!
//! The nodes are numbered along the long side first, so that the natural numbering has a
//! half-bandwidth of about the number of nodes along the strip; the example's solver reorders
//! them (reverse Cuthill-McKee) to a band of about the number across.

use sprs::TriMat;
use stepgauge::model::{LinearModel, Load, TimeFunction};

/// The invented scenario.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Strip {
    /// Length along x (m).
    pub length: f64,
    /// Width along y (m).
    pub width: f64,
    /// Elements along x.
    pub nx: usize,
    /// Elements along y.
    pub ny: usize,
    /// Membrane tension (N/m).
    pub tension: f64,
    /// Mass per unit area (kg/m^2).
    pub areal_density: f64,
    /// Peak pressure of the pulse (Pa).
    pub pressure: f64,
    /// Duration of the half-sine pulse (s).
    pub pulse: f64,
    /// Centre of the loaded patch along x (m); the patch spans the whole width.
    pub patch_centre: f64,
    /// Length of the loaded patch along x (m).
    pub patch_length: f64,
    /// Damping ratio at the first mode and at five times its frequency.
    pub damping_ratio: f64,
}

impl Strip {
    /// The demo mesh: 240 x 24 elements (25 mm squares), 5,497 unknowns.
    pub fn demo() -> Self {
        Strip {
            length: 6.0,
            width: 0.6,
            nx: 240,
            ny: 24,
            tension: 2000.0,
            areal_density: 1.2,
            pressure: 200.0,
            pulse: 0.02,
            patch_centre: 1.0,
            patch_length: 0.6,
            damping_ratio: 0.02,
        }
    }

    /// The coarse mesh used in CI and in the test: 120 x 12 elements (50 mm squares), 1,309
    /// unknowns.
    pub fn coarse() -> Self {
        Strip {
            nx: 120,
            ny: 12,
            ..Self::demo()
        }
    }

    /// Number of unknowns (interior nodes).
    pub fn dofs(&self) -> usize {
        (self.nx - 1) * (self.ny - 1)
    }

    /// The unknown of interior node `(ix, iy)` (1 <= ix < nx, 1 <= iy < ny): x runs fastest.
    pub fn dof(&self, ix: usize, iy: usize) -> Option<usize> {
        (ix >= 1 && ix < self.nx && iy >= 1 && iy < self.ny)
            .then(|| (iy - 1) * (self.nx - 1) + (ix - 1))
    }

    /// Transverse wave speed `sqrt(T / rho_s)` (m/s).
    pub fn wave_speed(&self) -> f64 {
        (self.tension / self.areal_density).sqrt()
    }

    /// First natural circular frequency of the clamped rectangle,
    /// `c pi sqrt(1/L^2 + 1/W^2)` (membrane theory, common practice).
    pub fn first_frequency(&self) -> f64 {
        self.wave_speed()
            * std::f64::consts::PI
            * (self.length.powi(-2) + self.width.powi(-2)).sqrt()
    }

    /// Rayleigh coefficients `(a0, a1)` for the damping ratio at `omega_1` and `5 omega_1`:
    /// `a0 = 2 xi w1 w2 / (w1 + w2)`, `a1 = 2 xi / (w1 + w2)` (common practice).
    pub fn rayleigh(&self) -> (f64, f64) {
        let (w1, w2) = (self.first_frequency(), 5.0 * self.first_frequency());
        let xi = self.damping_ratio;
        (2.0 * xi * w1 * w2 / (w1 + w2), 2.0 * xi / (w1 + w2))
    }

    /// The element matrices of a bilinear rectangle `hx x hy` (nodes counter-clockwise from the
    /// lower left), by 2 x 2 Gauss quadrature: stiffness `T int grad N_a . grad N_b` and mass
    /// `rho_s int N_a N_b`.
    fn element(&self, hx: f64, hy: f64) -> ([[f64; 4]; 4], [[f64; 4]; 4]) {
        let corners = [(-1.0, -1.0), (1.0, -1.0), (1.0, 1.0), (-1.0, 1.0)];
        let g = 1.0 / 3f64.sqrt();
        let jac = hx * hy / 4.0;
        let (mut k, mut m) = ([[0.0; 4]; 4], [[0.0; 4]; 4]);
        for (xi, eta) in [(-g, -g), (g, -g), (g, g), (-g, g)] {
            let n: Vec<f64> = corners
                .iter()
                .map(|(a, b)| 0.25 * (1.0 + a * xi) * (1.0 + b * eta))
                .collect();
            let dx: Vec<f64> = corners
                .iter()
                .map(|(a, b)| 0.25 * a * (1.0 + b * eta) * 2.0 / hx)
                .collect();
            let dy: Vec<f64> = corners
                .iter()
                .map(|(a, b)| 0.25 * b * (1.0 + a * xi) * 2.0 / hy)
                .collect();
            for p in 0..4 {
                for q in 0..4 {
                    k[p][q] += self.tension * (dx[p] * dx[q] + dy[p] * dy[q]) * jac;
                    m[p][q] += self.areal_density * n[p] * n[q] * jac;
                }
            }
        }
        (k, m)
    }

    /// The nodal load pattern for a unit pressure on the patch: a quarter of each loaded
    /// element's area on each of its interior nodes.
    pub fn load_pattern(&self) -> Vec<f64> {
        let (hx, hy) = (self.length / self.nx as f64, self.width / self.ny as f64);
        let mut f = vec![0.0; self.dofs()];
        for ex in 0..self.nx {
            let xc = (ex as f64 + 0.5) * hx;
            if (xc - self.patch_centre).abs() > 0.5 * self.patch_length {
                continue;
            }
            for ey in 0..self.ny {
                for (ix, iy) in [(ex, ey), (ex + 1, ey), (ex + 1, ey + 1), (ex, ey + 1)] {
                    if let Some(d) = self.dof(ix, iy) {
                        f[d] += 0.25 * hx * hy;
                    }
                }
            }
        }
        f
    }

    /// The linear model `M a + C v + K u = p(t) f` of the strip.
    ///
    /// # Errors
    /// From [`LinearModel`]'s constructors (none for a valid strip).
    pub fn model(&self) -> stepgauge::Result<LinearModel> {
        let n = self.dofs();
        let (hx, hy) = (self.length / self.nx as f64, self.width / self.ny as f64);
        let (ke, me) = self.element(hx, hy);
        let (mut k, mut m) = (TriMat::new((n, n)), TriMat::new((n, n)));
        for ex in 0..self.nx {
            for ey in 0..self.ny {
                let nodes = [(ex, ey), (ex + 1, ey), (ex + 1, ey + 1), (ex, ey + 1)];
                for (p, &(ix, iy)) in nodes.iter().enumerate() {
                    let Some(r) = self.dof(ix, iy) else { continue };
                    for (q, &(jx, jy)) in nodes.iter().enumerate() {
                        if let Some(c) = self.dof(jx, jy) {
                            k.add_triplet(r, c, ke[p][q]);
                            m.add_triplet(r, c, me[p][q]);
                        }
                    }
                }
            }
        }
        let (a0, a1) = self.rayleigh();
        let (p0, pulse) = (self.pressure, self.pulse);
        let factor = TimeFunction::Function(std::sync::Arc::new(move |t: f64| {
            if (0.0..=pulse).contains(&t) {
                p0 * (std::f64::consts::PI * t / pulse).sin()
            } else {
                0.0
            }
        }));
        LinearModel::new(&m.to_csr(), &k.to_csr())?
            .with_rayleigh(a0, a1)?
            .with_load(Load::Pattern {
                pattern: self.load_pattern(),
                factor,
            })
    }
}
