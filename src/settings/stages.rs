//! The sample stages as the user sets them (run-file sections or flags): Malmquist
//! correction, groups, outliers, bulk flow, export. A section that is present turns its
//! stage on.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

/// Which quantity the flow is fitted to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum FitSpace {
    /// Log-distance ratio η with κ = ∂η/∂v (default).
    #[default]
    Eta,
    /// Radial peculiar velocity.
    Velocity,
}

impl FitSpace {
    pub fn name(self) -> &'static str {
        match self {
            FitSpace::Eta => "eta",
            FitSpace::Velocity => "velocity",
        }
    }
}

/// Which Malmquist correction to apply to the distances before the velocities.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum MalmquistMethod {
    /// E[r|d] = d exp(3.5 Δ²) (Lynden-Bell et al. 1988).
    #[default]
    Homogeneous,
    /// The general form with a radial density profile n(r) from `profile`.
    Profile,
}

/// Malmquist settings (run file `[malmquist]`, or flags).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct MalmquistChoice {
    /// homogeneous (default) or profile.
    pub method: Option<MalmquistMethod>,
    /// CSV/TSV/Parquet/FITS table with columns `r` (Mpc, or the run's length unit) and `n`
    /// (any normalisation); implies method = profile.
    pub profile: Option<String>,
}

impl MalmquistChoice {
    pub fn overlay(&self, o: &MalmquistChoice) -> MalmquistChoice {
        MalmquistChoice {
            method: o.method.or(self.method),
            profile: o.profile.clone().or_else(|| self.profile.clone()),
        }
    }
}

/// Flow-sample export settings (run file `[export]`, or flags).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ExportChoice {
    /// Where to write it (default: `<output stem>.flow.<ext>`).
    pub output: Option<String>,
    /// Keep rows flagged as outliers (default false; they carry `outlier = true`).
    pub keep_outliers: Option<bool>,
}

impl ExportChoice {
    pub fn overlay(&self, o: &ExportChoice) -> ExportChoice {
        ExportChoice {
            output: o.output.clone().or_else(|| self.output.clone()),
            keep_outliers: o.keep_outliers.or(self.keep_outliers),
        }
    }
}

/// Group settings as the user gives them (run file `[groups]`, or flags).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct GroupChoice {
    /// Column marking each group's central member (true/1); its redshift is the group's.
    pub central_column: Option<String>,
    /// Where to write the group table (default: `<output stem>.groups.<ext>` next to it).
    pub output: Option<String>,
}

impl GroupChoice {
    pub fn overlay(&self, o: &GroupChoice) -> GroupChoice {
        GroupChoice {
            central_column: o
                .central_column
                .clone()
                .or_else(|| self.central_column.clone()),
            output: o.output.clone().or_else(|| self.output.clone()),
        }
    }
}

/// Outlier settings as the user gives them (run file `[outliers]`, or flags).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct OutlierChoice {
    /// Residual threshold in σ (default 3.5).
    pub threshold: Option<f64>,
    /// Number of neighbours for the consistency test (default 10; 0 turns it off).
    pub neighbours: Option<usize>,
    /// Neighbour-consistency threshold in σ (default 3.5).
    pub neighbour_threshold: Option<f64>,
    /// Flag |v_pec| above this, km/s (default: no bound).
    pub max_speed: Option<f64>,
    /// Flag η outside [low, high] (default [−0.6, 0.6], a factor 4 in distance).
    pub eta_range: Option<[f64; 2]>,
    /// Quantity whose residuals are tested: eta (default) or velocity. (Older run files and
    /// records call it `space`.)
    #[serde(alias = "space")]
    pub quantity: Option<FitSpace>,
    /// Intrinsic dispersion σ_*, km/s; absent: fitted.
    pub sigma_star: Option<f64>,
}

impl OutlierChoice {
    pub fn overlay(&self, o: &OutlierChoice) -> OutlierChoice {
        OutlierChoice {
            threshold: o.threshold.or(self.threshold),
            neighbours: o.neighbours.or(self.neighbours),
            neighbour_threshold: o.neighbour_threshold.or(self.neighbour_threshold),
            max_speed: o.max_speed.or(self.max_speed),
            eta_range: o.eta_range.or(self.eta_range),
            quantity: o.quantity.or(self.quantity),
            sigma_star: o.sigma_star.or(self.sigma_star),
        }
    }
}

