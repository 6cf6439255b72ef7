//! Treatment resources: draft MedicationRequests (status draft, intent
//! proposal) with their arithmetic, and a DetectedIssue for every safety
//! problem. The RequestGroup that orders them is built in `write`.

use serde_json::{Value, json};

use super::read::UCUM;
use super::write::{OutputContext, entry};
use crate::clinical::treatment::{MedProposal, Route, TreatmentPlan};
use crate::rules::treatment_model::SourcedCoding;

/// v3 ActCode.
const ACT_CODE: &str = "http://terminology.hl7.org/CodeSystem/v3-ActCode";

/// What the writer adds for treatment.
#[derive(Debug, Clone, Default)]
pub struct TreatmentOutput {
    /// Entries.
    pub entries: Vec<Value>,
    /// Provenance targets.
    pub targets: Vec<Value>,
    /// RequestGroup actions.
    pub actions: Vec<Value>,
    /// GuidanceResponse notes.
    pub notes: Vec<String>,
}

fn coding(c: &SourcedCoding) -> Value {
    json!({ "system": c.system, "code": c.code, "display": c.display })
}

fn qty(value: f64, unit: &str) -> Value {
    // Three decimals: enough for a pump or a syringe, no float noise.
    let value = (value * 1000.0).round() / 1000.0;
    json!({ "value": value, "unit": unit, "system": UCUM, "code": unit })
}

fn medication_request(
    ctx: &OutputContext<'_>,
    p: &MedProposal,
    subject: &Value,
    device: &Value,
    now: &str,
    reason: Option<&Value>,
) -> Value {
    let routes = &ctx.rules.rules.treatment.routes;
    let route = match p.route {
        Route::Iv => &routes.iv,
        Route::Oral => &routes.oral,
    };
    let mut dosage = json!({ "text": p.text, "route": { "coding": [coding(route)] } });
    let mut dose_and_rate = serde_json::Map::new();
    if let Some(d) = &p.dose {
        dose_and_rate.insert("doseQuantity".into(), qty(d.value, d.unit));
    }
    if let Some(r) = &p.rate {
        dose_and_rate.insert("rateQuantity".into(), qty(r.value, r.unit));
    }
    if !dose_and_rate.is_empty() {
        dosage["doseAndRate"] = json!([Value::Object(dose_and_rate)]);
    }
    match (p.per_day, p.days, p.route) {
        (Some(n), days, _) => {
            let mut repeat = json!({ "frequency": n, "period": 1, "periodUnit": "d" });
            if let Some(d) = days {
                repeat["boundsDuration"] = json!({ "value": d, "unit": "d", "system": UCUM, "code": "d" });
            }
            dosage["timing"] = json!({ "repeat": repeat });
        }
        (None, _, Route::Iv) if p.dose.is_some() => dosage["timing"] = json!({ "repeat": { "count": 1 } }),
        _ => {}
    }
    if let Some(m) = &p.max_per_day {
        dosage["maxDosePerPeriod"] = json!({ "numerator": qty(m.value, m.unit), "denominator": qty(1.0, "d") });
    }
    let mut notes: Vec<Value> = p.sources.iter().map(|s| json!({ "text": s })).collect();
    notes.push(json!({ "text": format!(
        "Product: {} ({}; confidence {}). Check the strength against the product on the ward before use.",
        p.product.label, p.product.source, p.product.confidence
    ) }));
    if p.key == "cholecalciferol"
        && let Some(f) = ctx.rules.rules.safety_sources.get("vitamin_d_drop_strength_confusion")
    {
        notes.push(json!({ "text": format!("{} ({})", f.text, f.source) }));
    }
    if p.specialist {
        notes.push(json!({ "text": "No dose is proposed: specialist dosing." }));
    }
    notes.push(json!({ "text": ctx.rules.rules.texts.advisory }));
    let mut mr = json!({
        "resourceType": "MedicationRequest",
        "id": ctx.uuid(&format!("medication-{}", p.key)),
        "identifier": [{ "system": format!("{}/sid/treatment-proposal", ctx.canonical_base), "value": p.key }],
        "status": "draft",
        "intent": "proposal",
        "medicationCodeableConcept": { "coding": p.product.codes.iter().map(coding).collect::<Vec<_>>(), "text": p.product.label },
        "subject": subject,
        "authoredOn": now,
        "requester": device,
        "dosageInstruction": [dosage],
        "note": notes,
    });
    if p.route == Route::Iv {
        mr["priority"] = json!("urgent");
    }
    if let Some(r) = reason {
        mr["reasonReference"] = json!([r]);
    }
    mr
}

