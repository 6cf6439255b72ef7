//! Typed rule data: what the embedded default rule files and a site rule file
//! deserialize into, after the merged document has passed the rule schema.
//!
//! Every number the clinical core uses comes from here, with its source text.

use std::collections::BTreeMap;

use serde::Deserialize;

use crate::clinical::facts::{Analyte, Symptom};

/// The whole rule set.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RuleSet {
    /// Name and version of the rule set.
    pub ruleset: RuleSetId,
    /// What the rules cover.
    pub scope: Scope,
    /// Time windows.
    pub windows: Windows,
    /// QTc threshold.
    pub qtc: QtcRule,
    /// Albumin adjustment formula.
    pub albumin_adjustment: AlbuminAdjustment,
    /// Severity mapping.
    pub severity: SeverityRules,
    /// Age bands with reference intervals, tried in order.
    pub bands: Vec<AgeBand>,
    /// Analyte chemistry and plausibility.
    pub analytes: BTreeMap<Analyte, AnalyteRule>,
    /// Observation codes the service recognises.
    pub observation_codes: Vec<ObservationCode>,
    /// Codes for symptoms of hypocalcemia.
    pub symptom_codes: Vec<SymptomCode>,
    /// Concepts searched for and not verified (kept for the record, unused).
    #[serde(default)]
    pub unverified: Vec<Unverified>,
    /// Codes for the output resources.
    pub output_codes: OutputCodes,
    /// Fixed texts shown in every output.
    pub texts: Texts,
    /// Age- and sex-specific reference intervals for the cause engine.
    pub lab_ranges: Vec<LabRange>,
    /// 25-OH vitamin D cut-offs, one set chosen by the site.
    pub vitamin_d_25oh_cutoffs: Choice<VitaminDCutoffs>,
    /// Which published urine Ca/Cr limits the ranges use, and the others.
    pub urine_calcium_creatinine_limits: UrineLimits,
    /// Blood pH above which alkalosis is called.
    pub alkalosis: Alkalosis,
    /// Bedside Schwartz eGFR.
    pub egfr: Egfr,
    /// Code lists for conditions, medications and procedures.
    pub code_lists: Vec<CodeList>,
    /// How findings are weighed into labels.
    pub cause_weighing: Weighing,
    /// The causes and their findings.
    pub causes: Vec<Cause>,
    /// Tests the planner may propose.
    pub next_tests: Vec<NextTest>,
    /// Planner settings.
    pub planner: PlannerRules,
    /// Formulary products.
    pub products: Vec<super::treatment_model::Product>,
    /// Published dose ranges.
    pub dose_sources: Vec<super::treatment_model::DoseSource>,
    /// The site's treatment policy.
    pub treatment: super::treatment_model::TreatmentPolicy,
    /// Weight-for-age LMS tables.
    pub growth_references: Vec<super::treatment_model::GrowthReference>,
    /// Preterm weight LMS tables by postmenstrual age.
    pub preterm_references: Vec<super::treatment_model::PretermReference>,
    /// Growth reference policy.
    pub growth_policy: super::treatment_model::GrowthPolicy,
    /// Calcium gluconate administration limits.
    pub calcium_gluconate_administration: super::treatment_model::GluconateAdministration,
    /// Magnesium sulfate administration limits.
    pub magnesium_sulfate_administration: super::treatment_model::MagnesiumAdministration,
    /// Published safety facts, by key.
    pub safety_sources: std::collections::BTreeMap<String, super::treatment_model::SafetySource>,
    /// Specimen problems and what they mean for the results read.
    pub specimen: SpecimenRules,
}

/// Specimen problems (service/rules/specimen.toml).
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SpecimenRules {
    /// Severity when a referenced Specimen could not be read.
    pub unread_severity: IssueSeverity,
    /// Why.
    pub unread_source: String,
    /// Severity of a Specimen.condition code without an entry here.
    pub other_condition_severity: IssueSeverity,
    /// Why.
    pub other_condition_source: String,
    /// Why free text only ever gives a caution.
    pub text_source: String,
    /// The flags: specimen conditions and result interpretations.
    pub flags: Vec<SpecimenFlag>,
}

