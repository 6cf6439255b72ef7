//! Loading rule data: embedded TOML defaults, an optional site file layered on
//! top, the merged document checked against the rule schema, then typed.
//!
//! Merge (DEVELOPERS.md: site rule files): tables merge key by key; arrays
//! replace the default, except the code lists (`observation_codes`,
//! `symptom_codes`), where site entries are added and a site entry with the
//! same system and code replaces the default one.

use serde_json::Value;
use sha2::{Digest, Sha256};

use super::model::RuleSet;

/// The embedded default rule files, merged in this order.
pub const DEFAULT_FILES: &[(&str, &str)] = &[
    ("calcium.toml", include_str!("../../rules/calcium.toml")),
    ("analytes.toml", include_str!("../../rules/analytes.toml")),
    ("codes.toml", include_str!("../../rules/codes.toml")),
    ("lab-ranges.toml", include_str!("../../rules/lab-ranges.toml")),
    ("cause-codes.toml", include_str!("../../rules/cause-codes.toml")),
    ("causes.toml", include_str!("../../rules/causes.toml")),
    ("formulary.toml", include_str!("../../rules/formulary.toml")),
    ("growth.toml", include_str!("../../rules/growth.toml")),
    ("treatment.toml", include_str!("../../rules/treatment.toml")),
    ("specimen.toml", include_str!("../../rules/specimen.toml")),
];

/// The JSON Schema every merged rule document must pass.
pub const RULES_SCHEMA: &str = include_str!("../../../fhir-profiles/schemas/rules.schema.json");

/// Lists where site entries are added to the defaults (an entry with the same
/// key replaces the default one); the key of each list.
const ADDITIVE_LISTS: &[(&str, ListKey)] = &[
    ("observation_codes", ListKey::SystemCode),
    ("symptom_codes", ListKey::SystemCode),
    ("code_lists", ListKey::Field("id")),
    ("causes", ListKey::Field("id")),
    ("next_tests", ListKey::Field("analyte")),
    ("unverified", ListKey::None),
    ("products", ListKey::Field("id")),
    ("dose_sources", ListKey::Field("id")),
];

#[derive(Clone, Copy)]
enum ListKey {
    SystemCode,
    Field(&'static str),
    None,
}

/// Why rules could not be loaded.
#[derive(Debug, thiserror::Error)]
pub enum RuleError {
    /// A file is not valid TOML.
    #[error("{file}: not valid TOML: {message}")]
    Syntax {
        /// File name.
        file: String,
        /// Parser message with line and column.
        message: String,
    },
    /// The merged rules break the schema.
    #[error("rule data does not match the rule schema:\n{}", .0.join("\n"))]
    Schema(Vec<String>),
    /// The merged rules are inconsistent.
    #[error("rule data is inconsistent:\n{}", .0.join("\n"))]
    Inconsistent(Vec<String>),
    /// The schema itself does not compile (a build defect).
    #[error("the rule schema does not compile: {0}")]
    BadSchema(String),
}

/// Rules ready for use, with their identity.
#[derive(Debug, Clone)]
pub struct LoadedRules {
    /// The typed rules.
    pub rules: RuleSet,
    /// sha256 of the canonical JSON of the merged document, hex.
    pub sha256: String,
}

impl LoadedRules {
    /// "name version (sha256 abcd1234...)".
    pub fn label(&self) -> String {
        let short = self.sha256.get(..12).unwrap_or(&self.sha256);
        format!("{} {} (sha256 {short})", self.rules.ruleset.name, self.rules.ruleset.version)
    }
}

fn parse_toml(file: &str, text: &str) -> Result<Value, RuleError> {
    let table: toml::Table =
        toml::from_str(text).map_err(|e| RuleError::Syntax { file: file.to_owned(), message: e.to_string() })?;
    serde_json::to_value(table).map_err(|e| RuleError::Syntax { file: file.to_owned(), message: e.to_string() })
}

fn item_key(v: &Value, key: ListKey) -> Option<(String, String)> {
    match key {
        ListKey::SystemCode => Some((v.get("system")?.as_str()?.to_owned(), v.get("code")?.as_str()?.to_owned())),
        ListKey::Field(f) => Some((f.to_owned(), v.get(f)?.as_str()?.to_owned())),
        ListKey::None => None,
    }
}

/// Merge `over` into `base` (see the module docs for the rules).
pub fn merge(base: &mut Value, over: Value, path: &str) {
    match (base, over) {
        (Value::Object(b), Value::Object(o)) => {
            for (k, v) in o {
                let child = if path.is_empty() { k.clone() } else { format!("{path}.{k}") };
                match b.get_mut(&k) {
                    Some(slot) => merge(slot, v, &child),
                    None => {
                        b.insert(k, v);
                    }
                }
            }
        }
        (Value::Array(b), Value::Array(o)) if ADDITIVE_LISTS.iter().any(|(p, _)| *p == path) => {
            let kind = ADDITIVE_LISTS.iter().find(|(p, _)| *p == path).map_or(ListKey::None, |(_, k)| *k);
            for item in o {
                let key = item_key(&item, kind);
                match b.iter_mut().find(|x| key.is_some() && item_key(x, kind) == key) {
                    Some(slot) => *slot = item,
                    None => b.push(item),
                }
            }
        }
        (slot, v) => *slot = v,
    }
}

/// Load the embedded defaults, plus a site file `(name, text)` if given.
pub fn load(site: Option<(&str, &str)>) -> Result<LoadedRules, RuleError> {
    from_document(merged_document(site, SiteName::Record)?)
}

/// Whether the merged document records the site file's name in `ruleset.site`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SiteName {
    /// As loaded for use: `ruleset.site` is the file name unless the file sets it.
    Record,
    /// As the file says, for showing and comparing rule sets value by value.
    AsWritten,
}

