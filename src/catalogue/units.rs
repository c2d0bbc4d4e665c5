//! The one reader of unit strings (FITS TUNITn and BUNIT, the units a Parquet file or a
//! sidecar carries). Spellings follow the FITS standard 4.0 §4.3 (`km/s`, `km s-1`,
//! `km.s**-1` …) and the forms common in catalogues (`Mpc/h`, `h-1 Mpc`).

/// A unit flowsift knows what to do with.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Unit {
    KmPerS,
    Mpc,
    /// h⁻¹ Mpc, h = H0 / (100 km/s/Mpc).
    MpcOverH,
    Mag,
    Deg,
    Rad,
    /// No unit (blank, `1`, `-`) or `dex`.
    Dimensionless,
    /// Anything else, as written.
    Other(String),
}

impl Unit {
    /// How the unit is written in messages.
    pub fn label(&self) -> &str {
        match self {
            Unit::KmPerS => "km/s",
            Unit::Mpc => "Mpc",
            Unit::MpcOverH => "Mpc/h",
            Unit::Mag => "mag",
            Unit::Deg => "deg",
            Unit::Rad => "rad",
            Unit::Dimensionless => "no unit",
            Unit::Other(s) => s,
        }
    }

    /// A length (Mpc or h⁻¹ Mpc).
    pub fn is_length(&self) -> bool {
        matches!(self, Unit::Mpc | Unit::MpcOverH)
    }
}

/// Read a unit string.
pub fn parse_unit(text: &str) -> Unit {
    let compact: String = text
        .trim()
        .to_ascii_lowercase()
        .replace("**", "")
        .chars()
        .filter(|c| !matches!(c, ' ' | '.' | '^' | '*' | '[' | ']'))
        .collect();
    match compact.as_str() {
        "km/s" | "kms-1" | "km/sec" | "kmsec-1" => Unit::KmPerS,
        "mpc" => Unit::Mpc,
        "mpc/h" | "h-1mpc" | "mpch-1" => Unit::MpcOverH,
        "mag" | "mags" => Unit::Mag,
        "deg" | "degree" | "degrees" => Unit::Deg,
        "rad" | "radian" | "radians" => Unit::Rad,
        "" | "1" | "-" | "dex" => Unit::Dimensionless,
        _ => Unit::Other(text.trim().to_string()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Spellings of the FITS standard 4.0 §4.3 (product with space or '.', powers with or
    /// without '**' or '^') and common catalogue forms.
    #[test]
    fn spellings() {
        for s in ["km/s", "km s-1", "km.s**-1", "KM/S", "km s^-1", "km/sec"] {
            assert_eq!(parse_unit(s), Unit::KmPerS, "{s}");
        }
        for s in ["Mpc/h", "h-1 Mpc", "h^-1 Mpc", "Mpc h-1", "mpc.h**-1"] {
            assert_eq!(parse_unit(s), Unit::MpcOverH, "{s}");
        }
        assert_eq!(parse_unit("Mpc"), Unit::Mpc);
        assert_eq!(parse_unit(" mag "), Unit::Mag);
        assert_eq!(parse_unit("deg"), Unit::Deg);
        assert_eq!(parse_unit("rad"), Unit::Rad);
        assert_eq!(parse_unit(""), Unit::Dimensionless);
        assert_eq!(parse_unit("Mpc/h70"), Unit::Other("Mpc/h70".into()));
    }
}
