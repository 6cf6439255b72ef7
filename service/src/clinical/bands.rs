//! Choosing the age band (and so the reference intervals) for a result.
//!
//! With a full birth date the age on the result date is exact. With a year or
//! year-month birth date the age is an interval; every band it overlaps is a
//! candidate, except bands that need a full birth date (neonatal banding is
//! never done on a partial date). The caller evaluates each candidate.

use super::time::{Age, PartialDate, When};
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

fn at_least(age: Age, bound: AgeBound) -> bool {
    units_of(age, bound.unit) >= i64::from(bound.value)
}

/// Choose the candidate bands for a result taken at `when`.
pub fn choose<'r>(
    rules: &'r RuleSet,
    birth: PartialDate,
    when: &When,
    gestational_age_weeks: Option<f64>,
) -> Result<BandChoice<'r>, NoBand> {
    let age_min = Age::between(birth.latest(), when.local_date_earliest);
    let age_max = Age::between(birth.earliest(), when.local_date_latest);
    let (age_min, age_max) = match (age_min, age_max) {
        (Some(a), Some(b)) => (a, b),
        // The latest possible birth is after the result, but an earlier one is not.
        (None, Some(b)) => (Age { days: 0, months: 0, years: 0 }, b),
        _ => return Err(NoBand::BornAfterResult),
    };
    let mut notes = Vec::new();
    let mut skipped_neonatal = false;
    let mut skipped_preterm = false;
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
    if candidates.is_empty() {
        return Err(NoBand::OutsideScope(format!(
            "Age {} on the result date is outside every age band of the rule set. {}",
            age_min.describe(),
            rules.scope.note
        )));
    }
    Ok(BandChoice { candidates, age_min, age_max, notes })
}
