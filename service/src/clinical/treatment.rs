//! Treatment proposals: weight-based DRAFT medication proposals with their
//! arithmetic, and the safety checks that protect the child. Nothing here
//! orders anything: the writer turns these into MedicationRequests with
//! status draft and intent proposal.
//!
//! When: symptomatic or severe hypocalcemia -> IV calcium gluconate bolus,
//! then a continuous infusion (calcium chloride only as a central-line
//! alternative); otherwise oral elemental calcium. Low magnesium -> IV
//! magnesium sulfate first. Nutritional vitamin D deficiency ->
//! cholecalciferol by age band; hypoparathyroidism, the 1-alpha-hydroxylase
//! defect or kidney disease -> calcitriol, flagged for specialist dosing.

use super::causes::{CauseLabel, Context};
use super::facts::{Analyte, CodedEvent, EventKind, Facts, Gender, Source, VascularAccess};
use super::format::num;
use super::growth;
use super::status::{CalciumFinding, Classification};
use super::workup::Workup;
use crate::rules::model::{IssueSeverity, LabOutcome, RuleSet};
use crate::rules::treatment_model::{
    CalciumRateCeiling, Chosen, DoseSource, IvSpeed, OralPolicy, Pick, Product, RecencyWindow,
};

/// The dosing weight, or why there is none.
#[derive(Debug, Clone)]
pub struct Weight {
    /// kg.
    pub kg: f64,
    /// Where it came from.
    pub source: Source,
    /// When, as written.
    pub when_text: String,
    /// Weight-for-age z (None when the sex is not recorded: both were checked).
    pub z: Option<growth::ZScore>,
    /// A caution to show with the doses (weight used, but to be confirmed).
    pub caution: Option<String>,
}

/// Route of a proposal.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Route {
    /// Intravenous.
    Iv,
    /// Oral.
    Oral,
}

/// A quantity with a UCUM unit.
#[derive(Debug, Clone, PartialEq)]
pub struct Qty {
    /// Value.
    pub value: f64,
    /// UCUM code.
    pub unit: &'static str,
}

/// A draft medication proposal.
#[derive(Debug, Clone)]
pub struct MedProposal {
    /// Stable key (for ids).
    pub key: &'static str,
    /// Title.
    pub title: String,
    /// The product.
    pub product: Product,
    /// The arithmetic and instructions, as the card shows them.
    pub text: String,
    /// Dose per administration.
    pub dose: Option<Qty>,
    /// Rate.
    pub rate: Option<Qty>,
    /// Times per day (oral, vitamin D).
    pub per_day: Option<u32>,
    /// For this many days.
    pub days: Option<u32>,
    /// Maximum per day.
    pub max_per_day: Option<Qty>,
    /// Route.
    pub route: Route,
    /// The chosen source and the others shown.
    pub sources: Vec<String>,
    /// An alternative to another proposal (choose one).
    pub alternative: bool,
    /// Needs a specialist to set the dose (no dose given).
    pub specialist: bool,
}

/// A safety problem.
#[derive(Debug, Clone)]
pub struct SafetyIssue {
    /// Stable key.
    pub key: &'static str,
    /// v3 ActCode for DetectedIssue.code, when one fits.
    pub act_code: Option<(&'static str, &'static str)>,
    /// Severity.
    pub severity: IssueSeverity,
    /// Short title.
    pub title: String,
    /// Detail with the numbers.
    pub detail: String,
    /// Inputs implicated.
    pub implicated: Vec<Source>,
    /// What to do.
    pub mitigation: String,
}

/// The treatment plan.
#[derive(Debug, Clone, Default)]
pub struct TreatmentPlan {
    /// Proposals, in the order to give them.
    pub proposals: Vec<MedProposal>,
    /// Safety problems.
    pub issues: Vec<SafetyIssue>,
    /// Notes (diet advice, what was not proposed and why).
    pub notes: Vec<String>,
    /// The weight used.
    pub weight: Option<Weight>,
}

fn chosen<'r>(ctx: &Context, list: &'r [Chosen]) -> Option<&'r Chosen> {
    list.iter().find(|c| ctx.within(&c.applies) == Some(true))
}

fn dose_source<'r>(rules: &'r RuleSet, id: &str) -> Option<&'r DoseSource> {
    rules.dose_sources.iter().find(|d| d.id == id)
}

fn product<'r>(rules: &'r RuleSet, id: &str) -> Option<&'r Product> {
    rules.products.iter().find(|p| p.id == id)
}

/// The dose for a weight: per-kg sources times the weight, flat sources as they are.
fn dose_for(d: &DoseSource, per_unit: f64, weight_kg: f64) -> (f64, String) {
    let per_kg_ml = d.unit == "mL/kg";
    if per_kg_ml {
        let per_kg = per_unit;
        (weight_kg * per_kg, format!("{} kg x {} mg/kg", num_trim(weight_kg), num_trim(per_kg)))
    } else if d.unit.ends_with("/kg") || d.unit.ends_with("/kg/h") || d.unit.ends_with("/kg/d") {
        (weight_kg * per_unit, format!("{} kg x {} {}", num_trim(weight_kg), num_trim(per_unit), d.unit))
    } else {
        (per_unit, format!("{} {} (a flat dose)", num_trim(per_unit), d.unit))
    }
}

fn cap_of(c: &Chosen, d: &DoseSource) -> Option<(f64, String)> {
    match (c.max_single, d.max_single) {
        (Some(m), _) => Some((m, c.max_single_source.clone().unwrap_or_else(|| "rule data".into()))),
        (None, Some(m)) => Some((m, format!("{}; {}", d.source, d.confidence))),
        _ => None,
    }
}

fn pick(d: &DoseSource, p: Pick) -> f64 {
    match p {
        Pick::Low => d.low,
        Pick::High => d.high,
        Pick::Mid => (d.low + d.high) / 2.0,
    }
}

/// "range 100-200 mg/kg (source)".
fn range_text(d: &DoseSource) -> String {
    format!("{}-{} {} ({}; {})", num_trim(d.low), num_trim(d.high), d.unit, d.source, d.confidence)
}

fn sources_shown(rules: &RuleSet, chosen: &DoseSource, also: &[String], ctx: &Context) -> Vec<String> {
    let mut out = vec![format!("Chosen: {}", range_text(chosen))];
    for id in also {
        if let Some(d) = dose_source(rules, id).filter(|d| d.id != chosen.id && ctx.within(&d.applies) != Some(false)) {
            out.push(format!("Also published: {}", range_text(d)));
        }
    }
    out
}

/// A number without needless trailing zeros (up to 2 decimals).
pub fn num_trim(v: f64) -> String {
    let s = format!("{v:.2}");
    s.trim_end_matches('0').trim_end_matches('.').to_owned()
}

/// "750 mg", or "1050 mg, capped at the maximum single dose 1000 mg (source), so 1000 mg".
fn dose_phrase(raw: f64, dose: f64, cap: &Option<(f64, String)>, unit: &str) -> String {
    match cap {
        Some((max, source)) if dose < raw => format!(
            "{} {unit}, capped at the maximum single dose {} {unit} ({source}), so {} {unit}",
            num_trim(raw),
            num_trim(*max),
            num_trim(dose)
        ),
        _ => format!("{} {unit}", num_trim(dose)),
    }
}

fn round_to(v: f64, step: f64) -> f64 {
    if step > 0.0 { (v / step).round() * step } else { v }
}

/// How a weight compares with the growth references.
enum Verdict {
    /// Within the limit for at least one possible sex.
    Plausible(Vec<growth::ZScore>),
    /// Below the term reference limit, gestation not recorded, within the limit
    /// had the baby been born preterm at one of `weeks` (whole weeks from the
    /// earliest the preterm table covers); `preterm` is the z nearest the median among them.
    LowUnlessPreterm { term: growth::ZScore, preterm: growth::ZScore, weeks: (f64, f64) },
    /// Beyond the limit above.
    High(growth::ZScore),
    /// Beyond the limit below (for the recorded gestation, or even for the earliest one).
    Low(growth::ZScore),
    /// No reference covers the age.
    NoReference,
}

fn verdict(rules: &RuleSet, facts: &Facts, ctx: &Context, kg: f64) -> Verdict {
    let limit = rules.growth_policy.implausible_abs_z;
    let sexes: &[&str] = match ctx.gender {
        Gender::Male => &["male"],
        Gender::Female => &["female"],
        _ => &["male", "female"],
    };
    let days = ctx.age_min.days;
    let ga = facts.gestational_age_weeks;
    let zs: Vec<growth::ZScore> = sexes.iter().filter_map(|s| growth::weight_z(rules, s, days, ga, kg)).collect();
    let Some(first) = zs.first().cloned() else {
        return Verdict::NoReference;
    };
    // Implausible only when implausible for every sex it could be checked for.
    if zs.iter().any(|z| z.check_z.abs() <= limit) {
        return Verdict::Plausible(zs);
    }
    if zs.iter().all(|z| z.check_z > limit) {
        return Verdict::High(first);
    }
    if ga.is_none()
        && let Some(earliest) = growth::earliest_gestation(rules)
    {
        // Every whole week of preterm gestation the tables cover.
        let mut fits: Vec<(f64, growth::ZScore)> = Vec::new();
        let mut week = earliest;
        while week < rules.growth_policy.preterm_below_weeks {
            if let Some(z) = sexes
                .iter()
                .filter_map(|s| growth::weight_z(rules, s, days, Some(week), kg))
                .find(|z| z.check_z.abs() <= limit)
            {
                fits.push((week, z));
            }
            week += 1.0;
        }
        if let (Some((from, _)), Some((until, _))) = (fits.first(), fits.last()) {
            let weeks = (*from, *until);
            // The example shown: the gestation where the weight is nearest the median.
            let closest = fits
                .into_iter()
                .map(|(_, z)| z)
                .min_by(|a, b| a.check_z.abs().total_cmp(&b.check_z.abs()))
                .unwrap_or_else(|| first.clone());
            return Verdict::LowUnlessPreterm { term: first, preterm: closest, weeks };
        }
    }
    Verdict::Low(first)
}

/// "z = -6.3 (WHO ..., at age 0.1 months; median 3.3 kg)".
fn z_text(z: &growth::ZScore) -> String {
    format!(
        "z = {} ({} {}; {} {}; median {} kg)",
        num(z.z, 1),
        z.check_method,
        num(z.check_z, 1),
        z.reference,
        z.age_text,
        num(z.median, 2)
    )
}

/// A reading of a weight slip that makes the weight plausible: "grams entered as kilograms (1.1 kg)".
fn slip(rules: &RuleSet, facts: &Facts, ctx: &Context, kg: f64, factors: &[(f64, &str)]) -> Option<String> {
    factors.iter().find_map(|(f, what)| {
        let v = kg * f;
        (v >= rules.growth_policy.lightest_possible_kg
            && matches!(verdict(rules, facts, ctx, v), Verdict::Plausible(_) | Verdict::LowUnlessPreterm { .. }))
        .then(|| format!("{what} ({} kg would be plausible)", num_trim_sig(v)))
    })
}

/// A weight with up to 3 decimals (small babies), trailing zeros dropped.
fn num_trim_sig(v: f64) -> String {
    let s = format!("{v:.3}");
    s.trim_end_matches('0').trim_end_matches('.').to_owned()
}

/// Pick the dosing weight and check it. Refused only when physically
/// impossible or an evident unit slip; a low weight that only an unrecorded
/// preterm birth explains is used with a caution (`Weight::caution`).
pub fn dosing_weight(rules: &RuleSet, facts: &Facts, ctx: &Context) -> Result<Weight, String> {
    let limit = facts.now - (rules.treatment.weight.max_age_days * 86_400.0).round() as i64;
    let all = facts.of(Analyte::BodyWeight);
    let Some(w) = all.first() else {
        return Err("No body weight is recorded. Record a current weight to get weight-based doses.".to_owned());
    };
    if w.when.latest < limit {
        return Err(format!(
            "The most recent weight ({} kg at {}) is older than {} days ({}). Record a current weight.",
            num_trim(w.value),
            w.when_text,
            num(rules.treatment.weight.max_age_days, 0),
            rules.treatment.weight.source
        ));
    }
    let gp = &rules.growth_policy;
    let kg = w.value;
    let limit_z = gp.implausible_abs_z;
    let shown = num_trim_sig(kg);
    if kg < gp.lightest_possible_kg {
        let why = slip(rules, facts, ctx, kg, &[(1000.0, "kilograms entered as grams")]);
        return Err(match why {
            Some(why) => format!(
                "Unit slip: the weight {shown} kg is physically impossible (below {} kg, {}) and looks like {why}. Check the unit and re-record the weight.",
                num_trim(gp.lightest_possible_kg),
                gp.lightest_possible_source
            ),
            None => format!(
                "Physically impossible weight: {shown} kg is below {} kg ({}). Check and re-record the weight.",
                num_trim(gp.lightest_possible_kg),
                gp.lightest_possible_source
            ),
        });
    }
    let make = |z: Option<growth::ZScore>, caution: Option<String>| Weight {
        kg,
        source: w.source.clone(),
        when_text: w.when_text.clone(),
        z,
        caution,
    };
    match verdict(rules, facts, ctx, kg) {
        Verdict::Plausible(zs) => {
            let z = if zs.len() == 1 { zs.into_iter().next() } else { None };
            Ok(make(z, None))
        }
        Verdict::LowUnlessPreterm { term, preterm, weeks } => Ok(make(
            None,
            Some(format!(
                "The weight {shown} kg is beyond the limit |z| > {} for a baby born at term ({}) and the gestational age at birth is not recorded. It is within the limit for a baby born preterm at {} weeks (closest to the median: {}). Doses below use {shown} kg. Confirm the weight and record the gestational age at birth (LOINC 76516-4) so the weight can be judged against it ({}; {}).",
                num_trim(limit_z),
                z_text(&term),
                if weeks.0 == weeks.1 {
                    num_trim(weeks.0)
                } else {
                    format!("{}-{}", num_trim(weeks.0), num_trim(weeks.1))
                },
                z_text(&preterm),
                gp.implausible_source,
                gp.preterm_source
            )),
        )),
        Verdict::High(z) => {
            let grams = slip(rules, facts, ctx, kg, &[(0.001, "grams entered as kilograms")]);
            let decimal = slip(rules, facts, ctx, kg, &[(0.1, "a misplaced decimal point")]);
            Err(match (grams, decimal) {
                (Some(why), _) => format!(
                    "Unit slip: the weight {shown} kg is impossible for the age ({}; limit |z| > {}, {}) and looks like {why}. Check the unit and re-record the weight.",
                    z_text(&z),
                    num_trim(limit_z),
                    gp.implausible_source
                ),
                (None, hint) => format!(
                    "Implausible weight for the age, taken as an entry error: {shown} kg is far above the reference ({}; limit |z| > {}, {}).{} Check and re-record the weight.",
                    z_text(&z),
                    num_trim(limit_z),
                    gp.implausible_source,
                    hint.map(|h| format!(" It may be {h}.")).unwrap_or_default()
                ),
            })
        }
        Verdict::Low(z) => {
            let why = slip(rules, facts, ctx, kg, &[(10.0, "a misplaced decimal point")]);
            let gestation = match facts.gestational_age_weeks {
                Some(_) => " Either the weight or the recorded gestational age at birth is wrong.".to_owned(),
                None => format!(
                    " It stays beyond the limit had the baby been born preterm at any whole week from {} weeks.",
                    num_trim(growth::earliest_gestation(rules).unwrap_or_default())
                ),
            };
            Err(format!(
                "Implausible weight for the age, taken as an entry error: {shown} kg is far below the reference ({}; limit |z| > {}, {}).{gestation}{} Check and re-record the weight.",
                z_text(&z),
                num_trim(limit_z),
                gp.implausible_source,
                why.map(|h| format!(" It may be {h}.")).unwrap_or_default()
            ))
        }
        Verdict::NoReference => {
            let born_early = facts
                .gestational_age_weeks
                .zip(growth::earliest_gestation(rules))
                .is_some_and(|(ga, earliest)| ga < earliest);
            if born_early {
                Ok(make(
                    None,
                    Some(format!(
                        "Born before {} weeks, where no weight reference starts, so the weight {shown} kg could only be checked against the physical floor of {} kg. Doses below use it: confirm the weight.",
                        num_trim(growth::earliest_gestation(rules).unwrap_or_default()),
                        num_trim(gp.lightest_possible_kg)
                    )),
                ))
            } else {
                Err("No weight-for-age reference covers this age; the weight cannot be checked.".to_owned())
            }
        }
    }
}

fn events_in<'f>(facts: &'f Facts, list: &str, kind: EventKind) -> Vec<&'f CodedEvent> {
    facts.events.iter().filter(|e| e.kind == kind && e.lists.iter().any(|l| l == list)).collect()
}

/// Elemental calcium and mEq in a volume of an IV product.
fn elemental_text(p: &Product, ml: f64) -> String {
    let mut parts = Vec::new();
    if let Some(e) = p.elemental_mg {
        parts.push(format!("{} mg elemental {}", num_trim(e * ml), p.elemental.as_deref().unwrap_or("")));
    }
    if let Some(m) = p.meq {
        parts.push(format!("{} mEq", num_trim(m * ml)));
    }
    parts.join(", ")
}

/// The IV speed limits for the age: the span the whole age lies in, or, when the age
/// straddles a boundary, the strictest of the spans it may lie in (longest shortest
/// duration, slowest fastest rate).
fn speed_for(ctx: &Context, list: &[IvSpeed]) -> Option<IvSpeed> {
    if let Some(s) = list.iter().find(|s| ctx.within(&s.applies) == Some(true)) {
        return Some(s.clone());
    }
    let maybe: Vec<&IvSpeed> = list.iter().filter(|s| ctx.within(&s.applies).is_none()).collect();
    let mut out = (*maybe.first()?).clone();
    for s in &maybe[1..] {
        if s.min_minutes > out.min_minutes {
            out.min_minutes = s.min_minutes;
            out.min_minutes_source.clone_from(&s.min_minutes_source);
        }
        if s.max_salt_mg_per_min < out.max_salt_mg_per_min {
            out.max_salt_mg_per_min = s.max_salt_mg_per_min;
            out.max_rate_source.clone_from(&s.max_rate_source);
        }
    }
    Some(out)
}

/// The elemental-calcium ceiling for the age (the lowest where the age is uncertain).
fn calcium_ceiling<'r>(rules: &'r RuleSet, ctx: &Context) -> Option<&'r CalciumRateCeiling> {
    let list = &rules.treatment.calcium_rate;
    if let Some(c) = list.iter().find(|c| ctx.within(&c.applies) == Some(true)) {
        return Some(c);
    }
    list.iter()
        .filter(|c| ctx.within(&c.applies).is_none())
        .min_by(|a, b| a.max_elemental_mg_per_kg_min.total_cmp(&b.max_elemental_mg_per_kg_min))
}

/// How long an IV dose takes: the longest of the product's shortest duration, its dose
/// at its fastest salt rate and, for calcium, its elemental calcium at the common
/// ceiling; rounded up to whole minutes.
struct IvTiming {
    /// Whole minutes.
    minutes: f64,
    /// The arithmetic, for the text.
    text: String,
}

fn iv_timing(
    rules: &RuleSet,
    ctx: &Context,
    w: &Weight,
    p: &Product,
    dose_mg: f64,
    speed: &IvSpeed,
    label_max_mg_per_min: f64,
) -> Option<IvTiming> {
    let salt_per_unit = p.salt_mg.filter(|v| *v > 0.0)?;
    let elemental_per_unit = p.elemental_mg.filter(|v| *v > 0.0)?;
    let elemental = dose_mg * elemental_per_unit / salt_per_unit;
    let element = p.elemental.as_deref().unwrap_or("");
    let max_salt = speed.max_salt_mg_per_min.min(label_max_mg_per_min);
    let by_salt = dose_mg / max_salt;
    let mut parts = vec![
        format!("at least {} min ({})", num_trim(speed.min_minutes), speed.min_minutes_source),
        format!(
            "no faster than {} mg/min of the salt ({}): {} mg / {} mg/min = {} min",
            num_trim(max_salt),
            speed.max_rate_source,
            num_trim(dose_mg),
            num_trim(max_salt),
            num_trim(by_salt)
        ),
    ];
    let mut need = speed.min_minutes.max(by_salt);
    if element == "calcium" {
        let c = calcium_ceiling(rules, ctx)?;
        let per_kg_total = c.max_elemental_mg_per_kg_min * w.kg;
        let ceiling = c.max_elemental_mg_per_min.min(per_kg_total);
        let by_calcium = elemental / ceiling;
        parts.push(format!(
            "elemental calcium no faster than {} mg/min, the lower of {} mg/min and {} mg/kg/min x {} kg = {} mg/min ({}): {} mg / {} mg/min = {} min",
            num_trim(ceiling),
            num_trim(c.max_elemental_mg_per_min),
            num_trim(c.max_elemental_mg_per_kg_min),
            num_trim(w.kg),
            num_trim(per_kg_total),
            c.source,
            num_trim(elemental),
            num_trim(ceiling),
            num_trim(by_calcium)
        ));
        need = need.max(by_calcium);
    }
    let minutes = (need - 1e-9).ceil().max(1.0);
    let per_min = elemental / minutes;
    let mass = if element == "calcium" {
        rules.analyte(Analyte::CalciumTotal).and_then(|a| a.molar_mass_g_per_mol)
    } else {
        rules.analyte(Analyte::Magnesium).and_then(|a| a.molar_mass_g_per_mol)
    };
    let mmol = mass.map_or_else(String::new, |m| format!(", {} mmol/min", num(per_min / m, 3)));
    let text = format!(
        "Duration: {}. So over {} min: {} mg elemental {element} / {} min = {} mg elemental {element}/min{mmol} ({} mg/kg/min), {} mg/min of the salt.",
        parts.join("; "),
        num_trim(minutes),
        num_trim(elemental),
        num_trim(minutes),
        num_trim(per_min),
        num(per_min / w.kg, 3),
        num_trim(dose_mg / minutes)
    );
    Some(IvTiming { minutes, text })
}

