//! The explain trace: every rule the assessment evaluated, in order, with the
//! inputs it read (and where each came from in the request), the threshold
//! or formula it applied, and what it found. Built from the results of the
//! status rules, the work-up and the treatment plan; the safety checks are
//! listed whether they were raised or not. Pure: the FHIR writer turns it
//! into a Parameters resource and the CLI into text.

use super::causes::CauseLabel;
use super::facts::Source;
use super::format::num;
use super::status::{Assessment, Classification};
use super::treatment::{Route, TreatmentPlan};
use super::workup::Workup;
use crate::rules::model::RuleSet;

/// The part of the assessment a step belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stage {
    /// Which inputs were used or set aside.
    Input,
    /// Calcium status and severity.
    Status,
    /// Causes.
    Causes,
    /// Next tests.
    Tests,
    /// Treatment proposals.
    Treatment,
    /// Safety checks.
    Safety,
}

impl Stage {
    /// The code written in the Parameters resource and the text heading.
    pub fn code(self) -> &'static str {
        match self {
            Self::Input => "input",
            Self::Status => "status",
            Self::Causes => "causes",
            Self::Tests => "tests",
            Self::Treatment => "treatment",
            Self::Safety => "safety",
        }
    }
}

/// An input a step read.
#[derive(Debug, Clone)]
pub struct Input {
    /// What it is, with its value.
    pub what: String,
    /// Where it came from.
    pub source: Option<Source>,
}

/// One rule evaluated.
#[derive(Debug, Clone)]
pub struct Step {
    /// Stage.
    pub stage: Stage,
    /// Where the rule lives in the rule data (a `rules show` path or table).
    pub rule: String,
    /// What the rule asked.
    pub question: String,
    /// What it read.
    pub inputs: Vec<Input>,
    /// The threshold, range or formula, with its source.
    pub basis: String,
    /// What it found.
    pub result: String,
}

fn step(stage: Stage, rule: impl Into<String>, question: impl Into<String>) -> Step {
    Step {
        stage,
        rule: rule.into(),
        question: question.into(),
        inputs: Vec::new(),
        basis: String::new(),
        result: String::new(),
    }
}

fn input(what: impl Into<String>, source: &Source) -> Input {
    Input { what: what.into(), source: Some(source.clone()) }
}

/// When a safety check is evaluated (mirrors treatment.rs).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Applies {
    /// Whatever the calcium.
    Always,
    /// When the calcium is low.
    WhenLow,
    /// When IV calcium is proposed.
    WithIvCalcium,
    /// When any calcium is proposed.
    WithCalcium,
    /// When a site sets a saline diluent and IV calcium is proposed.
    WithIvCalciumSaline,
    /// When oral calcium is proposed.
    WithOralCalcium,
    /// When cholecalciferol is proposed.
    WithVitaminD,
}

