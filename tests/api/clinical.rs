//! Clinical scenarios over HTTP: the work-up reads conditions, medication
//! records and procedures from the request, and its resources hang together
//! (GuidanceResponse -> RequestGroup -> ServiceRequests; Parameters ->
//! ClinicalImpression). Every result is checked against the official R4 schema.

use serde_json::{Value, json};

use crate::helpers::{
    Lab, PATIENT_URL, Scenario, guidance_notes, guidance_status, issue_at, only, outcome_issues, resources, spawn_app,
};

const ATC: &str = "http://www.whocc.no/atc";
const ICD10CM: &str = "http://hl7.org/fhir/sid/icd-10-cm";
const SNOMED: &str = "http://snomed.info/sct";

fn observation(s: &Scenario, id: &str, loinc: &str, display: &str, value: f64, unit: &str) -> Value {
    json!({
        "resourceType": "Observation", "id": id, "status": "final",
        "code": { "coding": [{ "system": "http://loinc.org", "code": loinc, "display": display }] },
        "subject": { "reference": PATIENT_URL },
        "effectiveDateTime": s.time(1.0),
        "valueQuantity": { "value": value, "unit": unit, "system": "http://unitsofmeasure.org", "code": unit },
    })
}

fn magnesium(s: &Scenario, mg_dl: f64) -> Value {
    observation(s, "mg-1", "19123-9", "Magnesium [Mass/volume] in Serum or Plasma", mg_dl, "mg/dL")
}

fn condition(id: &str, system: &str, code: &str, display: &str, clinical: &str) -> Value {
    json!({
        "resourceType": "Condition", "id": id,
        "clinicalStatus": { "coding": [{ "system": "http://terminology.hl7.org/CodeSystem/condition-clinical", "code": clinical }] },
        "verificationStatus": { "coding": [{ "system": "http://terminology.hl7.org/CodeSystem/condition-ver-status", "code": "confirmed" }] },
        "code": { "coding": [{ "system": system, "code": code, "display": display }] },
        "subject": { "reference": PATIENT_URL },
    })
}

/// The ClinicalImpression findings' texts, in order.
fn causes(result: &Value) -> Vec<String> {
    only(result, "ClinicalImpression")["finding"]
        .as_array()
        .expect("findings")
        .iter()
        .map(|f| {
            format!(
                "{} | {}",
                f["itemCodeableConcept"]["text"].as_str().unwrap_or(""),
                f["basis"].as_str().unwrap_or("")
            )
        })
        .collect()
}

#[tokio::test]
async fn a_loop_diuretic_order_and_low_magnesium_lead_to_hypomagnesemia() {
    let app = spawn_app().await;
    let s = Scenario::new();
    let request = s
        .clone()
        .add(Lab::IonizedCa, "ica-1", 0.92, 1.0)
        .with(magnesium(&s, 0.9))
        .with(json!({
            "resourceType": "MedicationRequest", "id": "mr-furosemide", "status": "active", "intent": "order",
            "medicationCodeableConcept": { "coding": [{ "system": ATC, "code": "C03CA01", "display": "furosemide" }] },
            "subject": { "reference": PATIENT_URL }, "authoredOn": s.time(72.0),
        }))
        .bundle();
    let result = app.assess_ok(&request).await;
    let list = causes(&result);
    assert!(list[0].starts_with("Hypomagnesemia"), "{list:#?}");
    assert!(list[0].contains("MedicationRequest/mr-furosemide"), "the order is cited in the basis: {}", list[0]);
    assert!(list.iter().any(|c| c.starts_with("Drug effect") && c.contains("Loop diuretics")), "{list:#?}");
    // PTH is held back while magnesium is low.
    let notes = guidance_notes(&result);
    assert!(notes.iter().any(|n| n.contains("Held back: Parathyroid hormone")), "{notes:?}");
    assert!(resources(&result, "ServiceRequest").iter().all(|sr| sr["code"]["coding"][0]["code"] != "2731-8"));
}

#[tokio::test]
async fn medication_codes_are_read_through_a_medication_reference() {
    let app = spawn_app().await;
    let s = Scenario::new();
    let request = s
        .clone()
        .add(Lab::IonizedCa, "ica-1", 0.95, 1.0)
        .with(json!({
            "resourceType": "Medication", "id": "med-pam",
            "code": { "coding": [{ "system": ATC, "code": "M05BA03", "display": "pamidronic acid" }] },
        }))
        .with(json!({
            "resourceType": "MedicationAdministration", "id": "ma-pam", "status": "completed",
            "medicationReference": { "reference": "Medication/med-pam" },
            "subject": { "reference": PATIENT_URL }, "effectiveDateTime": s.time(20.0),
        }))
        .bundle();
    let result = app.assess_ok(&request).await;
    let list = causes(&result);
    assert!(list[0].starts_with("Drug effect"), "{list:#?}");
    assert!(list[0].contains("MedicationAdministration/ma-pam"), "{}", list[0]);
}

