//! Calcium status: is this child hypocalcemic, how badly, and on what basis.
//!
//! Order of preference (issue 2): a usable ionized calcium; otherwise a total
//! calcium adjusted for an albumin from the same draw; otherwise a
//! laboratory-reported adjusted calcium; otherwise the unadjusted total, which
//! needs an albumin before it can be trusted. Each value is judged against the
//! age band's interval and grades from the rule data.

use super::bands::{self, BandChoice, NoBand};
use super::facts::{
    Analyte, Facts, Measurement, ResultStatus, Source, SpecimenAction, SpecimenFinding, SymptomFinding,
};
use super::format::{num, value_with_mg_dl};
use super::time::When;
use crate::rules::model::{AgeBand, Interval, IssueSeverity, RuleSet};

/// GuidanceResponse.status the assessment supports.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum GuidanceStatus {
    /// Assessed from an ionized calcium.
    Success,
    /// Assessed, but more data would make it firmer (an ionized calcium).
    DataRequested,
    /// Not assessable, or not trustworthy, without more data.
    DataRequired,
    /// The rules do not cover this patient.
    Failure,
}

impl GuidanceStatus {
    /// The FHIR code.
    pub fn code(self) -> &'static str {
        match self {
            Self::Success => "success",
            Self::DataRequested => "data-requested",
            Self::DataRequired => "data-required",
            Self::Failure => "failure",
        }
    }
}

/// Which value the status rests on.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Measure {
    /// Measured ionized calcium.
    Ionized,
    /// Total calcium adjusted here for albumin.
    AlbuminAdjusted,
    /// Adjusted calcium as reported by the laboratory.
    LabAdjusted,
    /// Total calcium with no albumin to adjust it.
    TotalUnadjusted,
}

impl Measure {
    /// Plain label.
    pub fn label(self) -> &'static str {
        match self {
            Self::Ionized => "ionized calcium",
            Self::AlbuminAdjusted => "albumin-adjusted total calcium (calculated)",
            Self::LabAdjusted => "albumin-adjusted calcium (reported by the laboratory)",
            Self::TotalUnadjusted => "total calcium, not adjusted for albumin",
        }
    }
}

/// Where the value sits against the interval.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Classification {
    /// Within the interval.
    Normal,
    /// Above the upper limit.
    High,
    /// Below the lower limit: hypocalcemia.
    Low,
}

impl Classification {
    /// v3 ObservationInterpretation code (LL is used for a severe grade).
    pub fn interpretation(self, severe: bool) -> (&'static str, &'static str) {
        match (self, severe) {
            (Self::Low, true) => ("LL", "Critical low"),
            (Self::Low, false) => ("L", "Low"),
            (Self::High, _) => ("H", "High"),
            (Self::Normal, _) => ("N", "Normal"),
        }
    }
}

/// The interval a value was judged against.
#[derive(Debug, Clone)]
pub struct IntervalUsed {
    /// Band id.
    pub band_id: String,
    /// Band label.
    pub band_label: String,
    /// Why this band (birth weight, gestation, partial birth date), as the band choice said.
    pub band_notes: Vec<String>,
    /// Lower limit, mmol/L.
    pub lower: f64,
    /// Upper limit, mmol/L.
    pub upper: f64,
    /// Source.
    pub source: String,
}

/// A grade that was reached.
#[derive(Debug, Clone)]
pub struct GradeHit {
    /// Grade name.
    pub grade: String,
    /// Threshold, mmol/L.
    pub at_or_below: f64,
    /// Severity.
    pub severity: IssueSeverity,
    /// Source.
    pub source: String,
}

/// A QTc that was read.
#[derive(Debug, Clone)]
pub struct QtcFinding {
    /// QTc, ms.
    pub value_ms: f64,
    /// Above the threshold.
    pub prolonged: bool,
    /// Threshold, ms.
    pub threshold_ms: f64,
    /// Where it came from.
    pub source: Source,
}

/// The calcium status.
#[derive(Debug, Clone)]
pub struct CalciumFinding {
    /// Which value.
    pub measure: Measure,
    /// Value, mmol/L.
    pub value_mmol_l: f64,
    /// Interval used.
    pub interval: IntervalUsed,
    /// Classification.
    pub classification: Classification,
    /// Deepest grade reached (only when low).
    pub grade: Option<GradeHit>,
    /// Symptoms that count.
    pub symptoms: Vec<SymptomFinding>,
    /// Records near the result that could be a symptom but could not be
    /// classified (Conditions and exam findings in no list): with no symptom
    /// recorded, the symptom state is unknown rather than none.
    pub unclassified_near: Vec<Source>,
    /// QTc, when one was recorded close to the result.
    pub qtc: Option<QtcFinding>,
    /// DetectedIssue severity, when low.
    pub severity: Option<IssueSeverity>,
    /// Inputs the value rests on (calcium first).
    pub evidence: Vec<Source>,
    /// The calcium result's time as the input wrote it.
    pub effective_text: String,
    /// The calcium result's time.
    pub when: When,
    /// Some input was preliminary.
    pub preliminary: bool,
    /// Specimen problems of the calcium (and albumin) used, or of a calcium
    /// result set aside for one: said on every IV calcium proposal.
    pub specimen_cautions: Vec<String>,
}

impl CalciumFinding {
    /// Hypocalcemia present.
    pub fn is_low(&self) -> bool {
        self.classification == Classification::Low
    }
    /// Symptomatic (a symptom, or a prolonged QTc).
    pub fn is_symptomatic(&self) -> bool {
        !self.symptoms.is_empty() || self.qtc.as_ref().is_some_and(|q| q.prolonged)
    }
}

/// The albumin-adjusted calcium computed here.
#[derive(Debug, Clone)]
pub struct DerivedAdjusted {
    /// Result, mmol/L.
    pub value_mmol_l: f64,
    /// Result in mg/dL.
    pub value_mg_dl: f64,
    /// The total calcium.
    pub calcium: Source,
    /// The albumin.
    pub albumin: Source,
    /// Formula in words and symbols.
    pub formula: String,
    /// The arithmetic with the numbers.
    pub arithmetic: String,
    /// Interpretation against the band.
    pub classification: Classification,
    /// Severe grade reached.
    pub severe: bool,
    /// Interval used.
    pub interval: Option<IntervalUsed>,
    /// Effective time of the total calcium, as written.
    pub effective_text: String,
    /// Some input was preliminary.
    pub preliminary: bool,
}

