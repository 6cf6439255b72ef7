//! Typed rule data for treatment proposals (issue 4): formulary products,
//! published dose ranges, the site's choices among them, growth references
//! for weight plausibility, and safety thresholds.

use serde::Deserialize;

use super::model::AgeSpan;

/// A coding with the listing it was verified in (the same shape as output codings).
pub type SourcedCoding = super::model::OutputCoding;

/// A formulary product.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Product {
    /// Id.
    pub id: String,
    /// Label.
    pub label: String,
    /// Ingredient id.
    pub ingredient: String,
    /// Salt as labelled.
    #[serde(default)]
    pub salt: Option<String>,
    /// Formula the elemental figure corresponds to.
    #[serde(default)]
    pub salt_formula: Option<String>,
    /// Dose form.
    pub form: String,
    /// iv | oral.
    pub route: String,
    /// mL | tablet | capsule | drop.
    pub strength_per: String,
    /// Salt mg per unit.
    #[serde(default)]
    pub salt_mg: Option<f64>,
    /// calcium | magnesium.
    #[serde(default)]
    pub elemental: Option<String>,
    /// Elemental mg per unit.
    #[serde(default)]
    pub elemental_mg: Option<f64>,
    /// mEq per unit.
    #[serde(default)]
    pub meq: Option<f64>,
    /// IU per unit (vitamin D).
    #[serde(default)]
    pub iu: Option<f64>,
    /// IU marks on the dosing syringe supplied with the product, as its label states them.
    #[serde(default)]
    pub syringe_marks_iu: Vec<f64>,
    /// Label facts shown with every proposal of the product (licensed ages, excipients).
    #[serde(default)]
    pub caution: Option<String>,
    /// Micrograms per unit (calcitriol).
    #[serde(default)]
    pub mcg: Option<f64>,
    /// Tablets: parts a tablet can be split into (1 = whole only).
    #[serde(default)]
    pub divisible_into: Option<u32>,
    /// Free text.
    #[serde(default)]
    pub osmolarity_note: Option<String>,
    /// RxNorm / ATC codes.
    #[serde(default)]
    pub codes: Vec<SourcedCoding>,
    /// Label source.
    pub source: String,
    /// Confidence.
    pub confidence: String,
    /// Note.
    #[serde(default)]
    pub note: Option<String>,
}

/// A published dose range.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DoseSource {
    /// Id.
    pub id: String,
    /// Drug (ingredient id).
    pub drug: String,
    /// bolus | infusion | oral_daily | magnesium | cholecalciferol | calcitriol | calcium_chloride_bolus ...
    pub kind: String,
    /// Ages it applies to.
    pub applies: AgeSpan,
    /// Low end.
    pub low: f64,
    /// High end.
    pub high: f64,
    /// Unit as written (mg/kg, mg/kg/h, mg/kg/d, IU/d, mL/kg ...).
    pub unit: String,
    /// Cap per dose.
    #[serde(default)]
    pub max_single: Option<f64>,
    /// Unit of the cap.
    #[serde(default)]
    pub max_single_unit: Option<String>,
    /// Repeat text.
    #[serde(default)]
    pub repeat: Option<String>,
    /// Source.
    pub source: String,
    /// Confidence.
    pub confidence: String,
    /// Note.
    #[serde(default)]
    pub note: Option<String>,
}

/// Which end of a range the proposal uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Pick {
    /// The low end (the conservative default).
    Low,
    /// The middle.
    Mid,
    /// The high end.
    High,
}

/// The dose source chosen for an age span.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Chosen {
    /// Ages.
    pub applies: AgeSpan,
    /// Id of a `dose_sources` entry.
    pub dose_source: String,
    /// End of its range to propose.
    pub pick: Pick,
    /// Cap per dose in the regimen's dose unit (salt mg, IU ...), for these ages.
    #[serde(default)]
    pub max_single: Option<f64>,
    /// Source of the cap.
    #[serde(default)]
    pub max_single_source: Option<String>,
}

/// Dosing weight policy.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct WeightPolicy {
    /// A weight older than this (days) is stale.
    pub max_age_days: f64,
    /// Source.
    pub source: String,
}