/// The infusion's elemental calcium per minute against the common ceiling, as text (a
/// continuous infusion is far below it at the published rates; a site rate above it is said).
fn infusion_speed_text(rules: &RuleSet, ctx: &Context, w: &Weight, p: &Product, salt_mg_h: f64) -> String {
    let (Some(e), Some(salt), Some(c)) = (p.elemental_mg, p.salt_mg.filter(|v| *v > 0.0), calcium_ceiling(rules, ctx))
    else {
        return String::new();
    };
    let per_min = salt_mg_h * e / salt / 60.0;
    let ceiling = c.max_elemental_mg_per_min.min(c.max_elemental_mg_per_kg_min * w.kg);
    format!(
        " Elemental calcium: {} mg/h x {}/{} / 60 = {} mg/min ({} mg/kg/min){}",
        num_trim(salt_mg_h),
        num_trim(e),
        num_trim(salt),
        num(per_min, 3),
        num(per_min / w.kg, 4),
        if per_min <= ceiling {
            format!(", within the ceiling of {} mg/min for every IV calcium salt.", num_trim(ceiling))
        } else {
            format!(", ABOVE the ceiling of {} mg/min for every IV calcium salt: lower the rate.", num_trim(ceiling))
        }
    )
}

/// Build the plan. `None` when no treatment is due (calcium not low).
pub fn plan(
    rules: &RuleSet,
    facts: &Facts,
    finding: &CalciumFinding,
    workup: Option<&Workup>,
) -> Option<TreatmentPlan> {
    let ctx = Context::new(facts, finding.when)?;
    let t = &rules.treatment;
    let mut plan = TreatmentPlan::default();
    let low = finding.classification == Classification::Low;
    safety_always(rules, facts, finding, &ctx, &mut plan);
    if !low {
        return Some(plan);
    }
    let weight = dosing_weight(rules, facts, &ctx);
    let urgent = finding.is_symptomatic() || finding.grade.as_ref().is_some_and(|g| g.severity == IssueSeverity::High);
    let mg_low =
        workup.and_then(|w| w.readings.labs.get(&Analyte::Magnesium)).is_some_and(|r| r.outcome == LabOutcome::Low);
    let phosphate_high = high_phosphate(rules, facts, &ctx).is_some();
    let likely = |ids: &[String]| {
        workup.is_some_and(|w| w.causes.iter().any(|c| c.label == CauseLabel::Likely && ids.contains(&c.id)))
    };
    // With a high phosphate and kidney disease the likely cause, oral calcium carbonate is
    // also the phosphate binder, given with meals (KDOQI pediatric Guideline 6).
    let binder = phosphate_high && likely(&t.oral.binder_for);

    match &weight {
        Err(why) => {
            plan.issues.push(SafetyIssue {
                key: "weight",
                act_code: Some(("DOSE", "Dosage problem")),
                severity: IssueSeverity::High,
                title: "No weight-based dose".into(),
                detail: format!("No weight-based dose is proposed. {why}"),
                implicated: facts.of(Analyte::BodyWeight).first().map(|w| vec![w.source.clone()]).unwrap_or_default(),
                mitigation:
                    "Record a current, measured weight; doses are proposed once it is plausible for the child's age."
                        .into(),
            });
        }
        Ok(w) => {
            if let Some(caution) = &w.caution {
                plan.issues.push(SafetyIssue {
                    key: "weight-confirm",
                    act_code: Some(("DOSE", "Dosage problem")),
                    severity: IssueSeverity::Moderate,
                    title: "Confirm the weight (and gestation) the doses use".into(),
                    detail: caution.clone(),
                    implicated: vec![w.source.clone()],
                    mitigation: "Re-weigh the baby and record the gestational age at birth; recalculate the doses if either changes.".into(),
                });
            }
            if mg_low && let Some(p) = magnesium(rules, &ctx, w) {
                plan.proposals.push(p);
            }
            if urgent {
                let access = facts.vascular_access;
                if let Some(p) = bolus(rules, &ctx, w) {
                    plan.proposals.push(p);
                }
                if let Some(p) = infusion(rules, facts, &ctx, w, &mut plan.issues) {
                    plan.proposals.push(p);
                }
                if access == VascularAccess::Central {
                    if let Some(p) = chloride(rules, &ctx, w) {
                        plan.proposals.push(p);
                    }
                } else {
                    plan.notes.push("Calcium chloride is not proposed: it is for a central line only (it irritates veins and causes necrosis if it extravasates), and no central line is recorded.".into());
                }
                plan.notes.push(if binder {
                    format!("{} {}", t.oral.transition, t.oral.binder_advice)
                } else {
                    t.oral.transition.clone()
                });
            } else if let Some(p) = oral(rules, &ctx, w, binder, &mut plan.issues) {
                plan.notes.push("Asymptomatic and not severe: oral calcium, no IV calcium.".into());
                plan.proposals.push(p);
            }
        }
    }
    if let Some(w) = workup {
        vitamin_d(rules, &ctx, w, phosphate_high, &mut plan);
    }
    plan.notes.push(t.vitamin_d.diet_advice.clone());
    specimen_caution(finding, &mut plan);
    safety_with_proposals(rules, facts, finding, &ctx, &mut plan);
    unidentified_medications(rules, facts, &mut plan);
    symptoms_unknown(rules, facts, finding, &mut plan);
    mark_name_matches(facts, &mut plan.issues);
    refuse_impossible_figures(&mut plan);
    plan.weight = weight.ok();
    Some(plan)
}

/// Defence in depth behind the rule loader: a proposal whose dose, rate, daily
/// maximum, times per day or number of days is not a positive, finite number
/// (or whose text shows a non-finite figure) is never emitted; a HIGH
/// DetectedIssue says which and why instead. The loader's ranges should make
/// this unreachable; rule data built in code, or a defect, must still not reach
/// a clinician as "-1000 mg".
fn refuse_impossible_figures(plan: &mut TreatmentPlan) {
    let bad = |v: f64| !(v.is_finite() && v > 0.0);
    let mut kept = Vec::with_capacity(plan.proposals.len());
    for p in std::mem::take(&mut plan.proposals) {
        let mut wrong = Vec::new();
        for (what, q) in [("dose", &p.dose), ("rate", &p.rate), ("daily maximum", &p.max_per_day)] {
            if let Some(q) = q
                && bad(q.value)
            {
                wrong.push(format!("{what} {} {}", q.value, q.unit));
            }
        }
        for (what, n) in [("times per day", p.per_day), ("days", p.days)] {
            if n == Some(0) {
                wrong.push(format!("{what} 0"));
            }
        }
        if p.text.split(|c: char| !c.is_ascii_alphabetic()).any(|w| w == "NaN" || w == "inf") {
            wrong.push("a figure in its arithmetic that is not a number".into());
        }
        if let Some(start) = negative_figure(&p.text) {
            wrong.push(format!(
                "a negative figure in its arithmetic ({})",
                &p.text[start..].split(' ').next().unwrap_or("")
            ));
        }
        if wrong.is_empty() {
            kept.push(p);
            continue;
        }
        plan.issues.push(SafetyIssue {
            key: "impossible-dose",
            act_code: Some(("DOSE", "Dosage problem")),
            severity: IssueSeverity::High,
            title: format!("{} not proposed: its figures are impossible", p.title),
            detail: format!(
                "The {} was computed with {}; a dose, rate, duration or volume must be a positive number, so it is not proposed. The rule data in use is wrong: report it to the rule owners.",
                p.title,
                wrong.join(", ")
            ),
            implicated: Vec::new(),
            mitigation: "Dose by local protocol; have the rule set checked (calcium-cds rules check) before further use.".into(),
        });
    }
    plan.proposals = kept;
}

/// Where the text shows a negative number ("= -1000 mg"): a minus sign after a
/// space, "(" or "=" and before a digit. Ranges ("10-50") and identifiers
/// ("e526-4d8b") have a letter or digit before the sign and are not negative figures.
fn negative_figure(text: &str) -> Option<usize> {
    let b = text.as_bytes();
    (1..b.len().saturating_sub(1))
        .find(|&i| b[i] == b'-' && matches!(b[i - 1], b' ' | b'(' | b'=') && b[i + 1].is_ascii_digit())
}

/// IV calcium resting on a result with a specimen problem (or given while a
/// calcium result was set aside for one) says so on the proposal itself.
fn specimen_caution(finding: &CalciumFinding, plan: &mut TreatmentPlan) {
    if finding.specimen_cautions.is_empty() {
        return;
    }
    let said = finding.specimen_cautions.join(" ");
    for p in plan.proposals.iter_mut().filter(|p| p.route == Route::Iv && p.key.starts_with("calcium")) {
        p.text.push_str(&format!(" Specimen caution: {said}"));
    }
}

/// A weight-based IV dose in salt mg, its volume of the product and how it was reached.
struct WeighedDose<'r> {
    d: &'r DoseSource,
    p: &'r Product,
    raw: f64,
    how: String,
    cap: Option<(f64, String)>,
    dose: f64,
    ml: f64,
}

/// The chosen source for the age, times the weight, capped, as a volume of the product.
fn weighed<'r>(
    rules: &'r RuleSet,
    ctx: &Context,
    w: &Weight,
    choices: &'r [Chosen],
    product_id: &str,
) -> Option<WeighedDose<'r>> {
    let c = chosen(ctx, choices)?;
    let d = dose_source(rules, &c.dose_source)?;
    let p = product(rules, product_id)?;
    let per_ml = p.salt_mg?;
    let per_kg = if d.unit == "mL/kg" { pick(d, c.pick) * per_ml } else { pick(d, c.pick) };
    let (raw, how) = dose_for(d, per_kg, w.kg);
    let cap = cap_of(c, d);
    let dose = raw.min(cap.as_ref().map_or(f64::INFINITY, |c| c.0));
    Some(WeighedDose { d, p, raw, how, cap, dose, ml: dose / per_ml })
}

fn bolus(rules: &RuleSet, ctx: &Context, w: &Weight) -> Option<MedProposal> {
    let b = &rules.treatment.bolus;
    let adm = &rules.calcium_gluconate_administration;
    let WeighedDose { d, p, raw, how, cap, dose, ml } = weighed(rules, ctx, w, &b.chosen, &b.product)?;
    let label_max = adm.bolus_dilution_mg_per_ml[1];
    let peripheral_max = b.peripheral_max_mg_per_ml.map_or(label_max, |site| site.min(label_max));
    let speed = speed_for(ctx, &b.speed)?;
    let timing = iv_timing(rules, ctx, w, p, dose, &speed, adm.max_bolus_rate_pediatric_mg_per_min)?;
    let final_ml = dose / peripheral_max;
    let diluent_ml = (final_ml - ml).max(0.0);
    let diluent =
        rules.treatment.diluents.iter().find(|x| x.id == b.diluent).map_or(b.diluent.as_str(), |x| x.label.as_str());
    let phrase = dose_phrase(raw, dose, &cap, "mg");
    let text = format!(
        "{how} = {phrase} = {} mL of {} ({}); dilute with {} mL {diluent} to {} mL ({} mg/mL, the label's bolus dilution is {}-{} mg/mL); give over at least {} min. {} {} Diluent: {}.",
        num_trim(ml),
        p.label,
        elemental_text(p, ml),
        num_trim(diluent_ml),
        num_trim(final_ml),
        num_trim(peripheral_max),
        num_trim(adm.bolus_dilution_mg_per_ml[0]),
        num_trim(adm.bolus_dilution_mg_per_ml[1]),
        num_trim(timing.minutes),
        timing.text,
        b.monitoring,
        b.diluent_reason
    );
    Some(MedProposal {
        key: "calcium-bolus",
        title: "IV calcium gluconate bolus".into(),
        product: p.clone(),
        text,
        dose: Some(Qty { value: round_to(dose, 0.1), unit: "mg" }),
        rate: Some(Qty { value: round_to(dose / timing.minutes, 0.1), unit: "mg/min" }),
        per_day: None,
        days: None,
        max_per_day: None,
        route: Route::Iv,
        sources: sources_shown(rules, d, &b.also_shown, ctx),
        alternative: false,
        specialist: false,
    })
}

