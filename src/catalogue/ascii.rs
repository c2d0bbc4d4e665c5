//! Text for places that hold printable ASCII only (FITS header cards): letters and signs
//! with no ASCII form spelled out from one table ([`SPELLED`]), anything else as `\uXXXX`;
//! and JSON made ASCII without changing its value (non-ASCII characters inside strings as
//! `\uXXXX` escapes, RFC 8259 §7), undone exactly on reading.

/// Characters spelled out in ASCII, in the spelling physicists type.
pub const SPELLED: &[(char, &str)] = &[
    ('Α', "Alpha"),
    ('Β', "Beta"),
    ('Γ', "Gamma"),
    ('Δ', "Delta"),
    ('Ε', "Epsilon"),
    ('Η', "Eta"),
    ('Θ', "Theta"),
    ('Λ', "Lambda"),
    ('Μ', "Mu"),
    ('Ξ', "Xi"),
    ('Π', "Pi"),
    ('Σ', "Sigma"),
    ('Φ', "Phi"),
    ('Χ', "Chi"),
    ('Ψ', "Psi"),
    ('Ω', "Omega"),
    ('α', "alpha"),
    ('β', "beta"),
    ('γ', "gamma"),
    ('δ', "delta"),
    ('ε', "epsilon"),
    ('ζ', "zeta"),
    ('η', "eta"),
    ('θ', "theta"),
    ('κ', "kappa"),
    ('λ', "lambda"),
    ('μ', "mu"),
    ('ν', "nu"),
    ('ξ', "xi"),
    ('π', "pi"),
    ('ρ', "rho"),
    ('σ', "sigma"),
    ('τ', "tau"),
    ('φ', "phi"),
    ('χ', "chi"),
    ('ψ', "psi"),
    ('ω', "omega"),
    ('≤', "<="),
    ('≥', ">="),
    ('≠', "!="),
    ('≈', "~"),
    ('±', "+/-"),
    ('−', "-"),
    ('–', "-"),
    ('—', "--"),
    ('×', "x"),
    ('·', "*"),
    ('°', "deg"),
    ('′', "'"),
    ('″', "\""),
    ('²', "^2"),
    ('³', "^3"),
    ('⁻', "^-"),
    ('¹', "^1"),
    ('⁰', "^0"),
    ('→', "->"),
    ('←', "<-"),
    ('…', "..."),
    ('∞', "inf"),
    ('√', "sqrt"),
    ('∝', "propto"),
    ('☉', "sun"),
    ('⊙', "sun"),
    ('é', "e"),
    ('è', "e"),
    ('ü', "u"),
    ('ö', "o"),
    ('ä', "a"),
    ('‘', "'"),
    ('’', "'"),
    ('“', "\""),
    ('”', "\""),
];

/// `text` in printable ASCII: control characters and characters of [`SPELLED`] spelled out,
/// any other non-ASCII character as `\uXXXX` (UTF-16 code units, as in JSON).
pub fn to_ascii(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        if (' '..='~').contains(&c) {
            out.push(c);
        } else if let Some((_, s)) = SPELLED.iter().find(|(k, _)| *k == c) {
            out.push_str(s);
        } else {
            push_escaped(&mut out, c);
        }
    }
    out
}

fn push_escaped(out: &mut String, c: char) {
    let mut units = [0u16; 2];
    for u in c.encode_utf16(&mut units) {
        out.push_str(&format!("\\u{u:04x}"));
    }
}

/// Whether `text` is a JSON object or array (the structured provenance values).
pub fn is_json(text: &str) -> bool {
    let t = text.trim_start();
    (t.starts_with('{') || t.starts_with('['))
        && serde_json::from_str::<serde_json::Value>(text).is_ok()
}

/// JSON text with every non-ASCII character written `\uXXXX`: the same JSON value, in
/// ASCII. (Outside strings JSON is ASCII already, RFC 8259 §2; control characters are
/// escaped by every JSON writer, RFC 8259 §7.)
pub fn json_to_ascii(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        if c.is_ascii() {
            out.push(c);
        } else {
            push_escaped(&mut out, c);
        }
    }
    out
}

/// Undo [`json_to_ascii`]: `\uXXXX` escapes of non-ASCII characters (with surrogate pairs)
/// become the characters again; every other escape, `\\u…` included, stays as written, so
/// JSON from a writer that never escapes non-ASCII text (serde_json) comes back byte for
/// byte.
pub fn json_from_ascii(text: &str) -> String {
    let chars: Vec<char> = text.chars().collect();
    let mut out = String::with_capacity(text.len());
    let hex = |at: usize| -> Option<u32> {
        let s: String = chars.get(at..at + 4)?.iter().collect();
        u32::from_str_radix(&s, 16).ok()
    };
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        if c != '\\' {
            out.push(c);
            i += 1;
            continue;
        }
        if chars.get(i + 1) == Some(&'u') {
            if let Some(u) = hex(i + 2) {
                if (0xD800..0xDC00).contains(&u)
                    && chars.get(i + 6) == Some(&'\\')
                    && chars.get(i + 7) == Some(&'u')
                {
                    if let Some(low) = hex(i + 8).filter(|l| (0xDC00..0xE000).contains(l)) {
                        let code = 0x10000 + ((u - 0xD800) << 10) + (low - 0xDC00);
                        if let Some(ch) = char::from_u32(code) {
                            out.push(ch);
                            i += 12;
                            continue;
                        }
                    }
                }
                if u >= 0x80 {
                    if let Some(ch) = char::from_u32(u) {
                        out.push(ch);
                        i += 6;
                        continue;
                    }
                }
            }
        }
        // Any other escape: kept with the character it escapes.
        out.push(c);
        if let Some(&n) = chars.get(i + 1) {
            out.push(n);
        }
        i += 2;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn greek_and_signs_are_spelled_out() {
        assert_eq!(to_ascii("flat ΛCDM"), "flat LambdaCDM");
        assert_eq!(to_ascii("Ω_m ≤ 0.3 ± 0.01"), "Omega_m <= 0.3 +/- 0.01");
        assert_eq!(to_ascii("σ_* · μ − η"), "sigma_* * mu - eta");
        assert_eq!(to_ascii("10° × 2²"), "10deg x 2^2");
        assert_eq!(to_ascii("a → b"), "a -> b");
        // Not in the table: as a JSON-style escape (RFC 8259 §7).
        assert_eq!(to_ascii("ℏ"), "\\u210f");
        assert_eq!(to_ascii("tab\there"), "tab\\u0009here");
    }

    #[test]
    fn json_round_trips_exactly_through_ascii() {
        for s in [
            r#"{"chain":"mock → velocities","cosmology":"flat ΛCDM","x":1.5e-7}"#,
            r#"["𝛽 outside the BMP", "a\\u00e9 stays", "\"quoted\""]"#,
            r#"{"plain":"ascii"}"#,
        ] {
            let a = json_to_ascii(s);
            assert!(a.is_ascii(), "{a}");
            let v1: serde_json::Value = serde_json::from_str(s).unwrap();
            let v2: serde_json::Value = serde_json::from_str(&a).unwrap();
            assert_eq!(v1, v2);
            assert_eq!(json_from_ascii(&a), s);
        }
    }
}
