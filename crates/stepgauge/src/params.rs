//! The parameter types of the schemes, shared by stepping and spectral analysis: [`AlphaParams`]
//! (the implicit family), [`ForceVelocity`] (the central difference's treatment of
//! velocity-dependent forces) and [`Scheme`], either of them.
//!
//! Newmark-beta, HHT-alpha, WBZ-alpha and generalised-alpha are all members of one family
//! (Chung & Hulbert 1993): with `x_{n+1-alpha} = (1 - alpha) x_{n+1} + alpha x_n`,
//!
//! ```text
//! M a_{n+1-alpha_m} + C v_{n+1-alpha_f} + f_int(u_{n+1-alpha_f}) = f_ext(t_{n+1-alpha_f})
//! u_{n+1} = u_n + dt v_n + dt^2 ((1/2 - beta) a_n + beta a_{n+1})
//! v_{n+1} = v_n + dt ((1 - gamma) a_n + gamma a_{n+1})
//! ```
//!
//! [`AlphaParams`] holds `(alpha_m, alpha_f, beta, gamma)`; the integrators step with it and the
//! spectral analysis analyses it, so the coefficients analysed are the coefficients stepped.

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};

/// Which velocity the velocity-dependent forces (damping, rate-dependent internal and extra
/// forces) at `t_{n+1}` receive.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ForceVelocity {
    /// The lagged half-step velocity `v_{n+1/2}`: the classical explicit treatment. The damping
    /// term is then only first-order accurate (the error of a damped run falls like `dt`), and a
    /// mode of damping ratio `xi` is stable for `omega dt <= 2 (sqrt(1 + xi^2) - xi)`
    /// (Belytschko, Liu & Moran 2000, sec. 6.2).
    #[default]
    Lagged,
    /// The predicted integer-step velocity `v* = v_{n+1/2} + (dt/2) a_n`, a second-order estimate
    /// of `v_{n+1}`: the scheme stays second-order accurate with damping, at the price of a smaller
    /// stable step, `omega dt <= 2 (sqrt(1 + 4 xi^2) - 2 xi)` (derived for stepgauge from the
    /// amplification matrix; see `docs/explicit.md`).
    Predicted,
}

impl ForceVelocity {
    /// The critical `omega dt` of a single mode of damping ratio `xi` under this treatment.
    pub fn critical_omega_dt(self, xi: f64) -> f64 {
        let x = match self {
            ForceVelocity::Lagged => xi,
            ForceVelocity::Predicted => 2.0 * xi,
        };
        // 2 (sqrt(1 + x^2) - x), written without cancellation.
        2.0 / ((1.0 + x * x).sqrt() + x)
    }
}

/// A time-integration scheme: the central difference with its treatment of velocity-dependent
/// forces, or a member of the generalised-alpha family. The spectral analysis
/// ([`spectral`](crate::spectral)) analyses it; the integrators step the same values.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Scheme {
    /// The central difference in half-step velocity form on a lumped mass, exactly as
    /// [`CentralDifference`](crate::explicit::CentralDifference) steps it, with its treatment of
    /// velocity-dependent forces.
    CentralDifference(ForceVelocity),
    /// A member of the generalised-alpha family (also `beta = 0`: explicit Newmark, with the
    /// damping force centred at `v_{n+1}`).
    Alpha(AlphaParams),
}

/// The four family parameters as reported (the central difference is shown as the
/// `beta = 0, gamma = 1/2` member it resembles, with its own amplification matrix).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Parameters {
    /// `alpha_m`.
    pub alpha_m: f64,
    /// `alpha_f`.
    pub alpha_f: f64,
    /// `beta`.
    pub beta: f64,
    /// `gamma`.
    pub gamma: f64,
}

impl Scheme {
    /// The scheme's name, as on the command line.
    pub fn name(&self) -> &'static str {
        match self {
            Scheme::CentralDifference(_) => "central-difference",
            Scheme::Alpha(p) => match p.family {
                Family::Newmark | Family::Custom if p.alpha_m == 0.0 && p.alpha_f == 0.0 => {
                    "newmark"
                }
                f => f.name(),
            },
        }
    }

    /// The parameters as reported.
    pub fn parameters(&self) -> Parameters {
        match self {
            Scheme::CentralDifference(_) => Parameters {
                alpha_m: 0.0,
                alpha_f: 0.0,
                beta: 0.0,
                gamma: 0.5,
            },
            Scheme::Alpha(p) => Parameters {
                alpha_m: p.alpha_m,
                alpha_f: p.alpha_f,
                beta: p.beta,
                gamma: p.gamma,
            },
        }
    }
}