/// A missing input and why it is wanted.
#[derive(Debug, Clone)]
pub struct DataNeed {
    /// Analyte.
    pub analyte: Analyte,
    /// Why.
    pub reason: String,
}

/// An input the core did not use, and why.
#[derive(Debug, Clone)]
pub struct Unused {
    /// Which input.
    pub source: Source,
    /// Why.
    pub reason: String,
}

/// The whole result of the calcium status rules.
#[derive(Debug, Clone)]
pub struct Assessment {
    /// GuidanceResponse status.
    pub status: GuidanceStatus,
    /// The finding, when a value could be judged.
    pub finding: Option<CalciumFinding>,
    /// The adjusted calcium computed here.
    pub derived: Option<DerivedAdjusted>,
    /// Missing inputs.
    pub data_needs: Vec<DataNeed>,
    /// Basis lines: inputs, formula, thresholds, sources, in order.
    pub basis: Vec<String>,
    /// Cautions.
    pub cautions: Vec<String>,
    /// Inputs not used.
    pub unused: Vec<Unused>,
    /// A usable Patient.birthDate is needed.
    pub needs_birth_date: bool,
    /// Specimen problems found on the results read (used or set aside).
    pub specimen: Vec<SpecimenFinding>,
}

struct Ctx<'a> {
    rules: &'a RuleSet,
    facts: &'a Facts,
    basis: Vec<String>,
    cautions: Vec<String>,
    needs: Vec<DataNeed>,
    unused: Vec<Unused>,
    needs_birth_date: bool,
    specimen_cautions: Vec<String>,
}

impl Ctx<'_> {
    fn need(&mut self, analyte: Analyte, reason: impl Into<String>) {
        if !self.needs.iter().any(|n| n.analyte == analyte) {
            self.needs.push(DataNeed { analyte, reason: reason.into() });
        }
    }
    fn unused(&mut self, m: &Measurement, reason: impl Into<String>) {
        self.unused.push(Unused { source: m.source.clone(), reason: reason.into() });
    }
    fn hours(&self, h: f64) -> i64 {
        // Windows are whole or fractional hours; seconds are what times compare in.
        (h * 3600.0).round() as i64
    }
}

/// Fresh results of one analyte, most recent first; stale ones recorded as unused.
fn fresh<'f>(ctx: &mut Ctx<'f>, analyte: Analyte) -> Vec<&'f Measurement> {
    let limit = ctx.facts.now - ctx.hours(ctx.rules.windows.result_max_age_hours);
    let mut keep = Vec::new();
    for m in ctx.facts.of(analyte) {
        if m.when.latest < limit {
            let reason = format!(
                "older than {} h at evaluation time ({})",
                num(ctx.rules.windows.result_max_age_hours, 0),
                ctx.rules.windows.result_max_age_source
            );
            ctx.unused(m, reason);
        } else {
            keep.push(m);
        }
    }
    keep
}

