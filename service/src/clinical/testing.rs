//! Builders for unit tests of the clinical core: facts made by hand, in
//! canonical units, at a fixed evaluation time (2026-11-30T15:00:00Z).
#![allow(clippy::unwrap_used, reason = "test builders")]

use crate::clinical::facts::{
    Analyte, Code, CodedEvent, EventKind, Facts, Gender, Measurement, PatientFacts, ResultStatus, Source, Symptom,
    SymptomFinding,
};
use crate::clinical::time::{CivilDate, PartialDate, When};
use crate::rules::model::RuleSet;

pub const HOUR: i64 = 3600;

pub fn rules() -> RuleSet {
    crate::rules::load::load(None).unwrap().rules
}

/// The embedded rules, loaded once (for property tests that run many cases).
pub fn shared_rules() -> &'static RuleSet {
    static RULES: std::sync::LazyLock<RuleSet> = std::sync::LazyLock::new(rules);
    &RULES
}

/// 2026-11-30T15:00:00Z.
pub fn now() -> i64 {
    CivilDate::new(2026, 11, 30).unwrap().days_since_epoch() * 86_400 + 15 * HOUR
}

pub fn at(unix: i64) -> When {
    let d = CivilDate::of_instant(unix, 0);
    When { earliest: unix, latest: unix, local_date_earliest: d, local_date_latest: d }
}

pub fn src(id: &str) -> Source {
    Source {
        resource_type: "Observation".into(),
        reference: Some(format!("Observation/{id}")),
        expression: format!("Bundle.entry[{id}]"),
    }
}

pub fn m(analyte: Analyte, value: f64, unit: &str, reported: (f64, &str), hours_ago: i64, id: &str) -> Measurement {
    Measurement {
        analyte,
        value,
        unit: unit.into(),
        reported_value: reported.0,
        reported_unit: reported.1.into(),
        when: at(now() - hours_ago * HOUR),
        when_text: format!("{hours_ago} h ago"),
        status: ResultStatus::Final,
        code: Code { system: "http://loinc.org".into(), code: "x".into(), display: "x".into() },
        ph_adjusted: false,
        source: src(id),
    }
}

pub fn ionized(v: f64, hours_ago: i64, id: &str) -> Measurement {
    m(Analyte::CalciumIonized, v, "mmol/L", (v, "mmol/L"), hours_ago, id)
}
pub fn total_mg(mg_dl: f64, hours_ago: i64, id: &str) -> Measurement {
    m(Analyte::CalciumTotal, mg_dl * 10.0 / 40.078, "mmol/L", (mg_dl, "mg/dL"), hours_ago, id)
}
pub fn total_mmol(v: f64, hours_ago: i64, id: &str) -> Measurement {
    m(Analyte::CalciumTotal, v, "mmol/L", (v, "mmol/L"), hours_ago, id)
}
pub fn albumin_g_dl(g_dl: f64, hours_ago: i64, id: &str) -> Measurement {
    m(Analyte::Albumin, g_dl * 10.0, "g/L", (g_dl, "g/dL"), hours_ago, id)
}
pub fn qtc(ms: f64, hours_ago: i64) -> Measurement {
    m(Analyte::Qtc, ms, "ms", (ms, "ms"), hours_ago, "qtc")
}

pub fn facts(birth: Option<PartialDate>, measurements: Vec<Measurement>) -> Facts {
    Facts {
        patient: PatientFacts {
            birth_date: birth,
            birth_instant: None,
            gender: Gender::Female,
            source: Source {
                resource_type: "Patient".into(),
                reference: Some("Patient/p".into()),
                expression: "Bundle.entry[0].resource".into(),
            },
        },
        measurements,
        symptoms: Vec::new(),
        events: Vec::new(),
        unidentified_medications: Vec::new(),
        unclassified_findings: Vec::new(),
        vascular_access: Default::default(),
        gestational_age_weeks: None,
        birth_weight_kg: None,
        now: now(),
        specimen: Vec::new(),
    }
}

pub fn child() -> Option<PartialDate> {
    Some(PartialDate::Full(CivilDate::new(2019, 3, 4).unwrap()))
}

pub fn seizure(hours_ago: Option<i64>) -> SymptomFinding {
    SymptomFinding {
        symptom: Symptom::Seizure,
        when: hours_ago.map(|h| at(now() - h * HOUR)),
        when_text: hours_ago.map(|h| format!("{h} h ago")),
        code: Code { system: "http://snomed.info/sct".into(), code: "91175000".into(), display: "Seizure".into() },
        source: Source {
            resource_type: "Condition".into(),
            reference: Some("Condition/s".into()),
            expression: "Bundle.entry[9].resource".into(),
        },
    }
}

pub fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol
}

/// A measurement in canonical units, reported in the same unit.
pub fn lab(analyte: Analyte, value: f64, unit: &str, id: &str) -> Measurement {
    m(analyte, value, unit, (value, unit), 1, id)
}

/// A coded event in the named code list, `hours_ago` before now.
pub fn event(kind: EventKind, list: &str, hours_ago: i64, id: &str) -> CodedEvent {
    CodedEvent {
        kind,
        lists: vec![list.to_owned()],
        when: Some(at(now() - hours_ago * HOUR)),
        when_text: Some(format!("{hours_ago} h ago")),
        code: Code { system: "urn:test".into(), code: list.into(), display: list.into() },
        dose_mg: None,
        in_progress: false,
        by_name: None,
        ingredient: None,
        source: Source {
            resource_type: match kind {
                EventKind::Condition => "Condition",
                EventKind::Medication => "MedicationRequest",
                EventKind::Procedure => "Procedure",
            }
            .into(),
            reference: Some(format!("X/{id}")),
            expression: format!("Bundle.entry[{id}]"),
        },
    }
}

/// Born `days` before the evaluation date.
pub fn born_days_ago(days: i64) -> Option<PartialDate> {
    Some(PartialDate::Full(CivilDate::from_days_since_epoch(CivilDate::of_instant(now(), 0).days_since_epoch() - days)))
}

/// Facts with a gender.
pub fn facts_of(
    birth: Option<PartialDate>,
    gender: Gender,
    measurements: Vec<Measurement>,
    events: Vec<CodedEvent>,
) -> Facts {
    let mut f = facts(birth, measurements);
    f.patient.gender = gender;
    f.events = events;
    f
}

/// A specimen problem on `m` as the reader records it (`action` SetAside: `m` is
/// left out of the facts by the caller).
pub fn specimen_finding(
    m: &Measurement,
    key: &str,
    action: crate::clinical::facts::SpecimenAction,
) -> crate::clinical::facts::SpecimenFinding {
    crate::clinical::facts::SpecimenFinding {
        key: key.into(),
        label: key.into(),
        action,
        read_from: crate::clinical::facts::SpecimenReadFrom::Condition,
        analyte: m.analyte,
        result_text: format!("{} {}", m.analyte.key(), m.value),
        result: m.source.clone(),
        specimen: None,
        found: format!("v2-0493 {key}"),
        effect: format!("effect of {key}"),
        mitigation: "repeat".into(),
        source: "test".into(),
        severity: Some(crate::rules::model::IssueSeverity::High),
        masks_low: false,
    }
}