#[tokio::test]
async fn a_recent_transfusion_points_to_citrate_and_an_old_one_does_not() {
    let app = spawn_app().await;
    for (hours_ago, leads) in [(6.0, true), (24.0 * 5.0, false)] {
        let s = Scenario::new();
        let request = s
            .clone()
            .add(Lab::IonizedCa, "ica-1", 0.95, 1.0)
            .with(json!({
                "resourceType": "Procedure", "id": "tx-1", "status": "completed",
                "code": { "coding": [{ "system": SNOMED, "code": "116859006", "display": "Transfusion of blood product" }] },
                "subject": { "reference": PATIENT_URL }, "performedDateTime": s.time(hours_ago),
            }))
            .bundle();
        let result = app.assess_ok(&request).await;
        let list = causes(&result);
        let citrate = list.iter().position(|c| c.starts_with("Citrate chelation")).expect("citrate listed");
        assert_eq!(citrate == 0, leads, "transfusion {hours_ago} h ago: {list:#?}");
    }
}

#[tokio::test]
async fn birth_history_counts_whatever_its_status_and_a_resolved_sepsis_does_not() {
    let app = spawn_app().await;
    let s = Scenario::new();
    let request = s
        .clone()
        .add(Lab::IonizedCa, "ica-1", 0.95, 1.0)
        .with(condition("c-sepsis", ICD10CM, "A41.9", "Sepsis, unspecified organism", "resolved"))
        .with(condition("c-22q", ICD10CM, "D82.1", "Di George's syndrome", "inactive"))
        .bundle();
    let result = app.assess_ok(&request).await;
    let list = causes(&result);
    assert!(list[0].starts_with("Hypoparathyroidism"), "22q11.2 deletion counts: {list:#?}");
    let sepsis = list.iter().find(|c| c.starts_with("Critical illness")).expect("listed");
    assert!(sepsis.contains("Unlikely"), "{sepsis}");
    let issues = outcome_issues(&result);
    let at = "Bundle.entry[2].resource";
    let issue = issue_at(&issues, at).unwrap_or_else(|| panic!("resolved sepsis not listed at {at}: {issues:?}"));
    assert!(issue["diagnostics"].as_str().unwrap_or("").contains("not active"), "{issue}");
}

#[tokio::test]
async fn a_stopped_order_and_a_malformed_one_are_listed_not_used() {
    let app = spawn_app().await;
    let s = Scenario::new();
    let request = s
        .clone()
        .add(Lab::IonizedCa, "ica-1", 0.95, 1.0)
        .with(json!({
            "resourceType": "MedicationRequest", "id": "mr-stopped", "status": "stopped", "intent": "order",
            "medicationCodeableConcept": { "coding": [{ "system": ATC, "code": "C03CA01", "display": "furosemide" }] },
            "subject": { "reference": PATIENT_URL },
        }))
        .with(json!({
            "resourceType": "MedicationRequest", "id": "mr-bad", "status": "not-a-status", "intent": "order",
            "medicationCodeableConcept": { "coding": [{ "system": ATC, "code": "M05BA03", "display": "pamidronic acid" }] },
            "subject": { "reference": PATIENT_URL },
        }))
        .bundle();
    let result = app.assess_ok(&request).await;
    let issues = outcome_issues(&result);
    assert!(issue_at(&issues, "Bundle.entry[2].resource").is_some(), "stopped order not listed: {issues:?}");
    let bad = issue_at(&issues, "Bundle.entry[3].resource.status")
        .unwrap_or_else(|| panic!("malformed order not set aside: {issues:?}"));
    assert_eq!(bad["severity"], "warning");
    let list = causes(&result);
    let drug = list.iter().find(|c| c.starts_with("Drug effect")).expect("listed");
    assert!(drug.contains("Unlikely"), "neither order may count: {drug}");
}