/// One specimen condition or result flag, and its policy.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SpecimenFlag {
    /// Stable key (DetectedIssue identifier `specimen-<key>`).
    pub key: String,
    /// Plain label ("clotted").
    pub label: String,
    /// Code system.
    pub system: String,
    /// Code.
    pub code: String,
    /// Display, as verified.
    pub display: String,
    /// DetectedIssue severity; None: a handling state, traced only.
    #[serde(deserialize_with = "severity_or_none")]
    pub severity: Option<IssueSeverity>,
    /// Analyte keys whose result is set aside when coded ("any": every analyte).
    pub set_aside_for: Vec<String>,
    /// Lower-case stems looked for in note text.
    pub text_terms: Vec<String>,
    /// Analyte keys the flag can falsely raise: a result that is not low is
    /// not used by the work-up (it cannot exclude a low value).
    #[serde(default)]
    pub not_reassuring_for: Vec<String>,
    /// What it means for the result.
    pub effect: String,
    /// What to do.
    pub mitigation: String,
    /// Source.
    pub source: String,
}

impl SpecimenFlag {
    /// Whether a coded flag sets a result of this analyte aside.
    pub fn sets_aside(&self, analyte: Analyte) -> bool {
        self.set_aside_for.iter().any(|k| k == "any" || k == analyte.key())
    }
}

fn severity_or_none<'de, D: serde::Deserializer<'de>>(d: D) -> Result<Option<IssueSeverity>, D::Error> {
    let s = String::deserialize(d)?;
    match s.as_str() {
        "none" => Ok(None),
        "low" => Ok(Some(IssueSeverity::Low)),
        "moderate" => Ok(Some(IssueSeverity::Moderate)),
        "high" => Ok(Some(IssueSeverity::High)),
        other => Err(serde::de::Error::custom(format!("unknown severity '{other}'"))),
    }
}

/// Sex restriction of a range.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum SexRestriction {
    /// Any sex.
    Any,
    /// Male only.
    Male,
    /// Female only.
    Female,
}

/// One age-banded reference interval of an analyte, in its canonical unit.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LabRange {
    /// Analyte.
    pub analyte: Analyte,
    /// Sex.
    pub sex: SexRestriction,
    /// Inclusive lower age bound.
    pub from: AgeBound,
    /// Exclusive upper age bound.
    pub until: AgeBound,
    /// Lower limit.
    pub lower: f64,
    /// Upper limit.
    pub upper: f64,
    /// Unit (must be the analyte's canonical unit).
    pub unit: String,
    /// Source.
    pub source: String,
    /// seen | seen-2nd | derived | memory.
    pub confidence: String,
    /// Disagreements, conversions.
    #[serde(default)]
    pub note: Option<String>,
}

/// A set of options of which the site picks one.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Choice<T> {
    /// Id of the option in force.
    pub default: String,
    /// The options.
    pub options: Vec<T>,
}

impl<T: HasId> Choice<T> {
    /// The option in force (the loader checks that it exists).
    pub fn chosen(&self) -> Option<&T> {
        self.options.iter().find(|o| o.id() == self.default)
    }
}

/// Something with an id.
pub trait HasId {
    /// The id.
    fn id(&self) -> &str;
}

/// 25-OH vitamin D cut-offs, nmol/L.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct VitaminDCutoffs {
    /// Id.
    pub id: String,
    /// Deficient below.
    pub deficient_below: f64,
    /// Insufficient below.
    pub insufficient_below: f64,
    /// Source.
    pub source: String,
    /// Confidence.
    pub confidence: String,
}

impl HasId for VitaminDCutoffs {
    fn id(&self) -> &str {
        &self.id
    }
}

/// Urine Ca/Cr limit sets.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct UrineLimits {
    /// The set the ranges use.
    pub default: String,
    /// The other published sets, as text.
    pub alternatives: String,
}

/// Alkalosis threshold.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Alkalosis {
    /// pH above which alkalosis is called.
    pub ph_above: f64,
    /// Source.
    pub source: String,
    /// Confidence.
    pub confidence: String,
}

