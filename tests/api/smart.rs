//! SMART Backend Services authorization against a wiremock token endpoint and
//! FHIR server (the invented "Larkspur Children's Hospital").
//!
//! The client assertion is checked against the SMART App Launch 2.x
//! "Backend Services" rules (iss = sub = client_id, aud = token URL, exp at
//! most five minutes ahead, a jti, header kid and typ JWT) by verifying its
//! signature with the public half of the test key (tests/api/keys).

use std::path::PathBuf;
use std::time::Duration;

use calcium_cds::config::{Secret, UpstreamArgs};
use jsonwebtoken::{Algorithm, DecodingKey, Validation};
use serde_json::{Value, json};
use wiremock::matchers::{bearer_token, header, method, path};
use wiremock::{Mock, MockServer, Request, ResponseTemplate};

use crate::helpers::{assert_r4_valid, hypocalcemia_issue, now_unix, outcome_issues, spawn_app_with_upstream_args};
use crate::upstream::{
    FALLBACK, PATIENT_ID, args, diagnostics, fhir, ionized_calcium, mount_empty_other_searches, mount_patient,
    observation_search, post_patient, searchset, weight,
};

const CLIENT_ID: &str = "larkspur-calcium-cds";
const KEY_ID: &str = "larkspur-cds-test-key-1";
const TOKEN_PATH: &str = "/auth/token";

fn key(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../tests/api/keys").join(name)
}

fn smart_args(server: &MockServer, alg: &str) -> UpstreamArgs {
    let private = if alg == "RS384" { "rs384-private.pem" } else { "es384-private.pem" };
    UpstreamArgs {
        smart_token_url: Some(format!("{}{TOKEN_PATH}", server.uri())),
        smart_client_id: Some(CLIENT_ID.into()),
        smart_key_file: Some(key(private)),
        smart_key_id: Some(KEY_ID.into()),
        smart_alg: alg.into(),
        ..args(server)
    }
}

fn token_response(token: &str, expires_in: u64) -> ResponseTemplate {
    ResponseTemplate::new(200).set_body_json(json!({
        "access_token": token, "token_type": "bearer", "expires_in": expires_in,
        "scope": calcium_cds::config::DEFAULT_SMART_SCOPE
    }))
}

fn token_endpoint() -> wiremock::MockBuilder {
    Mock::given(method("POST")).and(path(TOKEN_PATH)).and(header("content-type", "application/x-www-form-urlencoded"))
}

/// The observation search and the Patient read answer only with `token`.
async fn mount_ehr_accepting(server: &MockServer, token: &str, reads: u64) {
    Mock::given(method("GET"))
        .and(path(format!("/Patient/{PATIENT_ID}")))
        .and(bearer_token(token))
        .respond_with(fhir(200, &crate::upstream::patient()))
        .named("Patient read with the SMART token")
        .expect(reads)
        .mount(server)
        .await;
    observation_search()
        .and(bearer_token(token))
        .respond_with(fhir(
            200,
            &searchset(&server.uri(), &[ionized_calcium("ica-s1", 0.82), weight("wt-s1", 18.0)], None),
        ))
        .named("Observation search with the SMART token")
        .expect(reads)
        .mount(server)
        .await;
    mount_empty_other_searches(server).await;
}

/// The form fields of every token request the server received.
async fn token_requests(server: &MockServer) -> Vec<Vec<(String, String)>> {
    let requests: Vec<Request> = server.received_requests().await.expect("recording is on");
    requests
        .iter()
        .filter(|r| r.url.path() == TOKEN_PATH)
        .map(|r| reqwest::Url::parse(&format!("http://x/?{}", String::from_utf8_lossy(&r.body))).expect("a form"))
        .map(|u| u.query_pairs().map(|(k, v)| (k.into_owned(), v.into_owned())).collect())
        .collect()
}

