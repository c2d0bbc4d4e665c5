//! Flag groups shared by several subcommands. Each maps onto a plain settings struct of the
//! library, so flags and run files have equal power.

use clap::{Args, ValueEnum};

use crate::settings::{
    AngleUnit, BoostMethod, ColumnChoice, ConventionChoice, CosmologyChoice, DistanceKind,
    DlConvention, FrameChoice, GivenFrame, InputSkyFrame, LengthUnit, RedshiftUnit,
};

/// Cosmology flags.
#[derive(Debug, Clone, Default, Args)]
pub struct CosmologyFlags {
    /// Named parameter set: common (flat ΛCDM H0 = 70, Ω_m = 0.3; the default) or planck2018.
    #[arg(long, value_name = "NAME", help_heading = "Cosmology")]
    pub preset: Option<String>,
    /// Hubble constant, km/s/Mpc.
    #[arg(
        long,
        value_name = "H",
        allow_negative_numbers = true,
        help_heading = "Cosmology"
    )]
    pub h0: Option<f64>,
    /// Matter density Ω_m.
    #[arg(
        long = "omega-m",
        value_name = "OM",
        allow_negative_numbers = true,
        help_heading = "Cosmology"
    )]
    pub omega_m: Option<f64>,
    /// Dark-energy density Ω_de; omitted means flat (Ω_de = 1 − Ω_m − Ω_r).
    #[arg(
        long = "omega-de",
        value_name = "ODE",
        allow_negative_numbers = true,
        help_heading = "Cosmology"
    )]
    pub omega_de: Option<f64>,
    /// Radiation density Ω_r (default 0: radiation off).
    #[arg(
        long = "omega-r",
        value_name = "OR",
        allow_negative_numbers = true,
        help_heading = "Cosmology"
    )]
    pub omega_r: Option<f64>,
    /// Dark-energy equation of state today, CPL w0 (default −1).
    #[arg(
        long,
        value_name = "W0",
        allow_negative_numbers = true,
        help_heading = "Cosmology"
    )]
    pub w0: Option<f64>,
    /// CPL wa: w(a) = w0 + wa (1 − a) (default 0).
    #[arg(
        long,
        value_name = "WA",
        allow_negative_numbers = true,
        help_heading = "Cosmology"
    )]
    pub wa: Option<f64>,
}

impl CosmologyFlags {
    pub fn choice(&self) -> CosmologyChoice {
        CosmologyChoice {
            preset: self.preset.clone(),
            h0: self.h0,
            omega_m: self.omega_m,
            omega_de: self.omega_de,
            omega_r: self.omega_r,
            w0: self.w0,
            wa: self.wa,
        }
    }
}

/// Rest-frame flags.
#[derive(Debug, Clone, Default, Args)]
pub struct FrameFlags {
    /// Named CMB dipole measurement: planck2018 (default), planck2013, cobe-firas, or a cmb
    /// entry of --apex-file. See `flowsift frames`.
    #[arg(
        long,
        value_name = "NAME",
        conflicts_with = "apex",
        help_heading = "Rest frame"
    )]
    pub dipole: Option<String>,
    /// Your own CMB-frame apex: speed (km/s), Galactic l and b (degrees), e.g. 370,264,48.
    #[arg(long, value_name = "V,L,B", value_parser = parse_apex, allow_negative_numbers = true, help_heading = "Rest frame")]
    pub apex: Option<[f64; 3]>,
    /// How to move redshifts into the CMB frame: exact (relativistic boost, default) or
    /// legacy-additive (cz + v cos θ; only to reproduce older catalogues).
    #[arg(long, value_enum, value_name = "METHOD", help_heading = "Rest frame")]
    pub boost: Option<BoostArg>,
    /// A TOML file of your own apices ([[apex]] tables), selectable by name with --dipole,
    /// --local-group, --galactic-rest and --lsr. See demo-data/apices.example.toml.
    #[arg(long = "apex-file", value_name = "FILE", help_heading = "Rest frame")]
    pub apex_file: Option<std::path::PathBuf>,
    /// Local Group apex by name: courteau-vandenbergh1999 (default) or an entry of --apex-file.
    #[arg(long = "local-group", value_name = "NAME", help_heading = "Rest frame")]
    pub local_group: Option<String>,
    /// Galactic-rest apex by name: schoenrich2010-eilers2019 (default) or an entry of
    /// --apex-file.
    #[arg(
        long = "galactic-rest",
        value_name = "NAME",
        help_heading = "Rest frame"
    )]
    pub galactic_rest: Option<String>,
    /// LSR apex by name: schoenrich2010 (default) or an entry of --apex-file.
    #[arg(long, value_name = "NAME", help_heading = "Rest frame")]
    pub lsr: Option<String>,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum BoostArg {
    Exact,
    LegacyAdditive,
}

