//! The HTTP service: FHIR R4 over actix-web.
//!
//! `Application::build` binds the listener (port 0 picks a free port, which
//! the tests use) and wires the routes; errors are always FHIR
//! OperationOutcome bodies with a correct status, never actix's plain text.

use std::net::TcpListener;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::time::{Instant, SystemTime, UNIX_EPOCH};

use actix_web::body::MessageBody;
use actix_web::dev::{Server, ServiceRequest, ServiceResponse};
use actix_web::http::StatusCode;
use actix_web::http::header::{self, HeaderValue};
use actix_web::middleware::Next;
use actix_web::{App, HttpRequest, HttpResponse, HttpServer, web};
use serde_json::Value;

use crate::config::ServeArgs;
use crate::engine::{Engine, VERSION};
use crate::fhir::outcome::{IssueCode, RequestError};
use crate::workbench;

/// FHIR JSON media type.
pub const FHIR_JSON: &str = "application/fhir+json; charset=utf-8";

const CAPABILITY: &str = include_str!("../../fhir-profiles/CapabilityStatement-calcium-cds.json");
const OPERATION: &str = include_str!("../../fhir-profiles/OperationDefinition-assess.json");

/// Every route of the service but the optional workbench and benchmark ones:
/// (method, path template, what it is for). The router registers exactly
/// these; the 405 answers, the CapabilityStatement's `rest.documentation`, its
/// operation entries and the OperationDefinition's levels are made from this
/// list, and tests compare it with the router and the OpenAPI description.
pub const ROUTES: &[(&str, &str, &str)] = &[
    (
        "POST",
        "/fhir/$assess",
        "system-level $assess: the patient's data in the body (a Bundle, or Parameters with a `bundle` part)",
    ),
    (
        "POST",
        "/fhir/Patient/{id}/$assess",
        "instance-level $assess: the service gathers the patient's data from the configured FHIR server",
    ),
    (
        "POST",
        "/notifications",
        "result notifications (a history Bundle of the FHIR Subscriptions R5 Backport IG for R4, id-only or full-resource payloads); the service assesses the patient and, when configured, writes the result back; not a FHIR interaction of this server",
    ),
    ("GET", "/fhir/metadata", "this CapabilityStatement"),
    ("GET", "/fhir/OperationDefinition/assess", "the OperationDefinition of $assess"),
    ("GET", "/livez", "liveness probe"),
    ("GET", "/readyz", "readiness probe"),
    ("GET", "/metrics", "Prometheus metrics"),
];

/// The served CapabilityStatement and OperationDefinition: the static files,
/// with the parts that must agree with the routes and the writers derived
/// from [`ROUTES`] and [`crate::fhir::write::RESULT_RESOURCE_TYPES`].
pub fn describe(mut capability: Value, mut operation: Value) -> (Value, Value) {
    let has = |path: &str| ROUTES.iter().any(|(m, p, _)| *m == "POST" && *p == path);
    let types = crate::fhir::write::RESULT_RESOURCE_TYPES;
    let definition = operation["url"].clone();
    operation["system"] = Value::Bool(has("/fhir/$assess"));
    operation["type"] = Value::Bool(has("/fhir/Patient/$assess"));
    operation["instance"] = Value::Bool(has("/fhir/Patient/{id}/$assess"));
    operation["resource"] = serde_json::json!(["Patient"]);
    if let Some(params) = operation["parameter"].as_array_mut() {
        for p in params.iter_mut().filter(|p| p["name"] == "return") {
            p["documentation"] = Value::String(format!(
                "A collection Bundle whose entries are of these resource types: {}. A GuidanceResponse always comes first, and a Device (the service), an OperationOutcome (every input not used, and why) and a Provenance are always present; the others occur when the assessment calls for them (an albumin-adjusted Observation, DetectedIssues, the work-up's ClinicalImpression, ServiceRequests and output Parameters, draft MedicationRequests, a RequestGroup ordering the proposals, and the explain trace as Parameters). References to inputs are `Type/id` where the input had an id, else by identifier or display; references between result entries use their fullUrl. Advisory only.",
                types.join(", ")
            ));
        }
    }
    let routes: Vec<String> = ROUTES.iter().map(|(m, p, what)| format!("- `{m} {p}`: {what}")).collect();
    let rest = &mut capability["rest"][0];
    rest["documentation"] = Value::String(format!(
        "The $assess operation is supported at system level (POST [base]/$assess) and at Patient instance level (POST [base]/Patient/[id]/$assess). No resource type supports read, search or write interactions; the resource entries below name Patient (the instance-level operation) and every resource type the result Bundle can hold (only inside that Bundle). The routes of this service (the FHIR base is /fhir):\n\n{}",
        routes.join("\n")
    ));
    rest["operation"] = serde_json::json!([{
        "name": "assess",
        "definition": definition,
        "documentation": "Advisory hypocalcemia assessment for one child (system level)."
    }]);
    let mut resources = vec![serde_json::json!({
        "type": "Patient",
        "documentation": "Not read, searched or stored here: $assess on a Patient instance gathers that patient's data from the configured FHIR server.",
        "operation": [{ "name": "assess", "definition": definition, "documentation": "Advisory hypocalcemia assessment for this patient (instance level)." }],
    })];
    resources.extend(types.iter().map(|t| {
        serde_json::json!({ "type": t, "documentation": "Returned only inside the $assess result Bundle; not read, searched or stored by this service." })
    }));
    rest["resource"] = Value::Array(resources);
    (capability, operation)
}

