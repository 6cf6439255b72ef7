//! Shared harness: `spawn_app` (the real `Application` on a free port), the
//! official HL7 FHIR R4 schema check, example files, and a small builder of
//! request Bundles for invented patients of the invented "Larkspur Children's
//! Hospital".

// A failed expectation in a test harness is a test failure: panicking is the point.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic, dead_code)]

use std::collections::HashMap;
use std::sync::{Arc, LazyLock, Mutex};
use std::time::{SystemTime, UNIX_EPOCH};

use calcium_cds::config::{DEFAULT_BODY_LIMIT, RuleArgs, ServeArgs, load_rules};
use calcium_cds::engine::Engine;
use calcium_cds::http::Application;
use jsonschema::Validator;
use serde_json::{Value, json};

/// The FHIR JSON media type (without parameters).
pub const FHIR_JSON: &str = "application/fhir+json";
/// LOINC.
pub const LOINC: &str = "http://loinc.org";
/// UCUM.
pub const UCUM: &str = "http://unitsofmeasure.org";
/// The fixed evaluation time used with the example files (their data is of 2026-11-30).
pub const EXAMPLE_NOW: &str = "2026-11-30T15:00:00Z";

// ---------------------------------------------------------------------------
// The application

/// A running service and a client for it.
pub struct TestApp {
    /// `http://127.0.0.1:<port>`.
    pub address: String,
    /// HTTP client.
    pub client: reqwest::Client,
}

/// Start the service with the default rules and body limit.
pub async fn spawn_app() -> TestApp {
    spawn_app_with_body_limit(DEFAULT_BODY_LIMIT).await
}

/// Start the service with a chosen request body limit (bytes).
pub async fn spawn_app_with_body_limit(body_limit: usize) -> TestApp {
    spawn_app_settings(ServeArgs { body_limit, ..default_settings() }).await
}

/// Start the service with an upstream FHIR server at `base_url` (optionally
/// with a static bearer token) and every other upstream setting at its
/// default; see `spawn_app_with_upstream_args` to choose them.
pub async fn spawn_app_with_upstream(base_url: &str, token: Option<&str>) -> TestApp {
    spawn_app_with_upstream_args(calcium_cds::config::UpstreamArgs {
        fhir_base_url: Some(base_url.to_owned()),
        fhir_token: token.map(|t| calcium_cds::config::Secret(t.to_owned())),
        ..calcium_cds::config::UpstreamArgs::default()
    })
    .await
}

/// Start the service with chosen upstream settings (`ServeArgs.upstream`).
pub async fn spawn_app_with_upstream_args(upstream: calcium_cds::config::UpstreamArgs) -> TestApp {
    spawn_app_with(upstream, calcium_cds::config::LimitArgs::default()).await
}

/// Start the service with chosen upstream settings and limits.
pub async fn spawn_app_with(
    upstream: calcium_cds::config::UpstreamArgs,
    limits: calcium_cds::config::LimitArgs,
) -> TestApp {
    spawn_app_full(upstream, limits, calcium_cds::config::InboundAuthArgs::default()).await
}

/// Start the service with chosen upstream settings, limits and inbound authorization.
pub async fn spawn_app_full(
    upstream: calcium_cds::config::UpstreamArgs,
    limits: calcium_cds::config::LimitArgs,
    auth: calcium_cds::config::InboundAuthArgs,
) -> TestApp {
    spawn_app_settings(ServeArgs { upstream, limits, auth, ..default_settings() }).await
}

/// The settings the harness starts from: a free port, embedded rules, everything else at its default.
pub fn default_settings() -> ServeArgs {
    ServeArgs {
        listen: "127.0.0.1:0".parse().expect("a socket address"),
        body_limit: DEFAULT_BODY_LIMIT,
        rules: RuleArgs { rules: None },
        upstream: calcium_cds::config::UpstreamArgs::default(),
        limits: calcium_cds::config::LimitArgs::default(),
        auth: calcium_cds::config::InboundAuthArgs::default(),
        telemetry: calcium_cds::config::TelemetryArgs::default(),
        workbench: true,
        config_file: None,
    }
}

