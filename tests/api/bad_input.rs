//! Bad input. Request-level problems end the request with a status and an
//! OperationOutcome naming the element; problems of one resource never do:
//! the resource is set aside, named in the result's OperationOutcome, and not
//! used for the calcium status.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use serde_json::{Value, json};

use crate::helpers::{
    FHIR_JSON, Lab, OTHER_PATIENT_URL, PATIENT_FAMILY, PATIENT_GIVEN, PATIENT_URL, Scenario, TestApp, assert_r4_valid,
    content_type, guidance_notes, guidance_status, issue_at, issue_expressions, now_unix, outcome_issues,
    references_in, resources, rfc3339, spawn_app, spawn_app_with_body_limit,
};

/// POST, then check a refused request: status, media type, an R4-valid
/// OperationOutcome of errors. Returns the OperationOutcome.
async fn refused(app: &TestApp, case: &str, body: String, ct: &str, status: u16) -> Value {
    let response = app.post_assess(body, ct).await;
    let got = response.status().as_u16();
    let got_ct = content_type(&response);
    let text = response.text().await.expect("a body");
    assert_eq!(got, status, "case '{case}': status; body: {text}");
    assert!(got_ct.starts_with(FHIR_JSON), "case '{case}': Content-Type {got_ct:?}");
    let oo: Value = serde_json::from_str(&text).unwrap_or_else(|e| panic!("case '{case}': not JSON ({e}): {text}"));
    assert_eq!(oo["resourceType"], "OperationOutcome", "case '{case}': {oo}");
    let issues = oo["issue"].as_array().cloned().unwrap_or_default();
    assert!(!issues.is_empty(), "case '{case}': no issue");
    assert!(
        issues.iter().all(|i| i["severity"] == "error" || i["severity"] == "fatal"),
        "case '{case}': a refused request is an error: {oo}"
    );
    assert_r4_valid(&oo);
    oo
}

fn nested(depth: usize) -> String {
    format!("{}{{}}{}", "{\"a\":".repeat(depth), "}".repeat(depth))
}

fn two_patients() -> Value {
    let s = Scenario::new().add(Lab::IonizedCa, "ica-1", 1.20, 2.0);
    let mut bundle = s.bundle();
    let mut other = s.patient();
    other["id"] = json!("pt-larkspur-2");
    other["name"] = json!([{ "family": "Oakhollow", "given": ["Perrin"] }]);
    other["identifier"][0]["value"] = json!("LCH-99887766");
    bundle["entry"].as_array_mut().unwrap().insert(1, json!({ "fullUrl": OTHER_PATIENT_URL, "resource": other }));
    bundle
}

fn same_full_url() -> Value {
    let mut bundle =
        Scenario::new().add(Lab::IonizedCa, "ica-1", 1.20, 2.0).add(Lab::IonizedCa, "ica-2", 1.18, 4.0).bundle();
    let url = bundle["entry"][1]["fullUrl"].clone();
    bundle["entry"][2]["fullUrl"] = url;
    bundle
}

fn same_id_different_observations() -> Value {
    Scenario::new().add(Lab::IonizedCa, "ica-1", 1.20, 2.0).add(Lab::IonizedCa, "ica-1", 0.80, 4.0).bundle()
}

/// A well-formed document Bundle (identifier, timestamp, Composition first:
/// bdl-9, bdl-10, bdl-11), so the type is the only thing wrong with it.
fn document_bundle() -> Value {
    let s = Scenario::new().add(Lab::IonizedCa, "ica-1", 1.20, 2.0);
    let mut bundle = s.bundle();
    bundle["type"] = json!("document");
    bundle["identifier"] =
        json!({ "system": "urn:ietf:rfc:3986", "value": "urn:uuid:6d2e9a41-0b3c-4f7d-8e15-a9c4b2d7e301" });
    let composition = json!({
        "fullUrl": "urn:uuid:9e7d6c5b-4a39-4281-b0f1-e2d3c4b5a697",
        "resource": {
            "resourceType": "Composition",
            "status": "final",
            "type": { "coding": [{ "system": LOINC_SYSTEM, "code": "11502-2", "display": "Laboratory report" }] },
            "subject": { "reference": PATIENT_URL },
            "date": s.time(1.0),
            "author": [{ "display": "Larkspur Children's Hospital laboratory" }],
            "title": "Laboratory report"
        }
    });
    bundle["entry"].as_array_mut().unwrap().insert(0, composition);
    bundle
}

