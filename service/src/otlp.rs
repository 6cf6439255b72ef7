//! Optional trace export: OTLP over HTTP with the JSON encoding
//! (OpenTelemetry protocol specification, "OTLP/HTTP" and "JSON Protobuf
//! Encoding": POST to `<endpoint>/v1/traces`, `Content-Type:
//! application/json`, trace and span ids as lowercase hex, enums as numbers,
//! 64-bit integers as decimal strings).
//!
//! Written by hand, like the metrics: a few span kinds and attributes need no
//! telemetry framework, and the build stays lean. Spans are recorded only for
//! sampled traces (W3C flag); export never blocks a request: spans go to a
//! bounded queue and a background task sends them in batches. A full queue
//! drops the span and counts it; a failed export is counted and logged.
//!
//! No patient data: span names are route templates and upstream call names,
//! attributes come from fixed sets (method, route, status, call name, outcome).

use std::sync::Arc;
use std::sync::atomic::{AtomicU64, Ordering};
use std::time::{Duration, SystemTime, UNIX_EPOCH};

use serde_json::{Value, json};

/// What a span stands for (the OTLP `SpanKind` numbers).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SpanKind {
    /// An HTTP request this service answered.
    Server,
    /// A call this service made to another server.
    Client,
    /// Work on a queued notification event.
    Consumer,
}

impl SpanKind {
    fn code(self) -> u8 {
        match self {
            Self::Server => 2,
            Self::Client => 3,
            Self::Consumer => 5,
        }
    }
}

/// An attribute value.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum AttrValue {
    /// A string from a fixed set.
    Str(String),
    /// An integer.
    Int(i64),
}