/// Every safety check of treatment.rs: key, rule data it reads, question.
const SAFETY_CHECKS: &[(&str, &str, &str, Applies)] = &[
    (
        "overshoot",
        "treatment (calcium_preparations list)",
        "Is a calcium infusion running while the calcium is not low?",
        Applies::Always,
    ),
    ("weight", "treatment.weight, growth_policy", "Is there a current, plausible weight to dose by?", Applies::WhenLow),
    (
        "weight-confirm",
        "growth_policy, preterm_references",
        "Is the dosing weight below the term reference with no gestational age recorded (used, to be confirmed)?",
        Applies::WhenLow,
    ),
    (
        "impossible-dose",
        "treatment, dose_sources, products",
        "Is every dose, rate, daily maximum and count of a proposal a positive, finite number (else it is not proposed)?",
        Applies::WhenLow,
    ),
    (
        "daily-maximum",
        "treatment.infusion, dose_sources",
        "Would what was given in 24 h plus the proposed infusion pass the daily maximum?",
        Applies::WithIvCalcium,
    ),
    (
        "fluid-load",
        "treatment.neonatal_fluid",
        "Does the calcium infusion take a large share of a neonate's daily fluid allowance?",
        Applies::WithIvCalcium,
    ),
    (
        "daily-maximum-incomplete",
        "treatment.infusion, formulary products (salt of each administration)",
        "Was IV calcium given in 24 h whose salt is not known, so the daily-maximum count may be low?",
        Applies::WithIvCalcium,
    ),
    (
        "unidentified-medication",
        "treatment.safety.unidentified_medication_current",
        "Is a medication record near the proposal that could not be identified by code or name?",
        Applies::WithCalcium,
    ),
    (
        "symptoms-unknown",
        "windows.symptom_window_hours",
        "With oral calcium only, is a Condition near the result that could be an unrecognised symptom?",
        Applies::WithOralCalcium,
    ),
    ("digoxin", "safety_sources.digoxin", "Is digoxin recorded with IV calcium proposed?", Applies::WithIvCalcium),
    (
        "precipitation",
        "safety_sources.phosphate_bicarbonate_precipitation",
        "Is sodium bicarbonate, or a running phosphate infusion, recorded with IV calcium proposed?",
        Applies::WithIvCalcium,
    ),
    (
        "ceftriaxone",
        "safety_sources.ceftriaxone_neonate_contraindication",
        "Is ceftriaxone recorded in a neonate with IV calcium proposed?",
        Applies::WithIvCalcium,
    ),
    (
        "ceftriaxone-line",
        "safety_sources.ceftriaxone_y_site_any_age",
        "Is ceftriaxone recorded in a child past the neonatal age with IV calcium proposed?",
        Applies::WithIvCalcium,
    ),
    (
        "saline-diluent",
        "treatment.bolus.diluent",
        "Is saline the site's diluent where dextrose is preferred?",
        Applies::WithIvCalciumSaline,
    ),
    (
        "arterial-line",
        "safety_sources.no_intra_arterial_or_uac",
        "Is the recorded line arterial?",
        Applies::WithIvCalcium,
    ),
    (
        "extravasation",
        "safety_sources.extravasation_calcinosis",
        "Is IV calcium to go through a peripheral or unrecorded line?",
        Applies::WithIvCalcium,
    ),
    ("bradycardia", "safety_sources.neonatal_bradycardia_stop", "Is a bradycardia recorded?", Applies::WithIvCalcium),
    ("qtc", "qtc.prolonged_above_ms", "Is the QTc prolonged?", Applies::WithIvCalcium),
    (
        "caxp",
        "treatment.safety.ca_x_p_limits, treatment.safety.ca_x_p_corrected_calcium, safety_sources.ca_x_p_under_12y, safety_sources.ca_x_p_over_12y",
        "Is the calcium-phosphate product (total calcium in the window, albumin-adjusted when an albumin was drawn with it) above the limit for the age?",
        Applies::WithCalcium,
    ),
    (
        "phosphate-high",
        "lab_ranges (phosphate), safety_sources.phosphate_high_with_calcium",
        "Is the phosphate above the upper limit for the age, with calcium proposed (whether or not a total calcium is measured)?",
        Applies::WithCalcium,
    ),
    (
        "calcitriol-deferred",
        "treatment.vitamin_d.calcitriol_deferred_for, lab_ranges (phosphate)",
        "Would calcitriol be proposed for kidney disease while the phosphate is above the upper limit for the age?",
        Applies::WhenLow,
    ),
    (
        "vitamin-d-liquid",
        "treatment.vitamin_d.cholecalciferol_product, safety_sources.vitamin_d_drop_strength_confusion",
        "Is a liquid vitamin D proposed, where drops and mL can be confused?",
        Applies::WithVitaminD,
    ),
    (
        "vitamin-d-dose-unmeasurable",
        "treatment.vitamin_d (liquids, measure_source), treatment.oral (0.1 mL step, rounding tolerance)",
        "Can a vitamin D liquid of verified strength measure the daily dose, in oral-syringe steps or at a mark of its own syringe?",
        Applies::WithVitaminD,
    ),
    (
        "oral-dose-rounding",
        "treatment.oral (rounding tolerance)",
        "Can a product measure the oral dose within the rounding tolerance?",
        Applies::WithOralCalcium,
    ),
];

