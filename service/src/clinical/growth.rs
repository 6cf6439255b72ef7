//! Weight-for-age plausibility: the LMS method on WHO (birth to 24 months)
//! and CDC (from 24 months) weight-for-age tables from the rule data.
//!
//! z = ((X/M)^L - 1) / (L*S) for L != 0, z = ln(X/M) / S for L = 0, with L, M
//! and S interpolated linearly between the tabulated ages (formula: CDC "WHO
//! Growth Charts Data files" page). Beyond |z| > 3 the WHO restricted method
//! is used (WHO Child Growth Standards, methods report 2006): z = 3 + (X -
//! SD3) / (SD3 - SD2) above, z = -3 - (SD3neg - X) / (SD2neg - SD3neg) below,
//! where SDk = M (1 + L S k)^(1/L), on the WHO tables. On the CDC tables the
//! plausibility check uses the CDC's own modified z (CDC SAS program for the
//! 2000 growth charts: (X - M) / ((SD2 - M) / 2) above the median, (X - M) /
//! ((M - SD2neg) / 2) below): the plain LMS z saturates where L < 0, and the
//! WHO rule stretches too far on the skewed CDC tables (an 18-year-old girl
//! would reach +5 only near 376 kg; measured in tests/reference/growth).

use crate::rules::model::RuleSet;
use crate::rules::treatment_model::{GrowthReference, PretermReference};

/// A z-score and the table it came from.
#[derive(Debug, Clone, PartialEq)]
pub struct ZScore {
    /// The reported z: LMS (WHO restricted beyond |z| > 3 on WHO tables).
    pub z: f64,
    /// The z the plausibility limit is applied to (WHO: as `z`; CDC: modified z).
    pub check_z: f64,
    /// How `check_z` was computed.
    pub check_method: &'static str,
    /// Reference id.
    pub reference: String,
    /// Interpolated M (median), kg.
    pub median: f64,
    /// The age the reference was read at, as text ("at 27.4 weeks postmenstrual age").
    pub age_text: String,
}

/// L, M, S at an age, interpolated; `None` outside the table.
pub fn lms_at(table: &GrowthReference, age_months: f64) -> Option<(f64, f64, f64)> {
    let rows = &table.rows;
    let first = rows.first()?;
    if age_months < first[0] {
        return None;
    }
    for w in rows.windows(2) {
        let (a, b) = (w[0], w[1]);
        if age_months >= a[0] && age_months <= b[0] {
            let t = if b[0] > a[0] { (age_months - a[0]) / (b[0] - a[0]) } else { 0.0 };
            return Some((a[1] + t * (b[1] - a[1]), a[2] + t * (b[2] - a[2]), a[3] + t * (b[3] - a[3])));
        }
    }
    let last = rows.last()?;
    (age_months == last[0]).then_some((last[1], last[2], last[3]))
}

/// The plain LMS z-score of `x`.
pub fn lms_z(x: f64, l: f64, m: f64, s: f64) -> f64 {
    if l.abs() < 1e-12 { (x / m).ln() / s } else { ((x / m).powf(l) - 1.0) / (l * s) }
}

/// The measurement at z = k.
pub fn lms_x(k: f64, l: f64, m: f64, s: f64) -> f64 {
    if l.abs() < 1e-12 { m * (s * k).exp() } else { m * (1.0 + l * s * k).powf(1.0 / l) }
}

/// The z-score with WHO's restricted extrapolation beyond |z| > 3.
pub fn restricted_z(x: f64, l: f64, m: f64, s: f64) -> f64 {
    let z = lms_z(x, l, m, s);
    if z > 3.0 || !z.is_finite() && x > m {
        let (sd2, sd3) = (lms_x(2.0, l, m, s), lms_x(3.0, l, m, s));
        if sd3.is_finite() && sd3 > sd2 {
            return 3.0 + (x - sd3) / (sd3 - sd2);
        }
    } else if z < -3.0 {
        let (sd2, sd3) = (lms_x(-2.0, l, m, s), lms_x(-3.0, l, m, s));
        if sd2 > sd3 {
            return -3.0 - (sd3 - x) / (sd2 - sd3);
        }
    }
    z
}

/// The CDC modified z (distance from the median in half the median-to-SD2 spans).
pub fn modified_z(x: f64, l: f64, m: f64, s: f64) -> f64 {
    if x >= m { (x - m) / ((lms_x(2.0, l, m, s) - m) / 2.0) } else { (x - m) / ((m - lms_x(-2.0, l, m, s)) / 2.0) }
}

/// Weight-for-age z for a sex ("male" / "female") at an age in months.
pub fn weight_for_age_z(rules: &RuleSet, sex: &str, age_months: f64, weight_kg: f64) -> Option<ZScore> {
    let who = age_months < rules.growth_policy.use_who_until_months;
    let table = rules.growth_references.iter().find(|t| {
        t.sex == sex
            && t.measure == "weight"
            && (t.id.starts_with("who") == who)
            && age_months >= t.from_months
            && age_months <= t.until_months
    })?;
    let (l, m, s) = lms_at(table, age_months)?;
    Some(if who {
        let z = restricted_z(weight_kg, l, m, s);
        ZScore {
            z,
            check_z: z,
            check_method: "WHO LMS z (restricted beyond |z| > 3)",
            reference: table.label.clone(),
            median: m,
            age_text: format!("at age {} months", super::format::num(age_months, 1)),
        }
    } else {
        ZScore {
            z: lms_z(weight_kg, l, m, s),
            check_z: modified_z(weight_kg, l, m, s),
            check_method: "CDC modified z",
            reference: table.label.clone(),
            median: m,
            age_text: format!("at age {} months", super::format::num(age_months, 1)),
        }
    })
}