/// Bulk-flow settings as the user gives them (run file `[bulk_flow]`, or flags).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct BulkFlowChoice {
    /// Quantity the flow is fitted to: eta (default) or velocity. (Older run files and
    /// records call it `space`.)
    #[serde(alias = "space")]
    pub quantity: Option<FitSpace>,
    /// Intrinsic dispersion σ_*, km/s; absent: fitted.
    pub sigma_star: Option<f64>,
    /// Use rows flagged as outliers too (default false), as `--include-outliers` does.
    pub include_outliers: Option<bool>,
    /// The opposite key of older run files and records (`skip_outliers = true` leaves the
    /// outliers out); read, folded into `include_outliers` by `filled`, never written.
    #[serde(rename = "skip_outliers", default, skip_serializing)]
    #[schemars(skip)]
    pub legacy_skip_outliers: Option<bool>,
    /// Compute the ΛCDM expectation for the sample's window (default true).
    pub lcdm: Option<bool>,
    /// σ8 of the linear power spectrum (default: Planck 2018).
    pub sigma8: Option<f64>,
    /// Baryon density Ω_b (default: Planck 2018).
    pub omega_b: Option<f64>,
    /// Spectral index n_s (default: Planck 2018).
    pub n_s: Option<f64>,
}

impl BulkFlowChoice {
    pub fn overlay(&self, o: &BulkFlowChoice) -> BulkFlowChoice {
        BulkFlowChoice {
            quantity: o.quantity.or(self.quantity),
            sigma_star: o.sigma_star.or(self.sigma_star),
            include_outliers: o.include_outliers.or(self.include_outliers),
            legacy_skip_outliers: o.legacy_skip_outliers.or(self.legacy_skip_outliers),
            lcdm: o.lcdm.or(self.lcdm),
            sigma8: o.sigma8.or(self.sigma8),
            omega_b: o.omega_b.or(self.omega_b),
            n_s: o.n_s.or(self.n_s),
        }
    }
}

// Every default of the stages, written down once; `filled` turns a section into the values a
// run uses, which is what its record keeps.

impl MalmquistChoice {
    /// The method used: `profile` when a profile table is named.
    pub fn filled(&self) -> MalmquistChoice {
        MalmquistChoice {
            method: Some(if self.profile.is_some() {
                MalmquistMethod::Profile
            } else {
                self.method.unwrap_or_default()
            }),
            profile: self.profile.clone(),
        }
    }
}

impl OutlierChoice {
    /// Defaults: threshold 3.5 σ, 10 neighbours at 3.5 σ, no speed limit (`max_speed`
    /// absent), η in [−0.6, 0.6], residuals in η, σ_* fitted (`sigma_star` absent).
    pub fn filled(&self) -> OutlierChoice {
        OutlierChoice {
            threshold: Some(self.threshold.unwrap_or(3.5)),
            neighbours: Some(self.neighbours.unwrap_or(10)),
            neighbour_threshold: Some(self.neighbour_threshold.unwrap_or(3.5)),
            max_speed: self.max_speed,
            eta_range: Some(self.eta_range.unwrap_or([-0.6, 0.6])),
            quantity: Some(self.quantity.unwrap_or_default()),
            sigma_star: self.sigma_star,
        }
    }
}

impl BulkFlowChoice {
    /// Defaults: fitted to η, σ_* fitted (`sigma_star` absent), outliers left out, the ΛCDM
    /// expectation on, σ8 and n_s of Planck 2018 (Planck Collaboration VI 2020, Table 2,
    /// TT,TE,EE+lowE+lensing+BAO; `physics::power::PowerParams::planck2018`); Ω_b absent means
    /// Planck 2018's Ω_b h² = 0.02242 held fixed at the run's h.
    pub fn filled(&self) -> BulkFlowChoice {
        let p = crate::physics::power::PowerParams::planck2018();
        BulkFlowChoice {
            quantity: Some(self.quantity.unwrap_or_default()),
            sigma_star: self.sigma_star,
            include_outliers: Some(
                self.include_outliers
                    .or(self.legacy_skip_outliers.map(|skip| !skip))
                    .unwrap_or(false),
            ),
            legacy_skip_outliers: None,
            lcdm: Some(self.lcdm.unwrap_or(true)),
            sigma8: Some(self.sigma8.unwrap_or(p.sigma8)),
            omega_b: self.omega_b,
            n_s: Some(self.n_s.unwrap_or(p.n_s)),
        }
    }
}

impl ExportChoice {
    /// Defaults: outliers left out; `output` as resolved by the plan.
    pub fn filled(&self) -> ExportChoice {
        ExportChoice {
            output: self.output.clone(),
            keep_outliers: Some(self.keep_outliers.unwrap_or(false)),
        }
    }
}
