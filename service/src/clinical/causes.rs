//! The cause engine: which causes of hypocalcemia fit the data we have.
//!
//! Each cause is a data-defined set of findings for and against it (rule data
//! `causes`). Labs are read against age- and sex-specific ranges; conditions,
//! medications and procedures through code lists. The weighing is plain
//! arithmetic from the rule data (`cause_weighing`), not a probability: each
//! met finding adds its effect's points; a `rules_out` finding excludes the
//! cause; the score maps to likely / possible / unlikely. Ordering is
//! deterministic: label, then score, then rule order.

use std::collections::BTreeMap;

use super::facts::{Analyte, CodedEvent, EventKind, Facts, Gender, Measurement, Source};
use super::format::num;
use super::time::{Age, PartialDate, When};
use crate::rules::model::{AgeSpan, Cause, CauseFinding, Effect, LabOutcome, RuleSet, SexRestriction};

/// A cause's label.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum CauseLabel {
    /// Fits well.
    Likely,
    /// Fits, or not enough to say.
    Possible,
    /// Evidence against.
    Unlikely,
    /// Excluded.
    RuledOut,
}

impl CauseLabel {
    /// Word for text.
    pub fn word(self) -> &'static str {
        match self {
            Self::Likely => "likely",
            Self::Possible => "possible",
            Self::Unlikely => "unlikely",
            Self::RuledOut => "ruled out",
        }
    }
    /// Still open (likely or possible).
    pub fn is_open(self) -> bool {
        matches!(self, Self::Likely | Self::Possible)
    }
}

/// A lab read against its range.
#[derive(Debug, Clone)]
pub struct LabReading {
    /// Analyte (or Creatinine for the eGFR).
    pub analyte: Analyte,
    /// low, normal or high.
    pub outcome: LabOutcome,
    /// The sentence that explains it.
    pub text: String,
    /// The inputs it rests on.
    pub sources: Vec<Source>,
}

/// Everything the findings are read from.
#[derive(Debug, Clone, Default)]
pub struct Readings {
    /// Labs by analyte.
    pub labs: BTreeMap<Analyte, LabReading>,
    /// eGFR, when computable.
    pub egfr: Option<LabReading>,
}

/// A finding that counted.
#[derive(Debug, Clone)]
pub struct MetFinding {
    /// What was seen.
    pub text: String,
    /// Its effect.
    pub effect: Effect,
    /// Points.
    pub points: i32,
    /// Why it counts (source).
    pub source: String,
    /// Inputs.
    pub evidence: Vec<Source>,
}

/// One cause, weighed.
#[derive(Debug, Clone)]
pub struct CauseResult {
    /// Rule id.
    pub id: String,
    /// Label for people.
    pub name: String,
    /// Position in the rule data (for ordering).
    pub rule_index: usize,
    /// Label.
    pub label: CauseLabel,
    /// Score.
    pub score: i32,
    /// Findings that counted.
    pub met: Vec<MetFinding>,
    /// Tests whose result would have counted but are not available.
    pub missing: Vec<Analyte>,
    /// Why it is ruled out, when it is.
    pub ruled_out_by: Option<String>,
    /// Unlikely only because nothing recorded points to it.
    pub no_exposure: bool,
}

/// The context the engine reads: age interval on the result date, sex, and
/// the time of the calcium result that started it all.
#[derive(Debug, Clone, Copy)]
pub struct Context {
    /// Youngest possible age.
    pub age_min: Age,
    /// Oldest possible age.
    pub age_max: Age,
    /// Sex.
    pub gender: Gender,
    /// The calcium result's time.
    pub anchor: When,
}

impl Context {
    /// Build from the facts and the calcium result's time; `None` without a usable birth date.
    pub fn new(facts: &Facts, anchor: When) -> Option<Self> {
        let birth: PartialDate = facts.patient.birth_date?;
        let (age_min, age_max) = super::time::age_interval(birth, facts.patient.birth_instant, &anchor)?;
        Some(Self { age_min, age_max, gender: facts.patient.gender, anchor })
    }

