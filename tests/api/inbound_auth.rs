//! Inbound authorization: bearer JWTs checked against a JWKS, with keys
//! generated in the test (ECDSA P-256 via aws-lc-rs). Missing or bad tokens
//! are 401 with WWW-Authenticate and an OperationOutcome, a missing scope is
//! 403, and the probes stay open.

use base64::Engine as _;
use calcium_cds::config::{InboundAuthArgs, LimitArgs, UpstreamArgs};
use jsonwebtoken::{Algorithm, EncodingKey, Header};
use serde_json::{Value, json};
use wiremock::matchers::{method, path};
use wiremock::{Mock, MockServer, ResponseTemplate};

use crate::helpers::{FHIR_JSON, TestApp, assert_r4_valid, now_unix, spawn_app_full};

const ISSUER: &str = "https://auth.larkspur-childrens.example.org";
const AUDIENCE: &str = "https://calcium-cds.larkspur-childrens.example.org";
const KID: &str = "larkspur-test-signing-1";

struct TestKey {
    encoding: EncodingKey,
    jwk: Value,
}

fn generate_key(kid: &str) -> TestKey {
    use aws_lc_rs::signature::{ECDSA_P256_SHA256_FIXED_SIGNING, EcdsaKeyPair, KeyPair};
    let rng = aws_lc_rs::rand::SystemRandom::new();
    let pkcs8 = EcdsaKeyPair::generate_pkcs8(&ECDSA_P256_SHA256_FIXED_SIGNING, &rng).expect("a key");
    let pair = EcdsaKeyPair::from_pkcs8(&ECDSA_P256_SHA256_FIXED_SIGNING, pkcs8.as_ref()).expect("a key pair");
    let point = pair.public_key().as_ref();
    assert_eq!(point.len(), 65, "an uncompressed P-256 point");
    let b64 = base64::engine::general_purpose::URL_SAFE_NO_PAD;
    TestKey {
        encoding: EncodingKey::from_ec_der(pkcs8.as_ref()),
        jwk: json!({ "kty": "EC", "crv": "P-256", "use": "sig", "alg": "ES256", "kid": kid,
                     "x": b64.encode(&point[1..33]), "y": b64.encode(&point[33..65]) }),
    }
}

fn token(key: &TestKey, claims: Value) -> String {
    let mut header = Header::new(Algorithm::ES256);
    header.kid = Some(KID.into());
    jsonwebtoken::encode(&header, &claims, &key.encoding).expect("signed")
}

fn claims(scope: &str) -> Value {
    json!({ "iss": ISSUER, "aud": AUDIENCE, "sub": "larkspur-ehr-integration", "exp": now_unix() + 300,
            "nbf": now_unix() - 10, "scope": scope })
}

fn jwks_file(key: &TestKey) -> std::path::PathBuf {
    let path = std::env::temp_dir().join(format!("calcium-cds-jwks-{}-{}.json", std::process::id(), now_unix()));
    let nanos = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map_or(0, |d| d.subsec_nanos());
    let path = path.with_extension(format!("{nanos}.json"));
    std::fs::write(&path, json!({ "keys": [key.jwk] }).to_string()).expect("written");
    path
}

fn auth_on(key: &TestKey, protect_metrics: bool) -> InboundAuthArgs {
    InboundAuthArgs {
        enabled: true,
        jwks_file: Some(jwks_file(key)),
        issuer: Some(ISSUER.into()),
        audience: Some(AUDIENCE.into()),
        protect_metrics,
        ..InboundAuthArgs::default()
    }
}

fn example() -> String {
    crate::helpers::example("total-calcium-si-units")
}

async fn post(app: &TestApp, bearer: Option<&str>) -> (u16, Option<String>, Value) {
    let mut req =
        app.client.post(format!("{}/fhir/$assess", app.address)).header("content-type", FHIR_JSON).body(example());
    if let Some(t) = bearer {
        req = req.bearer_auth(t);
    }
    let resp = req.send().await.expect("an answer");
    let status = resp.status().as_u16();
    let challenge = resp.headers().get("www-authenticate").and_then(|v| v.to_str().ok()).map(str::to_owned);
    let body: Value = resp.json().await.expect("JSON");
    (status, challenge, body)
}

async fn spawn(auth: InboundAuthArgs) -> TestApp {
    spawn_app_full(UpstreamArgs::default(), LimitArgs::default(), auth).await
}

