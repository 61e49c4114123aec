//! The scheme options shared by `check` and `spectrum`, turned into a library [`Scheme`].

use clap::{Args, ValueEnum};
use stepgauge::explicit::ForceVelocity;
use stepgauge::params::AlphaParams;
use stepgauge::spectral::Scheme;

use super::Failure;

/// The schemes the command line knows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum SchemeKind {
    /// Central difference on a lumped mass, as stepgauge's explicit engine steps it.
    CentralDifference,
    /// Newmark-beta (--beta, --gamma; defaults 1/4, 1/2; --beta 0 is explicit Newmark).
    Newmark,
    /// HHT-alpha (--alpha in [-1/3, 0], or --rho-inf in [1/2, 1]).
    Hht,
    /// WBZ-alpha (--alpha-m in [-1, 0], or --rho-inf in [0, 1]).
    Wbz,
    /// Generalised-alpha (--rho-inf in [0, 1], or all of --alpha-m --alpha-f --beta --gamma).
    #[value(alias = "generalised-alpha")]
    GeneralizedAlpha,
}

impl SchemeKind {
    fn flag(self) -> &'static str {
        match self {
            SchemeKind::CentralDifference => "central-difference",
            SchemeKind::Newmark => "newmark",
            SchemeKind::Hht => "hht",
            SchemeKind::Wbz => "wbz",
            SchemeKind::GeneralizedAlpha => "generalized-alpha",
        }
    }

    fn takes(self) -> &'static str {
        match self {
            SchemeKind::CentralDifference => "--damping-velocity",
            SchemeKind::Newmark => "--beta and --gamma",
            SchemeKind::Hht => "--alpha or --rho-inf",
            SchemeKind::Wbz => "--alpha-m or --rho-inf",
            SchemeKind::GeneralizedAlpha => "--rho-inf, or --alpha-m --alpha-f --beta --gamma",
        }
    }
}

/// Where the central difference takes the velocity of the damping force.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum DampingVelocity {
    /// The lagged half-step velocity v_{n+1/2} (classical; first order with damping).
    Lagged,
    /// The predicted integer-step velocity (second order; smaller stable step).
    Predicted,
}

impl From<DampingVelocity> for ForceVelocity {
    fn from(d: DampingVelocity) -> Self {
        match d {
            DampingVelocity::Lagged => ForceVelocity::Lagged,
            DampingVelocity::Predicted => ForceVelocity::Predicted,
        }
    }
}

/// The scheme options.
#[derive(Debug, Clone, Args)]
pub struct SchemeArgs {
    /// The scheme [default: newmark, i.e. average acceleration, beta 1/4, gamma 1/2].
    #[arg(long, value_enum, value_name = "NAME")]
    pub scheme: Option<SchemeKind>,
    /// Newmark's beta (newmark: default 1/4; generalized-alpha: raw set).
    #[arg(long, value_name = "BETA", allow_hyphen_values = true)]
    pub beta: Option<f64>,
    /// Newmark's gamma (newmark: default 1/2; generalized-alpha: raw set).
    #[arg(long, value_name = "GAMMA", allow_hyphen_values = true)]
    pub gamma: Option<f64>,
    /// HHT's alpha in [-1/3, 0], original sign convention (hht only).
    #[arg(long, value_name = "ALPHA", allow_hyphen_values = true)]
    pub alpha: Option<f64>,
    /// alpha_m (wbz: in [-1, 0]; generalized-alpha: raw set).
    #[arg(long, value_name = "ALPHA_M", allow_hyphen_values = true)]
    pub alpha_m: Option<f64>,
    /// alpha_f (generalized-alpha raw set only).
    #[arg(long, value_name = "ALPHA_F", allow_hyphen_values = true)]
    pub alpha_f: Option<f64>,
    /// High-frequency spectral radius (hht: [1/2, 1]; wbz, generalized-alpha: [0, 1]).
    #[arg(long, value_name = "RHO", allow_hyphen_values = true)]
    pub rho_inf: Option<f64>,
    /// Physical damping ratio xi of the mode (>= 0).
    #[arg(
        long,
        value_name = "XI",
        default_value_t = 0.0,
        allow_hyphen_values = true
    )]
    pub xi: f64,
    /// Central difference only: velocity of the damping force [default: lagged].
    #[arg(long, value_enum, value_name = "WHICH")]
    pub damping_velocity: Option<DampingVelocity>,
}