/// Start the service with the given settings (port 0 picks a free port).
pub async fn spawn_app_settings(settings: ServeArgs) -> TestApp {
    let rules = load_rules(None).expect("the embedded rules load");
    let engine = Engine::new(rules).expect("the engine builds");
    let app = Application::build(&settings, engine).expect("the application builds");
    let address = format!("http://127.0.0.1:{}", app.port());
    // actix's Server is a plain future; its workers run on their own threads.
    tokio::spawn(app.run_until_stopped());
    let client =
        reqwest::Client::builder().redirect(reqwest::redirect::Policy::none()).build().expect("an HTTP client");
    TestApp { address, client }
}

impl TestApp {
    /// POST a body to `/fhir/$assess` with the given Content-Type.
    pub async fn post_assess(&self, body: impl Into<reqwest::Body>, content_type: &str) -> reqwest::Response {
        self.client
            .post(format!("{}/fhir/$assess", self.address))
            .header(reqwest::header::CONTENT_TYPE, content_type)
            .body(body)
            .send()
            .await
            .expect("the request is sent")
    }

    /// POST a JSON document to `/fhir/$assess` as `application/fhir+json`.
    pub async fn post_json(&self, doc: &Value) -> reqwest::Response {
        self.post_assess(doc.to_string(), FHIR_JSON).await
    }

    /// GET a path (starting with `/`).
    pub async fn get(&self, path: &str) -> reqwest::Response {
        self.client.get(format!("{}{path}", self.address)).send().await.expect("the request is sent")
    }

    /// POST a request that must succeed; returns the result Bundle after
    /// checking status 200, the FHIR media type and R4 validity.
    pub async fn assess_ok(&self, doc: &Value) -> Value {
        let response = self.post_json(doc).await;
        let status = response.status().as_u16();
        let content_type = content_type(&response);
        let text = response.text().await.expect("a body");
        assert_eq!(status, 200, "expected 200; body: {text}");
        assert!(content_type.starts_with(FHIR_JSON), "Content-Type {content_type}");
        let bundle: Value = serde_json::from_str(&text).expect("the body is JSON");
        assert_eq!(bundle["resourceType"], "Bundle", "{bundle}");
        assert_eq!(bundle["type"], "collection", "{bundle}");
        assert_r4_valid(&bundle);
        bundle
    }
}

/// The Content-Type header of a response ("" when absent).
pub fn content_type(response: &reqwest::Response) -> String {
    response.headers().get(reqwest::header::CONTENT_TYPE).and_then(|v| v.to_str().ok()).unwrap_or("").to_owned()
}

// ---------------------------------------------------------------------------
// The official R4 JSON Schema

fn schema_document() -> &'static Value {
    static DOC: LazyLock<Value> = LazyLock::new(|| {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/../fhir-profiles/r4/fhir.schema.json");
        let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("cannot read {path}: {e}"));
        serde_json::from_str(&text).expect("the official schema is JSON")
    });
    &DOC
}

/// The HL7 FHIR R4 JSON Schema (draft-06) as published: any resource type.
pub static OFFICIAL: LazyLock<Validator> =
    LazyLock::new(|| jsonschema::draft6::new(schema_document()).expect("the official schema compiles"));

/// The official schema narrowed to one resource type, for readable errors
/// (the top-level `oneOf` over 146 types only says "no branch matched").
fn per_type(resource_type: &str) -> Option<Arc<Validator>> {
    static CACHE: LazyLock<Mutex<HashMap<String, Arc<Validator>>>> = LazyLock::new(|| Mutex::new(HashMap::new()));
    let definitions = schema_document().get("definitions")?;
    definitions.get(resource_type)?;
    let mut cache = CACHE.lock().unwrap_or_else(std::sync::PoisonError::into_inner);
    if let Some(v) = cache.get(resource_type) {
        return Some(v.clone());
    }
    let schema = json!({ "$ref": format!("#/definitions/{resource_type}"), "definitions": definitions });
    let compiled = Arc::new(jsonschema::draft6::new(&schema).expect("a per-type schema compiles"));
    cache.insert(resource_type.to_owned(), compiled.clone());
    Some(compiled)
}

/// Why `resource` fails the official schema, located (empty when it passes).
pub fn r4_errors(resource: &Value) -> Vec<String> {
    if OFFICIAL.is_valid(resource) {
        return Vec::new();
    }
    let resource_type = resource.get("resourceType").and_then(Value::as_str).unwrap_or("");
    let Some(validator) = per_type(resource_type) else {
        return vec![format!("resourceType {resource_type:?} is not an R4 resource type")];
    };
    let errors: Vec<String> = validator
        .iter_errors(resource)
        .map(|e| format!("{resource_type} at '{}': {e}", e.instance_path().as_str()))
        .collect();
    if errors.is_empty() {
        vec![format!("{resource_type}: fails the top-level schema, though valid against its own definition")]
    } else {
        errors
    }
}

