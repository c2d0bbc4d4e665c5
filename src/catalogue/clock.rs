//! The date written into every record: UTC, to the second.

/// Seconds since 1970 → "YYYY-MM-DDThh:mm:ssZ" (proleptic Gregorian, UTC), by the
/// days-to-civil algorithm of Hinnant, "chrono-Compatible Low-Level Date Algorithms".
pub fn utc_timestamp(secs: u64) -> String {
    let days = (secs / 86_400) as i64;
    let rem = secs % 86_400;
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let y = yoe + era * 400;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = if m <= 2 { y + 1 } else { y };
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

pub fn now_utc() -> String {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_secs())
        .unwrap_or(0);
    utc_timestamp(secs)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// 2026-12-01T00:00:00Z is 1796083200 s after the epoch (20788 days × 86400, by
    /// counting: 56 years of 365 days plus 14 leap days to 2026-01-01, plus 334 days).
    #[test]
    fn timestamps() {
        assert_eq!(utc_timestamp(0), "1970-01-01T00:00:00Z");
        assert_eq!(utc_timestamp(951_782_400), "2000-02-29T00:00:00Z");
        assert_eq!(utc_timestamp(1_796_083_200 + 3661), "2026-12-01T01:01:01Z");
    }
}