/// Run the calcium status rules.
pub fn assess(facts: &Facts, rules: &RuleSet) -> Assessment {
    let mut ctx = Ctx {
        rules,
        facts,
        basis: Vec::new(),
        cautions: Vec::new(),
        needs: Vec::new(),
        unused: Vec::new(),
        needs_birth_date: false,
        specimen_cautions: Vec::new(),
    };
    specimen_set_aside(&mut ctx);
    let ionized = fresh(&mut ctx, Analyte::CalciumIonized);
    let totals = fresh(&mut ctx, Analyte::CalciumTotal);
    let albumins = fresh(&mut ctx, Analyte::Albumin);
    let lab_adjusted = fresh(&mut ctx, Analyte::CalciumAlbuminAdjusted);

    // Pick the value the status rests on.
    let mut derived: Option<(DerivedAdjusted, &Measurement)> = None;
    let chosen: Option<(Measure, &Measurement, Option<&Measurement>)> = if let Some(first) = ionized.first() {
        // Prefer a result not adjusted to pH 7.4 when two share the same time.
        let best =
            ionized.iter().find(|m| m.when.latest == first.when.latest && !m.ph_adjusted).copied().unwrap_or(first);
        Some((Measure::Ionized, best, None))
    } else if let Some(total) = totals.first().copied() {
        let window = ctx.hours(rules.windows.albumin_pairing_hours);
        let albumin = albumins
            .iter()
            .filter(|a| a.when.max_distance(&total.when) <= window)
            .min_by_key(|a| a.when.max_distance(&total.when))
            .copied();
        match albumin {
            Some(alb) => Some((Measure::AlbuminAdjusted, total, Some(alb))),
            None if !lab_adjusted.is_empty() => Some((Measure::LabAdjusted, lab_adjusted[0], None)),
            None => Some((Measure::TotalUnadjusted, total, None)),
        }
    } else if let Some(adj) = lab_adjusted.first().copied() {
        Some((Measure::LabAdjusted, adj, None))
    } else {
        None
    };

    let Some((measure, calcium, albumin)) = chosen else {
        ctx.need(
            Analyte::CalciumIonized,
            "No usable calcium result: an ionized calcium (preferred) or a total calcium with an albumin from the same draw is needed.",
        );
        ctx.need(
            Analyte::CalciumTotal,
            "Needed, with an albumin from the same draw, when no ionized calcium can be measured.",
        );
        ctx.need(Analyte::Albumin, "Needed to adjust a total calcium.");
        for m in &albumins {
            ctx.unused(m, "no calcium result to adjust");
        }
        return finish(ctx, GuidanceStatus::DataRequired, None, None);
    };

    // Everything else of the calcium analytes is listed as not used.
    for m in ionized.iter().chain(&totals).chain(&lab_adjusted).chain(&albumins) {
        if std::ptr::eq(*m, calcium) || albumin.is_some_and(|a| std::ptr::eq(*m, a)) {
            continue;
        }
        let reason = if m.analyte == calcium.analyte {
            "a more recent result of the same test was used".to_owned()
        } else if measure == Measure::Ionized {
            "an ionized calcium was available and is preferred".to_owned()
        } else if m.analyte == Analyte::Albumin {
            format!(
                "not from the same draw as the total calcium used (within {} h)",
                num(rules.windows.albumin_pairing_hours, 0)
            )
        } else {
            "a calcium value of higher preference was used".to_owned()
        };
        ctx.unused(m, reason);
    }

    // Age band.
    let Some(birth) = facts.patient.birth_date else {
        ctx.need_birth_date();
        ctx.basis.push(describe_input(measure, calcium));
        return finish(ctx, GuidanceStatus::DataRequired, None, None);
    };
    let choice = match bands::choose(
        rules,
        birth,
        &calcium.when,
        facts.gestational_age_weeks,
        facts.patient.birth_instant,
        facts.birth_weight_kg,
    ) {
        Ok(c) => c,
        Err(NoBand::BornAfterResult) => {
            ctx.cautions.push(format!(
                "Patient.birthDate ({}) is after the calcium result; the birth date cannot be trusted and was not used.",
                facts.patient.source.expression
            ));
            ctx.need_birth_date();
            return finish(ctx, GuidanceStatus::DataRequired, None, None);
        }
        Err(NoBand::OutsideScope(text)) => {
            ctx.basis.push(text);
            return finish(ctx, GuidanceStatus::Failure, None, None);
        }
    };
    ctx.basis.extend(choice.notes.iter().cloned());

    // The value to judge, and the interval family it belongs to.
    let mut preliminary = calcium.status == ResultStatus::Preliminary;
    let (value, family): (f64, fn(&AgeBand) -> &Interval) = match (measure, albumin) {
        (Measure::AlbuminAdjusted, Some(alb)) => {
            preliminary |= alb.status == ResultStatus::Preliminary;
            let d = adjust(rules, calcium, alb);
            let v = d.value_mmol_l;
            derived = Some((d, calcium));
            (v, |b| &b.adjusted)
        }
        (Measure::Ionized, _) => (calcium.value, |b| &b.ionized),
        (Measure::LabAdjusted, _) => (calcium.value, |b| &b.adjusted),
        _ => (calcium.value, |b| &b.total),
    };
    ctx.basis.push(describe_input(measure, calcium));
    if let (Some((d, _)), Some(alb)) = (&derived, albumin) {
        ctx.basis.push(format!(
            "Albumin {} g/L ({} g/dL) at {} from {}.",
            num(alb.value, 1),
            num(alb.value / 10.0, 2),
            alb.when_text,
            alb.source.label()
        ));
        ctx.basis.push(format!("{} {}", d.formula, d.arithmetic));
    }

    // Judge against every candidate band; keep the most severe result.
    let judged: Vec<(Classification, Option<GradeHit>, &AgeBand)> = choice
        .candidates
        .iter()
        .map(|band| {
            let (c, g) = judge(value, family(band));
            (c, g, *band)
        })
        .collect();
    let worst = judged.iter().max_by_key(|(c, g, _)| (*c, g.as_ref().map(|g| g.severity))).cloned();
    let Some((classification, grade, band)) = worst else {
        return finish(ctx, GuidanceStatus::Failure, None, None);
    };
    if judged.len() > 1 {
        let agree = judged
            .iter()
            .all(|(c, g, _)| *c == classification && g.as_ref().map(|g| &g.grade) == grade.as_ref().map(|g| &g.grade));
        let labels: Vec<&str> = judged.iter().map(|(_, _, b)| b.label.as_str()).collect();
        ctx.basis.push(if agree {
            format!("The possible age bands ({}) give the same result.", labels.join("; "))
        } else {
            format!(
                "The possible age bands ({}) disagree; the most severe reading ({}) is reported. Record the full birth date.",
                labels.join("; "),
                band.label
            )
        });
    }
    let interval = family(band);
    let used = IntervalUsed {
        band_id: band.id.clone(),
        band_label: band.label.clone(),
        band_notes: choice.notes.clone(),
        lower: interval.lower,
        upper: interval.upper,
        source: interval.source.clone(),
    };
    ctx.basis.push(age_line(&choice, band));
    ctx.basis.push(format!(
        "Reference interval for {}: {}-{} mmol/L (source: {}).",
        measure.label(),
        num(used.lower, 2),
        num(used.upper, 2),
        used.source
    ));
    ctx.basis.push(match classification {
        Classification::Low => {
            format!("{} mmol/L is below the lower limit {} mmol/L: hypocalcemia.", num(value, 2), num(used.lower, 2))
        }
        Classification::High => format!(
            "{} mmol/L is above the upper limit {} mmol/L. High calcium is outside the scope of these rules.",
            num(value, 2),
            num(used.upper, 2)
        ),
        Classification::Normal => format!("{} mmol/L is within the interval.", num(value, 2)),
    });
    if let Some(g) = &grade {
        ctx.basis.push(format!(
            "Grade {}: {} <= {} mmol/L (source: {}).",
            g.grade,
            num(value, 2),
            num(g.at_or_below, 2),
            g.source
        ));
    }

    // Symptoms and QTc near the result.
    let symptoms = symptoms_near(&mut ctx, calcium);
    let window = ctx.hours(ctx.rules.windows.symptom_window_hours);
    let unclassified_near: Vec<Source> = facts
        .unclassified_findings
        .iter()
        .filter(|c| c.when.is_none_or(|w| w.min_distance(&calcium.when) <= window))
        .map(|c| c.source.clone())
        .collect();
    if symptoms.is_empty() && !unclassified_near.is_empty() {
        ctx.basis.push(format!(
            "Symptom state unknown: {} record(s) within {} h could not be classified and may be a symptom ({}).",
            unclassified_near.len(),
            num(rules.windows.symptom_window_hours, 0),
            unclassified_near.iter().map(Source::label).collect::<Vec<_>>().join(", ")
        ));
    }
    let qtc = qtc_near(&mut ctx, calcium);
    for s in &symptoms {
        ctx.basis.push(format!(
            "Symptom: {} ({}, {}).",
            s.symptom.label(),
            s.source.label(),
            s.when_text.as_deref().map_or("time not recorded".to_owned(), |t| format!("at {t}"))
        ));
    }
    if let Some(q) = &qtc {
        ctx.basis.push(format!(
            "QTc {} ms from {}: {} (threshold > {} ms; source: {}).",
            num(q.value_ms, 0),
            q.source.label(),
            if q.prolonged { "prolonged" } else { "not prolonged" },
            num(q.threshold_ms, 0),
            rules.qtc.source
        ));
    }

    let mut evidence = vec![calcium.source.clone()];
    if let Some(alb) = albumin {
        evidence.push(alb.source.clone());
    }
    evidence.extend(symptoms.iter().map(|s| s.source.clone()));
    if let Some(q) = qtc.as_ref().filter(|q| q.prolonged) {
        evidence.push(q.source.clone());
    }

    let mut finding = CalciumFinding {
        measure,
        value_mmol_l: value,
        interval: used.clone(),
        classification,
        grade,
        symptoms,
        unclassified_near,
        qtc,
        severity: None,
        evidence,
        effective_text: calcium.when_text.clone(),
        when: calcium.when,
        preliminary,
        specimen_cautions: Vec::new(),
    };
    if finding.is_low() {
        let base = finding.grade.as_ref().map_or(rules.severity.below_interval, |g| g.severity);
        let severity = if finding.is_symptomatic() {
            ctx.basis.push(format!(
                "Symptomatic, so severity is at least {} ({}).",
                rules.severity.symptomatic.code(),
                rules.severity.symptomatic_source
            ));
            base.max(rules.severity.symptomatic)
        } else {
            base
        };
        finding.severity = Some(severity);
    }
    if preliminary {
        ctx.cautions.push("A result used here is preliminary; the assessment may change when it is final.".to_owned());
    }

    // Status and what else is needed.
    let mut status = GuidanceStatus::Success;
    match measure {
        Measure::Ionized => {
            if calcium.ph_adjusted {
                ctx.cautions.push(
                    "The ionized calcium used is adjusted to pH 7.4; it may differ from the ionized calcium at the patient's actual pH."
                        .to_owned(),
                );
            }
        }
        Measure::AlbuminAdjusted | Measure::LabAdjusted => {
            ctx.cautions.push(rules.albumin_adjustment.caution.clone());
            status = GuidanceStatus::DataRequested;
            ctx.need(Analyte::CalciumIonized, "The albumin-adjusted calcium is an estimate; a measured ionized calcium is needed to confirm the status.");
            if let Some(alb) = albumin
                && alb.value < rules.albumin_adjustment.unreliable_below_albumin_g_l
            {
                status = GuidanceStatus::DataRequired;
                ctx.cautions.push(format!(
                    "Albumin {} g/L is below {} g/L, where the adjusted calcium is least reliable ({}). Measure an ionized calcium.",
                    num(alb.value, 1),
                    num(rules.albumin_adjustment.unreliable_below_albumin_g_l, 0),
                    rules.albumin_adjustment.unreliable_source
                ));
            }
        }
        Measure::TotalUnadjusted => {
            status = GuidanceStatus::DataRequired;
            ctx.cautions.push(
                "Total calcium was judged without an albumin from the same draw: a low albumin lowers total calcium without lowering ionized calcium, so this result cannot tell true hypocalcemia from low protein."
                    .to_owned(),
            );
            ctx.need(Analyte::Albumin, "Needed from the same draw to adjust the total calcium.");
            ctx.need(Analyte::CalciumIonized, "A measured ionized calcium is the preferred test.");
        }
    }
    if specimen_used(&mut ctx, measure, calcium, albumin) && status == GuidanceStatus::Success {
        status = GuidanceStatus::DataRequested;
    }
    finding.specimen_cautions = ctx.specimen_cautions.clone();
    let derived = derived.map(|(mut d, _)| {
        let (c, g) = judge(d.value_mmol_l, &band.adjusted);
        d.classification = c;
        d.severe = g.as_ref().is_some_and(|g| g.severity == IssueSeverity::High);
        d.interval = Some(IntervalUsed {
            band_id: band.id.clone(),
            band_label: band.label.clone(),
            band_notes: choice.notes.clone(),
            lower: band.adjusted.lower,
            upper: band.adjusted.upper,
            source: band.adjusted.source.clone(),
        });
        d.preliminary = preliminary;
        d
    });
    finish(ctx, status, Some(finding), derived)
}