/// Why a resource fails the official schema; for a Bundle also each entry
/// resource on its own, so that a failure is located.
pub fn r4_problems(resource: &Value) -> Vec<String> {
    let mut problems = Vec::new();
    if let Some(entries) = resource.get("entry").and_then(Value::as_array) {
        for (i, entry) in entries.iter().enumerate() {
            if let Some(r) = entry.get("resource") {
                problems.extend(r4_errors(r).into_iter().map(|e| format!("entry[{i}]: {e}")));
            }
        }
    }
    problems.extend(r4_errors(resource));
    problems
}

/// Assert that a resource (and, for a Bundle, each entry) is valid FHIR R4 by the official schema.
pub fn assert_r4_valid(resource: &Value) {
    let problems = r4_problems(resource);
    assert!(problems.is_empty(), "not valid FHIR R4:\n  {}\nresource: {resource}", problems.join("\n  "));
}

/// As `r4_problems`, waiving exactly one known defect of the vendored schema:
/// its `FHIRVersion` enum stops at "4.0.0" (fhir-profiles/r4/ORIGIN.md), so a
/// truthful `"fhirVersion": "4.0.1"` fails it at `/fhirVersion` only. The
/// value 4.0.1 is replaced by 4.0.0 for the check; any other error, and any
/// other fhirVersion value, still counts. It is also an error if the schema
/// stops objecting to 4.0.1, so that the waiver cannot outlive its reason
/// unnoticed.
pub fn r4_problems_except_fhir_version(resource: &Value) -> Vec<String> {
    let mut copy = resource.clone();
    let mut problems = Vec::new();
    if copy.get("fhirVersion") == Some(&json!("4.0.1")) {
        let errors = r4_errors(resource);
        if !errors.iter().any(|e| e.contains("'/fhirVersion'")) {
            problems.push(format!("the waiver is for /fhirVersion 4.0.1, but the schema accepts it now: {errors:?}"));
        }
        copy["fhirVersion"] = json!("4.0.0");
    }
    problems.extend(r4_problems(&copy));
    problems
}

/// Assert validity with the fhirVersion 4.0.1 waiver (see `r4_problems_except_fhir_version`).
pub fn assert_r4_valid_except_fhir_version(resource: &Value) {
    let problems = r4_problems_except_fhir_version(resource);
    assert!(problems.is_empty(), "not valid FHIR R4:\n  {}\nresource: {resource}", problems.join("\n  "));
}

#[test]
fn the_official_schema_check_rejects_what_r4_forbids() {
    // A string where a decimal belongs, located at the element.
    let obs = json!({
        "resourceType": "Observation", "status": "final",
        "code": { "text": "calcium" }, "valueQuantity": { "value": "9.1", "code": "mg/dL" }
    });
    let errors = r4_problems(&obs);
    assert!(errors.iter().any(|e| e.contains("'/valueQuantity/value'")), "{errors:?}");
    // Quirk of this schema: complex datatypes (659 of 680 definitions) have
    // `properties` but no `"type": "object"`, so a string where a Quantity
    // belongs passes it. Recorded here so that nobody relies on it.
    let string_quantity = json!({
        "resourceType": "Observation", "status": "final",
        "code": { "text": "calcium" }, "valueQuantity": "9.1 mg/dL"
    });
    assert!(r4_problems(&string_quantity).is_empty(), "the schema has started to type-check complex elements");
    // An element R4 does not define.
    let patient = json!({ "resourceType": "Patient", "birthdate": "2019-01-01" });
    assert!(!r4_problems(&patient).is_empty());
    // Inside a Bundle, the failing entry is named.
    let bundle = json!({ "resourceType": "Bundle", "type": "collection", "entry": [{ "resource": patient }] });
    let errors = r4_problems(&bundle);
    assert!(errors.iter().any(|e| e.starts_with("entry[0]: Patient")), "{errors:?}");
    // And what is valid passes.
    assert_eq!(r4_problems(&json!({ "resourceType": "Patient", "birthDate": "2019-01-01" })), Vec::<String>::new());
}