    /// True when the whole age interval lies in the span; `None` when it straddles it.
    pub fn within(&self, span: &AgeSpan) -> Option<bool> {
        if at_least(self.age_min, span.from) && !at_least(self.age_max, span.until) {
            return Some(true);
        }
        if !at_least(self.age_max, span.from) || at_least(self.age_min, span.until) {
            return Some(false);
        }
        None
    }

    /// Younger than 29 days for certain.
    pub fn neonate(&self) -> bool {
        self.age_max.days < 29
    }
}

use super::bands::at_least;

fn sex_fits(sex: SexRestriction, gender: Gender) -> bool {
    match sex {
        SexRestriction::Any => true,
        SexRestriction::Male => gender == Gender::Male,
        SexRestriction::Female => gender == Gender::Female,
    }
}

/// Classify a value against the ranges for an analyte at this age and sex.
/// Returns the outcome and the range text, or why it could not be read.
fn classify(rules: &RuleSet, ctx: &Context, analyte: Analyte, value: f64) -> Result<(LabOutcome, String), String> {
    let mut outcomes = Vec::new();
    for age in [ctx.age_min, ctx.age_max] {
        let ranges: Vec<_> = rules
            .lab_ranges
            .iter()
            .filter(|r| r.analyte == analyte && at_least(age, r.from) && !at_least(age, r.until))
            .collect();
        let specific: Vec<_> =
            ranges.iter().filter(|r| r.sex != SexRestriction::Any && sex_fits(r.sex, ctx.gender)).collect();
        let range = match (specific.first(), ranges.iter().find(|r| r.sex == SexRestriction::Any)) {
            (Some(r), _) => **r,
            (None, Some(r)) => *r,
            (None, None) => {
                if ranges.is_empty() {
                    return Err(format!("no reference range for {} at age {}", analyte.key(), age.describe()));
                }
                return Err(format!(
                    "the {} ranges at this age are sex-specific and the patient's sex is not recorded",
                    analyte.key()
                ));
            }
        };
        let outcome = if value < range.lower {
            LabOutcome::Low
        } else if value > range.upper {
            LabOutcome::High
        } else {
            LabOutcome::Normal
        };
        outcomes.push((
            outcome,
            format!("{}-{} {} ({})", num(range.lower, 2), num(range.upper, 2), range.unit, range.source),
        ));
    }
    match outcomes.as_slice() {
        [(a, text), (b, _)] if a == b => Ok((*a, text.clone())),
        _ => Err(format!(
            "the possible ages give different {} ranges with different readings; record the full birth date",
            analyte.key()
        )),
    }
}

/// Read the labs the causes use. Stale or unreadable ones are returned as
/// (source, reason) pairs for the not-used list.
pub fn read_labs(rules: &RuleSet, facts: &Facts, ctx: &Context) -> (Readings, Vec<(Source, String)>) {
    let mut readings = Readings::default();
    let mut unused = Vec::new();
    for test in &rules.next_tests {
        let analyte = test.analyte;
        let found = facts.of(analyte);
        let limit = facts.now - (test.max_age_hours * 3600.0).round() as i64;
        let mut fresh = found.iter().filter(|m| m.when.latest >= limit);
        for m in found.iter().filter(|m| m.when.latest < limit) {
            unused.push((
                m.source.clone(),
                format!("older than {} h, the limit for this test in the work-up", num(test.max_age_hours, 0)),
            ));
        }
        let Some(m) = fresh.next() else { continue };
        for other in fresh {
            unused.push((other.source.clone(), "a more recent result of the same test was used".to_owned()));
        }
        match read_one(rules, ctx, m) {
            // A specimen problem that falsely raises this test: only a low value counts.
            Ok(r)
                if r.outcome != LabOutcome::Low
                    && let Some(f) = facts.specimen_of(m).into_iter().find(|f| f.masks_low) =>
            {
                unused.push((
                    m.source.clone(),
                    format!("from a {} specimen, which can falsely raise it: a value that is not low cannot exclude a low one; repeat it", f.label),
                ));
            }
            Ok(r) => {
                readings.labs.insert(analyte, r);
            }
            Err(why) => unused.push((m.source.clone(), why)),
        }
    }
    // Total 25-OH vitamin D preferred; a D3-only result stands in, with a caution.
    if !readings.labs.contains_key(&Analyte::VitaminD25Oh)
        && let Some(m) = facts.of(Analyte::VitaminD3_25Oh).first()
        && let Ok(mut r) = read_one(rules, ctx, m)
    {
        r.text.push_str(" This is 25-OH vitamin D3 only; it misses vitamin D2 and may read low after D2 supplements.");
        readings.labs.entry(Analyte::VitaminD25Oh).or_insert(r);
    }
    readings.egfr = egfr(rules, facts, ctx, &readings);
    (readings, unused)
}