/// A diluent.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Diluent {
    /// Id.
    pub id: String,
    /// Label.
    pub label: String,
    /// Contains sodium chloride (warned against when the site prefers dextrose).
    pub saline: bool,
}

/// IV calcium gluconate bolus.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BolusPolicy {
    /// Product id.
    pub product: String,
    /// Choices by age.
    pub chosen: Vec<Chosen>,
    /// Other dose sources shown beside the proposal.
    pub also_shown: Vec<String>,
    /// The site's own peripheral concentration limit, salt mg/mL (never above the label's).
    #[serde(default)]
    pub peripheral_max_mg_per_ml: Option<f64>,
    /// Shortest duration and fastest rate, by age.
    pub speed: Vec<IvSpeed>,
    /// Diluent id the site uses.
    pub diluent: String,
    /// Why that diluent.
    pub diluent_reason: String,
    /// Diluent the site prefers (a different choice is warned).
    pub preferred_diluent: String,
    /// Monitoring text.
    pub monitoring: String,
}

/// Continuous calcium gluconate infusion.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct InfusionPolicy {
    /// Product id.
    pub product: String,
    /// Choices by age (mg/kg/h).
    pub chosen: Vec<Chosen>,
    /// Other dose sources shown.
    pub also_shown: Vec<String>,
    /// Pump resolution, mL/h.
    pub pump_resolution_ml_per_h: f64,
    /// Source.
    pub pump_source: String,
    /// The make-up volume the preparation is described in, mL (so much product made
    /// up to this volume with diluent).
    pub makeup_ml: f64,
    /// Source of the make-up volume.
    pub makeup_source: String,
    /// Monitoring and stop text.
    pub monitoring: String,
}

/// Calcium chloride (central line alternative).
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ChloridePolicy {
    /// Product id.
    pub product: String,
    /// Choices by age.
    pub chosen: Vec<Chosen>,
    /// Other dose sources shown.
    pub also_shown: Vec<String>,
    /// Shortest duration and fastest rate, by age.
    pub speed: Vec<IvSpeed>,
    /// How it is prepared for the central line (dilution), with its source.
    pub central_line_preparation: String,
}

/// The shortest duration and the fastest rate of one IV product for an age span.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct IvSpeed {
    /// Ages.
    pub applies: AgeSpan,
    /// Never given over less than this many minutes.
    pub min_minutes: f64,
    /// Source of the shortest duration.
    pub min_minutes_source: String,
    /// Never faster than this many mg of the salt per minute.
    pub max_salt_mg_per_min: f64,
    /// Source of the fastest rate.
    pub max_rate_source: String,
}

/// The ceiling on elemental calcium per minute that every IV calcium salt is held to.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CalciumRateCeiling {
    /// Ages.
    pub applies: AgeSpan,
    /// Elemental calcium, mg per minute.
    pub max_elemental_mg_per_min: f64,
    /// Elemental calcium, mg per kg per minute.
    pub max_elemental_mg_per_kg_min: f64,
    /// Source.
    pub source: String,
}

/// Oral calcium.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct OralPolicy {
    /// Product for children who take liquids.
    pub liquid_product: String,
    /// Product for children who take tablets.
    pub tablet_product: String,
    /// Other tablets, tried in order when the tablet product cannot measure the dose
    /// within the rounding tolerance (then the liquid is tried).
    pub other_tablet_products: Vec<String>,
    /// A measured dose (whole tablets, liquid steps) stays within this percent of the
    /// computed dose, above or below.
    pub rounding_tolerance_pct: f64,
    /// Source of the tolerance.
    pub rounding_source: String,
    /// Tablets from this age.
    pub tablets_from: super::model::AgeBound,
    /// Source / rationale.
    pub product_source: String,
    /// Choices by age (elemental mg/kg/day).
    pub chosen: Vec<Chosen>,
    /// Other dose sources shown.
    pub also_shown: Vec<String>,
    /// Doses per day.
    pub doses_per_day: u32,
    /// Source.
    pub doses_source: String,
    /// Liquid doses rounded to this many mL.
    pub liquid_round_ml: f64,
    /// Daily upper limits of elemental calcium by age.
    pub daily_limits: Vec<LimitByAge>,
    /// Timing and advice text.
    pub advice: String,
    /// Timing when the calcium is given as a phosphate binder (kidney disease, high phosphate).
    pub binder_advice: String,
    /// Cause ids for which, with a high phosphate, the oral calcium is given as a phosphate binder.
    pub binder_for: Vec<String>,
    /// The plan's step from IV to oral calcium with vitamin D.
    pub transition: String,
}

