//! Benchmark (not a test): a full patient-context gather against a wiremock
//! FHIR server whose every answer is delayed 50 ms. The searches run in
//! parallel, so a gather should take about one delay, not the sum of seven.
//!
//! Then the same through the HTTP route, end to end: `POST
//! /fhir/Patient/{id}/$assess` on the service (target: total latency at most
//! 1.2x one delay; docs/benchmarks.md).
//!
//! Run: `cargo bench -p calcium-cds --bench gather` (prints median, p95, max and the ratios).

#![allow(clippy::expect_used, reason = "a benchmark stops loudly if the mock server misbehaves")]

use std::time::{Duration, Instant};

use calcium_cds::upstream::{Auth, FhirClient, UpstreamSettings};
use serde_json::json;
use wiremock::matchers::{method, path, path_regex};
use wiremock::{Mock, MockServer, ResponseTemplate};

const DELAY: Duration = Duration::from_millis(50);
const CALLS_PER_GATHER: u32 = 7;
const RUNS: usize = 40;

#[tokio::main(flavor = "multi_thread", worker_threads = 2)]
async fn main() {
    let server = MockServer::start().await;
    let patient = json!({ "resourceType": "Patient", "id": "bench-1", "birthDate": "2020-03-04" });
    let empty = json!({ "resourceType": "Bundle", "type": "searchset", "total": 0 });
    Mock::given(method("GET"))
        .and(path("/Patient/bench-1"))
        .respond_with(ResponseTemplate::new(200).set_body_json(patient).set_delay(DELAY))
        .mount(&server)
        .await;
    Mock::given(method("GET"))
        .and(path_regex(
            "^/(Observation|MedicationRequest|MedicationStatement|MedicationAdministration|Condition|Procedure)$",
        ))
        .respond_with(ResponseTemplate::new(200).set_body_json(empty).set_delay(DELAY))
        .mount(&server)
        .await;
    let client = FhirClient::new(
        reqwest::Client::new(),
        UpstreamSettings {
            base_url: server.uri(),
            auth: Auth::None,
            call_timeout: Duration::from_secs(3),
            deadline: Duration::from_secs(10),
            max_retries: 0,
            page_limit: 1,
            page_size: 100,
        },
    );
    let codes = vec!["http://loinc.org|1994-3".to_owned(), "http://loinc.org|17861-6".to_owned()];
    // Warm the connection pool.
    client.gather("bench-1", &codes, "2026-01-01").await.expect("the gather succeeds");
    let mut times = Vec::with_capacity(RUNS);
    for _ in 0..RUNS {
        let start = Instant::now();
        client.gather("bench-1", &codes, "2026-01-01").await.expect("the gather succeeds");
        times.push(start.elapsed());
    }
    report("gather (in process)", &mut times);

    // End to end: the service itself, pointed at the same mock server.
    let engine = calcium_cds::engine::Engine::new(calcium_cds::config::load_rules(None).expect("embedded rules"))
        .expect("engine");
    let settings = calcium_cds::config::ServeArgs {
        listen: "127.0.0.1:0".parse().expect("an address"),
        body_limit: calcium_cds::config::DEFAULT_BODY_LIMIT,
        rules: calcium_cds::config::RuleArgs { rules: None },
        upstream: calcium_cds::config::UpstreamArgs {
            fhir_base_url: Some(server.uri()),
            upstream_retries: 0,
            ..calcium_cds::config::UpstreamArgs::default()
        },
        limits: calcium_cds::config::LimitArgs::default(),
        auth: calcium_cds::config::InboundAuthArgs::default(),
        telemetry: calcium_cds::config::TelemetryArgs::default(),
        workbench: false,
        config_file: None,
    };
    let app = calcium_cds::http::Application::build(&settings, engine).expect("the service starts");
    let url = format!("http://127.0.0.1:{}/fhir/Patient/bench-1/$assess", app.port());
    tokio::spawn(app.run_until_stopped());
    let http = reqwest::Client::new();
    let post = || async {
        let resp = http.post(&url).send().await.expect("an answer");
        assert_eq!(resp.status().as_u16(), 200, "the patient route answers");
        resp.bytes().await.expect("a body")
    };
    post().await;
    let mut times = Vec::with_capacity(RUNS);
    for _ in 0..RUNS {
        let start = Instant::now();
        post().await;
        times.push(start.elapsed());
    }
    report("POST /fhir/Patient/{id}/$assess (HTTP, end to end)", &mut times);
}

fn report(what: &str, times: &mut [Duration]) {
    times.sort();
    let ms = |d: Duration| d.as_secs_f64() * 1000.0;
    let median = ms(times[RUNS / 2]);
    println!(
        "{what}: every call delayed {} ms ({CALLS_PER_GATHER} calls, sum {} ms), {RUNS} runs: median {median:.1} ms, p95 {:.1} ms, max {:.1} ms; median / one delay = {:.2} (target <= 1.2)",
        DELAY.as_millis(),
        DELAY.as_millis() * u128::from(CALLS_PER_GATHER),
        ms(times[RUNS * 95 / 100]),
        ms(times[RUNS - 1]),
        median / ms(DELAY),
    );
}
