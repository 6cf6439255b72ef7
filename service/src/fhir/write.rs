//! Assessment -> FHIR R4 resources: a collection Bundle holding a
//! GuidanceResponse, the derived albumin-adjusted Observation, a DetectedIssue
//! for hypocalcemia, an OperationOutcome of what was not used, the service as
//! a Device, and a Provenance.
//!
//! Output is deterministic: ids are derived from the request content, the
//! evaluation time and the rule-set hash, so the same input and clock give
//! byte-identical output.

use serde_json::{Value, json};
use sha2::{Digest, Sha256};

use super::datetime::format_instant;
use super::outcome::{Issue, IssueCode, IssueSeverityLevel, operation_outcome};
use super::read::{Ingested, InputIdentifier, UCUM};
use crate::clinical::facts::{Analyte, Source};
use crate::clinical::format::{num, value_with_mg_dl};
use crate::clinical::status::{Assessment, CalciumFinding, Classification, DerivedAdjusted, GuidanceStatus};
use crate::clinical::treatment::TreatmentPlan;
use crate::clinical::workup::Workup;
use crate::rules::LoadedRules;

/// v3 ObservationInterpretation.
const INTERPRETATION: &str = "http://terminology.hl7.org/CodeSystem/v3-ObservationInterpretation";
/// Observation category codes.
const OBS_CATEGORY: &str = "http://terminology.hl7.org/CodeSystem/observation-category";
/// Provenance participant types (R4).
const PARTICIPANT: &str = "http://terminology.hl7.org/CodeSystem/provenance-participant-type";

/// Every resource type a result Bundle can hold, in the order they appear.
/// The one list the result Bundle is checked against (in debug builds), the
/// OperationDefinition's `return` documentation and the
/// CapabilityStatement's resource entries are made from; a test compares it
/// with the types in the answers of every example and case.
pub const RESULT_RESOURCE_TYPES: &[&str] = &[
    "GuidanceResponse",
    "Observation",
    "DetectedIssue",
    "ClinicalImpression",
    "ServiceRequest",
    "MedicationRequest",
    "RequestGroup",
    "Parameters",
    "OperationOutcome",
    "Device",
    "Provenance",
];

/// What the writer needs besides the assessment.
#[derive(Debug, Clone)]
pub struct OutputContext<'a> {
    /// Rules used.
    pub rules: &'a LoadedRules,
    /// Service version.
    pub software_version: &'a str,
    /// Base of our canonical URLs.
    pub canonical_base: &'a str,
    /// Evaluation time, unix seconds.
    pub now: i64,
    /// Digest of the request (canonical JSON), for ids.
    pub request_digest: [u8; 32],
    /// Identifiers of the input entries that have a `fullUrl` but no id.
    pub identifiers: &'a std::collections::HashMap<String, InputIdentifier>,
}

impl OutputContext<'_> {
    /// A deterministic UUID for one output resource.
    pub fn uuid(&self, kind: &str) -> String {
        let mut h = Sha256::new();
        h.update(self.request_digest);
        h.update(self.now.to_be_bytes());
        h.update(self.rules.sha256.as_bytes());
        h.update(kind.as_bytes());
        let d = h.finalize();
        let mut bytes = [0u8; 16];
        bytes.copy_from_slice(&d[..16]);
        // Shape it as a UUID (version nibble 5, RFC 4122 variant) so that
        // urn:uuid fullUrls are well formed.
        bytes[6] = (bytes[6] & 0x0f) | 0x50;
        bytes[8] = (bytes[8] & 0x3f) | 0x80;
        const DIGITS: &[u8; 16] = b"0123456789abcdef";
        let mut hex = String::with_capacity(32);
        for b in bytes {
            hex.push(char::from(DIGITS[usize::from(b >> 4)]));
            hex.push(char::from(DIGITS[usize::from(b & 0x0f)]));
        }
        format!("{}-{}-{}-{}-{}", &hex[..8], &hex[8..12], &hex[12..16], &hex[16..20], &hex[20..32])
    }
}

