//! Specimen problems (issue 13, section 5): the specimen cases of tests/cases
//! through the binary (R4-valid output, the problem named where the clinician
//! looks, the explain step), and the patient-context route fetching the
//! referenced Specimens from a wiremock EHR, on the configured server only.

use std::process::Command;

use serde_json::{Value, json};
use wiremock::matchers::{any, method, path, query_param};
use wiremock::{Mock, MockServer};

use crate::helpers::{assert_r4_valid, guidance_notes, repo_path, resources, spawn_app_with_upstream_args};
use crate::upstream::{
    PATIENT_ID, args, diagnostics, fhir, ionized_calcium, mount_empty_other_searches, mount_patient,
    observation_search, post_patient, searchset, weight,
};

const BIN: &str = env!("CARGO_BIN_EXE_calcium-cds");
const NOW: &str = "2026-11-30T15:00:00Z";
const V2_0493: &str = "http://terminology.hl7.org/CodeSystem/v2-0493";

/// `assess --explain` on a case file: the result Bundle and the trace text.
fn assess_case(name: &str) -> (Value, String) {
    let file = repo_path(&format!("tests/cases/{name}.json"));
    let out = Command::new(BIN)
        .args(["assess", file.to_str().unwrap(), "--now", NOW, "--explain"])
        .env_remove("CALCIUM_CDS_RULES")
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    (serde_json::from_slice(&out.stdout).unwrap(), String::from_utf8_lossy(&out.stderr).into_owned())
}

/// The DetectedIssue with the identifier value `key`.
fn issue<'a>(bundle: &'a Value, key: &str) -> Option<&'a Value> {
    resources(bundle, "DetectedIssue")
        .into_iter()
        .find(|d| d["identifier"].as_array().into_iter().flatten().any(|i| i["value"] == key))
}

/// The dosageInstruction texts of the IV calcium proposals.
fn iv_calcium_texts(bundle: &Value) -> Vec<String> {
    resources(bundle, "MedicationRequest")
        .into_iter()
        .filter(|m| m["identifier"].as_array().into_iter().flatten().any(|i| i["value"] == "calcium-bolus"))
        .map(|m| m["dosageInstruction"][0]["text"].as_str().unwrap_or("").to_owned())
        .collect()
}

#[test]
fn a_clotted_ionized_calcium_is_set_aside_named_and_the_adjusted_total_carries_the_bolus() {
    let (bundle, trace) = assess_case("specimen-clotted-ionized-seizure-toddler");
    assert_r4_valid(&bundle);
    let di = issue(&bundle, "specimen-clotted").expect("a clotted-specimen DetectedIssue");
    assert_eq!(di["severity"], "high");
    assert_eq!(di["code"]["coding"][0]["system"], V2_0493);
    assert_eq!(di["code"]["coding"][0]["code"], "CLOT");
    let detail = di["detail"].as_str().unwrap();
    assert!(detail.contains("0.78 mmol/L") && detail.contains("set aside (not used)"), "{detail}");
    assert!(detail.contains("CLSI C31-A2"), "the policy's source is named: {detail}");
    assert!(di["mitigation"][0]["action"]["text"].as_str().unwrap().contains("without waiting"), "{di}");
    // The status rests on the adjusted total, and says why the ionized result was not used.
    let notes = guidance_notes(&bundle).join("\n");
    assert!(notes.contains("albumin-adjusted total calcium"), "{notes}");
    assert!(notes.contains("was set aside: the specimen is clotted"), "{notes}");
    // The IV proposal itself says it.
    let texts = iv_calcium_texts(&bundle);
    assert_eq!(texts.len(), 1, "{texts:?}");
    assert!(texts[0].contains("Specimen caution") && texts[0].contains("clotted"), "{}", texts[0]);
    // The explain trace shows the step.
    assert!(trace.contains("specimen.flags (clotted)"), "{trace}");
    assert!(trace.contains("the result was set aside"), "{trace}");
}

#[test]
fn a_hemolyzed_ionized_calcium_is_used_and_the_hemolysis_is_named() {
    let (bundle, trace) = assess_case("specimen-hemolyzed-ionized-child");
    assert_r4_valid(&bundle);
    let di = issue(&bundle, "specimen-hemolyzed").expect("a hemolyzed-specimen DetectedIssue");
    assert_eq!(di["severity"], "moderate");
    let detail = di["detail"].as_str().unwrap();
    assert!(detail.contains("used, with this caution") && detail.contains("Hemolysis lowers"), "{detail}");
    // The Specimen (a Bundle entry) is implicated beside the result.
    let implicated: Vec<&str> =
        di["implicated"].as_array().unwrap().iter().filter_map(|r| r["type"].as_str()).collect();
    assert_eq!(implicated, ["Observation", "Specimen"], "{di}");
    let texts = iv_calcium_texts(&bundle);
    assert!(texts[0].contains("hemolyzed"), "{}", texts[0]);
    // Used: the status is the ionized calcium's, asking for a repeat.
    let gr = &resources(&bundle, "GuidanceResponse")[0];
    assert!(gr["note"][0]["text"].as_str().unwrap().starts_with("Hypocalcemia"), "{gr}");
    assert!(trace.contains("the result is used with a stated caution"), "{trace}");
}