/// Shared state.
pub struct AppState {
    engine: Engine,
    upstream: Option<crate::upstream::FhirClient>,
    queue: Option<tokio::sync::mpsc::Sender<crate::notify::Job>>,
    seen: crate::notify::Seen,
    write_back: bool,
    body_limit: usize,
    ready: AtomicBool,
    metrics: Arc<crate::metrics::Metrics>,
    in_flight: Arc<tokio::sync::Semaphore>,
    verifier: Option<crate::inbound_auth::Verifier>,
    protect_metrics: bool,
    request_timeout: std::time::Duration,
    capability: Value,
    operation: Value,
    spans: Option<crate::otlp::Exporter>,
    /// The workbench's scenarios (None: the workbench is off).
    workbench: Option<crate::synth::Catalogue>,
}

/// A built, bound application.
pub struct Application {
    port: u16,
    server: Server,
    state: Arc<AppState>,
}

impl Application {
    /// Bind and wire the service.
    pub fn build(settings: &ServeArgs, engine: Engine) -> Result<Self, String> {
        let listener =
            TcpListener::bind(settings.listen).map_err(|e| format!("cannot listen on {}: {e}", settings.listen))?;
        let port = listener.local_addr().map_err(|e| e.to_string())?.port();
        let mut capability: Value =
            serde_json::from_str(CAPABILITY).map_err(|e| format!("CapabilityStatement: {e}"))?;
        capability["software"]["version"] = Value::String(VERSION.to_owned());
        let operation: Value = serde_json::from_str(OPERATION).map_err(|e| format!("OperationDefinition: {e}"))?;
        let (capability, operation) = describe(capability, operation);
        let metrics = Arc::new(crate::metrics::Metrics::default());
        let spans = match settings.telemetry.export_settings()? {
            Some(export) => {
                let http = reqwest::Client::builder().build().map_err(|e| format!("OTLP HTTP client: {e}"))?;
                let resource = vec![
                    ("service.name", "calcium-cds".to_owned()),
                    ("service.version", VERSION.to_owned()),
                    ("calcium_cds.rules.version", engine.rules.rules.ruleset.version.clone()),
                ];
                Some(crate::otlp::Exporter::start(http, export, resource))
            }
            None => None,
        };
        let upstream = settings.upstream.client()?.map(|c| c.with_metrics(metrics.clone()).with_spans(spans.clone()));
        let (tx, rx) = tokio::sync::mpsc::channel(settings.upstream.queue_capacity.max(1));
        let queue = upstream.is_some().then_some(tx);
        let state = Arc::new(AppState {
            engine,
            upstream,
            queue,
            seen: crate::notify::Seen::new(10_000),
            write_back: settings.upstream.write_back,
            body_limit: settings.body_limit,
            ready: AtomicBool::new(false),
            metrics,
            verifier: settings.auth.verifier()?,
            protect_metrics: settings.auth.protect_metrics,
            in_flight: Arc::new(tokio::sync::Semaphore::new(settings.limits.max_in_flight.max(1))),
            request_timeout: std::time::Duration::from_millis(settings.limits.request_timeout_ms.max(1)),
            capability,
            operation,
            spans,
            workbench: if settings.workbench {
                Some(crate::synth::Catalogue::embedded().map_err(|e| e.0)?)
            } else {
                None
            },
        });
        if state.queue.is_some() {
            let worker_state = state.clone();
            tokio::spawn(async move {
                let mut rx = rx;
                while let Some(job) = rx.recv().await {
                    // Each event starts its own trace (sampled when spans are exported);
                    // its upstream calls carry it.
                    let ctx = crate::trace::TraceContext::start(worker_state.spans.is_some());
                    crate::trace::scope(ctx, work(&worker_state, job)).await;
                }
            });
        }
        if let Some(max_age) = state.verifier.as_ref().and_then(|v| v.source()).map(|s| s.max_age) {
            // Re-read the JWKS URL on a schedule, so that a key the issuer removed stops being trusted.
            let jwks_state = state.clone();
            tokio::spawn(async move {
                loop {
                    tokio::time::sleep(max_age).await;
                    if let Some(v) = &jwks_state.verifier {
                        v.reread(max_age / 2, "scheduled").await;
                    }
                }
            });
        }
        let data = web::Data::from(state.clone());
        let workbench_on = state.workbench.is_some();
        let server = HttpServer::new(move || {
            App::new()
                .app_data(data.clone())
                .wrap(actix_web::middleware::from_fn(limit))
                .wrap(actix_web::middleware::from_fn(authorize))
                .wrap(actix_web::middleware::from_fn(access_log))
                .route("/fhir/$assess", web::post().to(assess))
                .route("/fhir/Patient/{id}/$assess", web::post().to(assess_patient))
                .route("/notifications", web::post().to(notifications))
                .route("/fhir/metadata", web::get().to(metadata))
                .route("/fhir/OperationDefinition/assess", web::get().to(operation_definition))
                .route("/livez", web::get().to(livez))
                .route("/readyz", web::get().to(readyz))
                .route("/metrics", web::get().to(metrics_text))
                .configure(bench_routes)
                .configure(|cfg| {
                    if workbench_on {
                        cfg.route("/workbench", web::get().to(|| async { workbench::asset(workbench::Asset::Page) }))
                            .route("/workbench/", web::get().to(|| async { workbench::asset(workbench::Asset::Page) }))
                            .route(
                                "/workbench/app.js",
                                web::get().to(|| async { workbench::asset(workbench::Asset::Script) }),
                            )
                            .route(
                                "/workbench/app.css",
                                web::get().to(|| async { workbench::asset(workbench::Asset::Style) }),
                            )
                            .route("/workbench/scenarios", web::get().to(workbench_scenarios))
                            .route("/workbench/synth", web::get().to(workbench_synth));
                    }
                })
                .default_service(web::to(not_found))
        })
        .shutdown_timeout(settings.limits.shutdown_timeout_s)
        .disable_signals()
        .listen(listener)
        .map_err(|e| e.to_string())?
        .run();
        state.ready.store(true, Ordering::SeqCst);
        Ok(Self { port, server, state })
    }