/// IV calcium already given in the last 24 h, as mg of the reference salt (the
/// infusion's product): each administration's salt is found from its code in the
/// formulary and converted through its elemental calcium (mg salt x elemental/salt
/// of its product / elemental/salt of the reference), so chloride and gluconate
/// are not added as if alike. Oral products are not part of the IV maximum.
struct Given {
    /// Reference-salt mg.
    mg: f64,
    /// Administrations counted.
    counted: Vec<Source>,
    /// Administrations not counted, with why.
    uncounted: Vec<(Source, &'static str)>,
    /// Conversions made, for the text.
    conversions: Vec<String>,
    /// IV administrations that could not be counted (salt not known, or no dose in
    /// mg), so the count may be low.
    unknown_salt: Vec<(Source, &'static str)>,
}

fn given_last_24h(rules: &RuleSet, facts: &Facts, reference: &Product) -> Given {
    let mut g = Given {
        mg: 0.0,
        counted: Vec::new(),
        uncounted: Vec::new(),
        conversions: Vec::new(),
        unknown_salt: Vec::new(),
    };
    let fraction = |p: &Product| p.elemental_mg.zip(p.salt_mg).filter(|(_, s)| *s > 0.0).map(|(e, s)| e / s);
    let Some(reference_fraction) = fraction(reference) else { return g };
    for e in events_in(facts, "calcium_preparations", EventKind::Medication) {
        if e.source.resource_type != "MedicationAdministration" {
            continue;
        }
        let recent = e.when.is_some_and(|w| facts.now - w.latest <= 86_400);
        if !recent {
            continue;
        }
        let Some(v) = e.dose_mg else {
            g.uncounted.push((e.source.clone(), "no dose in mg"));
            // An oral product's dose is not part of the IV maximum either way.
            let oral = rules.products.iter().any(|p| {
                p.route != reference.route && p.codes.iter().any(|c| c.system == e.code.system && c.code == e.code.code)
            });
            if !oral {
                g.unknown_salt.push((e.source.clone(), "the amount given is not recorded in mg"));
            }
            continue;
        };
        // The product whose code the record carries; else, for a code or name that
        // gives only the ingredient, that ingredient's product for the reference
        // route (an administration counted here is taken as intravenous).
        let by_code =
            rules.products.iter().find(|p| p.codes.iter().any(|c| c.system == e.code.system && c.code == e.code.code));
        let product = by_code.or_else(|| {
            let ing = e.ingredient.as_deref()?;
            let p = rules.products.iter().find(|p| p.ingredient == ing && p.route == reference.route)?;
            g.conversions.push(format!(
                "{}: salt {} from its {}, counted as intravenous",
                e.source.label(),
                p.salt.as_deref().unwrap_or(&p.label),
                if e.by_name.is_some() { "name" } else { "code" }
            ));
            Some(p)
        });
        match product {
            Some(p) if p.route != reference.route => {
                g.uncounted.push((e.source.clone(), "not intravenous, not part of the IV maximum"));
            }
            Some(p) => match fraction(p) {
                Some(_) if p.id == reference.id => {
                    g.mg += v;
                    g.counted.push(e.source.clone());
                }
                Some(f) => {
                    let equivalent = v * f / reference_fraction;
                    g.conversions.push(format!(
                        "{} mg {} = {} mg elemental calcium = {} mg {} equivalent",
                        num_trim(v),
                        p.salt.as_deref().unwrap_or(&p.label),
                        num_trim(v * f),
                        num_trim(equivalent),
                        reference.salt.as_deref().unwrap_or(&reference.label)
                    ));
                    g.mg += equivalent;
                    g.counted.push(e.source.clone());
                }
                None => g.uncounted.push((e.source.clone(), "its product has no elemental calcium content")),
            },
            None => {
                g.uncounted.push((e.source.clone(), "its salt is not known (not in the formulary)"));
                g.unknown_salt.push((
                    e.source.clone(),
                    "the salt (gluconate or chloride) is not known from the record, and chloride carries about three times the calcium of gluconate per mg",
                ));
            }
        }
    }
    g
}

fn infusion(
    rules: &RuleSet,
    facts: &Facts,
    ctx: &Context,
    w: &Weight,
    issues: &mut Vec<SafetyIssue>,
) -> Option<MedProposal> {
    let inf = &rules.treatment.infusion;
    let c = chosen(ctx, &inf.chosen)?;
    let d = dose_source(rules, &c.dose_source)?;
    let p = product(rules, &inf.product)?;
    let per_ml = p.salt_mg?;
    let per_kg_h = pick(d, c.pick);
    let conc = rules.calcium_gluconate_administration.continuous_dilution_mg_per_ml[1];
    let mg_h = (w.kg * per_kg_h).min(cap_of(c, d).map_or(f64::INFINITY, |c| c.0));
    let ml_h = round_to(mg_h / conc, inf.pump_resolution_ml_per_h);
    let mg_h_given = ml_h * conc;
    // Daily maximum: the chosen source's upper rate over 24 h (derived).
    let daily_max = d.high * 24.0 * w.kg;
    let already = given_last_24h(rules, facts, p);
    let given = already.mg;
    let dilution_text = format!(
        "the label's continuous dilution is {}-{} mg/mL",
        num_trim(rules.calcium_gluconate_administration.continuous_dilution_mg_per_ml[0]),
        num_trim(conc)
    );
    let mut text = format!(
        "{} kg x {} mg/kg/h = {} mg/h; at {} mg/mL ({}; {} mL of {} made up to each {} mL with diluent, {}) = {} mL/h, rounded to the pump's {} mL/h ({}) = {} mg/h. Over 24 h: {} mg. {}",
        num_trim(w.kg),
        num_trim(per_kg_h),
        num_trim(mg_h),
        num_trim(conc),
        dilution_text,
        num_trim(inf.makeup_ml * conc / per_ml),
        p.label,
        num_trim(inf.makeup_ml),
        inf.makeup_source,
        num_trim(mg_h / conc),
        num_trim(inf.pump_resolution_ml_per_h),
        inf.pump_source,
        num_trim(mg_h_given),
        num_trim(mg_h_given * 24.0),
        inf.monitoring
    );
    text.push_str(&infusion_speed_text(rules, ctx, w, p, mg_h_given));
    fluid_load(rules, ctx, w, ml_h, &mut text, issues);
    if !already.counted.is_empty() || !already.uncounted.is_empty() {
        text.push_str(&format!(
            " Already given in the last 24 h: {} mg recorded in {} administration(s){}{}.",
            num_trim(given),
            already.counted.len(),
            if already.conversions.is_empty() {
                String::new()
            } else {
                format!(" ({})", already.conversions.join("; "))
            },
            if already.uncounted.is_empty() {
                String::new()
            } else {
                let why: Vec<String> = already.uncounted.iter().map(|(s, r)| format!("{}: {r}", s.label())).collect();
                format!("; not counted: {}", why.join("; "))
            }
        ));
    }
    if given + mg_h_given * 24.0 > daily_max {
        issues.push(SafetyIssue {
            key: "daily-maximum",
            act_code: Some(("DOSEH", "High Dose Alert")),
            severity: IssueSeverity::High,
            title: "Daily maximum of IV calcium gluconate".into(),
            detail: format!(
                "Already given in 24 h ({} mg) plus the proposed infusion over 24 h ({} mg) exceeds the daily maximum {} mg/kg/h x 24 h x {} kg = {} mg (the upper rate of {}, over 24 h).",
                num_trim(given),
                num_trim(mg_h_given * 24.0),
                num_trim(d.high),
                num_trim(w.kg),
                num_trim(daily_max),
                d.source
            ),
            implicated: already.counted,
            mitigation: "Lower the infusion rate or shorten it, check ionized calcium, and review with the treating clinician.".into(),
        });
    }
    unknown_salt_issue(&already.unknown_salt, issues);
    Some(MedProposal {
        key: "calcium-infusion",
        title: "Continuous IV calcium gluconate (after the bolus)".into(),
        product: p.clone(),
        text,
        dose: None,
        rate: Some(Qty { value: ml_h, unit: "mL/h" }),
        per_day: None,
        days: None,
        max_per_day: Some(Qty { value: round_to(daily_max, 1.0), unit: "mg" }),
        route: Route::Iv,
        sources: sources_shown(rules, d, &inf.also_shown, ctx),
        alternative: false,
        specialist: false,
    })
}

/// The infusion's fluid volume in mL/kg/day, and for a neonate its share of
/// the day's fluid allowance, with a WARNING when the share is large.
fn fluid_load(rules: &RuleSet, ctx: &Context, w: &Weight, ml_h: f64, text: &mut String, issues: &mut Vec<SafetyIssue>) {
    let per_kg_day = ml_h * 24.0 / w.kg;
    text.push_str(&format!(
        " Fluid: {} mL/h x 24 h / {} kg = {} mL/kg/day.",
        num_trim(ml_h),
        num_trim(w.kg),
        num(per_kg_day, 1)
    ));
    let nf = &rules.treatment.neonatal_fluid;
    if !ctx.neonate() || nf.allowance_ml_per_kg_day.is_empty() {
        return;
    }
    // Day of life 1 is the first 24 h; the youngest possible age gives the smallest allowance.
    let index = usize::try_from(ctx.age_min.days.max(0)).unwrap_or(0).min(nf.allowance_ml_per_kg_day.len() - 1);
    let allowance = nf.allowance_ml_per_kg_day[index];
    let share = per_kg_day / allowance;
    let phrase = format!(
        "{} mL/kg/day is {}% of the day-{} fluid allowance of {} mL/kg/day ({})",
        num(per_kg_day, 1),
        num(share * 100.0, 0),
        ctx.age_min.days + 1,
        num_trim(allowance),
        nf.allowance_source
    );
    text.push_str(&format!(" For this neonate {phrase}."));
    if share >= nf.warn_share {
        issues.push(SafetyIssue {
            key: "fluid-load",
            act_code: None,
            severity: IssueSeverity::Moderate,
            title: "Fluid load of the calcium infusion".into(),
            detail: format!(
                "The proposed calcium infusion alone is {} mL/h: {phrase}; the warning is set at {}% ({}).",
                num_trim(ml_h),
                num(nf.warn_share * 100.0, 0),
                nf.warn_share_source
            ),
            implicated: vec![w.source.clone()],
            mitigation: "Count the calcium infusion within the day's total fluid prescription, or give the daily calcium as an additive to the maintenance fluid as neonatal units commonly do, per local protocol.".into(),
        });
    }
}

/// IV calcium given in the last 24 h that could not be counted (salt unknown, or
/// no dose in mg): the daily-maximum count may be too low, so the check says so
/// where the clinician looks.
fn unknown_salt_issue(unknown: &[(Source, &'static str)], issues: &mut Vec<SafetyIssue>) {
    if unknown.is_empty() {
        return;
    }
    let why: Vec<String> = unknown.iter().map(|(s, r)| format!("{}: {r}", s.label())).collect();
    issues.push(SafetyIssue {
        key: "daily-maximum-incomplete",
        act_code: Some(("DOSEH", "High Dose Alert")),
        severity: IssueSeverity::Moderate,
        title: "Daily maximum of IV calcium may be incomplete".into(),
        detail: format!(
            "{} calcium administration(s) in the last 24 h could not be counted toward the daily maximum, so what was already given may be more than shown: {}.",
            unknown.len(),
            why.join("; ")
        ),
        implicated: unknown.iter().map(|(s, _)| s.clone()).collect(),
        mitigation: "Check what was given (salt, amount) on the administration record and add it to the count before starting the infusion.".into(),
    });
}

fn chloride(rules: &RuleSet, ctx: &Context, w: &Weight) -> Option<MedProposal> {
    let ch = &rules.treatment.chloride;
    let (rate_source, rate) = fact(rules, "calcium_chloride_rate_and_vein");
    // The loader refuses rules without this rate limit; without one, no chloride is proposed.
    let max_rate_ml_per_min = rate.filter(|r| *r > 0.0)?;
    let WeighedDose { d, p, raw, how, cap, dose, ml } = weighed(rules, ctx, w, &ch.chosen, &ch.product)?;
    let speed = speed_for(ctx, &ch.speed)?;
    // The label's mL/min as salt mg/min of this product.
    let label_max = max_rate_ml_per_min * p.salt_mg?;
    let timing = iv_timing(rules, ctx, w, p, dose, &speed, label_max)?;
    let phrase = dose_phrase(raw, dose, &cap, "mg");
    let ml_per_min = ml / timing.minutes;
    let text = format!(
        "Central line only. {how} = {phrase} calcium chloride = {} mL of {} ({}); give over at least {} min ({} mL/min = {} mL/h; the label's {} mL/min ({}) is a maximum rate, not a duration). {} {} Calcium chloride irritates veins and causes tissue necrosis and sloughing if it extravasates.",
        num_trim(ml),
        p.label,
        elemental_text(p, ml),
        num_trim(timing.minutes),
        num(ml_per_min, 3),
        num(ml_per_min * 60.0, 1),
        num_trim(max_rate_ml_per_min),
        rate_source,
        timing.text,
        ch.central_line_preparation
    );
    Some(MedProposal {
        key: "calcium-chloride",
        title: "Alternative: IV calcium chloride via the central line (instead of the gluconate bolus)".into(),
        product: p.clone(),
        text,
        dose: Some(Qty { value: round_to(dose, 0.1), unit: "mg" }),
        rate: Some(Qty { value: round_to(dose / timing.minutes, 0.1), unit: "mg/min" }),
        per_day: None,
        days: None,
        max_per_day: None,
        route: Route::Iv,
        sources: sources_shown(rules, d, &ch.also_shown, ctx),
        alternative: true,
        specialist: false,
    })
}

/// A measurable amount of one oral product for a dose.
struct Measured<'r> {
    p: &'r Product,
    /// Units (mL or tablets) per dose.
    amount: f64,
    /// Elemental mg per dose.
    mg: f64,
    /// "mL", "tablet", "tablets".
    unit_text: String,
}

impl Measured<'_> {
    /// Percent above (+) or below (-) the computed dose.
    fn off_pct(&self, per_dose: f64) -> f64 {
        (self.mg / per_dose - 1.0) * 100.0
    }

    fn describe(&self, per_dose: f64) -> String {
        let off = self.off_pct(per_dose);
        format!(
            "{} {} of {} = {} mg, {}% {} the dose",
            num_trim(self.amount),
            self.unit_text,
            self.p.label,
            num_trim(self.mg),
            num_trim(off.abs().round()),
            if off >= 0.0 { "above" } else { "below" }
        )
    }
}

/// The measurable amount of `p` nearest `per_dose` (elemental mg): to the product's
/// step (mL step for liquids, the parts a tablet splits into), stepped down while it
/// is above the tolerance or `doses` of it pass the daily cap. `Err` with the smallest
/// measurable amount (one step) when not even that fits; `None` without a strength.
fn measure<'r>(
    o: &OralPolicy,
    p: &'r Product,
    per_dose: f64,
    doses: f64,
    cap: f64,
) -> Option<Result<Measured<'r>, Measured<'r>>> {
    let per_unit = p.elemental_mg.filter(|v| *v > 0.0)?;
    let liquid = p.strength_per == "mL";
    let step = if liquid { o.liquid_round_ml } else { 1.0 / f64::from(p.divisible_into.unwrap_or(1).max(1)) };
    if step <= 0.0 {
        return None;
    }
    let of = |amount: f64| {
        let unit_text = if liquid {
            "mL".to_owned()
        } else if (amount - 1.0).abs() > 1e-9 {
            format!("{}s", p.strength_per)
        } else {
            p.strength_per.clone()
        };
        Measured { p, amount, mg: amount * per_unit, unit_text }
    };
    let highest = per_dose * (1.0 + o.rounding_tolerance_pct / 100.0);
    let mut amount = round_to(per_dose / per_unit, step);
    while amount > 0.0 && (amount * per_unit > highest + 1e-9 || amount * per_unit * doses > cap + 1e-9) {
        amount = round_to(amount - step, step);
    }
    Some(if amount < step - 1e-9 { Err(of(step)) } else { Ok(of(amount)) })
}

fn oral(
    rules: &RuleSet,
    ctx: &Context,
    w: &Weight,
    binder: bool,
    issues: &mut Vec<SafetyIssue>,
) -> Option<MedProposal> {
    let o = &rules.treatment.oral;
    // As a phosphate binder in kidney disease the timing is with meals, and the total is held
    // to the KDOQI ceiling too (Guideline 6.5 / 7.4).
    let advice = if binder { format!("{} {}", o.binder_advice, o.advice) } else { o.advice.clone() };
    let title = if binder {
        "Oral elemental calcium, given with meals (also the phosphate binder)"
    } else {
        "Oral elemental calcium"
    };
    let c = chosen(ctx, &o.chosen)?;
    let d = dose_source(rules, &c.dose_source)?;
    let tablets = ctx.within(&crate::rules::model::AgeSpan {
        from: o.tablets_from,
        until: crate::rules::model::AgeBound { value: 200, unit: crate::rules::model::AgeUnit::Years },
    }) == Some(true);
    let per_kg_day = pick(d, c.pick);
    let raw_day = w.kg * per_kg_day;
    let limit = o
        .daily_limits
        .iter()
        .find(|l| ctx.within(&l.applies) == Some(true))
        .and_then(|l| rules.safety_sources.get(&l.safety_source))
        .and_then(|s| Some((s.threshold?, s.source.as_str())));
    let kidney_limit = rules
        .safety_sources
        .get("kdoqi_ckd_total_calcium_intake")
        .filter(|_| binder)
        .and_then(|s| Some((s.threshold?, s.source.as_str())));
    let limit = match (limit, kidney_limit) {
        (Some(a), Some(b)) => Some(if b.0 < a.0 { b } else { a }),
        (a, b) => a.or(b),
    };
    let cap = limit.map_or(f64::INFINITY, |l| l.0);
    let day = raw_day.min(cap);
    let doses = f64::from(o.doses_per_day);
    let per_dose = day / doses;
    // The products in the order tried: from the tablet age the site's tablet, then its
    // other tablets, then the liquid; under it the liquid only. The first whose
    // measurable amount is within the tolerance of the dose is proposed.
    let ids: Vec<&String> = if tablets {
        std::iter::once(&o.tablet_product)
            .chain(&o.other_tablet_products)
            .chain(std::iter::once(&o.liquid_product))
            .collect()
    } else {
        vec![&o.liquid_product]
    };
    let products: Vec<&Product> = ids.into_iter().filter_map(|id| product(rules, id)).collect();
    let tolerance = o.rounding_tolerance_pct;
    let mut not_used: Vec<String> = Vec::new();
    let mut fit = None;
    for p in &products {
        match measure(o, p, per_dose, doses, cap) {
            Some(Ok(m)) if m.off_pct(per_dose).abs() <= tolerance + 1e-9 => {
                fit = Some(m);
                break;
            }
            Some(Ok(m) | Err(m)) => not_used.push(m.describe(per_dose)),
            None => not_used.push(format!("{}: no elemental strength", p.label)),
        }
    }
    let capped = match limit {
        Some((max, source)) if day < raw_day => format!(
            " = {} mg/day, capped at the daily upper limit {} mg/day ({source}), so {} mg/day",
            num_trim(raw_day),
            num_trim(max),
            num_trim(day)
        ),
        _ => format!(" = {} mg/day", num_trim(day)),
    };
    let head = format!(
        "{} kg x {} mg/kg/day elemental calcium{capped}, in {} doses ({}) = {} mg per dose",
        num_trim(w.kg),
        num_trim(per_kg_day),
        o.doses_per_day,
        o.doses_source,
        num_trim(per_dose),
    );
    let rule =
        format!("a measured dose stays within {}% of the computed dose ({})", num_trim(tolerance), o.rounding_source);
    let not_used_text =
        if not_used.is_empty() { String::new() } else { format!(" Not used: {}.", not_used.join("; ")) };
    let Some(m) = fit else {
        // Nothing measures the dose closely enough: say so, propose no amount, flag it.
        let p = products.first()?;
        issues.push(SafetyIssue {
            key: "oral-dose-rounding",
            act_code: Some(("DOSE", "Dosage problem")),
            severity: IssueSeverity::Moderate,
            title: "No measurable oral calcium dose".into(),
            detail: format!(
                "{} mg elemental calcium per dose cannot be measured within {}% with the formulary's products ({}).{not_used_text}",
                num_trim(per_dose),
                num_trim(tolerance),
                o.rounding_source
            ),
            implicated: Vec::new(),
            mitigation: "Prescribe a measurable amount by hand (another product or strength, or another number of doses a day) and recheck calcium.".into(),
        });
        return Some(MedProposal {
            key: "oral-calcium",
            title: title.into(),
            product: (*p).clone(),
            text: format!(
                "{head}. No product in the formulary measures this dose within {}% ({}), so no amount is proposed: prescribe a measurable dose by hand.{not_used_text} {}",
                num_trim(tolerance),
                o.rounding_source,
                advice
            ),
            dose: None,
            rate: None,
            per_day: Some(o.doses_per_day),
            days: None,
            max_per_day: limit.map(|l| Qty { value: l.0, unit: "mg" }),
            route: Route::Oral,
            sources: sources_shown(rules, d, &o.also_shown, ctx),
            alternative: false,
            specialist: false,
        });
    };
    let off = m.off_pct(per_dose);
    let text = format!(
        "{head} = {} {} of {} ({} mg elemental calcium per {}), giving {} mg elemental per dose ({} mg/day; {}% {} the computed dose, and {rule}).{not_used_text} {}",
        num_trim(m.amount),
        m.unit_text,
        m.p.label,
        num_trim(m.p.elemental_mg.unwrap_or(f64::NAN)),
        m.p.strength_per,
        num_trim(m.mg),
        num_trim(m.mg * doses),
        num_trim(off.abs().round()),
        if off >= 0.0 { "above" } else { "below" },
        advice
    );
    Some(MedProposal {
        key: "oral-calcium",
        title: title.into(),
        product: m.p.clone(),
        text,
        dose: Some(Qty {
            value: round_to(m.amount, 0.01),
            unit: if m.p.strength_per == "mL" { "mL" } else { "{tbl}" },
        }),
        rate: None,
        per_day: Some(o.doses_per_day),
        days: None,
        max_per_day: limit.map(|l| Qty { value: l.0, unit: "mg" }),
        route: Route::Oral,
        sources: sources_shown(rules, d, &o.also_shown, ctx),
        alternative: false,
        specialist: false,
    })
}

fn magnesium(rules: &RuleSet, ctx: &Context, w: &Weight) -> Option<MedProposal> {
    let m = &rules.treatment.magnesium;
    let adm = &rules.magnesium_sulfate_administration;
    let WeighedDose { d, p, raw, how, cap, dose, ml } = weighed(rules, ctx, w, &m.chosen, &m.product)?;
    let final_ml = dose / adm.max_iv_concentration_mg_per_ml;
    let speed = speed_for(ctx, &m.speed)?;
    let timing = iv_timing(rules, ctx, w, p, dose, &speed, adm.max_iv_rate_mg_per_min)?;
    let phrase = dose_phrase(raw, dose, &cap, "mg");
    let text = format!(
        "Give magnesium first: calcium will not hold while magnesium is low. {how} = {phrase} magnesium sulfate = {} mL of {} ({}); dilute to {} mL or more (at most {} mg/mL; {}) and give over {} min. {} {}",
        num_trim(ml),
        p.label,
        elemental_text(p, ml),
        num_trim(final_ml),
        num_trim(adm.max_iv_concentration_mg_per_ml),
        adm.source,
        num_trim(timing.minutes),
        timing.text,
        m.repeat
    );
    Some(MedProposal {
        key: "magnesium",
        title: "IV magnesium sulfate (first)".into(),
        product: p.clone(),
        text,
        dose: Some(Qty { value: round_to(dose, 0.1), unit: "mg" }),
        rate: Some(Qty { value: round_to(dose / timing.minutes, 0.1), unit: "mg/min" }),
        per_day: None,
        days: None,
        max_per_day: None,
        route: Route::Iv,
        sources: sources_shown(rules, d, &m.also_shown, ctx),
        alternative: false,
        specialist: false,
    })
}

/// How a vitamin D liquid measures a daily dose.
enum LiquidMeasure<'r> {
    /// An amount in the product's steps (mL in oral-syringe steps, or whole drops).
    Amount { p: &'r Product, amount: f64, given: f64, unit: &'static str, not_unit: &'static str },
    /// A mark of the syringe supplied with the product (its label), in IU.
    Mark { p: &'r Product, mark: f64 },
}

impl<'r> LiquidMeasure<'r> {
    fn product(&self) -> &'r Product {
        match self {
            Self::Amount { p, .. } | Self::Mark { p, .. } => p,
        }
    }

    /// IU given.
    fn given(&self) -> f64 {
        match self {
            Self::Amount { given, .. } => *given,
            Self::Mark { mark, .. } => *mark,
        }
    }
}

/// The first of `products` that measures `per_day` IU: in the oral-syringe step
/// (`liquid_round_ml`; whole drops for a per-drop product), stepped down while above the
/// rounding tolerance, and within it; or at a syringe mark within the tolerance. `Err` with
/// why each product was not used.
fn measure_vitamin_d<'r>(
    o: &OralPolicy,
    products: &[&'r Product],
    per_day: f64,
) -> Result<LiquidMeasure<'r>, Vec<String>> {
    let tolerance = o.rounding_tolerance_pct;
    let within = |iu: f64| ((iu / per_day - 1.0) * 100.0).abs() <= tolerance + 1e-9;
    let mut not_used = Vec::new();
    if !(per_day.is_finite() && per_day > 0.0) {
        not_used.push(format!("the dose, {per_day} IU, is not a positive number"));
        return Err(not_used);
    }
    for p in products {
        let Some(iu) = p.iu.filter(|v| v.is_finite() && *v > 0.0) else {
            not_used.push(format!("{}: no IU strength", p.label));
            continue;
        };
        let (step, unit, not_unit) = match p.strength_per.as_str() {
            "mL" => (o.liquid_round_ml, "mL", "drops"),
            "drop" => (1.0, "drops", "mL"),
            _ => {
                not_used.push(format!("{}: not a liquid", p.label));
                continue;
            }
        };
        if step > 0.0 {
            let highest = per_day * (1.0 + tolerance / 100.0);
            let mut amount = round_to(per_day / iu, step);
            while amount > 0.0 && amount * iu > highest + 1e-9 {
                amount = round_to(amount - step, step);
            }
            if amount >= step - 1e-9 && within(amount * iu) {
                let unit = if unit == "drops" && (amount - 1.0).abs() < 1e-9 { "drop" } else { unit };
                return Ok(LiquidMeasure::Amount { p, amount, given: amount * iu, unit, not_unit });
            }
        }
        let mark = p
            .syringe_marks_iu
            .iter()
            .copied()
            .filter(|m| within(*m))
            .min_by(|a, b| (a - per_day).abs().total_cmp(&(b - per_day).abs()));
        if let Some(mark) = mark {
            return Ok(LiquidMeasure::Mark { p, mark });
        }
        let exact = per_day / iu;
        if step <= 0.0 {
            not_used.push(format!("{}: no measuring step", p.label));
            continue;
        }
        let lower = (exact / step).floor() * step;
        let upper = lower + step;
        let near = |a: f64| {
            let off = (a * iu / per_day - 1.0) * 100.0;
            format!(
                "{} {unit} = {} IU ({}% {})",
                num_trim(a),
                num_trim(a * iu),
                num_trim(off.abs().round()),
                if off >= 0.0 { "above" } else { "below" }
            )
        };
        let steps = if lower < step - 1e-9 { near(upper) } else { format!("{} or {}", near(lower), near(upper)) };
        not_used.push(format!(
            "{}: {} {unit} exactly; in {} {unit} steps {steps}",
            p.label,
            num_trim_sig(exact),
            num_trim(step)
        ));
    }
    Err(not_used)
}