/// Which named member of the family a parameter set was made as (for reports).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Family {
    /// Newmark-beta (`alpha_m = alpha_f = 0`).
    Newmark,
    /// HHT-alpha (`alpha_m = 0`).
    Hht,
    /// WBZ-alpha (`alpha_f = 0`).
    Wbz,
    /// Generalised-alpha (Chung & Hulbert).
    GeneralizedAlpha,
    /// Raw parameters given by the user.
    Custom,
}

impl Family {
    /// The name used in reports and on the command line.
    pub fn name(self) -> &'static str {
        match self {
            Family::Newmark => "newmark",
            Family::Hht => "hht",
            Family::Wbz => "wbz",
            Family::GeneralizedAlpha => "generalized-alpha",
            Family::Custom => "custom",
        }
    }
}

/// Parameters `(alpha_m, alpha_f, beta, gamma)` of the generalised-alpha family.
///
/// Made only by the validated constructors ([`newmark`](AlphaParams::newmark),
/// [`hht`](AlphaParams::hht), [`wbz`](AlphaParams::wbz),
/// [`generalized_alpha`](AlphaParams::generalized_alpha), [`raw`](AlphaParams::raw), ...) and read
/// through its getters, so that a set is never unchecked and its [`Family`] label always fits
/// its values; deserialising checks the same (a checkpoint edited by hand is refused, not
/// stepped).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(try_from = "AlphaParamsData")]
pub struct AlphaParams {
    pub(crate) alpha_m: f64,
    pub(crate) alpha_f: f64,
    pub(crate) beta: f64,
    pub(crate) gamma: f64,
    pub(crate) family: Family,
}

/// The serialised form of [`AlphaParams`], checked by `TryFrom` when read.
#[derive(Deserialize)]
struct AlphaParamsData {
    alpha_m: f64,
    alpha_f: f64,
    beta: f64,
    gamma: f64,
    family: Family,
}

impl TryFrom<AlphaParamsData> for AlphaParams {
    type Error = Error;

    fn try_from(d: AlphaParamsData) -> Result<Self> {
        let p = AlphaParams::raw(d.alpha_m, d.alpha_f, d.beta, d.gamma)?;
        p.labelled(d.family)
    }
}

/// The largest magnitude of a parameter: far beyond every published set (`beta` and `gamma` of
/// order one), and within what the spectral analysis resolves (its criterion polynomials sum
/// terms of the size of the parameters' products and must still see terms of order one beside
/// them, see `spectral::stability`).
pub const PARAMETER_LIMIT: f64 = 1e6;

fn check(name: &'static str, value: f64, ok: bool, expected: &'static str) -> Result<()> {
    if value.is_nan() || value.abs() > PARAMETER_LIMIT {
        return Err(Error::InvalidParameter {
            name,
            value,
            expected: "a finite value of magnitude at most 1e6 (no useful set has larger \
                       parameters, and the stability analysis cannot resolve them)",
        });
    }
    if ok && value.is_finite() {
        Ok(())
    } else {
        Err(Error::InvalidParameter {
            name,
            value,
            expected,
        })
    }
}

impl AlphaParams {
    /// Weight of the old acceleration in the inertia term.
    pub fn alpha_m(&self) -> f64 {
        self.alpha_m
    }

    /// Weight of the old state in the internal, damping and external forces.
    pub fn alpha_f(&self) -> f64 {
        self.alpha_f
    }

    /// Newmark's beta (displacement update).
    pub fn beta(&self) -> f64 {
        self.beta
    }

    /// Newmark's gamma (velocity update).
    pub fn gamma(&self) -> f64 {
        self.gamma
    }

    /// The member it was made as.
    pub fn family(&self) -> Family {
        self.family
    }