    /// The bound port.
    pub fn port(&self) -> u16 {
        self.port
    }

    /// Serve until stopped (no signal handling: tests stop it by dropping the runtime).
    pub async fn run_until_stopped(self) -> std::io::Result<()> {
        let state = self.state;
        let result = self.server.await;
        state.ready.store(false, Ordering::SeqCst);
        result
    }

    /// Serve until SIGTERM or SIGINT, then shut down gracefully: readiness goes
    /// false first, the listener closes after `drain` (so that load balancers
    /// stop sending), and in-flight requests finish within the shutdown timeout.
    pub async fn run_until_signalled(self, drain: std::time::Duration) -> std::io::Result<()> {
        let handle = self.server.handle();
        let state = self.state.clone();
        let mut term = tokio::signal::unix::signal(tokio::signal::unix::SignalKind::terminate())?;
        let mut int = tokio::signal::unix::signal(tokio::signal::unix::SignalKind::interrupt())?;
        actix_web::rt::spawn(async move {
            tokio::select! {
                _ = term.recv() => {}
                _ = int.recv() => {}
            }
            state.ready.store(false, Ordering::SeqCst);
            tracing::info!(drain_ms = drain.as_millis() as u64, "shutdown: readiness false, draining");
            tokio::time::sleep(drain).await;
            handle.stop(true).await;
        });
        let result = self.server.await;
        tracing::info!("shutdown complete");
        result
    }
}

fn fhir_response(status: StatusCode, body: &Value) -> HttpResponse {
    HttpResponse::build(status).insert_header((header::CONTENT_TYPE, FHIR_JSON)).body(body.to_string())
}

fn error_response(err: &RequestError) -> HttpResponse {
    let status = StatusCode::from_u16(err.status).unwrap_or(StatusCode::UNPROCESSABLE_ENTITY);
    fhir_response(status, &err.to_operation_outcome())
}

fn media_type_ok(req: &HttpRequest) -> bool {
    let Some(ct) = req.headers().get(header::CONTENT_TYPE).and_then(|v| v.to_str().ok()) else { return false };
    let essence = ct.split(';').next().unwrap_or("").trim().to_ascii_lowercase();
    essence == "application/fhir+json" || essence == "application/json"
}

