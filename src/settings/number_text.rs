//! Numbers as the messages and captions print them: at most six significant digits, no
//! exponent for ordinary magnitudes, and an exact zero as `0` (not `0.000e0`).

/// `x` with at most six significant digits, trailing zeros dropped; an exponent only below
/// 1e-4 or from 1e7 on.
pub fn short_number(x: f64) -> String {
    if x == 0.0 {
        return "0".into();
    }
    if !x.is_finite() {
        return format!("{x}");
    }
    let a = x.abs();
    if !(1e-4..1e7).contains(&a) {
        let s = format!("{x:.5e}");
        let (mantissa, exponent) = s.split_once('e').unwrap_or((&s, "0"));
        return format!("{}e{exponent}", trim(mantissa));
    }
    let digits = 6 - 1 - a.log10().floor() as i32;
    let s = format!("{x:.*}", digits.max(0) as usize);
    trim(&s).to_string()
}

fn trim(s: &str) -> &str {
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.')
    } else {
        s
    }
}

#[cfg(test)]
mod tests {
    use super::short_number;

    #[test]
    fn short_numbers_read_as_written() {
        assert_eq!(short_number(0.0), "0");
        assert_eq!(short_number(-0.0), "0");
        assert_eq!(short_number(70.0), "70");
        assert_eq!(short_number(0.3), "0.3");
        assert_eq!(short_number(0.049_302_741_999_999_99), "0.0493027");
        assert_eq!(short_number(67.66), "67.66");
        assert_eq!(short_number(299_792.458), "299792");
        assert_eq!(short_number(-1.5e-5), "-1.5e-5");
        assert_eq!(short_number(1.0 / 3.0), "0.333333");
    }
}