impl Ctx<'_> {
    fn need_birth_date(&mut self) {
        self.needs_birth_date = true;
        self.cautions.push(
            "Patient.birthDate is needed to choose age-specific reference intervals; no status was assigned."
                .to_owned(),
        );
    }
}

fn finish(
    ctx: Ctx<'_>,
    status: GuidanceStatus,
    finding: Option<CalciumFinding>,
    derived: Option<DerivedAdjusted>,
) -> Assessment {
    Assessment {
        status,
        finding,
        derived,
        data_needs: ctx.needs,
        basis: ctx.basis,
        cautions: ctx.cautions,
        unused: ctx.unused,
        needs_birth_date: ctx.needs_birth_date,
        specimen: ctx.facts.specimen.clone(),
    }
}

/// The calcium analytes the status rests on.
fn is_calcium_input(a: Analyte) -> bool {
    matches!(a, Analyte::CalciumIonized | Analyte::CalciumTotal | Analyte::CalciumAlbuminAdjusted | Analyte::Albumin)
}

/// Calcium results the reader set aside for a specimen problem: said as a
/// caution, and an ionized calcium is asked for again.
fn specimen_set_aside(ctx: &mut Ctx<'_>) {
    let facts = ctx.facts;
    for f in facts.specimen.iter().filter(|f| f.action == SpecimenAction::SetAside && is_calcium_input(f.analyte)) {
        let text = format!(
            "{} ({}) was set aside: the specimen is {} ({}; {}). {}",
            f.result_text,
            f.result.label(),
            f.label,
            f.found,
            f.read_from.label(),
            f.effect
        );
        ctx.cautions.push(text.clone());
        ctx.specimen_cautions.push(text);
        if f.analyte == Analyte::CalciumIonized {
            ctx.need(
                Analyte::CalciumIonized,
                format!("The ionized calcium from a {} specimen was set aside; repeat it on a sound sample.", f.label),
            );
        }
    }
}