    /// The same values labelled as `family`, when they belong to it: Newmark needs
    /// `alpha_m = alpha_f = 0`, HHT `alpha_m = 0`, WBZ `alpha_f = 0`; generalised-alpha and custom
    /// take any set.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] naming the parameter that does not fit the label.
    pub fn labelled(mut self, family: Family) -> Result<Self> {
        let must_be_zero: &[(&'static str, f64)] = match family {
            Family::Newmark => &[("alpha_m", self.alpha_m), ("alpha_f", self.alpha_f)],
            Family::Hht => &[("alpha_m", self.alpha_m)],
            Family::Wbz => &[("alpha_f", self.alpha_f)],
            Family::GeneralizedAlpha | Family::Custom => &[],
        };
        if let Some(&(name, value)) = must_be_zero.iter().find(|(_, v)| *v != 0.0) {
            return Err(Error::InvalidParameter {
                name,
                value,
                expected: "zero for the family named (Newmark: alpha_m = alpha_f = 0; HHT: \
                           alpha_m = 0; WBZ: alpha_f = 0)",
            });
        }
        self.family = family;
        Ok(self)
    }

    /// Newmark-beta with any `beta >= 0`, `gamma >= 0` (stability is judged by the spectral
    /// analysis, not here).
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] for negative or non-finite values.
    ///
    /// # Reference
    /// Newmark (1959), "A method of computation for structural dynamics", *J. Eng. Mech. Div.
    /// ASCE* 85.
    pub fn newmark(beta: f64, gamma: f64) -> Result<Self> {
        check("beta", beta, beta >= 0.0, "beta >= 0")?;
        check("gamma", gamma, gamma >= 0.0, "gamma >= 0")?;
        Ok(AlphaParams {
            alpha_m: 0.0,
            alpha_f: 0.0,
            beta,
            gamma,
            family: Family::Newmark,
        })
    }

    /// Average acceleration (trapezoidal rule): `beta = 1/4`, `gamma = 1/2`. Unconditionally
    /// stable, second order, no numerical damping.
    ///
    /// # Reference
    /// Newmark (1959); Hughes (1987), *The Finite Element Method*, sec. 9.1.
    pub fn average_acceleration() -> Self {
        AlphaParams {
            alpha_m: 0.0,
            alpha_f: 0.0,
            beta: 0.25,
            gamma: 0.5,
            family: Family::Newmark,
        }
    }

    /// Linear acceleration: `beta = 1/6`, `gamma = 1/2`; stable for `omega dt <= sqrt(12)`.
    ///
    /// # Reference
    /// Newmark (1959); Hughes (1987), sec. 9.1.
    pub fn linear_acceleration() -> Self {
        AlphaParams {
            beta: 1.0 / 6.0,
            ..Self::average_acceleration()
        }
    }

    /// Fox-Goodwin: `beta = 1/12`, `gamma = 1/2`; fourth-order period accuracy for undamped
    /// problems, stable for `omega dt <= sqrt(6)`.
    ///
    /// # Reference
    /// Fox & Goodwin (1949), "Some new methods for the numerical integration of ordinary
    /// differential equations", *Proc. Cambridge Phil. Soc.* 45; Hughes (1987), sec. 9.1.
    pub fn fox_goodwin() -> Self {
        AlphaParams {
            beta: 1.0 / 12.0,
            ..Self::average_acceleration()
        }
    }

    /// HHT-alpha with `alpha` in `[-1/3, 0]`, in the original sign convention:
    /// `M a_{n+1} + (1 + alpha) K u_{n+1} - alpha K u_n = (1 + alpha) f_{n+1} - alpha f_n`,
    /// `gamma = (1 - 2 alpha)/2`, `beta = (1 - alpha)^2 / 4`. In the family's notation
    /// `alpha_m = 0`, `alpha_f = -alpha`. High-frequency spectral radius
    /// `rho_inf = (1 + alpha)/(1 - alpha)`, from 1 (`alpha = 0`, the trapezoidal rule) down to 1/2.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] for `alpha` outside `[-1/3, 0]`.
    ///
    /// # Reference
    /// Hilber, Hughes & Taylor (1977), "Improved numerical dissipation for time integration
    /// algorithms in structural dynamics", *Earthquake Eng. Struct. Dyn.* 5, 283-292.
    pub fn hht(alpha: f64) -> Result<Self> {
        check(
            "alpha",
            alpha,
            (-1.0 / 3.0..=0.0).contains(&alpha),
            "HHT alpha in [-1/3, 0] (original sign convention)",
        )?;
        Ok(AlphaParams {
            alpha_m: 0.0,
            alpha_f: -alpha,
            beta: (1.0 - alpha) * (1.0 - alpha) / 4.0,
            gamma: (1.0 - 2.0 * alpha) / 2.0,
            family: Family::Hht,
        })
    }

