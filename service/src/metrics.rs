//! Prometheus metrics in the text exposition format (version 0.0.4), kept by
//! hand: a few counters and histograms need no metrics framework.
//!
//! Labels come from fixed sets only (route templates, status codes, guidance
//! status, severity, upstream search names), never from request content: no
//! patient data, no resource ids, bounded cardinality.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::sync::Mutex;
use std::time::Duration;

/// Histogram bucket upper bounds, seconds (operational: from 1 ms to 10 s).
pub const BUCKETS: [f64; 13] = [0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0];

type Labels = Vec<(&'static str, String)>;

#[derive(Default, Clone)]
struct Histogram {
    counts: [u64; BUCKETS.len()],
    count: u64,
    sum: f64,
}

impl Histogram {
    fn observe(&mut self, seconds: f64) {
        for (k, bound) in BUCKETS.iter().enumerate() {
            if seconds <= *bound {
                self.counts[k] += 1;
            }
        }
        self.count += 1;
        self.sum += seconds;
    }
}

#[derive(Default)]
struct Inner {
    requests: BTreeMap<Labels, Histogram>,
    assessments: BTreeMap<Labels, u64>,
    upstream: BTreeMap<Labels, Histogram>,
    upstream_errors: BTreeMap<Labels, u64>,
    upstream_refused: BTreeMap<Labels, u64>,
}

/// The service's metrics.
#[derive(Default)]
pub struct Metrics {
    inner: Mutex<Inner>,
}

impl std::fmt::Debug for Metrics {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Metrics")
    }
}

/// The upstream call name used as a label: a read of an event's focus names a
/// resource, so it is reported as "focus read".
pub fn upstream_label(what: &str) -> String {
    if what.starts_with("read of ") { "focus read".to_owned() } else { what.to_owned() }
}

fn escape(v: &str) -> String {
    v.replace('\\', "\\\\").replace('"', "\\\"").replace('\n', "\\n")
}

fn label_text(labels: &Labels, extra: Option<(&str, String)>) -> String {
    let mut parts: Vec<String> = labels.iter().map(|(k, v)| format!("{k}=\"{}\"", escape(v))).collect();
    if let Some((k, v)) = extra {
        parts.push(format!("{k}=\"{v}\""));
    }
    if parts.is_empty() { String::new() } else { format!("{{{}}}", parts.join(",")) }
}

fn render_histogram(out: &mut String, name: &str, help: &str, series: &BTreeMap<Labels, Histogram>) {
    let _ = writeln!(out, "# HELP {name} {help}\n# TYPE {name} histogram");
    for (labels, h) in series {
        for (k, bound) in BUCKETS.iter().enumerate() {
            let _ =
                writeln!(out, "{name}_bucket{} {}", label_text(labels, Some(("le", format!("{bound}")))), h.counts[k]);
        }
        let _ = writeln!(out, "{name}_bucket{} {}", label_text(labels, Some(("le", "+Inf".into()))), h.count);
        let _ = writeln!(out, "{name}_sum{} {}", label_text(labels, None), h.sum);
        let _ = writeln!(out, "{name}_count{} {}", label_text(labels, None), h.count);
    }
}

fn render_counter(out: &mut String, name: &str, help: &str, series: &BTreeMap<Labels, u64>) {
    let _ = writeln!(out, "# HELP {name} {help}\n# TYPE {name} counter");
    for (labels, n) in series {
        let _ = writeln!(out, "{name}{} {n}", label_text(labels, None));
    }
}

/// What `render` adds besides the recorded series.
#[derive(Debug, Clone)]
pub struct Snapshot<'a> {
    /// Service version.
    pub version: &'a str,
    /// Rule set name, version and sha256.
    pub rules: (&'a str, &'a str, &'a str),
    /// Notification jobs waiting, when a queue exists.
    pub queue_depth: Option<usize>,
    /// Trace export counts, when spans are exported.
    pub spans: Option<&'a crate::otlp::ExportStats>,
}

impl Metrics {
    /// One HTTP request.
    pub fn request(&self, route: &str, status: u16, latency: Duration) {
        if let Ok(mut g) = self.inner.lock() {
            let labels = vec![("route", route.to_owned()), ("status", status.to_string())];
            g.requests.entry(labels).or_default().observe(latency.as_secs_f64());
        }
    }

    /// One assessment: its GuidanceResponse status and hypocalcemia severity.
    pub fn assessment(&self, outcome: &str, severity: &str) {
        if let Ok(mut g) = self.inner.lock() {
            *g.assessments
                .entry(vec![("outcome", outcome.to_owned()), ("severity", severity.to_owned())])
                .or_default() += 1;
        }
    }

    /// One upstream call (with its retries), and whether it failed.
    pub fn upstream_call(&self, what: &str, latency: Duration, failed: bool) {
        if let Ok(mut g) = self.inner.lock() {
            let labels = vec![("search", upstream_label(what))];
            g.upstream.entry(labels.clone()).or_default().observe(latency.as_secs_f64());
            if failed {
                *g.upstream_errors.entry(labels).or_default() += 1;
            }
        }
    }

