//! Time arguments: RFC 3339 or a plain date (midnight UTC), DESIGN.md section 5.

use chrono::{DateTime, NaiveDate, Utc};

/// Parse an RFC 3339 timestamp (`2026-03-02T10:00:00Z`) or a date
/// (`2026-03-02`, meaning midnight UTC).
///
/// # Errors
/// A message that shows the value and the two accepted forms.
pub fn parse_time(s: &str) -> Result<DateTime<Utc>, String> {
    let t = s.trim();
    if let Ok(dt) = DateTime::parse_from_rfc3339(t) {
        return Ok(dt.to_utc());
    }
    if let Ok(d) = NaiveDate::parse_from_str(t, "%Y-%m-%d")
        && let Some(dt) = d.and_hms_opt(0, 0, 0)
    {
        return Ok(dt.and_utc());
    }
    Err(format!(
        "cannot read time {s:?}; use RFC 3339 (2026-03-02T10:00:00Z) or a date (2026-03-02)"
    ))
}

/// Format as RFC 3339 with second precision when whole, milliseconds otherwise, and `Z`.
pub fn format_time(t: DateTime<Utc>) -> String {
    if t.timestamp_subsec_millis() == 0 {
        t.format("%Y-%m-%dT%H:%M:%SZ").to_string()
    } else {
        t.format("%Y-%m-%dT%H:%M:%S%.3fZ").to_string()
    }
}

/// Epoch milliseconds to a UTC time (saturating at chrono's range).
pub fn from_millis(ms: i64) -> DateTime<Utc> {
    DateTime::from_timestamp_millis(ms).unwrap_or(DateTime::<Utc>::MAX_UTC)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn date_means_midnight_utc() {
        let t = parse_time("2026-03-02").unwrap();
        assert_eq!(format_time(t), "2026-03-02T00:00:00Z");
    }

    #[test]
    fn offsets_become_utc() {
        let t = parse_time("2026-03-02T12:00:00+02:00").unwrap();
        assert_eq!(format_time(t), "2026-03-02T10:00:00Z");
    }

    #[test]
    fn bad_time_says_what_is_accepted() {
        let e = parse_time("02/03/2026").unwrap_err();
        assert!(e.contains("RFC 3339"), "{e}");
    }
}
