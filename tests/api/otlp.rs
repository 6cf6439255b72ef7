//! Trace export over OTLP/HTTP (JSON encoding): a wiremock `MockServer`
//! plays the OpenTelemetry collector, another the EHR's FHIR server at the
//! invented Larkspur Children's Hospital.
//!
//! What is checked: the server span continues the caller's traceparent, each
//! upstream call is a client span whose id is the parent id the EHR received,
//! unsampled traces are not exported, a refusing collector is counted and
//! never fails a request, and the payloads carry no patient data. With
//! `CALCIUM_CDS_OTLP_SAMPLE_OUT` set, one payload is written there for the
//! outside check in `tests/reference/otlp_check.py` (the OTLP protobuf
//! definitions from PyPI's `opentelemetry-proto`), which `.ci/run` runs.

use std::time::Duration;

use serde_json::Value;
use wiremock::matchers::{method, path};
use wiremock::{Mock, MockServer, Request, ResponseTemplate};

use crate::helpers::{TestApp, default_settings, spawn_app_settings};
use crate::upstream::{PATIENT_ID, patient};

const CALLER_TRACE: &str = "4bf92f3577b34da6a3ce929d0e0e4736";
const CALLER_SPAN: &str = "00f067aa0ba902b7";

async fn ehr() -> MockServer {
    crate::upstream::ehr_with_labs(Duration::ZERO).await
}

async fn collector(status: u16) -> MockServer {
    let server = MockServer::start().await;
    Mock::given(method("POST"))
        .and(path("/v1/traces"))
        .respond_with(ResponseTemplate::new(status))
        .mount(&server)
        .await;
    server
}

async fn app(ehr: &MockServer, collector: &MockServer) -> TestApp {
    let mut settings = default_settings();
    settings.upstream.fhir_base_url = Some(ehr.uri());
    settings.telemetry.otlp_endpoint = Some(collector.uri());
    settings.telemetry.otlp_flush_ms = 50;
    spawn_app_settings(settings).await
}

async fn assess_patient(app: &TestApp, traceparent: &str) -> u16 {
    let response = app
        .client
        .post(format!("{}/fhir/Patient/{PATIENT_ID}/$assess", app.address))
        .header("traceparent", traceparent)
        .send()
        .await
        .expect("the request is sent");
    response.status().as_u16()
}

/// Every span the collector received so far, with the payloads' texts.
async fn received(collector: &MockServer) -> (Vec<Value>, Vec<String>) {
    let requests = collector.received_requests().await.unwrap_or_default();
    let mut spans = Vec::new();
    let mut texts = Vec::new();
    for r in &requests {
        assert_eq!(r.headers.get("content-type").and_then(|v| v.to_str().ok()), Some("application/json"));
        let body: Value = serde_json::from_slice(&r.body).expect("the export body is JSON");
        for rs in body["resourceSpans"].as_array().expect("resourceSpans") {
            for ss in rs["scopeSpans"].as_array().expect("scopeSpans") {
                spans.extend(ss["spans"].as_array().expect("spans").iter().cloned());
            }
        }
        texts.push(String::from_utf8_lossy(&r.body).into_owned());
    }
    (spans, texts)
}

/// Wait (bounded) until a span of `trace_id` with the given kind arrives.
async fn wait_for_server_span(collector: &MockServer, trace_id: &str) -> (Vec<Value>, Vec<String>) {
    for _ in 0..200 {
        let (spans, texts) = received(collector).await;
        if spans.iter().any(|s| s["traceId"] == trace_id && s["kind"] == 2) {
            return (spans, texts);
        }
        tokio::time::sleep(Duration::from_millis(25)).await;
    }
    panic!("no server span of trace {trace_id} reached the collector");
}

fn attr<'a>(span: &'a Value, key: &str) -> &'a Value {
    span["attributes"]
        .as_array()
        .and_then(|a| a.iter().find(|kv| kv["key"] == key))
        .map_or(&Value::Null, |kv| &kv["value"])
}

/// The parent ids the EHR received in traceparent headers for one trace.
async fn ehr_parent_ids(ehr: &MockServer, trace_id: &str) -> Vec<String> {
    let requests: Vec<Request> = ehr.received_requests().await.unwrap_or_default();
    requests
        .iter()
        .filter_map(|r| r.headers.get("traceparent").and_then(|v| v.to_str().ok()))
        .filter_map(|h| {
            let parts: Vec<&str> = h.split('-').collect();
            (parts.len() == 4 && parts[1] == trace_id).then(|| parts[2].to_owned())
        })
        .collect()
}

