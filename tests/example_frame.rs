//! Checks of the implicit frame example (`examples/frame/`): the element against beam theory,
//! the base-excited frame against its static solution and its equilibrium, and HHT-alpha against
//! average acceleration. Everything runs on the coarse setting (2 elements per member).

#[path = "../examples/frame/model.rs"]
mod model;

use model::{
    FrameLayout, Section, assemble, base_excited, cantilever, mat_vec, modes, peak, simulate,
};
use stepgauge::linalg::{CsrMatrix, LinearSolver, SparseCholesky};
use stepgauge::model::{Damping, Model, TimeFunction};
use stepgauge::params::AlphaParams;

fn column() -> Section {
    FrameLayout::example(2).column
}

/// Root of `cos(x) cosh(x) + 1 = 0` in `[lo, hi]` by bisection.
fn cantilever_root(mut lo: f64, mut hi: f64) -> f64 {
    let f = |x: f64| x.cos() * x.cosh() + 1.0;
    assert!(f(lo) * f(hi) < 0.0);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if f(lo) * f(mid) <= 0.0 {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    0.5 * (lo + hi)
}

/// Bending frequencies (ascending) of a cantilever mesh: modes whose horizontal translations
/// carry most of the shape (the column stands along y, so bending moves it along x).
fn cantilever_frequencies(elements: usize, length: f64) -> (Vec<f64>, Vec<f64>) {
    let (mesh, _) = cantilever(length, elements, column()).unwrap();
    let asm = assemble(&mesh).unwrap();
    let (omegas, shapes) = modes(&asm.k, &asm.m).unwrap();
    let (mut bending, mut axial) = (Vec::new(), Vec::new());
    for (c, w) in omegas.iter().enumerate() {
        let (mut sx, mut sy) = (0.0, 0.0);
        for (i, g) in asm.free.iter().enumerate() {
            match g % 3 {
                0 => sx += shapes[(i, c)].powi(2),
                1 => sy += shapes[(i, c)].powi(2),
                _ => {}
            }
        }
        if sx > sy {
            bending.push(*w)
        } else {
            axial.push(*w)
        }
    }
    (bending, axial)
}

/// (a) A clamped-free column (the example's column section, 4 m, 10 elements) has its first
/// three bending frequencies within 1 % of Euler-Bernoulli beam theory,
/// `omega_i = (beta_i L)^2 sqrt(EI / (rho A L^4))` with `cos(beta L) cosh(beta L) = -1`,
/// `beta_i L = 1.87510, 4.69409, 7.85476` (Blevins 1979, *Formulas for Natural Frequency and Mode
/// Shape*, table 8-1; Chopra, *Dynamics of Structures*, ch. 16; from memory, and checked here by
/// bisection of the frequency equation), and its first axial frequency within 1 % of
/// `pi/2 sqrt(E/rho) / L` (common practice). The consistent mass bounds each frequency from above
/// (Rayleigh-Ritz with admissible shapes; common practice), and the error shrinks with the mesh.
#[test]
fn cantilever_matches_beam_theory() {
    let s = column();
    let length: f64 = 4.0;
    let remembered = [1.87510, 4.69409, 7.85476];
    let brackets = [(1.0, 3.0), (4.0, 6.0), (7.0, 9.0)];
    let base = (s.modulus * s.inertia / (s.density * s.area * length.powi(4))).sqrt();
    let (fine, fine_axial) = cantilever_frequencies(10, length);
    let (coarse, _) = cantilever_frequencies(5, length);
    for i in 0..3 {
        let bl = cantilever_root(brackets[i].0, brackets[i].1);
        assert!((bl - remembered[i]).abs() < 1e-5, "beta_{} L = {bl}", i + 1);
        let exact = bl * bl * base;
        let err = (fine[i] - exact) / exact;
        let err_coarse = (coarse[i] - exact) / exact;
        eprintln!(
            "bending mode {}: exact {exact:.4} rad/s, 10 elements {:.4} ({:+.2e}), 5 elements {:.4} ({:+.2e})",
            i + 1,
            fine[i],
            err,
            coarse[i],
            err_coarse
        );
        assert!((-1e-12..0.01).contains(&err), "mode {}: error {err}", i + 1);
        assert!(err_coarse > err, "mode {}: no convergence", i + 1);
    }
    let axial_exact = std::f64::consts::FRAC_PI_2 * (s.modulus / s.density).sqrt() / length;
    let err = (fine_axial[0] - axial_exact) / axial_exact;
    eprintln!(
        "axial mode 1: exact {axial_exact:.2} rad/s, 10 elements {:.2} ({err:+.2e})",
        fine_axial[0]
    );
    assert!((0.0..0.01).contains(&err), "axial error {err}");
}

/// The coarse frame, its roof DOF and Rayleigh damping of 5 % at modes 1 and 3 (as the example).
fn coarse_frame() -> (model::Assembled, usize, Damping<'static>) {
    let (mesh, roof) = FrameLayout::example(2).mesh().unwrap();
    let asm = assemble(&mesh).unwrap();
    let (omegas, _) = modes(&asm.k, &asm.m).unwrap();
    let damping = Damping::rayleigh_from_modes(omegas[0], 0.05, omegas[2], 0.05).unwrap();
    let roof_dof = asm.dof(roof, 0).unwrap();
    (asm, roof_dof, damping)
}

/// `K u = f` by stepgauge's sparse Cholesky.
fn static_solve(asm: &model::Assembled, f: &[f64]) -> Vec<f64> {
    let k = CsrMatrix::from_sprs("K", &asm.k).unwrap();
    let mut solver = SparseCholesky::new();
    solver.analyze(&k).unwrap();
    solver.factor(&k).unwrap();
    let mut x = f.to_vec();
    solver.solve_in_place(&mut x).unwrap();
    x
}

/// (b) and (d): a base acceleration ramped to a0 = 0.1 g over 3 s (about 6 first periods) and
/// held to 30 s ends, with the frame's 5 % Rayleigh damping, at the static solution
/// `K u = -M r a0`, for HHT-alpha and average acceleration alike. The residual after the ramp is
/// a few per cent of the static response (ramp theory: amplitude about 2 / (omega_1 t_ramp) =
/// 0.04 of it) and decays as exp(-xi omega_1 t) = exp(-0.05 x 13.4 x 27) = 1e-8 over the hold
/// (common practice), so the final state must agree to 1e-7 relative; a wrong load (lumped
/// instead of consistent `M r`, a sign) would be off by 1e-3 or more. (d) The elastic base shear
/// of the static state equals `a0 r^T M r` (horizontal equilibrium of the whole frame; common
/// practice) to rounding, and the final dynamic state's to the same 1e-7.
#[test]
fn constant_base_acceleration_ends_at_the_static_solution() {
    let (asm, roof, damping) = coarse_frame();
    let a0 = 0.1 * model::G;
    let mr = mat_vec(&asm.m, &asm.r);
    let f: Vec<f64> = mr.iter().map(|x| -a0 * x).collect();
    let u_static = static_solve(&asm, &f);
    let m_h = asm.horizontal_mass();
    let v_static = asm.base_shear(&u_static);
    let eq = (v_static - a0 * m_h).abs() / (a0 * m_h);
    eprintln!(
        "static: roof {:.4e} m, base shear {v_static:.6e} N, a0 r^T M r = {:.6e} N ({eq:.1e}); total mass x a0 = {:.6e} N",
        u_static[roof],
        a0 * m_h,
        a0 * FrameLayout::example(2).mesh().unwrap().0.total_mass()
    );
    assert!(eq < 1e-10, "static base shear off by {eq}");
    let norm = |x: &[f64]| x.iter().map(|v| v * v).sum::<f64>().sqrt();
    let ramp = TimeFunction::table(vec![0.0, 3.0], vec![0.0, a0]).unwrap();
    for (name, params) in [
        ("HHT", AlphaParams::hht(-0.1).unwrap()),
        ("average acceleration", AlphaParams::average_acceleration()),
    ] {
        let r = simulate(&asm, damping, ramp.clone(), params, 0.01, 30.0, roof).unwrap();
        let n = asm.dofs();
        let last = &r.record.u[r.record.u.len() - n..];
        let diff: Vec<f64> = last.iter().zip(&u_static).map(|(a, b)| a - b).collect();
        let rel = norm(&diff) / norm(&u_static);
        let v = *r.base_shear.last().unwrap();
        let rel_v = (v - a0 * m_h).abs() / (a0 * m_h);
        eprintln!("{name}: |u - u_static| / |u_static| = {rel:.2e}, base shear {rel_v:.2e}");
        assert!(
            rel < 1e-7,
            "{name}: final state off the static solution by {rel}"
        );
        assert!(rel_v < 1e-7, "{name}: final base shear off by {rel_v}");
        // During the ramp the response is not static yet: the check above is not trivially met.
        let mid = &r.record.u[300 * n..301 * n];
        let at_3s: Vec<f64> = mid.iter().zip(&u_static).map(|(a, b)| a - b).collect();
        assert!(norm(&at_3s) / norm(&u_static) > 1e-3);
    }
}

/// (c) HHT-alpha (alpha = -0.1) and average acceleration agree on the coarse frame's response to
/// the example's record: at Omega = omega_1 dt = 0.13 HHT's algorithmic damping is small
/// (Hilber, Hughes & Taylor 1977: it grows as Omega^3 at small Omega; `stepgauge spectrum --scheme
/// hht --alpha -0.1` gives 2.4e-5 at Omega = 0.134 and 3.0e-6 at 0.067), so the peak
/// roof displacements agree within 1 % and the histories within 2 % of the peak. Both schemes are
/// second order, so their difference must fall by about four when the step is halved (between
/// 3 and 5 here): the agreement is that of two converging schemes, not a coincidence.
#[test]
fn hht_and_average_acceleration_agree() {
    let (asm, roof, damping) = coarse_frame();
    let g = model::GroundMotion::example();
    let ground = TimeFunction::function(move |t| g.accel(t));
    let diff = |dt: f64| {
        let h = simulate(
            &asm,
            damping,
            ground.clone(),
            AlphaParams::hht(-0.1).unwrap(),
            dt,
            15.0,
            roof,
        )
        .unwrap();
        let t = simulate(
            &asm,
            damping,
            ground.clone(),
            AlphaParams::average_acceleration(),
            dt,
            15.0,
            roof,
        )
        .unwrap();
        let d = h
            .roof
            .iter()
            .zip(&t.roof)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        (peak(&h.roof), peak(&t.roof), d)
    };
    let (ph, pt, d1) = diff(0.01);
    let (_, _, d2) = diff(0.005);
    let peak_rel = (ph - pt).abs() / pt;
    eprintln!(
        "peaks HHT {ph:.5e} m, average acceleration {pt:.5e} m ({peak_rel:.2e}); largest difference {d1:.3e} m at dt = 0.01, {d2:.3e} m at 0.005 (ratio {:.2})",
        d1 / d2
    );
    assert!(peak_rel < 0.01);
    assert!(d1 / pt < 0.02);
    assert!((3.0..5.0).contains(&(d1 / d2)), "ratio {}", d1 / d2);
}

/// (d, dynamic) For the trapezoidal rule the equations hold exactly at every step, so the
/// elastic base shear equals, at every instant, the horizontal inertia forces on the free DOFs
/// plus the horizontal damping forces: `b . u = r^T M (a + r a_g) + r^T C v`, with
/// `r^T C v = a0 r^T M v - a1 b . v` (since `r^T K = -b` by the rigid translation; common
/// practice). Checked to 1e-9 of the peak base shear over the whole coarse run.
#[test]
fn base_shear_balances_inertia_and_damping() {
    let (asm, roof, damping) = coarse_frame();
    let Damping::Rayleigh { a0, a1 } = damping else {
        panic!("Rayleigh damping expected");
    };
    let g = model::GroundMotion::example();
    let g2 = g.clone();
    let r = simulate(
        &asm,
        damping,
        TimeFunction::function(move |t| g2.accel(t)),
        AlphaParams::average_acceleration(),
        0.01,
        15.0,
        roof,
    )
    .unwrap();
    let n = asm.dofs();
    let mr = mat_vec(&asm.m, &asm.r);
    let m_h = asm.horizontal_mass();
    let dot = |x: &[f64], y: &[f64]| x.iter().zip(y).map(|(a, b)| a * b).sum::<f64>();
    let vmax = peak(&r.base_shear);
    let mut worst: f64 = 0.0;
    for (row, t) in r.times.iter().enumerate() {
        let (u, v, a) = (
            &r.record.u[row * n..(row + 1) * n],
            &r.record.v[row * n..(row + 1) * n],
            &r.record.a[row * n..(row + 1) * n],
        );
        let inertia = dot(&mr, a) + m_h * g.accel(*t);
        let damp = a0 * dot(&mr, v) - a1 * asm.base_shear(v);
        worst = worst.max((asm.base_shear(u) - inertia - damp).abs());
    }
    eprintln!("largest imbalance {worst:.3e} N of a peak base shear {vmax:.3e} N");
    assert!(worst < 1e-9 * vmax, "imbalance {worst}");
}

/// Bad layouts are refused with an error, not a panic; the model's load is `-M r a_g`.
#[test]
fn bad_input_is_refused_and_the_load_is_minus_m_r_ag() {
    assert!(FrameLayout::example(0).mesh().is_err());
    let mut layout = FrameLayout::example(2);
    layout.storey_height = f64::NAN;
    assert!(layout.mesh().is_err());
    assert!(cantilever(1.0, 0, column()).is_err());
    let (asm, _, _) = coarse_frame();
    let mut m = base_excited(&asm, Damping::None, TimeFunction::Constant(2.0)).unwrap();
    let mut f = vec![0.0; asm.dofs()];
    m.external_force(0.0, &mut f).unwrap();
    let mr = mat_vec(&asm.m, &asm.r);
    assert!(
        f.iter()
            .zip(&mr)
            .all(|(a, b)| (a + 2.0 * b).abs() <= 1e-12 * b.abs().max(1.0))
    );
    assert!(base_excited(&asm, Damping::Force, TimeFunction::Constant(0.0)).is_err());
    let avg = AlphaParams::average_acceleration();
    let zero = TimeFunction::Constant(0.0);
    let n = asm.dofs();
    assert!(simulate(&asm, Damping::None, zero.clone(), avg, 0.01, 0.05, n).is_err());
    assert!(simulate(&asm, Damping::None, zero.clone(), avg, -0.01, 0.05, 0).is_err());
    assert!(simulate(&asm, Damping::None, zero, avg, 0.01, f64::NAN, 0).is_err());
}