/// The trace of one assessment.
pub fn trace(
    rules: &RuleSet,
    assessment: &Assessment,
    workup: Option<&Workup>,
    plan: Option<&TreatmentPlan>,
) -> Vec<Step> {
    let mut steps = Vec::new();
    specimen_steps(assessment, &mut steps);
    status_steps(rules, assessment, &mut steps);
    if let Some(w) = workup {
        cause_steps(rules, w, &mut steps);
        test_steps(w, &mut steps);
    }
    if let Some(p) = plan {
        treatment_steps(rules, assessment, p, &mut steps);
    }
    for u in &assessment.unused {
        let mut s = step(Stage::Input, "windows, codes", "Was this input used?");
        s.inputs.push(input(u.source.resource_type.clone(), &u.source));
        s.result = format!("not used: {}", u.reason);
        steps.push(s);
    }
    steps
}

/// The specimen check of each result that had a specimen problem.
fn specimen_steps(a: &Assessment, steps: &mut Vec<Step>) {
    use super::facts::SpecimenAction;
    for f in &a.specimen {
        let rule = match f.key.as_str() {
            "unread" => "specimen.unread_severity".to_owned(),
            "other-condition" => "specimen.other_condition_severity".to_owned(),
            key => format!("specimen.flags ({key})"),
        };
        let mut s = step(
            Stage::Input,
            rule,
            "Does the result's specimen (Specimen.condition), or the result's own flags or notes, show a problem?",
        );
        s.inputs.push(input(f.result_text.clone(), &f.result));
        if let Some(sp) = &f.specimen {
            s.inputs.push(input("Specimen", sp));
        }
        s.basis = format!("{} (source: {})", f.effect, f.source);
        s.result = format!(
            "{}: {} ({}); {}",
            f.label,
            f.found,
            f.read_from.label(),
            match f.action {
                SpecimenAction::SetAside => "the result was set aside",
                SpecimenAction::Caution => "the result is used with a stated caution",
                SpecimenAction::Unread => "the specimen check could not run; the result is used with a warning",
                SpecimenAction::NoEffect => "no effect on the result",
            }
        );
        steps.push(s);
    }
}

fn status_steps(rules: &RuleSet, a: &Assessment, steps: &mut Vec<Step>) {
    if let Some(d) = &a.derived {
        let mut s = step(Stage::Status, "albumin_adjustment", "What is the albumin-adjusted total calcium?");
        s.inputs.push(input("Total calcium", &d.calcium));
        s.inputs.push(input("Albumin", &d.albumin));
        s.basis = format!("{} ({})", d.formula, rules.albumin_adjustment.source);
        s.result = d.arithmetic.clone();
        steps.push(s);
    }
    let Some(f) = &a.finding else {
        let mut s = step(Stage::Status, "bands", "Can the calcium status be judged?");
        s.basis = a.basis.join(" ");
        s.result = if a.data_needs.is_empty() {
            "no calcium result could be judged".to_owned()
        } else {
            a.data_needs
                .iter()
                .map(|n| format!("needs {}: {}", n.analyte.key(), n.reason))
                .collect::<Vec<_>>()
                .join("; ")
        };
        steps.push(s);
        return;
    };
    let measure = f.measure.label();
    let mut s = step(
        Stage::Status,
        format!("bands.{}", f.interval.band_id),
        format!("Which age band applies, and where does the {measure} fall in its interval?"),
    );
    if let Some(first) = f.evidence.first() {
        s.inputs.push(input(format!("{measure} {} mmol/L at {}", num(f.value_mmol_l, 2), f.effective_text), first));
    }
    for e in f.evidence.iter().skip(1) {
        s.inputs.push(input(e.resource_type.clone(), e));
    }
    s.basis = format!(
        "{}: {}-{} mmol/L ({})",
        f.interval.band_label,
        num(f.interval.lower, 2),
        num(f.interval.upper, 2),
        f.interval.source
    );
    for note in &f.interval.band_notes {
        s.basis.push(' ');
        s.basis.push_str(note);
    }
    s.result = match f.classification {
        Classification::Low => "below the interval: hypocalcemia".to_owned(),
        Classification::Normal => "inside the interval".to_owned(),
        Classification::High => "above the interval".to_owned(),
    };
    steps.push(s);
    if f.classification == Classification::Low {
        let mut g =
            step(Stage::Status, format!("bands.{}.grades", f.interval.band_id), "Is a grade threshold reached?");
        g.basis = band_grades(rules, &f.interval.band_id, f.measure);
        g.result = f.grade.as_ref().map_or_else(
            || "no grade reached".to_owned(),
            |h| format!("{} (at or below {} mmol/L; {})", h.grade, num(h.at_or_below, 2), h.source),
        );
        steps.push(g);
    }
    let mut sy = step(
        Stage::Status,
        "windows.symptom_window_hours, severity.symptomatic",
        "Are symptoms of hypocalcemia recorded close to the result?",
    );
    sy.inputs = f.symptoms.iter().map(|x| input(x.symptom.label(), &x.source)).collect();
    sy.basis = format!(
        "within {} h of the result ({}); symptomatic means severity {} ({})",
        num(rules.windows.symptom_window_hours, 0),
        rules.windows.symptom_window_source,
        rules.severity.symptomatic.code(),
        rules.severity.symptomatic_source
    );
    sy.result = if f.symptoms.is_empty() && !f.unclassified_near.is_empty() {
        sy.inputs.extend(f.unclassified_near.iter().map(|x| input("unclassified record", x)));
        format!(
            "unknown: none recognised, but {} record(s) near the result could not be classified and may be a symptom",
            f.unclassified_near.len()
        )
    } else if f.symptoms.is_empty() {
        "none recorded".to_owned()
    } else {
        f.symptoms.iter().map(|x| x.symptom.label()).collect::<Vec<_>>().join(", ")
    };
    steps.push(sy);
    let mut q = step(Stage::Status, "qtc.prolonged_above_ms", "Is a prolonged QTc recorded close to the result?");
    q.basis = format!("QTc > {} ms ({})", num(rules.qtc.prolonged_above_ms, 0), rules.qtc.source);
    match &f.qtc {
        Some(x) => {
            q.inputs.push(input(format!("QTc {} ms", num(x.value_ms, 0)), &x.source));
            q.result = if x.prolonged { "prolonged".into() } else { "not prolonged".into() };
        }
        None => q.result = "no QTc recorded within the pairing window".into(),
    }
    steps.push(q);
    let mut sev = step(Stage::Status, "severity", "How severe is it?");
    sev.basis = "symptoms or a prolonged QTc give the symptomatic severity; otherwise the deepest grade reached; below the interval without a grade gives the rules' below-interval severity".into();
    sev.result = f.severity.map_or_else(|| "no hypocalcemia: no severity".to_owned(), |x| x.code().to_owned());
    steps.push(sev);
}

