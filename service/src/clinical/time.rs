//! Calendar arithmetic the rules need: civil dates, partial dates that keep
//! their precision, time spans, and age in completed days, months and years.
//!
//! No time-zone database is needed: every FHIR dateTime with a time carries its
//! own offset, and birth dates are civil dates.

/// A proleptic Gregorian calendar date.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct CivilDate {
    year: i32,
    month: u8,
    day: u8,
}

/// Whether `year` is a Gregorian leap year.
pub fn is_leap(year: i32) -> bool {
    (year % 4 == 0 && year % 100 != 0) || year % 400 == 0
}

/// Days in a month (1-12) of a year.
pub fn days_in_month(year: i32, month: u8) -> u8 {
    match month {
        1 | 3 | 5 | 7 | 8 | 10 | 12 => 31,
        4 | 6 | 9 | 11 => 30,
        2 if is_leap(year) => 29,
        2 => 28,
        _ => 0,
    }
}

impl CivilDate {
    /// A date, or `None` when it is not on the calendar (e.g. 2024-02-30).
    pub fn new(year: i32, month: u8, day: u8) -> Option<Self> {
        if !(1..=12).contains(&month) || day == 0 || day > days_in_month(year, month) {
            return None;
        }
        Some(Self { year, month, day })
    }

    /// Year.
    pub fn year(self) -> i32 {
        self.year
    }
    /// Month, 1-12.
    pub fn month(self) -> u8 {
        self.month
    }
    /// Day of month.
    pub fn day(self) -> u8 {
        self.day
    }

    /// Days since 1970-01-01 (H. Hinnant's days_from_civil algorithm).
    pub fn days_since_epoch(self) -> i64 {
        let y = i64::from(self.year) - i64::from(self.month <= 2);
        let era = y.div_euclid(400);
        let yoe = y - era * 400;
        let m = i64::from(self.month);
        let doy = (153 * (if m > 2 { m - 3 } else { m + 9 }) + 2) / 5 + i64::from(self.day) - 1;
        let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
        era * 146_097 + doe - 719_468
    }

    /// The date `days` after 1970-01-01 (inverse of `days_since_epoch`).
    pub fn from_days_since_epoch(days: i64) -> Self {
        let z = days + 719_468;
        let era = z.div_euclid(146_097);
        let doe = z - era * 146_097;
        let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
        let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
        let mp = (5 * doy + 2) / 153;
        let day = doy - (153 * mp + 2) / 5 + 1;
        let month = if mp < 10 { mp + 3 } else { mp - 9 };
        let year = yoe + era * 400 + i64::from(month <= 2);
        // The ranges of day and month are guaranteed by the algorithm; the year
        // fits i32 for any input the service accepts (years 1-9999).
        Self {
            year: i32::try_from(year).unwrap_or(i32::MAX),
            month: u8::try_from(month).unwrap_or(1),
            day: u8::try_from(day).unwrap_or(1),
        }
    }

    /// The civil date of a unix instant seen at a UTC offset (minutes).
    pub fn of_instant(unix_seconds: i64, offset_minutes: i32) -> Self {
        let local = unix_seconds + i64::from(offset_minutes) * 60;
        Self::from_days_since_epoch(local.div_euclid(86_400))
    }
}

impl std::fmt::Display for CivilDate {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{:04}-{:02}-{:02}", self.year, self.month, self.day)
    }
}

/// A date that keeps the precision it was given with (FHIR `date`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PartialDate {
    /// Only the year.
    Year(i32),
    /// Year and month.
    YearMonth(i32, u8),
    /// A full date.
    Full(CivilDate),
}

impl PartialDate {
    /// Earliest calendar date the value can mean.
    pub fn earliest(self) -> CivilDate {
        match self {
            Self::Year(y) => CivilDate { year: y, month: 1, day: 1 },
            Self::YearMonth(y, m) => CivilDate { year: y, month: m, day: 1 },
            Self::Full(d) => d,
        }
    }