/// The earliest date (YYYY-MM-DD) the upstream searches reach back to: the rules' lookback.
fn search_since(engine: &Engine, now: i64) -> String {
    crate::clinical::time::CivilDate::from_days_since_epoch(now.div_euclid(86_400) - i64::from(engine.lookback_days()))
        .to_string()
}

fn now_unix() -> i64 {
    SystemTime::now().duration_since(UNIX_EPOCH).map(|d| d.as_secs() as i64).unwrap_or(0)
}

/// The `_explain` query parameter: `true` adds the trace of every rule
/// evaluated to the result Bundle (a Parameters resource).
fn explain_flag(req: &HttpRequest) -> Result<bool, RequestError> {
    let mut explain = false;
    for pair in req.query_string().split('&').filter(|p| !p.is_empty()) {
        let (k, v) = pair.split_once('=').unwrap_or((pair, ""));
        if k == "_explain" {
            explain = match v {
                "true" => true,
                "false" => false,
                _ => {
                    return Err(RequestError::single(
                        400,
                        IssueCode::Value,
                        "_explain",
                        "The _explain parameter must be true or false.",
                    ));
                }
            };
        }
    }
    Ok(explain)
}

async fn assess(req: HttpRequest, payload: web::Payload, state: web::Data<AppState>) -> HttpResponse {
    let explain = match explain_flag(&req) {
        Ok(e) => e,
        Err(e) => return error_response(&e),
    };
    if !media_type_ok(&req) {
        return error_response(&RequestError::single(
            415,
            IssueCode::NotSupported,
            "",
            "Content-Type must be application/fhir+json (or application/json).",
        ));
    }
    let too_large = || {
        error_response(&RequestError::single(
            413,
            IssueCode::TooCostly,
            "",
            format!("The request body is larger than the limit of {} bytes.", state.body_limit),
        ))
    };
    let declared =
        req.headers().get(header::CONTENT_LENGTH).and_then(|v| v.to_str().ok()).and_then(|v| v.parse::<usize>().ok());
    if declared.is_some_and(|n| n > state.body_limit) {
        return too_large();
    }
    let Ok(read) = tokio::time::timeout(state.request_timeout, payload.to_bytes_limited(state.body_limit)).await else {
        return slow_body(&state);
    };
    let body = match read {
        Err(_) => return too_large(),
        Ok(Err(_)) => {
            return error_response(&RequestError::single(
                400,
                IssueCode::Structure,
                "",
                "The request body could not be read.",
            ));
        }
        Ok(Ok(b)) => b,
    };
    match state.engine.assess_with(&body, now_unix(), false, explain) {
        Ok(outcome) => {
            state.metrics.assessment(outcome.status, outcome.severity.unwrap_or("none"));
            tracing::info!(
                guidance_status = outcome.status,
                severity = outcome.severity.unwrap_or("none"),
                not_used = outcome.not_used,
                "assessment"
            );
            fhir_response(StatusCode::OK, &outcome.bundle)
        }
        Err(err) => {
            tracing::info!(status = err.status, issues = err.issues.len(), "request refused");
            error_response(&err)
        }
    }
}

fn valid_id(id: &str) -> bool {
    (1..=64).contains(&id.len()) && id.bytes().all(|b| b.is_ascii_alphanumeric() || b == b'-' || b == b'.')
}

/// Gather the patient's context from the configured FHIR server, then assess.
async fn assess_patient(req: HttpRequest, path: web::Path<String>, state: web::Data<AppState>) -> HttpResponse {
    let explain = match explain_flag(&req) {
        Ok(e) => e,
        Err(e) => return error_response(&e),
    };
    let id = path.into_inner();
    if !valid_id(&id) {
        return error_response(&RequestError::single(
            400,
            IssueCode::Value,
            "Patient.id",
            "The patient id is not a FHIR id ([A-Za-z0-9-.]{1,64}).",
        ));
    }
    let Some(client) = &state.upstream else {
        return error_response(&RequestError::single(
            501,
            IssueCode::NotSupported,
            "",
            "No upstream FHIR server is configured (CALCIUM_CDS_FHIR_BASE_URL); send the data to POST /fhir/$assess instead.",
        ));
    };
    let now = now_unix();
    let since = search_since(&state.engine, now);
    let codes = state.engine.observation_code_tokens();
    let Ok(gathered) = tokio::time::timeout(state.request_timeout, client.gather(&id, &codes, &since)).await else {
        return timed_out(&state);
    };
    let gathered = match gathered {
        Ok(g) => g,
        Err(f) => {
            tracing::info!(call = %f.what, timed_out = f.timed_out, "upstream call failed");
            let status = if f.timed_out { 504 } else { 502 };
            return error_response(&RequestError::single(
                status,
                IssueCode::Exception,
                "",
                format!("The upstream {} failed: {}.", f.what, f.how),
            ));
        }
    };
    match state.engine.assess_document(&gathered.bundle, now, false, &gathered.failed, explain) {
        Ok(outcome) => {
            state.metrics.assessment(outcome.status, outcome.severity.unwrap_or("none"));
            tracing::info!(
                guidance_status = outcome.status,
                failed_searches = gathered.failed.len(),
                "patient assessment"
            );
            fhir_response(StatusCode::OK, &outcome.bundle)
        }
        Err(err) => {
            // The server's data could not be assessed as a whole (e.g. an invalid
            // Patient): the upstream gave an unusable answer.
            error_response(&RequestError { status: 502, issues: err.issues })
        }
    }
}