/// sha256 of a request document in its canonical serialisation.
pub fn request_digest(doc: &Value) -> [u8; 32] {
    let bytes = serde_json::to_vec(doc).unwrap_or_default();
    Sha256::digest(bytes).into()
}

/// The `Type/id` an input reference can be stored as: a relative `Type/id`
/// as it is; the `Type/id` tail of a RESTful absolute URL (FHIR R4 3.1.0.1.2:
/// `[base]/[type]/[id]`, optionally `/_history/[vid]`) of the same type;
/// otherwise (a `urn:uuid` or `urn:oid` fullUrl, a URL of another shape) none,
/// since it would point nowhere once the result is stored.
pub fn storable(reference: &str, resource_type: &str) -> Option<String> {
    if reference.starts_with("urn:") || reference.starts_with('#') {
        return None;
    }
    let path = match reference.split_once("://") {
        Some((_, rest)) => rest,
        None => reference,
    };
    let path = match path.split_once("/_history/") {
        Some((head, _)) => head,
        None => path,
    };
    let mut parts = path.rsplit('/');
    let id = parts.next()?;
    let ty = parts.next()?;
    let relative_ok = reference.contains("://") || parts.next().is_none();
    let id_ok = (1..=64).contains(&id.len()) && id.bytes().all(|b| b.is_ascii_alphanumeric() || b == b'-' || b == b'.');
    (relative_ok && id_ok && ty == resource_type).then(|| format!("{ty}/{id}"))
}

impl OutputContext<'_> {
    /// A Reference to an input resource that still resolves once the result
    /// is stored: `Type/id` where the input has one; else the input's business
    /// identifier with a display; else a display only. The display names the
    /// request location and its `fullUrl`, so the caller can match it up.
    pub fn reference(&self, source: &Source) -> Value {
        let ty = source.resource_type.as_str();
        if let Some(r) = source.reference.as_deref().and_then(|r| storable(r, ty)) {
            return json!({ "reference": r, "type": ty });
        }
        let display = match source.reference.as_deref() {
            Some(url) => format!("{ty} at {} in the request (fullUrl {url}; no id)", source.expression),
            None => format!("{ty} at {} in the request (no id)", source.expression),
        };
        let mut out = json!({ "type": ty, "display": display });
        if let Some(i) = source.reference.as_deref().and_then(|url| self.identifiers.get(url)) {
            let mut identifier = json!({ "value": i.value });
            if let Some(system) = &i.system {
                identifier["system"] = json!(system);
            }
            out["identifier"] = identifier;
        }
        out
    }
}

fn round(v: f64, decimals: i32) -> f64 {
    let f = 10f64.powi(decimals);
    (v * f).round() / f
}

fn quantity_mmol(v: f64) -> Value {
    json!({ "value": round(v, 2), "unit": "mmol/L", "system": UCUM, "code": "mmol/L" })
}

fn effective(text: &str) -> (&'static str, Value) {
    // Period effective times are carried as "start/end" text.
    match text.split_once('/') {
        Some((start, end)) => {
            let mut p = serde_json::Map::new();
            if !start.is_empty() {
                p.insert("start".into(), json!(start));
            }
            if !end.is_empty() {
                p.insert("end".into(), json!(end));
            }
            ("effectivePeriod", Value::Object(p))
        }
        None => ("effectiveDateTime", json!(text)),
    }
}