const LOINC_SYSTEM: &str = crate::helpers::LOINC;

fn parameters_without_bundle() -> Value {
    json!({
        "resourceType": "Parameters",
        "parameter": [{ "name": "now", "valueDateTime": "2026-11-30T15:00:00Z" }]
    })
}

fn parameters_with_patient_as_bundle() -> Value {
    json!({
        "resourceType": "Parameters",
        "parameter": [{ "name": "bundle", "resource": Scenario::new().patient() }]
    })
}

/// Request-level problems: (case, body, Content-Type, status, expressions that
/// some issue must name; empty when there is no element to name).
#[tokio::test]
async fn request_level_problems_are_refused_with_a_located_operation_outcome() {
    let app = spawn_app().await;
    let valid = Scenario::new().add(Lab::IonizedCa, "ica-1", 1.20, 2.0).bundle().to_string();
    let no_patient = {
        let mut b = Scenario::new().add(Lab::IonizedCa, "ica-1", 1.20, 2.0).bundle();
        b["entry"].as_array_mut().unwrap().remove(0);
        b
    };
    let cases: Vec<(&str, String, &str, u16, Vec<&str>)> = vec![
        ("not JSON", "{\"resourceType\": \"Bundle\",".to_owned(), FHIR_JSON, 400, vec![]),
        ("empty body", String::new(), FHIR_JSON, 400, vec![]),
        ("whitespace only", " \n\t ".to_owned(), FHIR_JSON, 400, vec![]),
        ("JSON nested 200 levels deep", nested(200), FHIR_JSON, 400, vec![]),
        ("a JSON array", format!("[{valid}]"), FHIR_JSON, 422, vec![]),
        ("JSON null", "null".to_owned(), FHIR_JSON, 422, vec![]),
        ("no resourceType", json!({ "type": "collection" }).to_string(), FHIR_JSON, 422, vec!["resourceType"]),
        ("a Patient alone", Scenario::new().patient().to_string(), FHIR_JSON, 422, vec!["resourceType"]),
        ("a Bundle with no Patient", no_patient.to_string(), FHIR_JSON, 422, vec!["Bundle.entry"]),
        (
            "two different Patients",
            two_patients().to_string(),
            FHIR_JSON,
            422,
            vec!["Bundle.entry[0].resource", "Bundle.entry[1].resource"],
        ),
        (
            "two entries with one fullUrl",
            same_full_url().to_string(),
            FHIR_JSON,
            422,
            vec!["Bundle.entry[1].fullUrl", "Bundle.entry[2].fullUrl"],
        ),
        (
            "two different Observations with one id",
            same_id_different_observations().to_string(),
            FHIR_JSON,
            422,
            vec!["Bundle.entry[1].resource.id", "Bundle.entry[2].resource.id"],
        ),
        ("Bundle.type document", document_bundle().to_string(), FHIR_JSON, 422, vec!["Bundle.type"]),
        (
            "Parameters without a bundle part",
            parameters_without_bundle().to_string(),
            FHIR_JSON,
            422,
            vec!["Parameters.parameter"],
        ),
        (
            "Parameters whose bundle part is a Patient",
            parameters_with_patient_as_bundle().to_string(),
            FHIR_JSON,
            422,
            vec!["Parameters.parameter[0].resource"],
        ),
        ("Content-Type text/plain", valid.clone(), "text/plain", 415, vec![]),
        ("Content-Type application/xml", valid.clone(), "application/fhir+xml", 415, vec![]),
    ];
    for (case, body, ct, status, expressions) in cases {
        let oo = refused(&app, case, body, ct, status).await;
        let issues = oo["issue"].as_array().cloned().unwrap_or_default();
        let found = issue_expressions(&issues);
        for wanted in expressions {
            assert!(
                found.iter().any(|e| e.contains(wanted)),
                "case '{case}': no issue names {wanted:?}; expressions {found:?}; {oo}"
            );
        }
    }
}

