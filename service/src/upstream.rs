//! The upstream FHIR client: gathers a patient's context from the EHR's FHIR
//! server for `POST /fhir/Patient/{id}/$assess`.
//!
//! The searches run in parallel, each with a per-call timeout, bounded
//! retries with jittered backoff on 429/502/503/504 and connection errors
//! (honouring Retry-After), never past the overall deadline, and paging by
//! `Bundle.link[relation=next]` up to a page limit. The Patient read and the
//! calcium search are essential: if either fails the request fails with the
//! upstream call named. Other searches may fail: the assessment goes on
//! without them and says which failed. The HTTP client is injected
//! (`FhirClient::new` takes a `reqwest::Client`), so tests point it at a mock
//! server.

use std::time::{Duration, Instant};

use serde_json::{Value, json};

/// Settings of the upstream client.
#[derive(Clone)]
pub struct UpstreamSettings {
    /// Base URL of the FHIR server (ends without a slash).
    pub base_url: String,
    /// How the client authorizes itself (tokens are never logged).
    pub auth: Auth,
    /// Per-call timeout.
    pub call_timeout: Duration,
    /// Overall deadline for a gather.
    pub deadline: Duration,
    /// Retries after the first try.
    pub max_retries: u32,
    /// Pages followed per search.
    pub page_limit: u32,
    /// `_count` per page.
    pub page_size: u32,
}

impl std::fmt::Debug for UpstreamSettings {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("UpstreamSettings")
            .field("base_url", &self.base_url)
            .field("auth", &self.auth)
            .field("call_timeout", &self.call_timeout)
            .field("deadline", &self.deadline)
            .field("max_retries", &self.max_retries)
            .field("page_limit", &self.page_limit)
            .field("page_size", &self.page_size)
            .finish()
    }
}

/// How the client authorizes itself to the FHIR server.
#[derive(Clone, Default)]
pub enum Auth {
    /// No Authorization header.
    #[default]
    None,
    /// A static bearer token.
    Static(String),
    /// SMART Backend Services (client_credentials with a signed JWT assertion).
    Smart(std::sync::Arc<crate::smart::TokenSource>),
}

impl std::fmt::Debug for Auth {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Self::None => f.write_str("None"),
            Self::Static(_) => f.write_str("Static(***)"),
            Self::Smart(s) => f.debug_tuple("Smart").field(s).finish(),
        }
    }
}

/// One search that failed, and how.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FailedCall {
    /// Which search (e.g. "MedicationRequest search").
    pub what: String,
    /// How it failed (status, timeout, malformed body).
    pub how: String,
    /// Timed out (504) rather than failed (502).
    pub timed_out: bool,
}

/// What a gather produced.
#[derive(Debug, Clone)]
pub struct Gathered {
    /// A collection Bundle of the Patient and every resource found.
    pub bundle: Value,
    /// Non-essential searches that failed.
    pub failed: Vec<FailedCall>,
}

/// What one search produced.
#[derive(Debug, Default)]
struct Searched {
    /// Matching entries.
    found: Vec<Value>,
    /// What was refused (a next link or fullUrls on another server).
    refused: Vec<FailedCall>,
}

/// Resolve a FHIR reference or URL against the configured `base`; the URL to
/// fetch, or why it is refused. A relative reference is joined to the base;
/// an absolute one must be under the base: same scheme, host (compared after
/// the URL parser's normalisation: lower case, IDNA), port (explicit or the
/// scheme's default), no user or password, and a path equal to the base path
/// or below it after dot segments are removed. Encoded dots, slashes and
/// backslashes in the path are refused outright (a server may decode them
/// after this check). The query is not inspected: it cannot change where the
/// request goes.
pub fn resolve(base: &str, reference: &str) -> Result<String, String> {
    let base = base.trim_end_matches('/');
    let base_url = reqwest::Url::parse(base).map_err(|_| "cannot be checked: the configured base is not a URL")?;
    let path_part = reference.split(['?', '#']).next().unwrap_or("");
    let lower = path_part.to_ascii_lowercase();
    if path_part.contains('\\')
        || ["%2e", "%2f", "%5c", "%00"].iter().any(|x| lower.contains(x))
        || reference.chars().any(|c| c.is_control() || c.is_whitespace())
    {
        return Err("carries an encoded dot, slash, backslash or a control character in its path".into());
    }
    let text = if reference.contains("://") || reference.starts_with("//") {
        reference.to_owned()
    } else {
        format!("{base}/{}", reference.trim_start_matches('/'))
    };
    let url = reqwest::Url::parse(&text).map_err(|_| "is not a valid URL".to_owned())?;
    let base_path = base_url.path().trim_end_matches('/');
    let same = url.scheme() == base_url.scheme()
        && url.host_str() == base_url.host_str()
        && url.port_or_known_default() == base_url.port_or_known_default()
        && url.username().is_empty()
        && url.password().is_none()
        && (url.path() == base_path || url.path().starts_with(&format!("{base_path}/")));
    if same { Ok(url.to_string()) } else { Err("points outside the configured FHIR server".into()) }
}