fn band_grades(rules: &RuleSet, band_id: &str, measure: super::status::Measure) -> String {
    let Some(b) = rules.bands.iter().find(|b| b.id == band_id) else { return String::new() };
    let interval = match measure {
        super::status::Measure::Ionized => &b.ionized,
        super::status::Measure::TotalUnadjusted => &b.total,
        super::status::Measure::AlbuminAdjusted | super::status::Measure::LabAdjusted => &b.adjusted,
    };
    if interval.grades.is_empty() {
        return "this band has no grades".to_owned();
    }
    interval
        .grades
        .iter()
        .map(|g| {
            format!("{} at or below {} mmol/L = {} ({})", g.grade, num(g.at_or_below, 2), g.severity.code(), g.source)
        })
        .collect::<Vec<_>>()
        .join("; ")
}

fn cause_steps(rules: &RuleSet, w: &Workup, steps: &mut Vec<Step>) {
    for (analyte, r) in &w.readings.labs {
        let mut s = step(
            Stage::Causes,
            format!("lab_ranges ({})", analyte.key()),
            format!("How does the {} read against its range for the age and sex?", analyte.key()),
        );
        s.inputs = r.sources.iter().map(|x| input(analyte.key(), x)).collect();
        s.basis = r.text.clone();
        s.result = format!("{:?}", r.outcome).to_lowercase();
        steps.push(s);
    }
    if let Some(r) = &w.readings.egfr {
        let mut s = step(Stage::Causes, "egfr", "What is the estimated GFR?");
        s.inputs = r.sources.iter().map(|x| input(x.resource_type.clone(), x)).collect();
        s.basis = format!("{} ({})", r.text, rules.egfr.source);
        s.result = format!("{:?}", r.outcome).to_lowercase();
        steps.push(s);
    }
    let wg = &rules.cause_weighing;
    for c in &w.causes {
        let mut s = step(Stage::Causes, format!("causes.{}", c.id), format!("Does {} fit the data?", c.name));
        for m in &c.met {
            for e in &m.evidence {
                s.inputs.push(input(m.text.clone(), e));
            }
            if m.evidence.is_empty() {
                s.inputs.push(Input { what: m.text.clone(), source: None });
            }
        }
        let mut basis: Vec<String> =
            c.met.iter().map(|m| format!("{} {:+} ({})", m.text, m.points, m.source)).collect();
        if !c.missing.is_empty() {
            basis.push(format!("not available: {}", c.missing.iter().map(|a| a.key()).collect::<Vec<_>>().join(", ")));
        }
        basis.push(format!(
            "likely at {} points or more, unlikely at {} or fewer ({})",
            wg.likely_at_least, wg.unlikely_at_most, wg.source
        ));
        s.basis = basis.join("; ");
        s.result = match (&c.label, &c.ruled_out_by) {
            (CauseLabel::RuledOut, Some(why)) => format!("ruled out: {why}"),
            (l, _) if c.no_exposure => format!("{} (score {}; nothing recorded points to it)", l.word(), c.score),
            (l, _) => format!("{} (score {})", l.word(), c.score),
        };
        steps.push(s);
    }
}

