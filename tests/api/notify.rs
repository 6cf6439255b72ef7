//! Result notifications (Subscriptions Backport): handshake and heartbeat,
//! events worked on a bounded queue, duplicates recognised, a full queue
//! answering 503 with Retry-After, and idempotent write-back.

use std::time::Duration;

use serde_json::{Value, json};
use wiremock::matchers::{method, path, path_regex};
use wiremock::{Mock, MockServer, ResponseTemplate};

use calcium_cds::config::{RuleArgs, ServeArgs, UpstreamArgs};

struct App {
    address: String,
    client: reqwest::Client,
}

async fn spawn(upstream: Option<&MockServer>, queue_capacity: usize) -> App {
    let engine = calcium_cds::engine::Engine::new(calcium_cds::config::load_rules(None).unwrap()).unwrap();
    let mut up = UpstreamArgs { queue_capacity, write_back: true, upstream_retries: 0, ..UpstreamArgs::default() };
    up.fhir_base_url = upstream.map(|m| format!("{}/fhir", m.uri()));
    let settings = ServeArgs {
        listen: "127.0.0.1:0".parse().unwrap(),
        body_limit: 1024 * 1024,
        rules: RuleArgs { rules: None },
        upstream: up,
        limits: calcium_cds::config::LimitArgs::default(),
        auth: calcium_cds::config::InboundAuthArgs::default(),
        telemetry: calcium_cds::config::TelemetryArgs::default(),
        workbench: false,
        config_file: None,
    };
    let app = calcium_cds::http::Application::build(&settings, engine).unwrap();
    let address = format!("http://127.0.0.1:{}", app.port());
    tokio::spawn(app.run_until_stopped());
    App { address, client: reqwest::Client::new() }
}

impl App {
    async fn notify(&self, body: &Value) -> reqwest::Response {
        self.client
            .post(format!("{}/notifications", self.address))
            .header("Content-Type", "application/fhir+json")
            .body(body.to_string())
            .send()
            .await
            .unwrap()
    }
}

fn status_params(kind: &str, events: &[(&str, &str)]) -> Value {
    let mut parameter = vec![
        json!({ "name": "subscription", "valueReference": { "reference": "https://ehr.larkspur-childrens.example.org/fhir/Subscription/calcium-results" } }),
        json!({ "name": "topic", "valueCanonical": "https://larkspur-childrens.example.org/fhir/SubscriptionTopic/new-lab-result" }),
        json!({ "name": "status", "valueCode": "active" }),
        json!({ "name": "type", "valueCode": kind }),
    ];
    for (number, focus) in events {
        parameter.push(json!({ "name": "notification-event", "part": [
            { "name": "event-number", "valueString": number },
            { "name": "focus", "valueReference": { "reference": focus } },
        ] }));
    }
    json!({ "resourceType": "Parameters", "parameter": parameter })
}

fn notification(kind: &str, events: &[(&str, &str)]) -> Value {
    json!({ "resourceType": "Bundle", "type": "history", "entry": [{ "fullUrl": "urn:uuid:5b0f1c2e-8d3a-4e6f-9a1b-2c3d4e5f6a70", "resource": status_params(kind, events) }] })
}

fn now_iso(hours_ago: i64) -> String {
    let t =
        std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).unwrap().as_secs() as i64 - hours_ago * 3600;
    calcium_cds::fhir::datetime::format_instant(t)
}

fn searchset(entries: Vec<Value>) -> Value {
    json!({ "resourceType": "Bundle", "type": "searchset", "entry": entries })
}