/// Build the result Bundle.
pub fn result_bundle(
    ctx: &OutputContext<'_>,
    ingested: &Ingested,
    a: &Assessment,
    workup: Option<&Workup>,
    treatment: Option<&TreatmentPlan>,
    explain: Option<&[crate::clinical::explain::Step]>,
) -> Value {
    let now = format_instant(ctx.now);
    let rules = &ctx.rules.rules;
    let id = |k: &str| ctx.uuid(k);
    let urn = |k: &str| format!("urn:uuid:{}", ctx.uuid(k));
    let subject = ctx.reference(&ingested.facts.patient.source);
    let device = json!({ "reference": urn("device"), "type": "Device" });
    let mut entries = Vec::new();
    let mut targets = Vec::new();

    // Derived albumin-adjusted Observation.
    if let Some(d) = &a.derived {
        let obs = derived_observation(ctx, d, &subject, &device, &now);
        targets.push(json!({ "reference": urn("adjusted-calcium"), "type": "Observation" }));
        entries.push(entry(urn("adjusted-calcium"), obs));
    }

    // DetectedIssue for hypocalcemia.
    let low = a.finding.as_ref().filter(|f| f.is_low());
    if let Some(f) = low {
        let mut evidence_refs: Vec<Value> = f.evidence.iter().map(|s| ctx.reference(s)).collect();
        if a.derived.is_some() {
            evidence_refs.insert(0, json!({ "reference": urn("adjusted-calcium"), "type": "Observation" }));
        }
        let mut code = json!({ "text": "Hypocalcemia" });
        if let Some(c) = &rules.output_codes.hypocalcemia {
            code["coding"] = json!([{ "system": c.system, "code": c.code, "display": c.display }]);
        }
        let issue = json!({
            "resourceType": "DetectedIssue",
            "id": id("hypocalcemia"),
            "status": "preliminary",
            "code": code,
            "severity": f.severity.map_or("low", |s| s.code()),
            "patient": subject,
            "identifiedDateTime": now,
            "author": device,
            "evidence": [{ "detail": evidence_refs }],
            "detail": issue_detail(ctx, f, a),
        });
        targets.push(json!({ "reference": urn("hypocalcemia"), "type": "DetectedIssue" }));
        entries.push(entry(urn("hypocalcemia"), issue));
    }

    // Specimen problems (clotted, hemolyzed, specimen not read, ...).
    let so = super::write_specimen::specimen_output(ctx, &subject, &device, &now, a);
    targets.extend(so.targets.iter().cloned());
    entries.extend(so.entries);

    // Work-up: causes and next tests.
    let mut wo = match (workup, low) {
        (Some(w), Some(f)) => Some(super::write_workup::workup_output(ctx, &subject, &device, &now, f, w)),
        _ => None,
    };
    if let Some(wo) = &mut wo {
        entries.append(&mut wo.entries);
        targets.append(&mut wo.targets);
    }
    // Treatment proposals and safety issues.
    let calcium_ref = a.finding.as_ref().and_then(|f| f.evidence.first()).map(|s| ctx.reference(s));
    let mut to = treatment
        .map(|t| super::write_treatment::treatment_output(ctx, &subject, &device, &now, calcium_ref.as_ref(), t));
    if let Some(to) = &mut to {
        entries.append(&mut to.entries);
        targets.append(&mut to.targets);
    }
    // One RequestGroup orders every proposal: treatment first, then next tests.
    let mut actions: Vec<Value> = Vec::new();
    if let Some(to) = &mut to {
        actions.append(&mut to.actions);
    }
    if let Some(wo) = &mut wo {
        actions.append(&mut wo.actions);
    }
    let plan_ref = (!actions.is_empty()).then(|| json!({ "reference": urn("plan"), "type": "RequestGroup" }));
    if plan_ref.is_some() {
        let mut group = json!({
            "resourceType": "RequestGroup",
            "id": id("plan"),
            "status": "draft",
            "intent": "proposal",
            "subject": subject,
            "authoredOn": now,
            "author": device,
        });
        group["action"] = Value::Array(actions);
        group["note"] = json!([{ "text": rules.texts.advisory }]);
        entries.push(entry(urn("plan"), group));
        targets.push(json!({ "reference": urn("plan"), "type": "RequestGroup" }));
    }

    // OperationOutcome of everything not used.
    let mut issues: Vec<Issue> = ingested
        .set_aside
        .iter()
        .map(|s| Issue {
            severity: s.severity,
            code: s.code,
            expression: vec![s.expression.clone()],
            diagnostics: format!("{}: {}", s.resource, s.reason),
        })
        .collect();
    issues.extend(a.unused.iter().map(|u| Issue {
        severity: IssueSeverityLevel::Information,
        code: IssueCode::Informational,
        expression: vec![u.source.expression.clone()],
        diagnostics: format!("{}: not used: {}", u.source.label(), u.reason),
    }));
    if issues.is_empty() {
        issues.push(Issue {
            severity: IssueSeverityLevel::Information,
            code: IssueCode::Informational,
            expression: Vec::new(),
            diagnostics: "Every input in the request was read; none was set aside.".into(),
        });
    }
    let oo = operation_outcome(Some(&id("outcome")), &issues);
    targets.push(json!({ "reference": urn("outcome"), "type": "OperationOutcome" }));

    // GuidanceResponse first.
    let mut notes = vec![json!({ "text": summary(ctx, a) })];
    if !a.basis.is_empty() {
        notes.push(json!({ "text": format!("Basis: {}", a.basis.join(" ")) }));
    }
    for c in &a.cautions {
        notes.push(json!({ "text": format!("Caution: {c}") }));
    }
    for n in &so.notes {
        notes.push(json!({ "text": n }));
    }
    for n in &a.data_needs {
        notes.push(json!({ "text": format!("Data needed ({}): {}", analyte_label(ctx, n.analyte), n.reason) }));
    }
    if let Some(wo) = &wo {
        for n in &wo.notes {
            notes.push(json!({ "text": format!("Work-up: {n}") }));
        }
    }
    if let Some(to) = &to {
        for n in &to.notes {
            notes.push(json!({ "text": format!("Treatment: {n}") }));
        }
    }
    notes.push(json!({ "text": rules.texts.advisory }));
    notes.push(json!({ "text": format!("Rule set: {}.", ctx.rules.label()) }));
    let mut gr = json!({
        "resourceType": "GuidanceResponse",
        "id": id("guidance"),
        "moduleUri": format!("{}/OperationDefinition/assess", ctx.canonical_base),
        "status": a.status.code(),
        "subject": subject,
        "occurrenceDateTime": now,
        "performer": device,
        "note": notes,
        "evaluationMessage": [{ "reference": urn("outcome"), "type": "OperationOutcome" }],
    });
    if let Some(b) = &ingested.bundle_id {
        gr["requestIdentifier"] = json!({ "value": b });
    }
    let mut requirements = data_requirements(ctx, a);
    if let Some(wo) = &wo {
        requirements.extend(wo.data_requirements.iter().cloned());
        if let Some(p) = &wo.output_parameters {
            gr["outputParameters"] = p.clone();
        }
    }
    if !requirements.is_empty() {
        gr["dataRequirement"] = Value::Array(requirements);
    }
    if let Some(r) = &plan_ref {
        gr["result"] = r.clone();
    }
    targets.insert(0, json!({ "reference": urn("guidance"), "type": "GuidanceResponse" }));
    entries.insert(0, entry(urn("guidance"), gr));
    entries.push(entry(urn("outcome"), oo));

    // The explain trace, when asked for.
    if let Some(steps) = explain {
        entries.push(entry(urn("explain"), super::write_explain::parameters(ctx, steps)));
    }

    // The service as a Device, and Provenance.
    entries.push(json!({
        "fullUrl": urn("device"),
        "resource": {
            "resourceType": "Device",
            "id": id("device"),
            "deviceName": [{ "name": "calcium-cds", "type": "manufacturer-name" }],
            "type": { "text": "Clinical decision support service (software)" },
            "version": [{ "value": ctx.software_version }],
            "note": [{ "text": format!("Rule set {}.", ctx.rules.label()) }],
        }
    }));
    let mut used: Vec<&Source> = Vec::new();
    if let Some(f) = &a.finding {
        used.extend(f.evidence.iter());
    }
    if let Some(w) = treatment.and_then(|t| t.weight.as_ref()) {
        used.push(&w.source);
    }
    used.push(&ingested.facts.patient.source);
    let entities: Vec<Value> =
        used.into_iter().map(|s| json!({ "role": "source", "what": ctx.reference(s) })).collect();
    entries.push(json!({
        "fullUrl": urn("provenance"),
        "resource": {
            "resourceType": "Provenance",
            "id": id("provenance"),
            "target": targets,
            "recorded": now,
            "policy": [format!("{}/rules/{}/{}?sha256={}", ctx.canonical_base, rules.ruleset.name, rules.ruleset.version, ctx.rules.sha256)],
            "activity": { "text": "Calcium status assessment (calcium-cds)" },
            "agent": [{
                "type": { "coding": [{ "system": PARTICIPANT, "code": "assembler", "display": "Assembler" }] },
                "who": device,
            }],
            "entity": entities,
        }
    }));

    let mut bundle = json!({
        "resourceType": "Bundle",
        "id": id("bundle"),
        "type": "collection",
        "timestamp": now,
    });
    // The declared list is the one the OperationDefinition and CapabilityStatement
    // publish: a type missing from it is a programming error (and the answers
    // of every case are compared with it in tests/api/references.rs).
    debug_assert!(
        entries
            .iter()
            .all(|e| e["resource"]["resourceType"].as_str().is_some_and(|t| RESULT_RESOURCE_TYPES.contains(&t))),
        "a result entry of a type missing from RESULT_RESOURCE_TYPES"
    );
    // Moved in, not copied: `json!` would serialise every entry into a new Value.
    bundle["entry"] = Value::Array(entries);
    bundle
}

