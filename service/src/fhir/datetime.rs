//! FHIR R4 `date`, `dateTime` and `instant` parsing that keeps precision.
//!
//! The lexical forms follow the R4 regular expressions: `YYYY`, `YYYY-MM`,
//! `YYYY-MM-DD`, or `YYYY-MM-DDThh:mm:ss(.f+)?(Z|(+|-)hh:mm)`: once a time is
//! given, seconds and an offset are mandatory. Calendar validity is checked
//! too (the schema regex lets 2024-02-30 through). A leap second (60) is
//! accepted and read as 59.

use crate::clinical::time::{CivilDate, PartialDate, When};

/// Why a date or dateTime was refused.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum DateError {
    /// Not the FHIR lexical form.
    #[error("'{0}' is not a FHIR date/dateTime (YYYY, YYYY-MM, YYYY-MM-DD or YYYY-MM-DDThh:mm:ss with Z or an offset)")]
    Form(String),
    /// Right form, impossible date or time.
    #[error("'{0}' is not on the calendar")]
    Calendar(String),
}

fn digits(s: &str, n: usize) -> Option<u32> {
    (s.len() == n && s.bytes().all(|b| b.is_ascii_digit())).then(|| s.parse().ok()).flatten()
}

fn parse_date_part(s: &str, original: &str) -> Result<PartialDate, DateError> {
    let form = || DateError::Form(original.to_owned());
    let cal = || DateError::Calendar(original.to_owned());
    let mut parts = s.split('-');
    let year = parts.next().and_then(|p| digits(p, 4)).ok_or_else(form)?;
    if year == 0 {
        return Err(cal());
    }
    let year = i32::try_from(year).map_err(|_| form())?;
    let Some(m) = parts.next() else { return Ok(PartialDate::Year(year)) };
    let month = u8::try_from(digits(m, 2).ok_or_else(form)?).map_err(|_| form())?;
    if !(1..=12).contains(&month) {
        return Err(cal());
    }
    let Some(d) = parts.next() else { return Ok(PartialDate::YearMonth(year, month)) };
    let day = u8::try_from(digits(d, 2).ok_or_else(form)?).map_err(|_| form())?;
    if parts.next().is_some() {
        return Err(form());
    }
    CivilDate::new(year, month, day).map(PartialDate::Full).ok_or_else(cal)
}

/// Parse a FHIR `date` (as in Patient.birthDate).
pub fn parse_date(s: &str) -> Result<PartialDate, DateError> {
    parse_date_part(s, s)
}

/// A parsed `dateTime`: its span, and whether it carried a time.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct DateTime {
    /// Span it denotes.
    pub when: When,
    /// Precision of the date part when no time was given.
    pub date_only: Option<PartialDate>,
}

/// Parse a FHIR `dateTime` (or `instant`, which always has a time).
pub fn parse_date_time(s: &str) -> Result<DateTime, DateError> {
    let form = || DateError::Form(s.to_owned());
    let cal = || DateError::Calendar(s.to_owned());
    let Some((date_s, time_s)) = s.split_once('T') else {
        // A date with no time: the whole day (month, year) in an unknown zone.
        // Without a zone, take the widest span: from 14:00 before (UTC+14) to
        // 12:00 after (UTC-12) the civil day, and keep the civil dates.
        let date = parse_date_part(s, s)?;
        let start = date.earliest().days_since_epoch() * 86_400 - 14 * 3600;
        let end = (date.latest().days_since_epoch() + 1) * 86_400 - 1 + 12 * 3600;
        return Ok(DateTime {
            when: When {
                earliest: start,
                latest: end,
                local_date_earliest: date.earliest(),
                local_date_latest: date.latest(),
            },
            date_only: Some(date),
        });
    };
    let PartialDate::Full(date) = parse_date_part(date_s, s)? else { return Err(form()) };
    let (clock, offset_minutes) = if let Some(c) = time_s.strip_suffix('Z') {
        (c, 0i32)
    } else {
        let split = time_s.rfind(['+', '-']).ok_or_else(form)?;
        let (c, off) = time_s.split_at(split);
        let sign = if off.starts_with('-') { -1 } else { 1 };
        let (oh, om) = off.get(1..).and_then(|o| o.split_once(':')).ok_or_else(form)?;
        let oh = digits(oh, 2).ok_or_else(form)?;
        let om = digits(om, 2).ok_or_else(form)?;
        if oh > 14 || om > 59 || (oh == 14 && om > 0) {
            return Err(cal());
        }
        (c, sign * i32::try_from(oh * 60 + om).map_err(|_| form())?)
    };
    // Fractions of a second are checked for form and dropped: no rule needs them.
    let hms = match clock.split_once('.') {
        Some((h, f)) if !f.is_empty() && f.bytes().all(|b| b.is_ascii_digit()) => h,
        Some(_) => return Err(form()),
        None => clock,
    };
    let mut p = hms.split(':');
    let (Some(h), Some(m), Some(sec), None) = (p.next(), p.next(), p.next(), p.next()) else {
        return Err(form());
    };
    let (h, m, sec) =
        (digits(h, 2).ok_or_else(form)?, digits(m, 2).ok_or_else(form)?, digits(sec, 2).ok_or_else(form)?);
    if h > 23 || m > 59 || sec > 60 {
        return Err(cal());
    }
    let sec = sec.min(59);
    let local = date.days_since_epoch() * 86_400 + i64::from(h * 3600 + m * 60 + sec);
    let unix = local - i64::from(offset_minutes) * 60;
    Ok(DateTime {
        when: When { earliest: unix, latest: unix, local_date_earliest: date, local_date_latest: date },
        date_only: None,
    })
}

