//! `POST /fhir/Patient/{id}/$assess` against a wiremock `MockServer` playing
//! the EHR's FHIR server at the invented "Larkspur Children's Hospital".
//!
//! Each test asserts what the service sent (path, search parameters, Accept,
//! Authorization) through request matchers and `expect(n)`, which wiremock
//! verifies when the mock server is dropped, and what the service answered.
//! Slow-answer tests use timeouts of a few hundred milliseconds and assert
//! the status and the failure text, never the elapsed time.

use std::sync::LazyLock;
use std::time::Duration;

use calcium_cds::config::{Secret, UpstreamArgs, load_rules};
use calcium_cds::engine::Engine;
use serde_json::{Value, json};
use wiremock::matchers::{any, bearer_token, header, method, path, query_param};
use wiremock::{Mock, MockServer, Request, ResponseTemplate};

use crate::helpers::{
    FHIR_JSON, LOINC, TestApp, UCUM, assert_r4_valid, date_years_before, guidance_status, hypocalcemia_issue,
    hypocalcemia_issues, issue_expressions, now_unix, only, outcome_issues, references_in, rfc3339, spawn_app,
    spawn_app_with_upstream, spawn_app_with_upstream_args,
};

/// The invented patient's id on the EHR.
pub(crate) const PATIENT_ID: &str = "lch-juniper-5";
/// The invented static bearer token.
const TOKEN: &str = "larkspur-ehr-7f3a9c21";
/// Mocks that stand in for "anything else" rank below a test's own mocks.
pub(crate) const FALLBACK: u8 = 10;

// ---------------------------------------------------------------------------
// EHR data

pub(crate) fn patient() -> Value {
    json!({
        "resourceType": "Patient",
        "id": PATIENT_ID,
        "identifier": [{ "system": "https://larkspur-childrens.example.org/fhir/sid/mrn", "value": "LCH-55120987" }],
        "name": [{ "family": "Thistlewood", "given": ["Marigold"] }],
        "gender": "female",
        "birthDate": date_years_before(now_unix(), 6),
        "managingOrganization": { "display": "Larkspur Children's Hospital" },
    })
}

fn observation(id: &str, loinc: &str, display: &str, value: f64, unit: &str, subject: &str) -> Value {
    json!({
        "resourceType": "Observation",
        "id": id,
        "status": "final",
        "category": [{ "coding": [{ "system": "http://terminology.hl7.org/CodeSystem/observation-category", "code": "laboratory" }] }],
        "code": { "coding": [{ "system": LOINC, "code": loinc, "display": display }] },
        "subject": { "reference": subject },
        "effectiveDateTime": rfc3339(now_unix() - 3600),
        "valueQuantity": { "value": value, "unit": unit, "system": UCUM, "code": unit },
    })
}

/// Ionized calcium (LOINC 1994-3) in mmol/L for the patient.
pub(crate) fn ionized_calcium(id: &str, mmol_l: f64) -> Value {
    observation(
        id,
        "1994-3",
        "Calcium.ionized [Moles/volume] in Blood",
        mmol_l,
        "mmol/L",
        &format!("Patient/{PATIENT_ID}"),
    )
}

/// Body weight (LOINC 29463-7) for the patient.
pub(crate) fn weight(id: &str, kg: f64) -> Value {
    let mut w = observation(id, "29463-7", "Body weight", kg, "kg", &format!("Patient/{PATIENT_ID}"));
    w["category"] = json!([{ "coding": [{ "system": "http://terminology.hl7.org/CodeSystem/observation-category", "code": "vital-signs" }] }]);
    w
}

/// A searchset page as a FHIR server sends it: absolute fullUrls, search.mode match, optional next link.
pub(crate) fn searchset(base: &str, resources: &[Value], next: Option<String>) -> Value {
    let entries: Vec<Value> = resources
        .iter()
        .map(|r| {
            json!({
                "fullUrl": format!("{base}/{}/{}", r["resourceType"].as_str().unwrap(), r["id"].as_str().unwrap()),
                "resource": r,
                "search": { "mode": "match" },
            })
        })
        .collect();
    let mut links = vec![json!({ "relation": "self", "url": format!("{base}/search") })];
    if let Some(url) = next {
        links.push(json!({ "relation": "next", "url": url }));
    }
    json!({ "resourceType": "Bundle", "type": "searchset", "link": links, "entry": entries })
}

/// A FHIR JSON answer.
pub(crate) fn fhir(status: u16, body: &Value) -> ResponseTemplate {
    ResponseTemplate::new(status).set_body_raw(body.to_string(), FHIR_JSON)
}