/// Bedside Schwartz eGFR parameters.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Egfr {
    /// k for creatinine in mg/dL.
    pub k_mg_dl: f64,
    /// k for creatinine in umol/L.
    pub k_umol_l: f64,
    /// Source.
    pub source: String,
    /// Confidence.
    pub confidence: String,
    /// Validated from this age.
    pub valid_from: AgeBound,
    /// Validated until this age.
    pub valid_until: AgeBound,
    /// Reduced below (mL/min/1.73 m2).
    pub reduced_below: f64,
    /// Impaired below (mL/min/1.73 m2).
    pub impaired_below: f64,
    /// Source of the thresholds.
    pub threshold_source: String,
    /// A height older than this (days) is not used for the eGFR.
    pub height_max_age_days: f64,
}

/// What a code list holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum CodeListKind {
    /// Conditions.
    Condition,
    /// Medications.
    Medication,
    /// Procedures.
    Procedure,
}

/// A code in a list.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ListedCode {
    /// System.
    pub system: String,
    /// Code.
    pub code: String,
    /// Display.
    pub display: String,
    /// Where verified.
    pub source: String,
    /// Caution.
    #[serde(default)]
    pub note: Option<String>,
    /// The formulary ingredient this code stands for (e.g. `calcium_gluconate`),
    /// so a record coded only by ingredient still finds its salt.
    #[serde(default)]
    pub ingredient: Option<String>,
}

/// An ingredient name a medication record's text or coding display is matched
/// against when none of its codes is listed (case-insensitive, whole words).
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ListedName {
    /// The name, e.g. "calcium gluconate".
    pub name: String,
    /// The formulary ingredient it stands for, when it names one salt.
    #[serde(default)]
    pub ingredient: Option<String>,
}

/// A named code list.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CodeList {
    /// Id.
    pub id: String,
    /// Kind.
    pub kind: CodeListKind,
    /// Label.
    pub label: String,
    /// Conditions of this list count whatever their clinicalStatus (birth
    /// history and lifelong conditions that are never "active" problems).
    #[serde(default)]
    pub any_status: bool,
    /// Codes.
    pub codes: Vec<ListedCode>,
    /// Ingredient names for the fallback match by name (medication lists).
    #[serde(default)]
    pub names: Vec<ListedName>,
    /// Caution (e.g. why a list is empty).
    #[serde(default)]
    pub note: Option<String>,
}

/// Outcome of a lab against its range.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LabOutcome {
    /// Below the range.
    Low,
    /// Within.
    Normal,
    /// Above.
    High,
    /// Low or normal (e.g. an inappropriately normal PTH).
    LowOrNormal,
    /// Normal or high.
    NormalOrHigh,
}

impl LabOutcome {
    /// Does an observed outcome (low, normal or high) satisfy this one?
    pub fn matches(self, observed: LabOutcome) -> bool {
        match self {
            Self::LowOrNormal => matches!(observed, Self::Low | Self::Normal),
            Self::NormalOrHigh => matches!(observed, Self::Normal | Self::High),
            other => other == observed,
        }
    }
    /// Word for text.
    pub fn label(self) -> &'static str {
        match self {
            Self::Low => "low",
            Self::Normal => "normal",
            Self::High => "high",
            Self::LowOrNormal => "low or normal",
            Self::NormalOrHigh => "normal or high",
        }
    }
}

/// How much a finding counts.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Effect {
    /// Strongly for.
    StrongFor,
    /// For.
    For,
    /// Against.
    Against,
    /// Strongly against.
    StrongAgainst,
    /// Excludes the cause.
    RulesOut,
}

/// Age span of a finding or a cause.
#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AgeSpan {
    /// Inclusive.
    pub from: AgeBound,
    /// Exclusive.
    pub until: AgeBound,
}

/// One finding of a cause. Exactly one of `lab`, `egfr`, `condition`,
/// `medication`, `procedure`, `age` is set (checked by the loader).
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CauseFinding {
    /// A lab analyte, with `is`.
    #[serde(default)]
    pub lab: Option<Analyte>,
    /// The eGFR (bedside Schwartz), with `is`.
    #[serde(default)]
    pub egfr: bool,
    /// The outcome the lab must have.
    #[serde(default)]
    pub is: Option<LabOutcome>,
    /// A condition code list id.
    #[serde(default)]
    pub condition: Option<String>,
    /// A medication code list id.
    #[serde(default)]
    pub medication: Option<String>,
    /// A procedure code list id.
    #[serde(default)]
    pub procedure: Option<String>,
    /// Only events within this many days before the calcium result count.
    #[serde(default)]
    pub within_days: Option<f64>,
    /// An age span.
    #[serde(default)]
    pub age: Option<AgeSpan>,
    /// Effect.
    pub effect: Effect,
    /// Why (source).
    pub source: String,
}