#[test]
fn a_referenced_specimen_not_in_the_request_is_a_warning_where_the_clinician_looks() {
    let (bundle, trace) = assess_case("specimen-missing-ionized-child");
    assert_r4_valid(&bundle);
    let di = issue(&bundle, "specimen-unread").expect("the specimen check could not run");
    assert_eq!(di["code"]["text"], "Specimen check could not run");
    assert!(di["detail"].as_str().unwrap().contains("Specimen/larkspur-spec-40417"), "{di}");
    let oo = &resources(&bundle, "OperationOutcome")[0];
    let warning = oo["issue"]
        .as_array()
        .unwrap()
        .iter()
        .find(|i| i["expression"][0].as_str().is_some_and(|e| e.ends_with(".specimen")))
        .expect("a located warning");
    assert_eq!(warning["severity"], "warning");
    assert!(iv_calcium_texts(&bundle)[0].contains("the specimen check did not run"));
    assert!(trace.contains("specimen.unread_severity"), "{trace}");
}

#[test]
fn a_clot_named_only_in_a_note_gives_a_caution_read_by_text_and_never_sets_the_result_aside() {
    let (bundle, _) = assess_case("specimen-clot-in-note-child");
    assert_r4_valid(&bundle);
    let di = issue(&bundle, "specimen-clotted").expect("named");
    let detail = di["detail"].as_str().unwrap();
    assert!(detail.contains("read by text from a note") && detail.contains("Small clot seen"), "{detail}");
    assert!(detail.contains("used, with this caution"), "{detail}");
    assert!(!iv_calcium_texts(&bundle).is_empty(), "the ionized calcium was used");
}

#[test]
fn with_only_a_clotted_ionized_calcium_no_status_and_the_clot_is_still_raised() {
    let (bundle, _) = assess_case("specimen-clotted-ionized-only-infant");
    assert_r4_valid(&bundle);
    assert!(issue(&bundle, "specimen-clotted").is_some());
    let notes = guidance_notes(&bundle).join("\n");
    assert!(notes.contains("repeat it on a sound sample"), "{notes}");
}

// ---------------------------------------------------------------------------
// Patient context: the Specimens are read from the EHR.

fn with_specimen(mut obs: Value, reference: &str) -> Value {
    obs["specimen"] = json!({ "reference": reference });
    obs
}

fn specimen(id: &str, code: &str, display: &str) -> Value {
    json!({
        "resourceType": "Specimen", "id": id, "status": "available",
        "subject": { "reference": format!("Patient/{PATIENT_ID}") },
        "condition": [{ "coding": [{ "system": V2_0493, "code": code, "display": display }] }],
    })
}

#[tokio::test]
async fn the_gather_reads_the_referenced_specimen_and_its_hemolysis_is_named() {
    let server = MockServer::start().await;
    let uri = server.uri();
    mount_patient(&server).await;
    mount_empty_other_searches(&server).await;
    let labs = [with_specimen(ionized_calcium("ica-1", 0.85), "Specimen/sp-1"), weight("wt-1", 20.0)];
    observation_search().respond_with(fhir(200, &searchset(&uri, &labs, None))).expect(1).mount(&server).await;
    Mock::given(method("GET"))
        .and(path("/Specimen"))
        .and(query_param("_id", "sp-1"))
        .respond_with(fhir(200, &searchset(&uri, &[specimen("sp-1", "HEM", "Hemolyzed")], None)))
        .named("Specimen search")
        .expect(1)
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream_args(args(&server)).await;

    let (status, bundle) = post_patient(&app, PATIENT_ID).await;

    assert_eq!(status, 200, "{bundle}");
    assert_r4_valid(&bundle);
    let di = issue(&bundle, "specimen-hemolyzed").expect("the fetched Specimen's condition is read");
    assert!(di["implicated"].to_string().contains("Specimen/sp-1"), "{di}");
    assert!(issue(&bundle, "specimen-unread").is_none(), "{bundle}");
}