/// A Bundle entry; the resource is moved in (a `json!` interpolation would copy it).
pub fn entry(full_url: String, resource: Value) -> Value {
    let mut m = serde_json::Map::with_capacity(2);
    m.insert("fullUrl".into(), Value::String(full_url));
    m.insert("resource".into(), resource);
    Value::Object(m)
}

fn analyte_label(ctx: &OutputContext<'_>, analyte: Analyte) -> String {
    ctx.rules.rules.analyte(analyte).map_or_else(|| analyte.key().to_owned(), |r| r.label.clone())
}

fn summary(ctx: &OutputContext<'_>, a: &Assessment) -> String {
    let rules = &ctx.rules.rules;
    let mass = rules.analyte(Analyte::CalciumTotal).and_then(|r| r.molar_mass_g_per_mol);
    match (&a.finding, a.status) {
        (Some(f), _) => {
            let shown = value_with_mg_dl(f.value_mmol_l, mass);
            match f.classification {
                Classification::Low => format!(
                    "Hypocalcemia{}{}: {} {} against the {} interval {}-{} mmol/L.",
                    f.grade
                        .as_ref()
                        .map(|g| format!(", {} grade", g.grade))
                        .unwrap_or_else(|| ", below the reference interval".into()),
                    if f.is_symptomatic() { ", symptomatic" } else { "" },
                    f.measure.label(),
                    shown,
                    f.interval.band_label,
                    num(f.interval.lower, 2),
                    num(f.interval.upper, 2)
                ),
                Classification::Normal => format!(
                    "No hypocalcemia: {} {} is within the {} interval {}-{} mmol/L.",
                    f.measure.label(),
                    shown,
                    f.interval.band_label,
                    num(f.interval.lower, 2),
                    num(f.interval.upper, 2)
                ),
                Classification::High => format!(
                    "No hypocalcemia: {} {} is above the {} interval {}-{} mmol/L.",
                    f.measure.label(),
                    shown,
                    f.interval.band_label,
                    num(f.interval.lower, 2),
                    num(f.interval.upper, 2)
                ),
            }
        }
        (None, GuidanceStatus::Failure) => "Not assessed: the patient is outside what these rules cover.".into(),
        (None, _) => "Not assessed: the data needed for a calcium status is missing or could not be used.".into(),
    }
}