    /// One URL refused because it points outside the configured FHIR server.
    /// `kind` comes from a fixed set (`notification_focus`, `next_link`,
    /// `full_url`), never from request content.
    pub fn upstream_refused(&self, kind: &'static str) {
        if let Ok(mut g) = self.inner.lock() {
            *g.upstream_refused.entry(vec![("kind", kind.to_owned())]).or_default() += 1;
        }
    }

    /// The exposition text.
    pub fn render(&self, snap: &Snapshot<'_>) -> String {
        let mut out = String::new();
        let _ = writeln!(
            out,
            "# HELP calcium_cds_build_info Service version and rule set.\n# TYPE calcium_cds_build_info gauge\n\
             calcium_cds_build_info{{version=\"{}\",rules_name=\"{}\",rules_version=\"{}\",rules_sha256=\"{}\"}} 1",
            escape(snap.version),
            escape(snap.rules.0),
            escape(snap.rules.1),
            escape(snap.rules.2)
        );
        if let Some(depth) = snap.queue_depth {
            let _ = writeln!(
                out,
                "# HELP calcium_cds_queue_depth Notification jobs waiting.\n# TYPE calcium_cds_queue_depth gauge\ncalcium_cds_queue_depth {depth}"
            );
        }
        if let Some(stats) = snap.spans {
            use std::sync::atomic::Ordering::Relaxed;
            for (name, help, value) in [
                ("calcium_cds_spans_exported_total", "Spans sent to the OTLP collector and accepted.", &stats.exported),
                ("calcium_cds_spans_dropped_total", "Spans dropped because the export queue was full.", &stats.dropped),
                ("calcium_cds_span_export_failures_total", "OTLP export requests that failed.", &stats.failed_requests),
            ] {
                let _ = writeln!(out, "# HELP {name} {help}\n# TYPE {name} counter\n{name} {}", value.load(Relaxed));
            }
        }
        let _ = writeln!(
            out,
            "# HELP calcium_cds_log_lines_dropped_total Log lines dropped because the log queue was full or the write failed.\n\
             # TYPE calcium_cds_log_lines_dropped_total counter\ncalcium_cds_log_lines_dropped_total {}",
            crate::telemetry::dropped_lines()
        );
        let Ok(g) = self.inner.lock() else { return out };
        render_histogram(
            &mut out,
            "calcium_cds_http_request_duration_seconds",
            "HTTP requests by route template and status.",
            &g.requests,
        );
        let totals: BTreeMap<Labels, u64> = g.requests.iter().map(|(l, h)| (l.clone(), h.count)).collect();
        render_counter(
            &mut out,
            "calcium_cds_http_requests_total",
            "HTTP requests by route template and status.",
            &totals,
        );
        render_counter(
            &mut out,
            "calcium_cds_assessments_total",
            "Assessments by GuidanceResponse status and hypocalcemia severity.",
            &g.assessments,
        );
        render_histogram(
            &mut out,
            "calcium_cds_upstream_call_duration_seconds",
            "Upstream FHIR calls (with retries) by search.",
            &g.upstream,
        );
        render_counter(
            &mut out,
            "calcium_cds_upstream_errors_total",
            "Failed upstream FHIR calls by search.",
            &g.upstream_errors,
        );
        render_counter(
            &mut out,
            "calcium_cds_upstream_refused_total",
            "References and links refused (never fetched) because they point outside the configured FHIR server.",
            &g.upstream_refused,
        );
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn histograms_are_cumulative_and_counts_add_up() {
        let m = Metrics::default();
        m.request("/fhir/$assess", 200, Duration::from_millis(3));
        m.request("/fhir/$assess", 200, Duration::from_millis(30));
        let text =
            m.render(&Snapshot { version: "0.1.0", rules: ("r", "1", "abc"), queue_depth: Some(2), spans: None });
        assert!(text.contains("calcium_cds_http_request_duration_seconds_bucket{route=\"/fhir/$assess\",status=\"200\",le=\"0.005\"} 1"), "{text}");
        assert!(
            text.contains(
                "calcium_cds_http_request_duration_seconds_bucket{route=\"/fhir/$assess\",status=\"200\",le=\"0.05\"} 2"
            ),
            "{text}"
        );
        assert!(text.contains("calcium_cds_http_requests_total{route=\"/fhir/$assess\",status=\"200\"} 2"), "{text}");
        assert!(text.contains("calcium_cds_queue_depth 2"), "{text}");
    }

    #[test]
    fn a_focus_read_is_not_labelled_with_its_reference() {
        assert_eq!(upstream_label("read of Observation/ica-1"), "focus read");
        assert_eq!(upstream_label("Observation search"), "Observation search");
    }
}