#[tokio::test]
async fn the_same_resource_twice_is_not_a_conflict() {
    // Two byte-identical copies of one Observation (same id) are the same fact,
    // not an ambiguity: the request is assessed.
    let app = spawn_app().await;
    let s = Scenario::new();
    let obs = s.lab(Lab::IonizedCa, "ica-1", 1.20, 2.0);
    let bundle = s.with(obs.clone()).with(obs).bundle();
    let result = app.assess_ok(&bundle).await;
    assert_eq!(guidance_status(&result), "success");
}

#[tokio::test]
async fn a_body_over_a_small_limit_is_413() {
    let app = spawn_app_with_body_limit(512).await;
    let body = Scenario::new().add(Lab::IonizedCa, "ica-1", 1.20, 2.0).bundle().to_string();
    assert!(body.len() > 512);
    let oo = refused(&app, "over 512 bytes", body, FHIR_JSON, 413).await;
    assert_eq!(oo["issue"][0]["code"], "too-costly", "{oo}");
    // Under the limit the body is read (and refused for what it is, not its size).
    let small = json!({ "resourceType": "Basic" }).to_string();
    refused(&app, "under 512 bytes", small, FHIR_JSON, 422).await;
}

/// Send a body with chunked transfer encoding (no Content-Length, so the limit
/// must be enforced while reading); returns the status code and the body.
fn post_chunked(address: &str, body: &str) -> (u16, String) {
    use std::io::{Read, Write};
    let host = address.trim_start_matches("http://");
    let mut stream = std::net::TcpStream::connect(host).expect("connect");
    let mut request = format!(
        "POST /fhir/$assess HTTP/1.1\r\nHost: {host}\r\nContent-Type: {FHIR_JSON}\r\nTransfer-Encoding: chunked\r\nConnection: close\r\n\r\n"
    );
    for chunk in body.as_bytes().chunks(100) {
        request.push_str(&format!("{:x}\r\n{}\r\n", chunk.len(), String::from_utf8_lossy(chunk)));
    }
    request.push_str("0\r\n\r\n");
    // The server may answer and close before it has read everything.
    let _ = stream.write_all(request.as_bytes());
    let mut response = Vec::new();
    let _ = stream.read_to_end(&mut response);
    let response = String::from_utf8_lossy(&response).into_owned();
    let status = response.split(' ').nth(1).and_then(|s| s.parse().ok()).unwrap_or(0);
    let body = response.split_once("\r\n\r\n").map(|(_, b)| b.to_owned()).unwrap_or_default();
    (status, body)
}

#[tokio::test]
async fn a_chunked_body_over_the_limit_is_413() {
    let app = spawn_app_with_body_limit(512).await;
    let body = Scenario::new().add(Lab::IonizedCa, "ica-1", 1.20, 2.0).bundle().to_string();
    assert!(body.len() > 512);
    let address = app.address.clone();
    let (status, text) = tokio::task::spawn_blocking(move || post_chunked(&address, &body)).await.expect("joined");
    assert_eq!(status, 413, "{text}");
    assert!(text.contains("too-costly"), "{text}");
    // The same way, under the limit, is read.
    let address = app.address.clone();
    let small = json!({ "resourceType": "Basic" }).to_string();
    let (status, text) = tokio::task::spawn_blocking(move || post_chunked(&address, &small)).await.expect("joined");
    assert_eq!(status, 422, "{text}");
}

/// A valid request padded (in an Observation note) to `size` bytes.
fn padded_request(size: usize) -> String {
    let s = Scenario::new();
    let mut obs = s.lab(Lab::IonizedCa, "ica-1", 1.20, 2.0);
    obs["note"] = json!([{ "text": "" }]);
    let base = s.clone().with(obs.clone()).bundle().to_string().len();
    obs["note"][0]["text"] = json!("x".repeat(size.saturating_sub(base)));
    let body = s.with(obs).bundle().to_string();
    assert_eq!(body.len(), size);
    body
}