fn issue_detail(ctx: &OutputContext<'_>, f: &CalciumFinding, a: &Assessment) -> String {
    let mass = ctx.rules.rules.analyte(Analyte::CalciumTotal).and_then(|r| r.molar_mass_g_per_mol);
    let mut parts = vec![format!(
        "{} {} at {} is below the lower limit {} mmol/L for {} (source: {}).",
        capital(f.measure.label()),
        value_with_mg_dl(f.value_mmol_l, mass),
        f.effective_text,
        num(f.interval.lower, 2),
        f.interval.band_label,
        f.interval.source
    )];
    if let Some(g) = &f.grade {
        parts.push(format!("Grade {}: at or below {} mmol/L (source: {}).", g.grade, num(g.at_or_below, 2), g.source));
    }
    if f.is_symptomatic() {
        let mut s: Vec<String> = f.symptoms.iter().map(|s| s.symptom.label().to_owned()).collect();
        if let Some(q) = f.qtc.as_ref().filter(|q| q.prolonged) {
            s.push(format!("QTc {} ms (> {} ms)", num(q.value_ms, 0), num(q.threshold_ms, 0)));
        }
        parts.push(format!("Symptomatic: {}.", s.join(", ")));
    }
    if let Some(sev) = f.severity {
        parts.push(format!("Severity {}.", sev.code()));
    }
    if f.preliminary {
        parts.push("Based on a preliminary result.".into());
    }
    parts.extend(a.cautions.iter().cloned());
    parts.push(ctx.rules.rules.texts.advisory.clone());
    parts.join(" ")
}