    /// Latest calendar date the value can mean.
    pub fn latest(self) -> CivilDate {
        match self {
            Self::Year(y) => CivilDate { year: y, month: 12, day: 31 },
            Self::YearMonth(y, m) => CivilDate { year: y, month: m, day: days_in_month(y, m) },
            Self::Full(d) => d,
        }
    }

    /// True for a full date.
    pub fn is_full(self) -> bool {
        matches!(self, Self::Full(_))
    }

    /// Precision as a word, for text.
    pub fn precision_label(self) -> &'static str {
        match self {
            Self::Year(_) => "year only",
            Self::YearMonth(..) => "year and month only",
            Self::Full(_) => "full date",
        }
    }
}

/// When something happened: an interval of unix seconds (equal ends for a
/// precise instant) plus the local calendar dates of its ends.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct When {
    /// Earliest instant, unix seconds.
    pub earliest: i64,
    /// Latest instant, unix seconds.
    pub latest: i64,
    /// Local date at the earliest instant.
    pub local_date_earliest: CivilDate,
    /// Local date at the latest instant.
    pub local_date_latest: CivilDate,
}

impl When {
    /// Largest possible distance in seconds between two spans.
    pub fn max_distance(&self, other: &When) -> i64 {
        (self.latest - other.earliest).abs().max((other.latest - self.earliest).abs())
    }

    /// Smallest possible distance in seconds between two spans (0 if they overlap).
    pub fn min_distance(&self, other: &When) -> i64 {
        if self.latest < other.earliest {
            other.earliest - self.latest
        } else if other.latest < self.earliest {
            self.earliest - other.latest
        } else {
            0
        }
    }
}

/// Age in completed units between a birth date and a later date.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub struct Age {
    /// Completed days.
    pub days: i64,
    /// Completed calendar months.
    pub months: i64,
    /// Completed years.
    pub years: i64,
}

impl Age {
    /// Age on `on` of someone born on `birth`; `None` if `on` is before `birth`.
    pub fn between(birth: CivilDate, on: CivilDate) -> Option<Age> {
        let days = on.days_since_epoch() - birth.days_since_epoch();
        if days < 0 {
            return None;
        }
        let mut months =
            (i64::from(on.year) - i64::from(birth.year)) * 12 + i64::from(on.month) - i64::from(birth.month);
        // A month is completed on the same day-of-month, or on the last day of a
        // shorter month (born 31 Jan: one month old on 28/29 Feb).
        let month_end = on.day == days_in_month(on.year, on.month);
        if on.day < birth.day && !month_end {
            months -= 1;
        }
        Some(Age { days, months, years: months.div_euclid(12) })
    }

    /// Short text such as "2 years 2 months" or "5 days".
    pub fn describe(self) -> String {
        if self.months < 1 {
            return plural(self.days, "day");
        }
        if self.years < 2 {
            return plural(self.months, "month");
        }
        let rest = self.months - self.years * 12;
        if rest == 0 {
            plural(self.years, "year")
        } else {
            format!("{} {}", plural(self.years, "year"), plural(rest, "month"))
        }
    }
}

/// The youngest and oldest possible age at `when` of someone born on `birth`
/// (and, when recorded, at the instant `birth_instant`, unix seconds: then
/// completed days are counted from the birth time, so "under 3 days" means
/// "under 72 hours"). `None` when the birth is after `when`.
pub fn age_interval(birth: PartialDate, birth_instant: Option<i64>, when: &When) -> Option<(Age, Age)> {
    let max = Age::between(birth.earliest(), when.local_date_latest)?;
    let min = Age::between(birth.latest(), when.local_date_earliest).unwrap_or(Age { days: 0, months: 0, years: 0 });
    match birth_instant {
        Some(b) if birth.is_full() => {
            if when.latest < b {
                return None;
            }
            let days = |t: i64| (t - b).max(0).div_euclid(86_400);
            Some((Age { days: days(when.earliest), ..min }, Age { days: days(when.latest), ..max }))
        }
        _ => Some((min, max)),
    }
}