/// Refuse a URL that would carry a credential or telemetry in the clear: it
/// must be https, or http to a loopback host (`localhost`, 127.0.0.0/8, ::1).
/// `setting` names the setting in the message.
pub fn https_or_loopback(setting: &str, url: &str) -> Result<(), String> {
    let parsed = reqwest::Url::parse(url).map_err(|e| format!("{setting} '{url}' is not a URL: {e}"))?;
    let host = parsed.host_str().unwrap_or("").trim_start_matches('[').trim_end_matches(']');
    let loopback =
        host.eq_ignore_ascii_case("localhost") || host.parse::<std::net::IpAddr>().is_ok_and(|ip| ip.is_loopback());
    match parsed.scheme() {
        "https" => Ok(()),
        "http" if loopback => Ok(()),
        "http" => Err(format!(
            "{setting} must be https (plain http is accepted only for a loopback host such as 127.0.0.1 or localhost): {url}"
        )),
        other => Err(format!("{setting} must be https, not {other}")),
    }
}

/// The client.
#[derive(Debug, Clone)]
pub struct FhirClient {
    http: reqwest::Client,
    settings: UpstreamSettings,
    metrics: Option<std::sync::Arc<crate::metrics::Metrics>>,
    spans: Option<crate::otlp::Exporter>,
}

fn jitter(attempt: u32) -> Duration {
    // Exponential backoff from 100 ms with a jitter of up to 50% taken from the clock.
    let base = 100u64.saturating_mul(1 << attempt.min(6));
    let nanos =
        u64::from(std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map_or(0, |d| d.subsec_nanos()));
    Duration::from_millis(base + nanos % (base / 2 + 1))
}

fn retry_after(resp: &reqwest::Response) -> Option<Duration> {
    let v = resp.headers().get(reqwest::header::RETRY_AFTER)?.to_str().ok()?;
    v.trim().parse::<u64>().ok().map(Duration::from_secs)
}

impl FhirClient {
    /// A client over an injected `reqwest::Client`.
    pub fn new(http: reqwest::Client, settings: UpstreamSettings) -> Self {
        Self { http, settings, metrics: None, spans: None }
    }

    /// Record every call's latency and failure in `metrics`.
    #[must_use]
    pub fn with_metrics(mut self, metrics: std::sync::Arc<crate::metrics::Metrics>) -> Self {
        self.metrics = Some(metrics);
        self
    }

    /// Record a client span for every HTTP attempt of a sampled trace.
    #[must_use]
    pub fn with_spans(mut self, exporter: Option<crate::otlp::Exporter>) -> Self {
        self.spans = exporter;
        self
    }

    /// The bearer token to send, if any.
    async fn token(&self, deadline: Instant) -> Result<Option<String>, crate::smart::TokenError> {
        match &self.settings.auth {
            Auth::None => Ok(None),
            Auth::Static(t) => Ok(Some(t.clone())),
            Auth::Smart(source) => source.token(&self.http, self.settings.call_timeout, deadline).await.map(Some),
        }
    }