fn capital(s: &str) -> String {
    let mut c = s.chars();
    c.next().map(|f| f.to_uppercase().collect::<String>() + c.as_str()).unwrap_or_default()
}

fn derived_observation(
    ctx: &OutputContext<'_>,
    d: &DerivedAdjusted,
    subject: &Value,
    device: &Value,
    now: &str,
) -> Value {
    let code = &ctx.rules.rules.output_codes.adjusted_calcium;
    let (interp_code, interp_display) = d.classification.interpretation(d.severe);
    let (eff_key, eff_value) = effective(&d.effective_text);
    let mut obs = json!({
        "resourceType": "Observation",
        "id": ctx.uuid("adjusted-calcium"),
        "status": if d.preliminary { "preliminary" } else { "final" },
        "category": [{ "coding": [{ "system": OBS_CATEGORY, "code": "laboratory", "display": "Laboratory" }] }],
        "code": {
            "coding": [{ "system": code.system, "code": code.code, "display": code.display }],
            "text": format!("Calcium adjusted for albumin, calculated by calcium-cds (estimate): {} mmol/L = {} mg/dL", num(d.value_mmol_l, 2), num(d.value_mg_dl, 2)),
        },
        "subject": subject,
        eff_key: eff_value,
        "issued": now,
        "performer": [device],
        "valueQuantity": quantity_mmol(d.value_mmol_l),
        "interpretation": [{ "coding": [{ "system": INTERPRETATION, "code": interp_code, "display": interp_display }] }],
        "method": { "text": d.formula },
        "device": device,
        "derivedFrom": [ctx.reference(&d.calcium), ctx.reference(&d.albumin)],
        "note": [
            { "text": format!("Arithmetic: {}", d.arithmetic) },
            { "text": ctx.rules.rules.albumin_adjustment.caution },
            { "text": ctx.rules.rules.texts.advisory },
        ],
    });
    if let Some(i) = &d.interval {
        obs["referenceRange"] = json!([{
            "low": quantity_mmol(i.lower),
            "high": quantity_mmol(i.upper),
            "text": format!("{} (source: {})", i.band_label, i.source),
        }]);
    }
    obs
}