    /// HHT-alpha with the high-frequency spectral radius `rho_inf` in `[1/2, 1]`:
    /// `alpha = (rho_inf - 1)/(rho_inf + 1)`.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] for `rho_inf` outside `[1/2, 1]`.
    ///
    /// # Reference
    /// Hilber, Hughes & Taylor (1977).
    pub fn hht_from_rho_inf(rho_inf: f64) -> Result<Self> {
        check(
            "rho_inf",
            rho_inf,
            (0.5..=1.0).contains(&rho_inf),
            "rho_inf in [1/2, 1] for HHT-alpha",
        )?;
        Self::hht((rho_inf - 1.0) / (rho_inf + 1.0))
    }

    /// WBZ-alpha with `alpha_m` (Wood, Bossak and Zienkiewicz's `alpha_B`) in `[-1, 0]`:
    /// `alpha_f = 0`, `gamma = 1/2 - alpha_m`, `beta = (1 - alpha_m)^2 / 4`;
    /// `rho_inf = (1 + alpha_m)/(1 - alpha_m)`.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] for `alpha_m` outside `[-1, 0]`.
    ///
    /// # Reference
    /// Wood, Bossak & Zienkiewicz (1980), "An alpha modification of Newmark's method", *Int. J.
    /// Numer. Meth. Eng.* 15, 1562-1566; Chung & Hulbert (1993), sec. 3.
    pub fn wbz(alpha_m: f64) -> Result<Self> {
        check(
            "alpha_m",
            alpha_m,
            (-1.0..=0.0).contains(&alpha_m),
            "WBZ alpha_m in [-1, 0]",
        )?;
        Ok(AlphaParams {
            alpha_m,
            alpha_f: 0.0,
            beta: (1.0 - alpha_m) * (1.0 - alpha_m) / 4.0,
            gamma: 0.5 - alpha_m,
            family: Family::Wbz,
        })
    }

    /// WBZ-alpha with the high-frequency spectral radius `rho_inf` in `[0, 1]`:
    /// `alpha_m = (rho_inf - 1)/(rho_inf + 1)`.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] for `rho_inf` outside `[0, 1]`.
    ///
    /// # Reference
    /// Chung & Hulbert (1993), eq. (25).
    pub fn wbz_from_rho_inf(rho_inf: f64) -> Result<Self> {
        check(
            "rho_inf",
            rho_inf,
            (0.0..=1.0).contains(&rho_inf),
            "rho_inf in [0, 1]",
        )?;
        Self::wbz((rho_inf - 1.0) / (rho_inf + 1.0))
    }

    /// Generalised-alpha with the high-frequency spectral radius `rho_inf` in `[0, 1]`:
    /// `alpha_m = (2 rho_inf - 1)/(rho_inf + 1)`, `alpha_f = rho_inf/(rho_inf + 1)`,
    /// `gamma = 1/2 - alpha_m + alpha_f`, `beta = (1 - alpha_m + alpha_f)^2 / 4`: second order,
    /// unconditionally stable, with the least low-frequency damping for the chosen `rho_inf`.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] for `rho_inf` outside `[0, 1]`.
    ///
    /// # Reference
    /// Chung & Hulbert (1993), "A time integration algorithm for structural dynamics with
    /// improved numerical dissipation: the generalized-alpha method", *J. Appl. Mech.* 60,
    /// 371-375, eqs. (25) and (17).
    pub fn generalized_alpha(rho_inf: f64) -> Result<Self> {
        check(
            "rho_inf",
            rho_inf,
            (0.0..=1.0).contains(&rho_inf),
            "rho_inf in [0, 1]",
        )?;
        let alpha_m = (2.0 * rho_inf - 1.0) / (rho_inf + 1.0);
        let alpha_f = rho_inf / (rho_inf + 1.0);
        let g = 1.0 - alpha_m + alpha_f;
        Ok(AlphaParams {
            alpha_m,
            alpha_f,
            beta: g * g / 4.0,
            gamma: 0.5 - alpha_m + alpha_f,
            family: Family::GeneralizedAlpha,
        })
    }