#[test]
fn the_fhir_version_waiver_is_exactly_one_error() {
    let cs = |version: &str| {
        json!({
            "resourceType": "CapabilityStatement", "status": "active", "date": "2026-11-30",
            "kind": "instance", "fhirVersion": version, "format": ["json"]
        })
    };
    assert_eq!(r4_problems_except_fhir_version(&cs("4.0.1")), Vec::<String>::new());
    // Without the waiver 4.0.1 fails, at /fhirVersion.
    let errors = r4_problems(&cs("4.0.1"));
    assert!(!errors.is_empty() && errors.iter().all(|e| e.contains("'/fhirVersion'")), "{errors:?}");
    // Another version is not waived, nor is another error beside the waived one.
    assert!(!r4_problems_except_fhir_version(&cs("5.0.0")).is_empty());
    let mut other = cs("4.0.1");
    other["kind"] = json!("service");
    assert!(!r4_problems_except_fhir_version(&other).is_empty());
}

// ---------------------------------------------------------------------------
// Example files

/// A path in the repository, from its top (e.g. `deploy/Dockerfile`).
pub fn repo_path(rel: &str) -> std::path::PathBuf {
    std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("..").join(rel)
}

/// Directory of the example requests.
pub fn examples_dir() -> std::path::PathBuf {
    std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../fhir-profiles/examples")
}

/// The text of `fhir-profiles/examples/<name>` (with or without `.json`).
pub fn example(name: &str) -> String {
    let file = if name.ends_with(".json") { name.to_owned() } else { format!("{name}.json") };
    let path = examples_dir().join(&file);
    std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()))
}

/// An example Bundle wrapped in Parameters with `now` = [`EXAMPLE_NOW`], so that an
/// HTTP test assesses it as of the example's own clock, not today's.
pub fn example_at_now(name: &str) -> String {
    let bundle: Value = serde_json::from_str(&example(name)).unwrap_or_else(|e| panic!("{name}: {e}"));
    serde_json::json!({
        "resourceType": "Parameters",
        "parameter": [
            { "name": "bundle", "resource": bundle },
            { "name": "now", "valueDateTime": EXAMPLE_NOW },
        ],
    })
    .to_string()
}

// ---------------------------------------------------------------------------
// Reading result Bundles

/// Resources of one type in a Bundle, in entry order.
pub fn resources<'a>(bundle: &'a Value, resource_type: &str) -> Vec<&'a Value> {
    bundle["entry"]
        .as_array()
        .map(|entries| entries.iter().map(|e| &e["resource"]).filter(|r| r["resourceType"] == resource_type).collect())
        .unwrap_or_default()
}

/// The hypocalcemia DetectedIssues of a result Bundle (safety issues are DetectedIssues too).
pub fn hypocalcemia_issues(bundle: &Value) -> Vec<&Value> {
    resources(bundle, "DetectedIssue").into_iter().filter(|d| d["code"]["text"] == "Hypocalcemia").collect()
}

/// The one hypocalcemia DetectedIssue.
pub fn hypocalcemia_issue(bundle: &Value) -> &Value {
    let found = hypocalcemia_issues(bundle);
    assert_eq!(found.len(), 1, "expected exactly one hypocalcemia DetectedIssue in {bundle}");
    found[0]
}

/// The one resource of a type in a result Bundle.
pub fn only<'a>(bundle: &'a Value, resource_type: &str) -> &'a Value {
    let found = resources(bundle, resource_type);
    assert_eq!(found.len(), 1, "expected exactly one {resource_type} in {bundle}");
    found[0]
}

/// The GuidanceResponse's status.
pub fn guidance_status(bundle: &Value) -> String {
    only(bundle, "GuidanceResponse")["status"].as_str().unwrap_or("").to_owned()
}

/// The GuidanceResponse's note texts.
pub fn guidance_notes(bundle: &Value) -> Vec<String> {
    only(bundle, "GuidanceResponse")["note"]
        .as_array()
        .map(|n| n.iter().filter_map(|n| n["text"].as_str().map(str::to_owned)).collect())
        .unwrap_or_default()
}

/// The issues of the result Bundle's OperationOutcome.
pub fn outcome_issues(bundle: &Value) -> Vec<Value> {
    only(bundle, "OperationOutcome")["issue"].as_array().cloned().unwrap_or_default()
}

