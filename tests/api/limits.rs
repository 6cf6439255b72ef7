//! Limits: the in-flight cap answers 503 with Retry-After instead of queueing,
//! the request timeout answers 503, and the probes stay outside both.
//! A wiremock EHR that answers slowly holds requests in flight.

use std::time::Duration;

use calcium_cds::config::{LimitArgs, UpstreamArgs};
use wiremock::matchers::any;
use wiremock::{Mock, MockServer, ResponseTemplate};

use crate::helpers::{FHIR_JSON, assert_r4_valid, spawn_app_with};

async fn slow_ehr(delay: Duration) -> MockServer {
    let server = MockServer::start().await;
    Mock::given(any())
        .respond_with(
            ResponseTemplate::new(200)
                .set_delay(delay)
                .set_body_raw(r#"{"resourceType":"Bundle","type":"searchset"}"#, FHIR_JSON),
        )
        .mount(&server)
        .await;
    server
}

#[tokio::test]
async fn a_saturated_service_answers_503_with_retry_after_and_the_probes_still_answer() {
    // Arrange: one request in flight at most; the EHR takes 1.5 s.
    let server = slow_ehr(Duration::from_millis(1500)).await;
    let app = spawn_app_with(
        UpstreamArgs { fhir_base_url: Some(server.uri()), ..UpstreamArgs::default() },
        LimitArgs { max_in_flight: 1, ..LimitArgs::default() },
    )
    .await;
    let busy_client = app.client.clone();
    let busy_url = format!("{}/fhir/Patient/lch-busy-1/$assess", app.address);
    let busy = tokio::spawn(async move { busy_client.post(busy_url).send().await.map(|r| r.status().as_u16()) });
    tokio::time::sleep(Duration::from_millis(400)).await;

    // Act
    let refused = app.post_assess(r#"{"resourceType":"Bundle","type":"collection"}"#, FHIR_JSON).await;
    let live = app.client.get(format!("{}/livez", app.address)).send().await.expect("livez");

    // Assert
    assert_eq!(refused.status().as_u16(), 503);
    assert_eq!(refused.headers().get("retry-after").and_then(|v| v.to_str().ok()), Some("1"));
    let oo: serde_json::Value = refused.json().await.expect("an OperationOutcome");
    assert_r4_valid(&oo);
    assert_eq!(oo["issue"][0]["code"], "throttled", "{oo}");
    assert_eq!(live.status().as_u16(), 200, "the probes are outside the limit");
    let first = busy.await.expect("the task").expect("an answer");
    assert_ne!(first, 503, "the request in flight was served");
}

#[tokio::test]
async fn a_request_over_the_request_timeout_is_stopped_with_503() {
    // Arrange: the EHR takes 2 s; requests may take 300 ms.
    let server = slow_ehr(Duration::from_secs(2)).await;
    let app = spawn_app_with(
        UpstreamArgs { fhir_base_url: Some(server.uri()), ..UpstreamArgs::default() },
        LimitArgs { request_timeout_ms: 300, ..LimitArgs::default() },
    )
    .await;

    // Act
    let response =
        app.client.post(format!("{}/fhir/Patient/lch-slow-2/$assess", app.address)).send().await.expect("an answer");

    // Assert
    assert_eq!(response.status().as_u16(), 503);
    let oo: serde_json::Value = response.json().await.expect("an OperationOutcome");
    assert_r4_valid(&oo);
    assert_eq!(oo["issue"][0]["code"], "timeout", "{oo}");
    assert!(oo["issue"][0]["diagnostics"].as_str().is_some_and(|d| d.contains("300 ms")), "{oo}");
}

#[tokio::test]
async fn a_body_that_stops_arriving_is_a_408_after_the_request_timeout() {
    use tokio::io::{AsyncReadExt, AsyncWriteExt};
    // Arrange
    let app =
        spawn_app_with(UpstreamArgs::default(), LimitArgs { request_timeout_ms: 300, ..LimitArgs::default() }).await;
    let addr = app.address.trim_start_matches("http://").to_owned();
    let mut stream = tokio::net::TcpStream::connect(&addr).await.expect("a connection");

    // Act: announce 100 bytes, send 12, then stall.
    stream
        .write_all(b"POST /fhir/$assess HTTP/1.1\r\nHost: x\r\nContent-Type: application/fhir+json\r\nContent-Length: 100\r\n\r\n{\"resourceTy")
        .await
        .expect("written");
    let mut answer = Vec::new();
    let read = tokio::time::timeout(Duration::from_secs(10), async {
        let mut buf = [0u8; 4096];
        loop {
            let n = stream.read(&mut buf).await.unwrap_or(0);
            if n == 0 {
                break;
            }
            answer.extend_from_slice(&buf[..n]);
            if answer.windows(4).any(|w| w == b"\r\n\r\n") && answer.ends_with(b"}") {
                break;
            }
        }
    })
    .await;

    // Assert
    assert!(read.is_ok(), "an answer came");
    let text = String::from_utf8_lossy(&answer);
    assert!(text.starts_with("HTTP/1.1 408"), "{text}");
    assert!(text.contains("\"timeout\""), "{text}");
}