/// The EHR: a six-year-old with a low ionized calcium and a seizure.
async fn ehr() -> MockServer {
    let server = MockServer::start().await;
    let base = format!("{}/fhir", server.uri());
    let born = now_iso(24 * 365 * 6);
    let patient = json!({ "resourceType": "Patient", "id": "lch-4417", "birthDate": &born[..10], "gender": "male" });
    let obs = json!({
        "resourceType": "Observation", "id": "ica-9001", "status": "final",
        "code": { "coding": [{ "system": "http://loinc.org", "code": "1994-3" }] },
        "subject": { "reference": "Patient/lch-4417" },
        "effectiveDateTime": now_iso(1),
        "valueQuantity": { "value": 0.85, "unit": "mmol/L", "system": "http://unitsofmeasure.org", "code": "mmol/L" },
    });
    Mock::given(method("GET"))
        .and(path("/fhir/Patient/lch-4417"))
        .respond_with(ResponseTemplate::new(200).set_body_json(&patient))
        .mount(&server)
        .await;
    Mock::given(method("GET"))
        .and(path("/fhir/Observation/ica-9001"))
        .respond_with(ResponseTemplate::new(200).set_body_json(&obs))
        .mount(&server)
        .await;
    Mock::given(method("GET"))
        .and(path("/fhir/Observation"))
        .respond_with(ResponseTemplate::new(200).set_body_json(searchset(vec![json!({ "fullUrl": format!("{base}/Observation/ica-9001"), "resource": obs, "search": { "mode": "match" } })])))
        .mount(&server)
        .await;
    Mock::given(method("GET"))
        .and(path_regex(
            r"^/fhir/(MedicationRequest|MedicationStatement|MedicationAdministration|Condition|Procedure)$",
        ))
        .respond_with(ResponseTemplate::new(200).set_body_json(searchset(vec![])))
        .mount(&server)
        .await;
    server
}

async fn transactions(server: &MockServer, at_least: usize) -> Vec<Value> {
    // Wait (bounded) for the worker: the response is 202 before the work is done.
    for _ in 0..100 {
        let posts: Vec<Value> = server
            .received_requests()
            .await
            .unwrap_or_default()
            .into_iter()
            .filter(|r| r.method == wiremock::http::Method::POST)
            .filter_map(|r| serde_json::from_slice(&r.body).ok())
            .collect();
        if posts.len() >= at_least {
            return posts;
        }
        tokio::time::sleep(Duration::from_millis(50)).await;
    }
    Vec::new()
}

#[tokio::test]
async fn handshake_and_heartbeat_are_acknowledged_and_do_nothing() {
    let server = ehr().await;
    let app = spawn(Some(&server), 4).await;
    for kind in ["handshake", "heartbeat"] {
        let r = app.notify(&notification(kind, &[])).await;
        assert_eq!(r.status(), 200, "{kind}");
    }
    tokio::time::sleep(Duration::from_millis(200)).await;
    assert!(server.received_requests().await.unwrap_or_default().is_empty(), "a handshake or heartbeat called the EHR");
}