/// IV magnesium sulfate.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MagnesiumPolicy {
    /// Product id.
    pub product: String,
    /// Choices by age (salt mg/kg).
    pub chosen: Vec<Chosen>,
    /// Other dose sources shown.
    pub also_shown: Vec<String>,
    /// Shortest duration and fastest rate, by age.
    pub speed: Vec<IvSpeed>,
    /// Repeat text.
    pub repeat: String,
}

/// Vitamin D.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct VitaminDPolicy {
    /// The vitamin D liquid tried first (product id).
    pub cholecalciferol_product: String,
    /// Further vitamin D liquids, tried in order when the first cannot measure the dose.
    #[serde(default)]
    pub other_liquid_products: Vec<String>,
    /// Why a vitamin D volume must be measurable (step and tolerance from `treatment.oral`).
    pub measure_source: String,
    /// What to do when no liquid measures the dose.
    pub unmeasurable: String,
    /// Treatment choices by age (IU/day).
    pub chosen: Vec<Chosen>,
    /// Days of treatment.
    pub treatment_days: u32,
    /// Source.
    pub treatment_source: String,
    /// Calcitriol product id.
    pub calcitriol_product: String,
    /// Cause ids for which calcitriol (specialist) is proposed instead.
    pub calcitriol_for: Vec<String>,
    /// Text for the specialist flag.
    pub calcitriol_note: String,
    /// Diet advice.
    pub diet_advice: String,
    /// Maintenance choices by age (IU/day), proposed with calcium while 25-OH vitamin D is unknown.
    pub maintenance: Vec<Chosen>,
    /// Cause ids for which cholecalciferol treatment doses are proposed.
    pub treat_for: Vec<String>,
    /// When vitamin D is paired with calcium, and why.
    pub pairing_source: String,
    /// Text when calcitriol is deferred until phosphate is controlled.
    pub calcitriol_deferred: String,
    /// Cause ids for which calcitriol is deferred while the phosphate is high.
    pub calcitriol_deferred_for: Vec<String>,
}

/// Safety settings that are the site's own (the published facts are in `safety_sources`).
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SafetyPolicy {
    /// Why dextrose is preferred over saline as diluent.
    pub saline_source: String,
    /// Calcium x phosphate product limits by age: the `safety_sources` entry whose
    /// threshold applies at each age.
    pub ca_x_p_limits: Vec<LimitByAge>,
    /// Source of the age split between the limits.
    pub ca_x_p_age_source: String,
    /// When a recorded digoxin counts as current.
    pub digoxin_current: RecencyWindow,
    /// When a recorded sodium bicarbonate counts as current.
    pub bicarbonate_current: RecencyWindow,
    /// The calcium x phosphate product uses the albumin-adjusted total calcium when an albumin is
    /// in the window.
    pub ca_x_p_corrected_calcium: bool,
    /// Source of that choice.
    pub ca_x_p_corrected_source: String,
    /// When a medication record the service cannot identify counts as near the
    /// proposal (running or active, or recorded within the window).
    pub unidentified_medication_current: RecencyWindow,
}

/// A medication counts as current for a safety check when it is running (an
/// administration in progress, an active order) or was recorded within this window.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RecencyWindow {
    /// Hours before the evaluation time.
    pub hours: f64,
    /// Source.
    pub source: String,
}

/// A published safety fact.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SafetySource {
    /// The fact.
    pub text: String,
    /// Its threshold, when numeric.
    #[serde(default)]
    pub threshold: Option<f64>,
    /// Unit of the threshold.
    #[serde(default)]
    pub unit: Option<String>,
    /// Source.
    pub source: String,
    /// Confidence.
    pub confidence: String,
    /// Note.
    #[serde(default)]
    pub note: Option<String>,
}