/// Receive a notification Bundle; queue the events, answer at once.
async fn notifications(req: HttpRequest, payload: web::Payload, state: web::Data<AppState>) -> HttpResponse {
    if !media_type_ok(&req) {
        return error_response(&RequestError::single(
            415,
            IssueCode::NotSupported,
            "",
            "Content-Type must be application/fhir+json.",
        ));
    }
    let Ok(read) = tokio::time::timeout(state.request_timeout, payload.to_bytes_limited(state.body_limit)).await else {
        return slow_body(&state);
    };
    let Ok(Ok(body)) = read else {
        return error_response(&RequestError::single(
            413,
            IssueCode::TooCostly,
            "",
            "The notification is too large or could not be read.",
        ));
    };
    let doc = match crate::fhir::read::parse(&body) {
        Ok(d) => d,
        Err(e) => return error_response(&e),
    };
    let notice = match crate::notify::parse(&doc) {
        Ok(n) => n,
        Err(e) => return error_response(&e),
    };
    let info = |status: StatusCode, text: String| {
        fhir_response(
            status,
            &crate::fhir::outcome::operation_outcome(
                None,
                &[crate::fhir::outcome::Issue {
                    severity: crate::fhir::outcome::IssueSeverityLevel::Information,
                    code: IssueCode::Informational,
                    expression: Vec::new(),
                    diagnostics: text,
                }],
            ),
        )
    };
    let jobs = match notice {
        crate::notify::Notice::Acknowledge(kind) => return info(StatusCode::OK, format!("{kind} received")),
        crate::notify::Notice::Events(jobs) => jobs,
    };
    let Some(queue) = &state.queue else {
        return error_response(&RequestError::single(
            501,
            IssueCode::NotSupported,
            "",
            "No upstream FHIR server is configured (CALCIUM_CDS_FHIR_BASE_URL): events cannot be worked on.",
        ));
    };
    let (mut queued, mut duplicates, mut refused) = (0, 0, 0);
    for job in jobs {
        // A focus on another server is never read (it would receive the EHR
        // credential): refused here, counted, and said in the answer.
        if let Some(client) = &state.upstream
            && client.resolve(&job.focus, "notification_focus").is_err()
        {
            refused += 1;
            continue;
        }
        if state.seen.contains(&job.key) {
            duplicates += 1;
            continue;
        }
        let key = job.key.clone();
        match queue.try_send(job) {
            Ok(()) => {
                state.seen.insert(key);
                queued += 1;
            }
            Err(_) => {
                tracing::info!(queued, "notification queue full");
                let mut res = error_response(&RequestError::single(
                    503,
                    IssueCode::Exception,
                    "",
                    format!(
                        "The work queue is full; {queued} event(s) of this delivery were queued, please redeliver."
                    ),
                ));
                res.headers_mut().insert(header::RETRY_AFTER, HeaderValue::from_static("5"));
                return res;
            }
        }
    }
    tracing::info!(queued, duplicates, refused, "notification");
    let mut text = format!("{queued} event(s) queued, {duplicates} already received");
    if refused > 0 {
        text.push_str(&format!(
            "; {refused} event(s) refused: the focus points outside the configured FHIR server (CALCIUM_CDS_FHIR_BASE_URL) and was not read"
        ));
    }
    info(StatusCode::ACCEPTED, text)
}

/// Work one event: find the patient, gather, assess, and write back when there is something to say.
async fn work(state: &AppState, job: crate::notify::Job) {
    let start = SystemTime::now();
    let result = work_event(state, &job).await;
    if let (Some(exporter), Some(ctx)) = (&state.spans, crate::trace::current()) {
        let mut span = crate::otlp::Span::of(&ctx, "notification event".into(), crate::otlp::SpanKind::Consumer, start);
        span.error = result.is_err();
        let outcome = if result.is_ok() { "worked" } else { "not completed" };
        span.attributes.push(("calcium_cds.outcome", crate::otlp::AttrValue::Str(outcome.into())));
        exporter.record(span);
    }
    match result {
        Ok(done) => tracing::info!(done, "notification event worked"),
        Err(why) => {
            // The 202 went out already: forget the delivery so that a redelivery is worked again.
            state.seen.remove(&job.key);
            tracing::warn!(why = %why, "notification event not completed; a redelivery will be worked");
        }
    }
}