/// The embedded defaults merged in order, then the site file over them (unchecked).
pub fn merged_document(site: Option<(&str, &str)>, name: SiteName) -> Result<Value, RuleError> {
    let mut doc = Value::Object(serde_json::Map::new());
    for (file, text) in DEFAULT_FILES {
        merge(&mut doc, parse_toml(file, text)?, "");
    }
    if let Some((file, text)) = site {
        let mut over = parse_toml(file, text)?;
        if name == SiteName::Record {
            // The file's name, not the path as typed: `./site.toml`, `site.toml` and an
            // absolute path to it are the same rule set with the same sha256.
            let file = std::path::Path::new(file).file_name().and_then(|n| n.to_str()).unwrap_or(file);
            if let Some(rs) = over.get_mut("ruleset").and_then(Value::as_object_mut) {
                rs.entry("site").or_insert_with(|| Value::String(file.to_owned()));
            } else if let Some(obj) = over.as_object_mut() {
                obj.insert("ruleset".into(), serde_json::json!({ "site": file }));
            }
        }
        merge(&mut doc, over, "");
    }
    Ok(doc)
}

/// Check and type a merged rule document.
pub fn from_document(doc: Value) -> Result<LoadedRules, RuleError> {
    let schema: Value = serde_json::from_str(RULES_SCHEMA).map_err(|e| RuleError::BadSchema(e.to_string()))?;
    let validator = jsonschema::validator_for(&schema).map_err(|e| RuleError::BadSchema(e.to_string()))?;
    let errors: Vec<String> = validator
        .iter_errors(&doc)
        .map(|e| format!("  at {}: {}", named_path(&doc, e.instance_path().as_str()), describe(&schema, &e)))
        .collect();
    let mut errors = errors;
    if doc.pointer("/texts/advisory").is_some() {
        // Said plainly rather than as the schema's "additional property".
        errors.insert(
            0,
            "  at texts.advisory: the advisory caution is fixed and cannot be replaced or removed by rule data; \
             a site adds its own text after it with texts.site_note"
                .to_owned(),
        );
    }
    if !errors.is_empty() {
        return Err(RuleError::Schema(errors));
    }
    let mut rules: RuleSet =
        serde_json::from_value(doc.clone()).map_err(|e| RuleError::Schema(vec![format!("  {e}")]))?;
    rules.texts.compose();
    consistency(&rules)?;
    // serde_json's map is ordered by key, so this serialisation is canonical.
    let canonical = serde_json::to_vec(&doc).map_err(|e| RuleError::Schema(vec![e.to_string()]))?;
    let sha256 = hex(&Sha256::digest(&canonical));
    Ok(LoadedRules { rules, sha256 })
}

/// The schema error in words; a number out of its range names the range and its unit.
fn describe(schema: &Value, e: &jsonschema::ValidationError<'_>) -> String {
    use jsonschema::error::ValidationErrorKind as K;
    match e.kind() {
        K::Minimum { .. } | K::Maximum { .. } | K::ExclusiveMinimum { .. } | K::ExclusiveMaximum { .. } => {
            let keyword = e.schema_path().as_str();
            let node = keyword.rsplit_once('/').and_then(|(parent, _)| schema.pointer(parent));
            match node {
                Some(n) => format!("{} is outside the plausible range {}", e.instance(), range_text(n)),
                None => e.to_string(),
            }
        }
        K::AdditionalProperties { unexpected } => {
            format!("unknown field {} (see the rule schema for the fields allowed here)", unexpected.join(", "))
        }
        K::Enum { options } => format!("{} is not one of the allowed values {options}", e.instance()),
        _ => e.to_string(),
    }
}

/// "0.0125 to 0.0375 (mmol/L)/(g/L)" from a schema node's bounds and unit.
pub fn range_text(n: &Value) -> String {
    let lower = match (n.get("minimum"), n.get("exclusiveMinimum")) {
        (Some(m), _) => format!("{m} to "),
        (None, Some(m)) => format!("above {m} to "),
        (None, None) => "up to ".to_owned(),
    };
    let upper = match (n.get("maximum"), n.get("exclusiveMaximum")) {
        (Some(m), _) => m.to_string(),
        (None, Some(m)) => format!("below {m}"),
        (None, None) => "any".to_owned(),
    };
    let unit = n.get("unit").and_then(Value::as_str).unwrap_or("");
    format!("{lower}{upper} {unit}").trim_end().to_owned()
}