/// One cause.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Cause {
    /// Id.
    pub id: String,
    /// Label.
    pub label: String,
    /// Code list whose first SNOMED CT code names the cause in
    /// ClinicalImpression.finding (text only when there is none).
    #[serde(default)]
    pub code_from_list: Option<String>,
    /// Labelled unlikely unless a strong_for finding, or a supporting
    /// condition, medication or procedure, is met (for causes that need an
    /// exposure to be considered at all).
    #[serde(default)]
    pub needs_positive_finding: bool,
    /// Ages the cause applies to; outside it is ruled out.
    #[serde(default)]
    pub applies: Option<AgeSpan>,
    /// Source of the cause's findings as a whole.
    pub source: String,
    /// Findings.
    pub findings: Vec<CauseFinding>,
}

/// Weighing of findings into labels.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Weighing {
    /// Points for strong_for.
    pub strong_for: i32,
    /// Points for for.
    pub r#for: i32,
    /// Points for against.
    pub against: i32,
    /// Points for strong_against.
    pub strong_against: i32,
    /// Likely at or above this score...
    pub likely_at_least: i32,
    /// ...and only with a strong_for finding met.
    pub likely_needs_strong_finding: bool,
    /// Unlikely at or below this score.
    pub unlikely_at_most: i32,
    /// Source / rationale.
    pub source: String,
}

/// A test the planner may propose.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NextTest {
    /// What it measures.
    pub analyte: Analyte,
    /// What to order, in words.
    pub label: String,
    /// Order code (LOINC), when a verified one exists.
    #[serde(default)]
    pub code: Option<OutputCoding>,
    /// The results the planner tries (default low, normal, high).
    #[serde(default = "three_outcomes")]
    pub outcomes: Vec<LabOutcome>,
    /// Burden weight (1 = a basic chemistry on the same sample).
    pub burden: f64,
    /// Burden in the first 28 days of life (blood volume matters more).
    pub neonatal_burden: f64,
    /// Rationale of the burden.
    pub burden_source: String,
    /// A result older than this (hours) is not read by the work-up.
    pub max_age_hours: f64,
    /// Do not propose while this lab has this outcome.
    #[serde(default)]
    pub deferred_when: Option<Deferral>,
}

fn three_outcomes() -> Vec<LabOutcome> {
    vec![LabOutcome::Low, LabOutcome::Normal, LabOutcome::High]
}

/// A reason to hold a test back.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Deferral {
    /// The lab.
    pub lab: Analyte,
    /// Its outcome.
    pub is: LabOutcome,
    /// Why.
    pub reason: String,
}

/// Planner settings.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlannerRules {
    /// At most this many proposals.
    pub max_proposals: usize,
    /// Weight of a likely cause in the open weight.
    pub likely_weight: f64,
    /// Weight of a possible cause.
    pub possible_weight: f64,
    /// Rationale.
    pub source: String,
}

/// The advisory caution every output carries. It is fixed in the program, not
/// rule data: a site file cannot replace or remove it (DEVELOPERS.md: the
/// advisory caution); a site may only add its own text after it
/// (`texts.site_note`).
pub const ADVISORY_CAUTION: &str = "Advisory only: this is computer-generated decision support for licensed clinicians, not a diagnosis or an order. Follow local protocols and formulary, check the basis shown, and confirm with the treating clinician before acting.";

/// Texts carried by the output.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Texts {
    /// A site's own text, shown after the fixed caution (never instead of it).
    #[serde(default)]
    pub site_note: Option<String>,
    /// The advisory statement carried by every GuidanceResponse, DetectedIssue
    /// and explain trace: [`ADVISORY_CAUTION`], then the site note if any. Not
    /// read from rule data; set by [`Texts::compose`] when the rules load.
    #[serde(skip)]
    pub advisory: String,
}

impl Texts {
    /// Sets `advisory` to the fixed caution followed by the site note.
    pub fn compose(&mut self) {
        self.advisory = match self.site_note.as_deref().map(str::trim).filter(|n| !n.is_empty()) {
            Some(note) => format!("{ADVISORY_CAUTION} {note}"),
            None => ADVISORY_CAUTION.to_owned(),
        };
    }
}