/// Vitamin D with the calcium (2016 global consensus on nutritional rickets pairs
/// cholecalciferol with calcium): a treatment dose when a nutritional cause is likely or
/// 25-OH vitamin D is low; a maintenance dose while 25-OH vitamin D is not measured, calcium
/// is proposed and no cause treated with calcitriol is likely; none when 25-OH vitamin D is
/// not low. Calcitriol for the causes that need it, flagged for specialist dosing, and
/// deferred for kidney disease while the phosphate is high (KDOQI pediatric 9A.1.a).
fn vitamin_d(rules: &RuleSet, ctx: &Context, w: &Workup, phosphate_high: bool, plan: &mut TreatmentPlan) {
    let v = &rules.treatment.vitamin_d;
    let likely = |id: &str| w.causes.iter().any(|c| c.id == id && c.label == CauseLabel::Likely);
    let name_of = |id: &str| w.causes.iter().find(|c| c.id == id).map(|c| c.name.clone());
    let d25 = w.readings.labs.get(&Analyte::VitaminD25Oh);
    let d25_low = d25.is_some_and(|r| r.outcome == LabOutcome::Low);
    let calcitriol_ids: Vec<&String> = v.calcitriol_for.iter().filter(|id| likely(id)).collect();
    let (deferred, specialist_ids): (Vec<&String>, Vec<&String>) =
        calcitriol_ids.into_iter().partition(|id| phosphate_high && v.calcitriol_deferred_for.contains(id));
    let calcium_proposed = plan.proposals.iter().any(|p| p.key.starts_with("calcium") || p.key == "oral-calcium");
    let treat_causes: Vec<String> = v.treat_for.iter().filter(|id| likely(id)).filter_map(|id| name_of(id)).collect();
    let treat = !treat_causes.is_empty() || d25_low;
    let maintain = !treat && d25.is_none() && calcium_proposed && specialist_ids.is_empty() && deferred.is_empty();
    let choices = if treat { &v.chosen } else { &v.maintenance };
    if (treat || maintain)
        && let Some(c) = chosen(ctx, choices)
        && let Some(d) = dose_source(rules, &c.dose_source)
    {
        let per_day = pick(d, c.pick).min(c.max_single.unwrap_or(f64::INFINITY));
        let ids = std::iter::once(&v.cholecalciferol_product).chain(&v.other_liquid_products);
        let products: Vec<&Product> = ids.filter_map(|id| product(rules, id)).collect();
        let Some(first) = products.first().copied() else {
            return;
        };
        let o = &rules.treatment.oral;
        let why = if treat {
            let mut reasons = treat_causes.clone();
            if d25_low {
                reasons.push(d25.map_or_else(String::new, |r| r.text.clone()));
            }
            format!("Treatment dose: {}", reasons.join("; "))
        } else {
            "25-OH vitamin D is not measured: a maintenance dose with the calcium while it is measured; if it is low, the treatment dose for the age replaces it".to_owned()
        };
        let course = if treat {
            format!(" For {} days ({}), then maintenance.", v.treatment_days, v.treatment_source)
        } else {
            String::new()
        };
        let kind = if treat { "treatment" } else { "maintenance" };
        let measured = measure_vitamin_d(o, &products, per_day);
        let (p, given, how, warning) = match &measured {
            Ok(m) => {
                let p = m.product();
                let iu = p.iu.unwrap_or(f64::NAN);
                let exact = per_day / iu;
                let caution = p.caution.as_deref().map_or(String::new(), |c| format!(" {c}"));
                let (how, warning) = match m {
                    LiquidMeasure::Amount { amount, given, unit, not_unit, .. } => {
                        let rounded = if (amount - exact).abs() < 1e-9 {
                            String::new()
                        } else {
                            let off = (given / per_day - 1.0) * 100.0;
                            format!(
                                ", measured in {} {unit} steps: {} {unit} = {} IU, {}% {} the dose",
                                num_trim(o.liquid_round_ml),
                                num_trim(*amount),
                                num_trim(*given),
                                num_trim(off.abs().round()),
                                if off >= 0.0 { "above" } else { "below" }
                            )
                        };
                        (
                            format!(
                                "{} IU once daily = {} IU / {} IU per {} = {} {unit}{rounded}: give {} {unit} of {} ({} {unit}, not {} {not_unit}), with an oral syringe ({}).{caution}",
                                num_trim(per_day),
                                num_trim(per_day),
                                num_trim(iu),
                                p.strength_per,
                                num_trim_sig(exact),
                                num_trim(*amount),
                                p.label,
                                num_trim(*amount),
                                num_trim(*amount),
                                v.measure_source
                            ),
                            format!(
                                "{} IU a day is {} {unit} of {} ({} IU per {}).",
                                num_trim(*given),
                                num_trim(*amount),
                                p.label,
                                num_trim(iu),
                                p.strength_per
                            ),
                        )
                    }
                    LiquidMeasure::Mark { mark, .. } => {
                        let ml = mark / iu;
                        (
                            format!(
                                "{} IU once daily = the {} IU mark of the syringe supplied with {} ({} IU / {} IU per mL = {} mL, not {} drops); measure it only with that syringe, because an oral syringe in {} mL steps cannot measure it within {}% ({}).{caution}",
                                num_trim(per_day),
                                num_trim(*mark),
                                p.label,
                                num_trim(*mark),
                                num_trim(iu),
                                num_trim_sig(ml),
                                num_trim_sig(ml),
                                num_trim(o.liquid_round_ml),
                                num_trim(o.rounding_tolerance_pct),
                                v.measure_source
                            ),
                            format!(
                                "{} IU a day is the {} IU mark of the syringe supplied with {} ({} mL at {} IU per mL); another syringe, a dropper or a count of drops gives another dose.",
                                num_trim(*mark),
                                num_trim(*mark),
                                p.label,
                                num_trim_sig(ml),
                                num_trim(iu)
                            ),
                        )
                    }
                };
                (p, m.given(), how, warning)
            }
            Err(not_used) => {
                let detail = format!(
                    "{} IU a day cannot be measured within {}% with the formulary's vitamin D liquids ({}). Not used: {}.",
                    num_trim(per_day),
                    num_trim(o.rounding_tolerance_pct),
                    v.measure_source,
                    not_used.join("; ")
                );
                plan.issues.push(SafetyIssue {
                    key: "vitamin-d-dose-unmeasurable",
                    act_code: Some(("DOSE", "Dosage problem")),
                    severity: IssueSeverity::Moderate,
                    title: "No measurable vitamin D liquid dose".into(),
                    detail: detail.clone(),
                    implicated: Vec::new(),
                    mitigation: v.unmeasurable.clone(),
                });
                (
                    first,
                    per_day,
                    format!("{} IU once daily. No volume is proposed: {detail} {}", num_trim(per_day), v.unmeasurable),
                    format!("{} IU a day: no volume is proposed.", num_trim(per_day)),
                )
            }
        };
        let name = if measured.is_err() {
            "Vitamin D"
        } else {
            match p.ingredient.as_str() {
                "cholecalciferol" => "Cholecalciferol (vitamin D3)",
                "ergocalciferol" => "Ergocalciferol (vitamin D2)",
                _ => "Vitamin D",
            }
        };
        plan.proposals.push(MedProposal {
            key: "cholecalciferol",
            title: format!("{name}, {kind} dose, with the calcium"),
            product: p.clone(),
            text: format!("{why}. {how}{course} Paired with the calcium: {}", v.pairing_source),
            dose: Some(Qty { value: given, unit: "[iU]" }),
            rate: None,
            per_day: Some(1),
            days: if treat { Some(v.treatment_days) } else { None },
            max_per_day: None,
            route: Route::Oral,
            sources: vec![format!("Chosen: {}", range_text(d))],
            alternative: false,
            specialist: false,
        });
        if products.iter().any(|p| matches!(p.strength_per.as_str(), "mL" | "drop")) {
            let (confusion_source, _) = fact(rules, "vitamin_d_drop_strength_confusion");
            let confusion =
                rules.safety_sources.get("vitamin_d_drop_strength_confusion").map_or("", |f| f.text.as_str());
            let unverified = if p.confidence == "unverified" {
                format!(" The strength of the formulary's product is not verified from its own label ({}).", p.source)
            } else {
                String::new()
            };
            plan.issues.push(SafetyIssue {
                key: "vitamin-d-liquid",
                act_code: Some(("DOSE", "Dosage problem")),
                severity: IssueSeverity::Moderate,
                title: "Liquid vitamin D: drops and mL are not the same".into(),
                detail: format!("{warning} {confusion} ({confusion_source}).{unverified}"),
                implicated: Vec::new(),
                mitigation: "Prescribe in IU and in the measure of the named product (mL, or the mark of its own syringe), never in drops alone; check the stocked product's label for IU per mL, and give the measuring device that comes with it.".into(),
            });
        }
    }
    if !deferred.is_empty() {
        let names: Vec<String> = deferred.iter().filter_map(|id| name_of(id)).collect();
        let phosphate: Vec<Source> =
            w.readings.labs.get(&Analyte::Phosphate).map(|r| r.sources.clone()).unwrap_or_default();
        plan.issues.push(SafetyIssue {
            key: "calcitriol-deferred",
            act_code: None,
            severity: IssueSeverity::Moderate,
            title: "Calcitriol deferred until the phosphate is controlled".into(),
            detail: format!("Likely cause: {}. {}", names.join("; "), v.calcitriol_deferred),
            implicated: phosphate,
            mitigation: "Lower the phosphate first (diet, calcium carbonate with meals as a binder); recheck calcium and phosphate, then review calcitriol with pediatric nephrology.".into(),
        });
    }
    let specialist: Vec<String> = specialist_ids.iter().filter_map(|id| name_of(id)).collect();
    if !specialist.is_empty()
        && let Some(p) = product(rules, &v.calcitriol_product)
    {
        plan.proposals.push(MedProposal {
            key: "calcitriol",
            title: "Calcitriol: for specialist dosing".into(),
            product: p.clone(),
            text: format!("Likely cause: {}. {}", specialist.join("; "), v.calcitriol_note),
            dose: None,
            rate: None,
            per_day: None,
            days: None,
            max_per_day: None,
            route: Route::Oral,
            sources: Vec::new(),
            alternative: false,
            specialist: true,
        });
    }
}

/// A phosphate above the upper limit for the age: the newest result in the result
/// window, against the lowest upper limit of the lab ranges the age may fall in.
struct HighPhosphate<'f> {
    /// mmol/L.
    value: f64,
    /// Upper limit, mmol/L.
    upper: f64,
    /// Source of the range.
    range_source: String,
    /// The result.
    m: &'f crate::clinical::facts::Measurement,
}

fn high_phosphate<'f>(rules: &RuleSet, facts: &'f Facts, ctx: &Context) -> Option<HighPhosphate<'f>> {
    use crate::clinical::bands::at_least;
    let limit = facts.now - (rules.windows.result_max_age_hours * 3600.0).round() as i64;
    let m = facts.of(Analyte::Phosphate).into_iter().find(|m| m.when.latest >= limit)?;
    let range = rules
        .lab_ranges
        .iter()
        .filter(|r| r.analyte == Analyte::Phosphate && at_least(ctx.age_max, r.from) && !at_least(ctx.age_min, r.until))
        .min_by(|a, b| a.upper.total_cmp(&b.upper))?;
    (m.value > range.upper).then(|| HighPhosphate {
        value: m.value,
        upper: range.upper,
        range_source: range.source.clone(),
        m,
    })
}

fn any_events(facts: &Facts, list: &str) -> Vec<Source> {
    facts
        .events
        .iter()
        .filter(|e| e.kind == EventKind::Medication && e.lists.iter().any(|l| l == list))
        .map(|e| e.source.clone())
        .collect()
}

/// Medications in a list that count as current: running or being taken (an
/// administration in progress, an active MedicationRequest, an active
/// MedicationStatement, whatever its date: an active statement of a long-running
/// drug carries the date it was started), or given, taken or ordered within the
/// window before the evaluation time. A completed statement counts only within
/// the window. An undated record counts too: it cannot be shown to be old.
fn current_events(facts: &Facts, list: &str, window: &RecencyWindow) -> Vec<Source> {
    let window_s = (window.hours * 3600.0).round() as i64;
    events_in(facts, list, EventKind::Medication)
        .into_iter()
        .filter(|e| e.in_progress || e.when.is_none_or(|w| facts.now - w.latest <= window_s))
        .map(|e| e.source.clone())
        .collect()
}

/// "a running administration or active order, or one in the last 4 h (source)".
fn window_text(w: &RecencyWindow) -> String {
    let hours = if w.hours >= 48.0 && (w.hours / 24.0).fract() == 0.0 {
        format!("{} days", num_trim(w.hours / 24.0))
    } else {
        format!("{} h", num_trim(w.hours))
    };
    format!("counted when running, active or recorded in the last {hours} ({})", w.source)
}

/// Say on each issue which of its medication records were identified by name
/// (their text or display) rather than by a listed code.
fn mark_name_matches(facts: &Facts, issues: &mut [SafetyIssue]) {
    for i in issues.iter_mut() {
        let named: Vec<String> = facts
            .events
            .iter()
            .filter(|e| e.kind == EventKind::Medication && i.implicated.contains(&e.source))
            .filter_map(|e| e.by_name.as_ref().map(|t| format!("{} identified by name '{t}'", e.source.label())))
            .collect();
        if !named.is_empty() {
            i.detail.push_str(&format!(" Not by a listed code: {}.", named.join("; ")));
        }
    }
}

/// A medication record near the proposal that could not be identified: the
/// interaction and line checks may be incomplete, said on the proposals.
/// "Near": running or active, or recorded within `unidentified_medication_current`.
fn unidentified_medications(rules: &RuleSet, facts: &Facts, plan: &mut TreatmentPlan) {
    if plan.proposals.is_empty() {
        return;
    }
    let w = &rules.treatment.safety.unidentified_medication_current;
    let window_s = (w.hours * 3600.0).round() as i64;
    let near: Vec<&crate::clinical::facts::OpenRecord> = facts
        .unidentified_medications
        .iter()
        .filter(|m| m.in_progress || m.when.is_none_or(|t| facts.now - t.latest <= window_s))
        .collect();
    if near.is_empty() {
        return;
    }
    let what: Vec<String> = near.iter().map(|m| format!("{} ({})", m.source.label(), m.description)).collect();
    plan.issues.push(SafetyIssue {
        key: "unidentified-medication",
        act_code: Some(("DRG", "Drug Interaction Alert")),
        severity: IssueSeverity::Moderate,
        title: if near.len() == 1 {
            "One active medication could not be identified".into()
        } else {
            format!("{} active medications could not be identified", near.len())
        },
        detail: format!(
            "{} active medication(s) could not be identified: line-compatibility and interaction checks (ceftriaxone, sodium bicarbonate, phosphate, digoxin) and the IV calcium daily maximum may be incomplete. Not identified: {}. Near the proposal means {}.",
            near.len(),
            what.join("; "),
            window_text(w)
        ),
        implicated: near.iter().map(|m| m.source.clone()).collect(),
        mitigation: "Check the medication record by hand (name, line, time) before giving calcium; send its RxNorm code or name to have it checked.".into(),
    });
}

/// A Condition or finding near the calcium result that could be a symptom but is
/// in none of the lists: the symptom state is unknown, not "none", so an
/// oral-only plan carries the caution that IV calcium may be needed.
fn symptoms_unknown(rules: &RuleSet, facts: &Facts, finding: &CalciumFinding, plan: &mut TreatmentPlan) {
    let oral_only = plan.proposals.iter().any(|p| p.route == Route::Oral && p.key.contains("calcium"))
        && !plan.proposals.iter().any(|p| p.route == Route::Iv);
    if !oral_only || finding.is_symptomatic() {
        return;
    }
    // The records near the result, as the status found them (same window).
    let near: Vec<&crate::clinical::facts::OpenRecord> =
        facts.unclassified_findings.iter().filter(|c| finding.unclassified_near.contains(&c.source)).collect();
    if near.is_empty() {
        return;
    }
    let what: Vec<String> = near.iter().map(|c| format!("{} ({})", c.source.label(), c.description)).collect();
    plan.issues.push(SafetyIssue {
        key: "symptoms-unknown",
        act_code: None,
        severity: IssueSeverity::Moderate,
        title: "Symptom state unknown: IV calcium may be needed if the child is symptomatic".into(),
        detail: format!(
            "Oral calcium is proposed because no symptom of hypocalcemia is recorded, but {} record(s) within {} h of the calcium result could not be classified and may be a symptom: {}.",
            near.len(),
            num_trim(rules.windows.symptom_window_hours),
            what.join("; ")
        ),
        implicated: near.iter().map(|c| c.source.clone()).collect(),
        mitigation: "Examine the child: with seizures, tetany, carpopedal spasm, laryngospasm, apnea or arrhythmia, give IV calcium instead of oral (local protocol).".into(),
    });
}

/// Checks that apply whatever is proposed.
fn safety_always(_rules: &RuleSet, facts: &Facts, finding: &CalciumFinding, _ctx: &Context, plan: &mut TreatmentPlan) {
    // An infusion running while calcium is already normal.
    if finding.classification != Classification::Low {
        let running: Vec<Source> = events_in(facts, "calcium_preparations", EventKind::Medication)
            .into_iter()
            .filter(|e| e.source.resource_type == "MedicationAdministration" && e.in_progress)
            .map(|e| e.source.clone())
            .collect();
        if !running.is_empty() {
            plan.issues.push(SafetyIssue {
                key: "overshoot",
                act_code: Some(("DOSE", "Dosage problem")),
                severity: IssueSeverity::Moderate,
                title: "Calcium infusion running with a calcium that is not low".into(),
                detail: format!(
                    "A calcium infusion is in progress while the {} is {} ({} mmol/L). Risk of overshoot.",
                    finding.measure.label(),
                    if finding.classification == Classification::High { "high" } else { "normal" },
                    num(finding.value_mmol_l, 2)
                ),
                implicated: running,
                mitigation:
                    "Consider stopping or weaning the infusion now that calcium is normal; recheck ionized calcium."
                        .into(),
            });
        }
    }
}

/// The calcium x phosphate product limit for the age and its source: the span the
/// whole age interval lies in, or, when the age straddles a boundary, the lowest
/// limit of the spans it may lie in. `None` when no span applies.
fn ca_x_p_limit<'r>(rules: &'r RuleSet, ctx: &Context) -> Option<(f64, &'r str)> {
    let limits = &rules.treatment.safety.ca_x_p_limits;
    let of = |l: &crate::rules::treatment_model::LimitByAge| {
        rules.safety_sources.get(&l.safety_source).and_then(|s| Some((s.threshold?, s.source.as_str())))
    };
    if let Some(l) = limits.iter().find(|l| ctx.within(&l.applies) == Some(true)) {
        return of(l);
    }
    limits.iter().filter(|l| ctx.within(&l.applies).is_none()).filter_map(of).min_by(|a, b| a.0.total_cmp(&b.0))
}

/// Checks tied to IV calcium being proposed.
fn fact<'r>(rules: &'r RuleSet, key: &str) -> (&'r str, Option<f64>) {
    rules.safety_sources.get(key).map_or(("(safety source missing)", None), |s| (s.source.as_str(), s.threshold))
}