/// Calcium gluconate administration limits (label).
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct GluconateAdministration {
    /// Bolus rate limit, children including neonates, mg/min.
    pub max_bolus_rate_pediatric_mg_per_min: f64,
    /// Bolus rate limit, adults, mg/min.
    pub max_bolus_rate_adult_mg_per_min: f64,
    /// Bolus dilution range, mg/mL.
    pub bolus_dilution_mg_per_ml: [f64; 2],
    /// Continuous infusion dilution range, mg/mL.
    pub continuous_dilution_mg_per_ml: [f64; 2],
    /// Diluents on the label.
    pub diluents: Vec<String>,
    /// Use right after dilution.
    pub use_immediately_after_dilution: bool,
    /// Calcium monitoring interval during intermittent use, h.
    pub monitor_calcium_intermittent_h: [f64; 2],
    /// Calcium monitoring interval during continuous use, h.
    pub monitor_calcium_continuous_h: [f64; 2],
    /// Source.
    pub source: String,
    /// Confidence.
    pub confidence: String,
    /// Note.
    #[serde(default)]
    pub note: Option<String>,
}

/// Magnesium sulfate administration limits (label).
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MagnesiumAdministration {
    /// mg/mL.
    pub max_iv_concentration_mg_per_ml: f64,
    /// %.
    pub max_iv_concentration_pct: f64,
    /// mg/min.
    pub max_iv_rate_mg_per_min: f64,
    /// Diluents.
    pub diluents: Vec<String>,
    /// IM dilution in children, %.
    pub children_im_must_be_diluted_to_pct: f64,
    /// Source.
    pub source: String,
    /// Confidence.
    pub confidence: String,
    /// Note.
    #[serde(default)]
    pub note: Option<String>,
}

/// SNOMED CT route codes.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Routes {
    /// Intravenous.
    pub iv: SourcedCoding,
    /// Oral.
    pub oral: SourcedCoding,
}

/// An age span and the `safety_sources` entry holding its limit.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LimitByAge {
    /// Ages.
    pub applies: AgeSpan,
    /// Key into `safety_sources` (its threshold is the limit).
    pub safety_source: String,
}

/// The treatment policy.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TreatmentPolicy {
    /// Route codes.
    pub routes: Routes,
    /// Weight.
    pub weight: WeightPolicy,
    /// Diluents.
    pub diluents: Vec<Diluent>,
    /// Bolus.
    pub bolus: BolusPolicy,
    /// Infusion.
    pub infusion: InfusionPolicy,
    /// Chloride.
    pub chloride: ChloridePolicy,
    /// Elemental calcium per minute, every IV salt.
    pub calcium_rate: Vec<CalciumRateCeiling>,
    /// Oral.
    pub oral: OralPolicy,
    /// Magnesium.
    pub magnesium: MagnesiumPolicy,
    /// Vitamin D.
    pub vitamin_d: VitaminDPolicy,
    /// Safety.
    pub safety: SafetyPolicy,
    /// Neonatal fluid allowance (infusion fluid-load check).
    pub neonatal_fluid: NeonatalFluidPolicy,
}

/// The daily fluid allowance of a neonate and the share one calcium infusion may take.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NeonatalFluidPolicy {
    /// mL/kg/day by day of life (day 1 first); the last applies to later days.
    pub allowance_ml_per_kg_day: Vec<f64>,
    /// Source.
    pub allowance_source: String,
    /// Warn when the infusion takes at least this fraction of the allowance.
    pub warn_share: f64,
    /// Source.
    pub warn_share_source: String,
}

/// One weight-for-age LMS table.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct GrowthReference {
    /// Id.
    pub id: String,
    /// Label.
    pub label: String,
    /// male | female.
    pub sex: String,
    /// weight.
    pub measure: String,
    /// First age, months.
    pub from_months: f64,
    /// Last age, months.
    pub until_months: f64,
    /// Source.
    pub source: String,
    /// Rows [age_months, L, M, S].
    pub rows: Vec<[f64; 4]>,
}

/// A preterm weight LMS table by postmenstrual age.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PretermReference {
    /// Id.
    pub id: String,
    /// Label.
    pub label: String,
    /// male | female.
    pub sex: String,
    /// weight.
    pub measure: String,
    /// First postmenstrual age, weeks.
    pub from_weeks: f64,
    /// Last postmenstrual age, weeks.
    pub until_weeks: f64,
    /// Source.
    pub source: String,
    /// Rows [postmenstrual_weeks, L, M, S].
    pub rows: Vec<[f64; 4]>,
}