    /// Raw parameters. Requires finite values with `alpha_m < 1`, `alpha_f < 1` (otherwise the new
    /// state drops out of the balance); whether they are stable and accurate is for the spectral
    /// analysis to say.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] for a non-finite value or `alpha_m >= 1`, `alpha_f >= 1`,
    /// `beta < 0`, `gamma < 0`.
    pub fn raw(alpha_m: f64, alpha_f: f64, beta: f64, gamma: f64) -> Result<Self> {
        check("alpha_m", alpha_m, alpha_m < 1.0, "alpha_m < 1")?;
        check("alpha_f", alpha_f, alpha_f < 1.0, "alpha_f < 1")?;
        check("beta", beta, beta >= 0.0, "beta >= 0")?;
        check("gamma", gamma, gamma >= 0.0, "gamma >= 0")?;
        Ok(AlphaParams {
            alpha_m,
            alpha_f,
            beta,
            gamma,
            family: Family::Custom,
        })
    }

    /// Checks that the set can be stepped by the implicit integrator: finite values,
    /// `alpha_m < 1`, `alpha_f < 1`, `gamma >= 0` and `beta > 0` (`beta = 0` is the explicit
    /// member, which the displacement-form solve cannot take).
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] naming the offending parameter.
    pub fn validate_for_stepping(&self) -> Result<()> {
        Self::raw(self.alpha_m, self.alpha_f, self.beta, self.gamma)?;
        check(
            "beta",
            self.beta,
            self.beta > 0.0,
            "beta > 0 for implicit stepping (beta = 0 is explicit Newmark; use the central-difference integrator)",
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Hilber, Hughes & Taylor (1977): alpha = -1/3 gives gamma = 5/6, beta = 4/9; and (from the
    /// field notes, checked here) the same parameters as generalised-alpha with rho_inf = 1/2.
    #[test]
    fn hht_minus_one_third_equals_generalized_alpha_one_half() {
        let h = AlphaParams::hht(-1.0 / 3.0).unwrap();
        assert!((h.gamma - 5.0 / 6.0).abs() < 1e-15);
        assert!((h.beta - 4.0 / 9.0).abs() < 1e-15);
        let g = AlphaParams::generalized_alpha(0.5).unwrap();
        assert!((g.alpha_m - h.alpha_m).abs() < 1e-15);
        assert!((g.alpha_f - h.alpha_f).abs() < 1e-15);
        assert!((g.beta - h.beta).abs() < 1e-15);
        assert!((g.gamma - h.gamma).abs() < 1e-15);
        let r = AlphaParams::hht_from_rho_inf(0.5).unwrap();
        assert!((r.alpha_f - 1.0 / 3.0).abs() < 1e-15);
    }

    /// Generalised-alpha with rho_inf = 1 is the trapezoidal rule shifted by alpha = 1/2
    /// (Chung & Hulbert 1993): alpha_m = alpha_f = 1/2, beta = 1/4, gamma = 1/2.
    #[test]
    fn generalized_alpha_limits() {
        let g = AlphaParams::generalized_alpha(1.0).unwrap();
        assert_eq!(
            (g.alpha_m, g.alpha_f, g.beta, g.gamma),
            (0.5, 0.5, 0.25, 0.5)
        );
        let g = AlphaParams::generalized_alpha(0.0).unwrap();
        assert_eq!(
            (g.alpha_m, g.alpha_f, g.beta, g.gamma),
            (-1.0, 0.0, 1.0, 1.5)
        );
    }

    #[test]
    fn out_of_range_parameters_are_refused() {
        for bad in [0.1, -0.34, f64::NAN] {
            assert!(matches!(
                AlphaParams::hht(bad),
                Err(Error::InvalidParameter { name: "alpha", .. })
            ));
        }
        assert!(AlphaParams::generalized_alpha(1.1).is_err());
        assert!(AlphaParams::generalized_alpha(-0.1).is_err());
        assert!(AlphaParams::wbz(0.5).is_err());
        assert!(AlphaParams::newmark(-0.1, 0.5).is_err());
        assert!(AlphaParams::raw(1.0, 0.0, 0.25, 0.5).is_err());
        let explicit = AlphaParams::newmark(0.0, 0.5).unwrap();
        assert!(matches!(
            explicit.validate_for_stepping(),
            Err(Error::InvalidParameter { name: "beta", .. })
        ));
    }
}
