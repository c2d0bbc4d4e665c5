//! Every column flowsift writes, in one table: name, unit, IVOA UCD and a description. The
//! writers take units and UCDs from here, the reader of earlier runs knows which columns are
//! derived from here, and `velocities --help` lists them from here.

use super::ColumnMeta;

/// A column's unit.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum UnitOf {
    /// No unit (dimensionless, text or flags).
    None,
    Fixed(&'static str),
    /// The run's length unit (Mpc or Mpc/h).
    RunLength,
}

/// One column flowsift writes.
#[derive(Debug, Clone, Copy)]
pub struct ColumnSpec {
    pub name: &'static str,
    pub unit: UnitOf,
    pub ucd: &'static str,
    pub description: &'static str,
}

const fn col(
    name: &'static str,
    unit: UnitOf,
    ucd: &'static str,
    description: &'static str,
) -> ColumnSpec {
    ColumnSpec {
        name,
        unit,
        ucd,
        description,
    }
}

use UnitOf::{Fixed, None as NoUnit, RunLength};

/// The derived columns of every `velocities` row, in output order.
pub const DERIVED: [ColumnSpec; 18] = [
    col(
        "glon",
        Fixed("deg"),
        "pos.galactic.lon",
        "Galactic longitude",
    ),
    col(
        "glat",
        Fixed("deg"),
        "pos.galactic.lat",
        "Galactic latitude",
    ),
    col(
        "sgl",
        Fixed("deg"),
        "pos.supergalactic.lon",
        "supergalactic longitude",
    ),
    col(
        "sgb",
        Fixed("deg"),
        "pos.supergalactic.lat",
        "supergalactic latitude",
    ),
    col(
        "sgx",
        RunLength,
        "pos.cartesian.x",
        "supergalactic X at D_C(z_cos)",
    ),
    col(
        "sgy",
        RunLength,
        "pos.cartesian.y",
        "supergalactic Y at D_C(z_cos)",
    ),
    col(
        "sgz",
        RunLength,
        "pos.cartesian.z",
        "supergalactic Z at D_C(z_cos)",
    ),
    col(
        "z_cmb",
        NoUnit,
        "src.redshift",
        "CMB-frame redshift (exact boost)",
    ),
    col(
        "z_cos",
        NoUnit,
        "src.redshift",
        "cosmological redshift implied by the distance",
    ),
    col(
        "z_cos_err",
        NoUnit,
        "stat.error;src.redshift",
        "first-order error of z_cos",
    ),
    col(
        "z_pec",
        NoUnit,
        "src.redshift",
        "peculiar redshift, (1 + z_cmb)/(1 + z_cos) − 1",
    ),
    col(
        "v_pec",
        Fixed("km/s"),
        "phys.veloc",
        "peculiar velocity (relativistic Doppler of z_pec)",
    ),
    col(
        "v_pec_err",
        Fixed("km/s"),
        "stat.error;phys.veloc",
        "first-order error of v_pec (with σ_*)",
    ),
    col(
        "eta",
        NoUnit,
        // η is a (log) ratio of two distances, not a distance: UCD1+ `arith.ratio` qualified by
        // `pos.distance` (IVOA UCD1+ controlled vocabulary; the word list from memory).
        "arith.ratio;pos.distance",
        "log-distance ratio log10(D_C(z_cmb)/D_C(z_cos))",
    ),
    col(
        "eta_err",
        NoUnit,
        "stat.error;arith.ratio;pos.distance",
        "first-order error of eta",
    ),
    col(
        "d_c",
        RunLength,
        "pos.distance",
        "comoving distance D_C(z_cos)",
    ),
    col(
        "v_rec",
        Fixed("km/s"),
        "phys.veloc",
        "recession velocity today, H0·D_C(z_cos) (expansion; not bounded by c)",
    ),
    col(
        "v_rec_err",
        Fixed("km/s"),
        "stat.error;phys.veloc",
        "first-order error of v_rec, c·σ(z_cos)/E(z_cos)",
    ),
];

/// The status of every row.
pub const STATUS: ColumnSpec = col(
    "status",
    NoUnit,
    "meta.code.status",
    "ok, or why the row has no velocity",
);

/// Columns the sample stages and Monte Carlo add.
pub const STAGE: [ColumnSpec; 11] = [
    col(
        "v_pec_mc_median",
        Fixed("km/s"),
        "phys.veloc;stat.median",
        "Monte Carlo median of v_pec",
    ),
    col(
        "v_pec_mc_p16",
        Fixed("km/s"),
        "phys.veloc;stat.min",
        "Monte Carlo 15.87th percentile of v_pec",
    ),
    col(
        "v_pec_mc_p84",
        Fixed("km/s"),
        "phys.veloc;stat.max",
        "Monte Carlo 84.13th percentile of v_pec",
    ),
    col(
        "v_pec_wf",
        Fixed("km/s"),
        "phys.veloc",
        "Watkins & Feldman (2015) estimate of v_pec, for comparison (--watkins-feldman)",
    ),
    col(
        "v_pec_wf_err",
        Fixed("km/s"),
        "stat.error;phys.veloc",
        "its first-order error (redshift and distance errors, no σ_*)",
    ),
    col(
        "mc_failed_draws",
        NoUnit,
        "meta.number",
        "Monte Carlo draws without a solution",
    ),
    col(
        "malmquist_factor",
        NoUnit,
        "arith.factor",
        "Malmquist factor E[r|d]/d",
    ),
    col(
        "distance_malmquist",
        NoUnit,
        "pos.distance",
        "distance corrected for Malmquist bias (input's kind and unit)",
    ),
    col("outlier", NoUnit, "meta.code.qual", "flagged as an outlier"),
    col(
        "outlier_reason",
        NoUnit,
        "meta.note",
        "why: residual, neighbours, speed_limit, eta_range",
    ),
    col(
        "group_index",
        NoUnit,
        "meta.id.parent",
        "row of the member's group in the group table",
    ),
];