/// An OperationOutcome as an EHR would send with an error.
fn ehr_error(text: &str) -> Value {
    json!({ "resourceType": "OperationOutcome", "issue": [{ "severity": "error", "code": "exception", "diagnostics": text }] })
}

// ---------------------------------------------------------------------------
// What the service must send

/// The searches besides the Observation search, with the parameters each must carry.
const OTHER_SEARCHES: [(&str, Option<(&str, &str)>); 5] = [
    ("MedicationRequest", Some(("status", "active"))),
    ("MedicationStatement", Some(("status", "active"))),
    ("MedicationAdministration", None),
    ("Condition", Some(("clinical-status", "active"))),
    ("Procedure", None),
];

/// What the rules make the service ask for: the `system|code` tokens and the lookback in days.
/// Built once: matchers run inside the mock server's lock, so they must be cheap.
fn rules_view() -> &'static (String, i64) {
    static VIEW: LazyLock<(String, i64)> = LazyLock::new(|| {
        let engine = Engine::new(load_rules(None).expect("the embedded rules load")).expect("the engine builds");
        (engine.observation_code_tokens().join(","), i64::from(engine.lookback_days()))
    });
    &VIEW
}

/// The `code` parameter the Observation search must carry (decoded).
fn expected_codes() -> String {
    rules_view().0.clone()
}

/// `date=ge<YYYY-MM-DD>` reaching back the rules' lookback (a minute's slack for midnight).
fn date_is_lookback(request: &Request) -> bool {
    let days = rules_view().1;
    let value = request.url.query_pairs().find(|(k, _)| k == "date").map(|(_, v)| v.into_owned());
    let accepted = [now_unix(), now_unix() - 60].map(|t| format!("ge{}", &rfc3339(t - days * 86_400)[..10]));
    value.is_some_and(|v| accepted.contains(&v))
}

fn no_authorization(request: &Request) -> bool {
    !request.headers.contains_key("authorization")
}

/// Matches the first page of the Observation search with every parameter it must carry.
pub(crate) fn observation_search() -> wiremock::MockBuilder {
    Mock::given(method("GET"))
        .and(path("/Observation"))
        .and(query_param("patient", PATIENT_ID))
        .and(query_param("code", expected_codes()))
        .and(query_param("_sort", "-date"))
        .and(query_param("_count", "100"))
        .and(date_is_lookback)
        .and(header("accept", FHIR_JSON))
}

pub(crate) async fn mount_patient(server: &MockServer) {
    Mock::given(method("GET"))
        .and(path(format!("/Patient/{PATIENT_ID}")))
        .and(header("accept", FHIR_JSON))
        .respond_with(fhir(200, &patient()))
        .named("Patient read")
        .expect(1)
        .mount(server)
        .await;
}

/// Each other search answers an empty searchset (below the test's own mocks).
pub(crate) async fn mount_empty_other_searches(server: &MockServer) {
    for (resource, extra) in OTHER_SEARCHES {
        let mut mock = Mock::given(method("GET"))
            .and(path(format!("/{resource}")))
            .and(query_param("patient", PATIENT_ID))
            .and(query_param("_count", "100"))
            .and(header("accept", FHIR_JSON));
        if let Some((k, v)) = extra {
            mock = mock.and(query_param(k, v));
        }
        mock.respond_with(fhir(200, &searchset(&server.uri(), &[], None)))
            .with_priority(FALLBACK)
            .named(format!("{resource} search (empty)"))
            .mount(server)
            .await;
    }
}

/// The Patient read and empty other searches; the test mounts the Observation search.
pub(crate) async fn mock_ehr() -> MockServer {
    let server = MockServer::start().await;
    mount_patient(&server).await;
    mount_empty_other_searches(&server).await;
    server
}

/// An EHR that answers any number of assessments of the patient: the Patient read, an
/// Observation search with a low ionized calcium (0.95 mmol/L) and a weight (21 kg),
/// answered after `delay`, and empty other searches.
pub(crate) async fn ehr_with_labs(delay: Duration) -> MockServer {
    let server = MockServer::start().await;
    Mock::given(method("GET"))
        .and(path(format!("/Patient/{PATIENT_ID}")))
        .respond_with(fhir(200, &patient()))
        .mount(&server)
        .await;
    let labs = [ionized_calcium("ica-any-1", 0.95), weight("wt-any-1", 21.0)];
    Mock::given(method("GET"))
        .and(path("/Observation"))
        .respond_with(fhir(200, &searchset(&server.uri(), &labs, None)).set_delay(delay))
        .mount(&server)
        .await;
    mount_empty_other_searches(&server).await;
    server
}