#[tokio::test]
async fn a_failed_specimen_search_says_the_specimen_check_could_not_run() {
    let server = MockServer::start().await;
    let uri = server.uri();
    mount_patient(&server).await;
    mount_empty_other_searches(&server).await;
    let labs = [with_specimen(ionized_calcium("ica-1", 0.85), "Specimen/sp-1"), weight("wt-1", 20.0)];
    observation_search().respond_with(fhir(200, &searchset(&uri, &labs, None))).mount(&server).await;
    Mock::given(method("GET"))
        .and(path("/Specimen"))
        .respond_with(fhir(
            404,
            &json!({ "resourceType": "OperationOutcome", "issue": [{ "severity": "error", "code": "not-found" }] }),
        ))
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream_args(args(&server)).await;

    let (status, bundle) = post_patient(&app, PATIENT_ID).await;

    assert_eq!(status, 200, "{bundle}");
    assert_r4_valid(&bundle);
    assert!(issue(&bundle, "specimen-unread").is_some(), "{bundle}");
    let oo = &resources(&bundle, "OperationOutcome")[0];
    assert!(diagnostics(oo).contains("Specimen search"), "{}", diagnostics(oo));
}

#[tokio::test]
async fn a_specimen_on_another_server_is_never_fetched() {
    let elsewhere = MockServer::start().await;
    Mock::given(any()).respond_with(fhir(200, &json!({}))).expect(0).mount(&elsewhere).await;
    let server = MockServer::start().await;
    let uri = server.uri();
    mount_patient(&server).await;
    mount_empty_other_searches(&server).await;
    let foreign = format!("{}/Specimen/sp-9", elsewhere.uri());
    let labs = [with_specimen(ionized_calcium("ica-1", 0.85), &foreign), weight("wt-1", 20.0)];
    observation_search().respond_with(fhir(200, &searchset(&uri, &labs, None))).mount(&server).await;
    Mock::given(method("GET"))
        .and(path("/Specimen"))
        .respond_with(fhir(200, &json!({})))
        .expect(0)
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream_args(args(&server)).await;

    let (status, bundle) = post_patient(&app, PATIENT_ID).await;

    assert_eq!(status, 200, "{bundle}");
    assert_r4_valid(&bundle);
    assert!(issue(&bundle, "specimen-unread").is_some(), "{bundle}");
}

/// `assess` of a request given as JSON (standard input).
fn assess_doc(doc: &Value) -> Value {
    use std::io::Write;
    let mut child = Command::new(BIN)
        .args(["assess", "-", "--now", NOW])
        .env_remove("CALCIUM_CDS_RULES")
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    child.stdin.take().unwrap().write_all(doc.to_string().as_bytes()).unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn a_normal_magnesium_from_a_hemolyzed_sample_does_not_rule_out_a_low_one() {
    // The hemolyzed case, plus a magnesium of 0.80 mmol/L (within range) on the same Specimen.
    let text = std::fs::read_to_string(repo_path("tests/cases/specimen-hemolyzed-ionized-child.json")).unwrap();
    let mut doc: Value = serde_json::from_str(&text).unwrap();
    let entries = doc["entry"].as_array_mut().unwrap();
    let ica = entries.iter().find(|e| e["resource"]["code"]["coding"][0]["code"] == "1994-3").unwrap().clone();
    let mut mg = ica.clone();
    mg["fullUrl"] = json!("urn:uuid:7d1f3c0e-2b8a-4c51-9e47-0a6b5d2f8c13");
    mg["resource"]["code"] = json!({ "coding": [{ "system": "http://loinc.org", "code": "2601-3",
        "display": "Magnesium [Moles/volume] in Serum or Plasma" }] });
    mg["resource"]["valueQuantity"] =
        json!({ "value": 0.80, "unit": "mmol/L", "system": "http://unitsofmeasure.org", "code": "mmol/L" });
    entries.push(mg);
    let hemolyzed = assess_doc(&doc);
    assert_r4_valid(&hemolyzed);
    // The same request with the Specimen's condition removed.
    let mut sound = doc.clone();
    for e in sound["entry"].as_array_mut().unwrap() {
        if e["resource"]["resourceType"] == "Specimen" {
            e["resource"].as_object_mut().unwrap().remove("condition");
        }
    }
    let sound = assess_doc(&sound);
    let magnesium_proposed = |b: &Value| {
        resources(b, "ServiceRequest").iter().any(|s| s["code"].to_string().to_lowercase().contains("magnesium"))
    };
    assert!(!magnesium_proposed(&sound), "a sound normal magnesium is a result: not asked for again");
    assert!(magnesium_proposed(&hemolyzed), "a hemolyzed normal magnesium is asked for again");
    let oo = &resources(&hemolyzed, "OperationOutcome")[0];
    assert!(diagnostics(oo).contains("can falsely raise it"), "{}", diagnostics(oo));
    // Both results from the sample are named in the one hemolysis DetectedIssue.
    let detail = issue(&hemolyzed, "specimen-hemolyzed").unwrap()["detail"].as_str().unwrap().to_owned();
    assert!(detail.contains("Magnesium 0.80 mmol/L") && detail.contains("Ionized calcium 0.85 mmol/L"), "{detail}");
}