fn field<'a>(form: &'a [(String, String)], name: &str) -> &'a str {
    form.iter().find(|(k, _)| k == name).map_or_else(|| panic!("no {name} in {form:?}"), |(_, v)| v.as_str())
}

/// Verify the assertion's signature and claims; the decoded claims.
fn verified_assertion(jwt: &str, alg: &str, token_url: &str) -> Value {
    let header = jsonwebtoken::decode_header(jwt).expect("a JWT header");
    assert_eq!(header.kid.as_deref(), Some(KEY_ID));
    assert_eq!(header.typ.as_deref(), Some("JWT"));
    let (algorithm, decoding) = if alg == "RS384" {
        let pem = std::fs::read(key("rs384-public.pem")).expect("the public key");
        (Algorithm::RS384, DecodingKey::from_rsa_pem(&pem).expect("an RSA public key"))
    } else {
        let pem = std::fs::read(key("es384-public.pem")).expect("the public key");
        (Algorithm::ES384, DecodingKey::from_ec_pem(&pem).expect("an EC public key"))
    };
    assert_eq!(header.alg, algorithm);
    let mut validation = Validation::new(algorithm);
    validation.set_audience(&[token_url]);
    validation.set_issuer(&[CLIENT_ID]);
    validation.set_required_spec_claims(&["exp", "aud", "iss", "sub"]);
    let claims = jsonwebtoken::decode::<Value>(jwt, &decoding, &validation).expect("the signature verifies").claims;
    assert_eq!(claims["sub"], CLIENT_ID);
    let exp = claims["exp"].as_i64().expect("exp is a number");
    assert!(exp > now_unix() && exp <= now_unix() + 300, "exp at most five minutes ahead: {claims}");
    assert!(claims["jti"].as_str().is_some_and(|j| !j.is_empty()), "{claims}");
    claims
}

async fn smart_assertion_is_valid_and_the_token_cached(alg: &str) {
    // Arrange
    let server = MockServer::start().await;
    token_endpoint()
        .respond_with(token_response("smart-tok-1", 300))
        .named("token endpoint")
        .expect(1)
        .mount(&server)
        .await;
    mount_ehr_accepting(&server, "smart-tok-1", 2).await;
    let app = spawn_app_with_upstream_args(smart_args(&server, alg)).await;

    // Act: two assessments, one token.
    let (first, bundle) = post_patient(&app, PATIENT_ID).await;
    let (second, _) = post_patient(&app, PATIENT_ID).await;

    // Assert
    assert_eq!((first, second), (200, 200), "{bundle}");
    assert_r4_valid(&bundle);
    hypocalcemia_issue(&bundle);
    let forms = token_requests(&server).await;
    assert_eq!(forms.len(), 1, "{forms:?}");
    let form = &forms[0];
    assert_eq!(field(form, "grant_type"), "client_credentials");
    assert_eq!(field(form, "client_assertion_type"), "urn:ietf:params:oauth:client-assertion-type:jwt-bearer");
    assert!(field(form, "scope").split(' ').any(|s| s == "system/Observation.read"), "{form:?}");
    verified_assertion(field(form, "client_assertion"), alg, &format!("{}{TOKEN_PATH}", server.uri()));
}

#[tokio::test]
async fn an_es384_client_assertion_verifies_and_its_token_is_reused() {
    smart_assertion_is_valid_and_the_token_cached("ES384").await;
}

#[tokio::test]
async fn an_rs384_client_assertion_verifies_and_its_token_is_reused() {
    smart_assertion_is_valid_and_the_token_cached("RS384").await;
}