/// Name and version.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RuleSetId {
    /// Rule set name.
    pub name: String,
    /// Rule set version.
    pub version: String,
    /// Free text.
    #[serde(default)]
    pub description: String,
    /// Name of the site rule file layered on top, if any.
    #[serde(default)]
    pub site: Option<String>,
}

/// Scope note.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Scope {
    /// Text shown when a patient is outside every band.
    pub note: String,
}

/// Time windows, each with its source.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Windows {
    /// Maximum age of a calcium result, hours.
    pub result_max_age_hours: f64,
    /// Source.
    pub result_max_age_source: String,
    /// Maximum distance between a total calcium and its albumin, hours.
    pub albumin_pairing_hours: f64,
    /// Source.
    pub albumin_pairing_source: String,
    /// Maximum distance between a symptom and the calcium result, hours.
    pub symptom_window_hours: f64,
    /// Source.
    pub symptom_window_source: String,
    /// Maximum distance between a QTc and the calcium result, hours.
    pub qtc_pairing_hours: f64,
    /// Source.
    pub qtc_pairing_source: String,
    /// Tolerated clock skew for future timestamps, minutes.
    pub clock_skew_minutes: f64,
    /// Source.
    pub clock_skew_source: String,
}

/// QTc threshold.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct QtcRule {
    /// QTc above this (ms) is prolonged.
    pub prolonged_above_ms: f64,
    /// Source.
    pub source: String,
}

/// Albumin adjustment parameters.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AlbuminAdjustment {
    /// Slope in mg/dL calcium per g/dL albumin.
    pub conventional_slope_mg_dl_per_g_dl: f64,
    /// Reference albumin, g/dL.
    pub conventional_reference_albumin_g_dl: f64,
    /// Slope in mmol/L calcium per g/L albumin.
    pub si_slope_mmol_l_per_g_l: f64,
    /// Reference albumin, g/L.
    pub si_reference_albumin_g_l: f64,
    /// Source of the forms used.
    pub source: String,
    /// Payne's published slope, for the record.
    pub payne_original_slope_mg_dl_per_g_dl: f64,
    /// Source.
    pub payne_original_source: String,
    /// Albumin (g/L) below which the estimate is called unreliable.
    pub unreliable_below_albumin_g_l: f64,
    /// Source.
    pub unreliable_source: String,
    /// Caution text shown with every adjusted value.
    pub caution: String,
}

/// DetectedIssue severity (FHIR R4 detectedissue-severity).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum IssueSeverity {
    /// low
    Low,
    /// moderate
    Moderate,
    /// high
    High,
}

impl IssueSeverity {
    /// The FHIR code.
    pub fn code(self) -> &'static str {
        match self {
            Self::Low => "low",
            Self::Moderate => "moderate",
            Self::High => "high",
        }
    }
}

/// Severity mapping.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SeverityRules {
    /// Severity when symptomatic.
    pub symptomatic: IssueSeverity,
    /// Source.
    pub symptomatic_source: String,
    /// Severity when below the interval but above every grade.
    pub below_interval: IssueSeverity,
}

/// Unit of an age bound.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize)]
pub enum AgeUnit {
    /// Completed days.
    #[default]
    #[serde(rename = "d")]
    Days,
    /// Completed calendar months.
    #[serde(rename = "mo")]
    Months,
    /// Completed years.
    #[serde(rename = "a")]
    Years,
}

/// An age bound.
#[derive(Debug, Clone, Copy, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AgeBound {
    /// Number of units.
    pub value: u32,
    /// Unit.
    pub unit: AgeUnit,
}

/// Gestation restriction of a band.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Gestation {
    /// Any infant.
    Any,
    /// Born preterm.
    Preterm,
}

