//! Choosing the age band (and so the reference intervals) for a result.
//!
//! With a full birth date the age on the result date is exact. With a year or
//! year-month birth date the age is an interval; every band it overlaps is a
//! candidate, except bands that need a full birth date (neonatal banding is
//! never done on a partial date). The caller evaluates each candidate.

use super::time::{Age, PartialDate, When, age_interval};
use crate::rules::model::{AgeBand, AgeBound, AgeUnit, Gestation, RuleSet};

/// The candidate bands for a result, with the notes that explain the choice.
#[derive(Debug, Clone)]
pub struct BandChoice<'r> {
    /// Candidate bands, in rule order (one when the age is exact).
    pub candidates: Vec<&'r AgeBand>,
    /// Youngest possible age on the result date.
    pub age_min: Age,
    /// Oldest possible age on the result date.
    pub age_max: Age,
    /// Explanations (partial birth date, unknown gestation, ...).
    pub notes: Vec<String>,
}

/// Why no band could be chosen.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum NoBand {
    /// The birth date is after the result.
    BornAfterResult,
    /// Older than every band.
    OutsideScope(String),
}

fn units_of(age: Age, unit: AgeUnit) -> i64 {
    match unit {
        AgeUnit::Days => age.days,
        AgeUnit::Months => age.months,
        AgeUnit::Years => age.years,
    }
}

/// The age has reached the bound (in the bound's unit, completed).
pub fn at_least(age: Age, bound: AgeBound) -> bool {
    units_of(age, bound.unit) >= i64::from(bound.value)
}