#[tokio::test]
async fn a_token_refused_mid_flight_is_refreshed_once_and_the_gather_completes() {
    // Arrange: the first token works for the Patient read, then the server
    // refuses it (expired or revoked) on every search.
    let server = MockServer::start().await;
    token_endpoint()
        .respond_with(token_response("smart-tok-old", 300))
        .up_to_n_times(1)
        .with_priority(1)
        .named("first token")
        .expect(1)
        .mount(&server)
        .await;
    token_endpoint()
        .respond_with(token_response("smart-tok-new", 300))
        .with_priority(2)
        .named("renewed token")
        .expect(1)
        .mount(&server)
        .await;
    mount_patient(&server).await;
    Mock::given(method("GET"))
        .and(bearer_token("smart-tok-old"))
        .and(|r: &Request| !r.url.path().starts_with("/Patient/"))
        .respond_with(ResponseTemplate::new(401))
        .with_priority(1)
        .named("searches refuse the old token")
        .mount(&server)
        .await;
    observation_search()
        .and(bearer_token("smart-tok-new"))
        .respond_with(fhir(200, &searchset(&server.uri(), &[ionized_calcium("ica-s2", 0.84)], None)))
        .named("Observation search with the renewed token")
        .expect(1)
        .mount(&server)
        .await;
    mount_empty_other_searches(&server).await;
    let app = spawn_app_with_upstream_args(smart_args(&server, "ES384")).await;

    // Act
    let (status, bundle) = post_patient(&app, PATIENT_ID).await;

    // Assert: one refresh for six refused calls, and nothing reported missing.
    assert_eq!(status, 200, "{bundle}");
    assert_r4_valid(&bundle);
    hypocalcemia_issue(&bundle);
    let incomplete: Vec<Value> = outcome_issues(&bundle).into_iter().filter(|i| i["code"] == "incomplete").collect();
    assert!(incomplete.is_empty(), "every search succeeded after the refresh: {incomplete:?}");
    assert_eq!(token_requests(&server).await.len(), 2);
}

#[tokio::test]
async fn a_token_past_its_lifetime_is_renewed_before_use() {
    // Arrange: a token that lives 2 s is renewed at half its life.
    let server = MockServer::start().await;
    token_endpoint()
        .respond_with(token_response("smart-tok-1", 2))
        .named("token endpoint")
        .expect(2)
        .mount(&server)
        .await;
    mount_ehr_accepting(&server, "smart-tok-1", 2).await;
    let app = spawn_app_with_upstream_args(smart_args(&server, "ES384")).await;

    // Act
    let (first, _) = post_patient(&app, PATIENT_ID).await;
    tokio::time::sleep(Duration::from_millis(1200)).await;
    let (second, _) = post_patient(&app, PATIENT_ID).await;

    // Assert
    assert_eq!((first, second), (200, 200));
    assert_eq!(token_requests(&server).await.len(), 2);
}

#[tokio::test]
async fn a_refused_token_request_is_a_502_naming_the_token_endpoint() {
    // Arrange
    let server = MockServer::start().await;
    token_endpoint()
        .respond_with(ResponseTemplate::new(400).set_body_json(json!({ "error": "invalid_client" })))
        .named("token endpoint refuses")
        .mount(&server)
        .await;
    Mock::given(method("GET"))
        .respond_with(fhir(200, &crate::upstream::patient()))
        .with_priority(FALLBACK)
        .named("nothing reaches the FHIR server")
        .expect(0)
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream_args(smart_args(&server, "ES384")).await;

    // Act
    let (status, body) = post_patient(&app, PATIENT_ID).await;

    // Assert
    assert_eq!(status, 502, "{body}");
    assert_r4_valid(&body);
    let text = diagnostics(&body);
    assert!(text.contains("token endpoint answered HTTP 400"), "{text}");
}

#[tokio::test]
async fn a_401_after_a_refresh_is_not_retried_again() {
    // Arrange: every token is refused.
    let server = MockServer::start().await;
    token_endpoint().respond_with(token_response("smart-tok-1", 300)).named("token endpoint").mount(&server).await;
    Mock::given(method("GET"))
        .respond_with(ResponseTemplate::new(401))
        .named("everything refused")
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream_args(smart_args(&server, "ES384")).await;

    // Act
    let (status, body) = post_patient(&app, PATIENT_ID).await;

    // Assert: each call tried at most twice (7 calls: Patient read and six searches).
    assert_eq!(status, 502, "{body}");
    let text = diagnostics(&body);
    assert!(text.contains("Patient read") && text.contains("HTTP 401 (also after a token refresh)"), "{text}");
    let fhir_calls =
        server.received_requests().await.expect("recording").iter().filter(|r| r.method.as_str() == "GET").count();
    assert!(fhir_calls <= 14, "{fhir_calls} FHIR calls");
}