/// Growth policy.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct GrowthPolicy {
    /// WHO below this age, CDC from it.
    pub use_who_until_months: f64,
    /// Source.
    pub use_who_until_source: String,
    /// |z| above this is implausible.
    pub implausible_abs_z: f64,
    /// Source.
    pub implausible_source: String,
    /// Born before this many weeks: judged by postmenstrual / corrected age.
    pub preterm_below_weeks: f64,
    /// Term, weeks (corrected age = chronological age - (term - gestation)).
    pub term_weeks: f64,
    /// The preterm table is used up to this postmenstrual age, weeks; then the
    /// term references by corrected age.
    pub preterm_table_until_weeks: f64,
    /// Source of the three preterm settings.
    pub preterm_source: String,
    /// A weight below this (kg) is physically impossible for a living child.
    pub lightest_possible_kg: f64,
    /// Source.
    pub lightest_possible_source: String,
}

#[cfg(test)]
mod tests {
    /// One step of a path in the figures table: `name`, `name[id]` or `name[n]`.
    fn step<'v>(v: &'v toml::Value, part: &str) -> Option<&'v toml::Value> {
        let (name, key) = match part.split_once('[') {
            Some((n, k)) => (n, Some(k.trim_end_matches(']'))),
            None => (part, None),
        };
        let here = v.get(name)?;
        match key {
            None => Some(here),
            Some(k) => {
                let list = here.as_array()?;
                match k.parse::<usize>() {
                    Ok(n) => list.get(n),
                    Err(_) => list.iter().find(|e| e.get("id").and_then(toml::Value::as_str) == Some(k)),
                }
            }
        }
    }

    fn number(v: &toml::Value) -> Option<f64> {
        v.as_float().or_else(|| v.as_integer().map(|i| i as f64))
    }

    #[test]
    fn treatment_sources_figures_match_the_rule_data() {
        // TREATMENT-SOURCES.md states figures in prose; its "Figures the rule data must match"
        // table is the machine-readable copy, and every row must equal the rule file.
        let md = include_str!("../../rules/TREATMENT-SOURCES.md");
        let formulary: toml::Value = toml::from_str(include_str!("../../rules/formulary.toml")).expect("formulary");
        let treatment: toml::Value = toml::from_str(include_str!("../../rules/treatment.toml")).expect("treatment");
        let table = md
            .split("<!-- figures:start -->")
            .nth(1)
            .and_then(|t| t.split("<!-- figures:end -->").next())
            .expect("the figures table");
        let mut checked = 0;
        for line in table.lines().filter(|l| l.starts_with('|')).skip(2) {
            let cells: Vec<&str> = line.trim_matches('|').split('|').map(str::trim).collect();
            let [file, path, value] = cells[..] else { panic!("a row of three cells: {line}") };
            let doc = match file {
                "formulary" => &formulary,
                "treatment" => &treatment,
                other => panic!("unknown file {other} in {line}"),
            };
            let found = path.split('.').try_fold(doc, step).and_then(number);
            let stated: f64 = value.parse().unwrap_or_else(|_| panic!("not a number: {line}"));
            assert!(
                found.is_some_and(|f| (f - stated).abs() <= 1e-9 * stated.abs().max(1.0)),
                "TREATMENT-SOURCES.md says {path} = {stated}, the {file} rule data has {found:?}"
            );
            checked += 1;
        }
        assert!(checked >= 50, "only {checked} figures checked");
    }

    #[test]
    fn treatment_sources_cite_no_unnamed_origin() {
        // Figures cite a publication or are a project decision; no "memory", "brief" or slides.
        for text in [
            include_str!("../../rules/TREATMENT-SOURCES.md"),
            include_str!("../../rules/treatment.toml"),
            include_str!("../../rules/formulary.toml"),
        ] {
            let lower = text.to_lowercase();
            for word in ["memory", "the brief", "project brief", "slides", "slideshare"] {
                assert!(!lower.contains(word), "'{word}' found");
            }
        }
    }
}