fn test_steps(w: &Workup, steps: &mut Vec<Step>) {
    for (rank, p) in w.plan.proposals.iter().enumerate() {
        let mut s = step(
            Stage::Tests,
            format!("next_tests ({})", p.test.analyte.key()),
            format!("Would {} split the causes still open, for its burden?", p.test.label),
        );
        s.basis = format!("gain {} / burden {} = {}; {}", num(p.gain, 2), num(p.burden, 2), num(p.score, 2), p.reason);
        s.result = format!("proposed (rank {})", rank + 1);
        steps.push(s);
    }
    for d in &w.plan.deferred {
        let mut s = step(
            Stage::Tests,
            format!("next_tests ({})", d.test.analyte.key()),
            format!("Would {} split the causes still open, for its burden?", d.test.label),
        );
        s.result = format!("not proposed: {}", d.reason);
        steps.push(s);
    }
}

fn treatment_steps(rules: &RuleSet, a: &Assessment, plan: &TreatmentPlan, steps: &mut Vec<Step>) {
    let low = a.finding.as_ref().is_some_and(|f| f.classification == Classification::Low);
    if low {
        let mut s = step(Stage::Treatment, "treatment.weight, growth_policy", "Which weight are doses based on?");
        s.basis = format!(
            "a weight no older than {} days ({}), plausible for the age: |weight-for-age z| <= {} ({}); born before {} weeks: judged by postmenstrual age on the preterm table, then by corrected age ({}); refused only below {} kg ({}), as a unit slip, or beyond the limit even for the earliest gestation the preterm table covers when gestation is not recorded",
            num(rules.treatment.weight.max_age_days, 0),
            rules.treatment.weight.source,
            num(rules.growth_policy.implausible_abs_z, 0),
            rules.growth_policy.implausible_source,
            num(rules.growth_policy.preterm_below_weeks, 0),
            rules.growth_policy.preterm_source,
            super::treatment::num_trim(rules.growth_policy.lightest_possible_kg),
            rules.growth_policy.lightest_possible_source
        );
        match &plan.weight {
            Some(w) => {
                s.inputs.push(input(
                    format!("Body weight {} kg at {}", super::treatment::num_trim(w.kg), w.when_text),
                    &w.source,
                ));
                s.result = match &w.z {
                    Some(z) => format!(
                        "{} kg used (weight z {}, {} {})",
                        super::treatment::num_trim(w.kg),
                        num(z.z, 1),
                        z.reference,
                        z.age_text
                    ),
                    None => format!("{} kg used", super::treatment::num_trim(w.kg)),
                };
                if let Some(c) = &w.caution {
                    s.result.push_str(&format!("; to be confirmed: {c}"));
                }
            }
            None => {
                s.result = plan
                    .issues
                    .iter()
                    .find(|i| i.key == "weight")
                    .map_or_else(|| "no weight used".to_owned(), |i| i.detail.clone());
                s.inputs = plan
                    .issues
                    .iter()
                    .filter(|i| i.key == "weight")
                    .flat_map(|i| i.implicated.iter().map(|x| input("Body weight", x)))
                    .collect();
            }
        }
        steps.push(s);
    }
    for p in &plan.proposals {
        let mut s = step(
            Stage::Treatment,
            format!("treatment ({})", p.key),
            format!("What does the rule data give for: {}?", p.title),
        );
        s.basis = p.sources.join("; ");
        s.result = format!("draft proposal: {}", p.text);
        steps.push(s);
    }
    for n in &plan.notes {
        let mut s = step(Stage::Treatment, "treatment", "What else does the plan say?");
        s.result = n.clone();
        steps.push(s);
    }
    let iv = plan.proposals.iter().any(|p| p.route == Route::Iv && p.key.starts_with("calcium"));
    let oral = plan.proposals.iter().any(|p| p.key == "oral-calcium");
    let any = plan.proposals.iter().any(|p| p.key.starts_with("calcium")) || oral;
    let vitamin_d = plan.proposals.iter().any(|p| p.key == "cholecalciferol");
    let saline =
        rules.treatment.diluents.iter().find(|d| d.id == rules.treatment.bolus.diluent).is_some_and(|d| d.saline);
    for (key, rule, question, applies) in SAFETY_CHECKS {
        let mut s = step(Stage::Safety, *rule, *question);
        let evaluated = match applies {
            Applies::Always => true,
            Applies::WhenLow => low,
            Applies::WithIvCalcium => iv,
            Applies::WithCalcium => any,
            Applies::WithIvCalciumSaline => iv && saline,
            Applies::WithOralCalcium => oral,
            Applies::WithVitaminD => vitamin_d,
        };
        let raised: Vec<_> = plan.issues.iter().filter(|i| i.key == *key).collect();
        s.result = if let Some(i) = raised.first() {
            s.inputs = i.implicated.iter().map(|x| input(x.resource_type.clone(), x)).collect();
            s.basis = i.detail.clone();
            format!("raised ({}): {}", i.severity.code(), i.title)
        } else if evaluated {
            "not raised".to_owned()
        } else {
            match applies {
                Applies::WhenLow => "not evaluated: the calcium is not low".to_owned(),
                Applies::WithCalcium => "not evaluated: no calcium is proposed".to_owned(),
                Applies::WithOralCalcium => "not evaluated: no oral calcium is proposed".to_owned(),
                Applies::WithVitaminD => "not evaluated: no vitamin D is proposed".to_owned(),
                Applies::WithIvCalciumSaline if iv => "not evaluated: the site's diluent is not saline".to_owned(),
                _ => "not evaluated: no IV calcium is proposed".to_owned(),
            }
        };
        steps.push(s);
    }
}