fn configured(f: impl FnOnce(&mut UpstreamArgs)) -> Result<(), String> {
    let mut a = UpstreamArgs {
        fhir_base_url: Some("https://ehr.larkspur-childrens.example.org/fhir".into()),
        smart_token_url: Some("https://auth.larkspur-childrens.example.org/token".into()),
        smart_client_id: Some(CLIENT_ID.into()),
        smart_key_file: Some(key("es384-private.pem")),
        smart_key_id: Some(KEY_ID.into()),
        ..UpstreamArgs::default()
    };
    f(&mut a);
    a.client().map(|_| ())
}

#[test]
fn smart_configuration_errors_name_what_is_wrong() {
    assert!(configured(|_| {}).is_ok());
    let err = configured(|a| a.smart_key_id = None).expect_err("partial");
    assert!(err.contains("CALCIUM_CDS_SMART_KEY_ID"), "{err}");
    let err = configured(|a| a.fhir_token = Some(Secret("static".into()))).expect_err("both");
    assert!(err.contains("choose one"), "{err}");
    let err = configured(|a| a.smart_alg = "HS256".into()).expect_err("symmetric");
    assert!(err.contains("RS384 or ES384"), "{err}");
    let err = configured(|a| a.smart_key_file = Some(key("es256-private.pem"))).expect_err("P-256 key");
    assert!(err.contains("es256-private.pem"), "{err}");
    let err = configured(|a| a.smart_alg = "RS384".into()).expect_err("an EC key for RS384");
    assert!(err.contains("CALCIUM_CDS_SMART_KEY_FILE"), "{err}");
    let err = configured(|a| a.smart_token_url = Some("ftp://auth.example.org".into())).expect_err("not http");
    assert!(err.contains("CALCIUM_CDS_SMART_TOKEN_URL"), "{err}");
}

#[test]
fn debug_output_never_shows_the_key_or_a_token() {
    let client = UpstreamArgs {
        fhir_base_url: Some("https://ehr.larkspur-childrens.example.org/fhir".into()),
        fhir_token: Some(Secret("larkspur-secret-token".into())),
        ..UpstreamArgs::default()
    }
    .client()
    .expect("configured")
    .expect("a client");
    let shown = format!("{client:?}");
    assert!(!shown.contains("larkspur-secret-token"), "{shown}");
}

#[tokio::test]
async fn a_token_endpoint_slower_than_the_call_timeout_is_a_504_within_the_deadline() {
    // Arrange: the token endpoint answers after 2 s; calls time out at 300 ms, the gather at 1 s.
    let server = MockServer::start().await;
    token_endpoint()
        .respond_with(token_response("smart-tok-1", 300).set_delay(Duration::from_secs(2)))
        .named("slow token endpoint")
        .mount(&server)
        .await;
    let app = spawn_app_with_upstream_args(UpstreamArgs {
        upstream_timeout_ms: 300,
        upstream_deadline_ms: 1000,
        ..smart_args(&server, "ES384")
    })
    .await;

    // Act
    let (status, body) = post_patient(&app, PATIENT_ID).await;

    // Assert: a timeout, named; no FHIR call was made without a token.
    assert_eq!(status, 504, "{body}");
    assert_r4_valid(&body);
    let text = diagnostics(&body);
    assert!(text.contains("Patient read") && text.contains("token"), "{text}");
    let fhir_calls =
        server.received_requests().await.expect("recording").iter().filter(|r| r.method.as_str() == "GET").count();
    assert_eq!(fhir_calls, 0);
}