fn read_one(rules: &RuleSet, ctx: &Context, m: &Measurement) -> Result<LabReading, String> {
    let label = rules.analyte(m.analyte).map_or(m.analyte.key(), |a| a.label.as_str()).to_owned();
    if matches!(m.analyte, Analyte::VitaminD25Oh | Analyte::VitaminD3_25Oh) {
        let cut = rules.vitamin_d_25oh_cutoffs.chosen().ok_or("no 25-OH vitamin D cut-offs chosen")?;
        let outcome = if m.value < cut.deficient_below { LabOutcome::Low } else { LabOutcome::Normal };
        let band = if m.value < cut.deficient_below {
            "deficient"
        } else if m.value < cut.insufficient_below {
            "insufficient (not counted as deficient)"
        } else {
            "sufficient"
        };
        return Ok(LabReading {
            analyte: m.analyte,
            outcome,
            text: format!(
                "{label} {} nmol/L: {band} (deficient below {}, insufficient below {} nmol/L; {}).",
                num(m.value, 0),
                num(cut.deficient_below, 0),
                num(cut.insufficient_below, 0),
                cut.source
            ),
            sources: vec![m.source.clone()],
        });
    }
    if m.analyte == Analyte::BloodPh {
        let a = &rules.alkalosis;
        let outcome = if m.value > a.ph_above { LabOutcome::High } else { LabOutcome::Normal };
        return Ok(LabReading {
            analyte: m.analyte,
            outcome,
            text: format!(
                "Blood pH {}: {} (alkalosis above {}; {}).",
                num(m.value, 2),
                if outcome == LabOutcome::High { "alkalosis" } else { "not alkalotic" },
                num(a.ph_above, 2),
                a.source
            ),
            sources: vec![m.source.clone()],
        });
    }
    let (outcome, range) = classify(rules, ctx, m.analyte, m.value)?;
    Ok(LabReading {
        analyte: m.analyte,
        outcome,
        text: format!("{label} {} {}: {} (range {range}).", num(m.value, 2), m.unit, outcome.label()),
        sources: vec![m.source.clone()],
    })
}

fn egfr(rules: &RuleSet, facts: &Facts, ctx: &Context, readings: &Readings) -> Option<LabReading> {
    let e = &rules.egfr;
    readings.labs.get(&Analyte::Creatinine)?;
    let creatinine = facts.of(Analyte::Creatinine).into_iter().next()?;
    let limit = facts.now - (e.height_max_age_days * 86_400.0).round() as i64;
    let height = facts.of(Analyte::BodyHeight).into_iter().find(|h| h.when.latest >= limit)?;
    let span = AgeSpan { from: e.valid_from, until: e.valid_until };
    if ctx.within(&span) != Some(true) {
        return None;
    }
    // Creatinine is canonical in umol/L; the SI form of the bedside Schwartz equation applies.
    let value = e.k_umol_l * height.value / creatinine.value;
    let outcome = if value < e.impaired_below { LabOutcome::Low } else { LabOutcome::Normal };
    Some(LabReading {
        analyte: Analyte::Creatinine,
        outcome,
        text: format!(
            "eGFR (bedside Schwartz) = {} x {} cm / {} umol/L = {} mL/min/1.73 m2: {} (impaired below {}, reduced below {}; {}; {}).",
            num(e.k_umol_l, 1),
            num(height.value, 1),
            num(creatinine.value, 0),
            num(value, 0),
            if value < e.impaired_below {
                "impaired"
            } else if value < e.reduced_below {
                "mildly reduced (not counted as impaired)"
            } else {
                "not reduced"
            },
            num(e.impaired_below, 0),
            num(e.reduced_below, 0),
            e.source,
            e.threshold_source
        ),
        sources: vec![creatinine.source.clone(), height.source.clone()],
    })
}