/// The trace as readable text (the CLI's `assess --explain`), opening with the
/// advisory caution.
pub fn text(steps: &[Step], advisory: &str) -> String {
    let mut out = format!("{advisory}\n");
    let mut stage = None;
    for s in steps {
        if stage != Some(s.stage) {
            stage = Some(s.stage);
            out.push_str(&format!("== {}\n", s.stage.code()));
        }
        out.push_str(&format!("[{}] {}\n", s.rule, s.question));
        for i in &s.inputs {
            match &i.source {
                Some(src) => out.push_str(&format!("  input:  {} ({}, {})\n", i.what, src.label(), src.expression)),
                None => out.push_str(&format!("  input:  {}\n", i.what)),
            }
        }
        if !s.basis.is_empty() {
            out.push_str(&format!("  basis:  {}\n", s.basis));
        }
        out.push_str(&format!("  result: {}\n", s.result));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_safety_catalogue_lists_every_check_treatment_can_raise() {
        // Every `key: "..."` of a SafetyIssue in treatment.rs is in the catalogue, and
        // nothing else is: a new check without a trace entry fails here.
        let source = include_str!("treatment.rs");
        let code = source.split("#[cfg(test)]").next().unwrap_or(source);
        let mut raised: Vec<&str> = Vec::new();
        for (i, _) in
            code.match_indices("plan.issues.push(SafetyIssue {").chain(code.match_indices("issues.push(SafetyIssue {"))
        {
            let rest = &code[i..];
            let key = rest.split("key: \"").nth(1).and_then(|r| r.split('"').next()).unwrap_or("");
            raised.push(key);
        }
        raised.sort_unstable();
        raised.dedup();
        let mut listed: Vec<&str> = SAFETY_CHECKS.iter().map(|c| c.0).collect();
        listed.sort_unstable();
        assert_eq!(raised, listed);
    }
}