pub(crate) fn args(server: &MockServer) -> UpstreamArgs {
    UpstreamArgs { fhir_base_url: Some(server.uri()), ..UpstreamArgs::default() }
}

pub(crate) async fn post_patient(app: &TestApp, id: &str) -> (u16, Value) {
    let response = app
        .client
        .post(format!("{}/fhir/Patient/{id}/$assess", app.address))
        .send()
        .await
        .expect("the request is sent");
    let status = response.status().as_u16();
    let text = response.text().await.expect("a body");
    let body = serde_json::from_str(&text).unwrap_or_else(|e| panic!("the body is not JSON ({e}): {text}"));
    (status, body)
}

/// Every diagnostics text of an OperationOutcome, joined.
pub(crate) fn diagnostics(oo: &Value) -> String {
    assert_eq!(oo["resourceType"], "OperationOutcome", "{oo}");
    oo["issue"]
        .as_array()
        .into_iter()
        .flatten()
        .filter_map(|i| i["diagnostics"].as_str())
        .collect::<Vec<_>>()
        .join(" | ")
}

/// The status and OperationOutcome of a refused request; checks R4 validity.
async fn refused(app: &TestApp) -> (u16, String) {
    let (status, body) = post_patient(app, PATIENT_ID).await;
    assert_r4_valid(&body);
    (status, diagnostics(&body))
}

// ---------------------------------------------------------------------------
// 1. Happy path

#[tokio::test]
async fn a_low_ionized_calcium_on_the_ehr_gives_hypocalcemia_guidance_and_sends_the_token() {
    // Arrange
    let server = MockServer::start().await;
    let uri = server.uri();
    Mock::given(method("GET"))
        .and(path(format!("/Patient/{PATIENT_ID}")))
        .and(header("accept", FHIR_JSON))
        .and(bearer_token(TOKEN))
        .respond_with(fhir(200, &patient()))
        .named("Patient read with the token")
        .expect(1)
        .mount(&server)
        .await;
    observation_search()
        .and(bearer_token(TOKEN))
        .respond_with(fhir(200, &searchset(&uri, &[ionized_calcium("ica-1", 0.85), weight("wt-1", 20.0)], None)))
        .named("Observation search with the token")
        .expect(1)
        .mount(&server)
        .await;
    for (resource, extra) in OTHER_SEARCHES {
        let mut mock = Mock::given(method("GET"))
            .and(path(format!("/{resource}")))
            .and(query_param("patient", PATIENT_ID))
            .and(query_param("_count", "100"))
            .and(header("accept", FHIR_JSON))
            .and(bearer_token(TOKEN));
        if let Some((k, v)) = extra {
            mock = mock.and(query_param(k, v));
        }
        if matches!(resource, "MedicationAdministration" | "Procedure") {
            mock = mock.and(|r: &Request| {
                let key = if r.url.path() == "/Procedure" { "date" } else { "effective-time" };
                r.url.query_pairs().any(|(k, v)| k == key && v.starts_with("ge"))
            });
        }
        mock.respond_with(fhir(200, &searchset(&uri, &[], None)))
            .named(format!("{resource} search with the token"))
            .expect(1)
            .mount(&server)
            .await;
    }
    let app = spawn_app_with_upstream(&uri, Some(TOKEN)).await;

    // Act
    let (status, bundle) = post_patient(&app, PATIENT_ID).await;

    // Assert
    assert_eq!(status, 200, "{bundle}");
    assert_eq!(bundle["resourceType"], "Bundle", "{bundle}");
    assert_r4_valid(&bundle);
    only(&bundle, "GuidanceResponse");
    let issue = hypocalcemia_issue(&bundle);
    assert!(references_in(issue).iter().any(|r| r.ends_with("Observation/ica-1")), "{issue}");
    let issues = outcome_issues(&bundle);
    assert!(
        !issues.iter().any(|i| i["diagnostics"].as_str().unwrap_or("").contains("upstream")),
        "no search failed: {issues:?}"
    );
    assert_ne!(guidance_status(&bundle), "failure", "{bundle}");
}