/// Evaluate every cause.
pub fn evaluate(rules: &RuleSet, ctx: &Context, readings: &Readings, events: &[CodedEvent]) -> Vec<CauseResult> {
    evaluate_with(rules, ctx, readings, events, Detail::Full)
}

/// Labels and scores only, without the texts and evidence of met findings: the
/// planner weighs many hypothetical results and reads only the labels.
pub fn evaluate_labels(rules: &RuleSet, ctx: &Context, readings: &Readings, events: &[CodedEvent]) -> Vec<CauseResult> {
    evaluate_with(rules, ctx, readings, events, Detail::LabelsOnly)
}

/// How much of each result to build.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Detail {
    /// Texts and evidence of every met finding.
    Full,
    /// Labels, scores and missing labs only.
    LabelsOnly,
}

fn evaluate_with(
    rules: &RuleSet,
    ctx: &Context,
    readings: &Readings,
    events: &[CodedEvent],
    detail: Detail,
) -> Vec<CauseResult> {
    let mut results: Vec<CauseResult> = rules
        .causes
        .iter()
        .enumerate()
        .map(|(i, cause)| evaluate_one(rules, ctx, readings, events, cause, i, detail))
        .collect();
    results.sort_by(|a, b| a.label.cmp(&b.label).then(b.score.cmp(&a.score)).then(a.rule_index.cmp(&b.rule_index)));
    results
}

fn points(rules: &RuleSet, effect: Effect) -> i32 {
    let w = &rules.cause_weighing;
    match effect {
        Effect::StrongFor => w.strong_for,
        Effect::For => w.r#for,
        Effect::Against => w.against,
        Effect::StrongAgainst => w.strong_against,
        Effect::RulesOut => 0,
    }
}

fn evaluate_one(
    rules: &RuleSet,
    ctx: &Context,
    readings: &Readings,
    events: &[CodedEvent],
    cause: &Cause,
    rule_index: usize,
    detail: Detail,
) -> CauseResult {
    let mut result = CauseResult {
        id: cause.id.clone(),
        name: cause.label.clone(),
        rule_index,
        label: CauseLabel::Possible,
        score: 0,
        met: Vec::new(),
        missing: Vec::new(),
        ruled_out_by: None,
        no_exposure: false,
    };
    if let Some(span) = &cause.applies
        && ctx.within(span) == Some(false)
    {
        result.label = CauseLabel::RuledOut;
        result.ruled_out_by =
            Some(format!("the patient's age is outside the ages this cause applies to ({})", cause.source));
        return result;
    }
    let mut strong = false;
    let mut met_flags = Vec::with_capacity(cause.findings.len());
    for f in &cause.findings {
        let outcome = check(rules, ctx, readings, events, f, detail);
        met_flags.push(matches!(outcome, Check::Met(..)));
        match outcome {
            Check::Met(text, evidence) => {
                if f.effect == Effect::RulesOut {
                    result.ruled_out_by =
                        Some(if detail == Detail::Full { format!("{text} ({})", f.source) } else { String::new() });
                }
                strong |= f.effect == Effect::StrongFor;
                let p = points(rules, f.effect);
                result.score += p;
                if detail == Detail::Full {
                    result.met.push(MetFinding {
                        text,
                        effect: f.effect,
                        points: p,
                        source: f.source.clone(),
                        evidence,
                    });
                }
            }
            Check::Missing(analyte) => {
                if !result.missing.contains(&analyte) {
                    result.missing.push(analyte);
                }
            }
            Check::NotMet => {}
        }
    }
    let w = &rules.cause_weighing;
    // A cause that needs an exposure opens on a strong finding or on a
    // recorded condition, medication or procedure, not on a weak lab sign alone.
    let positive = cause.findings.iter().zip(&met_flags).any(|(f, met)| {
        *met && (f.effect == Effect::StrongFor
            || (f.effect == Effect::For && (f.condition.is_some() || f.medication.is_some() || f.procedure.is_some())))
    });
    result.label = if result.ruled_out_by.is_some() {
        CauseLabel::RuledOut
    } else if cause.needs_positive_finding && !positive {
        result.no_exposure = true;
        CauseLabel::Unlikely
    } else if result.score >= w.likely_at_least && (strong || !w.likely_needs_strong_finding) {
        CauseLabel::Likely
    } else if result.score <= w.unlikely_at_most {
        CauseLabel::Unlikely
    } else {
        CauseLabel::Possible
    };
    result
}