fn safety_with_proposals(
    rules: &RuleSet,
    facts: &Facts,
    finding: &CalciumFinding,
    ctx: &Context,
    plan: &mut TreatmentPlan,
) {
    let s = &rules.treatment.safety;
    let iv_calcium = plan.proposals.iter().any(|p| p.route == Route::Iv && p.key.starts_with("calcium"));
    if iv_calcium {
        let digoxin = current_events(facts, "digoxin", &s.digoxin_current);
        if !digoxin.is_empty() {
            plan.issues.push(SafetyIssue {
                key: "digoxin",
                act_code: Some(("DRG", "Drug Interaction Alert")),
                severity: IssueSeverity::High,
                title: "Digoxin with IV calcium".into(),
                detail: format!(
                    "Digoxin is current ({}): raised calcium enhances digoxin and can cause arrhythmias ({}).",
                    window_text(&s.digoxin_current),
                    fact(rules, "digoxin").0
                ),
                implicated: digoxin,
                mitigation: "If calcium must be given, give it slowly, in small amounts, with continuous ECG monitoring.".into(),
            });
        }
        let mut precip = current_events(facts, "sodium_bicarbonate", &s.bicarbonate_current);
        precip.extend(
            facts
                .events
                .iter()
                .filter(|e| {
                    // A running infusion or an active order; a statement that phosphate is
                    // being taken (often by mouth) is not a line to precipitate in.
                    e.kind == EventKind::Medication
                        && e.lists.iter().any(|l| l == "phosphate_preparations")
                        && e.in_progress
                        && e.source.resource_type != "MedicationStatement"
                })
                .map(|e| e.source.clone()),
        );
        if !precip.is_empty() {
            plan.issues.push(SafetyIssue {
                key: "precipitation",
                act_code: Some(("DRG", "Drug Interaction Alert")),
                severity: IssueSeverity::High,
                title: "Sodium bicarbonate or phosphate with IV calcium".into(),
                detail: format!(
                    "Calcium precipitates with bicarbonate and phosphate ({}). Sodium bicarbonate is {}; phosphate when running.",
                    fact(rules, "phosphate_bicarbonate_precipitation").0,
                    window_text(&s.bicarbonate_current)
                ),
                implicated: precip,
                mitigation: "Never give them through the same line; flush thoroughly, or use a separate line.".into(),
            });
        }
        let ceftriaxone = any_events(facts, "ceftriaxone");
        // The loader refuses rules without this threshold; were it missing, warn at any age.
        let (cef_source, cef_days) = fact(rules, "ceftriaxone_neonate_contraindication");
        // Warn when the child may be a neonate: the youngest possible age decides
        // (a partial birth date must not silence the contraindication).
        let may_be_neonate = cef_days.is_none_or(|d| ctx.age_min.days as f64 <= d);
        if !ceftriaxone.is_empty() && !may_be_neonate {
            let (line_source, _) = fact(rules, "ceftriaxone_y_site_any_age");
            let line_text = rules.safety_sources.get("ceftriaxone_y_site_any_age").map_or("", |x| x.text.as_str());
            plan.issues.push(SafetyIssue {
                key: "ceftriaxone-line",
                act_code: Some(("DRG", "Drug Interaction Alert")),
                severity: IssueSeverity::Moderate,
                title: "Ceftriaxone with IV calcium: never through the same line at the same time".into(),
                detail: format!("Ceftriaxone is recorded. {line_text} ({line_source})."),
                implicated: ceftriaxone.clone(),
                mitigation: "Do not give them together through a Y-site; give them one after the other with the line flushed thoroughly between, or use separate lines.".into(),
            });
        }
        if !ceftriaxone.is_empty() && may_be_neonate {
            let cef_days = cef_days.map_or_else(|| "(missing)".to_owned(), num_trim);
            plan.issues.push(SafetyIssue {
                key: "ceftriaxone",
                act_code: Some(("DRG", "Drug Interaction Alert")),
                severity: IssueSeverity::High,
                title: "Ceftriaxone in a neonate with IV calcium".into(),
                detail: format!(
                    "Ceftriaxone is contraindicated in neonates up to {} days old who need IV calcium, even through separate lines or at different times ({}).",
                    cef_days, cef_source
                ),
                implicated: ceftriaxone,
                mitigation: "Use another antibiotic, or do not give IV calcium-containing solutions; discuss with the treating clinician.".into(),
            });
        }
        let b = &rules.treatment.bolus;
        let saline = rules.treatment.diluents.iter().find(|d| d.id == b.diluent).is_some_and(|d| d.saline);
        if saline && b.diluent != b.preferred_diluent {
            plan.issues.push(SafetyIssue {
                key: "saline-diluent",
                act_code: None,
                severity: IssueSeverity::Low,
                title: "Saline chosen as diluent".into(),
                detail: format!("The site's diluent is 0.9% sodium chloride while dextrose is preferred ({}). Saline is a compatible diluent on the label.", s.saline_source),
                implicated: Vec::new(),
                mitigation: "Use 5% or 10% dextrose where possible.".into(),
            });
        }
        match facts.vascular_access {
            VascularAccess::Arterial | VascularAccess::UmbilicalArterial => plan.issues.push(SafetyIssue {
                key: "arterial-line",
                act_code: None,
                severity: IssueSeverity::High,
                title: "Arterial line: never give calcium".into(),
                detail: format!("The recorded line is arterial. Calcium must never be given intra-arterially ({}).", fact(rules, "no_intra_arterial_or_uac").0),
                implicated: Vec::new(),
                mitigation: "Give IV calcium through a secure venous line; confirm the tip position of any umbilical venous catheter.".into(),
            }),
            VascularAccess::Peripheral | VascularAccess::Unknown => plan.issues.push(SafetyIssue {
                key: "extravasation",
                act_code: None,
                severity: IssueSeverity::Moderate,
                title: "Peripheral IV calcium: extravasation risk".into(),
                detail: format!(
                    "IV calcium is proposed {}. Calcium causes calcinosis and tissue necrosis if it extravasates ({}); calcium chloride is not proposed for a peripheral line.",
                    if facts.vascular_access == VascularAccess::Peripheral { "through a peripheral line" } else { "and no line is recorded (send vascularAccess to say which)" },
                    fact(rules, "extravasation_calcinosis").0
                ),
                implicated: Vec::new(),
                mitigation: format!(
                    "Use a secure, freshly checked line; dilute as shown; watch the site. Avoid scalp veins. In neonates stop the bolus if the heart rate falls below {} bpm ({}).",
                    num_trim(fact(rules, "neonatal_bradycardia_stop").1.unwrap_or(f64::NAN)),
                    fact(rules, "neonatal_bradycardia_stop").0
                ),
            }),
            _ => {}
        }
        let brady: Vec<Source> = finding
            .symptoms
            .iter()
            .filter(|x| x.symptom == crate::clinical::facts::Symptom::Bradycardia)
            .map(|x| x.source.clone())
            .collect();
        if !brady.is_empty() {
            let (source, bpm) = fact(rules, "neonatal_bradycardia_stop");
            plan.issues.push(SafetyIssue {
                key: "bradycardia",
                act_code: None,
                severity: IssueSeverity::High,
                title: "Bradycardia recorded".into(),
                detail: "Bradycardia is recorded; IV calcium given too fast causes bradycardia and arrhythmia.".into(),
                implicated: brady,
                mitigation: format!(
                    "Give IV calcium under continuous ECG and heart-rate monitoring; in neonates stop the bolus if the heart rate falls below {} bpm ({source}).",
                    num_trim(bpm.unwrap_or(f64::NAN))
                ),
            });
        }
        if let Some(q) = finding.qtc.as_ref().filter(|q| q.prolonged) {
            plan.issues.push(SafetyIssue {
                key: "qtc",
                act_code: None,
                severity: IssueSeverity::Moderate,
                title: "Prolonged QTc".into(),
                detail: format!("QTc {} ms (> {} ms).", num(q.value_ms, 0), num(q.threshold_ms, 0)),
                implicated: vec![q.source.clone()],
                mitigation: "Give IV calcium under continuous ECG and heart-rate monitoring.".into(),
            });
        }
    }
    // A high calcium-phosphate product before giving calcium.
    let any_calcium = plan.proposals.iter().any(|p| p.key.starts_with("calcium") || p.key == "oral-calcium");
    if any_calcium {
        // The newest results within the rules' result window; older ones say nothing of now.
        let limit = facts.now - (rules.windows.result_max_age_hours * 3600.0).round() as i64;
        let fresh = |a| facts.of(a).into_iter().find(|m| m.when.latest >= limit);
        let total = fresh(Analyte::CalciumTotal);
        let phosphate = fresh(Analyte::Phosphate);
        let ca_mass = rules.analyte(Analyte::CalciumTotal).and_then(|a| a.molar_mass_g_per_mol).unwrap_or(f64::NAN);
        let p_mass = rules.analyte(Analyte::Phosphate).and_then(|a| a.molar_mass_g_per_mol).unwrap_or(f64::NAN);
        // A high phosphate on its own, with or without a total calcium to make the product.
        if let Some(h) = high_phosphate(rules, facts, ctx) {
            let (fact_source, _) = fact(rules, "phosphate_high_with_calcium");
            let fact_text = rules.safety_sources.get("phosphate_high_with_calcium").map_or("", |f| f.text.as_str());
            plan.issues.push(SafetyIssue {
                key: "phosphate-high",
                act_code: None,
                severity: if iv_calcium { IssueSeverity::High } else { IssueSeverity::Moderate },
                title: "Phosphate above the upper limit for age".into(),
                detail: format!(
                    "Phosphate {} mmol/L ({} mg/dL) is {} times the upper limit {} mmol/L for the age (range: {}). {fact_text} ({fact_source}). {}",
                    num(h.value, 2),
                    num(h.value * p_mass / 10.0, 1),
                    num(h.value / h.upper, 1),
                    num(h.upper, 2),
                    h.range_source,
                    if total.is_some() {
                        "The calcium x phosphate product is checked from the total calcium in the window."
                    } else {
                        "No total calcium is in the result window, so the calcium x phosphate product cannot be computed; this warning does not need it."
                    }
                ),
                implicated: vec![h.m.source.clone()],
                mitigation: "Lower the phosphate first where possible (stop phosphate intake; in kidney disease a calcium binder with meals and specialist advice); give IV calcium only for symptoms or severe hypocalcemia, at the rate shown, never in a line with phosphate; recheck calcium and phosphate.".into(),
            });
        }
        if let (Some(ca), Some(p)) = (total, phosphate) {
            // KDOQI states its calcium targets as corrected total calcium: adjust with an
            // albumin drawn with the calcium when the rules say so.
            let pairing = (rules.windows.albumin_pairing_hours * 3600.0).round() as i64;
            let albumin = facts
                .of(Analyte::Albumin)
                .into_iter()
                .find(|a| (a.when.latest - ca.when.latest).abs() <= pairing)
                .filter(|_| s.ca_x_p_corrected_calcium);
            let (ca_mg_dl, ca_text) = match albumin {
                Some(alb) => {
                    let d = super::status::adjust(rules, ca, alb);
                    (
                        d.value_mg_dl,
                        format!(
                            "Albumin-adjusted total calcium {} mg/dL ({} {} {})",
                            num(d.value_mg_dl, 2),
                            d.formula,
                            d.arithmetic,
                            s.ca_x_p_corrected_source
                        ),
                    )
                }
                None => (
                    ca.value * ca_mass / 10.0,
                    format!(
                        "Total calcium {} mg/dL{}",
                        num(ca.value * ca_mass / 10.0, 2),
                        if s.ca_x_p_corrected_calcium { " (no albumin drawn with it, so not adjusted)" } else { "" }
                    ),
                ),
            };
            let product = ca_mg_dl * (p.value * p_mass / 10.0);
            let mut implicated = vec![ca.source.clone(), p.source.clone()];
            implicated.extend(albumin.map(|a| a.source.clone()));
            if let Some((limit, caxp_source)) = ca_x_p_limit(rules, ctx)
                && product > limit
            {
                plan.issues.push(SafetyIssue {
                    key: "caxp",
                    act_code: None,
                    severity: IssueSeverity::Moderate,
                    title: "High calcium-phosphate product".into(),
                    detail: format!(
                        "{ca_text} x phosphate {} mg/dL = {} mg2/dL2, above {} ({}). Giving calcium risks calcium-phosphate precipitation.",
                        num(p.value * p_mass / 10.0, 2),
                        num(product, 0),
                        num_trim(limit),
                        caxp_source
                    ),
                    implicated,
                    mitigation: "Lower the phosphate first where possible and give calcium cautiously, with specialist advice.".into(),
                });
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::clinical::facts::Measurement;
    use crate::clinical::status;
    use crate::clinical::testing::*;
    use crate::clinical::time::PartialDate;

    fn weight(kg: f64) -> Measurement {
        lab(Analyte::BodyWeight, kg, "kg", "wt")
    }

    fn run(rules: &RuleSet, birth: Option<PartialDate>, ionized_value: f64, kg: Option<f64>) -> TreatmentPlan {
        let mut m = vec![ionized(ionized_value, 1, "ica")];
        if let Some(kg) = kg {
            m.push(weight(kg));
        }
        let facts = facts_of(birth, Gender::Female, m, vec![]);
        let a = status::assess(&facts, rules);
        plan(rules, &facts, &a.finding.expect("finding"), None).expect("a plan")
    }

    fn seven() -> Option<PartialDate> {
        born_days_ago(7 * 365 + 30)
    }

    fn find<'p>(p: &'p TreatmentPlan, key: &str) -> &'p MedProposal {
        p.proposals
            .iter()
            .find(|x| x.key == key)
            .unwrap_or_else(|| panic!("no {key} in {:?}", p.proposals.iter().map(|x| x.key).collect::<Vec<_>>()))
    }

    #[test]
    fn a_negative_or_zero_cap_or_rate_is_never_proposed_but_raised_high() {
        // Rules built in code bypass the loader's ranges. A 7-year-old of 20 kg, ionized
        // 0.85 mmol/L (symptomatic-grade low): the bolus would be 20 kg x 50 mg/kg = 1000 mg,
        // capped at -1000 mg = -10 mL; and 0 as cap gives 0 mg. Neither is proposed.
        for cap in [-1000.0, 0.0] {
            let mut r = rules();
            for c in &mut r.treatment.bolus.chosen {
                c.max_single = Some(cap);
            }
            let p = run(&r, seven(), 0.85, Some(20.0));
            assert!(p.proposals.iter().all(|x| x.key != "calcium-bolus"), "cap {cap}: {:?}", p.proposals);
            let issue = p.issues.iter().find(|i| i.key == "impossible-dose").expect("a HIGH issue");
            assert_eq!(issue.severity, IssueSeverity::High);
            assert!(issue.title.starts_with("IV calcium gluconate bolus not proposed"), "{}", issue.title);
        }
        // A negative infusion rate (the source's low end typed as -8 mg/kg/h).
        let mut r = rules();
        for d in &mut r.dose_sources {
            if d.kind == "infusion" {
                d.low = -8.0;
            }
        }
        let p = run(&r, seven(), 0.85, Some(20.0));
        assert!(p.proposals.iter().all(|x| x.key != "calcium-infusion"));
        assert!(p.issues.iter().any(|i| i.key == "impossible-dose" && i.title.contains("Continuous IV calcium")));
        // The shipped rules propose both, with no such issue.
        let p = run(&rules(), seven(), 0.85, Some(20.0));
        find(&p, "calcium-bolus");
        find(&p, "calcium-infusion");
        assert!(p.issues.iter().all(|i| i.key != "impossible-dose"));
    }

    #[test]
    fn negative_figures_are_found_and_ranges_are_not() {
        assert_eq!(negative_figure("cap = -1000 mg"), Some(6));
        assert_eq!(negative_figure("(-10 mL)"), Some(1));
        assert_eq!(negative_figure("10-50 mg/mL, setid 1aaf5c76-e526, 1-4 h"), None);
    }

    #[test]
    fn worked_example_100_mg_per_kg_for_15_kg() {
        // Common-practice worked example: 15 kg x 100 mg/kg = 1500 mg = 15 mL of
        // 10% calcium gluconate = 139.5 mg elemental calcium (15 mL x 9.3 mg/mL,
        // the US label's 9.3 mg elemental per mL).
        let mut r = rules();
        for c in &mut r.treatment.bolus.chosen {
            c.dose_source = "common_practice_ca_gluconate_bolus".into();
            c.max_single = None;
        }
        let p = run(&r, seven(), 0.85, Some(15.0));
        let b = find(&p, "calcium-bolus");
        assert!(b.text.starts_with("15 kg x 100 mg/kg = 1500 mg = 15 mL of"), "{}", b.text);
        assert!(b.text.contains("139.5 mg elemental calcium"), "{}", b.text);
        assert_eq!(b.dose, Some(Qty { value: 1500.0, unit: "mg" }));
        // At 50 mg/mL the bolus is made up to 30 mL; at <= 100 mg/min it takes >= 15 min.
        assert!(b.text.contains("to 30 mL (50 mg/mL"), "{}", b.text);
        assert!(b.text.contains("over at least 15 min"), "{}", b.text);
    }

    #[test]
    fn default_bolus_is_50_mg_per_kg_capped_at_10_ml() {
        let r = rules();
        // 20 kg x 50 mg/kg = 1000 mg = the 10 mL cap exactly; 30 kg would be 1500 -> capped.
        // A 4-month-old of 5 kg, then 7-year-olds (weights plausible for the age).
        for (birth, kg, mg) in
            [(born_days_ago(120), 5.0, 250.0), (seven(), 15.0, 750.0), (seven(), 20.0, 1000.0), (seven(), 30.0, 1000.0)]
        {
            let p = run(&r, birth, 0.85, Some(kg));
            let b = find(&p, "calcium-bolus");
            assert_eq!(b.dose.as_ref().map(|d| d.value), Some(mg), "{kg} kg");
            assert_eq!(b.text.contains("capped"), kg * 50.0 > 1000.0, "{}", b.text);
        }
    }

    #[test]
    fn doses_rise_with_weight_until_the_cap_and_volume_times_strength_is_the_dose() {
        // A property over a sweep of plausible weights for a 7-year-old (z within +-5).
        let r = rules();
        let per_ml = r.products.iter().find(|p| p.id == r.treatment.bolus.product).and_then(|p| p.salt_mg).unwrap();
        let cap = r.treatment.bolus.chosen[1].max_single.unwrap();
        let mut last = 0.0;
        let mut kg = 15.0;
        while kg <= 50.0 {
            let p = run(&r, seven(), 0.85, Some(kg));
            let b = find(&p, "calcium-bolus");
            let dose = b.dose.as_ref().unwrap().value;
            assert!(dose >= last, "dose fell at {kg} kg");
            assert!(dose <= cap + 1e-9, "dose {dose} above the cap at {kg} kg");
            let ml: f64 =
                b.text.split(" mg = ").nth(1).and_then(|t| t.split(" mL").next()).and_then(|t| t.parse().ok()).unwrap();
            assert!((ml * per_ml - dose).abs() < 0.01 * per_ml, "{kg} kg: {ml} mL x {per_ml} != {dose}");
            let inf = find(&p, "calcium-infusion");
            let rate = inf.rate.as_ref().unwrap().value;
            assert!((rate * 10.0 - (rate * 10.0).round()).abs() < 1e-6, "rate {rate} not on the 0.1 mL/h grid");
            last = dose;
            kg += 0.7;
        }
    }

    #[test]
    fn infusion_rate_is_rounded_to_the_pump() {
        // 12.1 kg x 8 mg/kg/h = 96.8 mg/h; at 10 mg/mL = 9.68 mL/h -> 9.7 mL/h.
        let p = run(&rules(), seven(), 0.85, Some(22.1));
        let inf = find(&p, "calcium-infusion");
        // 22.1 x 8 = 176.8 mg/h / 10 = 17.68 -> 17.7 mL/h.
        assert_eq!(inf.rate, Some(Qty { value: 17.7, unit: "mL/h" }));
        assert!(inf.text.contains("17.68 mL/h, rounded"), "{}", inf.text);
        // 17.7 mL/h x 10 mg/mL = 177 mg/h x 9.3/100 / 60 = 0.274 mg elemental Ca/min, within the
        // ceiling 9.3 mg/min (0.93 x 22.1 = 20.55 is higher).
        assert!(inf.text.contains("Elemental calcium: 177 mg/h x 9.3/100 / 60 = 0.274 mg/min"), "{}", inf.text);
        assert!(inf.text.contains("within the ceiling of 9.3 mg/min"), "{}", inf.text);
    }

    #[test]
    fn no_dose_from_a_missing_stale_or_implausible_weight() {
        let r = rules();
        for kg in [None, Some(95.0), Some(4.0)] {
            let p = run(&r, seven(), 0.85, kg);
            assert!(p.proposals.is_empty(), "{kg:?}: {:?}", p.proposals.iter().map(|x| x.key).collect::<Vec<_>>());
            let issue = p.issues.iter().find(|i| i.key == "weight").expect("a weight issue");
            assert_eq!(issue.severity, IssueSeverity::High);
            if let Some(kg) = kg {
                // 95 kg at 7 years: too heavy, and 9.5 kg would be too light: implausible.
                // 4 kg at 7 years: 40 kg would be plausible: a misplaced decimal point.
                assert!(
                    issue.detail.contains("Implausible weight for the age") && issue.detail.contains("z ="),
                    "{}",
                    issue.detail
                );
                if kg < 50.0 {
                    assert!(issue.detail.contains("It may be a misplaced decimal point (40 kg"), "{}", issue.detail);
                }
            }
        }
        // A stale weight (8 days old).
        let mut facts = facts_of(
            seven(),
            Gender::Female,
            vec![ionized(0.85, 1, "ica"), m(Analyte::BodyWeight, 22.0, "kg", (22.0, "kg"), 24 * 8, "wt")],
            vec![],
        );
        facts.now = now();
        let a = status::assess(&facts, &r);
        let p = plan(&r, &facts, &a.finding.unwrap(), None).unwrap();
        assert!(p.proposals.is_empty());
        assert!(p.issues.iter().any(|i| i.key == "weight" && i.detail.contains("older than 7 days")));
    }

    /// A seizing neonate born `days` ago with ionized 0.6 mmol/L and a weight of `kg`.
    fn neonate_plan(days: i64, gender: Gender, gestation: Option<f64>, kg: f64) -> TreatmentPlan {
        let r = shared_rules();
        let mut facts = facts_of(born_days_ago(days), gender, vec![ionized(0.6, 1, "ica"), weight(kg)], vec![]);
        facts.gestational_age_weeks = gestation;
        facts.symptoms.push(seizure(Some(2)));
        let a = status::assess(&facts, r);
        plan(r, &facts, &a.finding.expect("finding"), None).expect("a plan")
    }

    #[test]
    fn a_27_week_baby_of_1_kg_on_day_3_is_dosed_against_the_preterm_table() {
        // Born at 27 weeks, 3 days old: 27 + 3/7 = 27.4286 weeks postmenstrual age.
        // UK-WHO preterm boys, rows 27 [1.061, 1.0364, 0.17355] and 28 [1.04, 1.1577, 0.17663];
        // t = 3/7: L = 1.052, M = 1.088386, S = 0.174870.
        // z = ((1.0 / 1.088386)^1.052 - 1) / (1.052 x 0.174870) = (0.914754 - 1) / 0.183963 = -0.4634
        // (rcpchgrowth 4.6.5 with cubic interpolation: -0.4573, tests/reference/growth).
        let p = neonate_plan(3, Gender::Male, Some(27.0), 1.0);
        let w = p.weight.as_ref().expect("a dosing weight");
        let z = w.z.as_ref().expect("a z");
        assert!(close(z.z, -0.4634, 0.0005), "{}", z.z);
        assert!(z.age_text.contains("27.4 weeks postmenstrual"), "{}", z.age_text);
        assert!(w.caution.is_none());
        assert!(p.proposals.iter().any(|x| x.key == "calcium-bolus"));
        assert!(!p.issues.iter().any(|i| i.key == "weight" || i.key == "weight-confirm"));
        // On the term chart (WHO, day 3) the same baby is far below -5: what used to refuse him.
        let term = growth::weight_for_age_z(shared_rules(), "male", growth::months_from_days(3), 1.0).unwrap();
        assert!(term.check_z < -5.0, "{}", term.check_z);
    }

    #[test]
    fn a_low_weight_neonate_without_a_recorded_gestation_gets_the_bolus_and_a_warning() {
        let p = neonate_plan(3, Gender::Female, None, 1.1);
        assert!(p.proposals.iter().any(|x| x.key == "calcium-bolus"), "{:?}", p.issues);
        let i = p.issues.iter().find(|i| i.key == "weight-confirm").expect("a confirm-weight caution");
        assert_eq!(i.severity, IssueSeverity::Moderate);
        assert!(
            i.detail.contains("gestational age at birth is not recorded") && i.detail.contains("born preterm at"),
            "{}",
            i.detail
        );
        assert!(!p.issues.iter().any(|i| i.key == "weight"));
        // The bolus uses 1.1 kg.
        assert!(find(&p, "calcium-bolus").text.starts_with("1.1 kg x "), "{}", find(&p, "calcium-bolus").text);
    }

    #[test]
    fn impossible_weights_and_unit_slips_are_refused_and_named() {
        let refused = |p: &TreatmentPlan| -> String {
            assert!(p.proposals.is_empty());
            let i = p.issues.iter().find(|i| i.key == "weight").expect("a weight issue");
            assert_eq!(i.severity, IssueSeverity::High);
            i.detail.clone()
        };
        // 1100 "kg" for a 3-day-old: 1100 g = 1.1 kg would be plausible (preterm).
        let d = refused(&neonate_plan(3, Gender::Female, None, 1100.0));
        assert!(
            d.starts_with("No weight-based dose is proposed. Unit slip") && d.contains("grams entered as kilograms"),
            "{d}"
        );
        assert!(d.contains("1.1 kg would be plausible"), "{d}");
        // 0.15 kg: below the 0.2 kg floor, physically impossible (and 150 kg is no newborn).
        let d = refused(&neonate_plan(3, Gender::Female, Some(26.0), 0.15));
        assert!(d.contains("Physically impossible weight: 0.15 kg is below 0.2 kg"), "{d}");
        // 180 kg at 2 years: 18 kg would be plausible: a misplaced decimal point.
        let p = run(shared_rules(), born_days_ago(2 * 365 + 10), 0.85, Some(180.0));
        let d = refused(&p);
        assert!(
            d.contains("Implausible weight for the age") && d.contains("It may be a misplaced decimal point (18 kg"),
            "{d}"
        );
        // A 27-week baby of 3.5 kg on day 3 is beyond +5 on the preterm table; 3.5 g is no weight.
        let d = refused(&neonate_plan(3, Gender::Male, Some(27.0), 3.5));
        assert!(d.contains("Implausible weight for the age") && d.contains("postmenstrual"), "{d}");
    }

    #[test]
    fn the_neonatal_infusion_shows_ml_per_kg_per_day_and_warns_on_the_fluid_share() {
        // 1.0 kg x 17 mg/kg/h (US label, neonates, low end) = 17 mg/h at 10 mg/mL = 1.7 mL/h;
        // 1.7 mL/h x 24 h / 1.0 kg = 40.8 mL/kg/day. 3 days old = day of life 4: allowance
        // 60 mL/kg/day (treatment.neonatal_fluid), 40.8 / 60 = 68% >= 25%: a warning.
        let p = neonate_plan(3, Gender::Male, Some(27.0), 1.0);
        let inf = find(&p, "calcium-infusion");
        assert!(inf.text.contains("Fluid: 1.7 mL/h x 24 h / 1 kg = 40.8 mL/kg/day."), "{}", inf.text);
        assert!(inf.text.contains("is 68% of the day-4 fluid allowance of 60 mL/kg/day"), "{}", inf.text);
        let i = p.issues.iter().find(|i| i.key == "fluid-load").expect("a fluid-load warning");
        assert_eq!(i.severity, IssueSeverity::Moderate);
        // A 7-year-old: the volume is shown, no neonatal allowance, no warning.
        let p = run(shared_rules(), seven(), 0.6, Some(22.0));
        if let Some(inf) = p.proposals.iter().find(|x| x.key == "calcium-infusion") {
            assert!(inf.text.contains("mL/kg/day."), "{}", inf.text);
            assert!(!inf.text.contains("fluid allowance"));
        }
        assert!(!p.issues.iter().any(|i| i.key == "fluid-load"));
    }

    #[test]
    fn asymptomatic_gets_oral_calcium_not_iv() {
        // Ionized 1.05 in a child: below the interval, above every grade: oral.
        let p = run(&rules(), seven(), 1.05, Some(22.0));
        assert!(
            p.proposals.iter().all(|x| x.route == Route::Oral),
            "{:?}",
            p.proposals.iter().map(|x| x.key).collect::<Vec<_>>()
        );
        let o = find(&p, "oral-calcium");
        // 22 kg x 50 = 1100 mg/day in 4 doses = 275 mg per dose. From 6 years tablets are
        // tried first (treatment.toml oral.tablets_from), but no whole tablet is within
        // 10% of 275 mg (500 mg: +82%; 200 mg: -27%), so the liquid: 2.7-2.8 mL of 100 mg/mL.
        assert_eq!(o.per_day, Some(4));
        assert!(o.text.starts_with("22 kg x 50 mg/kg/day elemental calcium = 1100 mg/day"), "{}", o.text);
        assert_eq!(o.product.strength_per, "mL");
        let ml = o.dose.as_ref().unwrap().value;
        assert!((ml * 100.0 - 275.0).abs() <= 27.5, "{ml} mL");
    }

    /// The oral proposal for a 7-year-old girl of `kg` (ionized 1.05: oral only).
    fn oral_for(r: &RuleSet, birth: Option<PartialDate>, kg: f64) -> (MedProposal, TreatmentPlan) {
        let p = run(r, birth, 1.05, Some(kg));
        (find(&p, "oral-calcium").clone(), p)
    }

    #[test]
    fn oral_dose_for_20_kg_is_not_doubled_by_tablet_rounding() {
        // 20 kg x 50 mg/kg/day = 1000 mg/day / 4 = 250 mg per dose. The 500 mg tablet:
        // 1 tablet = 500 mg (+100%), above the 10% tolerance, and 0 is no dose. The 200 mg
        // chewable: 1 tablet = 200 mg (-20%), outside 10%. The 100 mg/mL liquid:
        // 250 / 100 = 2.5 mL = 250 mg (0%), 1000 mg/day. (Before: 1 tablet, 2000 mg/day.)
        let (o, p) = oral_for(&rules(), seven(), 20.0);
        assert_eq!(o.product.id, "calcium_carbonate_susp_1250mg_5ml");
        assert_eq!(o.dose, Some(Qty { value: 2.5, unit: "mL" }));
        assert!(o.text.contains("giving 250 mg elemental per dose (1000 mg/day; 0% above"), "{}", o.text);
        assert!(o.text.contains("Not used: 1 tablet of Calcium carbonate tablet 1250 mg"), "{}", o.text);
        assert!(!p.issues.iter().any(|i| i.key == "oral-dose-rounding"));
    }

    #[test]
    fn oral_dose_for_25_kg_stays_within_10_percent() {
        // 25 kg x 50 mg/kg/day = 1250 mg/day / 4 = 312.5 mg per dose. 500 mg tablet: 1 =
        // +60%. 200 mg chewable: 2 = 400 mg (+28%), 1 = 200 mg (-36%). Liquid: 312.5 / 100
        // = 3.125 mL, to 0.1 mL = 3.1 mL = 310 mg (-0.8%), 1240 mg/day. (Before: 1 tablet,
        // 500 mg per dose, 2000 mg/day, +60%.)
        let (o, _) = oral_for(&rules(), seven(), 25.0);
        assert_eq!(o.product.strength_per, "mL");
        assert_eq!(o.dose, Some(Qty { value: 3.1, unit: "mL" }));
        assert!(o.text.contains("= 312.5 mg per dose = 3.1 mL of"), "{}", o.text);
        assert!(o.text.contains("(1240 mg/day; 1% below the computed dose"), "{}", o.text);
    }

    #[test]
    fn whole_tablets_when_they_fit_a_smaller_tablet_when_only_it_does() {
        let r = rules();
        // 12 years, 40 kg: 2000 mg/day / 4 = 500 mg per dose = 1 tablet of 500 mg (0%).
        let (o, _) = oral_for(&r, born_days_ago(12 * 365 + 100), 40.0);
        assert_eq!(
            (o.product.id.as_str(), o.dose.as_ref().map(|d| d.value)),
            ("calcium_carbonate_tab_1250mg", Some(1.0))
        );
        // 10 years, 35 kg: 1750 / 4 = 437.5 mg; 1 x 500 mg = +14% (too high); 2 x 200 mg
        // chewable = 400 mg (-8.6%): within 10%.
        let (o, _) = oral_for(&r, born_days_ago(10 * 365 + 100), 35.0);
        assert_eq!(
            (o.product.id.as_str(), o.dose.as_ref().map(|d| d.value)),
            ("calcium_carbonate_chewtab_500mg", Some(2.0))
        );
        assert!(o.text.contains("2 tablets of Calcium carbonate chewable tablet"), "{}", o.text);
    }

    #[test]
    fn when_nothing_measures_the_dose_no_amount_is_proposed_and_it_is_flagged() {
        // A liquid measured only in 5 mL steps (500 mg): for 250 mg per dose, 5 mL is
        // +100% and no tablet fits either, so no amount, and a dose issue.
        let mut r = rules();
        r.treatment.oral.liquid_round_ml = 5.0;
        let (o, p) = oral_for(&r, seven(), 20.0);
        assert_eq!(o.dose, None);
        assert!(o.text.contains("No product in the formulary measures this dose within 10%"), "{}", o.text);
        let issue = p.issues.iter().find(|i| i.key == "oral-dose-rounding").expect("flagged");
        assert_eq!(issue.act_code, Some(("DOSE", "Dosage problem")));
        assert!(
            issue.detail.starts_with("250 mg elemental calcium per dose cannot be measured within 10%"),
            "{}",
            issue.detail
        );
    }

    #[test]
    fn no_oral_dose_is_more_than_the_tolerance_above_the_computed_dose() {
        // A sweep of plausible weights from 6 to 17 years: the measured dose is within 10%
        // of weight x 50 mg/kg/day / 4 (capped), and 4 doses stay within the daily limit.
        let r = rules();
        let tol = r.treatment.oral.rounding_tolerance_pct / 100.0;
        for (years, kgs) in [(6, 16.0..=26.0), (9, 22.0..=38.0), (13, 35.0..=60.0), (16, 45.0..=75.0)] {
            let mut kg = *kgs.start();
            while kg <= *kgs.end() {
                let (o, _) = oral_for(&r, born_days_ago(years * 365 + 100), kg);
                let cap = o.max_per_day.as_ref().unwrap().value;
                let per_dose = (kg * 50.0).min(cap) / 4.0;
                let amount = o.dose.as_ref().unwrap_or_else(|| panic!("{years} y {kg} kg: {}", o.text)).value;
                let given = amount * o.product.elemental_mg.unwrap();
                assert!(given <= per_dose * (1.0 + tol) + 1e-6, "{years} y {kg} kg: {given} vs {per_dose}: {}", o.text);
                assert!(given >= per_dose * (1.0 - tol) - 1e-6, "{years} y {kg} kg: {given} vs {per_dose}: {}", o.text);
                assert!(given * 4.0 <= cap + 1e-6, "{years} y {kg} kg");
                kg += 1.3;
            }
        }
    }

    #[test]
    fn a_recorded_bradycardia_raises_a_monitoring_issue() {
        let r = rules();
        let brady = |hours_ago| {
            let mut s = seizure(Some(hours_ago));
            s.symptom = crate::clinical::facts::Symptom::Bradycardia;
            s
        };
        // A recorded bradycardia is itself a symptom (so IV calcium is proposed):
        // the issue fires; a seizure alone proposes IV calcium without it.
        for (bradycardia, fires) in [(true, true), (false, false)] {
            let mut facts = facts_of(seven(), Gender::Female, vec![ionized(1.05, 1, "ica"), weight(22.0)], vec![]);
            facts.symptoms.push(if bradycardia { brady(2) } else { seizure(Some(2)) });
            let a = status::assess(&facts, &r);
            let p = plan(&r, &facts, &a.finding.unwrap(), None).unwrap();
            assert!(p.proposals.iter().any(|x| x.key == "calcium-bolus"));
            assert_eq!(p.issues.iter().any(|i| i.key == "bradycardia"), fires, "bradycardia {bradycardia}");
        }
    }

    #[test]
    fn calcium_chloride_arithmetic_agrees_from_salt_and_from_elemental() {
        // 20 mg/kg of CaCl2.2H2O: for 10 kg, 200 mg = 2 mL of 10%; elemental
        // calcium = 2 mL x the label's elemental mg/mL; and that equals
        // 200 mg x (40.078 / 147.01), the calcium fraction of the dihydrate, within
        // the label's rounding.
        let r = rules();
        let mut facts = facts_of(seven(), Gender::Female, vec![ionized(0.85, 1, "ica"), weight(22.0)], vec![]);
        facts.vascular_access = VascularAccess::Central;
        let a = status::assess(&facts, &r);
        let p = plan(&r, &facts, &a.finding.unwrap(), None).unwrap();
        let c = find(&p, "calcium-chloride");
        assert!(c.alternative);
        let dose = c.dose.as_ref().unwrap().value;
        assert!((dose - 440.0).abs() < 1e-9, "22 kg x 20 mg/kg = 440 mg, got {dose}");
        let prod = r.products.iter().find(|x| x.id == r.treatment.chloride.product).unwrap();
        let from_label = dose / prod.salt_mg.unwrap() * prod.elemental_mg.unwrap();
        let from_formula = dose * 40.078 / 147.01;
        assert!((from_label - from_formula).abs() / from_formula < 0.01, "{from_label} vs {from_formula}");
        assert!(c.text.contains("Central line only"));
        assert!(!p.issues.iter().any(|i| i.key == "extravasation"));
    }

    fn phosphate_mg(mg_dl: f64, hours_ago: i64, id: &str) -> Measurement {
        m(Analyte::Phosphate, mg_dl * 10.0 / 30.974, "mmol/L", (mg_dl, "mg/dL"), hours_ago, id)
    }

    #[test]
    fn caxp_uses_only_results_within_the_result_window() {
        // 13 years: limit 55. Total calcium 8.0 x phosphate 7.5 = 60 fires when both are
        // fresh; a phosphate 4 days old (the window is 72 h) is not used, so no product.
        let r = rules();
        for (p_hours_ago, fires) in [(1, true), (71, true), (96, false)] {
            let m = vec![
                ionized(0.85, 1, "ica"),
                total_mg(8.0, 1, "tca"),
                phosphate_mg(7.5, p_hours_ago, "p"),
                weight(45.0),
            ];
            let facts = facts_of(born_days_ago(13 * 365 + 100), Gender::Female, m, vec![]);
            let a = status::assess(&facts, &r);
            let p = plan(&r, &facts, &a.finding.unwrap(), None).unwrap();
            assert_eq!(p.issues.iter().any(|i| i.key == "caxp"), fires, "phosphate {p_hours_ago} h old");
        }
    }

    #[test]
    fn caxp_limit_is_65_through_age_12_and_55_from_13() {
        // Total calcium 8.0 mg/dL x phosphate 7.5 mg/dL = 60 mg2/dL2: within the
        // < 65 limit for children 12 years and younger, above the < 55 limit for
        // adolescents older than 12 (KDOQI 7.5). Weights near the median for the age.
        let r = rules();
        for (years, kg, fires) in [(12, 40.0, false), (13, 45.0, true)] {
            let m = vec![ionized(0.85, 1, "ica"), total_mg(8.0, 1, "tca"), phosphate_mg(7.5, 1, "p"), weight(kg)];
            let facts = facts_of(born_days_ago(years * 365 + 100), Gender::Female, m, vec![]);
            let a = status::assess(&facts, &r);
            let p = plan(&r, &facts, &a.finding.unwrap(), None).unwrap();
            assert!(p.proposals.iter().any(|x| x.key == "calcium-bolus"), "{years} y");
            let issue = p.issues.iter().find(|i| i.key == "caxp");
            assert_eq!(issue.is_some(), fires, "{years} y: {:?}", issue.map(|i| &i.detail));
            if let Some(i) = issue {
                assert!(i.detail.contains("= 60 mg2/dL2, above 55 ("), "{}", i.detail);
            }
        }
    }

    /// A medication record in a code list, `hours_ago` before now.
    fn med(list: &str, resource_type: &str, hours_ago: i64, in_progress: bool, id: &str) -> CodedEvent {
        let mut e = event(EventKind::Medication, list, hours_ago, id);
        e.source.resource_type = resource_type.into();
        e.in_progress = in_progress;
        e
    }

    /// A completed IV calcium administration of `mg` with an ATC code, `hours_ago`.
    fn given_as(atc: &str, mg: f64, hours_ago: i64, id: &str) -> CodedEvent {
        let mut e = med("calcium_preparations", "MedicationAdministration", hours_ago, false, id);
        e.code = crate::clinical::facts::Code {
            system: "http://www.whocc.no/atc".into(),
            code: atc.into(),
            display: atc.into(),
        };
        e.dose_mg = Some(mg);
        e
    }

    #[test]
    fn calcium_already_given_is_counted_by_its_elemental_calcium_not_its_salt_mass() {
        // 22 kg, 7 years: infusion 8 mg/kg/h (US label, child, low end) = 176 mg/h gluconate,
        // 4224 mg over 24 h; daily maximum 13 mg/kg/h x 24 h x 22 kg = 6864 mg gluconate.
        // 800 mg calcium chloride = 800 x 27.3/100 = 218.4 mg elemental = 218.4 / (9.3/100)
        // = 2348.39 mg gluconate equivalent; 4224 + 2348.39 = 6572.39 < 6864: no alert.
        // Counted as salt mass (800 mg) it would be lower still, so take 1000 mg chloride:
        // 2935.48 mg equivalent, 4224 + 2935.48 = 7159.48 > 6864: the alert. The same 1000 mg
        // counted as if gluconate (4224 + 1000 = 5224) would have stayed silent.
        let p = iv_plan_with(vec![given_as("B05XA07", 1000.0, 3, "cl")]);
        let issue =
            p.issues.iter().find(|i| i.key == "daily-maximum").expect("the chloride dose counts by its calcium");
        assert!(issue.detail.contains("2935.48"), "{}", issue.detail);
        let inf = p.proposals.iter().find(|x| x.key == "calcium-infusion").unwrap();
        assert!(inf.text.contains("1000 mg calcium chloride, dihydrate = 273 mg elemental calcium = 2935.48 mg calcium gluconate equivalent"), "{}", inf.text);
        let p = iv_plan_with(vec![given_as("B05XA07", 800.0, 3, "cl")]);
        assert!(p.issues.iter().all(|i| i.key != "daily-maximum"));
        // Gluconate counts as it is; an oral carbonate dose is listed, not counted.
        let p = iv_plan_with(vec![given_as("A12AA03", 2700.0, 3, "glu"), given_as("A12AA04", 1250.0, 2, "oral")]);
        assert!(p.issues.iter().any(|i| i.key == "daily-maximum"), "4224 + 2700 = 6924 > 6864");
        let inf = p.proposals.iter().find(|x| x.key == "calcium-infusion").unwrap();
        assert!(inf.text.contains("not part of the IV maximum"), "{}", inf.text);
    }

    /// The IV calcium plan for a 7-year-old of 22 kg (ionized 0.85: bolus) with these records.
    fn iv_plan_with(events: Vec<CodedEvent>) -> TreatmentPlan {
        let r = rules();
        let facts = facts_of(seven(), Gender::Female, vec![ionized(0.85, 1, "ica"), weight(22.0)], events);
        let a = status::assess(&facts, &r);
        let p = plan(&r, &facts, &a.finding.unwrap(), None).unwrap();
        assert!(p.proposals.iter().any(|x| x.key == "calcium-bolus"));
        p
    }

    #[test]
    fn only_current_digoxin_is_flagged() {
        // The window is 14 days (336 h, treatment.safety.digoxin_current).
        let day = 24;
        for (what, e, fires) in [
            (
                "an order completed, written 60 days ago",
                med("digoxin", "MedicationRequest", 60 * day, false, "a"),
                false,
            ),
            ("an administration 60 days ago", med("digoxin", "MedicationAdministration", 60 * day, false, "b"), false),
            ("an administration 15 days ago", med("digoxin", "MedicationAdministration", 15 * day, false, "c"), false),
            ("an active order written 60 days ago", med("digoxin", "MedicationRequest", 60 * day, true, "d"), true),
            ("an administration 2 days ago", med("digoxin", "MedicationAdministration", 2 * day, false, "e"), true),
            ("an active statement dated 60 days ago", med("digoxin", "MedicationStatement", 60 * day, true, "f"), true),
            (
                "a completed statement dated 60 days ago",
                med("digoxin", "MedicationStatement", 60 * day, false, "g"),
                false,
            ),
            (
                "a completed statement dated 2 days ago",
                med("digoxin", "MedicationStatement", 2 * day, false, "h"),
                true,
            ),
        ] {
            let p = iv_plan_with(vec![e]);
            let issue = p.issues.iter().find(|i| i.key == "digoxin");
            assert_eq!(issue.is_some(), fires, "{what}");
            if let Some(i) = issue {
                assert_eq!(i.severity, IssueSeverity::High);
                assert!(i.detail.contains("recorded in the last 14 days (Project decision"), "{}", i.detail);
            }
        }
    }

    #[test]
    fn only_current_sodium_bicarbonate_is_flagged() {
        // The window is 4 h (treatment.safety.bicarbonate_current).
        for (what, e, fires) in [
            ("given 20 days ago", med("sodium_bicarbonate", "MedicationAdministration", 20 * 24, false, "a"), false),
            ("given 5 h ago", med("sodium_bicarbonate", "MedicationAdministration", 5, false, "b"), false),
            ("given 1 h ago", med("sodium_bicarbonate", "MedicationAdministration", 1, false, "c"), true),
            ("running, started 10 h ago", med("sodium_bicarbonate", "MedicationAdministration", 10, true, "d"), true),
        ] {
            let p = iv_plan_with(vec![e]);
            assert_eq!(p.issues.iter().any(|i| i.key == "precipitation"), fires, "{what}");
        }
    }

    #[test]
    fn infusion_make_up_volume_is_rule_data() {
        // 10 mg/mL from 100 mg/mL: 1 mL per 10 mL by default, 2 mL per 20 mL when the site says 20.
        let mut r = rules();
        let text = |r: &RuleSet| find(&run(r, seven(), 0.85, Some(22.0)), "calcium-infusion").text.clone();
        assert!(text(&r).contains("1 mL of Calcium gluconate"), "{}", text(&r));
        r.treatment.infusion.makeup_ml = 20.0;
        let t = text(&r);
        assert!(t.contains("2 mL of ") && t.contains("made up to each 20 mL with diluent"), "{t}");
    }

    #[test]
    fn no_chloride_without_its_rate_limit_and_ceftriaxone_warns_without_its_age() {
        // The loader refuses these rules; the core still does not fall back to a number.
        let mut r = rules();
        r.safety_sources.get_mut("calcium_chloride_rate_and_vein").unwrap().threshold = None;
        r.safety_sources.get_mut("ceftriaxone_neonate_contraindication").unwrap().threshold = None;
        let mut facts = facts_of(
            seven(),
            Gender::Female,
            vec![ionized(0.85, 1, "ica"), weight(22.0)],
            vec![med("ceftriaxone", "MedicationAdministration", 2, false, "c")],
        );
        facts.vascular_access = VascularAccess::Central;
        let a = status::assess(&facts, &r);
        let p = plan(&r, &facts, &a.finding.unwrap(), None).unwrap();
        assert!(p.proposals.iter().all(|x| x.key != "calcium-chloride"));
        assert!(p.issues.iter().any(|i| i.key == "ceftriaxone"), "a 7-year-old, but no age limit to clear it");
        // With the rules as shipped: chloride proposed, no ceftriaxone issue at 7 years.
        let r = rules();
        let p = plan(&r, &facts, &status::assess(&facts, &r).finding.unwrap(), None).unwrap();
        assert!(p.proposals.iter().any(|x| x.key == "calcium-chloride"));
        assert!(!p.issues.iter().any(|i| i.key == "ceftriaxone"));
    }

    #[test]
    fn no_local_file_paths_in_formulary_sources() {
        // Sources name the publication or label, never a file on a workstation.
        let r = rules();
        let mut texts: Vec<(String, &str)> = Vec::new();
        for d in &r.dose_sources {
            texts.push((format!("dose_sources.{}", d.id), &d.source));
            texts.extend(d.note.as_deref().map(|n| (format!("dose_sources.{}.note", d.id), n)));
        }
        for p in &r.products {
            texts.push((format!("products.{}", p.id), &p.source));
            texts.extend(p.note.as_deref().map(|n| (format!("products.{}.note", p.id), n)));
        }
        for (k, f) in &r.safety_sources {
            texts.extend([
                (format!("safety_sources.{k}"), f.source.as_str()),
                (format!("safety_sources.{k}.text"), &f.text),
            ]);
            texts.extend(f.note.as_deref().map(|n| (format!("safety_sources.{k}.note"), n)));
        }
        for (at, text) in texts {
            assert!(!text.contains("/work/") && !text.contains("shared/reference"), "{at}: {text}");
        }
    }

    /// The plan with the work-up run first (causes feed the treatment), gender female.
    fn full_plan(
        r: &RuleSet,
        birth: Option<PartialDate>,
        m: Vec<Measurement>,
        events: Vec<CodedEvent>,
        access: VascularAccess,
    ) -> TreatmentPlan {
        let mut facts = facts_of(birth, Gender::Female, m, events);
        facts.vascular_access = access;
        let a = status::assess(&facts, r);
        let finding = a.finding.expect("a finding");
        let w = crate::clinical::workup::run(&facts, r, &finding);
        plan(r, &facts, &finding, w.as_ref()).expect("a plan")
    }

    /// "give over at least N min" read back from a proposal's text.
    fn minutes_of(p: &MedProposal) -> f64 {
        p.text
            .split("give over at least ")
            .nth(1)
            .and_then(|t| t.split(" min").next())
            .and_then(|t| t.parse().ok())
            .unwrap_or_else(|| panic!("no duration in {}", p.text))
    }

    fn elemental_per_min(p: &MedProposal) -> f64 {
        let dose = p.dose.as_ref().map(|d| d.value).expect("a dose");
        dose * p.product.elemental_mg.expect("elemental") / p.product.salt_mg.expect("salt") / minutes_of(p)
    }

    #[test]
    fn neonate_central_line_chloride_is_no_faster_in_calcium_than_the_gluconate_bolus() {
        // A 10-day-old of 3.2 kg, ionized 0.70, central line.
        // Gluconate bolus (US label, under 1 month, low end 100 mg/kg): 3.2 x 100 = 320 mg
        // = 3.2 mL x 9.3 mg/mL = 29.76 mg elemental Ca. Ceiling: the lower of 9.3 mg/min and
        // 0.93 mg/kg/min x 3.2 kg = 2.976 mg/min -> 29.76 / 2.976 = 10 min; the salt at
        // 100 mg/min needs 3.2 min; the shortest is 10 min -> 10 min = 2.976 mg Ca/min.
        // Chloride (AHA 20 mg/kg): 64 mg = 0.64 mL x 27.3 mg/mL = 17.472 mg elemental Ca.
        // Before: 0.64 mL at the label's 1 mL/min "over at least 1 min" = 17.47 mg Ca/min,
        // 5.9 times the gluconate bolus. Now: 17.472 / 2.976 = 5.87 min, the salt 0.64 min,
        // the shortest 10 min -> 10 min = 1.75 mg Ca/min, slower than the gluconate.
        let r = rules();
        let mut facts = facts_of(born_days_ago(10), Gender::Female, vec![ionized(0.70, 1, "ica"), weight(3.2)], vec![]);
        facts.vascular_access = VascularAccess::Central;
        let a = status::assess(&facts, &r);
        let p = plan(&r, &facts, &a.finding.unwrap(), None).unwrap();
        let b = find(&p, "calcium-bolus");
        let c = find(&p, "calcium-chloride");
        assert_eq!(b.dose.as_ref().map(|d| d.value), Some(320.0));
        assert_eq!(c.dose.as_ref().map(|d| d.value), Some(64.0));
        assert_eq!(minutes_of(b), 10.0, "{}", b.text);
        assert_eq!(minutes_of(c), 10.0, "{}", c.text);
        assert!(b.text.contains("29.76 mg elemental calcium / 10 min = 2.98 mg elemental calcium/min"), "{}", b.text);
        assert!(c.text.contains("17.47 mg elemental calcium / 10 min = 1.75 mg elemental calcium/min"), "{}", c.text);
        assert!(c.text.contains("0.93 mg/kg/min x 3.2 kg = 2.98 mg/min"), "{}", c.text);
        assert!(c.text.contains("is a maximum rate, not a duration"), "{}", c.text);
        assert!(c.text.contains("Preparation for the central line"), "{}", c.text);
        assert!(elemental_per_min(c) <= elemental_per_min(b) + 1e-9);
        // 6.4 mg/min of chloride salt (64 mg / 10 min).
        assert_eq!(c.rate, Some(Qty { value: 6.4, unit: "mg/min" }));
    }

    #[test]
    fn child_chloride_is_held_to_9_3_mg_calcium_per_min() {
        // 22 kg: 440 mg chloride = 4.4 mL x 27.3 = 120.12 mg Ca. Ceiling: the lower of 9.3 and
        // 0.93 x 22 = 20.46 -> 9.3 mg/min: 120.12 / 9.3 = 12.92 -> 13 min (salt 4.4 min,
        // shortest 10 min). 120.12 / 13 = 9.24 mg Ca/min.
        let r = rules();
        let mut facts = facts_of(seven(), Gender::Female, vec![ionized(0.85, 1, "ica"), weight(22.0)], vec![]);
        facts.vascular_access = VascularAccess::Central;
        let a = status::assess(&facts, &r);
        let p = plan(&r, &facts, &a.finding.unwrap(), None).unwrap();
        let c = find(&p, "calcium-chloride");
        assert_eq!(minutes_of(c), 13.0, "{}", c.text);
        assert!(c.text.contains("120.12 mg elemental calcium / 13 min = 9.24 mg elemental calcium/min"), "{}", c.text);
    }

    #[test]
    fn no_iv_calcium_salt_passes_the_elemental_ceiling_at_any_weight() {
        // Neonates and 7-year-olds over plausible weights, central line (both salts proposed):
        // elemental Ca per minute never above the lower of 9.3 mg/min and 0.93 mg/kg/min,
        // and never shorter than the 10-min shortest duration.
        let r = rules();
        let ceiling = &r.treatment.calcium_rate[0];
        for (birth, weights) in
            [(born_days_ago(10), vec![1.0, 2.0, 2.5, 3.2, 4.0, 4.5]), (seven(), vec![15.0, 22.0, 30.0, 45.0])]
        {
            for kg in weights {
                let mut facts = facts_of(birth, Gender::Female, vec![ionized(0.70, 1, "ica"), weight(kg)], vec![]);
                facts.vascular_access = VascularAccess::Central;
                let a = status::assess(&facts, &r);
                let p = plan(&r, &facts, &a.finding.unwrap(), None).unwrap();
                if p.issues.iter().any(|i| i.key == "weight") {
                    continue; // implausible for the age: no doses at all
                }
                for key in ["calcium-bolus", "calcium-chloride"] {
                    let x = find(&p, key);
                    let limit = ceiling.max_elemental_mg_per_min.min(ceiling.max_elemental_mg_per_kg_min * kg);
                    assert!(elemental_per_min(x) <= limit + 1e-9, "{key} at {kg} kg: {}", x.text);
                    assert!(minutes_of(x) >= 10.0, "{key} at {kg} kg");
                }
            }
        }
    }

    #[test]
    fn the_elemental_ceiling_is_no_faster_than_the_gluconate_label_and_bnfc() {
        // 9.3 mg/min = the label's 100 mg/min of gluconate x 9.3 mg Ca per 100 mg; 0.93 mg/kg/min
        // = BNFC 0.5 mL/kg in 5 min = 10 mg/kg/min of gluconate x 0.093.
        let r = rules();
        let g = r.products.iter().find(|p| p.id == r.treatment.bolus.product).unwrap();
        let fraction = g.elemental_mg.unwrap() / g.salt_mg.unwrap();
        for c in &r.treatment.calcium_rate {
            assert!(
                c.max_elemental_mg_per_min
                    <= r.calcium_gluconate_administration.max_bolus_rate_pediatric_mg_per_min * fraction + 1e-9
            );
            assert!(close(c.max_elemental_mg_per_kg_min, 10.0 * fraction, 1e-9), "{}", c.max_elemental_mg_per_kg_min);
        }
        for s in r.treatment.bolus.speed.iter().chain(&r.treatment.chloride.speed) {
            assert!(s.max_salt_mg_per_min <= r.calcium_gluconate_administration.max_bolus_rate_pediatric_mg_per_min);
        }
        for s in &r.treatment.magnesium.speed {
            assert!(s.max_salt_mg_per_min <= r.magnesium_sulfate_administration.max_iv_rate_mg_per_min);
        }
    }

    #[test]
    fn magnesium_takes_its_shortest_duration_and_shows_elemental_magnesium_per_min() {
        // 7 years, 22 kg, magnesium low: AHA 50 mg/kg (high end) = 1100 mg = 2.2 mL of 50%
        // = 2.2 x 49.3 = 108.46 mg Mg; salt at 150 mg/min = 7.33 min; shortest 60 min
        // -> 60 min: 108.46 / 60 = 1.81 mg Mg/min, 18.33 mg/min of the salt.
        let r = rules();
        let m = vec![ionized(0.85, 1, "ica"), weight(22.0), lab(Analyte::Magnesium, 0.40, "mmol/L", "mg")];
        let p = full_plan(&r, seven(), m, vec![], VascularAccess::Peripheral);
        let x = find(&p, "magnesium");
        assert!(x.text.contains("give over 60 min"), "{}", x.text);
        assert!(
            x.text.contains("108.46 mg elemental magnesium / 60 min = 1.81 mg elemental magnesium/min"),
            "{}",
            x.text
        );
        assert_eq!(x.rate, Some(Qty { value: 18.3, unit: "mg/min" }));
    }

    #[test]
    fn a_high_phosphate_warns_with_iv_calcium_when_no_total_calcium_is_measured() {
        // 7 years (phosphate range 0.90-1.80 mmol/L, lab-ranges.toml): 3.6 mmol/L is 2.0 x the
        // upper limit; ionized only. IV bolus proposed -> "phosphate-high", High. 1.5 -> none.
        let r = rules();
        for (value, fires) in [(3.6, true), (1.5, false)] {
            let m = vec![ionized(0.85, 1, "ica"), weight(22.0), lab(Analyte::Phosphate, value, "mmol/L", "p")];
            let facts = facts_of(seven(), Gender::Female, m, vec![]);
            let a = status::assess(&facts, &r);
            let p = plan(&r, &facts, &a.finding.unwrap(), None).unwrap();
            assert!(p.proposals.iter().any(|x| x.key == "calcium-bolus"));
            let issue = p.issues.iter().find(|i| i.key == "phosphate-high");
            assert_eq!(issue.is_some(), fires, "{value}");
            if let Some(i) = issue {
                assert_eq!(i.severity, IssueSeverity::High);
                assert!(i.detail.contains("is 2.0 times the upper limit 1.80 mmol/L"), "{}", i.detail);
                assert!(i.detail.contains("No total calcium is in the result window"), "{}", i.detail);
                assert!(!p.issues.iter().any(|i| i.key == "caxp"));
            }
        }
    }

    #[test]
    fn caxp_uses_the_albumin_adjusted_total_calcium() {
        // 13 years, limit 55. Total 8.0 mg/dL with albumin 2.0 g/dL: adjusted 8.0 + 0.8 x (4.0 - 2.0)
        // = 9.6 mg/dL; x phosphate 5.5 mg/dL = 52.8 < 55 unadjusted would be 8.0 x 5.5 = 44; at
        // phosphate 6.0: adjusted 57.6 > 55 fires, unadjusted 48 would not.
        let r = rules();
        for (p_mg, fires) in [(5.5, false), (6.0, true)] {
            let m = vec![
                ionized(0.85, 1, "ica"),
                total_mg(8.0, 1, "tca"),
                albumin_g_dl(2.0, 1, "alb"),
                phosphate_mg(p_mg, 1, "p"),
                weight(45.0),
            ];
            let facts = facts_of(born_days_ago(13 * 365 + 100), Gender::Female, m, vec![]);
            let a = status::assess(&facts, &r);
            let p = plan(&r, &facts, &a.finding.unwrap(), None).unwrap();
            let issue = p.issues.iter().find(|i| i.key == "caxp");
            assert_eq!(issue.is_some(), fires, "phosphate {p_mg}");
            if let Some(i) = issue {
                assert!(i.detail.starts_with("Albumin-adjusted total calcium 9.60 mg/dL"), "{}", i.detail);
                assert!(i.detail.contains("= 58 mg2/dL2, above 55"), "{}", i.detail);
            }
        }
    }

    /// A 7-year-old with chronic kidney disease, high phosphate and a mildly low ionized calcium.
    fn ckd_plan(phosphate: f64) -> TreatmentPlan {
        let r = rules();
        let m = vec![
            ionized(1.05, 1, "ica"),
            weight(22.0),
            lab(Analyte::Phosphate, phosphate, "mmol/L", "p"),
            lab(Analyte::Creatinine, 250.0, "umol/L", "cr"),
            lab(Analyte::PthIntact, 30.0, "pmol/L", "pth"),
        ];
        let events = vec![event(EventKind::Condition, "chronic_kidney_disease", 24, "ckd")];
        full_plan(&r, seven(), m, events, VascularAccess::Unknown)
    }

    #[test]
    fn kidney_disease_with_high_phosphate_gives_the_binder_with_meals_and_defers_calcitriol() {
        // Phosphate 2.9 mmol/L > 1.80 (1.6 x). KDOQI pediatric 6.2 (calcium binder), 9A.1.a
        // (active vitamin D only with phosphorus below the age limit).
        let p = ckd_plan(2.9);
        let o = find(&p, "oral-calcium");
        assert!(o.title.contains("phosphate binder"), "{}", o.title);
        assert!(o.text.contains("WITH a meal or feed"), "{}", o.text);
        assert!(p.issues.iter().any(|i| i.key == "calcitriol-deferred"));
        assert!(p.proposals.iter().all(|x| x.key != "calcitriol"));
        assert!(p.issues.iter().any(|i| i.key == "phosphate-high" && i.severity == IssueSeverity::Moderate));
        // Phosphate back in range: calcitriol for specialist dosing, no binder wording.
        let p = ckd_plan(1.5);
        assert!(p.proposals.iter().any(|x| x.key == "calcitriol"));
        assert!(!find(&p, "oral-calcium").title.contains("binder"));
        assert!(p.issues.iter().all(|i| i.key != "calcitriol-deferred"));
    }

    #[test]
    fn oral_calcium_timing_is_with_meals_and_vitamin_d_is_paired() {
        // 7 years, 22 kg, asymptomatic (oral). 25-OH vitamin D not measured: maintenance
        // 600 IU/day = 600 / 3000 IU per mL (the colecalciferol SmPC strength) = 0.2 mL, on the
        // 0.1 mL step exactly, with the drop/mL warning.
        let r = rules();
        let p = full_plan(&r, seven(), vec![ionized(1.05, 1, "ica"), weight(22.0)], vec![], VascularAccess::Unknown);
        let o = find(&p, "oral-calcium");
        assert!(o.text.contains("Give with feeds or meals"), "{}", o.text);
        assert!(!o.text.contains("30 minutes"), "{}", o.text);
        let v = find(&p, "cholecalciferol");
        assert!(v.title.starts_with("Cholecalciferol (vitamin D3), maintenance"), "{}", v.title);
        assert_eq!(v.product.id, "colecalciferol_oral_solution_3000iu_per_ml");
        assert!(v.text.contains("600 IU once daily = 600 IU / 3000 IU per mL = 0.2 mL: give 0.2 mL of"), "{}", v.text);
        assert!(v.text.contains("(0.2 mL, not 0.2 drops)"), "{}", v.text);
        // The label's licence and excipient travel with the proposal.
        assert!(v.text.contains("children over 12 years of age") && v.text.contains("almond oil"), "{}", v.text);
        assert_eq!(v.dose, Some(Qty { value: 600.0, unit: "[iU]" }));
        let warn = p.issues.iter().find(|i| i.key == "vitamin-d-liquid").expect("liquid warning");
        assert!(warn.detail.starts_with("600 IU a day is 0.2 mL of Colecalciferol"), "{}", warn.detail);
        assert!(!warn.detail.contains("not verified"), "{}", warn.detail);
        assert!(p.issues.iter().all(|i| i.key != "vitamin-d-dose-unmeasurable"));
        // 25-OH vitamin D low (20 nmol/L): the treatment dose, SPEG 6 months-12 years low end
        // 3000 IU = 3000 / 3000 = 1 mL, for 90 days.
        let m = vec![ionized(1.05, 1, "ica"), weight(22.0), lab(Analyte::VitaminD25Oh, 20.0, "nmol/L", "d")];
        let p = full_plan(&r, seven(), m, vec![], VascularAccess::Unknown);
        let v = find(&p, "cholecalciferol");
        assert_eq!(v.dose, Some(Qty { value: 3000.0, unit: "[iU]" }));
        assert_eq!(v.days, Some(90));
        assert!(v.text.contains("= 1 mL: give 1 mL of Colecalciferol"), "{}", v.text);
        assert!(v.title.contains("treatment dose"), "{}", v.title);
        // 25-OH vitamin D normal (80 nmol/L): no vitamin D proposed, no liquid warning.
        let m = vec![ionized(1.05, 1, "ica"), weight(22.0), lab(Analyte::VitaminD25Oh, 80.0, "nmol/L", "d")];
        let p = full_plan(&r, seven(), m, vec![], VascularAccess::Unknown);
        assert!(p.proposals.iter().all(|x| x.key != "cholecalciferol"));
        assert!(p.issues.iter().all(|i| i.key != "vitamin-d-liquid"));
    }

    /// The formulary's two vitamin D liquids, by id.
    fn vitamin_d_liquid(r: &RuleSet, id: &str) -> Product {
        r.products.iter().find(|p| p.id == id).cloned().expect(id)
    }

    #[test]
    fn vitamin_d_volumes_are_rounded_to_the_oral_syringe_step_within_the_tolerance() {
        let r = rules();
        let o = &r.treatment.oral;
        assert_eq!((o.liquid_round_ml, o.rounding_tolerance_pct), (0.1, 10.0));
        let d3 = vitamin_d_liquid(&r, "colecalciferol_oral_solution_3000iu_per_ml");
        let d2 = vitamin_d_liquid(&r, "ergocalciferol_oral_solution_8000iu_per_ml");
        let amount = |m: Result<LiquidMeasure, Vec<String>>| match m {
            Ok(LiquidMeasure::Amount { p, amount, given, .. }) => (p.id.clone(), amount, given),
            Ok(LiquidMeasure::Mark { p, mark }) => panic!("{}: mark {mark}", p.id),
            Err(e) => panic!("{e:?}"),
        };
        // 2000 IU / 3000 IU per mL = 0.667 mL -> 0.7 mL = 2100 IU, 5% above (<= 10%).
        let (id, ml, iu) = amount(measure_vitamin_d(o, &[&d3, &d2], 2000.0));
        assert_eq!(id, d3.id);
        assert!((ml - 0.7).abs() < 1e-9 && (iu - 2100.0).abs() < 1e-6, "{ml} {iu}");
        // 6000 IU / 3000 = 2 mL exactly.
        let (_, ml, iu) = amount(measure_vitamin_d(o, &[&d3, &d2], 6000.0));
        assert!((ml - 2.0).abs() < 1e-9 && (iu - 6000.0).abs() < 1e-6);
        // 8000 IU/mL alone. 3000 IU / 8000 = 0.375 mL -> 0.4 mL = 3200 IU, 6.7% above: measured.
        let (id, ml, iu) = amount(measure_vitamin_d(o, &[&d2], 3000.0));
        assert_eq!(id, d2.id);
        assert!((ml - 0.4).abs() < 1e-9 && (iu - 3200.0).abs() < 1e-6, "{ml} {iu}");
        // 2000 IU / 8000 = 0.25 mL: 0.3 mL = 2400 IU is 20% above (stepped down), 0.2 mL =
        // 1600 IU 20% below: neither within 10%, and 2000 is no syringe mark: not measurable.
        let e = measure_vitamin_d(o, &[&d2], 2000.0).err().expect("0.25 mL is not measurable");
        assert_eq!(e.len(), 1);
        assert!(
            e[0].contains(
                "0.25 mL exactly; in 0.1 mL steps 0.2 mL = 1600 IU (20% below) or 0.3 mL = 2400 IU (20% above)"
            ),
            "{e:?}"
        );
        // 600 IU / 8000 = 0.075 mL: the smallest step, 0.1 mL = 800 IU, is 33% above.
        let e = measure_vitamin_d(o, &[&d2], 600.0).err().expect("0.075 mL is not measurable");
        assert!(e[0].contains("0.075 mL exactly; in 0.1 mL steps 0.1 mL = 800 IU (33% above)"), "{e:?}");
    }

    #[test]
    fn vitamin_d_400_iu_is_the_labelled_syringe_mark_not_a_volume() {
        let r = rules();
        let o = &r.treatment.oral;
        let d3 = vitamin_d_liquid(&r, "colecalciferol_oral_solution_3000iu_per_ml");
        let d2 = vitamin_d_liquid(&r, "ergocalciferol_oral_solution_8000iu_per_ml");
        // 400 IU / 3000 = 0.133 mL -> 0.1 mL = 300 IU, 25% below: not used. 400 IU / 8000 =
        // 0.05 mL -> 0.1 mL = 800 IU, 100% above: no volume; the label's syringe is marked at
        // 400 IU, so the mark measures it exactly.
        match measure_vitamin_d(o, &[&d3, &d2], 400.0) {
            Ok(LiquidMeasure::Mark { p, mark }) => {
                assert_eq!(p.id, d2.id);
                assert!((mark - 400.0).abs() < 1e-9);
            }
            other => panic!("{:?}", other.err()),
        }
        // In a plan: an infant of 4 months without a 25-OH vitamin D, oral calcium, maintenance
        // 400 IU/day (under 1 year) at the syringe mark, 0.05 mL, with the drop/mL warning.
        let p = full_plan(
            &r,
            born_days_ago(120),
            vec![ionized(1.05, 1, "ica"), weight(6.5)],
            vec![],
            VascularAccess::Unknown,
        );
        let v = find(&p, "cholecalciferol");
        assert!(v.title.starts_with("Ergocalciferol (vitamin D2), maintenance dose"), "{}", v.title);
        assert_eq!(v.dose, Some(Qty { value: 400.0, unit: "[iU]" }));
        assert!(
            v.text.contains("400 IU once daily = the 400 IU mark of the syringe supplied with Ergocalciferol"),
            "{}",
            v.text
        );
        assert!(v.text.contains("(400 IU / 8000 IU per mL = 0.05 mL, not 0.05 drops)"), "{}", v.text);
        assert!(v.text.contains("measure it only with that syringe"), "{}", v.text);
        let warn = p.issues.iter().find(|i| i.key == "vitamin-d-liquid").expect("liquid warning");
        assert!(warn.detail.contains("is the 400 IU mark of the syringe supplied with"), "{}", warn.detail);
        assert!(p.issues.iter().all(|i| i.key != "vitamin-d-dose-unmeasurable"));
    }

    #[test]
    fn when_no_vitamin_d_liquid_measures_the_dose_no_volume_is_proposed_and_it_is_flagged() {
        // The 8000 IU/mL liquid alone, without its syringe mark: 400 IU = 0.05 mL cannot be
        // measured in 0.1 mL steps (0.1 mL = 800 IU, 100% above), so the dose is given in IU
        // only, with the instruction, and a warning.
        let mut r = rules();
        r.treatment.vitamin_d.cholecalciferol_product = "ergocalciferol_oral_solution_8000iu_per_ml".into();
        r.treatment.vitamin_d.other_liquid_products.clear();
        for p in &mut r.products {
            p.syringe_marks_iu.clear();
        }
        let p = full_plan(
            &r,
            born_days_ago(120),
            vec![ionized(1.05, 1, "ica"), weight(6.5)],
            vec![],
            VascularAccess::Unknown,
        );
        let v = find(&p, "cholecalciferol");
        assert!(v.title.starts_with("Vitamin D, maintenance dose"), "{}", v.title);
        assert_eq!(v.dose, Some(Qty { value: 400.0, unit: "[iU]" }));
        assert!(v.text.contains("400 IU once daily. No volume is proposed"), "{}", v.text);
        assert!(v.text.contains(&r.treatment.vitamin_d.unmeasurable), "{}", v.text);
        assert!(!v.text.contains("give 0"), "{}", v.text);
        assert!(v.text.contains("0.05 mL exactly; in 0.1 mL steps 0.1 mL = 800 IU (100% above)"), "{}", v.text);
        let i = p.issues.iter().find(|i| i.key == "vitamin-d-dose-unmeasurable").expect("unmeasurable warning");
        assert_eq!(i.severity, IssueSeverity::Moderate);
        assert_eq!(i.mitigation, r.treatment.vitamin_d.unmeasurable);
        // The drop/mL warning still stands: a liquid is in play.
        let warn = p.issues.iter().find(|i| i.key == "vitamin-d-liquid").expect("liquid warning");
        assert!(warn.detail.starts_with("400 IU a day: no volume is proposed."), "{}", warn.detail);
    }

    #[test]
    fn an_unverified_vitamin_d_strength_is_said_in_the_liquid_warning() {
        // The 400 IU/mL product (strength unverified) configured as the only liquid: 600 IU =
        // 1.5 mL, on the step; the warning says the strength is unverified.
        let mut r = rules();
        r.treatment.vitamin_d.cholecalciferol_product = "cholecalciferol_drops_400iu_per_ml".into();
        r.treatment.vitamin_d.other_liquid_products.clear();
        let p = full_plan(&r, seven(), vec![ionized(1.05, 1, "ica"), weight(22.0)], vec![], VascularAccess::Unknown);
        let v = find(&p, "cholecalciferol");
        assert!(v.text.contains("600 IU / 400 IU per mL = 1.5 mL: give 1.5 mL of"), "{}", v.text);
        let warn = p.issues.iter().find(|i| i.key == "vitamin-d-liquid").expect("liquid warning");
        assert!(warn.detail.contains("not verified from its own label"), "{}", warn.detail);
    }

    #[test]
    fn iv_calcium_states_the_step_to_oral_calcium_with_vitamin_d() {
        let r = rules();
        let p = full_plan(&r, seven(), vec![ionized(0.85, 1, "ica"), weight(22.0)], vec![], VascularAccess::Peripheral);
        assert!(p.proposals.iter().any(|x| x.key == "calcium-bolus"));
        assert!(
            p.notes.iter().any(|n| n.starts_with("After the IV calcium") && n.contains("oral calcium with vitamin D")),
            "{:?}",
            p.notes
        );
        assert!(
            p.proposals.iter().any(|x| x.key == "cholecalciferol"),
            "25-OH vitamin D unknown: maintenance with the calcium"
        );
    }

    mod properties {
        use proptest::prelude::*;

        use super::*;

        proptest! {
            #![proptest_config(ProptestConfig::with_cases(64))]
            /// The bolus for a 7-year-old at plausible weights (z within the checks):
            /// the dose is weight x the chosen mg/kg until the cap, never above the cap,
            /// never falls as the weight rises, and volume x strength is the dose.
            #[test]
            fn bolus_dose_is_weight_times_rate_up_to_the_cap(kg in 15.0f64..50.0, more in 0.0f64..10.0) {
                let r = shared_rules();
                let b = &r.treatment.bolus;
                let c = &b.chosen[1];
                let d = r.dose_sources.iter().find(|x| x.id == c.dose_source).expect("the chosen dose source");
                let cap = c.max_single.or(d.max_single).unwrap_or(f64::INFINITY);
                let per_ml = r.products.iter().find(|p| p.id == b.product).and_then(|p| p.salt_mg).expect("strength");
                let per_kg = if d.unit == "mL/kg" { pick(d, c.pick) * per_ml } else { pick(d, c.pick) };
                let dose_at = |w: f64| find(&run(r, seven(), 0.85, Some(w)), "calcium-bolus").dose.as_ref().map(|q| q.value).expect("a dose");
                let here = dose_at(kg);
                prop_assert!((here - (kg * per_kg).min(cap)).abs() <= 0.05 + 1e-9, "{kg} kg: {here}");
                prop_assert!(here <= cap + 1e-9);
                let heavier = (kg + more).min(50.0);
                prop_assert!(dose_at(heavier) + 1e-9 >= here, "the dose fell from {kg} to {heavier} kg");
                let text = find(&run(r, seven(), 0.85, Some(kg)), "calcium-bolus").text.clone();
                let ml: f64 = text.split(" mg = ").nth(1).and_then(|t| t.split(" mL").next()).and_then(|t| t.parse().ok()).expect("a volume");
                prop_assert!((ml * per_ml - here).abs() <= 0.005 * per_ml + 0.05, "{ml} mL x {per_ml} mg/mL != {here} mg");
            }
        }
    }
}

/// Medication records identified by RxNorm or by name, unidentified ones, and an
/// unknown symptom state (issue 13, sections 2 and 6).
#[cfg(test)]
mod record_tests {
    use super::*;
    use crate::clinical::facts::{Code, OpenRecord, Symptom};
    use crate::clinical::status;
    use crate::clinical::testing::*;
    use crate::clinical::time::PartialDate;

    fn seven() -> Option<PartialDate> {
        born_days_ago(7 * 365 + 30)
    }

    fn weight(kg: f64) -> crate::clinical::facts::Measurement {
        lab(Analyte::BodyWeight, kg, "kg", "wt")
    }

    /// A 7-year-old girl of 22 kg with ionized calcium `ica`, the events and open records.
    fn plan_for(ica: f64, events: Vec<CodedEvent>, meds: Vec<OpenRecord>, findings: Vec<OpenRecord>) -> TreatmentPlan {
        let r = rules();
        let mut facts = facts_of(seven(), Gender::Female, vec![ionized(ica, 1, "ica"), weight(22.0)], events);
        facts.unidentified_medications = meds;
        facts.unclassified_findings = findings;
        let a = status::assess(&facts, &r);
        plan(&r, &facts, &a.finding.expect("finding"), None).expect("a plan")
    }

    fn open(hours_ago: i64, in_progress: bool, id: &str) -> OpenRecord {
        OpenRecord {
            when: Some(at(now() - hours_ago * HOUR)),
            in_progress,
            description: format!("urn:test|{id}"),
            source: Source {
                resource_type: "MedicationRequest".into(),
                reference: Some(format!("X/{id}")),
                expression: id.into(),
            },
        }
    }

    /// A completed IV calcium administration of `mg`, 3 h ago, with a code the
    /// formulary products do not hold and the ingredient the code list gives.
    fn given_rxnorm(ingredient: Option<&str>, mg: f64) -> CodedEvent {
        let mut e = event(EventKind::Medication, "calcium_preparations", 3, "rx");
        e.source.resource_type = "MedicationAdministration".into();
        e.code = Code {
            system: "http://www.nlm.nih.gov/research/umls/rxnorm".into(),
            code: "1668250".into(),
            display: "x".into(),
        };
        e.ingredient = ingredient.map(str::to_owned);
        e.dose_mg = Some(mg);
        e
    }

    fn keys(p: &TreatmentPlan) -> Vec<&'static str> {
        p.issues.iter().map(|i| i.key).collect()
    }

    #[test]
    fn an_unidentified_medication_near_the_proposal_is_a_warning_on_it() {
        // Window 24 h (treatment.safety.unidentified_medication_current).
        for (what, rec, fires) in [
            ("an active order written 3 days ago", open(72, true, "a"), true),
            ("a record 20 h ago", open(20, false, "b"), true),
            ("a record 30 h ago, not running", open(30, false, "c"), false),
        ] {
            let p = plan_for(0.85, vec![], vec![rec], vec![]);
            let issue = p.issues.iter().find(|i| i.key == "unidentified-medication");
            assert_eq!(issue.is_some(), fires, "{what}: {:?}", keys(&p));
            if let Some(i) = issue {
                assert_eq!(i.severity, IssueSeverity::Moderate);
                assert!(i.detail.contains("line-compatibility and interaction checks"), "{}", i.detail);
            }
        }
    }

    #[test]
    fn calcium_coded_by_an_ingredient_finds_its_salt_for_the_daily_maximum() {
        // 22 kg: infusion 8 mg/kg/h = 176 mg/h, 4224 mg over 24 h; maximum 13 x 24 x 22 = 6864 mg.
        // 3000 mg gluconate: 4224 + 3000 = 7224 > 6864: fires.
        let p = plan_for(0.85, vec![given_rxnorm(Some("calcium_gluconate"), 3000.0)], vec![], vec![]);
        assert!(keys(&p).contains(&"daily-maximum"), "{:?}", keys(&p));
        // 1000 mg chloride = 1000 x 27.3/100 = 273 mg calcium = 273 / (9.3/100) = 2935.48 mg
        // gluconate equivalent; 4224 + 2935.48 = 7159.48 > 6864: fires, with the conversion shown.
        let p = plan_for(0.85, vec![given_rxnorm(Some("calcium_chloride"), 1000.0)], vec![], vec![]);
        let i = p.issues.iter().find(|i| i.key == "daily-maximum").expect("counted as chloride");
        assert!(i.detail.contains("(2935.48 mg)"), "{}", i.detail);
    }

    #[test]
    fn calcium_of_unknown_salt_makes_the_daily_maximum_a_warning() {
        // No product holds the code and no ingredient is given: not counted (4224 < 6864, so
        // the maximum itself stays silent) and the incomplete count is raised.
        let p = plan_for(0.85, vec![given_rxnorm(None, 3000.0)], vec![], vec![]);
        assert!(!keys(&p).contains(&"daily-maximum"), "{:?}", keys(&p));
        let i = p.issues.iter().find(|i| i.key == "daily-maximum-incomplete").expect("raised");
        assert_eq!(i.severity, IssueSeverity::Moderate);
        assert_eq!(i.implicated.len(), 1);
    }

    #[test]
    fn calcium_given_without_a_dose_in_mg_makes_the_daily_maximum_a_warning() {
        let mut e = given_rxnorm(Some("calcium_gluconate"), 0.0);
        e.dose_mg = None;
        let p = plan_for(0.85, vec![e], vec![], vec![]);
        let i = p.issues.iter().find(|i| i.key == "daily-maximum-incomplete").expect("raised");
        assert!(i.detail.contains("not recorded in mg"), "{}", i.detail);
    }

    #[test]
    fn a_name_match_is_said_on_the_check_it_raised() {
        let mut e = event(EventKind::Medication, "sodium_bicarbonate", 1, "bic");
        e.source.resource_type = "MedicationAdministration".into();
        e.in_progress = true;
        e.by_name = Some("Sodium Bicarbonate 4.2% infusion".into());
        let p = plan_for(0.85, vec![e], vec![], vec![]);
        let i = p.issues.iter().find(|i| i.key == "precipitation").expect("raised");
        assert!(i.detail.contains("identified by name 'Sodium Bicarbonate 4.2% infusion'"), "{}", i.detail);
    }

    #[test]
    fn an_unclassified_finding_makes_the_oral_proposal_carry_the_caution() {
        // Ionized 1.05 (drawn 1 h ago): oral only. Symptom window 72 h (calcium.toml).
        let p = plan_for(1.05, vec![], vec![], vec![open(2, false, "c")]);
        assert!(p.proposals.iter().all(|x| x.route == Route::Oral));
        assert!(keys(&p).contains(&"symptoms-unknown"), "{:?}", keys(&p));
        // 100 h before the draw: outside the window, nothing said.
        let p = plan_for(1.05, vec![], vec![], vec![open(101, false, "c")]);
        assert!(!keys(&p).contains(&"symptoms-unknown"), "{:?}", keys(&p));
        // No unclassified record: nothing said.
        let p = plan_for(1.05, vec![], vec![], vec![]);
        assert!(!keys(&p).contains(&"symptoms-unknown"));
    }

    #[test]
    fn the_status_says_the_symptom_state_is_unknown() {
        let r = rules();
        let mut facts = facts_of(seven(), Gender::Female, vec![ionized(1.05, 1, "ica"), weight(22.0)], vec![]);
        facts.unclassified_findings = vec![open(2, false, "near"), open(101, false, "far")];
        let f = status::assess(&facts, &r).finding.expect("finding");
        // 2 h ago is 1 h from the result (inside 72 h); 101 h ago is 100 h from it (outside).
        assert_eq!(f.unclassified_near.iter().map(Source::label).collect::<Vec<_>>(), vec!["X/near"]);
        assert!(!f.is_symptomatic(), "unknown is not symptomatic");
    }

    #[test]
    fn new_symptoms_make_the_child_symptomatic() {
        for s in [Symptom::Tetany, Symptom::Apnea, Symptom::Hypotension, Symptom::Cyanosis] {
            let r = rules();
            let mut facts = facts_of(seven(), Gender::Female, vec![ionized(1.05, 1, "ica"), weight(22.0)], vec![]);
            let mut f = seizure(Some(2));
            f.symptom = s;
            facts.symptoms.push(f);
            let a = status::assess(&facts, &r);
            let p = plan(&r, &facts, &a.finding.expect("finding"), None).expect("a plan");
            assert!(p.proposals.iter().any(|x| x.key == "calcium-bolus"), "{s:?}");
        }
    }
}