/// The expressions of a list of issues.
pub fn issue_expressions(issues: &[Value]) -> Vec<String> {
    issues
        .iter()
        .flat_map(|i| i["expression"].as_array().cloned().unwrap_or_default())
        .filter_map(|e| e.as_str().map(str::to_owned))
        .collect()
}

/// The issue whose expression list contains `expression` exactly.
pub fn issue_at<'a>(issues: &'a [Value], expression: &str) -> Option<&'a Value> {
    issues.iter().find(|i| i["expression"].as_array().is_some_and(|e| e.iter().any(|x| x == expression)))
}

/// Every `reference` string anywhere inside a value.
pub fn references_in(value: &Value) -> Vec<String> {
    let mut out = Vec::new();
    fn walk(v: &Value, out: &mut Vec<String>) {
        match v {
            Value::Object(map) => {
                for (k, x) in map {
                    match (k.as_str(), x) {
                        ("reference", Value::String(s)) => out.push(s.clone()),
                        _ => walk(x, out),
                    }
                }
            }
            Value::Array(items) => items.iter().for_each(|x| walk(x, out)),
            _ => {}
        }
    }
    walk(value, &mut out);
    out
}

/// The inputs a value cites: every literal `reference`, and the request
/// `fullUrl` named in the display of a reference to an input without an id
/// (`... (fullUrl urn:uuid:...; no id)`), which has no literal reference
/// because a `urn:uuid` would point nowhere once the result is stored.
pub fn cited_inputs(value: &Value) -> Vec<String> {
    let mut out = references_in(value);
    fn walk(v: &Value, out: &mut Vec<String>) {
        match v {
            Value::Object(map) => {
                if let Some((url, _)) = map
                    .get("display")
                    .and_then(Value::as_str)
                    .filter(|_| !map.contains_key("reference"))
                    .and_then(|d| d.split_once("(fullUrl "))
                    .and_then(|(_, rest)| rest.split_once("; no id)"))
                {
                    out.push(url.to_owned());
                }
                map.values().for_each(|x| walk(x, out));
            }
            Value::Array(items) => items.iter().for_each(|x| walk(x, out)),
            _ => {}
        }
    }
    walk(value, &mut out);
    out
}

// ---------------------------------------------------------------------------
// Clock helpers (no date library: civil-from-days, proleptic Gregorian)

/// Now, unix seconds.
pub fn now_unix() -> i64 {
    SystemTime::now().duration_since(UNIX_EPOCH).map(|d| d.as_secs() as i64).unwrap_or(0)
}

fn civil_from_days(days: i64) -> (i64, u32, u32) {
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let m = if mp < 10 { mp + 3 } else { mp - 9 } as u32;
    let y = yoe + era * 400 + i64::from(m <= 2);
    (y, m, d)
}

/// `YYYY-MM-DDThh:mm:ssZ`.
pub fn rfc3339(unix: i64) -> String {
    let (y, m, d) = civil_from_days(unix.div_euclid(86_400));
    let s = unix.rem_euclid(86_400);
    format!("{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z", s / 3600, s % 3600 / 60, s % 60)
}

/// The UTC date `years` whole years before `unix` (29 February becomes 28 February).
pub fn date_years_before(unix: i64, years: i64) -> String {
    let (y, m, d) = civil_from_days(unix.div_euclid(86_400));
    let d = if m == 2 && d == 29 { 28 } else { d };
    format!("{:04}-{m:02}-{d:02}", y - years)
}

#[test]
fn the_clock_helpers_agree_with_known_dates() {
    assert_eq!(rfc3339(0), "1970-01-01T00:00:00Z");
    // 2026-11-30T15:00:00Z
    assert_eq!(rfc3339(1_796_050_800), "2026-11-30T15:00:00Z");
    assert_eq!(rfc3339(951_782_400), "2000-02-29T00:00:00Z");
    assert_eq!(date_years_before(951_782_400, 6), "1994-02-28");
}

// ---------------------------------------------------------------------------
// Request builder

/// The laboratory results the builder can write.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Lab {
    /// LOINC 1994-3, ionized calcium, mmol/L.
    IonizedCa,
    /// LOINC 17861-6, total calcium, mg/dL.
    TotalCa,
    /// LOINC 1751-7, albumin, g/dL.
    Albumin,
}