/// Gather, assess and (when on and worth it) write back one event; what was done,
/// or why it failed. Log text carries no patient data.
async fn work_event(state: &AppState, job: &crate::notify::Job) -> Result<&'static str, String> {
    let Some(client) = &state.upstream else { return Err("no upstream FHIR server".into()) };
    let focus = match &job.resource {
        Some(r) => r.clone(),
        // The reference is not logged (it names a patient's resource).
        None => client
            .read(&job.focus, "notification_focus")
            .await
            .map_err(|f| format!("read of the event's focus: {}", f.how))?,
    };
    let codes = state.engine.observation_code_tokens();
    let patient = match crate::notify::relevant_patient(&focus, &codes) {
        Ok(p) if valid_id(&p) => p,
        Ok(_) => return Ok("ignored: the focus names a patient id that is not a FHIR id"),
        Err(crate::notify::NotRelevant::NotAnObservation(_)) => return Ok("ignored: the focus is not an Observation"),
        Err(crate::notify::NotRelevant::OtherCode) => {
            return Ok("ignored: the Observation has none of the codes the rules read");
        }
        Err(crate::notify::NotRelevant::NoPatient) => return Ok("ignored: the Observation names no patient"),
    };
    let now = now_unix();
    let since = search_since(&state.engine, now);
    let gathered = client.gather(&patient, &codes, &since).await.map_err(|f| format!("{}: {}", f.what, f.how))?;
    let outcome = state
        .engine
        .assess_document(&gathered.bundle, now, false, &gathered.failed, false)
        .map_err(|_| "the gathered data could not be assessed".to_owned())?;
    if !(state.write_back && crate::notify::worth_writing(&outcome.bundle)) {
        return Ok("assessed; nothing written");
    }
    let digest = crate::fhir::write::request_digest(&gathered.bundle);
    let tx =
        crate::notify::transaction(&outcome.bundle, &digest, &state.engine.rules.sha256, &state.engine.canonical_base);
    client.post_transaction(&tx).await.map_err(|f| format!("{}: {}", f.what, f.how))?;
    Ok("assessed and written back")
}

async fn metadata(state: web::Data<AppState>) -> HttpResponse {
    fhir_response(StatusCode::OK, &state.capability)
}

async fn operation_definition(state: web::Data<AppState>) -> HttpResponse {
    fhir_response(StatusCode::OK, &state.operation)
}

async fn metrics_text(state: web::Data<AppState>) -> HttpResponse {
    let rules = &state.engine.rules;
    let text = state.metrics.render(&crate::metrics::Snapshot {
        version: VERSION,
        rules: (&rules.rules.ruleset.name, &rules.rules.ruleset.version, &rules.sha256),
        queue_depth: state.queue.as_ref().map(|q| q.max_capacity() - q.capacity()),
        spans: state.spans.as_ref().map(crate::otlp::Exporter::stats),
    });
    HttpResponse::Ok().content_type("text/plain; version=0.0.4; charset=utf-8").body(text)
}

/// Benchmark-only routes (feature `bench-echo`, never in a production build):
/// `POST /bench/echo` parses the body to a `serde_json::Value` and writes it
/// back, the floor `bench/load.sh` measures `$assess` against.
fn bench_routes(cfg: &mut web::ServiceConfig) {
    #[cfg(feature = "bench-echo")]
    cfg.route("/bench/echo", web::post().to(bench_echo));
    #[cfg(not(feature = "bench-echo"))]
    let _ = cfg;
}

#[cfg(feature = "bench-echo")]
async fn bench_echo(payload: web::Payload, state: web::Data<AppState>) -> HttpResponse {
    match payload.to_bytes_limited(state.body_limit).await {
        Ok(Ok(body)) => match serde_json::from_slice::<Value>(&body) {
            Ok(v) => fhir_response(StatusCode::OK, &v),
            Err(_) => HttpResponse::BadRequest().finish(),
        },
        _ => HttpResponse::PayloadTooLarge().finish(),
    }
}

