//! What a derived column holds, found by its name or its UCD, with its natural unit and
//! the resolution below which two recomputations cannot be told apart.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

/// The quantity a derived column holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum Quantity {
    /// CMB-frame redshift z.
    ZCmb,
    /// CMB-frame cz, km/s.
    CzCmb,
    /// Local-Group-frame redshift z.
    ZLg,
    /// Local-Group-frame cz, km/s.
    CzLg,
    /// Radial peculiar velocity, km/s.
    VPec,
    /// Log-distance ratio η = log10(D_C(z_cmb)/D_C(z_cos)).
    Eta,
    /// Cosmological ("Hubble-diagram") redshift implied by the distance.
    ZCos,
    /// The same as cz, km/s.
    CzCos,
    /// A distance in Mpc or h⁻¹ Mpc.
    Distance,
}

/// Every quantity, in the order columns are audited.
pub const QUANTITIES: [Quantity; 9] = [
    Quantity::ZCmb,
    Quantity::CzCmb,
    Quantity::ZLg,
    Quantity::CzLg,
    Quantity::VPec,
    Quantity::Eta,
    Quantity::ZCos,
    Quantity::CzCos,
    Quantity::Distance,
];

impl Quantity {
    /// Stable name (as `--check COLUMN:QUANTITY` takes it).
    pub fn name(self) -> &'static str {
        match self {
            Quantity::ZCmb => "z-cmb",
            Quantity::CzCmb => "cz-cmb",
            Quantity::ZLg => "z-lg",
            Quantity::CzLg => "cz-lg",
            Quantity::VPec => "v-pec",
            Quantity::Eta => "eta",
            Quantity::ZCos => "z-cos",
            Quantity::CzCos => "cz-cos",
            Quantity::Distance => "distance",
        }
    }

    /// The quantity named `name`.
    pub fn parse(name: &str) -> Option<Quantity> {
        QUANTITIES
            .into_iter()
            .find(|q| q.name().eq_ignore_ascii_case(name.trim()))
    }

    /// The unit residuals are given in.
    pub fn unit(self) -> &'static str {
        match self {
            Quantity::ZCmb | Quantity::ZLg | Quantity::ZCos => "",
            Quantity::CzCmb | Quantity::CzLg | Quantity::VPec | Quantity::CzCos => "km/s",
            Quantity::Eta => "dex",
            Quantity::Distance => "Mpc or Mpc/h (as the column)",
        }
    }

    /// Residuals up to this are at the resolution of a catalogue column (a cz rounded to
    /// 1 km/s, z to 1e-5 or so, η to 1e-4, a distance to 0.01 Mpc): no finer agreement is
    /// asked of a candidate. The audit widens it to five robust standard deviations of the
    /// best candidate's residuals when those are larger.
    pub fn resolution(self) -> f64 {
        match self {
            Quantity::ZCmb | Quantity::ZLg | Quantity::ZCos => 5e-6,
            Quantity::CzCmb | Quantity::CzLg | Quantity::VPec | Quantity::CzCos => 1.0,
            Quantity::Eta => 1e-4,
            Quantity::Distance => 0.01,
        }
    }

    /// Does it need a distance input?
    pub fn needs_distance(self) -> bool {
        matches!(
            self,
            Quantity::VPec | Quantity::Eta | Quantity::ZCos | Quantity::CzCos | Quantity::Distance
        )
    }

    /// The column names it is recognised by (compared case-insensitively).
    fn names(self) -> &'static [&'static str] {
        match self {
            Quantity::ZCmb => &["z_cmb", "zcmb"],
            Quantity::CzCmb => &["cz_cmb", "czcmb", "v_cmb", "vcmb"],
            Quantity::ZLg => &["z_lg", "zlg"],
            Quantity::CzLg => &["cz_lg", "czlg", "v_lg", "vlg"],
            Quantity::VPec => &["v_pec", "vpec"],
            Quantity::Eta => &["eta", "log_distance_ratio"],
            Quantity::ZCos => &["z_cos", "zcos", "z_hd", "zhd"],
            Quantity::CzCos => &["cz_cos", "czcos", "cz_hd", "czhd"],
            Quantity::Distance => &["d", "dist", "distance", "d_mpc", "dl", "dc", "da"],
        }
    }

    /// The UCD flowsift writes for it (an IVOA UCD1+ string), where one is specific enough.
    fn ucd(self) -> Option<&'static str> {
        match self {
            Quantity::Distance => Some("pos.distance"),
            _ => None,
        }
    }
}

/// One column of a table with its UCD, as discovery sees it.
#[derive(Debug, Clone)]
pub struct ColumnInfo<'a> {
    pub name: &'a str,
    pub ucd: Option<&'a str>,
}

/// The derived columns among `columns` (by name, else by a UCD exactly one column carries),
/// leaving out `inputs` (the columns read as inputs), each once.
pub fn discover(columns: &[ColumnInfo<'_>], inputs: &[&str]) -> Vec<(String, Quantity)> {
    let is_input = |n: &str| inputs.iter().any(|i| i.eq_ignore_ascii_case(n));
    let mut found: Vec<(String, Quantity)> = vec![];
    for q in QUANTITIES {
        for c in columns {
            if is_input(c.name) || found.iter().any(|(n, _)| n == c.name) {
                continue;
            }
            if q.names().iter().any(|n| n.eq_ignore_ascii_case(c.name)) {
                found.push((c.name.to_string(), q));
            }
        }
        if let Some(u) = q.ucd() {
            let hits: Vec<_> = columns
                .iter()
                .filter(|c| {
                    !is_input(c.name)
                        && c.ucd.is_some_and(|x| x.trim().eq_ignore_ascii_case(u))
                        && !found.iter().any(|(n, _)| n == c.name)
                })
                .collect();
            if hits.len() == 1 {
                found.push((hits[0].name.to_string(), q));
            }
        }
    }
    found
}

/// The quantity a column's name says, for `--check COLUMN` without a quantity.
pub fn by_name(name: &str) -> Option<Quantity> {
    QUANTITIES
        .into_iter()
        .find(|q| q.names().iter().any(|n| n.eq_ignore_ascii_case(name)))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn discovery_skips_inputs_and_finds_each_once() {
        let cols = [
            ColumnInfo {
                name: "ra",
                ucd: None,
            },
            ColumnInfo {
                name: "cz_helio",
                ucd: None,
            },
            ColumnInfo {
                name: "CZ_CMB",
                ucd: None,
            },
            ColumnInfo {
                name: "dc",
                ucd: None,
            },
            ColumnInfo {
                name: "eta",
                ucd: None,
            },
            ColumnInfo {
                name: "dist_hmpc",
                ucd: Some("pos.distance"),
            },
        ];
        let found = discover(&cols, &["ra", "cz_helio", "dc"]);
        assert_eq!(
            found,
            vec![
                ("CZ_CMB".to_string(), Quantity::CzCmb),
                ("eta".to_string(), Quantity::Eta),
                ("dist_hmpc".to_string(), Quantity::Distance),
            ]
        );
        assert_eq!(Quantity::parse("V-PEC"), Some(Quantity::VPec));
        assert_eq!(by_name("zcmb"), Some(Quantity::ZCmb));
    }
}
