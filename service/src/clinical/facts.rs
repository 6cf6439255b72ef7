//! Typed, validated facts: what the FHIR reader hands to the clinical core.
//!
//! Values are already in the analyte's canonical unit; each fact keeps where it
//! came from (`Source`) so the output can point back at it.

use serde::Deserialize;

use super::time::{PartialDate, When};

/// What an observation measures.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Deserialize)]
#[serde(rename_all = "snake_case")]
#[allow(missing_docs, reason = "variant names are the analyte names")]
pub enum Analyte {
    CalciumTotal,
    CalciumIonized,
    CalciumAlbuminAdjusted,
    Albumin,
    Phosphate,
    Magnesium,
    PthIntact,
    AlkalinePhosphatase,
    #[serde(rename = "vitamin_d_25oh")]
    VitaminD25Oh,
    #[serde(rename = "vitamin_d3_25oh")]
    VitaminD3_25Oh,
    #[serde(rename = "vitamin_d_1_25")]
    VitaminD1_25,
    Creatinine,
    UrineCalcium,
    UrineCreatinine,
    UrineCalciumCreatinineRatio,
    BloodPh,
    BodyWeight,
    BodyHeight,
    Qtc,
    Lipase,
    CreatineKinase,
    GestationalAgeAtBirth,
    BirthWeight,
}

impl Analyte {
    /// The key used in rule files.
    pub fn key(self) -> &'static str {
        match self {
            Self::CalciumTotal => "calcium_total",
            Self::CalciumIonized => "calcium_ionized",
            Self::CalciumAlbuminAdjusted => "calcium_albumin_adjusted",
            Self::Albumin => "albumin",
            Self::Phosphate => "phosphate",
            Self::Magnesium => "magnesium",
            Self::PthIntact => "pth_intact",
            Self::AlkalinePhosphatase => "alkaline_phosphatase",
            Self::VitaminD25Oh => "vitamin_d_25oh",
            Self::VitaminD3_25Oh => "vitamin_d3_25oh",
            Self::VitaminD1_25 => "vitamin_d_1_25",
            Self::Creatinine => "creatinine",
            Self::UrineCalcium => "urine_calcium",
            Self::UrineCreatinine => "urine_creatinine",
            Self::UrineCalciumCreatinineRatio => "urine_calcium_creatinine_ratio",
            Self::BloodPh => "blood_ph",
            Self::BodyWeight => "body_weight",
            Self::BodyHeight => "body_height",
            Self::Qtc => "qtc",
            Self::Lipase => "lipase",
            Self::CreatineKinase => "creatine_kinase",
            Self::GestationalAgeAtBirth => "gestational_age_at_birth",
            Self::BirthWeight => "birth_weight",
        }
    }
}

/// A symptom or sign of hypocalcemia.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Deserialize)]
#[serde(rename_all = "snake_case")]
#[allow(missing_docs, reason = "variant names are the symptom names")]
pub enum Symptom {
    Seizure,
    Tetany,
    CarpopedalSpasm,
    Laryngospasm,
    Paresthesia,
    Arrhythmia,
    Stridor,
    Bradycardia,
    ChvostekSign,
    TrousseauSign,
    MuscleCramp,
    Apnea,
    Jitteriness,
    Cyanosis,
    Hypotension,
    Bronchospasm,
    Irritability,
}

impl Symptom {
    /// Plain label.
    pub fn label(self) -> &'static str {
        match self {
            Self::Seizure => "seizure",
            Self::Tetany => "tetany",
            Self::CarpopedalSpasm => "carpopedal spasm",
            Self::Laryngospasm => "laryngospasm",
            Self::Paresthesia => "paresthesia",
            Self::Arrhythmia => "cardiac arrhythmia",
            Self::Stridor => "stridor",
            Self::Bradycardia => "bradycardia",
            Self::ChvostekSign => "Chvostek sign",
            Self::TrousseauSign => "Trousseau sign",
            Self::MuscleCramp => "muscle cramp",
            Self::Apnea => "apnea",
            Self::Jitteriness => "jitteriness",
            Self::Cyanosis => "cyanosis",
            Self::Hypotension => "hypotension",
            Self::Bronchospasm => "bronchospasm",
            Self::Irritability => "irritability",
        }
    }
}

/// Where a fact came from in the request.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Source {
    /// Resource type, e.g. "Observation".
    pub resource_type: String,
    /// The reference an output resource uses to point at it (fullUrl or
    /// `Type/id`), when the input gave it an identity.
    pub reference: Option<String>,
    /// FHIRPath-style location in the request, e.g. `Bundle.entry[3].resource`.
    pub expression: String,
}

