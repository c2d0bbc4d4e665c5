//! The flags of `bulkflow` that ask for minimum-variance moments or a monopole term, and
//! their run.

use clap::{Args, ValueEnum};

use flowsift::run::flow_moments::{
    FlowMomentsChoice, FlowWeights, DEFAULT_IDEAL_POINTS, DEFAULT_WINDOW_RADIUS,
};

/// Weights of the reported moments.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum WeightsArg {
    Ml,
    Mv,
}

/// Flow-moment flags of `bulkflow`.
#[derive(Debug, Clone, Default, Args)]
pub struct FlowMomentsFlags {
    /// Also report minimum-variance moments (mv; Watkins, Feldman & Hudson 2009) beside the
    /// maximum-likelihood flow (ml, the default).
    #[arg(long, value_enum, value_name = "W", help_heading = "Flow moments")]
    pub weights: Option<WeightsArg>,
    /// Gaussian radial scale R_I of the ideal survey of the mv moments, h⁻¹ Mpc (default 50).
    #[arg(
        long = "window-radius",
        value_name = "MPC_H",
        help_heading = "Flow moments"
    )]
    pub window_radius: Option<f64>,
    /// Points of the ideal survey (default 2000).
    #[arg(long = "ideal-points", value_name = "N", help_heading = "Flow moments")]
    pub ideal_points: Option<usize>,
    /// Upper wavenumber of the correlations in the mv weights, h/Mpc (default 1000: all).
    #[arg(long, value_name = "K", help_heading = "Flow moments")]
    pub kmax: Option<f64>,
    /// Add a monopole (zero-point offset of the distance moduli) to the ML fit.
    #[arg(long, help_heading = "Flow moments")]
    pub monopole: bool,
}

impl FlowMomentsFlags {
    /// Whether any of these flags asks for more than the plain ML flow.
    pub fn requested(&self) -> bool {
        self.monopole || self.weights == Some(WeightsArg::Mv)
    }

    pub fn choice(&self) -> FlowMomentsChoice {
        FlowMomentsChoice {
            weights: match self.weights {
                Some(WeightsArg::Mv) => FlowWeights::Mv,
                _ => FlowWeights::Ml,
            },
            window_radius: Some(self.window_radius.unwrap_or(DEFAULT_WINDOW_RADIUS)),
            ideal_points: self.ideal_points.unwrap_or(DEFAULT_IDEAL_POINTS),
            ideal_seed: 1,
            k_max: self.kmax,
            monopole: self.monopole,
        }
    }
}

/// Print the new parts of the report.
pub fn print(m: &flowsift::run::flow_moments::FlowMomentsReport) {
    if let Some(mv) = &m.minimum_variance {
        println!(
            "  minimum variance (R_I = {} h⁻¹ Mpc): ({:.0} ± {:.0}, {:.0} ± {:.0}, {:.0} ± {:.0}) km/s (noise + cosmic variance)",
            mv.window_radius,
            mv.v[0],
            (mv.noise_cov[0][0] + mv.cosmic_cov[0][0]).sqrt(),
            mv.v[1],
            (mv.noise_cov[1][1] + mv.cosmic_cov[1][1]).sqrt(),
            mv.v[2],
            (mv.noise_cov[2][2] + mv.cosmic_cov[2][2]).sqrt(),
        );
        println!(
            "    ΛCDM rms of the ideal window ({:.0}, {:.0}, {:.0}) km/s; χ² = {:.2} (3 dof), p = {:.3}",
            mv.ideal_lcdm_rms[0], mv.ideal_lcdm_rms[1], mv.ideal_lcdm_rms[2], mv.chi2, mv.probability
        );
    }
    if let Some(mo) = &m.monopole {
        println!(
            "  with a monopole: ({:.0}, {:.0}, {:.0}) km/s, zero point {:+.4} ± {:.4} mag",
            mo.v[0], mo.v[1], mo.v[2], mo.zero_point, mo.zero_point_err
        );
    }
    for c in &m.cautions {
        println!("note: {c}");
    }
}
