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
}

/// Fixed texts.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Texts {
    /// The advisory statement carried by every GuidanceResponse and DetectedIssue.
    pub advisory: String,
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
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
pub enum AgeUnit {
    /// Completed days.
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
#[derive(Debug, Clone, Copy, Deserialize)]
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