impl Source {
    /// A short label for text: the reference, else the location.
    pub fn label(&self) -> &str {
        self.reference.as_deref().unwrap_or(&self.expression)
    }
}

/// Result status that survived ingestion.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ResultStatus {
    /// final, amended or corrected.
    Final,
    /// preliminary: used, with a warning.
    Preliminary,
}

/// A coded concept as it arrived.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Code {
    /// System URI.
    pub system: String,
    /// Code.
    pub code: String,
    /// Display from the rule set.
    pub display: String,
}

/// A measured value in its canonical unit.
#[derive(Debug, Clone)]
pub struct Measurement {
    /// What was measured.
    pub analyte: Analyte,
    /// Value in the canonical unit.
    pub value: f64,
    /// Canonical unit (UCUM).
    pub unit: String,
    /// Value as reported.
    pub reported_value: f64,
    /// UCUM code as reported.
    pub reported_unit: String,
    /// When the specimen was taken (or the measurement made).
    pub when: When,
    /// That time as the input wrote it.
    pub when_text: String,
    /// Status.
    pub status: ResultStatus,
    /// The recognised code.
    pub code: Code,
    /// Ionized calcium adjusted to pH 7.4.
    pub ph_adjusted: bool,
    /// Where it came from.
    pub source: Source,
}

/// A symptom finding.
#[derive(Debug, Clone)]
pub struct SymptomFinding {
    /// Which symptom.
    pub symptom: Symptom,
    /// When it was present, if known.
    pub when: Option<When>,
    /// That time as the input wrote it.
    pub when_text: Option<String>,
    /// The recognised code.
    pub code: Code,
    /// Where it came from.
    pub source: Source,
}

/// The kind of a coded event.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum EventKind {
    /// A Condition.
    Condition,
    /// A medication (MedicationRequest, MedicationStatement, MedicationAdministration).
    Medication,
    /// A Procedure.
    Procedure,
}

/// A condition, medication or procedure matched to the rule set's code lists.
#[derive(Debug, Clone)]
pub struct CodedEvent {
    /// Kind.
    pub kind: EventKind,
    /// Ids of the code lists its code belongs to.
    pub lists: Vec<String>,
    /// When (onset, administration, performance), if known.
    pub when: Option<When>,
    /// That time as written.
    pub when_text: Option<String>,
    /// The matching code.
    pub code: Code,
    /// Where it came from.
    pub source: Source,
    /// Dose given in mg (MedicationAdministration.dosage.dose), when stated in mg.
    pub dose_mg: Option<f64>,
    /// Current: an administration in progress, an active order, or a statement
    /// that the medication is being taken (MedicationStatement.status active).
    pub in_progress: bool,
    /// Set when no code matched and the medication was identified by its name
    /// (text or coding display): the text that matched.
    pub by_name: Option<String>,
    /// The formulary ingredient (e.g. `calcium_gluconate`) the matched code or
    /// name stands for, when the rule data says; used to find a salt.
    pub ingredient: Option<String>,
}

/// A record the service could not classify: a medication it cannot identify,
/// or a Condition / finding Observation whose code is in none of its lists.
#[derive(Debug, Clone)]
pub struct OpenRecord {
    /// When (onset, authored, administered, effective), if known.
    pub when: Option<When>,
    /// Running, active or being taken (medications).
    pub in_progress: bool,
    /// How it was coded, for the text (codes and text as given).
    pub description: String,
    /// Where it came from.
    pub source: Source,
}

/// The vascular access the request says the child has (a `vascularAccess`
/// part of the Parameters wrapper; Unknown when not given).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum VascularAccess {
    /// Not stated.
    #[default]
    Unknown,
    /// Peripheral venous line.
    Peripheral,
    /// Central venous line.
    Central,
    /// Arterial line.
    Arterial,
    /// Umbilical arterial catheter.
    UmbilicalArterial,
    /// Umbilical venous catheter.
    UmbilicalVenous,
}

impl VascularAccess {
    /// From the code used in the Parameters part.
    pub fn from_code(code: &str) -> Option<Self> {
        Some(match code {
            "peripheral" => Self::Peripheral,
            "central" => Self::Central,
            "arterial" => Self::Arterial,
            "umbilical-arterial" => Self::UmbilicalArterial,
            "umbilical-venous" => Self::UmbilicalVenous,
            "unknown" => Self::Unknown,
            _ => return None,
        })
    }
}

/// Administrative gender, as far as the rules care.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[allow(missing_docs, reason = "FHIR administrative-gender codes")]
pub enum Gender {
    Male,
    Female,
    Other,
    Unknown,
}