#[tokio::test]
async fn the_work_up_resources_are_linked_from_the_guidance_response() {
    let app = spawn_app().await;
    let request = Scenario::new().add(Lab::IonizedCa, "ica-1", 0.90, 1.0).bundle();
    let result = app.assess_ok(&request).await;
    assert_eq!(guidance_status(&result), "data-required", "only a calcium: the causes cannot be told apart");
    let full_url = |t: &str| -> Vec<String> {
        result["entry"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|e| e["resource"]["resourceType"] == t)
            .map(|e| e["fullUrl"].as_str().unwrap().to_owned())
            .collect()
    };
    let gr = only(&result, "GuidanceResponse");
    assert_eq!(vec![gr["result"]["reference"].as_str().unwrap().to_owned()], full_url("RequestGroup"));
    let params_url = gr["outputParameters"]["reference"].as_str().unwrap().to_owned();
    assert_eq!(vec![params_url], full_url("Parameters"));
    let params = only(&result, "Parameters");
    assert_eq!(
        params["parameter"][0]["valueReference"]["reference"].as_str().map(str::to_owned),
        full_url("ClinicalImpression").pop()
    );
    let group = only(&result, "RequestGroup");
    assert_eq!(group["status"], "draft");
    assert_eq!(group["intent"], "proposal");
    // Top-level action groups: treatment proposals (when any), then the next tests.
    let next_tests = group["action"]
        .as_array()
        .unwrap()
        .iter()
        .find(|a| a["title"] == "Next tests (drafts)")
        .expect("a next-tests group");
    let actions: Vec<String> = next_tests["action"]
        .as_array()
        .unwrap()
        .iter()
        .map(|a| a["resource"]["reference"].as_str().unwrap().to_owned())
        .collect();
    assert_eq!(actions, full_url("ServiceRequest"), "one action per ServiceRequest, in order");
    // Each proposal is also a dataRequirement, and the Provenance targets every generated resource.
    let required: Vec<&str> = gr["dataRequirement"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|d| d["codeFilter"][0]["code"][0]["code"].as_str())
        .collect();
    for sr in resources(&result, "ServiceRequest") {
        let code = sr["code"]["coding"][0]["code"].as_str().unwrap();
        assert!(required.contains(&code), "{code} not in dataRequirement {required:?}");
        assert!(sr["note"][0]["text"].as_str().unwrap().starts_with("Advisory only"), "{sr}");
    }
    let targets: Vec<String> = only(&result, "Provenance")["target"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| t["reference"].as_str().unwrap().to_owned())
        .collect();
    for t in ["ClinicalImpression", "RequestGroup", "ServiceRequest", "Parameters", "GuidanceResponse", "DetectedIssue"]
    {
        for url in full_url(t) {
            assert!(targets.contains(&url), "{t} {url} not a Provenance target");
        }
    }
}

#[test]
fn a_site_file_can_choose_the_stricter_vitamin_d_cut_offs() {
    // 25-OH vitamin D 16 ng/mL = 40 nmol/L: not deficient by the 2016 consensus
    // (< 30 nmol/L), deficient by the Endocrine Society 2011 cut-offs (< 50 nmol/L).
    let bin = env!("CARGO_BIN_EXE_calcium-cds");
    let s = Scenario::at(crate::helpers::now_unix());
    let request = s
        .clone()
        .add(Lab::IonizedCa, "ica-1", 0.98, 1.0)
        .with(observation(
            &s,
            "d25",
            "62292-8",
            "25-Hydroxyvitamin D2+25-Hydroxyvitamin D3 [Mass/volume] in Serum or Plasma",
            16.0,
            "ng/mL",
        ))
        .bundle();
    let dir = std::env::temp_dir().join(format!("calcium-cds-site-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let input = dir.join("request.json");
    std::fs::write(&input, request.to_string()).unwrap();
    let site = dir.join("site.toml");
    std::fs::write(
        &site,
        "[ruleset]\nversion = \"larkspur-1\"\n[vitamin_d_25oh_cutoffs]\ndefault = \"endocrine_society_2011\"\n",
    )
    .unwrap();
    let run = |rules: Option<&std::path::Path>| -> Value {
        let mut cmd = std::process::Command::new(bin);
        cmd.arg("assess").arg(&input);
        if let Some(r) = rules {
            cmd.arg("--rules").arg(r);
        }
        let out = cmd.output().unwrap();
        assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
        serde_json::from_slice(&out.stdout).unwrap()
    };
    let default = run(None);
    let strict = run(Some(&site));
    let vit_d = |r: &Value| causes(r).into_iter().find(|c| c.starts_with("Nutritional vitamin D")).unwrap();
    assert!(
        vit_d(&default).starts_with("Nutritional vitamin D deficiency (rickets) | Ruled out"),
        "{}",
        vit_d(&default)
    );
    assert!(vit_d(&strict).contains("| Likely"), "{}", vit_d(&strict));
    let rule_set = guidance_notes(&strict).into_iter().find(|n| n.starts_with("Rule set:")).unwrap();
    assert!(rule_set.contains("larkspur-1"), "{rule_set}");
    crate::helpers::assert_r4_valid(&strict);
    std::fs::remove_dir_all(&dir).ok();
}