#[tokio::test]
async fn without_a_configured_token_no_authorization_header_is_sent() {
    // Arrange
    let server = mock_ehr().await;
    Mock::given(|r: &Request| r.headers.contains_key("authorization"))
        .respond_with(fhir(401, &ehr_error("unexpected credentials")))
        .with_priority(1)
        .named("any request with an Authorization header")
        .expect(0)
        .mount(&server)
        .await;
    observation_search()
        .and(no_authorization)
        .respond_with(fhir(200, &searchset(&server.uri(), &[ionized_calcium("ica-1", 0.85)], None)))
        .expect(1)
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream(&server.uri(), None).await;

    // Act
    let (status, bundle) = post_patient(&app, PATIENT_ID).await;

    // Assert
    assert_eq!(status, 200, "{bundle}");
    assert_eq!(hypocalcemia_issues(&bundle).len(), 1, "{bundle}");
}

// ---------------------------------------------------------------------------
// 2. Paging

#[tokio::test]
async fn every_page_linked_by_next_is_read() {
    // Arrange
    let server = mock_ehr().await;
    let uri = server.uri();
    let page_url = |n: u32| format!("{uri}/Observation?_getpages=lch-page-token&_page={n}");
    observation_search()
        .and(bearer_token(TOKEN))
        .respond_with(fhir(200, &searchset(&uri, &[weight("wt-1", 20.0)], Some(page_url(2)))))
        .named("Observation page 1")
        .expect(1)
        .mount(&server)
        .await;
    let albumin = observation(
        "alb-2",
        "1751-7",
        "Albumin [Mass/volume] in Serum or Plasma",
        4.1,
        "g/dL",
        &format!("Patient/{PATIENT_ID}"),
    );
    Mock::given(method("GET"))
        .and(path("/Observation"))
        .and(query_param("_getpages", "lch-page-token"))
        .and(query_param("_page", "2"))
        .and(bearer_token(TOKEN))
        .respond_with(fhir(200, &searchset(&uri, &[albumin], Some(page_url(3)))))
        .named("Observation page 2")
        .expect(1)
        .mount(&server)
        .await;
    Mock::given(method("GET"))
        .and(path("/Observation"))
        .and(query_param("_getpages", "lch-page-token"))
        .and(query_param("_page", "3"))
        .and(bearer_token(TOKEN))
        .respond_with(fhir(200, &searchset(&uri, &[ionized_calcium("ica-3", 0.85)], None)))
        .named("Observation page 3")
        .expect(1)
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream(&uri, Some(TOKEN)).await;

    // Act
    let (status, bundle) = post_patient(&app, PATIENT_ID).await;

    // Assert
    assert_eq!(status, 200, "{bundle}");
    assert_r4_valid(&bundle);
    let issue = hypocalcemia_issue(&bundle);
    assert!(references_in(issue).iter().any(|r| r.ends_with("Observation/ica-3")), "the calcium of page 3: {issue}");
    let text = bundle.to_string();
    assert!(text.contains("Observation/wt-1"), "the weight of page 1 is used or listed: {bundle}");
    assert!(text.contains("Observation/alb-2"), "the albumin of page 2 is used or listed: {bundle}");
}

#[tokio::test]
async fn paging_stops_at_the_page_limit() {
    // Arrange
    let server = mock_ehr().await;
    let uri = server.uri();
    let page_url = |n: u32| format!("{uri}/Observation?_getpages=lch-page-token&_page={n}");
    observation_search()
        .respond_with(fhir(200, &searchset(&uri, &[ionized_calcium("ica-1", 0.85)], Some(page_url(2)))))
        .expect(1)
        .mount(&server)
        .await;
    Mock::given(method("GET"))
        .and(path("/Observation"))
        .and(query_param("_page", "2"))
        .respond_with(fhir(200, &searchset(&uri, &[], Some(page_url(3)))))
        .expect(1)
        .mount(&server)
        .await;
    Mock::given(method("GET"))
        .and(path("/Observation"))
        .and(query_param("_page", "3"))
        .respond_with(fhir(200, &searchset(&uri, &[], None)))
        .named("a page past the limit")
        .expect(0)
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream_args(UpstreamArgs { upstream_page_limit: 2, ..args(&server) }).await;

    // Act
    let (status, bundle) = post_patient(&app, PATIENT_ID).await;

    // Assert
    assert_eq!(status, 200, "{bundle}");
    assert_eq!(hypocalcemia_issues(&bundle).len(), 1, "{bundle}");
}