impl Lab {
    fn coding(self) -> (&'static str, &'static str, &'static str) {
        match self {
            Self::IonizedCa => ("1994-3", "Calcium.ionized [Moles/volume] in Blood", "mmol/L"),
            Self::TotalCa => ("17861-6", "Calcium [Mass/volume] in Serum or Plasma", "mg/dL"),
            Self::Albumin => ("1751-7", "Albumin [Mass/volume] in Serum or Plasma", "g/dL"),
        }
    }
}

/// fullUrl of the builder's Patient.
pub const PATIENT_URL: &str = "urn:uuid:3f6c1d2a-9b8e-4d71-a5c0-7e2b4f9d1a60";
/// A patient who is not in the Bundle.
pub const OTHER_PATIENT_URL: &str = "urn:uuid:8a1e5c3b-2d4f-4b6a-9c7e-0f1d2e3a4b5c";
/// The invented patient's names and record number (they must never be echoed in errors).
pub const PATIENT_FAMILY: &str = "Brackenridge";
/// Given name.
pub const PATIENT_GIVEN: &str = "Juniper";

/// A request Bundle under construction: one Patient (a child of about six
/// years) and laboratory Observations timed relative to `now`.
#[derive(Debug, Clone)]
pub struct Scenario {
    /// The evaluation time the times are relative to, unix seconds.
    pub now: i64,
    /// Patient.birthDate.
    pub birth_date: String,
    entries: Vec<Value>,
}

impl Default for Scenario {
    fn default() -> Self {
        Self::at(now_unix())
    }
}

impl Scenario {
    /// Relative to the real clock (what the service uses over HTTP).
    pub fn new() -> Self {
        Self::default()
    }

    /// Relative to a fixed time.
    pub fn at(now: i64) -> Self {
        Self { now, birth_date: date_years_before(now, 6), entries: Vec::new() }
    }

    /// The time `hours` before now (negative: after now).
    pub fn time(&self, hours_ago: f64) -> String {
        rfc3339(self.now - (hours_ago * 3600.0).round() as i64)
    }

    /// The Patient resource.
    pub fn patient(&self) -> Value {
        json!({
            "resourceType": "Patient",
            "id": "pt-larkspur-1",
            "identifier": [{ "system": "https://larkspur-childrens.example.org/fhir/sid/mrn", "value": "LCH-81726354" }],
            "name": [{ "family": PATIENT_FAMILY, "given": [PATIENT_GIVEN] }],
            "gender": "female",
            "birthDate": self.birth_date,
            "managingOrganization": { "display": "Larkspur Children's Hospital" },
        })
    }

    /// A final laboratory Observation for the patient.
    pub fn lab(&self, lab: Lab, id: &str, value: f64, hours_ago: f64) -> Value {
        let (code, display, unit) = lab.coding();
        json!({
            "resourceType": "Observation",
            "id": id,
            "status": "final",
            "category": [{ "coding": [{ "system": "http://terminology.hl7.org/CodeSystem/observation-category", "code": "laboratory" }] }],
            "code": { "coding": [{ "system": LOINC, "code": code, "display": display }] },
            "subject": { "reference": PATIENT_URL },
            "effectiveDateTime": self.time(hours_ago),
            "valueQuantity": { "value": value, "unit": unit, "system": UCUM, "code": unit },
        })
    }

    /// Add a resource (entry order is the order of calls; the Patient is entry 0).
    pub fn with(mut self, resource: Value) -> Self {
        self.entries.push(resource);
        self
    }

    /// Add a final laboratory result.
    pub fn add(self, lab: Lab, id: &str, value: f64, hours_ago: f64) -> Self {
        let obs = self.lab(lab, id, value, hours_ago);
        self.with(obs)
    }

    /// Add a laboratory result changed by `edit`.
    pub fn add_edited(self, lab: Lab, id: &str, value: f64, hours_ago: f64, edit: impl FnOnce(&mut Value)) -> Self {
        let mut obs = self.lab(lab, id, value, hours_ago);
        edit(&mut obs);
        self.with(obs)
    }

    /// The request Bundle (type collection).
    pub fn bundle(&self) -> Value {
        let mut entries = vec![json!({ "fullUrl": PATIENT_URL, "resource": self.patient() })];
        for (i, r) in self.entries.iter().enumerate() {
            entries
                .push(json!({ "fullUrl": format!("urn:uuid:0c4a7e2f-5d1b-4e8a-9f3c-{:012x}", i + 1), "resource": r }));
        }
        json!({ "resourceType": "Bundle", "type": "collection", "timestamp": rfc3339(self.now), "entry": entries })
    }
}