impl FrameFlags {
    pub fn choice(&self) -> FrameChoice {
        FrameChoice {
            dipole: self.dipole.clone(),
            apex: self.apex,
            boost: self.boost.map(|b| match b {
                BoostArg::Exact => BoostMethod::Exact,
                BoostArg::LegacyAdditive => BoostMethod::LegacyAdditive,
            }),
            local_group: self.local_group.clone(),
            galactic_rest: self.galactic_rest.clone(),
            lsr: self.lsr.clone(),
            apex_file: self.apex_file.as_ref().map(|p| p.display().to_string()),
            apices: vec![],
        }
    }
}

fn parse_apex(s: &str) -> Result<[f64; 3], String> {
    let v = parse_numbers(s, 3, "370,264,48 for V (km/s), l, b (deg)")?;
    Ok([v[0], v[1], v[2]])
}

/// Convention flags.
#[derive(Debug, Clone, Default, Args)]
pub struct ConventionFlags {
    /// Luminosity-distance convention: full (D_L = (1+z_helio)(1+z_pec) D_M(z_cos), the
    /// default), observed (D_L = (1+z_helio) D_M(z_cos)) or cosmological ((1+z_cos) D_M(z_cos)).
    #[arg(
        long = "dl-convention",
        value_enum,
        value_name = "NAME",
        help_heading = "Conventions"
    )]
    pub dl_convention: Option<DlConventionArg>,
    /// Unit of distances in and out: mpc (default) or mpc-over-h (h⁻¹ Mpc).
    #[arg(
        long = "length-unit",
        value_enum,
        value_name = "UNIT",
        help_heading = "Conventions"
    )]
    pub length_unit: Option<LengthUnitArg>,
    /// Intrinsic velocity dispersion σ_* added in quadrature to velocity errors, km/s.
    #[arg(
        long = "sigma-star",
        value_name = "KM_S",
        help_heading = "Conventions",
        allow_negative_numbers = true
    )]
    pub sigma_star: Option<f64>,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum DlConventionArg {
    Observed,
    Cosmological,
    Full,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum LengthUnitArg {
    Mpc,
    MpcOverH,
}

impl ConventionFlags {
    pub fn choice(&self) -> ConventionChoice {
        ConventionChoice {
            dl_convention: self.dl_convention.map(|c| match c {
                DlConventionArg::Observed => DlConvention::Observed,
                DlConventionArg::Cosmological => DlConvention::Cosmological,
                DlConventionArg::Full => DlConvention::Full,
            }),
            length_unit: self.length_unit.map(|u| match u {
                LengthUnitArg::Mpc => LengthUnit::Mpc,
                LengthUnitArg::MpcOverH => LengthUnit::MpcOverH,
            }),
            sigma_star: self.sigma_star,
        }
    }
}

/// Column flags of every command that reads a catalogue: where the position and the
/// redshift are.
#[derive(Debug, Clone, Default, Args)]
pub struct SkyRedshiftFlags {
    /// Longitude column: right ascension, l or SGL (default ra, or glon, or sgl).
    #[arg(
        long = "ra-column",
        visible_alias = "lon-column",
        value_name = "NAME",
        help_heading = "Columns"
    )]
    pub ra: Option<String>,
    /// Latitude column: declination, b or SGB (default dec, or glat, or sgb).
    #[arg(
        long = "dec-column",
        visible_alias = "lat-column",
        value_name = "NAME",
        help_heading = "Columns"
    )]
    pub dec: Option<String>,
    /// Sky frame of the positions: icrs, fk5 (J2000), fk4 (B1950), galactic, supergalactic
    /// (default: by the columns found).
    #[arg(
        long = "sky-frame",
        value_enum,
        value_name = "FRAME",
        help_heading = "Columns"
    )]
    pub sky_frame: Option<SkyFrameArg>,
    /// Rest frame of the redshift column: helio, lsr, gsr, lg or cmb (default: by its name,
    /// z_cmb → cmb …, else helio).
    #[arg(
        long = "z-frame",
        value_enum,
        value_name = "FRAME",
        help_heading = "Columns"
    )]
    pub z_frame: Option<ZFrameArg>,
    /// Unit of ra/dec: deg, rad or sexagesimal (default: deg, or sexagesimal for text).
    #[arg(
        long = "angle-unit",
        value_enum,
        value_name = "UNIT",
        help_heading = "Columns"
    )]
    pub angle_unit: Option<AngleArg>,
    /// Heliocentric redshift column (default z_helio, or cz_helio).
    #[arg(long = "z-column", value_name = "NAME", help_heading = "Columns")]
    pub z: Option<String>,
    /// Unit of the redshift column and its error: z or cz (km/s).
    #[arg(
        long = "z-unit",
        value_enum,
        value_name = "UNIT",
        help_heading = "Columns"
    )]
    pub z_unit: Option<ZUnitArg>,
    /// Redshift-error column (default z_err, or cz_err).
    #[arg(long = "z-err-column", value_name = "NAME", help_heading = "Columns")]
    pub z_err: Option<String>,
}