#[tokio::test]
async fn the_default_limit_is_one_mebibyte() {
    let app = spawn_app().await;
    let over = padded_request(1024 * 1024 * 11 / 10);
    let oo = refused(&app, "1.1 MiB", over, FHIR_JSON, 413).await;
    assert_eq!(oo["issue"][0]["code"], "too-costly", "{oo}");
    // Just under the limit is accepted.
    let under = padded_request(1024 * 1024 - 64);
    let response = app.post_assess(under, FHIR_JSON).await;
    assert_eq!(response.status().as_u16(), 200);
}

/// A change made to a built resource.
type Edit = fn(&mut Value);

#[tokio::test]
async fn a_refused_patient_is_not_echoed() {
    let app = spawn_app().await;
    let s = Scenario::new().add(Lab::IonizedCa, "ica-1", 1.20, 2.0);
    let edits: Vec<(&str, Edit)> = vec![
        ("birth date not an R4 date, gender not a code", |p| {
            p["birthDate"] = json!("14/03/2020");
            p["gender"] = json!("girl Juniper");
        }),
        ("name as a string", |p| p["name"] = json!(format!("{PATIENT_GIVEN} {PATIENT_FAMILY} 14/03/2020"))),
        ("a modifierExtension", |p| {
            p["birthDate"] = json!("2020-03-14");
            p["modifierExtension"] = json!([{
                "url": "https://larkspur-childrens.example.org/fhir/StructureDefinition/record-sealed",
                "valueString": "Juniper Brackenridge 2020-03-14"
            }]);
        }),
    ];
    for (case, edit) in edits {
        let mut bundle = s.bundle();
        edit(&mut bundle["entry"][0]["resource"]);
        let oo = refused(&app, case, bundle.to_string(), FHIR_JSON, 422).await;
        let text = oo.to_string();
        for secret in [PATIENT_FAMILY, PATIENT_GIVEN, "14/03/2020", "2020-03-14", "LCH-81726354"] {
            assert!(!text.contains(secret), "case '{case}': the OperationOutcome echoes {secret:?}: {text}");
        }
        let found = issue_expressions(oo["issue"].as_array().unwrap());
        assert!(found.iter().any(|e| e.starts_with("Bundle.entry[0].resource")), "case '{case}': {found:?}");
    }
}

// ---------------------------------------------------------------------------
// Problems of one resource: set aside, never fatal

/// Bad ionized calcium: 0.75 mmol/L, severe hypocalcemia if it were used.
const BAD_IONIZED: f64 = 0.75;
/// Bad total calcium: 6.0 mg/dL (1.50 mmol/L), low if it were used.
const BAD_TOTAL: f64 = 6.0;

struct SetAsideCase {
    name: &'static str,
    lab: Lab,
    value: f64,
    edit: Edit,
    /// Where the problem is, after `Bundle.entry[1].resource`.
    at: &'static str,
    /// Add a usable, normal ionized calcium (1.21 mmol/L, older than the bad one).
    companion: bool,
}