/// One age band.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AgeBand {
    /// Stable id.
    pub id: String,
    /// Label for people.
    pub label: String,
    /// Inclusive lower bound.
    pub from: AgeBound,
    /// Exclusive upper bound.
    pub until: AgeBound,
    /// Gestation restriction.
    pub gestation: Gestation,
    /// Preterm cut-off, weeks (with `gestation = preterm`).
    #[serde(default)]
    pub preterm_below_weeks: Option<f64>,
    /// Source of the preterm cut-off.
    #[serde(default)]
    pub preterm_source: Option<String>,
    /// Only for a recorded birth weight below this, kg.
    #[serde(default)]
    pub birth_weight_below_kg: Option<f64>,
    /// Source of the birth-weight cut-off.
    #[serde(default)]
    pub birth_weight_source: Option<String>,
    /// Never chosen from a partial birth date.
    pub needs_full_birth_date: bool,
    /// Ionized calcium interval.
    pub ionized: Interval,
    /// Total calcium interval.
    pub total: Interval,
    /// Albumin-adjusted calcium interval.
    pub adjusted: Interval,
}

/// A reference interval with grades, mmol/L.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Interval {
    /// Below this is hypocalcemia.
    pub lower: f64,
    /// Above this is high.
    pub upper: f64,
    /// Source.
    pub source: String,
    /// Severity grades, each at or below a threshold.
    #[serde(default)]
    pub grades: Vec<Grade>,
}

/// One severity grade.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Grade {
    /// Grade name.
    pub grade: String,
    /// Threshold, mmol/L (inclusive).
    pub at_or_below: f64,
    /// DetectedIssue severity.
    pub severity: IssueSeverity,
    /// Source.
    pub source: String,
}

/// Plausible range.
#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Range {
    /// Minimum.
    pub min: f64,
    /// Maximum.
    pub max: f64,
}

/// Molar masses of a ratio's numerator and denominator.
#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RatioMasses {
    /// Numerator, g/mol.
    pub numerator: f64,
    /// Denominator, g/mol.
    pub denominator: f64,
}

/// Analyte chemistry.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AnalyteRule {
    /// Label.
    pub label: String,
    /// Canonical UCUM unit.
    pub canonical_unit: String,
    /// Molar mass, g/mol.
    #[serde(default)]
    pub molar_mass_g_per_mol: Option<f64>,
    /// Charge, for equivalents.
    #[serde(default)]
    pub valence: Option<f64>,
    /// Molar masses of a ratio.
    #[serde(default)]
    pub ratio_molar_masses_g_per_mol: Option<RatioMasses>,
    /// Source of the chemistry.
    #[serde(default)]
    pub molar_mass_source: Option<String>,
    /// Plausible range in the canonical unit.
    pub plausible: Range,
    /// Source.
    pub plausible_source: String,
}

/// A recognised observation code.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ObservationCode {
    /// Code system URI.
    pub system: String,
    /// Code.
    pub code: String,
    /// Display.
    pub display: String,
    /// What it measures.
    pub analyte: Analyte,
    /// LOINC property.
    pub property: String,
    /// Specimen.
    pub specimen: String,
    /// Adjusted to pH 7.4.
    #[serde(default)]
    pub ph_adjusted: bool,
    /// Where the code was verified.
    pub source: String,
    /// Caution.
    #[serde(default)]
    pub note: Option<String>,
}

/// A recognised symptom code.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SymptomCode {
    /// Code system URI.
    pub system: String,
    /// Code.
    pub code: String,
    /// Display.
    pub display: String,
    /// Symptom.
    pub symptom: Symptom,
    /// Where the code was verified.
    pub source: String,
    /// Caution.
    #[serde(default)]
    pub note: Option<String>,
}

/// A concept not verified.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Unverified {
    /// Concept.
    pub concept: String,
    /// What was tried.
    pub tried: String,
}

/// A coding used in output resources.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct OutputCoding {
    /// System.
    pub system: String,
    /// Code.
    pub code: String,
    /// Display.
    pub display: String,
    /// Where it was verified.
    pub source: String,
}

/// Codes for output resources.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct OutputCodes {
    /// Code for the derived albumin-adjusted calcium Observation (moles/volume).
    pub adjusted_calcium: OutputCoding,
    /// Code for the hypocalcemia DetectedIssue, if a verified one exists.
    #[serde(default)]
    pub hypocalcemia: Option<OutputCoding>,
}

impl RuleSet {
    /// The analyte rule, if the rule set defines one.
    pub fn analyte(&self, analyte: Analyte) -> Option<&AnalyteRule> {
        self.analytes.get(&analyte)
    }
}