/// Columns of the group table besides the derived ones.
pub const GROUP_TABLE: [ColumnSpec; 4] = [
    col(
        "group_id",
        NoUnit,
        "meta.id;src.groupMembership",
        "group identifier",
    ),
    col("n_members", NoUnit, "meta.number", "members combined"),
    col(
        "ra",
        Fixed("deg"),
        "pos.eq.ra",
        "mean right ascension of the members",
    ),
    col(
        "dec",
        Fixed("deg"),
        "pos.eq.dec",
        "mean declination of the members",
    ),
];

/// The heliocentric redshift `velocities` and `correct` add when the input's redshift was
/// in another rest frame (not stripped from an earlier output: a re-run reads it as its
/// heliocentric input).
pub const GIVEN_FRAME_Z_HELIO: ColumnSpec = col(
    "z_helio",
    NoUnit,
    "src.redshift",
    "heliocentric redshift derived from the input's rest frame by the exact inverse boost",
);

/// Columns `correct` adds.
pub const CORRECTION: [ColumnSpec; 6] = [
    col(
        "v_model",
        Fixed("km/s"),
        "phys.veloc",
        "model radial velocity at the self-consistent position",
    ),
    col(
        "z_cos_model",
        NoUnit,
        "src.redshift",
        "cosmological redshift with the model velocity removed",
    ),
    col(
        "z_cos_model_err",
        NoUnit,
        "stat.error;src.redshift",
        "its error (σ_v and the redshift error)",
    ),
    col(
        "mu_err_z_cos",
        Fixed("mag"),
        "stat.error;phot.mag.distMod",
        "distance-modulus error implied by z_cos_model_err (σ_v and the redshift error)",
    ),
    col(
        "field_distance",
        RunLength,
        "pos.distance",
        "self-consistent distance in the model's length unit",
    ),
    col(
        "field_flag",
        NoUnit,
        "meta.code.qual",
        "ok, outside_grid, multiple_solutions, no_solution, bad_input",
    ),
];

/// The columns `audit -o` writes: one residual column per audited column (`audit_<column>`,
/// its metadata from [`audit_residual_meta`]) and the row's verdict.
pub const AUDIT: [ColumnSpec; 2] = [
    col(
        "audit_residual",
        UnitOf::RunLength,
        "stat.fit.residual",
        "the audited column minus its best recomputation",
    ),
    col(
        "audit_flag",
        UnitOf::None,
        "meta.code.qual",
        "ok (every audited column reproduced by its best convention), COLUMN:other (another candidate reproduces it), COLUMN:unexplained (none does), not_audited; several separated by ';'",
    ),
];

/// The metadata of `audit_<column>`: the residual in the column's unit (`unit`, empty when
/// dimensionless), described with the candidate it is measured from.
pub fn audit_residual_meta(column: &str, unit: &str, best: &str) -> ColumnMeta {
    let mut m = AUDIT[0].meta(unit);
    if unit.is_empty() {
        m.unit = None;
    }
    m.description = Some(format!("{column} minus its best recomputation ({best})"));
    m
}

/// The spec of a column flowsift writes.
pub fn spec(name: &str) -> Option<&'static ColumnSpec> {
    DERIVED
        .iter()
        .chain(std::iter::once(&STATUS))
        .chain(STAGE.iter())
        .chain(GROUP_TABLE.iter())
        .chain(CORRECTION.iter())
        .chain(std::iter::once(&GIVEN_FRAME_Z_HELIO))
        .chain(AUDIT.iter())
        .find(|c| c.name == name)
}

impl ColumnSpec {
    /// The metadata written with the column; `length` is the run's length-unit label.
    pub fn meta(&self, length: &str) -> ColumnMeta {
        let unit = match self.unit {
            UnitOf::None => None,
            UnitOf::Fixed(u) => Some(u.to_string()),
            UnitOf::RunLength => Some(length.to_string()),
        };
        ColumnMeta {
            unit,
            ucd: Some(self.ucd.to_string()),
            description: Some(self.description.to_string()),
        }
    }
}

/// The metadata of a named column (panics on a name not in the table: a bug the tests catch).
pub fn meta_of(name: &str, length: &str) -> ColumnMeta {
    spec(name)
        .unwrap_or_else(|| panic!("column {name} is not in the column schema"))
        .meta(length)
}

/// The columns `velocities` writes, for `--help`.
pub fn help_text() -> String {
    let mut s = String::from("Output columns (besides every input column):\n");
    for c in DERIVED
        .iter()
        .chain(std::iter::once(&STATUS))
        .chain(STAGE.iter())
    {
        let unit = match c.unit {
            UnitOf::None => String::new(),
            UnitOf::Fixed(u) => format!(" [{u}]"),
            UnitOf::RunLength => " [Mpc or Mpc/h]".into(),
        };
        s.push_str(&format!("  {:<18} {}{unit}\n", c.name, c.description));
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_unique() {
        let mut names: Vec<&str> = DERIVED
            .iter()
            .chain(std::iter::once(&STATUS))
            .chain(STAGE.iter())
            .chain(GROUP_TABLE.iter())
            .chain(CORRECTION.iter())
            .map(|c| c.name)
            .collect();
        let n = names.len();
        names.sort();
        names.dedup();
        assert_eq!(names.len(), n);
    }
}