/// Specimen problems of the results the status rests on; true when there is one.
fn specimen_used(ctx: &mut Ctx<'_>, measure: Measure, calcium: &Measurement, albumin: Option<&Measurement>) -> bool {
    let facts = ctx.facts;
    let mut any = false;
    for (m, what) in std::iter::once((calcium, measure_input_label(measure))).chain(albumin.map(|a| (a, "albumin"))) {
        for f in facts.specimen_of(m) {
            let text = match f.action {
                SpecimenAction::NoEffect | SpecimenAction::SetAside => continue,
                SpecimenAction::Unread => format!("The {what} used ({}): {}", f.result.label(), f.effect),
                SpecimenAction::Caution => format!(
                    "The {what} used ({}) is from a specimen {} ({}; {}). {}",
                    f.result.label(),
                    f.label,
                    f.found,
                    f.read_from.label(),
                    f.effect
                ),
            };
            any = true;
            ctx.cautions.push(text.clone());
            ctx.specimen_cautions.push(text);
        }
    }
    any
}

fn describe_input(measure: Measure, m: &Measurement) -> String {
    format!(
        "{} {} at {} from {}{}.",
        capitalise(measure_input_label(measure)),
        if m.reported_unit == m.unit {
            format!("{} {}", num(m.reported_value, 2), m.reported_unit)
        } else {
            format!("{} {} (= {} {})", num(m.reported_value, 2), m.reported_unit, num(m.value, 3), m.unit)
        },
        m.when_text,
        m.source.label(),
        if m.ph_adjusted { ", adjusted to pH 7.4" } else { "" }
    )
}

fn measure_input_label(measure: Measure) -> &'static str {
    match measure {
        Measure::Ionized => "ionized calcium",
        Measure::LabAdjusted => "albumin-adjusted calcium reported by the laboratory",
        Measure::AlbuminAdjusted | Measure::TotalUnadjusted => "total calcium",
    }
}

fn capitalise(s: &str) -> String {
    let mut chars = s.chars();
    chars.next().map(|c| c.to_uppercase().collect::<String>() + chars.as_str()).unwrap_or_default()
}

fn age_line(choice: &BandChoice<'_>, band: &AgeBand) -> String {
    if choice.age_min == choice.age_max {
        format!("Age {} on the result date: band '{}'.", choice.age_min.describe(), band.label)
    } else {
        format!("Band '{}' applied.", band.label)
    }
}

/// Compare a value with an interval; return the classification and the
/// deepest grade reached (grades only apply below the lower limit).
pub fn judge(value: f64, interval: &Interval) -> (Classification, Option<GradeHit>) {
    if value < interval.lower {
        let grade = interval
            .grades
            .iter()
            .filter(|g| value <= g.at_or_below)
            .min_by(|a, b| a.at_or_below.total_cmp(&b.at_or_below))
            .map(|g| GradeHit {
                grade: g.grade.clone(),
                at_or_below: g.at_or_below,
                severity: g.severity,
                source: g.source.clone(),
            });
        (Classification::Low, grade)
    } else if value > interval.upper {
        (Classification::High, None)
    } else {
        (Classification::Normal, None)
    }
}

/// Albumin-adjusted calcium in the unit system the calcium was reported in.
pub fn adjust(rules: &RuleSet, calcium: &Measurement, albumin: &Measurement) -> DerivedAdjusted {
    let a = &rules.albumin_adjustment;
    let ca_mass = rules.analyte(Analyte::CalciumTotal).and_then(|r| r.molar_mass_g_per_mol);
    // mmol/L x (g/mol) / 10 = mg/dL.
    let to_mg_dl = |mmol: f64| ca_mass.map_or(f64::NAN, |m| mmol * m / 10.0);
    let albumin_g_l = albumin.value;
    if calcium.reported_unit == "mg/dL" {
        let ca = calcium.reported_value;
        let alb = albumin_g_l / 10.0;
        let adjusted = ca + a.conventional_slope_mg_dl_per_g_dl * (a.conventional_reference_albumin_g_dl - alb);
        let mmol = ca_mass.map_or(f64::NAN, |m| adjusted * 10.0 / m);
        DerivedAdjusted {
            value_mmol_l: mmol,
            value_mg_dl: adjusted,
            calcium: calcium.source.clone(),
            albumin: albumin.source.clone(),
            formula: format!(
                "Adjusted Ca (mg/dL) = Ca + {} x ({} - albumin g/dL) ({}).",
                num(a.conventional_slope_mg_dl_per_g_dl, 2),
                num(a.conventional_reference_albumin_g_dl, 1),
                a.source
            ),
            arithmetic: format!(
                "{} + {} x ({} - {}) = {} mg/dL = {} mmol/L.",
                num(ca, 2),
                num(a.conventional_slope_mg_dl_per_g_dl, 2),
                num(a.conventional_reference_albumin_g_dl, 1),
                num(alb, 2),
                num(adjusted, 2),
                num(mmol, 2)
            ),
            classification: Classification::Normal,
            severe: false,
            interval: None,
            effective_text: calcium.when_text.clone(),
            preliminary: false,
        }
    } else {
        let ca = calcium.value;
        let adjusted = ca + a.si_slope_mmol_l_per_g_l * (a.si_reference_albumin_g_l - albumin_g_l);
        DerivedAdjusted {
            value_mmol_l: adjusted,
            value_mg_dl: to_mg_dl(adjusted),
            calcium: calcium.source.clone(),
            albumin: albumin.source.clone(),
            formula: format!(
                "Adjusted Ca (mmol/L) = Ca + {} x ({} - albumin g/L) ({}).",
                num(a.si_slope_mmol_l_per_g_l, 3),
                num(a.si_reference_albumin_g_l, 0),
                a.source
            ),
            arithmetic: format!(
                "{} + {} x ({} - {}) = {} mmol/L.",
                num(ca, 2),
                num(a.si_slope_mmol_l_per_g_l, 3),
                num(a.si_reference_albumin_g_l, 0),
                num(albumin_g_l, 1),
                num(adjusted, 2)
            ),
            classification: Classification::Normal,
            severe: false,
            interval: None,
            effective_text: calcium.when_text.clone(),
            preliminary: false,
        }
    }
}

fn symptoms_near(ctx: &mut Ctx<'_>, calcium: &Measurement) -> Vec<SymptomFinding> {
    let window = ctx.hours(ctx.rules.windows.symptom_window_hours);
    let mut near = Vec::new();
    for s in &ctx.facts.symptoms {
        match &s.when {
            Some(w) if w.min_distance(&calcium.when) > window => ctx.unused.push(Unused {
                source: s.source.clone(),
                reason: format!(
                    "{} recorded more than {} h from the calcium result ({})",
                    s.symptom.label(),
                    num(ctx.rules.windows.symptom_window_hours, 0),
                    ctx.rules.windows.symptom_window_source
                ),
            }),
            _ => near.push(s.clone()),
        }
    }
    near
}