/// Format unix seconds as an RFC 3339 UTC instant (`2026-11-30T13:15:00Z`).
pub fn format_instant(unix: i64) -> String {
    let date = CivilDate::from_days_since_epoch(unix.div_euclid(86_400));
    let secs = unix.rem_euclid(86_400);
    format!("{date}T{:02}:{:02}:{:02}Z", secs / 3600, secs % 3600 / 60, secs % 60)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dates_keep_their_precision() {
        assert_eq!(parse_date("2020"), Ok(PartialDate::Year(2020)));
        assert_eq!(parse_date("2020-05"), Ok(PartialDate::YearMonth(2020, 5)));
        assert!(matches!(parse_date("2020-05-17"), Ok(PartialDate::Full(_))));
        for bad in ["20", "2020-5", "2020-05-1", "2020/05/01", "2020-05-17T10:00:00Z", " 2020", "2020-05-17\n"] {
            assert!(matches!(parse_date(bad), Err(DateError::Form(_))), "{bad:?}");
        }
        for bad in ["2024-02-30", "2023-02-29", "2020-13", "0000"] {
            assert!(matches!(parse_date(bad), Err(DateError::Calendar(_))), "{bad:?}");
        }
    }

    #[test]
    fn date_times_need_seconds_and_offset() {
        let t = parse_date_time("2026-11-30T08:15:00-05:00").unwrap();
        assert_eq!(format_instant(t.when.earliest), "2026-11-30T13:15:00Z");
        assert_eq!(t.when.local_date_earliest.to_string(), "2026-11-30");
        let t = parse_date_time("2026-11-30T23:30:00.123456789123Z").unwrap();
        assert_eq!(format_instant(t.when.latest), "2026-11-30T23:30:00Z");
        let leap = parse_date_time("2016-12-31T23:59:60Z").unwrap();
        assert_eq!(format_instant(leap.when.latest), "2016-12-31T23:59:59Z");
        for bad in [
            "2026-11-30T08:15Z",
            "2026-11-30T08:15:00",
            "2026-11-30T8:15:00Z",
            "2026-11-30 08:15:00Z",
            "2026-11-30T08:15:00.Z",
        ] {
            assert!(matches!(parse_date_time(bad), Err(DateError::Form(_))), "{bad:?}");
        }
        for bad in ["2026-11-30T24:00:00Z", "2026-02-30T08:00:00Z", "2026-11-30T08:00:00+15:00"] {
            assert!(matches!(parse_date_time(bad), Err(DateError::Calendar(_))), "{bad:?}");
        }
    }

    #[test]
    fn a_date_only_value_spans_the_whole_day_in_any_zone() {
        let t = parse_date_time("2026-11-30").unwrap();
        assert_eq!(format_instant(t.when.earliest), "2026-11-29T10:00:00Z");
        assert_eq!(format_instant(t.when.latest), "2026-12-01T11:59:59Z");
        assert!(t.date_only.is_some());
    }
}