/// Choose the candidate bands for a result taken at `when`.
pub fn choose<'r>(
    rules: &'r RuleSet,
    birth: PartialDate,
    when: &When,
    gestational_age_weeks: Option<f64>,
    birth_instant: Option<i64>,
    birth_weight_kg: Option<f64>,
) -> Result<BandChoice<'r>, NoBand> {
    let (age_min, age_max) = age_interval(birth, birth_instant, when).ok_or(NoBand::BornAfterResult)?;
    let mut notes = Vec::new();
    let mut skipped_neonatal = false;
    let mut skipped_preterm = false;
    let mut skipped_birth_weight: Option<&AgeBand> = None;
    let mut candidates = Vec::new();
    for band in &rules.bands {
        let overlaps = at_least(age_max, band.from) && !at_least(age_min, band.until);
        if !overlaps {
            continue;
        }
        if band.needs_full_birth_date && !birth.is_full() {
            skipped_neonatal = true;
            continue;
        }
        if band.gestation == Gestation::Preterm {
            match (gestational_age_weeks, band.preterm_below_weeks) {
                (Some(ga), Some(limit)) if ga < limit => {
                    notes.push(format!(
                        "Born at {ga} weeks (preterm: below {limit} weeks; {}).",
                        band.preterm_source.as_deref().unwrap_or("rule set")
                    ));
                }
                (None, _) => {
                    skipped_preterm = true;
                    continue;
                }
                _ => continue,
            }
        }
        if let Some(limit) = band.birth_weight_below_kg {
            let source = band.birth_weight_source.as_deref().unwrap_or("rule set");
            match birth_weight_kg {
                Some(bw) if bw < limit => notes.push(format!(
                    "Birth weight {bw} kg is below {limit} kg: the limits for that birth weight apply ({source})."
                )),
                Some(bw) => {
                    notes.push(format!(
                        "Birth weight {bw} kg is not below {limit} kg, so the limits for babies born under {limit} kg do not apply ({source})."
                    ));
                    continue;
                }
                None => {
                    skipped_birth_weight = Some(band);
                    continue;
                }
            }
        }
        candidates.push(band);
        // An exact age and a matching band: the first match wins, as bands are
        // tried in order (a preterm band before the general neonatal band).
        if age_min == age_max {
            break;
        }
    }
    if !birth.is_full() {
        notes.push(format!(
            "Birth date is given as {} ({}), so the age on the result date is {} to {}.",
            match birth {
                PartialDate::Year(y) => format!("{y:04}"),
                PartialDate::YearMonth(y, m) => format!("{y:04}-{m:02}"),
                PartialDate::Full(d) => d.to_string(),
            },
            birth.precision_label(),
            age_min.describe(),
            age_max.describe()
        ));
    }
    if skipped_neonatal {
        notes.push(
            "Neonatal ranges need a full birth date and were not applied; a neonate assessed against older-child ranges may be misclassified. Record the full birth date."
                .to_owned(),
        );
    }
    if skipped_preterm && candidates.iter().any(|b| b.needs_full_birth_date) {
        notes.push(
            "Gestational age at birth is not recorded, so term-neonate ranges were used; preterm ranges are lower."
                .to_owned(),
        );
    }
    if let Some(band) = skipped_birth_weight
        && candidates.iter().any(|b| b.needs_full_birth_date)
    {
        let limit = band.birth_weight_below_kg.unwrap_or_default();
        notes.push(format!(
            "Birth weight is not recorded, so the limits for babies born at {limit} kg or more were used{}: they have the higher lower limits, so no low value is missed in a baby who may weigh {limit} kg or more, but for a baby born under {limit} kg they may call low a value that the limits for that birth weight ({}) call normal. Record the birth weight (LOINC 8339-4).",
            match gestational_age_weeks {
                Some(ga) => format!(" (born at {ga} weeks)"),
                None => String::new(),
            },
            band.label
        ));
    }
    if candidates.is_empty() {
        return Err(NoBand::OutsideScope(format!(
            "Age {} on the result date is outside every age band of the rule set. {}",
            age_min.describe(),
            rules.scope.note
        )));
    }
    Ok(BandChoice { candidates, age_min, age_max, notes })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::clinical::time::CivilDate;

    fn rules() -> RuleSet {
        crate::rules::load::load(None).unwrap().rules
    }

    fn on(y: i32, m: u8, d: u8) -> When {
        let date = CivilDate::new(y, m, d).unwrap();
        let noon = date.days_since_epoch() * 86_400 + 12 * 3600;
        When { earliest: noon, latest: noon, local_date_earliest: date, local_date_latest: date }
    }

    fn full(y: i32, m: u8, d: u8) -> PartialDate {
        PartialDate::Full(CivilDate::new(y, m, d).unwrap())
    }

    fn band_of(rules: &RuleSet, birth: PartialDate, when: When, ga: Option<f64>) -> Vec<String> {
        choose(rules, birth, &when, ga, None, None).unwrap().candidates.iter().map(|b| b.id.clone()).collect()
    }

    #[test]
    fn each_age_edge_falls_in_the_right_band() {
        let r = rules();
        let birth = full(2024, 1, 1);
        // 28 completed days: still a neonate; 29: an infant.
        assert_eq!(band_of(&r, birth, on(2024, 1, 29), None), ["term-neonate"]);
        assert_eq!(band_of(&r, birth, on(2024, 1, 30), None), ["infant"]);
        // 23 completed months: infant; 24: child.
        assert_eq!(band_of(&r, birth, on(2025, 12, 31), None), ["infant"]);
        assert_eq!(band_of(&r, birth, on(2026, 1, 1), None), ["child"]);
        // Day before the 12th birthday: child; on it: adolescent.
        assert_eq!(band_of(&r, birth, on(2035, 12, 31), None), ["child"]);
        assert_eq!(band_of(&r, birth, on(2036, 1, 1), None), ["adolescent"]);
        // Day before the 19th birthday: adolescent; on it: outside the rules.
        assert_eq!(band_of(&r, birth, on(2042, 12, 31), None), ["adolescent"]);
        assert!(matches!(choose(&r, birth, &on(2043, 1, 1), None, None, None), Err(NoBand::OutsideScope(_))));
        // Day of birth.
        assert_eq!(band_of(&r, birth, on(2024, 1, 1), None), ["term-neonate"]);
    }

    #[test]
    fn the_vlbw_band_needs_a_recorded_birth_weight_below_1500_g() {
        // Vuralli 2019: ionized < 1.0 mmol/L under 1500 g, < 1.1 for term and preterm over 1500 g.
        let r = rules();
        let birth = full(2026, 11, 28);
        let when = on(2026, 11, 30);
        let ids = |ga, bw| -> Vec<String> {
            choose(&r, birth, &when, ga, None, bw).unwrap().candidates.iter().map(|b| b.id.clone()).collect()
        };
        assert_eq!(ids(Some(28.0), Some(1.1)), ["vlbw-neonate"]);
        // A late-preterm baby of normal birth weight: the term limits, with the reason.
        assert_eq!(ids(Some(35.0), Some(2.6)), ["term-neonate"]);
        let c = choose(&r, birth, &when, Some(35.0), None, Some(2.6)).unwrap();
        assert!(c.notes.iter().any(|n| n.contains("Birth weight 2.6 kg is not below 1.5 kg")), "{:?}", c.notes);
        // 1.5 kg itself is not below 1.5 kg.
        assert_eq!(ids(Some(31.0), Some(1.5)), ["term-neonate"]);
        // Unknown birth weight: the higher limits, and the basis says so.
        let c = choose(&r, birth, &when, Some(28.0), None, None).unwrap();
        assert_eq!(c.candidates[0].id, "term-neonate");
        assert!(c.notes.iter().any(|n| n.contains("Birth weight is not recorded") && n.contains("born at 28 weeks")));
        let ionized: Vec<f64> = [ids(Some(28.0), Some(1.1)), ids(Some(35.0), Some(2.6))]
            .iter()
            .map(|v| r.bands.iter().find(|b| b.id == v[0]).unwrap().ionized.lower)
            .collect();
        assert_eq!(ionized, [1.0, 1.1]);
        // Older than 28 days: the birth weight no longer matters.
        assert_eq!(
            choose(&r, birth, &on(2027, 1, 15), Some(28.0), None, Some(1.1)).unwrap().candidates[0].id,
            "infant"
        );
    }

    #[test]
    fn partial_birth_dates_never_give_neonatal_bands() {
        let r = rules();
        // Born "2026-11": on 2026-11-30 the baby is 0-29 days old.
        let choice = choose(&r, PartialDate::YearMonth(2026, 11), &on(2026, 11, 30), None, None, None).unwrap();
        let ids: Vec<&str> = choice.candidates.iter().map(|b| b.id.as_str()).collect();
        assert_eq!(ids, ["infant"]);
        assert!(choice.notes.iter().any(|n| n.contains("Neonatal ranges need a full birth date")));
        // Born "2024": 1 year 11 months to 2 years 10 months on 2026-11-30: infant or child.
        let ids = band_of(&r, PartialDate::Year(2024), on(2026, 11, 30), None);
        assert_eq!(ids, ["infant", "child"]);
        // Born "2015": 10 y 11 mo to 11 y 10 mo: child only.
        assert_eq!(band_of(&r, PartialDate::Year(2015), on(2026, 11, 30), None), ["child"]);
    }

    #[test]
    fn a_birth_date_after_the_result_is_refused() {
        let r = rules();
        assert_eq!(
            choose(&r, full(2026, 12, 1), &on(2026, 11, 30), None, None, None).unwrap_err(),
            NoBand::BornAfterResult
        );
    }
}