/// Column flags of the commands that read a distance.
#[derive(Debug, Clone, Default, Args)]
pub struct DistanceFlags {
    /// Distance column (default: whichever of mu, dl, dc, eta exists).
    #[arg(
        long = "distance-column",
        value_name = "NAME",
        help_heading = "Columns"
    )]
    pub distance: Option<String>,
    /// What the distance column holds: mu (mag), dl, dc or da (Mpc or Mpc/h), eta.
    #[arg(
        long = "distance-kind",
        value_enum,
        value_name = "KIND",
        help_heading = "Columns"
    )]
    pub distance_kind: Option<KindArg>,
    /// Distance-error column (default <distance>_err).
    #[arg(
        long = "distance-err-column",
        value_name = "NAME",
        help_heading = "Columns"
    )]
    pub distance_err: Option<String>,
    /// Group column (default group_id).
    #[arg(long = "group-column", value_name = "NAME", help_heading = "Columns")]
    pub group_id: Option<String>,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum AngleArg {
    Deg,
    Rad,
    Sexagesimal,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum ZUnitArg {
    Z,
    Cz,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum KindArg {
    Mu,
    Dl,
    Dc,
    Eta,
    Da,
}

/// Sky frames of input positions.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum SkyFrameArg {
    Icrs,
    Fk5,
    Fk4,
    Galactic,
    Supergalactic,
}

/// Rest frames of input redshifts.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum ZFrameArg {
    Helio,
    Lsr,
    Gsr,
    Lg,
    Cmb,
}

impl SkyRedshiftFlags {
    /// The flags as a column choice (distance roles left empty).
    pub fn choice(&self) -> ColumnChoice {
        ColumnChoice {
            ra: self.ra.clone(),
            dec: self.dec.clone(),
            z: self.z.clone(),
            z_unit: self.z_unit.map(|u| match u {
                ZUnitArg::Z => RedshiftUnit::Z,
                ZUnitArg::Cz => RedshiftUnit::Cz,
            }),
            z_err: self.z_err.clone(),
            angle_unit: self.angle_unit.map(|a| match a {
                AngleArg::Deg => AngleUnit::Deg,
                AngleArg::Rad => AngleUnit::Rad,
                AngleArg::Sexagesimal => AngleUnit::Sexagesimal,
            }),
            sky_frame: self.sky_frame.map(|f| match f {
                SkyFrameArg::Icrs => InputSkyFrame::Icrs,
                SkyFrameArg::Fk5 => InputSkyFrame::Fk5,
                SkyFrameArg::Fk4 => InputSkyFrame::Fk4,
                SkyFrameArg::Galactic => InputSkyFrame::Galactic,
                SkyFrameArg::Supergalactic => InputSkyFrame::Supergalactic,
            }),
            z_frame: self.z_frame.map(|f| match f {
                ZFrameArg::Helio => GivenFrame::Helio,
                ZFrameArg::Lsr => GivenFrame::Lsr,
                ZFrameArg::Gsr => GivenFrame::Gsr,
                ZFrameArg::Lg => GivenFrame::Lg,
                ZFrameArg::Cmb => GivenFrame::Cmb,
            }),
            ..Default::default()
        }
    }
}