    /// Send one attempt with the trace context and the bearer token; the
    /// attempt is its own client span (its id is the parent id sent upstream),
    /// recorded when the trace is sampled and spans are exported. `what` names
    /// the call (never a URL: URLs carry patient ids).
    async fn send(
        &self,
        req: reqwest::RequestBuilder,
        token: Option<&String>,
        method: &'static str,
        what: &str,
    ) -> reqwest::Result<reqwest::Response> {
        use crate::otlp::AttrValue;
        let ctx = crate::trace::current();
        let span_id = crate::trace::new_span_id();
        let req = match &ctx {
            Some(t) => req.header("traceparent", t.header_for(&span_id)),
            None => req,
        };
        let req = match token {
            Some(t) => req.bearer_auth(t),
            None => req,
        };
        let start = std::time::SystemTime::now();
        let result = req.send().await;
        if let (Some(exporter), Some(t)) = (&self.spans, ctx.filter(crate::trace::TraceContext::sampled)) {
            let call = crate::metrics::upstream_label(what);
            let mut span = crate::otlp::Span::of(&t, format!("{method} {call}"), crate::otlp::SpanKind::Client, start);
            span.parent_span_id = Some(t.span_id.clone());
            span.span_id = span_id;
            span.attributes.push(("http.request.method", AttrValue::Str(method.to_owned())));
            span.attributes.push(("calcium_cds.call", AttrValue::Str(call)));
            match &result {
                Ok(resp) => {
                    span.attributes
                        .push(("http.response.status_code", AttrValue::Int(i64::from(resp.status().as_u16()))));
                    span.error = !resp.status().is_success();
                }
                Err(e) => {
                    let kind = if e.is_timeout() {
                        "timeout"
                    } else if e.is_connect() {
                        "connect"
                    } else {
                        "transport"
                    };
                    span.attributes.push(("error.type", AttrValue::Str(kind.to_owned())));
                    span.error = true;
                }
            }
            exporter.record(span);
        }
        result
    }

    /// After a 401: forget a SMART token so that the next try fetches a new one.
    /// True when a retry with a new token makes sense (SMART only).
    async fn forget_refused_token(&self, token: Option<&String>) -> bool {
        match (&self.settings.auth, token) {
            (Auth::Smart(source), Some(used)) => {
                source.invalidate(used).await;
                true
            }
            _ => false,
        }
    }

    /// GET one URL as FHIR JSON, with retries, within the deadline; recorded in the metrics.
    async fn get(&self, url: &str, what: &str, deadline: Instant) -> Result<Value, FailedCall> {
        let start = Instant::now();
        let result = self.get_with_retries(url, what, deadline).await;
        if let Some(m) = &self.metrics {
            m.upstream_call(what, start.elapsed(), result.is_err());
        }
        result
    }

    async fn get_with_retries(&self, url: &str, what: &str, deadline: Instant) -> Result<Value, FailedCall> {
        let fail = |how: String, timed_out: bool| FailedCall { what: what.to_owned(), how, timed_out };
        let mut attempt = 0;
        let mut refreshed = false;
        loop {
            let left = deadline.saturating_duration_since(Instant::now());
            if left.is_zero() {
                return Err(fail("the overall deadline passed".into(), true));
            }
            let token = self.token(deadline).await.map_err(|e| fail(e.how, e.timed_out))?;
            let left = deadline.saturating_duration_since(Instant::now());
            let timeout = self.settings.call_timeout.min(left);
            let req = self.http.get(url).header(reqwest::header::ACCEPT, "application/fhir+json").timeout(timeout);
            let outcome = self.send(req, token.as_ref(), "GET", what).await;
            let (retryable, wait, err) = match outcome {
                Ok(resp) if resp.status() == reqwest::StatusCode::UNAUTHORIZED && !refreshed => {
                    // A SMART token may expire or be revoked mid-flight: fetch a new one, once.
                    if self.forget_refused_token(token.as_ref()).await {
                        refreshed = true;
                        continue;
                    }
                    (false, None, fail("HTTP 401".into(), false))
                }
                Ok(resp) if resp.status() == reqwest::StatusCode::UNAUTHORIZED => {
                    (false, None, fail("HTTP 401 (also after a token refresh)".into(), false))
                }
                Ok(resp) if resp.status().is_success() => {
                    let body = resp.bytes().await.map_err(|e| fail(format!("body not read: {e}"), e.is_timeout()))?;
                    return serde_json::from_slice::<Value>(&body)
                        .map_err(|e| fail(format!("body is not JSON: {e}"), false));
                }
                Ok(resp) => {
                    let status = resp.status().as_u16();
                    let retryable = matches!(status, 429 | 502 | 503 | 504);
                    (retryable, retry_after(&resp), fail(format!("HTTP {status}"), false))
                }
                Err(e) if e.is_timeout() => {
                    (true, None, fail(format!("no answer within {} ms", self.settings.call_timeout.as_millis()), true))
                }
                Err(e) => (e.is_connect(), None, fail(format!("connection failed: {e}"), false)),
            };
            if !retryable || attempt >= self.settings.max_retries {
                return Err(err);
            }
            let wait = wait.unwrap_or_else(|| jitter(attempt));
            if Instant::now() + wait >= deadline {
                return Err(FailedCall {
                    how: format!("{} (a retry would pass the deadline)", err.how),
                    timed_out: true,
                    ..err
                });
            }
            tokio::time::sleep(wait).await;
            attempt += 1;
        }
    }