fn qtc_near(ctx: &mut Ctx<'_>, calcium: &Measurement) -> Option<QtcFinding> {
    let window = ctx.hours(ctx.rules.windows.qtc_pairing_hours);
    let mut chosen = None;
    for q in ctx.facts.of(Analyte::Qtc) {
        if chosen.is_none() && q.when.min_distance(&calcium.when) <= window {
            chosen = Some(QtcFinding {
                value_ms: q.value,
                prolonged: q.value > ctx.rules.qtc.prolonged_above_ms,
                threshold_ms: ctx.rules.qtc.prolonged_above_ms,
                source: q.source.clone(),
            });
        } else {
            let reason = if chosen.is_some() {
                "a QTc closer in time was used".to_owned()
            } else {
                format!(
                    "more than {} h from the calcium result ({})",
                    num(ctx.rules.windows.qtc_pairing_hours, 0),
                    ctx.rules.windows.qtc_pairing_source
                )
            };
            ctx.unused(q, reason);
        }
    }
    chosen
}

/// Analytes read by other rules; recorded as unused by this module for now.
pub fn unused_by_status(facts: &Facts) -> Vec<Unused> {
    use Analyte as A;
    facts
        .measurements
        .iter()
        .filter(|m| {
            !matches!(m.analyte, A::CalciumIonized | A::CalciumTotal | A::Albumin | A::CalciumAlbuminAdjusted | A::Qtc)
        })
        .map(|m| Unused {
            source: m.source.clone(),
            reason: format!("recognised ({}) but not read by the rules that ran", m.analyte.key()),
        })
        .collect()
}

