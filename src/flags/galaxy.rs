//! The flags of `flowsift galaxy` (one object), for the command line and the Python package.

use clap::Args;

use crate::plan::galaxy::GalaxyOrder;
use crate::settings::{DistanceKind, RunConfig};

use super::options::{ConventionFlags, CosmologyFlags, FrameFlags};

/// One galaxy: position, heliocentric redshift and exactly one distance.
#[derive(Debug, Args)]
#[command(group(clap::ArgGroup::new("distance").required(true).multiple(false)))]
#[command(
    after_help = "Example:\n  flowsift galaxy --ra 150.1 --dec 2.2 --z-helio 0.0231 --mu 34.85 --mu-err 0.4 --json"
)]
pub struct GalaxyArgs {
    /// Right ascension (ICRS): degrees, or sexagesimal hours like 10:00:24.0.
    #[arg(long, allow_hyphen_values = true)]
    pub ra: String,
    /// Declination (ICRS): degrees, or sexagesimal like -02:12:00.0.
    #[arg(long, allow_hyphen_values = true)]
    pub dec: String,
    /// Heliocentric redshift.
    #[arg(
        long = "z-helio",
        value_name = "Z",
        allow_negative_numbers = true,
        required_unless_present = "cz_helio",
        conflicts_with = "cz_helio"
    )]
    pub z_helio: Option<f64>,
    /// Heliocentric recession velocity c·z, km/s (instead of --z-helio).
    #[arg(long = "cz-helio", value_name = "KM_S", allow_negative_numbers = true)]
    pub cz_helio: Option<f64>,
    /// 1σ error of the heliocentric redshift.
    #[arg(long = "z-err", value_name = "Z", allow_negative_numbers = true)]
    pub z_err: Option<f64>,
    /// Distance modulus μ, mag.
    #[arg(
        long,
        value_name = "MAG",
        allow_negative_numbers = true,
        group = "distance"
    )]
    pub mu: Option<f64>,
    /// Luminosity distance (Mpc, or h⁻¹ Mpc with --length-unit mpc-over-h).
    #[arg(
        long,
        value_name = "MPC",
        allow_negative_numbers = true,
        group = "distance"
    )]
    pub dl: Option<f64>,
    /// Line-of-sight comoving distance (Mpc, or h⁻¹ Mpc).
    #[arg(
        long,
        value_name = "MPC",
        allow_negative_numbers = true,
        group = "distance"
    )]
    pub dc: Option<f64>,
    /// Angular-diameter distance (Mpc, or h⁻¹ Mpc), e.g. from a size-based indicator.
    #[arg(
        long,
        value_name = "MPC",
        allow_negative_numbers = true,
        group = "distance"
    )]
    pub da: Option<f64>,
    /// Log-distance ratio η = log10(D_C(z_cmb)/D_C(z_cos)).
    #[arg(
        long,
        value_name = "ETA",
        allow_negative_numbers = true,
        group = "distance"
    )]
    pub eta: Option<f64>,
    /// 1σ error of μ, mag.
    #[arg(
        long = "mu-err",
        value_name = "MAG",
        requires = "mu",
        allow_negative_numbers = true
    )]
    pub mu_err: Option<f64>,
    /// 1σ error of --dl.
    #[arg(
        long = "dl-err",
        value_name = "MPC",
        requires = "dl",
        allow_negative_numbers = true
    )]
    pub dl_err: Option<f64>,
    /// 1σ error of --dc.
    #[arg(
        long = "dc-err",
        value_name = "MPC",
        requires = "dc",
        allow_negative_numbers = true
    )]
    pub dc_err: Option<f64>,
    /// 1σ error of --da.
    #[arg(
        long = "da-err",
        value_name = "MPC",
        requires = "da",
        allow_negative_numbers = true
    )]
    pub da_err: Option<f64>,
    /// 1σ error of --eta.
    #[arg(
        long = "eta-err",
        value_name = "ETA",
        requires = "eta",
        allow_negative_numbers = true
    )]
    pub eta_err: Option<f64>,
    #[command(flatten)]
    pub cosmology: CosmologyFlags,
    #[command(flatten)]
    pub frame: FrameFlags,
    #[command(flatten)]
    pub conventions: ConventionFlags,
    /// Print one JSON object instead of a table.
    #[arg(long)]
    pub json: bool,
}

impl GalaxyArgs {
    /// The order these flags give: the one distance given, with its error.
    pub fn order(&self) -> Result<GalaxyOrder, String> {
        let a = self;
        let (kind, value, error) = match (a.mu, a.dl, a.dc, a.da, a.eta) {
            (Some(v), ..) => (DistanceKind::Mu, v, a.mu_err),
            (_, Some(v), ..) => (DistanceKind::Dl, v, a.dl_err),
            (_, _, Some(v), ..) => (DistanceKind::Dc, v, a.dc_err),
            (_, _, _, Some(v), _) => (DistanceKind::Da, v, a.da_err),
            (.., Some(v)) => (DistanceKind::Eta, v, a.eta_err),
            _ => return Err("give one distance: --mu, --dl, --dc, --da or --eta".into()),
        };
        Ok(GalaxyOrder {
            ra: a.ra.clone(),
            dec: a.dec.clone(),
            z_helio: a.z_helio,
            cz_helio: a.cz_helio,
            z_err: a.z_err,
            distance_kind: kind,
            distance: value,
            distance_err: error,
            flags: RunConfig {
                cosmology: a.cosmology.choice(),
                frame: a.frame.choice(),
                conventions: a.conventions.choice(),
                ..Default::default()
            },
        })
    }
}