    /// Count a refused URL in the metrics (bounded label set: `kind` is one of
    /// a fixed few, never the URL).
    fn refused(&self, kind: &'static str) {
        if let Some(m) = &self.metrics {
            m.upstream_refused(kind);
        }
    }

    /// The configured FHIR base (without a trailing slash).
    pub fn base_url(&self) -> &str {
        self.settings.base_url.trim_end_matches('/')
    }

    /// Resolve `reference` against the configured base (see [`resolve`]);
    /// a refusal is counted in the metrics under `kind`.
    pub fn resolve(&self, reference: &str, kind: &'static str) -> Result<String, String> {
        resolve(self.base_url(), reference).inspect_err(|_| self.refused(kind))
    }

    /// A search, following next links up to the page limit; the resources
    /// found, and what was refused on the way (a next link or fullUrls on
    /// another server: reported as missing data, never fetched).
    async fn search(&self, url: String, what: &str, deadline: Instant) -> Result<Searched, FailedCall> {
        let mut out = Searched::default();
        let mut next = Some(url);
        let mut pages = 0;
        let mut foreign = 0usize;
        while let Some(url) = next.take() {
            let page = self.get(&url, what, deadline).await?;
            if page.get("resourceType").and_then(Value::as_str) != Some("Bundle") {
                return Err(FailedCall {
                    what: what.to_owned(),
                    how: "the answer is not a Bundle".into(),
                    timed_out: false,
                });
            }
            for e in page.get("entry").and_then(Value::as_array).into_iter().flatten() {
                let is_match = e.get("search").and_then(|s| s.get("mode")).and_then(Value::as_str) != Some("outcome");
                if !is_match || e.get("resource").is_none() {
                    continue;
                }
                // A result whose fullUrl names another server is not this server's data.
                let full_url = e.get("fullUrl").and_then(Value::as_str).unwrap_or("");
                if full_url.contains("://") && self.resolve(full_url, "full_url").is_err() {
                    foreign += 1;
                    continue;
                }
                out.found.push(e.clone());
            }
            pages += 1;
            if pages < self.settings.page_limit {
                let link = page
                    .get("link")
                    .and_then(Value::as_array)
                    .into_iter()
                    .flatten()
                    .find(|l| l.get("relation").and_then(Value::as_str) == Some("next"))
                    .and_then(|l| l.get("url").and_then(Value::as_str));
                if let Some(link) = link {
                    // Never follow (or send the token to) a link outside the configured server.
                    match self.resolve(link, "next_link") {
                        Ok(u) => next = Some(u),
                        Err(why) => out.refused.push(FailedCall {
                            what: what.to_owned(),
                            how: format!(
                                "paging stopped after page {pages}: the next link {why}; it was not followed, \
                                 later pages are missing"
                            ),
                            timed_out: false,
                        }),
                    }
                }
            }
        }
        if foreign > 0 {
            out.refused.push(FailedCall {
                what: what.to_owned(),
                how: format!("{foreign} result(s) had a fullUrl outside the configured FHIR server and were set aside"),
                timed_out: false,
            });
        }
        Ok(out)
    }