fn plural(n: i64, word: &str) -> String {
    if n == 1 { format!("1 {word}") } else { format!("{n} {word}s") }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn d(y: i32, m: u8, day: u8) -> CivilDate {
        CivilDate::new(y, m, day).unwrap()
    }

    #[test]
    fn epoch_round_trip_over_four_centuries() {
        for days in (-150_000..150_000).step_by(97) {
            let date = CivilDate::from_days_since_epoch(days);
            assert_eq!(date.days_since_epoch(), days, "{date}");
        }
        assert_eq!(d(1970, 1, 1).days_since_epoch(), 0);
        assert_eq!(d(2000, 3, 1).days_since_epoch(), 11_017);
    }

    #[test]
    fn calendar_rejects_impossible_dates() {
        assert!(CivilDate::new(2024, 2, 30).is_none());
        assert!(CivilDate::new(2023, 2, 29).is_none());
        assert!(CivilDate::new(2024, 2, 29).is_some());
        assert!(CivilDate::new(1900, 2, 29).is_none());
        assert!(CivilDate::new(2000, 2, 29).is_some());
        assert!(CivilDate::new(2024, 13, 1).is_none());
    }

    #[test]
    fn age_in_completed_units() {
        let age = Age::between(d(2024, 9, 12), d(2026, 11, 30)).unwrap();
        assert_eq!((age.years, age.months), (2, 26));
        let age = Age::between(d(2024, 9, 12), d(2026, 9, 11)).unwrap();
        assert_eq!((age.years, age.months), (1, 23));
        let age = Age::between(d(2026, 11, 28), d(2026, 11, 30)).unwrap();
        assert_eq!((age.days, age.months), (2, 0));
        // Born on the 31st: a month is complete at the end of a shorter month.
        let age = Age::between(d(2025, 1, 31), d(2025, 2, 28)).unwrap();
        assert_eq!(age.months, 1);
        assert!(Age::between(d(2026, 1, 2), d(2026, 1, 1)).is_none());
    }

    #[test]
    fn a_birth_time_counts_completed_days_from_the_birth_instant() {
        // Born 2026-11-28T23:30Z, sampled 2026-12-01T00:10Z: three calendar days,
        // but 48 h 40 min elapsed, so 2 completed days ("under 72 h").
        let birth = PartialDate::Full(d(2026, 11, 28));
        let born = d(2026, 11, 28).days_since_epoch() * 86_400 + 23 * 3600 + 30 * 60;
        let t = d(2026, 12, 1).days_since_epoch() * 86_400 + 10 * 60;
        let when =
            When { earliest: t, latest: t, local_date_earliest: d(2026, 12, 1), local_date_latest: d(2026, 12, 1) };
        let (min, max) = age_interval(birth, None, &when).unwrap();
        assert_eq!((min.days, max.days), (3, 3));
        let (min, max) = age_interval(birth, Some(born), &when).unwrap();
        assert_eq!((min.days, max.days), (2, 2));
        assert!(age_interval(birth, Some(t + 1), &when).is_none());
    }

    #[test]
    fn partial_dates_span_their_precision() {
        assert_eq!(PartialDate::Year(2020).latest(), d(2020, 12, 31));
        assert_eq!(PartialDate::YearMonth(2024, 2).latest(), d(2024, 2, 29));
        assert_eq!(PartialDate::YearMonth(2023, 2).earliest(), d(2023, 2, 1));
    }

    #[test]
    fn local_date_of_an_instant_uses_the_offset() {
        // 2026-11-30T02:00:00Z is still 29 November at -05:00.
        let unix = d(2026, 11, 30).days_since_epoch() * 86_400 + 2 * 3600;
        assert_eq!(CivilDate::of_instant(unix, -300), d(2026, 11, 29));
        assert_eq!(CivilDate::of_instant(unix, 0), d(2026, 11, 30));
    }
}