/// Convenience for text: a calcium in mmol/L with mg/dL beside it.
pub fn show_calcium(rules: &RuleSet, mmol: f64) -> String {
    value_with_mg_dl(mmol, rules.analyte(Analyte::CalciumTotal).and_then(|r| r.molar_mass_g_per_mol))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::clinical::testing::*;
    use crate::clinical::time::{CivilDate, PartialDate};

    #[test]
    fn ionized_calcium_is_preferred_over_a_newer_total() {
        let f = facts(child(), vec![ionized(0.95, 10, "ica"), total_mg(9.6, 1, "tca"), albumin_g_dl(4.0, 1, "alb")]);
        let a = assess(&f, &rules());
        let finding = a.finding.unwrap();
        assert_eq!(finding.measure, Measure::Ionized);
        assert_eq!(a.status, GuidanceStatus::Success);
        assert!(a.derived.is_none());
        assert_eq!(a.unused.len(), 2, "{:?}", a.unused);
        assert!(a.unused.iter().all(|u| u.reason.contains("ionized calcium was available")));
    }

    #[test]
    fn payne_conventional_worked_example() {
        // Worked example in common practice (from memory, consistent with the
        // published form Ca + 0.8 x (4.0 - albumin)): Ca 7.0 mg/dL with albumin
        // 2.0 g/dL adjusts to 8.6 mg/dL.
        let f = facts(child(), vec![total_mg(7.0, 1, "tca"), albumin_g_dl(2.0, 1, "alb")]);
        let a = assess(&f, &rules());
        let d = a.derived.unwrap();
        assert!(close(d.value_mg_dl, 8.6, 1e-9), "{}", d.value_mg_dl);
        assert!(close(d.value_mmol_l, 8.6 * 10.0 / 40.078, 1e-9));
        assert!(d.arithmetic.contains("7.00 + 0.80 x (4.0 - 2.00) = 8.60 mg/dL"), "{}", d.arithmetic);
        // Albumin 20 g/L is below 30 g/L: the estimate is unreliable, an ionized calcium is required.
        assert_eq!(a.status, GuidanceStatus::DataRequired);
        assert!(a.data_needs.iter().any(|n| n.analyte == Analyte::CalciumIonized));
    }

    #[test]
    fn payne_published_slope_reproduces_the_1973_formula() {
        // Payne 1973 (BMJ 4:643): adjusted Ca = Ca - albumin + 4.0 (mg/100 mL, g/100 mL).
        // Ca 8.0 and albumin 2.0 give 10.0; a site choosing Payne's slope gets it.
        let mut r = rules();
        r.albumin_adjustment.conventional_slope_mg_dl_per_g_dl =
            r.albumin_adjustment.payne_original_slope_mg_dl_per_g_dl;
        let f = facts(child(), vec![total_mg(8.0, 1, "tca"), albumin_g_dl(2.0, 1, "alb")]);
        let d = assess(&f, &r).derived.unwrap();
        assert!(close(d.value_mg_dl, 10.0, 1e-9), "{}", d.value_mg_dl);
    }

    #[test]
    fn payne_si_worked_example() {
        // SI form Ca + 0.02 x (40 - albumin g/L) (GPnotebook; NHS Tayside):
        // Ca 2.00 mmol/L with albumin 30 g/L adjusts to 2.20 mmol/L.
        let f =
            facts(child(), vec![total_mmol(2.00, 1, "tca"), m(Analyte::Albumin, 30.0, "g/L", (30.0, "g/L"), 1, "alb")]);
        let a = assess(&f, &rules());
        let d = a.derived.clone().unwrap();
        assert!(close(d.value_mmol_l, 2.20, 1e-9), "{}", d.value_mmol_l);
        assert_eq!(a.status, GuidanceStatus::DataRequested, "albumin 30 g/L is not below the 30 g/L limit");
        // 2.20 is the lower limit of the child's adjusted interval: within it.
        assert_eq!(a.finding.unwrap().classification, Classification::Normal);
    }

    #[test]
    fn albumin_from_another_draw_is_not_used() {
        let f = facts(child(), vec![total_mg(8.0, 1, "tca"), albumin_g_dl(3.0, 30, "alb")]);
        let a = assess(&f, &rules());
        assert_eq!(a.finding.as_ref().unwrap().measure, Measure::TotalUnadjusted);
        assert!(a.derived.is_none());
        assert_eq!(a.status, GuidanceStatus::DataRequired);
        assert!(
            a.unused
                .iter()
                .any(|u| u.source.reference.as_deref() == Some("Observation/alb") && u.reason.contains("same draw"))
        );
        assert!(a.data_needs.iter().any(|n| n.analyte == Analyte::Albumin));
    }

    #[test]
    fn stale_results_are_not_used() {
        let f = facts(child(), vec![ionized(0.80, 100, "old")]);
        let a = assess(&f, &rules());
        assert!(a.finding.is_none());
        assert_eq!(a.status, GuidanceStatus::DataRequired);
        assert!(a.unused[0].reason.contains("older than 72 h"));
    }

    #[test]
    fn grades_follow_the_thresholds_for_a_child() {
        let r = rules();
        let cases = [
            (0.90, Classification::Low, Some("severe"), Some(IssueSeverity::High)),
            (0.91, Classification::Low, Some("mild"), Some(IssueSeverity::Moderate)),
            (1.00, Classification::Low, Some("mild"), Some(IssueSeverity::Moderate)),
            (1.05, Classification::Low, None, Some(IssueSeverity::Low)),
            (1.11, Classification::Normal, None, None),
            (1.30, Classification::Normal, None, None),
            (1.31, Classification::High, None, None),
        ];
        for (v, class, grade, severity) in cases {
            let a = assess(&facts(child(), vec![ionized(v, 1, "ica")]), &r);
            let f = a.finding.unwrap();
            assert_eq!(f.classification, class, "{v}");
            assert_eq!(f.grade.as_ref().map(|g| g.grade.as_str()), grade, "{v}");
            assert_eq!(f.severity, severity, "{v}");
        }
    }

    #[test]
    fn common_practice_total_calcium_range_is_normal_in_infancy() {
        // Fact of the trade (common practice): total calcium about 9-11 mg/dL in children.
        let infant = Some(PartialDate::Full(CivilDate::new(2025, 11, 30).unwrap()));
        // Unadjusted total calcium is judged against the total interval (9.0-11.0 mg/dL).
        for mg in [9.0, 10.0, 11.0] {
            let a = assess(&facts(infant, vec![total_mg(mg, 1, "t")]), &rules());
            assert_eq!(a.finding.unwrap().classification, Classification::Normal, "{mg} mg/dL");
        }
        let a = assess(&facts(infant, vec![total_mg(8.9, 1, "t")]), &rules());
        assert_eq!(a.finding.unwrap().classification, Classification::Low, "unadjusted total below 9.0 mg/dL");
        // With albumin 4.0 g/dL the adjusted value equals the total and is judged
        // against the adjusted interval 2.20-2.70 mmol/L (8.82-10.82 mg/dL).
        let a = assess(&facts(infant, vec![total_mg(8.9, 1, "t"), albumin_g_dl(4.0, 1, "a")]), &rules());
        assert_eq!(a.finding.unwrap().classification, Classification::Normal);
        let a = assess(&facts(infant, vec![total_mg(11.0, 1, "t"), albumin_g_dl(4.0, 1, "a")]), &rules());
        assert_eq!(a.finding.unwrap().classification, Classification::High);
    }

    #[test]
    fn symptoms_and_qtc_make_it_symptomatic() {
        let r = rules();
        let mut f = facts(child(), vec![ionized(1.05, 1, "ica")]);
        f.symptoms.push(seizure(Some(2)));
        let a = assess(&f, &r);
        let finding = a.finding.unwrap();
        assert!(finding.is_symptomatic());
        assert_eq!(finding.severity, Some(IssueSeverity::High));
        assert!(finding.evidence.iter().any(|s| s.resource_type == "Condition"));

        // A seizure a week ago does not count.
        let mut f = facts(child(), vec![ionized(1.05, 1, "ica")]);
        f.symptoms.push(seizure(Some(24 * 7)));
        let a = assess(&f, &r);
        assert!(!a.finding.unwrap().is_symptomatic());
        assert!(a.unused.iter().any(|u| u.reason.contains("seizure recorded more than 72 h")));

        // Active condition with no onset recorded still counts.
        let mut f = facts(child(), vec![ionized(1.05, 1, "ica")]);
        f.symptoms.push(seizure(None));
        assert!(assess(&f, &r).finding.unwrap().is_symptomatic());

        // QTc above 440 ms counts; 440 does not.
        let a = assess(&facts(child(), vec![ionized(1.05, 1, "ica"), qtc(452.0, 2)]), &r);
        assert_eq!(a.finding.unwrap().severity, Some(IssueSeverity::High));
        let a = assess(&facts(child(), vec![ionized(1.05, 1, "ica"), qtc(440.0, 2)]), &r);
        let f = a.finding.unwrap();
        assert!(!f.is_symptomatic());
        assert_eq!(f.severity, Some(IssueSeverity::Low));
    }

    #[test]
    fn missing_or_untrustworthy_birth_dates_stop_the_status() {
        let a = assess(&facts(None, vec![ionized(0.8, 1, "ica")]), &rules());
        assert!(a.finding.is_none());
        assert!(a.needs_birth_date);
        assert_eq!(a.status, GuidanceStatus::DataRequired);
        let adult = Some(PartialDate::Full(CivilDate::new(2000, 1, 1).unwrap()));
        let a = assess(&facts(adult, vec![ionized(0.8, 1, "ica")]), &rules());
        assert_eq!(a.status, GuidanceStatus::Failure);
        assert!(a.finding.is_none());
    }

    #[test]
    fn uncertain_age_band_reports_the_most_severe_reading() {
        // Born "2024": infant or child on 2026-11-30. Total 2.22 mmol/L with no
        // albumin: low for an infant (< 2.245), normal for a child (>= 2.20).
        let a = assess(&facts(Some(PartialDate::Year(2024)), vec![total_mmol(2.22, 1, "t")]), &rules());
        let f = a.finding.unwrap();
        assert_eq!(f.classification, Classification::Low);
        assert_eq!(f.interval.band_id, "infant");
        assert!(a.basis.iter().any(|b| b.contains("disagree")), "{:?}", a.basis);
    }

    #[test]
    fn no_calcium_means_data_required_with_what_to_measure() {
        let a = assess(&facts(child(), vec![albumin_g_dl(3.5, 1, "alb")]), &rules());
        assert_eq!(a.status, GuidanceStatus::DataRequired);
        let needed: Vec<Analyte> = a.data_needs.iter().map(|n| n.analyte).collect();
        assert_eq!(needed, [Analyte::CalciumIonized, Analyte::CalciumTotal, Analyte::Albumin]);
    }

    #[test]
    fn preliminary_results_carry_a_caution() {
        let mut ica = ionized(0.85, 1, "ica");
        ica.status = ResultStatus::Preliminary;
        let a = assess(&facts(child(), vec![ica]), &rules());
        assert!(a.finding.unwrap().preliminary);
        assert!(a.cautions.iter().any(|c| c.contains("preliminary")));
    }

    #[test]
    fn a_clotted_ionized_calcium_set_aside_falls_back_to_the_adjusted_total_with_the_reason_stated() {
        use crate::clinical::facts::SpecimenAction;
        // The reader left the clotted ionized 0.78 out of the measurements and recorded why.
        let clotted = ionized(0.78, 1, "ica");
        let mut f = facts(child(), vec![total_mg(7.0, 1, "tca"), albumin_g_dl(4.0, 1, "alb")]);
        f.specimen.push(specimen_finding(&clotted, "clotted", SpecimenAction::SetAside));
        let a = assess(&f, &rules());
        let finding = a.finding.unwrap();
        // 7.0 + 0.8 x (4.0 - 4.0) = 7.0 mg/dL = 1.747 mmol/L, below the child adjusted limit 2.20.
        assert_eq!(finding.measure, Measure::AlbuminAdjusted);
        assert!(close(finding.value_mmol_l, 7.0 * 10.0 / 40.078, 1e-9));
        assert!(a.cautions.iter().any(|c| c.contains("was set aside: the specimen is clotted")), "{:?}", a.cautions);
        assert_eq!(finding.specimen_cautions.len(), 1, "said on the IV proposals");
        let need = a.data_needs.iter().find(|n| n.analyte == Analyte::CalciumIonized).unwrap();
        assert!(need.reason.contains("clotted specimen was set aside"), "{}", need.reason);
        assert_eq!(a.specimen.len(), 1, "carried to the writer and the trace");

        // Nothing else: no status, still said.
        let mut f = facts(child(), vec![]);
        f.specimen.push(specimen_finding(&clotted, "clotted", SpecimenAction::SetAside));
        let a = assess(&f, &rules());
        assert!(a.finding.is_none());
        assert_eq!(a.status, GuidanceStatus::DataRequired);
        assert!(a.cautions.iter().any(|c| c.contains("clotted")));
    }

    #[test]
    fn a_caution_on_the_calcium_used_is_stated_and_asks_for_a_repeat() {
        use crate::clinical::facts::SpecimenAction;
        let ica = ionized(0.85, 1, "ica");
        let mut f = facts(child(), vec![ica.clone()]);
        f.specimen.push(specimen_finding(&ica, "hemolyzed", SpecimenAction::Caution));
        let a = assess(&f, &rules());
        let finding = a.finding.unwrap();
        assert_eq!(finding.measure, Measure::Ionized);
        assert!(finding.is_low());
        assert_eq!(a.status, GuidanceStatus::DataRequested, "success without the specimen problem");
        assert!(a.cautions.iter().any(|c| c.contains("is from a specimen hemolyzed")), "{:?}", a.cautions);
        assert_eq!(finding.specimen_cautions.len(), 1);

        // The check could not run: also stated.
        let mut f = facts(child(), vec![ica.clone()]);
        f.specimen.push(specimen_finding(&ica, "unread", SpecimenAction::Unread));
        let a = assess(&f, &rules());
        assert_eq!(a.status, GuidanceStatus::DataRequested);
        assert!(a.cautions.iter().any(|c| c.contains("effect of unread")));

        // A handling state, or a problem on another result: no caution on the status.
        let mg = m(Analyte::Magnesium, 0.8, "mmol/L", (0.8, "mmol/L"), 1, "mg");
        let mut f = facts(child(), vec![ica.clone(), mg.clone()]);
        f.specimen.push(specimen_finding(&ica, "room-temperature", SpecimenAction::NoEffect));
        f.specimen.push(specimen_finding(&mg, "hemolyzed", SpecimenAction::Caution));
        let a = assess(&f, &rules());
        assert_eq!(a.status, GuidanceStatus::Success);
        assert!(a.finding.unwrap().specimen_cautions.is_empty());
        assert_eq!(a.specimen.len(), 2, "both are still carried to the writer");
    }

    mod properties {
        use proptest::prelude::*;

        use super::*;

        proptest! {
            /// Payne's adjustment rises with the calcium and falls as the albumin rises,
            /// in both unit systems (slopes from the rule data are positive).
            #[test]
            fn payne_is_monotone_in_both_inputs(
                ca_mg in 4.0f64..14.0, d_ca in 0.01f64..2.0,
                alb_g_dl in 1.0f64..5.5, d_alb in 0.01f64..1.0,
            ) {
                let r = crate::clinical::testing::shared_rules();
                let adj = |ca: &Measurement, alb: &Measurement| adjust(r, ca, alb).value_mmol_l;
                // Conventional units (mg/dL, g/dL).
                let base = adj(&total_mg(ca_mg, 1, "t"), &albumin_g_dl(alb_g_dl, 1, "a"));
                prop_assert!(adj(&total_mg(ca_mg + d_ca, 1, "t"), &albumin_g_dl(alb_g_dl, 1, "a")) > base);
                prop_assert!(adj(&total_mg(ca_mg, 1, "t"), &albumin_g_dl(alb_g_dl + d_alb, 1, "a")) < base);
                // SI units (mmol/L, g/L).
                let ca_mmol = ca_mg * 10.0 / 40.078;
                let alb_si = |g_l: f64| m(Analyte::Albumin, g_l, "g/L", (g_l, "g/L"), 1, "a");
                let base = adj(&total_mmol(ca_mmol, 1, "t"), &alb_si(alb_g_dl * 10.0));
                prop_assert!(adj(&total_mmol(ca_mmol + d_ca / 4.0, 1, "t"), &alb_si(alb_g_dl * 10.0)) > base);
                prop_assert!(adj(&total_mmol(ca_mmol, 1, "t"), &alb_si(alb_g_dl * 10.0 + d_alb * 10.0)) < base);
            }
        }
    }
}