#[tokio::test]
async fn a_valid_token_with_the_scope_is_served() {
    let key = generate_key(KID);
    let app = spawn(auth_on(&key, false)).await;
    let (status, _, body) = post(&app, Some(&token(&key, claims("system/GuidanceResponse.c")))).await;
    assert_eq!(status, 200, "{body}");
    assert_eq!(body["resourceType"], "Bundle");
}

#[tokio::test]
async fn missing_and_bad_tokens_are_401_with_a_challenge_and_an_operation_outcome() {
    // Arrange
    let key = generate_key(KID);
    let other = generate_key(KID);
    let app = spawn(auth_on(&key, false)).await;
    let scope = "system/GuidanceResponse.c";
    let mut expired = claims(scope);
    expired["exp"] = json!(now_unix() - 120);
    let mut early = claims(scope);
    early["nbf"] = json!(now_unix() + 600);
    let mut wrong_iss = claims(scope);
    wrong_iss["iss"] = json!("https://elsewhere.example.org");
    let mut wrong_aud = claims(scope);
    wrong_aud["aud"] = json!("https://another-service.example.org");
    let cases: Vec<(&str, Option<String>, &str)> = vec![
        ("no token", None, "required"),
        ("not a JWT", Some("not-a-jwt".into()), "not a JWT"),
        ("expired", Some(token(&key, expired)), "expired"),
        ("not yet valid", Some(token(&key, early)), "nbf"),
        ("wrong issuer", Some(token(&key, wrong_iss)), "issuer"),
        ("wrong audience", Some(token(&key, wrong_aud)), "audience"),
        ("signed by another key", Some(token(&other, claims(scope))), "signature"),
    ];

    for (what, bearer, expected) in cases {
        // Act
        let (status, challenge, body) = post(&app, bearer.as_deref()).await;

        // Assert
        assert_eq!(status, 401, "{what}: {body}");
        assert!(
            challenge.as_deref().is_some_and(|c| c.starts_with("Bearer realm=\"calcium-cds\"")),
            "{what}: {challenge:?}"
        );
        if bearer.is_some() {
            assert!(challenge.as_deref().is_some_and(|c| c.contains("error=\"invalid_token\"")), "{what}");
        }
        assert_r4_valid(&body);
        let text = body["issue"][0]["diagnostics"].as_str().unwrap_or("");
        assert!(text.contains(expected), "{what}: {text}");
    }
}

#[tokio::test]
async fn a_token_without_the_scope_is_403() {
    let key = generate_key(KID);
    let app = spawn(auth_on(&key, false)).await;
    let (status, challenge, body) =
        post(&app, Some(&token(&key, claims("system/Observation.rs system/GuidanceResponse.r")))).await;
    assert_eq!(status, 403, "{body}");
    assert_r4_valid(&body);
    assert_eq!(body["issue"][0]["code"], "forbidden");
    let c = challenge.unwrap_or_default();
    assert!(c.contains("error=\"insufficient_scope\"") && c.contains("system/GuidanceResponse.c"), "{c}");
}

#[tokio::test]
async fn probes_and_metadata_stay_open_and_metrics_can_be_protected() {
    let key = generate_key(KID);
    let app = spawn(auth_on(&key, true)).await;
    for route in ["/livez", "/readyz", "/fhir/metadata"] {
        let r = app.client.get(format!("{}{route}", app.address)).send().await.expect("an answer");
        assert_eq!(r.status().as_u16(), 200, "{route}");
    }
    let r = app.client.get(format!("{}/metrics", app.address)).send().await.expect("an answer");
    assert_eq!(r.status().as_u16(), 401, "metrics protected");
    let r = app
        .client
        .get(format!("{}/metrics", app.address))
        .bearer_auth(token(&key, claims("")))
        .send()
        .await
        .expect("an answer");
    assert_eq!(r.status().as_u16(), 200, "any valid token reads the metrics");
}

#[tokio::test]
async fn the_jwks_can_come_from_a_url() {
    let key = generate_key(KID);
    let server = MockServer::start().await;
    Mock::given(method("GET"))
        .and(path("/.well-known/jwks.json"))
        .respond_with(ResponseTemplate::new(200).set_body_json(json!({ "keys": [key.jwk] })))
        .expect(1)
        .mount(&server)
        .await;
    let auth = InboundAuthArgs {
        jwks_file: None,
        jwks_url: Some(format!("{}/.well-known/jwks.json", server.uri())),
        ..auth_on(&key, false)
    };
    let app = spawn(auth).await;
    let (status, _, body) = post(&app, Some(&token(&key, claims("system/*.cruds")))).await;
    assert_eq!(status, 200, "{body}");
}