async fn livez() -> HttpResponse {
    HttpResponse::Ok().content_type("application/json").body(r#"{"status":"live"}"#)
}

async fn readyz(state: web::Data<AppState>) -> HttpResponse {
    if state.ready.load(Ordering::SeqCst) {
        HttpResponse::Ok().content_type("application/json").body(r#"{"status":"ready"}"#)
    } else {
        HttpResponse::ServiceUnavailable().content_type("application/json").body(r#"{"status":"not ready"}"#)
    }
}

async fn workbench_scenarios(state: web::Data<AppState>) -> HttpResponse {
    match &state.workbench {
        Some(cat) => HttpResponse::Ok().content_type("application/json").json(workbench::scenarios(cat)),
        None => not_found_response(),
    }
}

async fn workbench_synth(req: HttpRequest, state: web::Data<AppState>) -> HttpResponse {
    let Some(cat) = &state.workbench else { return not_found_response() };
    match workbench::synth(&state.engine, cat, req.query_string(), now_unix()) {
        Ok(bundle) => fhir_response(StatusCode::OK, &bundle),
        Err(e) => error_response(&e),
    }
}

fn not_found_response() -> HttpResponse {
    error_response(&RequestError::single(404, IssueCode::NotFound, "", "No such endpoint. See GET /fhir/metadata."))
}

async fn not_found(req: HttpRequest) -> HttpResponse {
    let path = req.path();
    let patient_assess = path.starts_with("/fhir/Patient/") && path.ends_with("/$assess");
    let declared = ROUTES.iter().find(|(_, p, _)| *p == path).map(|(m, _, _)| *m);
    let allowed = match path {
        _ if declared.is_some() => declared,
        _ if patient_assess => Some("POST"),
        "/workbench"
        | "/workbench/"
        | "/workbench/app.js"
        | "/workbench/app.css"
        | "/workbench/scenarios"
        | "/workbench/synth"
            if req.app_data::<web::Data<AppState>>().is_some_and(|s| s.workbench.is_some()) =>
        {
            Some("GET")
        }
        _ => None,
    };
    if let Some(allow) = allowed {
        let mut res = error_response(&RequestError::single(
            405,
            IssueCode::NotSupported,
            "",
            format!("Method {} is not allowed here; use {allow}.", req.method()),
        ));
        res.headers_mut().insert(header::ALLOW, HeaderValue::from_static(allow));
        return res;
    }
    not_found_response()
}

static NEXT_ID: AtomicU64 = AtomicU64::new(1);

fn request_id(req: &ServiceRequest) -> String {
    let given = req.headers().get("x-request-id").and_then(|v| v.to_str().ok()).filter(|v| {
        !v.is_empty() && v.len() <= 64 && v.bytes().all(|b| b.is_ascii_alphanumeric() || b"-_.".contains(&b))
    });
    match given {
        Some(v) => v.to_owned(),
        None => format!("req-{:x}-{}", std::process::id(), NEXT_ID.fetch_add(1, Ordering::Relaxed)),
    }
}

/// Routes that stay outside the in-flight limit and the request timeout.
fn is_probe_or_metrics(path: &str) -> bool {
    matches!(path, "/livez" | "/readyz" | "/metrics")
}

/// The in-flight limit (503 with Retry-After when saturated, never an unbounded
/// queue) for every route but the probes and metrics. The request timeout is
/// applied where a request waits: reading its body and the upstream gather.
async fn limit(
    req: ServiceRequest,
    next: Next<impl MessageBody + 'static>,
) -> Result<ServiceResponse<actix_web::body::BoxBody>, actix_web::Error> {
    let Some(state) = req.app_data::<web::Data<AppState>>().cloned() else {
        return next.call(req).await.map(ServiceResponse::map_into_boxed_body);
    };
    if is_probe_or_metrics(req.path()) {
        return next.call(req).await.map(ServiceResponse::map_into_boxed_body);
    }
    let Ok(_permit) = state.in_flight.clone().try_acquire_owned() else {
        let mut res = error_response(&RequestError::single(
            503,
            IssueCode::Throttled,
            "",
            "The service is at its limit of requests in flight; retry shortly.",
        ));
        res.headers_mut().insert(header::RETRY_AFTER, HeaderValue::from_static("1"));
        return Ok(req.into_response(res));
    };
    next.call(req).await.map(ServiceResponse::map_into_boxed_body)
}

/// Inbound authorization (when on): a bearer JWT with the route's scope on the
/// FHIR operations and notifications; a valid token on /metrics when protected.
/// Probes, the CapabilityStatement and the OperationDefinition stay open.
async fn authorize(
    req: ServiceRequest,
    next: Next<impl MessageBody + 'static>,
) -> Result<ServiceResponse<actix_web::body::BoxBody>, actix_web::Error> {
    let Some(state) = req.app_data::<web::Data<AppState>>().cloned() else {
        return next.call(req).await.map(ServiceResponse::map_into_boxed_body);
    };
    let Some(verifier) = &state.verifier else {
        return next.call(req).await.map(ServiceResponse::map_into_boxed_body);
    };
    let route = req.match_pattern().unwrap_or_default();
    let need = crate::inbound_auth::needed_for(&route);
    let protected = need.is_some() || (route == "/metrics" && state.protect_metrics);
    if !protected {
        return next.call(req).await.map(ServiceResponse::map_into_boxed_body);
    }
    let authorization = req.headers().get(header::AUTHORIZATION).and_then(|v| v.to_str().ok());
    let refusal = match verifier.check_refreshing(authorization, need).await {
        Ok(()) => return next.call(req).await.map(ServiceResponse::map_into_boxed_body),
        Err(r) => r,
    };
    use crate::inbound_auth::Refusal;
    let (status, code, text, challenge) = match &refusal {
        Refusal::Missing => (
            401,
            IssueCode::Login,
            "A bearer token is required.".to_owned(),
            r#"Bearer realm="calcium-cds""#.to_owned(),
        ),
        Refusal::Invalid(why) => (
            401,
            IssueCode::Security,
            format!("The bearer token was refused: {why}."),
            format!(r#"Bearer realm="calcium-cds", error="invalid_token", error_description="{why}""#),
        ),
        Refusal::Scope(why) => (
            403,
            IssueCode::Forbidden,
            format!("The bearer token was refused: {why}."),
            format!(
                r#"Bearer realm="calcium-cds", error="insufficient_scope", scope="{}""#,
                need.map(|n| n.to_string()).unwrap_or_default()
            ),
        ),
    };
    tracing::info!(status, route = %route, "request not authorized");
    let mut res = error_response(&RequestError::single(status, code, "", text));
    if let Ok(v) = HeaderValue::from_str(&challenge) {
        res.headers_mut().insert(header::WWW_AUTHENTICATE, v);
    }
    Ok(req.into_response(res))
}

/// A body that did not arrive within the request timeout.
fn slow_body(state: &AppState) -> HttpResponse {
    error_response(&RequestError::single(
        408,
        IssueCode::Timeout,
        "",
        format!("The request body did not arrive within {} ms.", state.request_timeout.as_millis()),
    ))
}

/// A request that ran past the request timeout.
fn timed_out(state: &AppState) -> HttpResponse {
    error_response(&RequestError::single(
        503,
        IssueCode::Timeout,
        "",
        format!("The request took longer than {} ms and was stopped.", state.request_timeout.as_millis()),
    ))
}

/// One log line per request: method, route template, status, latency, id.
async fn access_log(
    req: ServiceRequest,
    next: Next<impl MessageBody + 'static>,
) -> Result<ServiceResponse<impl MessageBody>, actix_web::Error> {
    let start = Instant::now();
    let id = request_id(&req);
    let method = req.method().to_string();
    let route = req.match_pattern().unwrap_or_else(|| "unmatched".to_owned());
    let state = req.app_data::<web::Data<AppState>>().cloned();
    let spans = state.as_ref().and_then(|s| s.spans.clone());
    let trace = req
        .headers()
        .get("traceparent")
        .and_then(|v| v.to_str().ok())
        .and_then(crate::trace::TraceContext::parse)
        .unwrap_or_else(|| crate::trace::TraceContext::start(spans.is_some()));
    let trace_id = trace.trace_id.clone();
    let started_at = SystemTime::now();
    let mut res = crate::trace::scope(trace.clone(), next.call(req)).await?;
    let status = res.status().as_u16();
    if let Some(s) = &state {
        s.metrics.request(&route, status, start.elapsed());
    }
    if let Some(exporter) = spans.filter(|_| trace.sampled()) {
        use crate::otlp::AttrValue;
        let mut span =
            crate::otlp::Span::of(&trace, format!("{method} {route}"), crate::otlp::SpanKind::Server, started_at);
        span.attributes.push(("http.request.method", AttrValue::Str(method.clone())));
        span.attributes.push(("http.route", AttrValue::Str(route.clone())));
        span.attributes.push(("http.response.status_code", AttrValue::Int(i64::from(status))));
        span.error = status >= 500;
        exporter.record(span);
    }
    if let Ok(v) = HeaderValue::from_str(&id) {
        res.headers_mut().insert(header::HeaderName::from_static("x-request-id"), v);
    }
    tracing::info!(
        method = %method,
        route = %route,
        status,
        latency_ms = start.elapsed().as_secs_f64() * 1000.0,
        request_id = %id,
        trace_id = %trace_id,
        "request"
    );
    Ok(res)
}