enum Check {
    Met(String, Vec<Source>),
    Missing(Analyte),
    NotMet,
}

fn event_fits(e: &CodedEvent, list: &str, kind: EventKind, within_days: Option<f64>, anchor: &When) -> bool {
    if e.kind != kind || !e.lists.iter().any(|l| l == list) {
        return false;
    }
    match (within_days, &e.when) {
        (None, _) => true,
        (Some(days), Some(w)) => {
            let window = (days * 86_400.0).round() as i64;
            w.earliest <= anchor.latest + 3600 && anchor.earliest - w.latest <= window
        }
        // A windowed finding needs a time; an undated event does not count.
        (Some(_), None) => false,
    }
}

fn check(
    rules: &RuleSet,
    ctx: &Context,
    readings: &Readings,
    events: &[CodedEvent],
    f: &CauseFinding,
    detail: Detail,
) -> Check {
    let met = |text: &dyn Fn() -> String, evidence: &dyn Fn() -> Vec<Source>| match detail {
        Detail::Full => Check::Met(text(), evidence()),
        Detail::LabelsOnly => Check::Met(String::new(), Vec::new()),
    };
    if let Some(analyte) = f.lab {
        let want = f.is.unwrap_or(LabOutcome::Normal);
        return match readings.labs.get(&analyte) {
            Some(r) if want.matches(r.outcome) => met(&|| r.text.clone(), &|| r.sources.clone()),
            Some(_) => Check::NotMet,
            None => Check::Missing(analyte),
        };
    }
    if f.egfr {
        let want = f.is.unwrap_or(LabOutcome::Low);
        return match &readings.egfr {
            Some(r) if want.matches(r.outcome) => met(&|| r.text.clone(), &|| r.sources.clone()),
            Some(_) => Check::NotMet,
            None => Check::Missing(Analyte::Creatinine),
        };
    }
    if let Some(span) = &f.age {
        return match ctx.within(span) {
            Some(true) => {
                met(&|| format!("Age {} is within the span this finding covers.", ctx.age_min.describe()), &Vec::new)
            }
            _ => Check::NotMet,
        };
    }
    let (list, kind) = match (&f.condition, &f.medication, &f.procedure) {
        (Some(l), _, _) => (l, EventKind::Condition),
        (_, Some(l), _) => (l, EventKind::Medication),
        (_, _, Some(l)) => (l, EventKind::Procedure),
        _ => return Check::NotMet,
    };
    let hits: Vec<&CodedEvent> =
        events.iter().filter(|e| event_fits(e, list, kind, f.within_days, &ctx.anchor)).collect();
    if hits.is_empty() {
        return Check::NotMet;
    }
    if detail == Detail::LabelsOnly {
        return Check::Met(String::new(), Vec::new());
    }
    let label = rules.code_lists.iter().find(|c| &c.id == list).map_or(list.as_str(), |c| c.label.as_str());
    let what: Vec<String> = hits
        .iter()
        .map(|e| {
            format!(
                "{} ({}{})",
                e.code.display,
                e.source.label(),
                e.when_text.as_deref().map(|t| format!(", {t}")).unwrap_or_default()
            )
        })
        .collect();
    Check::Met(format!("{label}: {}.", what.join("; ")), hits.iter().map(|e| e.source.clone()).collect())
}

/// Describe a finding's requirement, for "missing" text.
pub fn analyte_label(rules: &RuleSet, analyte: Analyte) -> String {
    rules.analyte(analyte).map_or_else(|| analyte.key().to_owned(), |a| a.label.clone())
}