/// The rule path of a JSON pointer, with an array entry named by its id
/// (`bands[child]`) where it has one, not by its merged index.
pub fn named_path(doc: &Value, pointer: &str) -> String {
    if pointer.is_empty() {
        return "(top level)".to_owned();
    }
    let mut out = String::new();
    let mut node = Some(doc);
    for part in pointer.trim_start_matches('/').split('/') {
        let part = part.replace("~1", "/").replace("~0", "~");
        let index = part.parse::<usize>().ok().filter(|_| node.is_some_and(Value::is_array));
        match index {
            Some(i) => {
                let entry = node.and_then(|n| n.get(i));
                let key = entry.and_then(|e| {
                    ["id", "analyte", "code"].iter().find_map(|k| e.get(*k).and_then(Value::as_str).map(str::to_owned))
                });
                match key {
                    Some(k) => out.push_str(&format!("[{k}]")),
                    None => out.push_str(&format!("[{i}]")),
                }
                node = entry;
            }
            None => {
                if !out.is_empty() {
                    out.push('.');
                }
                out.push_str(&part);
                node = node.and_then(|n| n.get(&part));
            }
        }
    }
    out
}

fn consistency(rules: &RuleSet) -> Result<(), RuleError> {
    let mut problems = Vec::new();
    for band in &rules.bands {
        for (name, i) in [("ionized", &band.ionized), ("total", &band.total), ("adjusted", &band.adjusted)] {
            if i.lower >= i.upper {
                problems.push(format!("  bands.{}.{name}: lower {} is not below upper {}", band.id, i.lower, i.upper));
            }
            for g in &i.grades {
                // A grade at the lower limit covers every low value; above it, it would grade normal ones.
                if g.at_or_below > i.lower {
                    problems.push(format!(
                        "  bands.{}.{name}: grade '{}' threshold {} is above the lower limit {}",
                        band.id, g.grade, g.at_or_below, i.lower
                    ));
                }
            }
        }
    }
    let mut seen = std::collections::BTreeSet::new();
    for c in &rules.observation_codes {
        if !seen.insert((&c.system, &c.code)) {
            problems.push(format!("  observation_codes: {} {} is listed twice", c.system, c.code));
        }
        if rules.analyte(c.analyte).is_none() {
            problems.push(format!(
                "  observation_codes: {} maps to analyte {} which has no [analytes] entry",
                c.code,
                c.analyte.key()
            ));
        }
    }
    for (key, a) in &rules.analytes {
        if crate::clinical::units::lookup(&a.canonical_unit).is_none() {
            problems.push(format!(
                "  analytes.{}: canonical unit '{}' is not an accepted UCUM code",
                key.key(),
                a.canonical_unit
            ));
        }
        if a.plausible.min > a.plausible.max {
            problems.push(format!("  analytes.{}: plausible min above max", key.key()));
        }
    }
    workup_consistency(rules, &mut problems);
    let mut flags = std::collections::BTreeSet::new();
    for f in &rules.specimen.flags {
        if !flags.insert((&f.system, &f.code)) || rules.specimen.flags.iter().filter(|g| g.key == f.key).count() > 1 {
            problems.push(format!("  specimen.flags: {} ({} {}) is listed twice", f.key, f.system, f.code));
        }
    }
    if problems.is_empty() { Ok(()) } else { Err(RuleError::Inconsistent(problems)) }
}

