//! The scenario of the `truss` example: a plane Warren truss of geometrically nonlinear bars
//! (Green strain, Saint Venant-Kirchhoff material), pinned at one end and on a roller at the
//! other, whose bottom-chord nodes carry a load ramped from zero. No I/O here, so that
//! `tests/example_truss.rs` can include this file with `#[path]`.
//!
//! All dimensions, materials and loads are invented for this example: panels 1.1 m long, 0.9 m
//! deep, steel bars (E = 210 GPa, A = 10 cm^2, 7850 kg/m^3, mass lumped half to each end).
//!
//! # The bar (common practice; e.g. Crisfield 1991, *Non-linear Finite Element Analysis of Solids
//! and Structures*, vol. 1, ch. 3, from memory)
//!
//! With `d` the current and `d0` the initial end-to-end vector and `L0 = |d0|`, the Green strain
//! is `e = (d . d - L0^2) / (2 L0^2)` and the second Piola-Kirchhoff stress `S = E e`. The end
//! forces are `-/+ (A S / L0) d` and the tangent block is
//! `(E A / L0) (d d^T / L0^2) + (A S / L0) I`, with signs `[[K, -K], [-K, K]]`.
//!
//! The strain formula is kept in its cancellation-prone form on purpose, with `L0` stored from
//! `hypot`: at rest `d . d - L0^2` is a rounding error, not zero, so the undeformed truss carries a
//! residual force of some 1e-8 N. Users' element loops look like this; the integrators must cope.

use stepgauge::ModelError;
use stepgauge::linalg::{CsrMatrix, ElementScatter};
use stepgauge::model::{Constraints, Model, Tangent};

/// The invented truss and its ramped load.
#[derive(Debug, Clone)]
pub struct Truss {
    /// Node coordinates (m).
    pub nodes: Vec<[f64; 2]>,
    /// Bars as node pairs.
    pub bars: Vec<[usize; 2]>,
    /// Initial bar lengths (m), from `hypot`.
    pub lengths: Vec<f64>,
    /// Axial stiffness E A (N).
    pub ea: f64,
    /// Lumped mass per DOF (kg).
    pub mass: Vec<f64>,
    /// Load on each free bottom-chord node after the ramp (N, positive up).
    pub load: f64,
    /// Ramp duration (s).
    pub ramp: f64,
    constraints: Constraints,
    pattern: CsrMatrix,
    scatter: ElementScatter,
}

impl Truss {
    /// A truss of `panels` panels (at least 2) under `load` per bottom node, ramped over `ramp`.
    pub fn new(panels: usize, load: f64, ramp: f64) -> Self {
        let (len, depth, e, a, rho) = (1.1, 0.9, 210e9, 1e-3, 7850.0);
        let mut nodes: Vec<[f64; 2]> = (0..=panels).map(|i| [i as f64 * len, 0.0]).collect();
        nodes.extend((0..panels).map(|i| [(i as f64 + 0.5) * len, depth]));
        let top = |i: usize| panels + 1 + i;
        let mut bars = Vec::new();
        for i in 0..panels {
            bars.extend([[i, i + 1], [i, top(i)], [top(i), i + 1]]);
        }
        bars.extend((0..panels - 1).map(|i| [top(i), top(i + 1)]));
        let lengths: Vec<f64> = bars
            .iter()
            .map(|b| (nodes[b[1]][0] - nodes[b[0]][0]).hypot(nodes[b[1]][1] - nodes[b[0]][1]))
            .collect();
        let mut mass = vec![0.0; 2 * nodes.len()];
        for (b, l) in bars.iter().zip(&lengths) {
            for &i in b {
                mass[2 * i] += rho * a * l / 2.0;
                mass[2 * i + 1] += rho * a * l / 2.0;
            }
        }
        let dofs: Vec<[usize; 4]> = bars
            .iter()
            .map(|&[i, j]| [2 * i, 2 * i + 1, 2 * j, 2 * j + 1])
            .collect();
        let pattern = CsrMatrix::pattern_from_elements(mass.len(), &dofs).expect("DOFs in range");
        let scatter = ElementScatter::new(&pattern, &dofs).expect("the pattern holds every bar");
        let constraints = Constraints::new().fix(0).fix(1).fix(2 * panels + 1);
        Truss {
            nodes,
            bars,
            lengths,
            ea: e * a,
            mass,
            load,
            ramp,
            constraints,
            pattern,
            scatter,
        }
    }

    /// Bar `k` at displacement `u`: the current end-to-end vector `d`, the Green strain and `L0`.
    pub fn bar(&self, k: usize, u: &[f64]) -> ([f64; 2], f64, f64) {
        let ([i, j], l0) = (self.bars[k], self.lengths[k]);
        let d = [
            self.nodes[j][0] + u[2 * j] - self.nodes[i][0] - u[2 * i],
            self.nodes[j][1] + u[2 * j + 1] - self.nodes[i][1] - u[2 * i + 1],
        ];
        (
            (d),
            (d[0] * d[0] + d[1] * d[1] - l0 * l0) / (2.0 * l0 * l0),
            l0,
        )
    }

    /// The free vertical DOFs of the bottom chord, which carry the load.
    pub fn loaded_dofs(&self) -> impl Iterator<Item = usize> {
        (1..self.nodes.len() / 2).map(|i| 2 * i + 1)
    }
}

impl Model for Truss {
    fn dofs(&self) -> usize {
        self.mass.len()
    }
    fn lumped_mass(&self, out: &mut [f64]) {
        out.copy_from_slice(&self.mass);
    }
    fn internal_force(
        &mut self,
        _t: f64,
        u: &[f64],
        _v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        out.fill(0.0);
        for k in 0..self.bars.len() {
            let ([i, j], (d, e, l0)) = (self.bars[k], self.bar(k, u));
            let s = self.ea * e / l0;
            for c in 0..2 {
                out[2 * i + c] -= s * d[c];
                out[2 * j + c] += s * d[c];
            }
        }
        Ok(())
    }
    fn external_force(&mut self, t: f64, out: &mut [f64]) -> Result<(), ModelError> {
        out.fill(0.0);
        let f = self.load * (t / self.ramp).clamp(0.0, 1.0);
        for d in self.loaded_dofs() {
            out[d] = f;
        }
        Ok(())
    }
    fn constraints(&self) -> &Constraints {
        &self.constraints
    }
}

impl Tangent for Truss {
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
        out.data_mut().fill(0.0);
        for k in 0..self.bars.len() {
            let (d, e, l0) = self.bar(k, u);
            let c = self.ea / l0;
            // The 2x2 block g and the bar's 4x4 matrix [[g, -g], [-g, g]], row-major.
            let g =
                |p: usize, q: usize| c * (d[p] * d[q] / (l0 * l0) + if p == q { e } else { 0.0 });
            let block: [f64; 16] = std::array::from_fn(|r| {
                let (row, col) = (r / 4, r % 4);
                let sign = if (row < 2) == (col < 2) { 1.0 } else { -1.0 };
                sign * g(row % 2, col % 2)
            });
            self.scatter.add(k, &block, out);
        }
        Ok(())
    }
}