#[tokio::test]
async fn an_event_delivered_three_times_is_worked_and_written_back_once() {
    let server = ehr().await;
    Mock::given(method("POST"))
        .and(path("/fhir"))
        .and(wiremock::matchers::header("content-type", "application/fhir+json"))
        .and(|r: &wiremock::Request| {
            // A transaction whose every entry is a conditional create.
            serde_json::from_slice::<Value>(&r.body).ok().is_some_and(|b| {
                b["type"] == "transaction"
                    && b["entry"].as_array().is_some_and(|es| {
                        !es.is_empty()
                            && es.iter().all(|e| {
                                e["request"]["method"] == "POST"
                                    && e["request"]["ifNoneExist"]
                                        .as_str()
                                        .is_some_and(|c| c.starts_with("identifier="))
                            })
                    })
            })
        })
        .respond_with(
            ResponseTemplate::new(200)
                .set_body_json(json!({ "resourceType": "Bundle", "type": "transaction-response" })),
        )
        .expect(1)
        .named("one conditional-create transaction")
        .mount(&server)
        .await;
    let app = spawn(Some(&server), 4).await;
    let n = notification("event-notification", &[("17", "Observation/ica-9001")]);
    let statuses = [app.notify(&n).await.status(), app.notify(&n).await.status(), app.notify(&n).await.status()];
    assert_eq!(statuses.map(|s| s.as_u16()), [202, 202, 202]);
    let posts = transactions(&server, 1).await;
    tokio::time::sleep(Duration::from_millis(300)).await;
    let posts_after = transactions(&server, 1).await;
    assert_eq!(posts.len(), 1, "expected one write-back");
    assert_eq!(posts_after.len(), 1, "a duplicate delivery was written back again");
    let tx = &posts[0];
    assert_eq!(tx["type"], "transaction");
    let entries = tx["entry"].as_array().unwrap();
    assert!(entries.iter().any(|e| e["resource"]["resourceType"] == "DetectedIssue"));
    for e in entries {
        let cond = e["request"]["ifNoneExist"].as_str().unwrap();
        assert!(cond.starts_with("identifier=https://calcium-cds.example.org/fhir/sid/result|"), "{cond}");
        assert_eq!(e["request"]["method"], "POST");
        let value = cond.rsplit('|').next().unwrap();
        assert!(e["resource"]["identifier"].as_array().unwrap().iter().any(|i| i["value"] == value));
    }
    crate::helpers::assert_r4_valid(tx);
}

#[tokio::test]
async fn the_same_data_writes_the_same_identifiers() {
    // A second event on the same data (a new event number) repeats the
    // identifiers, so the server's conditional create makes nothing new.
    let server = ehr().await;
    Mock::given(method("POST"))
        .and(path("/fhir"))
        .respond_with(
            ResponseTemplate::new(200)
                .set_body_json(json!({ "resourceType": "Bundle", "type": "transaction-response" })),
        )
        .mount(&server)
        .await;
    let app = spawn(Some(&server), 4).await;
    app.notify(&notification("event-notification", &[("21", "Observation/ica-9001")])).await;
    let first = transactions(&server, 1).await;
    app.notify(&notification("event-notification", &[("22", "Observation/ica-9001")])).await;
    let both = transactions(&server, 2).await;
    assert_eq!((first.len(), both.len()), (1, 2));
    let ids = |tx: &Value| -> Vec<String> {
        tx["entry"]
            .as_array()
            .unwrap()
            .iter()
            .map(|e| e["request"]["ifNoneExist"].as_str().unwrap().to_owned())
            .collect()
    };
    assert_eq!(ids(&both[0]), ids(&both[1]));
}

#[tokio::test]
async fn a_full_queue_answers_503_with_retry_after_and_a_redelivery_succeeds() {
    let server = MockServer::start().await;
    // A slow EHR keeps the worker busy.
    Mock::given(method("GET"))
        .respond_with(ResponseTemplate::new(200).set_delay(Duration::from_millis(800)).set_body_json(searchset(vec![])))
        .mount(&server)
        .await;
    let app = spawn(Some(&server), 1).await;
    let events: Vec<(String, String)> = (1..=6).map(|k| (k.to_string(), "Observation/ica-9001".to_owned())).collect();
    let refs: Vec<(&str, &str)> = events.iter().map(|(a, b)| (a.as_str(), b.as_str())).collect();
    let n = notification("event-notification", &refs);
    let r = app.notify(&n).await;
    assert_eq!(r.status(), 503);
    assert_eq!(r.headers().get("retry-after").and_then(|v| v.to_str().ok()), Some("5"));
    let body: Value = r.json().await.unwrap();
    assert_eq!(body["resourceType"], "OperationOutcome");
    // Later the queue drains and the same delivery is accepted.
    let mut accepted = false;
    for _ in 0..40 {
        tokio::time::sleep(Duration::from_millis(250)).await;
        let r = app.notify(&n).await;
        if r.status() == 202 {
            accepted = true;
            break;
        }
        assert_eq!(r.status(), 503);
    }
    assert!(accepted, "the redelivery never got through");
}