/// Checks of the cause engine's data: every reference resolves, every range
/// is in the canonical unit, the ranges tile the pediatric ages.
fn workup_consistency(rules: &RuleSet, problems: &mut Vec<String>) {
    use crate::clinical::facts::Analyte;
    use crate::rules::model::CodeListKind;
    let list = |id: &str, kind: CodeListKind| rules.code_lists.iter().any(|l| l.id == id && l.kind == kind);
    let mut seen = std::collections::BTreeSet::new();
    for l in &rules.code_lists {
        if !seen.insert(&l.id) {
            problems.push(format!("  code_lists: '{}' is listed twice", l.id));
        }
    }
    let read = |a: Analyte| rules.next_tests.iter().any(|t| t.analyte == a);
    let ranged = |a: Analyte| {
        rules.lab_ranges.iter().any(|r| r.analyte == a) || matches!(a, Analyte::VitaminD25Oh | Analyte::BloodPh)
    };
    for c in &rules.causes {
        if let Some(l) = &c.code_from_list
            && !list(l, CodeListKind::Condition)
        {
            problems.push(format!("  causes.{}: code_from_list '{l}' is not a condition code list", c.id));
        }
        for (k, f) in c.findings.iter().enumerate() {
            let at = format!("  causes.{}.findings[{k}]", c.id);
            for (id, kind) in [
                (&f.condition, CodeListKind::Condition),
                (&f.medication, CodeListKind::Medication),
                (&f.procedure, CodeListKind::Procedure),
            ] {
                if let Some(id) = id
                    && !list(id, kind)
                {
                    problems.push(format!("{at}: no {kind:?} code list '{id}'"));
                }
            }
            if let Some(a) = f.lab {
                if !read(a) {
                    problems.push(format!("{at}: {} has no next_tests entry, so it is never read", a.key()));
                }
                if !ranged(a) {
                    problems.push(format!("{at}: {} has no lab_ranges", a.key()));
                }
            }
            if f.egfr && !read(Analyte::Creatinine) {
                problems.push(format!("{at}: the eGFR needs a creatinine next_tests entry"));
            }
        }
    }
    for t in &rules.next_tests {
        if let Some(code) = &t.code
            && !rules
                .observation_codes
                .iter()
                .any(|c| c.system == code.system && c.code == code.code && c.analyte == t.analyte)
        {
            problems.push(format!(
                "  next_tests.{}: code {} is not an observation code of that analyte",
                t.analyte.key(),
                code.code
            ));
        }
    }
    if rules.vitamin_d_25oh_cutoffs.chosen().is_none() {
        problems.push(format!(
            "  vitamin_d_25oh_cutoffs: default '{}' is not among the options",
            rules.vitamin_d_25oh_cutoffs.default
        ));
    }
    for (k, r) in rules.lab_ranges.iter().enumerate() {
        let canonical = rules.analyte(r.analyte).map(|a| a.canonical_unit.as_str());
        if canonical != Some(r.unit.as_str()) {
            problems.push(format!(
                "  lab_ranges[{k}]: unit {} is not the canonical unit of {}",
                r.unit,
                r.analyte.key()
            ));
        }
        if r.lower > r.upper {
            problems.push(format!("  lab_ranges[{k}]: lower above upper"));
        }
    }
    tiling(rules, problems);
    treatment_consistency(rules, problems);
}