/// Build the treatment resources.
pub fn treatment_output(
    ctx: &OutputContext<'_>,
    subject: &Value,
    device: &Value,
    now: &str,
    calcium: Option<&Value>,
    plan: &TreatmentPlan,
) -> TreatmentOutput {
    let urn = |k: &str| format!("urn:uuid:{}", ctx.uuid(k));
    let mut out = TreatmentOutput::default();
    let mut main = Vec::new();
    let action_of = |p: &MedProposal| {
        json!({
            "title": p.title,
            "description": p.text,
            "resource": { "reference": urn(&format!("medication-{}", p.key)), "type": "MedicationRequest" },
        })
    };
    // The bolus and its alternatives (calcium chloride on a central line): choose one.
    let choice: Vec<Value> =
        plan.proposals.iter().filter(|p| p.key == "calcium-bolus" || p.alternative).map(action_of).collect();
    for p in &plan.proposals {
        let key = format!("medication-{}", p.key);
        out.targets.push(json!({ "reference": urn(&key), "type": "MedicationRequest" }));
        out.entries.push(entry(urn(&key), medication_request(ctx, p, subject, device, now, calcium)));
        if p.alternative {
            continue;
        }
        if p.key == "calcium-bolus" {
            main.push(bolus_group(choice.clone()));
        } else {
            main.push(action_of(p));
        }
    }
    if !main.is_empty() {
        let names: Vec<&str> = plan.proposals.iter().map(|p| p.title.as_str()).collect();
        out.notes.push(format!("Treatment proposals (drafts, not orders), in order: {}.", names.join("; ")));
        out.actions.push(json!({
            "title": "Treatment proposals (drafts)",
            "description": "Draft proposals for a clinician to check and order, in the order to give them (magnesium first when it is low; the bolus before the infusion). Nothing is ordered.",
            "action": main,
        }));
    }
    out.notes.extend(plan.notes.iter().cloned());

    let proposals_where = |f: &dyn Fn(&crate::clinical::treatment::MedProposal) -> bool| -> Vec<Value> {
        plan.proposals
            .iter()
            .filter(|p| f(p))
            .map(|p| json!({ "reference": urn(&format!("medication-{}", p.key)), "type": "MedicationRequest" }))
            .collect()
    };
    let implicated_proposals = proposals_where(&|p| p.route == Route::Iv);
    // The unknown-symptom caution is on the oral proposal; an unidentified
    // medication may change the checks of every proposal.
    let oral_proposals = proposals_where(&|p| p.route == Route::Oral);
    let all_proposals = proposals_where(&|_| true);
    for issue in &plan.issues {
        let key = format!("safety-{}", issue.key);
        let mut code = json!({ "text": issue.title });
        if let Some((c, display)) = issue.act_code {
            code["coding"] = json!([{ "system": ACT_CODE, "code": c, "display": display }]);
        }
        let mut implicated: Vec<Value> = issue.implicated.iter().map(|s| ctx.reference(s)).collect();
        match issue.key {
            "weight" | "overshoot" => {}
            "symptoms-unknown" => implicated.extend(oral_proposals.iter().cloned()),
            "unidentified-medication" => implicated.extend(all_proposals.iter().cloned()),
            _ => implicated.extend(implicated_proposals.iter().cloned()),
        }
        let mut di = json!({
            "resourceType": "DetectedIssue",
            "id": ctx.uuid(&key),
            // The check's stable key (rule data), for case files and integrators.
            "identifier": [{ "system": format!("{}/sid/safety-check", ctx.canonical_base), "value": issue.key }],
            "status": "preliminary",
            "code": code,
            "severity": issue.severity.code(),
            "patient": subject,
            "identifiedDateTime": now,
            "author": device,
            "detail": format!("{} {}", issue.detail, ctx.rules.rules.texts.advisory),
            "mitigation": [{ "action": { "text": issue.mitigation } }],
        });
        if !implicated.is_empty() {
            di["implicated"] = json!(implicated);
        }
        out.targets.push(json!({ "reference": urn(&key), "type": "DetectedIssue" }));
        out.entries.push(entry(urn(&key), di));
        out.notes.push(format!("Safety ({}): {}", issue.severity.code(), issue.title));
    }
    out
}

fn bolus_group(actions: Vec<Value>) -> Value {
    if actions.len() == 1 {
        return actions.into_iter().next().unwrap_or(Value::Null);
    }
    json!({
        "title": "IV calcium bolus: one of these",
        "selectionBehavior": "exactly-one",
        "action": actions,
    })
}
