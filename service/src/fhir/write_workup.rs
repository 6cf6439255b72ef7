//! Work-up resources: a ClinicalImpression with the causes in order, draft
//! ServiceRequest proposals for the next tests in a RequestGroup, and an
//! output Parameters resource that ties them to the GuidanceResponse.

use serde_json::{Value, json};

use super::write::{OutputContext, entry};
use crate::clinical::causes::{CauseResult, analyte_label};
use crate::clinical::facts::Source;
use crate::clinical::status::CalciumFinding;
use crate::clinical::workup::Workup;
use crate::rules::model::{CodeListKind, Effect, RuleSet};

/// What the GuidanceResponse needs to point at the work-up.
#[derive(Debug, Clone, Default)]
pub struct WorkupOutput {
    /// Entries to add to the result Bundle.
    pub entries: Vec<Value>,
    /// Provenance targets.
    pub targets: Vec<Value>,
    /// RequestGroup actions (one group: the next tests), when tests are proposed.
    pub actions: Vec<Value>,
    /// GuidanceResponse.outputParameters.
    pub output_parameters: Option<Value>,
    /// Extra GuidanceResponse.dataRequirement entries.
    pub data_requirements: Vec<Value>,
    /// Extra GuidanceResponse notes.
    pub notes: Vec<String>,
}

fn effect_word(e: Effect) -> &'static str {
    match e {
        Effect::StrongFor => "strongly for",
        Effect::For => "for",
        Effect::Against => "against",
        Effect::StrongAgainst => "strongly against",
        Effect::RulesOut => "rules out",
    }
}

fn cause_basis(rules: &RuleSet, c: &CauseResult) -> String {
    let mut parts = vec![format!("{} (score {}).", capital(c.label.word()), c.score)];
    if let Some(why) = &c.ruled_out_by {
        parts.push(format!("Ruled out: {why}."));
    }
    if c.no_exposure {
        parts.push(
            "Unlikely because nothing recorded points to it: it needs a recorded condition, medication or procedure, or a strong finding. Absence from the record is not proof of absence."
                .to_owned(),
        );
    }
    for m in &c.met {
        parts.push(format!("{} [{} {:+}: {}]", m.text, effect_word(m.effect), m.points, m.source));
    }
    if c.met.is_empty() && c.ruled_out_by.is_none() {
        parts.push("No finding for or against it in the data.".to_owned());
    }
    if !c.missing.is_empty() {
        let names: Vec<String> = c.missing.iter().map(|a| analyte_label(rules, *a)).collect();
        parts.push(format!("Not yet available: {}.", names.join(", ")));
    }
    parts.join(" ")
}

fn capital(s: &str) -> String {
    let mut c = s.chars();
    c.next().map(|f| f.to_uppercase().collect::<String>() + c.as_str()).unwrap_or_default()
}

fn cause_concept(rules: &RuleSet, c: &CauseResult) -> Value {
    let cause = rules.causes.iter().find(|r| r.id == c.id);
    let coding = cause
        .and_then(|r| r.code_from_list.as_ref())
        .and_then(|list| rules.code_lists.iter().find(|l| &l.id == list && l.kind == CodeListKind::Condition))
        .and_then(|l| l.codes.iter().find(|code| code.system == "http://snomed.info/sct"));
    let mut concept = json!({ "text": c.name });
    if let Some(code) = coding {
        concept["coding"] = json!([{ "system": code.system, "code": code.code, "display": code.display }]);
    }
    concept
}