/// Every product, dose source and safety fact the treatment policy names exists,
/// with the kind of dose it is used for.
fn treatment_consistency(rules: &RuleSet, problems: &mut Vec<String>) {
    let t = &rules.treatment;
    let product = |id: &str, at: &str, problems: &mut Vec<String>| {
        if !rules.products.iter().any(|p| p.id == id) {
            problems.push(format!("  treatment.{at}: no product '{id}'"));
        }
    };
    product(&t.bolus.product, "bolus.product", problems);
    product(&t.infusion.product, "infusion.product", problems);
    product(&t.chloride.product, "chloride.product", problems);
    product(&t.oral.liquid_product, "oral.liquid_product", problems);
    product(&t.oral.tablet_product, "oral.tablet_product", problems);
    for id in &t.oral.other_tablet_products {
        product(id, "oral.other_tablet_products", problems);
    }
    if !t.oral.rounding_tolerance_pct.is_finite() || t.oral.rounding_tolerance_pct < 0.0 {
        problems
            .push(format!("  treatment.oral.rounding_tolerance_pct: {} is negative", t.oral.rounding_tolerance_pct));
    }
    product(&t.magnesium.product, "magnesium.product", problems);
    product(&t.vitamin_d.cholecalciferol_product, "vitamin_d.cholecalciferol_product", problems);
    for id in &t.vitamin_d.other_liquid_products {
        product(id, "vitamin_d.other_liquid_products", problems);
    }
    product(&t.vitamin_d.calcitriol_product, "vitamin_d.calcitriol_product", problems);
    let sets: [(&str, &[crate::rules::treatment_model::Chosen], &[String], &str); 7] = [
        ("bolus", &t.bolus.chosen, &t.bolus.also_shown, "bolus"),
        ("infusion", &t.infusion.chosen, &t.infusion.also_shown, "infusion"),
        ("chloride", &t.chloride.chosen, &t.chloride.also_shown, "calcium_chloride_bolus"),
        ("oral", &t.oral.chosen, &t.oral.also_shown, "oral_daily"),
        ("magnesium", &t.magnesium.chosen, &t.magnesium.also_shown, "magnesium"),
        ("vitamin_d", &t.vitamin_d.chosen, &[], "cholecalciferol"),
        ("vitamin_d.maintenance", &t.vitamin_d.maintenance, &[], "cholecalciferol"),
    ];
    for (name, chosen, also, kind) in sets {
        for id in chosen.iter().map(|c| &c.dose_source).chain(also.iter()) {
            match rules.dose_sources.iter().find(|d| &d.id == id) {
                None => problems.push(format!("  treatment.{name}: no dose_sources entry '{id}'")),
                Some(d) if d.kind != kind => {
                    problems.push(format!("  treatment.{name}: dose source '{id}' is a {} range, not {kind}", d.kind))
                }
                Some(_) => {}
            }
        }
    }
    let limit_lists = [("oral.daily_limits", &t.oral.daily_limits), ("safety.ca_x_p_limits", &t.safety.ca_x_p_limits)];
    for (at, limits) in limit_lists {
        if limits.is_empty() {
            problems.push(format!("  treatment.{at}: no limits"));
        }
        for l in limits {
            if rules.safety_sources.get(&l.safety_source).and_then(|s| s.threshold).is_none() {
                problems
                    .push(format!("  treatment.{at}: safety source '{}' with a threshold is missing", l.safety_source));
            }
        }
    }
    for key in [
        "ceftriaxone_neonate_contraindication",
        "phosphate_bicarbonate_precipitation",
        "digoxin",
        "extravasation_calcinosis",
        "no_intra_arterial_or_uac",
        "neonatal_bradycardia_stop",
        "calcium_chloride_rate_and_vein",
    ] {
        if !rules.safety_sources.contains_key(key) {
            problems.push(format!("  safety_sources: '{key}' is read by the safety checks and is missing"));
        }
    }
    // Thresholds the checks compute with: present, positive and in the unit the code assumes.
    for (key, unit) in [("ceftriaxone_neonate_contraindication", "d"), ("calcium_chloride_rate_and_vein", "mL/min")] {
        let Some(s) = rules.safety_sources.get(key) else { continue };
        if !s.threshold.is_some_and(|t| t > 0.0) || s.unit.as_deref() != Some(unit) {
            problems.push(format!(
                "  safety_sources.{key}: the safety checks need a positive threshold in '{unit}' (got {:?} {:?})",
                s.threshold, s.unit
            ));
        }
    }
    for (at, w) in
        [("digoxin_current", &t.safety.digoxin_current), ("bicarbonate_current", &t.safety.bicarbonate_current)]
    {
        if !w.hours.is_finite() || w.hours <= 0.0 {
            problems.push(format!("  treatment.safety.{at}.hours: {} is not positive", w.hours));
        }
    }
    let nf = &t.neonatal_fluid;
    if nf.allowance_ml_per_kg_day.is_empty()
        || nf.allowance_ml_per_kg_day.iter().any(|v| !v.is_finite() || *v < 20.0 || *v > 250.0)
    {
        problems.push(format!(
            "  treatment.neonatal_fluid.allowance_ml_per_kg_day: {:?} must be one or more values of 20-250 mL/kg/day",
            nf.allowance_ml_per_kg_day
        ));
    }
    if !nf.warn_share.is_finite() || nf.warn_share <= 0.0 || nf.warn_share > 1.0 {
        problems
            .push(format!("  treatment.neonatal_fluid.warn_share: {} must be above 0 and at most 1", nf.warn_share));
    }
    if !t.infusion.makeup_ml.is_finite() || t.infusion.makeup_ml <= 0.0 {
        problems.push(format!("  treatment.infusion.makeup_ml: {} is not positive", t.infusion.makeup_ml));
    }
    for id in ["digoxin", "sodium_bicarbonate", "ceftriaxone", "calcium_preparations", "phosphate_preparations"] {
        if !rules.code_lists.iter().any(|l| l.id == id) {
            problems.push(format!("  code_lists: '{id}' is read by the safety checks and is missing"));
        }
    }
    for d in [&t.bolus.diluent, &t.bolus.preferred_diluent] {
        if !t.diluents.iter().any(|x| &x.id == d) {
            problems.push(format!("  treatment.bolus: no diluent '{d}'"));
        }
    }
    for c in &t.vitamin_d.calcitriol_for {
        if !rules.causes.iter().any(|x| &x.id == c) {
            problems.push(format!("  treatment.vitamin_d.calcitriol_for: no cause '{c}'"));
        }
    }
    for c in t.vitamin_d.treat_for.iter().chain(&t.vitamin_d.calcitriol_deferred_for).chain(&t.oral.binder_for) {
        if !rules.causes.iter().any(|x| &x.id == c) {
            problems.push(format!(
                "  treatment (vitamin_d.treat_for, vitamin_d.calcitriol_deferred_for, oral.binder_for): no cause '{c}'"
            ));
        }
    }
    // IV speed: every IV proposal has a shortest duration and a fastest rate, both positive,
    // and every IV calcium salt is held to a positive elemental-calcium ceiling.
    for (at, speeds) in [
        ("bolus.speed", &t.bolus.speed),
        ("chloride.speed", &t.chloride.speed),
        ("magnesium.speed", &t.magnesium.speed),
    ] {
        if speeds.is_empty() {
            problems.push(format!("  treatment.{at}: no entries"));
        }
        for s in speeds.iter() {
            if !(s.min_minutes.is_finite()
                && s.min_minutes > 0.0
                && s.max_salt_mg_per_min.is_finite()
                && s.max_salt_mg_per_min > 0.0)
            {
                problems.push(format!(
                    "  treatment.{at}: min_minutes {} and max_salt_mg_per_min {} must be positive",
                    s.min_minutes, s.max_salt_mg_per_min
                ));
            }
        }
    }
    if t.calcium_rate.is_empty() {
        problems.push("  treatment.calcium_rate: no entries".to_owned());
    }
    // Every age from birth to 19 years has a speed and a ceiling: without one the IV proposal
    // could not be timed and would be left out.
    let spans: [(&str, Vec<&crate::rules::model::AgeSpan>); 4] = [
        ("bolus.speed", t.bolus.speed.iter().map(|x| &x.applies).collect()),
        ("chloride.speed", t.chloride.speed.iter().map(|x| &x.applies).collect()),
        ("magnesium.speed", t.magnesium.speed.iter().map(|x| &x.applies).collect()),
        ("calcium_rate", t.calcium_rate.iter().map(|x| &x.applies).collect()),
    ];
    for (at, list) in spans {
        if let Some(gap) = first_uncovered_age(&list) {
            problems.push(format!("  treatment.{at}: no entry covers age {gap}"));
        }
    }
    for c in &t.calcium_rate {
        if !(c.max_elemental_mg_per_min > 0.0 && c.max_elemental_mg_per_kg_min > 0.0) {
            problems.push(format!(
                "  treatment.calcium_rate: {} mg/min and {} mg/kg/min must be positive",
                c.max_elemental_mg_per_min, c.max_elemental_mg_per_kg_min
            ));
        }
    }
}