    /// Read one resource by reference (relative to the base, or an absolute
    /// URL under the base); a reference to any other server is refused,
    /// counted under `kind`, and never fetched.
    pub async fn read(&self, reference: &str, kind: &'static str) -> Result<Value, FailedCall> {
        let url = self.resolve(reference, kind).map_err(|why| FailedCall {
            what: "read".into(),
            how: format!("the reference {why}; it was not fetched"),
            timed_out: false,
        })?;
        self.get(&url, &format!("read of {reference}"), Instant::now() + self.settings.deadline).await
    }

    /// POST a transaction Bundle. Safe to retry: every entry is a conditional
    /// create (ifNoneExist), so a retry creates nothing twice.
    pub async fn post_transaction(&self, bundle: &Value) -> Result<Value, FailedCall> {
        let deadline = Instant::now() + self.settings.deadline;
        let fail = |how: String, timed_out: bool| FailedCall { what: "write-back transaction".into(), how, timed_out };
        let mut attempt = 0;
        let mut refreshed = false;
        loop {
            let token = self.token(deadline).await.map_err(|e| fail(e.how, e.timed_out))?;
            let left = deadline.saturating_duration_since(Instant::now());
            let timeout = self.settings.call_timeout.min(left);
            let req = self
                .http
                .post(self.settings.base_url.trim_end_matches('/'))
                .header(reqwest::header::CONTENT_TYPE, "application/fhir+json")
                .header(reqwest::header::ACCEPT, "application/fhir+json")
                .timeout(timeout)
                .body(bundle.to_string());
            let (retryable, err) = match self.send(req, token.as_ref(), "POST", "write-back transaction").await {
                Ok(resp) if resp.status() == reqwest::StatusCode::UNAUTHORIZED && !refreshed => {
                    // Safe to resend: every entry is a conditional create.
                    if self.forget_refused_token(token.as_ref()).await {
                        refreshed = true;
                        continue;
                    }
                    (false, fail("HTTP 401".into(), false))
                }
                Ok(resp) if resp.status().is_success() => {
                    let body = resp.bytes().await.map_err(|e| fail(format!("body not read: {e}"), false))?;
                    return Ok(serde_json::from_slice(&body).unwrap_or(Value::Null));
                }
                Ok(resp) => {
                    let s = resp.status().as_u16();
                    (matches!(s, 429 | 502 | 503 | 504), fail(format!("HTTP {s}"), false))
                }
                Err(e) => (e.is_timeout() || e.is_connect(), fail(format!("{e}"), e.is_timeout())),
            };
            if !retryable || attempt >= self.settings.max_retries || Instant::now() + jitter(attempt) >= deadline {
                return Err(err);
            }
            tokio::time::sleep(jitter(attempt)).await;
            attempt += 1;
        }
    }