#[tokio::test]
async fn events_need_an_upstream_and_notifications_must_be_history_bundles() {
    let app = spawn(None, 4).await;
    assert_eq!(app.notify(&notification("heartbeat", &[])).await.status(), 200);
    assert_eq!(app.notify(&notification("event-notification", &[("1", "Observation/x")])).await.status(), 501);
    let not_history = json!({ "resourceType": "Bundle", "type": "collection", "entry": [] });
    let r = app.notify(&not_history).await;
    assert_eq!(r.status(), 422);
    let oo: Value = r.json().await.unwrap();
    assert_eq!(oo["issue"][0]["expression"][0], "Bundle.type");
}

#[tokio::test]
async fn an_event_about_an_observation_the_rules_do_not_read_gathers_nothing() {
    let server = MockServer::start().await;
    let hemoglobin = json!({
        "resourceType": "Observation", "id": "hb-77", "status": "final",
        "code": { "coding": [{ "system": "http://loinc.org", "code": "718-7" }] },
        "subject": { "reference": "Patient/lch-4417" },
        "valueQuantity": { "value": 118, "unit": "g/L", "system": "http://unitsofmeasure.org", "code": "g/L" },
    });
    Mock::given(method("GET"))
        .and(path("/fhir/Observation/hb-77"))
        .respond_with(ResponseTemplate::new(200).set_body_json(&hemoglobin))
        .expect(1)
        .named("the focus is read")
        .mount(&server)
        .await;
    Mock::given(method("GET"))
        .and(path_regex(r"^/fhir/(Patient/.*|Observation|MedicationRequest|Condition)$"))
        .respond_with(ResponseTemplate::new(500))
        .expect(0)
        .named("no gather")
        .mount(&server)
        .await;
    let app = spawn(Some(&server), 4).await;
    let n = notification("event-notification", &[("3", "Observation/hb-77")]);
    assert_eq!(app.notify(&n).await.status(), 202);
    // Give the worker time to read the focus (wiremock verifies the counts on drop).
    for _ in 0..40 {
        let seen = server.received_requests().await.unwrap_or_default().len();
        if seen >= 1 {
            break;
        }
        tokio::time::sleep(Duration::from_millis(50)).await;
    }
    tokio::time::sleep(Duration::from_millis(200)).await;
}

#[tokio::test]
async fn an_event_whose_gather_failed_is_worked_again_on_redelivery() {
    let server = ehr().await;
    // The first Patient read fails; the EHR is fine afterwards.
    Mock::given(method("GET"))
        .and(path("/fhir/Patient/lch-4417"))
        .respond_with(ResponseTemplate::new(500))
        .up_to_n_times(1)
        .with_priority(1)
        .mount(&server)
        .await;
    Mock::given(method("POST"))
        .and(path("/fhir"))
        .respond_with(
            ResponseTemplate::new(200)
                .set_body_json(json!({ "resourceType": "Bundle", "type": "transaction-response" })),
        )
        .mount(&server)
        .await;
    let app = spawn(Some(&server), 4).await;
    let n = notification("event-notification", &[("41", "Observation/ica-9001")]);
    assert_eq!(app.notify(&n).await.status(), 202);
    // The sender redelivers until the result is written.
    let mut posts = Vec::new();
    for _ in 0..60 {
        tokio::time::sleep(Duration::from_millis(100)).await;
        posts = transactions(&server, 0).await;
        if !posts.is_empty() {
            break;
        }
        assert_eq!(app.notify(&n).await.status(), 202);
    }
    assert_eq!(posts.len(), 1, "the failed event was never worked again");
    let reads = server
        .received_requests()
        .await
        .unwrap_or_default()
        .iter()
        .filter(|r| r.url.path() == "/fhir/Patient/lch-4417")
        .count();
    assert!(reads >= 2, "{reads} Patient reads");
}