/// Every analyte with ranges has exactly one range for each sex on every day
/// from birth to 19 years (checked day by day for a child born 2000-01-01).
/// The first age (birth to 19 years, day by day) that no span covers, described.
fn first_uncovered_age(spans: &[&crate::rules::model::AgeSpan]) -> Option<String> {
    use crate::clinical::bands::at_least;
    use crate::clinical::time::{Age, CivilDate};
    let birth = CivilDate::new(2000, 1, 1)?;
    for day in 0..(19 * 365 + 4) {
        let on = CivilDate::from_days_since_epoch(birth.days_since_epoch() + day);
        let Some(age) = Age::between(birth, on) else { continue };
        if age.years >= 19 {
            break;
        }
        if !spans.iter().any(|s| at_least(age, s.from) && !at_least(age, s.until)) {
            return Some(age.describe());
        }
    }
    None
}

fn tiling(rules: &RuleSet, problems: &mut Vec<String>) {
    use crate::clinical::time::{Age, CivilDate};
    use crate::rules::model::{AgeBound, AgeUnit, SexRestriction};
    let at_least = |age: Age, b: AgeBound| {
        let n = match b.unit {
            AgeUnit::Days => age.days,
            AgeUnit::Months => age.months,
            AgeUnit::Years => age.years,
        };
        n >= i64::from(b.value)
    };
    let Some(birth) = CivilDate::new(2000, 1, 1) else { return };
    let mut analytes: Vec<_> = rules.lab_ranges.iter().map(|r| r.analyte).collect();
    analytes.sort();
    analytes.dedup();
    for a in analytes {
        let mut reported = false;
        for day in 0..(19 * 365 + 4) {
            let on = CivilDate::from_days_since_epoch(birth.days_since_epoch() + day);
            let Some(age) = Age::between(birth, on) else { continue };
            if age.years >= 19 {
                break;
            }
            for sex in [SexRestriction::Male, SexRestriction::Female] {
                let n = rules
                    .lab_ranges
                    .iter()
                    .filter(|r| r.analyte == a && (r.sex == SexRestriction::Any || r.sex == sex))
                    .filter(|r| at_least(age, r.from) && !at_least(age, r.until))
                    .count();
                if n != 1 && !reported {
                    problems.push(format!(
                        "  lab_ranges: {} has {n} ranges for {sex:?} at age {}",
                        a.key(),
                        age.describe()
                    ));
                    reported = true;
                }
            }
        }
    }
}

fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_iv_speed_list_must_cover_every_age() {
        use crate::rules::model::{AgeBound, AgeSpan, AgeUnit};
        let span = |from: (i32, AgeUnit), until: (i32, AgeUnit)| AgeSpan {
            from: AgeBound { value: from.0 as _, unit: from.1 },
            until: AgeBound { value: until.0 as _, unit: until.1 },
        };
        let neonate = span((0, AgeUnit::Days), (29, AgeUnit::Days));
        let rest = span((29, AgeUnit::Days), (19, AgeUnit::Years));
        assert_eq!(first_uncovered_age(&[&neonate, &rest]), None);
        assert!(first_uncovered_age(&[&neonate]).is_some(), "a neonate-only list leaves children without a speed");
        assert!(first_uncovered_age(&[&rest]).is_some(), "neonates not covered");
        // The shipped rules cover every age (they load).
        let t = &load(None).unwrap().rules.treatment;
        assert_eq!(first_uncovered_age(&t.chloride.speed.iter().map(|x| &x.applies).collect::<Vec<_>>()), None);
    }

    #[test]
    fn the_reviews_out_of_range_values_are_refused_with_the_range() {
        // Each passed before the ranges: a negative and a zero dose cap, the SI albumin
        // slope 1000x too large (0.02 -> 20), ionized limits typed in mg/dL (4.4 = 1.1 mmol/L).
        let cases = [
            (
                "[treatment.chloride]\nchosen = [ { applies = { from = { value = 0, unit = \"d\" }, until = { value = 19, unit = \"a\" } }, dose_source = \"aha_pals_ca_chloride\", pick = \"low\", max_single = -1000.0 } ]\n",
                "max_single: -1000.0 is outside the plausible range above 0 to 10000 mg",
            ),
            (
                "[treatment.chloride]\nchosen = [ { applies = { from = { value = 0, unit = \"d\" }, until = { value = 19, unit = \"a\" } }, dose_source = \"aha_pals_ca_chloride\", pick = \"low\", max_single = 0.0 } ]\n",
                "outside the plausible range above 0 to 10000 mg",
            ),
            (
                "[albumin_adjustment]\nsi_slope_mmol_l_per_g_l = 20.0\n",
                "albumin_adjustment.si_slope_mmol_l_per_g_l: 20.0 is outside the plausible range 0.0125 to 0.0375 (mmol/L)/(g/L)",
            ),
        ];
        for (site, want) in cases {
            let err = load(Some(("site.toml", site))).unwrap_err().to_string();
            assert!(err.contains(want), "{site}: {err}");
        }
        let mut doc = default_document();
        doc["bands"][3]["ionized"]["lower"] = serde_json::json!(4.4);
        let err = from_document(doc).unwrap_err().to_string();
        assert!(
            err.contains("bands[child].ionized.lower: 4.4 is outside the plausible range 0.5 to 2.0 mmol/L"),
            "{err}"
        );
    }

    #[test]
    fn the_sha256_does_not_depend_on_how_the_path_was_typed() {
        let text = "[windows]\nalbumin_pairing_hours = 6\n";
        let hashes: Vec<String> = ["site.toml", "./site.toml", "/srv/rules/site.toml", "rules/../site.toml"]
            .iter()
            .map(|p| load(Some((p, text))).unwrap().sha256)
            .collect();
        assert!(hashes.windows(2).all(|w| w[0] == w[1]), "{hashes:?}");
        assert_eq!(load(Some(("./site.toml", text))).unwrap().rules.ruleset.site.as_deref(), Some("site.toml"));
    }

    #[test]
    fn embedded_defaults_load() {
        let loaded = load(None).unwrap();
        assert_eq!(loaded.rules.ruleset.name, "calcium-cds-default");
        assert_eq!(loaded.sha256.len(), 64);
        assert!(!loaded.rules.bands.is_empty());
    }

    #[test]
    fn site_file_overrides_a_value_and_adds_a_local_code() {
        let site = r#"
            [ruleset]
            version = "site-1"
            [windows]
            albumin_pairing_hours = 6
            [[observation_codes]]
            system = "urn:oid:1.2.3.4.5"
            code = "ICA-LOCAL"
            display = "Ionized calcium (local code)"
            analyte = "calcium_ionized"
            property = "substance_concentration"
            specimen = "blood"
            source = "Site laboratory catalogue"
        "#;
        let base = load(None).unwrap();
        let loaded = load(Some(("site.toml", site))).unwrap();
        assert_eq!(loaded.rules.windows.albumin_pairing_hours, 6.0);
        assert_eq!(loaded.rules.ruleset.version, "site-1");
        assert_eq!(loaded.rules.ruleset.site.as_deref(), Some("site.toml"));
        assert_eq!(loaded.rules.observation_codes.len(), base.rules.observation_codes.len() + 1);
        assert_ne!(loaded.sha256, base.sha256);
    }

    #[test]
    fn the_advisory_caution_is_fixed_and_a_site_note_follows_it() {
        let base = load(None).unwrap();
        assert_eq!(base.rules.texts.advisory, super::super::model::ADVISORY_CAUTION);
        let err = load(Some(("site.toml", "[texts]\nadvisory = \"Just do it.\"\n"))).unwrap_err();
        assert!(err.to_string().contains("texts.advisory: the advisory caution is fixed"), "{err}");
        // An empty replacement is refused the same way (it would remove the caution).
        assert!(load(Some(("site.toml", "[texts]\nadvisory = \"\"\n"))).is_err());
        let noted = load(Some(("site.toml", "[texts]\nsite_note = \"Call pharmacy on 4411.\"\n"))).unwrap();
        assert_eq!(
            noted.rules.texts.advisory,
            format!("{} Call pharmacy on 4411.", super::super::model::ADVISORY_CAUTION)
        );
    }

    #[test]
    fn bad_site_files_are_refused_with_the_place() {
        let err = load(Some(("site.toml", "[windows\n"))).unwrap_err();
        assert!(matches!(err, RuleError::Syntax { .. }), "{err}");
        let err = load(Some(("site.toml", "[windows]\nalbumin_pairing_hours = \"six\"\n"))).unwrap_err();
        assert!(err.to_string().contains("windows.albumin_pairing_hours"), "{err}");
        let err = load(Some(("site.toml", "[[bands]]\nid = \"x\"\n"))).unwrap_err();
        assert!(matches!(err, RuleError::Schema(_)), "{err}");
        let inconsistent = "[bands.0]\n";
        assert!(load(Some(("site.toml", inconsistent))).is_err());
    }

    #[test]
    fn ionized_intervals_are_about_half_of_total_in_every_band() {
        // Fact of the trade (common practice): roughly half of total calcium is
        // protein bound and 40-60% is ionized. A band whose ionized and total
        // limits break that ratio has a unit or typing error.
        let rules = load(None).unwrap().rules;
        for band in &rules.bands {
            for (ion, tot) in [(band.ionized.lower, band.total.lower), (band.ionized.upper, band.total.upper)] {
                let ratio = ion / tot;
                assert!((0.40..=0.60).contains(&ratio), "{}: ionized {ion} / total {tot} = {ratio:.2}", band.id);
            }
        }
    }

    #[test]
    fn a_site_file_naming_an_unknown_dose_source_is_refused() {
        let site = "[treatment.bolus]\nalso_shown = [\"no_such_source\"]\n";
        let err = load(Some(("site.toml", site))).unwrap_err();
        assert!(err.to_string().contains("no dose_sources entry 'no_such_source'"), "{err}");
        let site = "[treatment.bolus]\nalso_shown = [\"us_label_ca_gluconate_neonate_infusion\"]\n";
        let err = load(Some(("site.toml", site))).unwrap_err();
        assert!(err.to_string().contains("is a infusion range, not bolus"), "{err}");
    }

    /// The merged default documents, to break one value at a time.
    fn default_document() -> Value {
        let mut doc = Value::Object(serde_json::Map::new());
        for (name, text) in DEFAULT_FILES {
            merge(&mut doc, parse_toml(name, text).unwrap(), "");
        }
        doc
    }

    #[test]
    fn a_missing_or_unitless_safety_threshold_is_inconsistent() {
        for (key, field) in [
            ("ceftriaxone_neonate_contraindication", "threshold"),
            ("calcium_chloride_rate_and_vein", "threshold"),
            ("ceftriaxone_neonate_contraindication", "unit"),
            ("calcium_chloride_rate_and_vein", "unit"),
        ] {
            let mut doc = default_document();
            doc["safety_sources"][key].as_object_mut().unwrap().remove(field);
            let err = from_document(doc).unwrap_err();
            if field == "unit" {
                // A threshold without its unit is refused by the schema (dependentRequired).
                assert!(err.to_string().contains(&format!("safety_sources.{key}: \"unit\" is a required")), "{err}");
                continue;
            }
            assert!(matches!(err, RuleError::Inconsistent(_)), "{key}.{field}: {err}");
            assert!(err.to_string().contains(&format!("safety_sources.{key}: the safety checks need")), "{err}");
        }
    }

    #[test]
    fn a_caxp_limit_without_a_threshold_is_inconsistent() {
        let mut doc = default_document();
        doc["safety_sources"]["ca_x_p_under_12y"].as_object_mut().unwrap().remove("threshold");
        let err = from_document(doc).unwrap_err();
        assert!(err.to_string().contains("treatment.safety.ca_x_p_limits: safety source 'ca_x_p_under_12y'"), "{err}");
    }

    #[test]
    fn grade_above_lower_limit_is_inconsistent() {
        let mut doc = Value::Object(serde_json::Map::new());
        for (name, text) in DEFAULT_FILES {
            merge(&mut doc, parse_toml(name, text).unwrap(), "");
        }
        // 1.4 mmol/L is within the plausible range of a grade but above every band's lower limit.
        doc["bands"][0]["ionized"]["grades"][0]["at_or_below"] = serde_json::json!(1.4);
        let err = from_document(doc).unwrap_err();
        assert!(matches!(err, RuleError::Inconsistent(_)), "{err}");
    }

    #[test]
    fn a_specimen_flag_listed_twice_is_inconsistent() {
        let mut doc = Value::Object(serde_json::Map::new());
        for (name, text) in DEFAULT_FILES {
            merge(&mut doc, parse_toml(name, text).unwrap(), "");
        }
        let flags = doc["specimen"]["flags"].as_array_mut().unwrap();
        let copy = flags[0].clone();
        flags.push(copy);
        let err = from_document(doc).unwrap_err();
        assert!(err.to_string().contains("specimen.flags: clotted"), "{err}");
    }

    #[test]
    fn no_default_rule_file_names_a_local_path() {
        // Source texts reach the output (advisories show their basis): they cite
        // publications, labels and listings, never a file on a developer's machine.
        for (name, text) in DEFAULT_FILES {
            for (n, line) in text.lines().enumerate() {
                assert!(!line.contains("/work/") && !line.contains("shared/reference"), "{name}:{}: {line}", n + 1);
            }
        }
    }
}