#[tokio::test]
async fn a_next_link_to_another_origin_never_receives_the_token() {
    // Arrange: page 1 links to a different server (another port is another origin).
    let server = mock_ehr().await;
    let elsewhere = MockServer::start().await;
    Mock::given(|r: &Request| r.headers.contains_key("authorization"))
        .respond_with(fhir(200, &searchset(&elsewhere.uri(), &[], None)))
        .named("a request to another origin carrying our token")
        .expect(0)
        .mount(&elsewhere)
        .await;
    Mock::given(any()).respond_with(fhir(200, &searchset(&elsewhere.uri(), &[], None))).mount(&elsewhere).await;
    observation_search()
        .respond_with(fhir(
            200,
            &searchset(
                &server.uri(),
                &[ionized_calcium("ica-1", 0.85)],
                Some(format!("{}/Observation?_page=2", elsewhere.uri())),
            ),
        ))
        .expect(1)
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream(&server.uri(), Some(TOKEN)).await;

    // Act
    let (status, _) = post_patient(&app, PATIENT_ID).await;

    // Assert: whatever the service makes of the link, the token stays with the EHR.
    let leaked = elsewhere
        .received_requests()
        .await
        .unwrap_or_default()
        .iter()
        .filter(|r| r.headers.contains_key("authorization"))
        .count();
    assert_eq!(leaked, 0, "the token was sent to {} (status {status})", elsewhere.uri());
}

// ---------------------------------------------------------------------------
// 3. A non-essential search fails

#[tokio::test]
async fn a_failed_medication_request_search_gives_data_required_and_names_the_search() {
    // Arrange
    let server = mock_ehr().await;
    observation_search()
        .respond_with(fhir(
            200,
            &searchset(&server.uri(), &[ionized_calcium("ica-1", 0.85), weight("wt-1", 20.0)], None),
        ))
        .expect(1)
        .mount(&server)
        .await;
    Mock::given(method("GET"))
        .and(path("/MedicationRequest"))
        .and(query_param("patient", PATIENT_ID))
        .and(query_param("status", "active"))
        .respond_with(fhir(500, &ehr_error("database unavailable")))
        .named("MedicationRequest search failing with 500 (not retried)")
        .expect(1)
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream(&server.uri(), None).await;

    // Act
    let (status, bundle) = post_patient(&app, PATIENT_ID).await;

    // Assert
    assert_eq!(status, 200, "{bundle}");
    assert_r4_valid(&bundle);
    assert_eq!(guidance_status(&bundle), "data-required", "{bundle}");
    assert_eq!(hypocalcemia_issues(&bundle).len(), 1, "the assessment goes on without the search: {bundle}");
    let issues = outcome_issues(&bundle);
    let named: Vec<&Value> = issues
        .iter()
        .filter(|i| {
            i["diagnostics"].as_str().is_some_and(|d| d.contains("MedicationRequest search") && d.contains("HTTP 500"))
        })
        .collect();
    assert_eq!(named.len(), 1, "one issue names the failed search: {issues:?}");
    assert_eq!(named[0]["severity"], "warning", "{issues:?}");
    assert_eq!(named[0]["code"], "incomplete", "{issues:?}");
    assert!(
        !issues.iter().any(|i| i["diagnostics"].as_str().is_some_and(|d| d.contains("MedicationStatement search"))),
        "only the failed search is named: {issues:?}"
    );
}

// ---------------------------------------------------------------------------
// 4. The Patient read fails

#[tokio::test]
async fn a_failed_patient_read_is_a_502_naming_the_patient_read() {
    // Arrange
    let server = MockServer::start().await;
    mount_empty_other_searches(&server).await;
    observation_search()
        .respond_with(fhir(200, &searchset(&server.uri(), &[ionized_calcium("ica-1", 0.85)], None)))
        .mount(&server)
        .await;
    Mock::given(method("GET"))
        .and(path(format!("/Patient/{PATIENT_ID}")))
        .respond_with(fhir(500, &ehr_error("internal error")))
        .named("Patient read failing with 500 (not retried)")
        .expect(1)
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream(&server.uri(), None).await;

    // Act
    let (status, text) = refused(&app).await;

    // Assert
    assert_eq!(status, 502, "{text}");
    assert!(text.contains("Patient read") && text.contains("HTTP 500"), "{text}");
}

#[tokio::test]
async fn a_patient_read_that_is_not_a_patient_is_a_502() {
    // Arrange
    let server = MockServer::start().await;
    mount_empty_other_searches(&server).await;
    observation_search().respond_with(fhir(200, &searchset(&server.uri(), &[], None))).mount(&server).await;
    Mock::given(method("GET"))
        .and(path(format!("/Patient/{PATIENT_ID}")))
        .respond_with(fhir(200, &searchset(&server.uri(), &[patient()], None)))
        .expect(1)
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream(&server.uri(), None).await;

    // Act
    let (status, text) = refused(&app).await;

    // Assert
    assert_eq!(status, 502, "{text}");
    assert!(text.contains("Patient read") && text.contains("not a Patient"), "{text}");
}