/// Build the work-up resources.
pub fn workup_output(
    ctx: &OutputContext<'_>,
    subject: &Value,
    device: &Value,
    now: &str,
    finding: &CalciumFinding,
    w: &Workup,
) -> WorkupOutput {
    let rules = &ctx.rules.rules;
    let urn = |k: &str| format!("urn:uuid:{}", ctx.uuid(k));
    let mut out = WorkupOutput::default();

    // Observations the work-up read, calcium first, each once.
    let mut seen: Vec<&Source> = Vec::new();
    for s in finding
        .evidence
        .iter()
        .chain(w.readings.labs.values().flat_map(|r| r.sources.iter()))
        .chain(w.readings.egfr.iter().flat_map(|r| r.sources.iter()))
    {
        if s.resource_type == "Observation" && !seen.iter().any(|x| x.expression == s.expression) {
            seen.push(s);
        }
    }
    let findings: Vec<Value> = w
        .causes
        .iter()
        .map(|c| json!({ "itemCodeableConcept": cause_concept(rules, c), "basis": cause_basis(rules, c) }))
        .collect();
    let leading = w.leading();
    let summary = if leading.is_empty() {
        "No cause is likely or possible on the data available.".to_owned()
    } else {
        let names: Vec<String> = leading.iter().map(|c| c.name.clone()).collect();
        format!(
            "Leading ({}): {}.{}",
            leading[0].label.word(),
            names.join("; "),
            if w.leading_tied { " These cannot yet be told apart." } else { "" }
        )
    };
    let impression = json!({
        "resourceType": "ClinicalImpression",
        "id": ctx.uuid("impression"),
        "status": "completed",
        "description": "Causes of hypocalcemia that fit the data, most likely first (calcium-cds work-up).",
        "subject": subject,
        "effectiveDateTime": now,
        "date": now,
        "investigation": [{
            "code": { "text": "Laboratory results read by the work-up" },
            "item": seen.iter().map(|s| ctx.reference(s)).collect::<Vec<_>>(),
        }],
        "summary": summary,
        "finding": findings,
        "note": [
            { "text": format!("Weighing: {}", rules.cause_weighing.source) },
            { "text": rules.texts.advisory },
        ],
    });
    out.targets.push(json!({ "reference": urn("impression"), "type": "ClinicalImpression" }));
    out.entries.push(entry(urn("impression"), impression));
    out.notes.push(summary);

    // Next tests.
    let calcium_ref = finding.evidence.first().map(|s| ctx.reference(s));
    let mut actions = Vec::new();
    for p in &w.plan.proposals {
        let key = format!("service-request-{}", p.test.analyte.key());
        let mut code = json!({ "text": p.test.label });
        if let Some(c) = &p.test.code {
            code["coding"] = json!([{ "system": c.system, "code": c.code, "display": c.display }]);
            out.data_requirements.push(json!({
                "type": "Observation",
                "codeFilter": [{ "path": "code", "code": [{ "system": c.system, "code": c.code, "display": c.display }] }],
            }));
        }
        let mut sr = json!({
            "resourceType": "ServiceRequest",
            "id": ctx.uuid(&key),
            "identifier": [{ "system": format!("{}/sid/next-test", ctx.canonical_base), "value": p.test.analyte.key() }],
            "status": "draft",
            "intent": "proposal",
            "code": code,
            "subject": subject,
            "authoredOn": now,
            "requester": device,
            "reasonCode": [{ "text": format!("Work-up of hypocalcemia: {}", p.reason) }],
            "note": [{ "text": rules.texts.advisory }],
        });
        if let Some(r) = &calcium_ref {
            sr["reasonReference"] = json!([r]);
        }
        actions.push(json!({
            "title": p.test.label,
            "description": p.reason,
            "resource": { "reference": urn(&key), "type": "ServiceRequest" },
        }));
        out.targets.push(json!({ "reference": urn(&key), "type": "ServiceRequest" }));
        out.entries.push(entry(urn(&key), sr));
    }
    for d in &w.plan.deferred {
        out.notes.push(format!("Held back: {}. {}", d.test.label, d.reason));
    }
    if !actions.is_empty() {
        let names: Vec<&str> = w.plan.proposals.iter().map(|p| p.test.label.as_str()).collect();
        out.notes.push(format!("Next tests proposed (drafts, not orders): {}.", names.join("; ")));
        out.actions.push(json!({
            "title": "Next tests (drafts)",
            "description": format!("Proposed next tests, best first: each is the test whose possible results would best separate the causes still open, for its burden ({}). Drafts for a clinician; nothing is ordered.", rules.planner.source),
            "action": actions,
        }));
    }

    let parameters = vec![
        json!({ "name": "clinicalImpression", "valueReference": { "reference": urn("impression"), "type": "ClinicalImpression" } }),
    ];
    out.entries.push(json!({
        "fullUrl": urn("output-parameters"),
        "resource": { "resourceType": "Parameters", "id": ctx.uuid("output-parameters"), "parameter": parameters },
    }));
    out.targets.push(json!({ "reference": urn("output-parameters"), "type": "Parameters" }));
    out.output_parameters = Some(json!({ "reference": urn("output-parameters"), "type": "Parameters" }));
    out
}