/// L, M, S at a postmenstrual age on a preterm table, interpolated linearly; `None` outside it.
pub fn preterm_lms_at(table: &PretermReference, weeks: f64) -> Option<(f64, f64, f64)> {
    let as_months = GrowthReference {
        id: table.id.clone(),
        label: table.label.clone(),
        sex: table.sex.clone(),
        measure: table.measure.clone(),
        from_months: table.from_weeks,
        until_months: table.until_weeks,
        source: String::new(),
        rows: table.rows.clone(),
    };
    lms_at(&as_months, weeks)
}

/// Weight z for a baby born at `gestation_weeks` (UK-WHO): below
/// `preterm_below_weeks`, the preterm table by postmenstrual age up to
/// `preterm_table_until_weeks`, then the term references by corrected age;
/// otherwise (term, or gestation unknown: `None`) the term references by
/// chronological age. Plain LMS z on the preterm table (as rcpchgrowth).
pub fn weight_z(
    rules: &RuleSet,
    sex: &str,
    age_days: i64,
    gestation_weeks: Option<f64>,
    weight_kg: f64,
) -> Option<ZScore> {
    let p = &rules.growth_policy;
    let Some(ga) = gestation_weeks.filter(|g| *g < p.preterm_below_weeks) else {
        return weight_for_age_z(rules, sex, months_from_days(age_days), weight_kg);
    };
    let pma = ga + age_days as f64 / 7.0;
    if pma < p.preterm_table_until_weeks {
        let table = rules
            .preterm_references
            .iter()
            .find(|t| t.sex == sex && t.measure == "weight" && pma >= t.from_weeks && pma <= t.until_weeks)?;
        let (l, m, s) = preterm_lms_at(table, pma)?;
        let z = lms_z(weight_kg, l, m, s);
        return Some(ZScore {
            z,
            check_z: z,
            check_method: "LMS z on the preterm table",
            reference: table.label.clone(),
            median: m,
            age_text: format!(
                "at {} weeks postmenstrual age (born at {} weeks)",
                super::format::num(pma, 1),
                super::format::num(ga, 1)
            ),
        });
    }
    let corrected_days = age_days as f64 - (p.term_weeks - ga) * 7.0;
    let months = corrected_days.max(0.0) / DAYS_PER_MONTH;
    let mut z = weight_for_age_z(rules, sex, months, weight_kg)?;
    z.age_text = format!(
        "at corrected age {} months (born at {} weeks)",
        super::format::num(months, 1),
        super::format::num(ga, 1)
    );
    Some(z)
}

/// The earliest gestation any preterm table covers (weeks), for a baby whose gestation is not recorded.
pub fn earliest_gestation(rules: &RuleSet) -> Option<f64> {
    rules.preterm_references.iter().map(|t| t.from_weeks).reduce(f64::min)
}

/// Days in a mean Gregorian month.
const DAYS_PER_MONTH: f64 = 30.4375;

/// Age in months from days (mean Gregorian month, 30.4375 days).
pub fn months_from_days(days: i64) -> f64 {
    days as f64 / DAYS_PER_MONTH
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::clinical::testing::{close, shared_rules};

    #[test]
    fn preterm_babies_use_the_preterm_table_until_42_weeks_then_corrected_age() {
        let r = shared_rules();
        // Born at 30 weeks, 83 days old: 30 + 83/7 = 41.857 weeks, still the preterm table.
        let z = weight_z(r, "male", 83, Some(30.0), 3.5).unwrap();
        assert!(z.age_text.contains("41.9 weeks postmenstrual"), "{}", z.age_text);
        // 84 days old: 42 weeks, so WHO by corrected age: 84 - (40 - 30) x 7 = 14 days
        // = 14 / 30.4375 = 0.459959 months. WHO boys rows 0 [0.3487, 3.3464, 0.14602] and
        // 1 [0.2297, 4.4709, 0.13395]: L = 0.293965, M = 3.863624, S = 0.140468.
        // z = ((3.5 / 3.863624)^0.293965 - 1) / (0.293965 x 0.140468)
        //   = (0.971362 - 1) / 0.041293 = -0.6935.
        let z = weight_z(r, "male", 84, Some(30.0), 3.5).unwrap();
        assert!(close(z.z, -0.6935, 0.001), "{}", z.z);
        assert!(z.age_text.contains("corrected age 0.5 months"), "{}", z.age_text);
        // Term (37 weeks and over) or unknown: chronological age, as before.
        let term = weight_for_age_z(r, "male", months_from_days(84), 3.5).unwrap();
        assert_eq!(weight_z(r, "male", 84, Some(38.0), 3.5).unwrap(), term);
        assert_eq!(weight_z(r, "male", 84, None, 3.5).unwrap(), term);
        // Born at 22 weeks, day 2: 22.3 weeks is before the table starts.
        assert!(weight_z(r, "female", 2, Some(22.0), 0.5).is_none());
        assert_eq!(earliest_gestation(r), Some(23.0));
    }
}