impl DistanceFlags {
    /// The distance roles added to `base`.
    pub fn add_to(&self, base: ColumnChoice) -> ColumnChoice {
        ColumnChoice {
            distance: self.distance.clone(),
            distance_kind: self.distance_kind.map(|k| match k {
                KindArg::Mu => DistanceKind::Mu,
                KindArg::Dl => DistanceKind::Dl,
                KindArg::Da => DistanceKind::Da,
                KindArg::Dc => DistanceKind::Dc,
                KindArg::Eta => DistanceKind::Eta,
            }),
            distance_err: self.distance_err.clone(),
            group_id: self.group_id.clone(),
            ..base
        }
    }
}

/// Outlier flags (stand-alone `outliers`, and `velocities --outliers`).
#[derive(Debug, Clone, Default, Args)]
pub struct OutlierFlags {
    /// Residual threshold about the bulk flow, in σ (default 3.5).
    #[arg(
        id = "outlier_threshold",
        long = "outlier-threshold",
        value_name = "K",
        allow_negative_numbers = true,
        help_heading = "Outliers"
    )]
    pub threshold: Option<f64>,
    /// Neighbours for the consistency test (default 10; 0 turns it off).
    #[arg(
        id = "outlier_neighbours",
        long = "neighbours",
        value_name = "K",
        help_heading = "Outliers"
    )]
    pub neighbours: Option<usize>,
    /// Neighbour-consistency threshold, in σ (default 3.5).
    #[arg(
        id = "outlier_neighbour_threshold",
        long = "neighbour-threshold",
        value_name = "K",
        allow_negative_numbers = true,
        help_heading = "Outliers"
    )]
    pub neighbour_threshold: Option<f64>,
    /// Flag |v_pec| above this many km/s (default: no bound).
    #[arg(
        id = "outlier_max_speed",
        long = "max-speed",
        value_name = "KM_S",
        allow_negative_numbers = true,
        help_heading = "Outliers"
    )]
    pub max_speed: Option<f64>,
    /// Flag η outside LOW,HIGH (default -0.6,0.6).
    #[arg(id = "outlier_eta_range", long = "eta-range", value_name = "LOW,HIGH", value_parser = parse_range, allow_hyphen_values = true, help_heading = "Outliers")]
    pub eta_range: Option<[f64; 2]>,
    /// Quantity whose residuals are tested: eta (default) or velocity.
    #[arg(
        id = "outlier_quantity",
        long = "outlier-quantity",
        value_enum,
        value_name = "QUANTITY",
        help_heading = "Outliers"
    )]
    pub space: Option<SpaceArg>,
    /// σ_* for the outlier fit, km/s (default: fitted).
    #[arg(
        id = "outlier_sigma_star",
        long = "outlier-sigma-star",
        value_name = "KM_S",
        allow_negative_numbers = true,
        help_heading = "Outliers"
    )]
    pub sigma_star: Option<f64>,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum SpaceArg {
    Eta,
    Velocity,
}

impl SpaceArg {
    pub fn space(self) -> crate::settings::FitSpace {
        match self {
            SpaceArg::Eta => crate::settings::FitSpace::Eta,
            SpaceArg::Velocity => crate::settings::FitSpace::Velocity,
        }
    }
}