#[tokio::test]
async fn a_sampled_request_is_exported_as_a_server_span_with_a_client_span_per_upstream_call() {
    let ehr = ehr().await;
    let collector = collector(200).await;
    let app = app(&ehr, &collector).await;
    // An unsampled trace first: it must not be exported (batches keep order, so
    // its spans, if any, would arrive before the sampled trace's).
    let unsampled = "0af7651916cd43dd8448eb211c80319c";
    assert_eq!(assess_patient(&app, &format!("00-{unsampled}-b7ad6b7169203331-00")).await, 200);
    assert_eq!(assess_patient(&app, &format!("00-{CALLER_TRACE}-{CALLER_SPAN}-01")).await, 200);
    let (spans, texts) = wait_for_server_span(&collector, CALLER_TRACE).await;
    assert!(spans.iter().all(|s| s["traceId"] != unsampled), "an unsampled trace was exported");

    let server: Vec<&Value> = spans.iter().filter(|s| s["traceId"] == CALLER_TRACE && s["kind"] == 2).collect();
    assert_eq!(server.len(), 1, "{server:?}");
    let server = server[0];
    assert_eq!(server["parentSpanId"], CALLER_SPAN, "the caller's span is the parent");
    assert_eq!(server["name"], "POST /fhir/Patient/{id}/$assess", "the route template, never the patient id");
    assert_eq!(attr(server, "http.route")["stringValue"], "/fhir/Patient/{id}/$assess");
    assert_eq!(attr(server, "http.request.method")["stringValue"], "POST");
    assert_eq!(attr(server, "http.response.status_code")["intValue"], "200");
    assert_eq!(server["status"]["code"], 0);
    let start: u128 = server["startTimeUnixNano"].as_str().unwrap().parse().unwrap();
    let end: u128 = server["endTimeUnixNano"].as_str().unwrap().parse().unwrap();
    assert!(start > 0 && end >= start, "{start} {end}");

    // Every upstream call: a client span, child of the server span, whose id the EHR received.
    let client: Vec<&Value> = spans.iter().filter(|s| s["traceId"] == CALLER_TRACE && s["kind"] == 3).collect();
    let mut client_ids: Vec<String> = client.iter().map(|s| s["spanId"].as_str().unwrap().to_owned()).collect();
    let mut sent_ids = ehr_parent_ids(&ehr, CALLER_TRACE).await;
    client_ids.sort();
    sent_ids.sort();
    assert_eq!(sent_ids.len(), 7, "Patient read and six searches: {sent_ids:?}");
    assert_eq!(client_ids, sent_ids, "each upstream call is exported as the span the EHR was told of");
    for c in &client {
        assert_eq!(c["parentSpanId"], server["spanId"]);
        assert_eq!(attr(c, "http.request.method")["stringValue"], "GET");
        assert_eq!(attr(c, "http.response.status_code")["intValue"], "200");
    }
    let names: Vec<&str> = client.iter().filter_map(|c| c["name"].as_str()).collect();
    assert!(names.contains(&"GET Observation search"), "{names:?}");

    // No patient data in any payload: id, name, identifier, birth date.
    let p = patient();
    let birth = p["birthDate"].as_str().unwrap();
    for text in &texts {
        for needle in [PATIENT_ID, "Thistlewood", "Marigold", "LCH-55120987", birth] {
            assert!(!text.contains(needle), "an export payload carries {needle}");
        }
    }
    let resource = &serde_json::from_str::<Value>(&texts[0]).unwrap()["resourceSpans"][0]["resource"];
    assert!(
        resource["attributes"]
            .as_array()
            .unwrap()
            .iter()
            .any(|a| a["key"] == "service.name" && a["value"]["stringValue"] == "calcium-cds")
    );

    if let Ok(out) = std::env::var("CALCIUM_CDS_OTLP_SAMPLE_OUT") {
        let sampled = texts.iter().find(|t| t.contains(CALLER_TRACE)).expect("a payload of the sampled trace");
        std::fs::write(&out, sampled).expect("the sample is written");
    }
}

#[tokio::test]
async fn a_request_without_traceparent_starts_a_sampled_trace_and_is_exported_as_a_root_span() {
    let ehr = ehr().await;
    let collector = collector(200).await;
    let app = app(&ehr, &collector).await;
    let response = app.client.get(format!("{}/fhir/metadata", app.address)).send().await.unwrap();
    assert_eq!(response.status().as_u16(), 200);
    for _ in 0..200 {
        let (spans, _) = received(&collector).await;
        if let Some(s) = spans.iter().find(|s| s["name"] == "GET /fhir/metadata") {
            assert!(s.get("parentSpanId").is_none(), "a root span has no parent: {s}");
            assert_eq!(s["traceId"].as_str().unwrap().len(), 32);
            return;
        }
        tokio::time::sleep(Duration::from_millis(25)).await;
    }
    panic!("the metadata request was not exported");
}

#[tokio::test]
async fn a_collector_that_refuses_is_counted_and_requests_still_succeed() {
    let ehr = ehr().await;
    let collector = collector(503).await;
    let app = app(&ehr, &collector).await;
    assert_eq!(assess_patient(&app, &format!("00-{CALLER_TRACE}-{CALLER_SPAN}-01")).await, 200);
    for _ in 0..200 {
        let metrics = app.get("/metrics").await.text().await.unwrap();
        let failures = metrics
            .lines()
            .find_map(|l| l.strip_prefix("calcium_cds_span_export_failures_total "))
            .and_then(|v| v.trim().parse::<u64>().ok());
        if failures.is_some_and(|n| n >= 1) {
            assert!(metrics.contains("calcium_cds_spans_exported_total 0"), "{metrics}");
            return;
        }
        tokio::time::sleep(Duration::from_millis(25)).await;
    }
    panic!("the refused export was not counted");
}

#[tokio::test]
async fn a_bad_otlp_endpoint_is_refused_at_start() {
    let mut settings = default_settings();
    settings.telemetry.otlp_endpoint = Some("collector:4318".into());
    let problems = settings.cross_checks();
    assert!(problems.iter().any(|p| p.contains("otlp-endpoint")), "{problems:?}");
}