fn set_aside_cases() -> Vec<SetAsideCase> {
    let case = |name, lab, value, edit, at, companion| SetAsideCase { name, lab, value, edit, at, companion };
    vec![
        case(
            "another patient's result",
            Lab::IonizedCa,
            BAD_IONIZED,
            |o| o["subject"]["reference"] = json!(OTHER_PATIENT_URL),
            ".subject.reference",
            false,
        ),
        case(
            "another patient's result, beside a usable one",
            Lab::IonizedCa,
            BAD_IONIZED,
            |o| o["subject"]["reference"] = json!(OTHER_PATIENT_URL),
            ".subject.reference",
            true,
        ),
        case(
            "a string where a Quantity belongs",
            Lab::TotalCa,
            BAD_TOTAL,
            |o| o["valueQuantity"] = json!("9.1 mg/dL"),
            ".valueQuantity",
            false,
        ),
        // UCUM is case-sensitive: MG/DL is not a UCUM code; milliequivalents are `meq`, not `mEq`.
        case(
            "a unit code that is not UCUM (MG/DL)",
            Lab::TotalCa,
            BAD_TOTAL,
            |o| o["valueQuantity"]["code"] = json!("MG/DL"),
            ".valueQuantity.code",
            false,
        ),
        case(
            "a unit code that is not UCUM (mEq/L)",
            Lab::IonizedCa,
            BAD_IONIZED,
            |o| o["valueQuantity"]["code"] = json!("mEq/L"),
            ".valueQuantity.code",
            false,
        ),
        case(
            "a unit code that is not UCUM (mg%)",
            Lab::TotalCa,
            BAD_TOTAL,
            |o| o["valueQuantity"]["code"] = json!("mg%"),
            ".valueQuantity.code",
            false,
        ),
        case(
            "no unit code",
            Lab::TotalCa,
            BAD_TOTAL,
            |o| {
                o["valueQuantity"].as_object_mut().unwrap().remove("code");
            },
            ".valueQuantity.code",
            false,
        ),
        case(
            "a unit system that is not UCUM",
            Lab::TotalCa,
            BAD_TOTAL,
            |o| o["valueQuantity"]["system"] = json!("https://larkspur-childrens.example.org/units"),
            ".valueQuantity.system",
            false,
        ),
        case("a negative value", Lab::IonizedCa, -0.75, |_| {}, ".valueQuantity.value", false),
        case("a negative value, beside a usable one", Lab::IonizedCa, -0.75, |_| {}, ".valueQuantity.value", true),
        case(
            "a physiologically impossible total calcium (90 mg/dL)",
            Lab::TotalCa,
            90.0,
            |_| {},
            ".valueQuantity.value",
            false,
        ),
        case(
            "an effective time in the future",
            Lab::IonizedCa,
            BAD_IONIZED,
            |o| o["effectiveDateTime"] = json!(rfc3339(now_unix() + 2 * 86_400)),
            ".effectiveDateTime",
            false,
        ),
        case(
            "an effective time in the future, beside a usable one",
            Lab::IonizedCa,
            BAD_IONIZED,
            |o| o["effectiveDateTime"] = json!(rfc3339(now_unix() + 2 * 86_400)),
            ".effectiveDateTime",
            true,
        ),
        case(
            "status entered-in-error",
            Lab::IonizedCa,
            BAD_IONIZED,
            |o| o["status"] = json!("entered-in-error"),
            ".status",
            false,
        ),
        case(
            "status entered-in-error, beside a usable one",
            Lab::IonizedCa,
            BAD_IONIZED,
            |o| o["status"] = json!("entered-in-error"),
            ".status",
            true,
        ),
        case(
            "status registered (no result yet)",
            Lab::IonizedCa,
            BAD_IONIZED,
            |o| o["status"] = json!("registered"),
            ".status",
            false,
        ),
        case(
            "a dataAbsentReason",
            Lab::TotalCa,
            BAD_TOTAL,
            |o| {
                o.as_object_mut().unwrap().remove("valueQuantity");
                o["dataAbsentReason"] = json!({ "coding": [{ "system": "http://terminology.hl7.org/CodeSystem/data-absent-reason", "code": "error" }], "text": "Haemolysed" });
            },
            ".dataAbsentReason",
            false,
        ),
        case(
            "an unknown modifierExtension",
            Lab::IonizedCa,
            BAD_IONIZED,
            |o| {
                o["modifierExtension"] = json!([{
                    "url": "https://larkspur-childrens.example.org/fhir/StructureDefinition/result-disputed",
                    "valueBoolean": true
                }])
            },
            ".modifierExtension",
            false,
        ),
        case(
            "comparator <",
            Lab::IonizedCa,
            0.5,
            |o| o["valueQuantity"]["comparator"] = json!("<"),
            ".valueQuantity.comparator",
            false,
        ),
        case(
            "comparator <, beside a usable one",
            Lab::IonizedCa,
            0.5,
            |o| o["valueQuantity"]["comparator"] = json!("<"),
            ".valueQuantity.comparator",
            true,
        ),
    ]
}