/// A scheme with the label it is shown under.
#[derive(Debug, Clone)]
pub struct Labelled {
    /// The scheme.
    pub scheme: Scheme,
    /// Its description, e.g. `hht alpha = -0.1`.
    pub label: String,
}

impl SchemeArgs {
    /// True when any option selecting or parametrising a scheme was given (`--xi` excluded).
    pub fn any_given(&self) -> bool {
        self.scheme.is_some()
            || self.beta.is_some()
            || self.gamma.is_some()
            || self.alpha.is_some()
            || self.alpha_m.is_some()
            || self.alpha_f.is_some()
            || self.rho_inf.is_some()
            || self.damping_velocity.is_some()
    }

    /// The physical damping ratio, checked.
    pub fn xi(&self) -> Result<f64, Failure> {
        let xi = self.xi;
        if xi.is_finite() && xi >= 0.0 {
            Ok(xi)
        } else {
            Err(stepgauge::Error::InvalidParameter {
                name: "xi",
                value: xi,
                expected: "a non-negative, finite damping ratio",
            }
            .into())
        }
    }

    /// The scheme the options select, or a usage failure naming the offending option.
    pub fn resolve(&self) -> Result<Labelled, Failure> {
        let kind = self.scheme.unwrap_or(SchemeKind::Newmark);
        let given: [(&str, bool); 7] = [
            ("--beta", self.beta.is_some()),
            ("--gamma", self.gamma.is_some()),
            ("--alpha", self.alpha.is_some()),
            ("--alpha-m", self.alpha_m.is_some()),
            ("--alpha-f", self.alpha_f.is_some()),
            ("--rho-inf", self.rho_inf.is_some()),
            ("--damping-velocity", self.damping_velocity.is_some()),
        ];
        let allowed: &[&str] = match kind {
            SchemeKind::CentralDifference => &["--damping-velocity"],
            SchemeKind::Newmark => &["--beta", "--gamma"],
            SchemeKind::Hht => &["--alpha", "--rho-inf"],
            SchemeKind::Wbz => &["--alpha-m", "--rho-inf"],
            SchemeKind::GeneralizedAlpha => {
                &["--rho-inf", "--alpha-m", "--alpha-f", "--beta", "--gamma"]
            }
        };
        if let Some((flag, _)) = given
            .iter()
            .find(|(flag, on)| *on && !allowed.contains(flag))
        {
            return Err(Failure::Usage(format!(
                "{flag} does not apply to --scheme {}{}; it takes {}",
                kind.flag(),
                if self.scheme.is_none() {
                    " (the default)"
                } else {
                    ""
                },
                kind.takes()
            )));
        }
        let usage = |msg: String| Err(Failure::Usage(msg));
        let labelled = match kind {
            SchemeKind::CentralDifference => {
                let dv = self.damping_velocity.unwrap_or(DampingVelocity::Lagged);
                Labelled {
                    scheme: Scheme::CentralDifference(dv.into()),
                    label: format!(
                        "central difference, {} damping velocity",
                        match dv {
                            DampingVelocity::Lagged => "lagged",
                            DampingVelocity::Predicted => "predicted",
                        }
                    ),
                }
            }
            SchemeKind::Newmark => {
                let (beta, gamma) = (self.beta.unwrap_or(0.25), self.gamma.unwrap_or(0.5));
                let p = AlphaParams::newmark(beta, gamma)?;
                Labelled {
                    scheme: Scheme::Alpha(p),
                    label: if beta == 0.0 {
                        format!(
                            "explicit newmark beta = 0, gamma = {gamma} (damping force at v_{{n+1}})"
                        )
                    } else {
                        format!("newmark beta = {beta}, gamma = {gamma}")
                    },
                }
            }
            SchemeKind::Hht => match (self.alpha, self.rho_inf) {
                (Some(_), Some(_)) => {
                    return usage("--scheme hht takes --alpha or --rho-inf, not both".to_string());
                }
                (Some(a), None) => Labelled {
                    scheme: Scheme::Alpha(AlphaParams::hht(a)?),
                    label: format!("hht alpha = {a}"),
                },
                (None, Some(r)) => Labelled {
                    scheme: Scheme::Alpha(AlphaParams::hht_from_rho_inf(r)?),
                    label: format!("hht rho_inf = {r}"),
                },
                (None, None) => {
                    return usage(
                        "--scheme hht needs --alpha (in [-1/3, 0]) or --rho-inf (in [1/2, 1])"
                            .to_string(),
                    );
                }
            },
            SchemeKind::Wbz => match (self.alpha_m, self.rho_inf) {
                (Some(_), Some(_)) => {
                    return usage(
                        "--scheme wbz takes --alpha-m or --rho-inf, not both".to_string(),
                    );
                }
                (Some(a), None) => Labelled {
                    scheme: Scheme::Alpha(AlphaParams::wbz(a)?),
                    label: format!("wbz alpha_m = {a}"),
                },
                (None, Some(r)) => Labelled {
                    scheme: Scheme::Alpha(AlphaParams::wbz_from_rho_inf(r)?),
                    label: format!("wbz rho_inf = {r}"),
                },
                (None, None) => {
                    return usage(
                        "--scheme wbz needs --alpha-m (in [-1, 0]) or --rho-inf (in [0, 1])"
                            .to_string(),
                    );
                }
            },
            SchemeKind::GeneralizedAlpha => {
                let raw = [
                    ("--alpha-m", self.alpha_m),
                    ("--alpha-f", self.alpha_f),
                    ("--beta", self.beta),
                    ("--gamma", self.gamma),
                ];
                let any_raw = raw.iter().any(|(_, v)| v.is_some());
                match (self.rho_inf, any_raw) {
                    (Some(_), true) => {
                        return usage(
                            "--scheme generalized-alpha takes --rho-inf or the raw set \
                             --alpha-m --alpha-f --beta --gamma, not both"
                                .to_string(),
                        );
                    }
                    (Some(r), false) => Labelled {
                        scheme: Scheme::Alpha(AlphaParams::generalized_alpha(r)?),
                        label: format!("generalized-alpha rho_inf = {r}"),
                    },
                    (None, false) => {
                        return usage(
                            "--scheme generalized-alpha needs --rho-inf (in [0, 1]), or all of \
                             --alpha-m --alpha-f --beta --gamma"
                                .to_string(),
                        );
                    }
                    (None, true) => {
                        let missing: Vec<&str> = raw
                            .iter()
                            .filter(|(_, v)| v.is_none())
                            .map(|(f, _)| *f)
                            .collect();
                        if !missing.is_empty() {
                            return usage(format!(
                                "--scheme generalized-alpha with raw parameters needs all of \
                                 --alpha-m --alpha-f --beta --gamma; missing {}",
                                missing.join(" ")
                            ));
                        }
                        let [am, af, b, g] = raw.map(|(_, v)| v.unwrap_or_default());
                        Labelled {
                            scheme: Scheme::Alpha(AlphaParams::raw(am, af, b, g)?),
                            label: format!(
                                "generalized-alpha raw alpha_m = {am}, alpha_f = {af}, beta = {b}, gamma = {g}"
                            ),
                        }
                    }
                }
            }
        };
        Ok(labelled)
    }
}

/// The standard sets `spectrum --standard-sets` compares, in this order.
pub fn standard_sets() -> Result<Vec<Labelled>, Failure> {
    Ok(vec![
        Labelled {
            scheme: Scheme::Alpha(AlphaParams::average_acceleration()),
            label: "average acceleration (newmark beta = 1/4, gamma = 1/2)".to_string(),
        },
        Labelled {
            scheme: Scheme::Alpha(AlphaParams::linear_acceleration()),
            label: "linear acceleration (newmark beta = 1/6, gamma = 1/2)".to_string(),
        },
        Labelled {
            scheme: Scheme::Alpha(AlphaParams::hht(-0.1)?),
            label: "hht alpha = -0.1".to_string(),
        },
        Labelled {
            scheme: Scheme::Alpha(AlphaParams::wbz_from_rho_inf(0.8)?),
            label: "wbz rho_inf = 0.8".to_string(),
        },
        Labelled {
            scheme: Scheme::Alpha(AlphaParams::generalized_alpha(0.8)?),
            label: "generalized-alpha rho_inf = 0.8".to_string(),
        },
        Labelled {
            scheme: Scheme::CentralDifference(ForceVelocity::Lagged),
            label: "central difference, lagged damping velocity".to_string(),
        },
    ])
}