    /// Gather the patient's context. `observation_codes` are `system|code`
    /// tokens; `since` is the earliest date searched (YYYY-MM-DD).
    pub async fn gather(
        &self,
        patient_id: &str,
        observation_codes: &[String],
        since: &str,
    ) -> Result<Gathered, FailedCall> {
        let s = &self.settings;
        let deadline = Instant::now() + s.deadline;
        let base = s.base_url.trim_end_matches('/');
        let id = urlencode(patient_id);
        let count = s.page_size;
        let codes = urlencode(&observation_codes.join(","));
        let patient_url = format!("{base}/Patient/{id}");
        let searches = [
            (
                "Observation search",
                format!("{base}/Observation?patient={id}&code={codes}&date=ge{since}&_sort=-date&_count={count}"),
            ),
            ("MedicationRequest search", format!("{base}/MedicationRequest?patient={id}&status=active&_count={count}")),
            (
                "MedicationStatement search",
                format!("{base}/MedicationStatement?patient={id}&status=active&_count={count}"),
            ),
            (
                "MedicationAdministration search",
                format!("{base}/MedicationAdministration?patient={id}&effective-time=ge{since}&_count={count}"),
            ),
            ("Condition search", format!("{base}/Condition?patient={id}&clinical-status=active&_count={count}")),
            ("Procedure search", format!("{base}/Procedure?patient={id}&date=ge{since}&_count={count}")),
        ];
        let patient_call = self.get(&patient_url, "Patient read", deadline);
        let calls =
            futures_util::future::join_all(searches.iter().map(|(what, url)| self.search(url.clone(), what, deadline)));
        let (patient, results) = tokio::join!(patient_call, calls);
        let patient = patient?;
        if patient.get("resourceType").and_then(Value::as_str) != Some("Patient") {
            return Err(FailedCall {
                what: "Patient read".into(),
                how: "the answer is not a Patient".into(),
                timed_out: false,
            });
        }
        let mut entries = vec![json!({ "fullUrl": patient_url, "resource": patient })];
        let mut failed = Vec::new();
        for ((what, _), result) in searches.iter().zip(results) {
            match result {
                Ok(Searched { found, refused }) => {
                    failed.extend(refused);
                    entries.extend(found.into_iter().map(|mut e| {
                        if let Some(o) = e.as_object_mut() {
                            o.remove("search");
                        }
                        e
                    }));
                }
                // The calcium results are essential.
                Err(f) if *what == "Observation search" => return Err(f),
                Err(f) => failed.push(f),
            }
        }
        // The Specimens the results refer to, so their condition (clotted,
        // hemolyzed) can be checked; only on the configured server.
        let ids = specimen_ids(&entries, base);
        if !ids.is_empty() {
            let url = format!("{base}/Specimen?_id={}&_count={count}", urlencode(&ids.join(",")));
            match self.search(url, "Specimen search", deadline).await {
                Ok(Searched { found, refused }) => {
                    failed.extend(refused);
                    entries.extend(found.into_iter().map(|mut e| {
                        if let Some(o) = e.as_object_mut() {
                            o.remove("search");
                        }
                        e
                    }));
                }
                Err(f) => failed.push(f),
            }
        }
        Ok(Gathered { bundle: json!({ "resourceType": "Bundle", "type": "collection", "entry": entries }), failed })
    }
}

/// Ids of the Specimens that gathered Observations refer to on the configured
/// server (`Specimen/id` or `{base}/Specimen/id`) and that are not already in
/// hand. Contained specimens need no read; a reference to another server is
/// never followed (the reader then says the specimen check could not run).
fn specimen_ids(entries: &[Value], base: &str) -> Vec<String> {
    let have: Vec<&str> = entries
        .iter()
        .filter_map(|e| e.get("resource"))
        .filter(|r| r.get("resourceType").and_then(Value::as_str) == Some("Specimen"))
        .filter_map(|r| r.get("id").and_then(Value::as_str))
        .collect();
    let mut ids: Vec<String> = Vec::new();
    for r in entries.iter().filter_map(|e| e.get("resource")) {
        if r.get("resourceType").and_then(Value::as_str) != Some("Observation") {
            continue;
        }
        let Some(reference) = r.get("specimen").and_then(|s| s.get("reference")).and_then(Value::as_str) else {
            continue;
        };
        if reference.starts_with('#') {
            continue;
        }
        let Ok(url) = resolve(base, reference) else { continue };
        // Under the base (checked above): the id follows the last `/Specimen/`.
        let Some((_, id)) = url.rsplit_once("/Specimen/") else { continue };
        let id_ok =
            !id.is_empty() && id.len() <= 64 && id.bytes().all(|b| b.is_ascii_alphanumeric() || b == b'-' || b == b'.');
        if id_ok && !have.contains(&id) && !ids.iter().any(|x| x == id) {
            ids.push(id.to_owned());
        }
    }
    ids
}