/// The patient, reduced to what the rules read. No names or identifiers.
#[derive(Debug, Clone)]
pub struct PatientFacts {
    /// Birth date with its precision, if given.
    pub birth_date: Option<PartialDate>,
    /// Birth time (patient-birthTime extension), unix seconds, if given.
    pub birth_instant: Option<i64>,
    /// Gender.
    pub gender: Gender,
    /// Where it came from.
    pub source: Source,
}

/// What was done with a result because of a specimen problem.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SpecimenAction {
    /// The result was not used (the reader set it aside).
    SetAside,
    /// The result is used, with a stated caution.
    Caution,
    /// The Specimen could not be read: the specimen check did not run.
    Unread,
    /// A handling state that is not a defect: traced only.
    NoEffect,
}

/// Where the specimen problem was read.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SpecimenReadFrom {
    /// Specimen.condition (coded).
    Condition,
    /// Specimen.status (coded).
    Status,
    /// Observation.interpretation (coded).
    Interpretation,
    /// The text of Observation.note or Specimen.note (words, not codes).
    NoteText,
    /// Observation.specimen (the reference that could not be resolved).
    Reference,
}

impl SpecimenReadFrom {
    /// Plain words for text.
    pub fn label(self) -> &'static str {
        match self {
            Self::Condition => "coded in Specimen.condition",
            Self::Status => "coded in Specimen.status",
            Self::Interpretation => "coded in Observation.interpretation",
            Self::NoteText => "read by text from a note (not coded)",
            Self::Reference => "Observation.specimen",
        }
    }
}

/// A specimen problem found on one result.
#[derive(Debug, Clone)]
pub struct SpecimenFinding {
    /// Rule key (`clotted`, `hemolyzed`, ...), `unread` or `other-condition`.
    pub key: String,
    /// Plain label ("clotted").
    pub label: String,
    /// What was done with the result.
    pub action: SpecimenAction,
    /// Where it was read.
    pub read_from: SpecimenReadFrom,
    /// The result's analyte.
    pub analyte: Analyte,
    /// The result, e.g. "Calcium.ionized [Moles/volume] in Blood 0.78 mmol/L at 2026-11-30T08:40:00-05:00".
    pub result_text: String,
    /// The result (the Measurement's source, or the Observation when set aside).
    pub result: Source,
    /// The Specimen, when one was read.
    pub specimen: Option<Source>,
    /// What was found, e.g. "v2-0493 CLOT (Clotted)" or the words quoted from a note.
    pub found: String,
    /// What it means for the result.
    pub effect: String,
    /// What to do.
    pub mitigation: String,
    /// Source of the policy.
    pub source: String,
    /// DetectedIssue severity (None for NoEffect).
    pub severity: Option<crate::rules::model::IssueSeverity>,
    /// The problem can falsely raise this result: a value that is not low
    /// cannot exclude a low one.
    pub masks_low: bool,
}

/// Everything the core reads.
#[derive(Debug, Clone)]
pub struct Facts {
    /// The patient.
    pub patient: PatientFacts,
    /// Usable measurements (any order).
    pub measurements: Vec<Measurement>,
    /// Symptom findings.
    pub symptoms: Vec<SymptomFinding>,
    /// Conditions, medications and procedures in the rule set's code lists.
    pub events: Vec<CodedEvent>,
    /// Medication records that could not be identified (no code in the lists,
    /// no readable name).
    pub unidentified_medications: Vec<OpenRecord>,
    /// Conditions and finding Observations that could be a symptom but whose
    /// code is in none of the rule set's lists.
    pub unclassified_findings: Vec<OpenRecord>,
    /// The vascular access, as the request states it.
    pub vascular_access: VascularAccess,
    /// Gestational age at birth in weeks, if recorded.
    pub gestational_age_weeks: Option<f64>,
    /// Birth weight in kg, if recorded.
    pub birth_weight_kg: Option<f64>,
    /// Evaluation time, unix seconds.
    pub now: i64,
    /// Specimen problems found on results (used or set aside).
    pub specimen: Vec<SpecimenFinding>,
}

impl Facts {
    /// Measurements of one analyte, most recent first (ties keep input order).
    pub fn of(&self, analyte: Analyte) -> Vec<&Measurement> {
        let mut found: Vec<&Measurement> = self.measurements.iter().filter(|m| m.analyte == analyte).collect();
        found.sort_by_key(|m| std::cmp::Reverse(m.when.latest));
        found
    }

    /// Specimen problems on one used result (matched by its source).
    pub fn specimen_of(&self, m: &Measurement) -> Vec<&SpecimenFinding> {
        self.specimen.iter().filter(|f| f.action != SpecimenAction::SetAside && f.result == m.source).collect()
    }
}
