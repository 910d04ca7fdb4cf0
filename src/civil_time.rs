//! Civil (proleptic Gregorian, UTC) dates and Unix time, both ways: the run
//! plan's start date into stream time, and stream or wall-clock time into
//! the dates of file names, headers and the screens. After Howard Hinnant's
//! public-domain date algorithms (`days_from_civil`, `civil_from_days`).

/// Days from 1970-01-01 to a civil date.
pub fn days_from_civil(y: i64, m: u32, d: u32) -> i64 {
    let y = if m <= 2 { y - 1 } else { y };
    let era = y.div_euclid(400);
    let yoe = y.rem_euclid(400);
    let mp = (m as i64 + 9) % 12;
    let doy = (153 * mp + 2) / 5 + d as i64 - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146_097 + doe - 719_468
}

/// UTC civil date and time of a Unix time: (year, month, day, hour,
/// minute, second); the inverse of [`days_from_civil`] for the date.
pub fn utc_parts(unix_s: i64) -> (i64, u32, u32, u32, u32, u32) {
    let days = unix_s.div_euclid(86_400);
    let secs = unix_s.rem_euclid(86_400) as u32;
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let m = if mp < 10 { mp + 3 } else { mp - 9 } as u32;
    let y = yoe + era * 400 + i64::from(m <= 2);
    (y, m, d, secs / 3600, secs / 60 % 60, secs % 60)
}

/// `2026-12-02T10:11:12Z`
pub fn utc_iso(unix_s: i64) -> String {
    let (y, mo, d, h, mi, s) = utc_parts(unix_s);
    format!("{y:04}-{mo:02}-{d:02}T{h:02}:{mi:02}:{s:02}Z")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn civil_days() {
        // 2000-03-01 is day 11017 since the epoch (from memory; `date -d 2000-03-01 +%s` / 86400).
        assert_eq!(days_from_civil(2000, 3, 1), 11_017);
        assert_eq!(days_from_civil(1970, 1, 1), 0);
        assert_eq!(days_from_civil(1969, 12, 31), -1);
        // Inverse of utc_parts.
        let (y, m, d, ..) = utc_parts(days_from_civil(2026, 3, 14) * 86_400);
        assert_eq!((y, m, d), (2026, 3, 14));
    }

    #[test]
    fn civil_dates() {
        // Known instants (from memory, checkable with `date -u -d @N`).
        assert_eq!(utc_iso(0), "1970-01-01T00:00:00Z");
        assert_eq!(utc_iso(951_782_400), "2000-02-29T00:00:00Z");
        assert_eq!(utc_iso(1_436_509_052), "2015-07-10T06:17:32Z");
        assert_eq!(utc_iso(-1), "1969-12-31T23:59:59Z");
    }
}