// ---------------------------------------------------------------------------
// 5. 429 with Retry-After

#[tokio::test]
async fn a_429_with_retry_after_is_retried_and_then_succeeds() {
    // Arrange
    let server = mock_ehr().await;
    observation_search()
        .respond_with(fhir(429, &ehr_error("slow down")).insert_header("Retry-After", "1"))
        .up_to_n_times(1)
        .with_priority(1)
        .named("Observation search: 429 once")
        .expect(1)
        .mount(&server)
        .await;
    observation_search()
        .respond_with(fhir(200, &searchset(&server.uri(), &[ionized_calcium("ica-1", 0.85)], None)))
        .named("Observation search: then success")
        .expect(1)
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream_args(UpstreamArgs { upstream_retries: 1, ..args(&server) }).await;

    // Act
    let (status, bundle) = post_patient(&app, PATIENT_ID).await;

    // Assert
    assert_eq!(status, 200, "{bundle}");
    assert_r4_valid(&bundle);
    assert_eq!(hypocalcemia_issues(&bundle).len(), 1, "{bundle}");
}

#[tokio::test]
async fn a_retry_after_beyond_the_deadline_is_not_waited_for() {
    // Arrange: the server asks for an hour; the deadline is 2 s.
    let server = mock_ehr().await;
    observation_search()
        .respond_with(fhir(503, &ehr_error("maintenance")).insert_header("Retry-After", "3600"))
        .named("Observation search: 503, come back in an hour")
        .expect(1)
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream_args(UpstreamArgs { upstream_deadline_ms: 2000, ..args(&server) }).await;

    // Act
    let (status, text) = refused(&app).await;

    // Assert
    assert!(status == 504 || status == 502, "{status}: {text}");
    assert!(text.contains("Observation search") && text.contains("HTTP 503") && text.contains("deadline"), "{text}");
}

// ---------------------------------------------------------------------------
// 6. A slow answer

#[tokio::test]
async fn an_observation_search_slower_than_the_call_timeout_is_a_504() {
    // Arrange
    let server = mock_ehr().await;
    observation_search()
        .respond_with(fhir(200, &searchset(&server.uri(), &[], None)).set_delay(Duration::from_millis(1500)))
        .named("slow Observation search")
        .expect(1)
        .mount(&server)
        .await;
    let app =
        spawn_app_with_upstream_args(UpstreamArgs { upstream_timeout_ms: 300, upstream_retries: 0, ..args(&server) })
            .await;

    // Act
    let (status, text) = refused(&app).await;

    // Assert
    assert_eq!(status, 504, "{text}");
    assert!(text.contains("Observation search") && text.contains("300 ms"), "{text}");
}

// ---------------------------------------------------------------------------
// 7. The deadline across retries

#[tokio::test]
async fn retries_stop_at_the_overall_deadline() {
    // Arrange
    let server = mock_ehr().await;
    observation_search()
        .respond_with(fhir(503, &ehr_error("overloaded")))
        .named("Observation search: always 503")
        // At least one retry, never all six tries within the deadline.
        .expect(2..=5)
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream_args(UpstreamArgs {
        upstream_timeout_ms: 300,
        upstream_deadline_ms: 600,
        upstream_retries: 5,
        ..args(&server)
    })
    .await;

    // Act
    let (status, text) = refused(&app).await;

    // Assert
    assert!(status == 504 || status == 502, "{status}: {text}");
    assert!(text.contains("Observation search") && text.contains("deadline"), "{text}");
}

// ---------------------------------------------------------------------------
// 8. Unusable answers