fn data_requirements(ctx: &OutputContext<'_>, a: &Assessment) -> Vec<Value> {
    let mut out = Vec::new();
    if a.needs_birth_date {
        out.push(json!({ "type": "Patient", "mustSupport": ["birthDate"] }));
    }
    for need in &a.data_needs {
        let codes: Vec<Value> = ctx
            .rules
            .rules
            .observation_codes
            .iter()
            .filter(|c| c.analyte == need.analyte)
            .map(|c| json!({ "system": c.system, "code": c.code, "display": c.display }))
            .collect();
        let mut req = json!({ "type": "Observation" });
        if !codes.is_empty() {
            req["codeFilter"] = json!([{ "path": "code", "code": codes }]);
        }
        out.push(req);
    }
    out
}

#[cfg(test)]
mod tests {
    #![allow(clippy::unwrap_used, reason = "tests fail loudly by design")]
    use std::collections::HashMap;

    use super::*;

    #[test]
    fn storable_keeps_type_and_id_and_drops_what_would_dangle() {
        // Relative Type/id as it is.
        assert_eq!(storable("Observation/ica-1", "Observation").as_deref(), Some("Observation/ica-1"));
        // RESTful absolute URL (R4 [base]/[type]/[id]), with or without a version: its Type/id tail.
        assert_eq!(
            storable("https://ehr.example.org/fhir/Observation/ica-1", "Observation").as_deref(),
            Some("Observation/ica-1")
        );
        assert_eq!(
            storable("https://ehr.example.org/fhir/Patient/p-7/_history/3", "Patient").as_deref(),
            Some("Patient/p-7")
        );
        // urn:uuid and urn:oid fullUrls, contained references, another type, a bad id, a deeper relative path.
        assert_eq!(storable("urn:uuid:3f6c1d2a-9b8e-4d71-a5c0-7e2b4f9d1a60", "Patient"), None);
        assert_eq!(storable("urn:oid:1.2.3", "Patient"), None);
        assert_eq!(storable("#spec", "Specimen"), None);
        assert_eq!(storable("https://ehr.example.org/fhir/Patient/p-7", "Observation"), None);
        assert_eq!(storable("Observation/a b", "Observation"), None);
        assert_eq!(storable("fhir/Observation/x", "Observation"), None);
    }

    #[test]
    fn an_input_without_id_is_referenced_by_identifier_or_display_never_by_urn() {
        let rules = crate::rules::load::load(None).unwrap();
        let mut identifiers = HashMap::new();
        identifiers.insert(
            "urn:uuid:1".to_owned(),
            InputIdentifier { system: Some("urn:oid:2.16.840.1.113883.19.5".into()), value: "MRN-1".into() },
        );
        let ctx = OutputContext {
            rules: &rules,
            software_version: "0",
            canonical_base: "https://x.example",
            now: 0,
            request_digest: [0; 32],
            identifiers: &identifiers,
        };
        let src = |reference: Option<&str>| Source {
            resource_type: "Patient".into(),
            reference: reference.map(str::to_owned),
            expression: "Bundle.entry[0].resource".into(),
        };
        assert_eq!(ctx.reference(&src(Some("Patient/p-1"))), json!({ "reference": "Patient/p-1", "type": "Patient" }));
        assert_eq!(
            ctx.reference(&src(Some("urn:uuid:1"))),
            json!({
                "type": "Patient",
                "identifier": { "system": "urn:oid:2.16.840.1.113883.19.5", "value": "MRN-1" },
                "display": "Patient at Bundle.entry[0].resource in the request (fullUrl urn:uuid:1; no id)",
            })
        );
        assert_eq!(
            ctx.reference(&src(Some("urn:uuid:2"))),
            json!({ "type": "Patient", "display": "Patient at Bundle.entry[0].resource in the request (fullUrl urn:uuid:2; no id)" })
        );
        assert_eq!(
            ctx.reference(&src(None)),
            json!({ "type": "Patient", "display": "Patient at Bundle.entry[0].resource in the request (no id)" })
        );
    }
}