#[tokio::test]
async fn a_bad_result_is_set_aside_named_and_not_used() {
    let app = spawn_app().await;
    for c in set_aside_cases() {
        let bad_id = "obs-bad";
        let mut s = Scenario::new().add_edited(c.lab, bad_id, c.value, 1.0, c.edit);
        if c.companion {
            s = s.add(Lab::IonizedCa, "ica-good", 1.21, 3.0);
        }
        let request = s.bundle();
        let bad_url = request["entry"][1]["fullUrl"].as_str().unwrap().to_owned();
        let result = app.assess_ok(&request).await;
        let name = c.name;

        // Named, located, with the resource it came from.
        let issues = outcome_issues(&result);
        let at = format!("Bundle.entry[1].resource{}", c.at);
        let issue = issue_at(&issues, &at)
            .unwrap_or_else(|| panic!("case '{name}': no issue at {at}; expressions {:?}", issue_expressions(&issues)));
        assert_eq!(issue["severity"], "warning", "case '{name}': {issue}");
        let diagnostics = issue["diagnostics"].as_str().unwrap_or("");
        assert!(diagnostics.starts_with(&format!("Observation/{bad_id}")), "case '{name}': {diagnostics}");

        // Not used: no hypocalcemia found from it, not cited as evidence.
        assert!(resources(&result, "DetectedIssue").is_empty(), "case '{name}': a DetectedIssue was raised: {result}");
        assert!(resources(&result, "Observation").is_empty(), "case '{name}': a derived Observation was made");
        let provenance = resources(&result, "Provenance");
        let cited: Vec<String> = provenance.iter().flat_map(|p| references_in(&p["entity"])).collect();
        assert!(
            !cited.iter().any(|r| r == &format!("Observation/{bad_id}") || r == &bad_url),
            "case '{name}': the set-aside result is cited as used: {cited:?}"
        );
        let summary = guidance_notes(&result).first().cloned().unwrap_or_default();
        if c.companion {
            assert_eq!(guidance_status(&result), "success", "case '{name}'");
            assert!(
                summary.starts_with("No hypocalcemia") && summary.contains("1.21 mmol/L"),
                "case '{name}': {summary}"
            );
            assert!(cited.iter().any(|r| r == "Observation/ica-good"), "case '{name}': {cited:?}");
        } else {
            assert_eq!(guidance_status(&result), "data-required", "case '{name}'");
            assert!(summary.starts_with("Not assessed"), "case '{name}': {summary}");
        }
    }
}

#[tokio::test]
async fn a_preliminary_result_is_used_with_a_caution() {
    let app = spawn_app().await;
    let request = Scenario::new()
        .add_edited(Lab::IonizedCa, "ica-prelim", 0.85, 1.0, |o| o["status"] = json!("preliminary"))
        .bundle();
    let result = app.assess_ok(&request).await;

    // Hypocalcemia with only a calcium result: the work-up cannot tell the causes apart.
    assert_eq!(guidance_status(&result), "data-required");
    // 0.85 mmol/L in a six-year-old: below 1.11 and at or below the severe grade 0.9.
    let issue = crate::helpers::hypocalcemia_issue(&result);
    assert_eq!(issue["severity"], "high", "{issue}");
    assert!(references_in(&issue["evidence"]).iter().any(|r| r == "Observation/ica-prelim"), "{issue}");
    let notes = guidance_notes(&result);
    assert!(
        notes.iter().any(|n| n.starts_with("Caution:") && n.contains("preliminary")),
        "no caution about the preliminary result: {notes:?}"
    );
    // Used, so not listed as set aside.
    let issues = outcome_issues(&result);
    assert!(
        !issue_expressions(&issues).iter().any(|e| e.starts_with("Bundle.entry[1]")),
        "the preliminary result is listed as not used: {issues:?}"
    );
}

