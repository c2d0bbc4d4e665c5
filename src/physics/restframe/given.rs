//! The rest frame a catalogue says its redshifts are in (by flag, run file or column name).

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

/// The rest frame a catalogue gives its redshifts in.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum GivenFrame {
    /// Heliocentric (barycentric), as measured.
    #[default]
    Helio,
    /// Local standard of rest.
    Lsr,
    /// Galactic standard of rest.
    Gsr,
    /// Local Group barycentre.
    Lg,
    /// CMB rest frame.
    Cmb,
}

impl GivenFrame {
    pub const ALL: [GivenFrame; 5] = [
        GivenFrame::Helio,
        GivenFrame::Lsr,
        GivenFrame::Gsr,
        GivenFrame::Lg,
        GivenFrame::Cmb,
    ];

    /// Stable name, as in flags and outputs.
    pub fn name(self) -> &'static str {
        match self {
            GivenFrame::Helio => "helio",
            GivenFrame::Lsr => "lsr",
            GivenFrame::Gsr => "gsr",
            GivenFrame::Lg => "lg",
            GivenFrame::Cmb => "cmb",
        }
    }

    /// The frame a redshift column's name says, by its last word (`z_cmb`, `cz_lg`,
    /// `Vcmb`, `z_helio` …); `None` when the name says none.
    pub fn from_column_name(name: &str) -> Option<GivenFrame> {
        let lower = name.to_ascii_lowercase();
        let word = lower
            .rsplit(|c: char| !c.is_ascii_alphanumeric())
            .next()
            .unwrap_or("");
        GivenFrame::ALL
            .into_iter()
            .find(|f| {
                let n = f.name();
                word == n
                    || ((word.starts_with('z') || word.starts_with("cz") || word.starts_with('v'))
                        && word.ends_with(n)
                        && word.len() <= n.len() + 2)
            })
            .or_else(|| (word == "heliocentric" || word == "hel").then_some(GivenFrame::Helio))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Column names that say a rest frame.
    #[test]
    fn given_frame_from_column_names() {
        for (name, frame) in [
            ("z_cmb", Some(GivenFrame::Cmb)),
            ("cz_cmb", Some(GivenFrame::Cmb)),
            ("Vcmb", Some(GivenFrame::Cmb)),
            ("z_lg", Some(GivenFrame::Lg)),
            ("cz_gsr", Some(GivenFrame::Gsr)),
            ("z_lsr", Some(GivenFrame::Lsr)),
            ("z_helio", Some(GivenFrame::Helio)),
            ("z", None),
            ("redshift", None),
        ] {
            assert_eq!(GivenFrame::from_column_name(name), frame, "{name}");
        }
    }
}