impl OutlierFlags {
    pub fn choice(&self) -> crate::settings::OutlierChoice {
        crate::settings::OutlierChoice {
            threshold: self.threshold,
            neighbours: self.neighbours,
            neighbour_threshold: self.neighbour_threshold,
            max_speed: self.max_speed,
            eta_range: self.eta_range,
            quantity: self.space.map(SpaceArg::space),
            sigma_star: self.sigma_star,
        }
    }
}

/// Bulk-flow flags (stand-alone `bulkflow`, and `velocities --bulk-flow`).
#[derive(Debug, Clone, Default, Args)]
pub struct BulkFlowFlags {
    /// Quantity the flow is fitted to: eta (default) or velocity.
    #[arg(
        id = "flow_quantity",
        long = "flow-quantity",
        value_enum,
        value_name = "QUANTITY",
        help_heading = "Bulk flow"
    )]
    pub space: Option<SpaceArg>,
    /// σ_* of the fit, km/s (default: fitted).
    #[arg(
        id = "flow_sigma_star",
        long = "flow-sigma-star",
        value_name = "KM_S",
        allow_negative_numbers = true,
        help_heading = "Bulk flow"
    )]
    pub sigma_star: Option<f64>,
    /// Use rows flagged as outliers too.
    #[arg(
        id = "flow_include_outliers",
        long = "include-outliers",
        help_heading = "Bulk flow"
    )]
    pub include_outliers: bool,
    /// Skip the ΛCDM expectation.
    #[arg(id = "flow_no_lcdm", long = "no-lcdm", help_heading = "Bulk flow")]
    pub no_lcdm: bool,
    /// σ8 of the linear power spectrum (default: Planck 2018).
    #[arg(
        id = "flow_sigma8",
        long = "sigma8",
        value_name = "S8",
        help_heading = "Bulk flow"
    )]
    pub sigma8: Option<f64>,
    /// Ω_b for the transfer function (default: Planck 2018).
    #[arg(
        id = "flow_omega_b",
        long = "omega-b",
        value_name = "OB",
        help_heading = "Bulk flow"
    )]
    pub omega_b: Option<f64>,
    /// Spectral index n_s (default: Planck 2018).
    #[arg(
        id = "flow_n_s",
        long = "n-s",
        value_name = "NS",
        help_heading = "Bulk flow"
    )]
    pub n_s: Option<f64>,
}

impl BulkFlowFlags {
    pub fn choice(&self) -> crate::settings::BulkFlowChoice {
        crate::settings::BulkFlowChoice {
            quantity: self.space.map(SpaceArg::space),
            sigma_star: self.sigma_star,
            include_outliers: self.include_outliers.then_some(true),
            legacy_skip_outliers: None,
            lcdm: self.no_lcdm.then_some(false),
            sigma8: self.sigma8,
            omega_b: self.omega_b,
            n_s: self.n_s,
        }
    }
}

/// A vector flag written `X,Y,Z` (three numbers, commas, no spaces needed; a leading minus
/// sign is fine).
pub fn parse_vector3(text: &str) -> Result<[f64; 3], String> {
    let v = parse_numbers(text, 3, "150,-200,80")?;
    Ok([v[0], v[1], v[2]])
}

/// A range flag written `LOW,HIGH`.
pub fn parse_range(text: &str) -> Result<[f64; 2], String> {
    let v = parse_numbers(text, 2, "-0.6,0.6")?;
    Ok([v[0], v[1]])
}

/// `count` finite numbers separated by commas.
fn parse_numbers(text: &str, count: usize, example: &str) -> Result<Vec<f64>, String> {
    let parts: Vec<&str> = text.split(',').map(str::trim).collect();
    if parts.len() != count {
        let words = match count {
            2 => "two".to_string(),
            3 => "three".to_string(),
            n => n.to_string(),
        };
        return Err(format!(
            "expected {words} numbers separated by commas (e.g. {example}), got '{text}'"
        ));
    }
    parts
        .iter()
        .map(|part| {
            part.parse::<f64>()
                .ok()
                .filter(|x| x.is_finite())
                .ok_or_else(|| format!("'{part}' in '{text}' is not a finite number"))
        })
        .collect()
}
