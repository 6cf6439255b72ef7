//! Telemetry of the real binary: one JSON log line per request, no patient
//! data anywhere in the log, and Prometheus metrics.
//!
//! The binary runs as a child process (its log is what ops would collect);
//! every example bundle is posted, and the whole log is scanned for every
//! name, identifier, birth date and resource id found in those bundles.

use std::io::{BufRead, BufReader};
use std::process::{Child, Command, Stdio};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use serde_json::Value;

struct Service {
    child: Child,
    log: Arc<Mutex<Vec<String>>>,
    base: String,
}

impl Drop for Service {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

/// Start `calcium-cds serve` on a free port with `log_filter`; wait for its "listening" line.
fn start(log_filter: &str) -> Service {
    let child = Command::new(env!("CARGO_BIN_EXE_calcium-cds"))
        .arg("serve")
        .env_clear()
        .env("CALCIUM_CDS_LISTEN", "127.0.0.1:0")
        .env("CALCIUM_CDS_LOG", log_filter)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the binary starts");
    let mut service = Service { child, log: Arc::new(Mutex::new(Vec::new())), base: String::new() };
    let log = service.log.clone();
    for stream in [
        Box::new(service.child.stderr.take().expect("stderr")) as Box<dyn std::io::Read + Send>,
        Box::new(service.child.stdout.take().expect("stdout")),
    ] {
        let log = log.clone();
        std::thread::spawn(move || {
            for line in BufReader::new(stream).lines().map_while(Result::ok) {
                log.lock().expect("the log").push(line);
            }
        });
    }
    let start = Instant::now();
    while start.elapsed() < Duration::from_secs(20) {
        let port = log.lock().expect("the log").iter().find_map(|l| {
            let v: Value = serde_json::from_str(l).ok()?;
            (v["message"] == "listening").then(|| v["port"].as_u64()).flatten()
        });
        if let Some(port) = port {
            service.base = format!("http://127.0.0.1:{port}");
            return service;
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    panic!("the service did not log its port: {:?}", log.lock().expect("the log"));
}

/// Every string that would identify a patient in a bundle: names, identifiers, birth dates, ids.
fn identifying_strings(doc: &Value, out: &mut Vec<String>) {
    match doc {
        Value::Object(o) => {
            let kind = o.get("resourceType").and_then(Value::as_str);
            if kind.is_some()
                && let Some(id) = o.get("id").and_then(Value::as_str)
            {
                out.push(id.to_owned());
            }
            if kind == Some("Patient") {
                for name in o.get("name").and_then(Value::as_array).into_iter().flatten() {
                    out.extend(name["family"].as_str().map(str::to_owned));
                    out.extend(name["text"].as_str().map(str::to_owned));
                    out.extend(
                        name["given"].as_array().into_iter().flatten().filter_map(Value::as_str).map(str::to_owned),
                    );
                }
                out.extend(o.get("birthDate").and_then(Value::as_str).map(str::to_owned));
            }
            for ident in o.get("identifier").and_then(Value::as_array).into_iter().flatten() {
                out.extend(ident["value"].as_str().map(str::to_owned));
            }
            for (k, v) in o {
                if k == "reference"
                    && let Some(r) = v.as_str()
                {
                    out.extend(r.rsplit('/').next().map(str::to_owned));
                }
                identifying_strings(v, out);
            }
        }
        Value::Array(a) => a.iter().for_each(|v| identifying_strings(v, out)),
        _ => {}
    }
}

fn examples() -> Vec<(String, Vec<u8>)> {
    let mut files: Vec<_> = std::fs::read_dir(crate::helpers::examples_dir())
        .expect("the examples")
        .filter_map(Result::ok)
        .map(|e| e.path())
        .filter(|p| p.extension().is_some_and(|x| x == "json"))
        .collect();
    files.sort();
    files.into_iter().map(|p| (p.display().to_string(), std::fs::read(&p).expect("an example"))).collect()
}

#[tokio::test]
async fn no_name_identifier_birth_date_or_patient_id_of_any_example_reaches_the_log() {
    // Arrange: our own crate at debug, everything else at info.
    let service = start("info,calcium_cds=debug");
    let client = reqwest::Client::new();
    let mut needles = Vec::new();
    let examples = examples();
    assert!(examples.len() >= 5, "the examples are found");

    // Act: every example, plus a patient-context call and a malformed body.
    for (name, body) in &examples {
        let doc: Value = serde_json::from_slice(body).expect("an example is JSON");
        identifying_strings(&doc, &mut needles);
        let resp = client
            .post(format!("{}/fhir/$assess", service.base))
            .header("content-type", "application/fhir+json")
            .body(body.clone())
            .send()
            .await
            .expect("an answer");
        assert!(resp.status().is_success(), "{name}: {}", resp.status());
    }
    let _ = client.post(format!("{}/fhir/Patient/lch-hidden-7731/$assess", service.base)).send().await;
    needles.push("lch-hidden-7731".into());
    let _ = client
        .post(format!("{}/fhir/$assess", service.base))
        .header("content-type", "application/fhir+json")
        .body(r#"{"resourceType":"Bundle","type":"collection","entry":[{"resource":{"resourceType":"Patient","id":"lch-broken-51","name":[{"family":"Quillfeather"}]"#)
        .send()
        .await;
    needles.extend(["lch-broken-51".to_owned(), "Quillfeather".to_owned()]);
    tokio::time::sleep(Duration::from_millis(300)).await;

    // Assert: the log has one line per request, and none of the needles (timestamps set aside).
    needles.retain(|n| n.len() >= 4);
    needles.sort();
    needles.dedup();
    assert!(
        needles.iter().any(|n| n.chars().all(|c| c.is_ascii_digit() || c == '-')),
        "birth dates are among the needles"
    );
    let log = service.log.lock().expect("the log").clone();
    let requests = log.iter().filter(|l| l.contains(r#""message":"request""#)).count();
    assert_eq!(requests, examples.len() + 2, "one line per request: {log:#?}");
    for line in &log {
        let scanned = match serde_json::from_str::<Value>(line) {
            Ok(Value::Object(mut o)) => {
                o.remove("timestamp");
                Value::Object(o).to_string()
            }
            _ => line.clone(),
        };
        for n in &needles {
            assert!(!scanned.contains(n.as_str()), "'{n}' is in the log line {line}");
        }
    }
}

#[tokio::test]
async fn request_lines_carry_method_route_template_status_latency_and_request_id() {
    let service = start("info");
    let client = reqwest::Client::new();
    let resp = client
        .post(format!("{}/fhir/Patient/lch-route-9/$assess", service.base))
        .header("x-request-id", "ops-trace-0042")
        .send()
        .await
        .expect("an answer");
    assert_eq!(resp.headers().get("x-request-id").and_then(|v| v.to_str().ok()), Some("ops-trace-0042"));
    tokio::time::sleep(Duration::from_millis(200)).await;
    let log = service.log.lock().expect("the log").clone();
    let line: Value = log
        .iter()
        .filter_map(|l| serde_json::from_str::<Value>(l).ok())
        .find(|v| v["message"] == "request")
        .unwrap_or_else(|| panic!("no request line: {log:#?}"));
    assert_eq!(line["method"], "POST");
    assert_eq!(line["route"], "/fhir/Patient/{id}/$assess", "the template, not the path");
    assert_eq!(line["status"], 501);
    assert!(line["latency_ms"].as_f64().is_some_and(|ms| ms >= 0.0), "{line}");
    assert_eq!(line["request_id"], "ops-trace-0042");
}

#[tokio::test]
async fn metrics_count_requests_assessments_and_name_the_rule_set() {
    let service = start("info");
    let client = reqwest::Client::new();
    // As of the example's clock: today the result would be too old to assess.
    let example = crate::helpers::example_at_now("ionized-low-seizure-toddler");
    for _ in 0..2 {
        let resp = client
            .post(format!("{}/fhir/$assess", service.base))
            .header("content-type", "application/fhir+json")
            .body(example.clone())
            .send()
            .await
            .expect("an answer");
        assert_eq!(resp.status(), 200);
    }
    let resp = client.get(format!("{}/metrics", service.base)).send().await.expect("metrics");
    assert_eq!(resp.status(), 200);
    assert!(
        resp.headers().get("content-type").and_then(|v| v.to_str().ok()).is_some_and(|c| c.starts_with("text/plain")),
        "Prometheus text format"
    );
    let text = resp.text().await.expect("a body");
    assert!(text.contains(r#"calcium_cds_http_requests_total{route="/fhir/$assess",status="200"} 2"#), "{text}");
    assert!(
        text.contains(
            r#"calcium_cds_http_request_duration_seconds_bucket{route="/fhir/$assess",status="200",le="+Inf"} 2"#
        ),
        "{text}"
    );
    let assessed: u64 = text
        .lines()
        .filter(|l| l.starts_with("calcium_cds_assessments_total{"))
        .filter_map(|l| l.rsplit(' ').next()?.parse::<u64>().ok())
        .sum();
    assert_eq!(assessed, 2, "{text}");
    // The example is a symptomatic child with a low ionized calcium: a high-severity DetectedIssue.
    assert!(text.contains(r#"severity="high"} 2"#), "{text}");
    assert!(text.contains("calcium_cds_build_info{version=\""), "{text}");
    assert!(text.contains("rules_sha256=\""), "{text}");
}