/// One finished span.
#[derive(Debug, Clone)]
pub struct Span {
    /// Trace id, 32 lowercase hex digits.
    pub trace_id: String,
    /// Span id, 16 lowercase hex digits.
    pub span_id: String,
    /// The parent's span id, when the span has a parent.
    pub parent_span_id: Option<String>,
    /// Name (a route template or an upstream call name).
    pub name: String,
    /// Kind.
    pub kind: SpanKind,
    /// Start time.
    pub start: SystemTime,
    /// End time.
    pub end: SystemTime,
    /// Attributes (fixed keys).
    pub attributes: Vec<(&'static str, AttrValue)>,
    /// Whether the span ended in error (status code ERROR, else UNSET).
    pub error: bool,
}

impl Span {
    /// A span of `ctx`: its own id and its parent's as the context has them.
    pub fn of(ctx: &crate::trace::TraceContext, name: String, kind: SpanKind, start: SystemTime) -> Self {
        Self {
            trace_id: ctx.trace_id.clone(),
            span_id: ctx.span_id.clone(),
            parent_span_id: ctx.parent_id.clone(),
            name,
            kind,
            start,
            end: SystemTime::now(),
            attributes: Vec::new(),
            error: false,
        }
    }
}

/// Export settings.
#[derive(Debug, Clone)]
pub struct ExportSettings {
    /// The traces URL (the configured endpoint with `/v1/traces`).
    pub traces_url: String,
    /// Longest wait before a partly filled batch is sent.
    pub flush: Duration,
    /// Spans waiting at most; beyond it new spans are dropped.
    pub queue: usize,
    /// Spans per export request at most.
    pub batch: usize,
    /// Time an export request may take.
    pub timeout: Duration,
}

/// Counts of what the exporter did.
#[derive(Debug, Default)]
pub struct ExportStats {
    /// Spans sent and accepted.
    pub exported: AtomicU64,
    /// Spans dropped because the queue was full.
    pub dropped: AtomicU64,
    /// Export requests that failed (their spans are lost).
    pub failed_requests: AtomicU64,
}

/// The handle requests use to record spans; cheap to clone.
#[derive(Debug, Clone)]
pub struct Exporter {
    tx: tokio::sync::mpsc::Sender<Span>,
    stats: Arc<ExportStats>,
}

impl Exporter {
    /// Start the background sender (needs a Tokio runtime). `resource` are the
    /// resource attributes sent with every batch (service name and version).
    pub fn start(http: reqwest::Client, settings: ExportSettings, resource: Vec<(&'static str, String)>) -> Self {
        let (tx, rx) = tokio::sync::mpsc::channel(settings.queue.max(1));
        let stats = Arc::new(ExportStats::default());
        tokio::spawn(send_batches(rx, http, settings, resource, stats.clone()));
        Self { tx, stats }
    }

    /// Queue a finished span; never waits. A full queue drops it (counted).
    pub fn record(&self, span: Span) {
        if self.tx.try_send(span).is_err() {
            self.stats.dropped.fetch_add(1, Ordering::Relaxed);
        }
    }

    /// What the exporter has done so far.
    pub fn stats(&self) -> &ExportStats {
        &self.stats
    }
}

/// The traces URL for a configured endpoint: `/v1/traces` is appended to the
/// base URL, as the OpenTelemetry exporter configuration does for its base endpoint.
pub fn traces_url(endpoint: &str) -> Result<String, String> {
    let parsed = reqwest::Url::parse(endpoint).map_err(|e| format!("otlp-endpoint '{endpoint}' is not a URL: {e}"))?;
    if !matches!(parsed.scheme(), "http" | "https") {
        return Err(format!("otlp-endpoint must be http or https, not {}", parsed.scheme()));
    }
    // Spans name routes and calls, not patients, but they still should not cross a network in the clear.
    crate::upstream::https_or_loopback("otlp-endpoint", endpoint)?;
    Ok(format!("{}/v1/traces", endpoint.trim_end_matches('/')))
}

async fn send_batches(
    mut rx: tokio::sync::mpsc::Receiver<Span>,
    http: reqwest::Client,
    settings: ExportSettings,
    resource: Vec<(&'static str, String)>,
    stats: Arc<ExportStats>,
) {
    let mut batch = Vec::with_capacity(settings.batch.max(1));
    while let Some(first) = rx.recv().await {
        batch.push(first);
        let flush_at = tokio::time::Instant::now() + settings.flush;
        while batch.len() < settings.batch.max(1) {
            match tokio::time::timeout_at(flush_at, rx.recv()).await {
                Ok(Some(span)) => batch.push(span),
                Ok(None) | Err(_) => break,
            }
        }
        let body = encode(&batch, &resource).to_string();
        let sent = http
            .post(&settings.traces_url)
            .header(reqwest::header::CONTENT_TYPE, "application/json")
            .timeout(settings.timeout)
            .body(body)
            .send()
            .await;
        match sent {
            Ok(resp) if resp.status().is_success() => {
                stats.exported.fetch_add(batch.len() as u64, Ordering::Relaxed);
            }
            Ok(resp) => {
                stats.failed_requests.fetch_add(1, Ordering::Relaxed);
                tracing::warn!(status = resp.status().as_u16(), spans = batch.len(), "trace export refused");
            }
            Err(e) => {
                stats.failed_requests.fetch_add(1, Ordering::Relaxed);
                tracing::warn!(timed_out = e.is_timeout(), spans = batch.len(), "trace export failed");
            }
        }
        batch.clear();
    }
}

fn unix_nanos(t: SystemTime) -> String {
    t.duration_since(UNIX_EPOCH).map_or(0, |d| d.as_nanos()).to_string()
}

fn attribute(key: &str, value: &AttrValue) -> Value {
    match value {
        AttrValue::Str(s) => json!({"key": key, "value": {"stringValue": s}}),
        AttrValue::Int(i) => json!({"key": key, "value": {"intValue": i.to_string()}}),
    }
}

/// An `ExportTraceServiceRequest` in the OTLP JSON encoding.
pub fn encode(spans: &[Span], resource: &[(&'static str, String)]) -> Value {
    let spans: Vec<Value> = spans
        .iter()
        .map(|s| {
            let mut span = json!({
                "traceId": s.trace_id,
                "spanId": s.span_id,
                "name": s.name,
                "kind": s.kind.code(),
                "startTimeUnixNano": unix_nanos(s.start),
                "endTimeUnixNano": unix_nanos(s.end),
                "attributes": s.attributes.iter().map(|(k, v)| attribute(k, v)).collect::<Vec<_>>(),
                // STATUS_CODE_ERROR is 2, STATUS_CODE_UNSET 0.
                "status": {"code": if s.error { 2 } else { 0 }},
            });
            if let Some(parent) = &s.parent_span_id {
                span["parentSpanId"] = Value::String(parent.clone());
            }
            span
        })
        .collect();
    let resource: Vec<Value> = resource.iter().map(|(k, v)| attribute(k, &AttrValue::Str(v.clone()))).collect();
    json!({
        "resourceSpans": [{
            "resource": {"attributes": resource},
            "scopeSpans": [{
                "scope": {"name": "calcium-cds", "version": crate::engine::VERSION},
                "spans": spans,
            }],
        }],
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spans_encode_as_otlp_json() {
        let ctx = crate::trace::TraceContext::parse("00-4bf92f3577b34da6a3ce929d0e0e4736-00f067aa0ba902b7-01")
            .expect("valid traceparent");
        let start = UNIX_EPOCH + Duration::from_nanos(1_544_712_660_000_000_000);
        let mut span = Span::of(&ctx, "POST /fhir/$assess".into(), SpanKind::Server, start);
        span.end = start + Duration::from_millis(3);
        span.attributes.push(("http.response.status_code", AttrValue::Int(200)));
        let v = encode(&[span], &[("service.name", "calcium-cds".into())]);
        let s = &v["resourceSpans"][0]["scopeSpans"][0]["spans"][0];
        assert_eq!(s["traceId"], "4bf92f3577b34da6a3ce929d0e0e4736");
        assert_eq!(s["parentSpanId"], "00f067aa0ba902b7");
        assert_eq!(s["kind"], 2);
        assert_eq!(s["startTimeUnixNano"], "1544712660000000000");
        assert_eq!(s["endTimeUnixNano"], "1544712660003000000");
        assert_eq!(s["attributes"][0]["value"]["intValue"], "200");
        assert_eq!(v["resourceSpans"][0]["resource"]["attributes"][0]["value"]["stringValue"], "calcium-cds");
        let root = Span::of(&crate::trace::TraceContext::start(true), "x".into(), SpanKind::Consumer, start);
        let v = encode(&[root], &[]);
        assert!(v["resourceSpans"][0]["scopeSpans"][0]["spans"][0].get("parentSpanId").is_none());
    }

    #[test]
    fn the_traces_path_is_appended_to_the_endpoint() {
        assert_eq!(traces_url("https://collector:4318").as_deref(), Ok("https://collector:4318/v1/traces"));
        assert_eq!(traces_url("https://collector:4318/").as_deref(), Ok("https://collector:4318/v1/traces"));
        assert_eq!(traces_url("http://127.0.0.1:4318").as_deref(), Ok("http://127.0.0.1:4318/v1/traces"));
        assert!(traces_url("http://collector:4318").is_err(), "plain http only to a loopback host");
        assert!(traces_url("collector:4318").is_err(), "a host without a scheme");
        assert!(traces_url("ftp://collector").is_err());
        assert!(traces_url("not a url").is_err());
    }
}
