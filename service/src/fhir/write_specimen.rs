//! Specimen problems -> DetectedIssues: one per problem (clotted, hemolyzed,
//! specimen not read, ...), naming every result it touched, what was done
//! with each (set aside, used with a caution, check not run), why, the
//! source of the policy and what to do. The identifier carries the stable
//! key `specimen-<key>` (the same system as the safety checks, so case files
//! and integrators find it).

use serde_json::{Value, json};

use super::write::{OutputContext, entry};
use crate::clinical::facts::{SpecimenAction, SpecimenFinding};
use crate::clinical::status::Assessment;
use crate::rules::model::IssueSeverity;

/// What the specimen issues add to the result Bundle.
#[derive(Debug, Default)]
pub struct SpecimenOutput {
    /// Bundle entries (DetectedIssues).
    pub entries: Vec<Value>,
    /// Provenance targets.
    pub targets: Vec<Value>,
    /// GuidanceResponse notes.
    pub notes: Vec<String>,
}

fn what_was_done(f: &SpecimenFinding) -> &'static str {
    match f.action {
        SpecimenAction::SetAside => "set aside (not used)",
        SpecimenAction::Caution => "used, with this caution",
        SpecimenAction::Unread => "used, but its specimen could not be read: the specimen check did not run",
        SpecimenAction::NoEffect => "used",
    }
}

/// The DetectedIssues for the specimen problems of an assessment.
pub fn specimen_output(
    ctx: &OutputContext<'_>,
    subject: &Value,
    device: &Value,
    now: &str,
    a: &Assessment,
) -> SpecimenOutput {
    let mut out = SpecimenOutput::default();
    // Group by key, in the order first met.
    let mut keys: Vec<&str> = Vec::new();
    for f in a.specimen.iter().filter(|f| f.action != SpecimenAction::NoEffect) {
        if !keys.contains(&f.key.as_str()) {
            keys.push(&f.key);
        }
    }
    for key in keys {
        let group: Vec<&SpecimenFinding> = a.specimen.iter().filter(|f| f.key == key).collect();
        let Some(first) = group.first() else { continue };
        let severity = group.iter().filter_map(|f| f.severity).max().unwrap_or(IssueSeverity::Moderate);
        let title = if first.action == SpecimenAction::Unread {
            "Specimen check could not run".to_owned()
        } else {
            format!("Specimen problem: {}", first.label)
        };
        let mut code = json!({ "text": title });
        if let Some(flag) = ctx.rules.rules.specimen.flags.iter().find(|x| x.key == key) {
            code["coding"] = json!([{ "system": flag.system, "code": flag.code, "display": flag.display }]);
        }
        let mut lines = Vec::new();
        let mut implicated: Vec<Value> = Vec::new();
        for f in &group {
            let specimen = f.specimen.as_ref().map(|s| format!(", specimen {}", s.label())).unwrap_or_default();
            lines.push(format!(
                "{} ({}{specimen}): {}; found: {} ({}).",
                f.result_text,
                f.result.label(),
                what_was_done(f),
                f.found,
                f.read_from.label()
            ));
            for r in std::iter::once(&f.result).chain(f.specimen.as_ref()) {
                let v = ctx.reference(r);
                if !implicated.contains(&v) {
                    implicated.push(v);
                }
            }
        }
        let detail = format!(
            "{title}. {} {} (source: {}) {}",
            lines.join(" "),
            first.effect,
            first.source,
            ctx.rules.rules.texts.advisory
        );
        let id_key = format!("specimen-{key}");
        let mut di = json!({
            "resourceType": "DetectedIssue",
            "id": ctx.uuid(&id_key),
            "identifier": [{ "system": format!("{}/sid/safety-check", ctx.canonical_base), "value": id_key }],
            "status": "preliminary",
            "code": code,
            "severity": severity.code(),
            "patient": subject,
            "identifiedDateTime": now,
            "author": device,
            "detail": detail,
            "mitigation": [{ "action": { "text": first.mitigation } }],
        });
        if !implicated.is_empty() {
            di["implicated"] = Value::Array(implicated);
        }
        let urn = format!("urn:uuid:{}", ctx.uuid(&id_key));
        out.targets.push(json!({ "reference": urn, "type": "DetectedIssue" }));
        out.entries.push(entry(urn, di));
        out.notes.push(format!("Specimen ({}): {title}: {}", severity.code(), lines.join(" ")));
    }
    out
}