/// Percent-encode a query value (RFC 3986 unreserved characters kept).
pub fn urlencode(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for b in s.bytes() {
        if b.is_ascii_alphanumeric() || b"-._~".contains(&b) {
            out.push(b as char);
        } else {
            out.push_str(&format!("%{b:02X}"));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn only_specimens_on_the_configured_server_and_not_in_hand_are_read() {
        let base = "https://ehr.example.org/fhir";
        let obs = |specimen: &str| json!({ "resource": { "resourceType": "Observation", "specimen": { "reference": specimen } } });
        let entries = vec![
            obs("Specimen/s1"),
            obs("https://ehr.example.org/fhir/Specimen/s2"),
            obs("https://elsewhere.example.com/fhir/Specimen/s3"),
            obs("#contained"),
            obs("Specimen/s1"),
            obs("Specimen/in-hand"),
            obs("Specimen/bad id"),
            json!({ "resource": { "resourceType": "Specimen", "id": "in-hand" } }),
            json!({ "resource": { "resourceType": "Condition", "specimen": { "reference": "Specimen/s4" } } }),
        ];
        assert_eq!(specimen_ids(&entries, base), ["s1", "s2"]);
    }

    #[test]
    fn references_resolve_only_under_the_configured_base() {
        let base = "https://ehr.example.org:443/fhir/";
        let ok = |r: &str| resolve(base, r).unwrap_or_else(|e| panic!("{r}: {e}"));
        assert_eq!(ok("Observation/o-1"), "https://ehr.example.org/fhir/Observation/o-1");
        assert_eq!(ok("/Observation/o-1"), "https://ehr.example.org/fhir/Observation/o-1");
        assert_eq!(ok("https://ehr.example.org/fhir/Observation/o-1"), "https://ehr.example.org/fhir/Observation/o-1");
        // Host case and an explicit default port are the same server.
        assert_eq!(
            ok("https://EHR.Example.ORG:443/fhir/Observation/o-1"),
            "https://ehr.example.org/fhir/Observation/o-1"
        );
        // A query may carry encoded characters (paging cursors do).
        assert_eq!(ok("https://ehr.example.org/fhir?_getpages=a%2Fb"), "https://ehr.example.org/fhir?_getpages=a%2Fb");
        // A dot segment that stays under the base is harmless once removed.
        assert_eq!(ok("Observation/../Patient/p-1"), "https://ehr.example.org/fhir/Patient/p-1");
        for bad in [
            "https://elsewhere.example.com/fhir/Observation/o-1",
            "https://ehr.example.org.elsewhere.example.com/fhir/Observation/o-1",
            "https://ehr@elsewhere.example.com/fhir/Observation/o-1",
            "https://ehr.example.org@elsewhere.example.com/fhir/Observation/o-1",
            "https://user:pw@ehr.example.org/fhir/Observation/o-1",
            "http://ehr.example.org/fhir/Observation/o-1",
            "https://ehr.example.org:8443/fhir/Observation/o-1",
            "https://ehr.example.org/fhirx/Observation/o-1",
            "https://ehr.example.org/other/Observation/o-1",
            "https://ehr.example.org/fhir/../admin/secret",
            "../admin/secret",
            "Observation/../../admin",
            "https://ehr.example.org/fhir/%2e%2e/admin",
            "https://ehr.example.org/fhir/..%2Fadmin",
            "Observation%2F..%2F..%2Fadmin",
            "https://ehr.example.org/fhir/..\\admin",
            "//elsewhere.example.com/fhir/Observation/o-1",
            "file:///etc/passwd",
            "Observation/o 1",
        ] {
            assert!(resolve(base, bad).is_err(), "{bad} was accepted as {:?}", resolve(base, bad));
        }
    }

    #[test]
    fn a_base_at_the_root_accepts_every_path_on_its_origin_only() {
        let base = "http://127.0.0.1:8080";
        assert_eq!(resolve(base, "Patient/p-1").as_deref(), Ok("http://127.0.0.1:8080/Patient/p-1"));
        assert!(resolve(base, "http://127.0.0.1:8081/Patient/p-1").is_err());
        assert!(resolve(base, "http://localhost:8080/Patient/p-1").is_err(), "another host name is another server");
    }

    #[test]
    fn credentials_and_telemetry_go_over_https_or_to_a_loopback_host() {
        for ok in [
            "https://auth.example.org/token",
            "http://127.0.0.1:9000/token",
            "http://127.1.2.3/token",
            "http://localhost:4318",
            "http://[::1]:4318",
        ] {
            assert_eq!(https_or_loopback("X", ok), Ok(()), "{ok}");
        }
        for bad in
            ["http://auth.example.org/token", "http://10.0.0.5/token", "http://localhost.example.org/t", "ftp://x/y"]
        {
            let e = https_or_loopback("CALCIUM_CDS_SMART_TOKEN_URL", bad).expect_err(bad);
            assert!(e.starts_with("CALCIUM_CDS_SMART_TOKEN_URL must be https"), "{e}");
        }
    }
}