#[tokio::test]
async fn malformed_json_from_the_observation_search_is_a_502() {
    // Arrange
    let server = mock_ehr().await;
    observation_search()
        .respond_with(ResponseTemplate::new(200).set_body_raw(r#"{"resourceType": "Bundle", "entry": [ "#, FHIR_JSON))
        .expect(1)
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream(&server.uri(), None).await;

    // Act
    let (status, text) = refused(&app).await;

    // Assert
    assert_eq!(status, 502, "{text}");
    assert!(text.contains("Observation search") && text.contains("not JSON"), "{text}");
}

#[tokio::test]
async fn an_operation_outcome_where_a_bundle_belongs_is_a_502() {
    // Arrange
    let server = mock_ehr().await;
    observation_search().respond_with(fhir(200, &ehr_error("partial results"))).expect(1).mount(&server).await;
    let app = spawn_app_with_upstream(&server.uri(), None).await;

    // Act
    let (status, text) = refused(&app).await;

    // Assert
    assert_eq!(status, 502, "{text}");
    assert!(text.contains("Observation search") && text.contains("not a Bundle"), "{text}");
}

// ---------------------------------------------------------------------------
// 9. Another patient's data

#[tokio::test]
async fn a_calcium_of_another_patient_is_set_aside() {
    // Arrange
    let server = mock_ehr().await;
    let foreign =
        observation("ica-other", "1994-3", "Calcium.ionized [Moles/volume] in Blood", 0.85, "mmol/L", "Patient/other");
    observation_search()
        .respond_with(fhir(200, &searchset(&server.uri(), &[foreign, weight("wt-1", 20.0)], None)))
        .expect(1)
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream(&server.uri(), None).await;

    // Act
    let (status, bundle) = post_patient(&app, PATIENT_ID).await;

    // Assert
    assert_eq!(status, 200, "{bundle}");
    assert_r4_valid(&bundle);
    assert_eq!(guidance_status(&bundle), "data-required", "no usable calcium: {bundle}");
    assert!(hypocalcemia_issues(&bundle).is_empty(), "{bundle}");
    let issues = outcome_issues(&bundle);
    let expressions = issue_expressions(&issues);
    let aside = issues
        .iter()
        .find(|i| i["diagnostics"].as_str().is_some_and(|d| d.contains("Observation/ica-other")))
        .unwrap_or_else(|| panic!("the foreign calcium is named: {issues:?}"));
    assert!(
        aside["expression"]
            .as_array()
            .into_iter()
            .flatten()
            .any(|e| e.as_str().is_some_and(|e| e.ends_with(".subject.reference"))),
        "{aside} (all expressions: {expressions:?})"
    );
}

// ---------------------------------------------------------------------------
// 10. Not configured; a bad id

#[tokio::test]
async fn without_an_upstream_the_endpoint_is_501() {
    // Arrange
    let app = spawn_app().await;

    // Act
    let (status, body) = post_patient(&app, PATIENT_ID).await;

    // Assert
    assert_eq!(status, 501, "{body}");
    assert_r4_valid(&body);
    assert!(diagnostics(&body).contains("CALCIUM_CDS_FHIR_BASE_URL"), "{body}");
}

#[tokio::test]
async fn a_patient_id_that_is_not_a_fhir_id_is_400_and_nothing_is_fetched() {
    // Arrange
    let server = MockServer::start().await;
    Mock::given(any())
        .respond_with(ResponseTemplate::new(500))
        .named("any upstream call")
        .expect(0)
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream(&server.uri(), Some(TOKEN)).await;

    for id in ["bad%20id%21", "a%2Fb", &"x".repeat(65)] {
        // Act
        let (status, body) = post_patient(&app, id).await;

        // Assert
        assert_eq!(status, 400, "{id}: {body}");
        assert_r4_valid(&body);
        assert_eq!(issue_expressions(&outcome_issue_list(&body)), vec!["Patient.id".to_owned()], "{id}: {body}");
    }
}

fn outcome_issue_list(oo: &Value) -> Vec<Value> {
    oo["issue"].as_array().cloned().unwrap_or_default()
}

// ---------------------------------------------------------------------------
// 11. Configuration

#[test]
fn the_client_refuses_a_base_url_that_is_not_http() {
    for (url, expected) in [
        ("ftp://ehr.larkspur-childrens.example.org/fhir", "http or https"),
        ("file:///etc/fhir", "http or https"),
        ("not a url", "is not a URL"),
    ] {
        let err =
            UpstreamArgs { fhir_base_url: Some(url.to_owned()), ..UpstreamArgs::default() }.client().expect_err(url);
        assert!(err.contains(expected), "{url}: {err}");
    }
    let ok = UpstreamArgs {
        fhir_base_url: Some("https://ehr.larkspur-childrens.example.org/fhir/".into()),
        ..UpstreamArgs::default()
    };
    assert!(ok.client().expect("https is accepted").is_some());
    assert!(UpstreamArgs::default().client().expect("no URL is no client").is_none());
}

pub(crate) fn temp_file(name: &str, contents: &str) -> std::path::PathBuf {
    let nanos = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map_or(0, |d| d.as_nanos());
    let path = std::env::temp_dir().join(format!("calcium-cds-{name}-{}-{nanos}", std::process::id()));
    std::fs::write(&path, contents).expect("the temporary file is written");
    path
}

#[test]
fn a_missing_token_file_is_a_configuration_error_naming_the_file() {
    let missing = std::env::temp_dir().join("calcium-cds-no-such-token-file");
    let err = UpstreamArgs {
        fhir_base_url: Some("https://ehr.larkspur-childrens.example.org/fhir".into()),
        fhir_token_file: Some(missing.clone()),
        ..UpstreamArgs::default()
    }
    .client()
    .expect_err("an unreadable token file is refused");
    assert!(err.contains(&missing.display().to_string()), "{err}");
}

#[tokio::test]
async fn the_token_is_read_from_a_file_trimmed_and_sent() {
    // Arrange
    let file = temp_file("token", &format!("  {TOKEN}\n"));
    let server = MockServer::start().await;
    mount_empty_other_searches(&server).await;
    Mock::given(method("GET"))
        .and(path(format!("/Patient/{PATIENT_ID}")))
        .and(header("authorization", format!("Bearer {TOKEN}").as_str()))
        .respond_with(fhir(200, &patient()))
        .expect(1)
        .mount(&server)
        .await;
    observation_search()
        .and(bearer_token(TOKEN))
        .respond_with(fhir(200, &searchset(&server.uri(), &[ionized_calcium("ica-1", 0.85)], None)))
        .expect(1)
        .mount(&server)
        .await;
    let upstream = UpstreamArgs { fhir_token_file: Some(file.clone()), ..args(&server) };
    assert!(upstream.client().expect("the token file is read").is_some());
    let app = spawn_app_with_upstream_args(upstream).await;

    // Act
    let (status, bundle) = post_patient(&app, PATIENT_ID).await;
    let _ = std::fs::remove_file(&file);

    // Assert
    assert_eq!(status, 200, "{bundle}");
}

#[test]
fn debug_of_the_upstream_settings_does_not_show_the_token() {
    let args = UpstreamArgs {
        fhir_base_url: Some("https://ehr.larkspur-childrens.example.org/fhir".into()),
        fhir_token: Some(Secret(TOKEN.to_owned())),
        ..UpstreamArgs::default()
    };
    let shown = format!("{args:?}");
    assert!(!shown.contains(TOKEN), "{shown}");
    assert!(shown.contains("ehr.larkspur-childrens.example.org"), "the rest is shown: {shown}");
}

#[test]
fn debug_of_the_client_does_not_show_the_token() {
    let client = UpstreamArgs {
        fhir_base_url: Some("https://ehr.larkspur-childrens.example.org/fhir".into()),
        fhir_token: Some(Secret(TOKEN.to_owned())),
        ..UpstreamArgs::default()
    }
    .client()
    .expect("a client")
    .expect("configured");
    let shown = format!("{client:?}");
    assert!(!shown.contains(TOKEN), "{shown}");
}

#[tokio::test]
async fn an_incoming_traceparent_is_carried_to_every_upstream_call_with_a_new_parent_id() {
    // Arrange: the W3C Trace Context example header.
    const TRACE_ID: &str = "4bf92f3577b34da6a3ce929d0e0e4736";
    const PARENT: &str = "00f067aa0ba902b7";
    let carries_the_trace = |r: &Request| {
        r.headers.get("traceparent").and_then(|v| v.to_str().ok()).is_some_and(|v| {
            let parts: Vec<&str> = v.split('-').collect();
            parts.len() == 4 && parts[0] == "00" && parts[1] == TRACE_ID && parts[2] != PARENT && parts[3] == "01"
        })
    };
    let server = MockServer::start().await;
    Mock::given(method("GET"))
        .and(path(format!("/Patient/{PATIENT_ID}")))
        .and(carries_the_trace)
        .respond_with(fhir(200, &patient()))
        .expect(1)
        .named("Patient read with the trace")
        .mount(&server)
        .await;
    observation_search()
        .and(carries_the_trace)
        .respond_with(fhir(200, &searchset(&server.uri(), &[ionized_calcium("ica-t1", 0.9)], None)))
        .expect(1)
        .named("Observation search with the trace")
        .mount(&server)
        .await;
    Mock::given(any())
        .and(carries_the_trace)
        .respond_with(fhir(200, &searchset(&server.uri(), &[], None)))
        .with_priority(FALLBACK)
        .expect(5)
        .named("the other five searches with the trace")
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream_args(args(&server)).await;

    // Act
    let response = app
        .client
        .post(format!("{}/fhir/Patient/{PATIENT_ID}/$assess", app.address))
        .header("traceparent", format!("00-{TRACE_ID}-{PARENT}-01"))
        .send()
        .await
        .expect("the request is sent");

    // Assert (the mocks' counts are verified when the server drops)
    assert_eq!(response.status().as_u16(), 200);
}