#[test]
fn incomplete_auth_settings_are_refused_naming_the_setting() {
    let err = InboundAuthArgs { enabled: true, issuer: Some(ISSUER.into()), ..InboundAuthArgs::default() }
        .verifier()
        .expect_err("no audience");
    assert!(err.contains("CALCIUM_CDS_AUTH_AUDIENCE"), "{err}");
    let err = InboundAuthArgs {
        enabled: true,
        issuer: Some(ISSUER.into()),
        audience: Some(AUDIENCE.into()),
        ..InboundAuthArgs::default()
    }
    .verifier()
    .expect_err("no JWKS");
    assert!(err.contains("JWKS"), "{err}");
}

/// An issuer's JWKS URL that answers `first` on the first read and `then` on every
/// later one; `reads` (when given) is how many reads of each wiremock must see.
async fn jwks_server(first: Value, then: Value, reads: Option<u64>) -> MockServer {
    let server = MockServer::start().await;
    let jwks = || Mock::given(method("GET")).and(path("/.well-known/jwks.json"));
    let mut at_start =
        jwks().respond_with(ResponseTemplate::new(200).set_body_json(first)).up_to_n_times(1).with_priority(1);
    let mut later = jwks().respond_with(ResponseTemplate::new(200).set_body_json(then)).with_priority(2);
    if let Some(n) = reads {
        at_start = at_start.expect(n);
        later = later.expect(n);
    }
    at_start.mount(&server).await;
    later.mount(&server).await;
    server
}

#[tokio::test]
async fn a_rotated_key_is_found_by_reading_the_jwks_url_again() {
    // Arrange: at start the JWKS has the old key; the issuer then adds a new one.
    let old_key = generate_key(KID);
    let mut new_key = generate_key("larkspur-test-signing-2");
    new_key.jwk["kid"] = json!("larkspur-test-signing-2");
    let server =
        jwks_server(json!({ "keys": [old_key.jwk] }), json!({ "keys": [old_key.jwk, new_key.jwk] }), Some(1)).await;
    let auth = InboundAuthArgs {
        jwks_file: None,
        jwks_url: Some(format!("{}/.well-known/jwks.json", server.uri())),
        jwks_min_interval_s: 0,
        ..auth_on(&old_key, false)
    };
    let app = spawn(auth).await;
    let mut header = Header::new(Algorithm::ES256);
    header.kid = Some("larkspur-test-signing-2".into());
    let rotated =
        jsonwebtoken::encode(&header, &claims("system/GuidanceResponse.c"), &new_key.encoding).expect("signed");

    // Act
    let (status, _, body) = post(&app, Some(&rotated)).await;

    // Assert: served after one more read; a token with an unknown kid and no URL stays refused (above).
    assert_eq!(status, 200, "{body}");
}

#[tokio::test]
async fn a_key_removed_from_the_jwks_url_stops_being_trusted_after_the_max_age() {
    // Arrange: the JWKS has the key at start; afterwards the issuer removes it.
    let key = generate_key(KID);
    let other = generate_key("larkspur-test-signing-3");
    let server = jwks_server(json!({ "keys": [key.jwk] }), json!({ "keys": [other.jwk] }), None).await;
    let auth = InboundAuthArgs {
        jwks_file: None,
        jwks_url: Some(format!("{}/.well-known/jwks.json", server.uri())),
        jwks_max_age_s: 1,
        ..auth_on(&key, false)
    };
    let app = spawn(auth).await;
    let signed = token(&key, claims("system/GuidanceResponse.c"));
    let (status, _, body) = post(&app, Some(&signed)).await;
    assert_eq!(status, 200, "trusted at start: {body}");

    // Act / Assert: after the scheduled re-read the same token is refused (bounded wait).
    for _ in 0..100 {
        let (status, challenge, _) = post(&app, Some(&signed)).await;
        if status == 401 {
            assert!(challenge.is_some_and(|c| c.contains("invalid_token")));
            return;
        }
        tokio::time::sleep(std::time::Duration::from_millis(100)).await;
    }
    panic!("the removed key was still trusted 10 s after a 1 s max age");
}