#[tokio::test]
async fn mg_per_dl_with_a_lower_case_litre_is_ucum_and_is_used() {
    // UCUM defines the litre as both `l` and `L`, so `mg/dl` is the same unit
    // as `mg/dL`: the result is read, and read the same way.
    let app = spawn_app().await;
    let request = |code: &'static str| {
        Scenario::new()
            .add_edited(Lab::TotalCa, "tca-1", 6.0, 1.0, move |o| o["valueQuantity"]["code"] = json!(code))
            .add(Lab::Albumin, "alb-1", 4.0, 1.0)
            .bundle()
    };
    let lower = app.assess_ok(&request("mg/dl")).await;
    let upper = app.assess_ok(&request("mg/dL")).await;
    for result in [&lower, &upper] {
        // 6.0 + 0.8 x (4.0 - 4.0) = 6.0 mg/dL = 60 / 40.078 = 1.50 mmol/L: below the severe grade 1.8.
        let derived = crate::helpers::only(result, "Observation");
        assert_eq!(derived["valueQuantity"]["value"], json!(1.5), "{derived}");
        assert_eq!(crate::helpers::hypocalcemia_issue(result)["severity"], "high");
        assert!(issue_at(&outcome_issues(result), "Bundle.entry[1].resource.valueQuantity.code").is_none());
    }
}

#[tokio::test]
async fn an_unknown_parameters_part_is_set_aside_with_the_accepted_names() {
    // Issue 14: a misspelt 'vascularaccess' was ignored and the answer said every input was read.
    let app = spawn_app().await;
    let bundle = Scenario::new().add(Lab::IonizedCa, "ica-1", 1.20, 2.0).bundle();
    let body = json!({
        "resourceType": "Parameters",
        "parameter": [
            { "name": "bundle", "resource": bundle },
            { "name": "vascularaccess", "valueCode": "central" }
        ]
    });
    let result = app.assess_ok(&body).await;
    let issues = outcome_issues(&result);
    let issue = issue_at(&issues, "Parameters.parameter[1].name").unwrap_or_else(|| panic!("{issues:?}"));
    assert_eq!(issue["severity"], "warning", "{issue}");
    let text = issue["diagnostics"].as_str().unwrap_or_default();
    assert!(text.contains("'vascularaccess'") && text.contains("bundle, now, vascularAccess"), "{text}");
    assert!(text.contains("did you mean 'vascularAccess'"), "{text}");
    assert!(
        issues.iter().all(|i| !i["diagnostics"].as_str().unwrap_or_default().contains("Every input")),
        "{issues:?}"
    );
}

#[tokio::test]
async fn a_parameters_part_given_twice_is_refused() {
    let app = spawn_app().await;
    let bundle = Scenario::new().add(Lab::IonizedCa, "ica-1", 1.20, 2.0).bundle();
    let body = json!({
        "resourceType": "Parameters",
        "parameter": [
            { "name": "vascularAccess", "valueCode": "central" },
            { "name": "bundle", "resource": bundle },
            { "name": "vascularAccess", "valueCode": "peripheral" }
        ]
    });
    let oo = refused(&app, "vascularAccess twice", body.to_string(), FHIR_JSON, 422).await;
    let found = issue_expressions(oo["issue"].as_array().unwrap());
    assert!(found.contains(&"Parameters.parameter[2].name".to_owned()), "{oo}");
    assert_eq!(oo["issue"][0]["code"], "duplicate", "{oo}");
}

#[tokio::test]
async fn an_empty_entry_list_gets_a_plain_message() {
    let app = spawn_app().await;
    let body = json!({ "resourceType": "Bundle", "type": "collection", "entry": [] });
    let oo = refused(&app, "empty entry", body.to_string(), FHIR_JSON, 422).await;
    let text = oo["issue"][0]["diagnostics"].as_str().unwrap_or_default().to_owned();
    assert!(text.starts_with("The Bundle's entry list is empty"), "{oo}");
    assert!(!text.contains("less than 1 item"), "not the validator's wording: {oo}");
    assert_eq!(oo["issue"][0]["expression"][0], "Bundle.entry");
}
