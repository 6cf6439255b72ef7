//! One integration-test binary (ripgrep style): each module says what goes in it.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic, reason = "tests fail loudly by design")]

// Shared harness: spawn_app, the official R4 schema check, request helpers.
mod helpers;
// The HTTP surface: metadata, OperationDefinition, probes, routing, media types.
mod http;
// Bad input: each case with its status and the OperationOutcome expression it must name.
mod bad_input;
// Every example bundle through the CLI binary and the service: expected results, schema validity, determinism.
mod examples;
// Check values produced by outside reference libraries (UCUM, molecular masses) against our tables.
mod reference_values;
// Check values from outside libraries for the treatment side: weight-for-age z (growth packages) and salt chemistry (molmass).
mod reference_treatment;
// Clinical scenarios over HTTP: status, severity, adjustment, banding.
mod clinical;
// Treatment proposals over HTTP: weight-based draft doses, their order, and each safety check.
mod treatment;
// POST /fhir/Patient/{id}/$assess against a wiremock EHR: what we send, paging, retries, timeouts, failures.
mod upstream;
// Every upstream URL stays on the configured FHIR server; https-or-loopback for credential and telemetry URLs.
mod upstream_origin;
// Result notifications: queue, duplicates, overflow, idempotent write-back (wiremock as the EHR).
mod notify;

/// SMART Backend Services authorization.
mod smart;

// The container contract: the binary run as deploy/Dockerfile runs it.
mod container;

// Telemetry of the binary: request log lines, no patient data in the log, metrics.
mod telemetry;

// A log pipe that is broken, closed or gone never stops requests, probes or shutdown.
mod log_pipe;

// Limits: in-flight cap and request timeout.
mod limits;

// `config check` and configuration errors.
mod config_check;

// Inbound authorization: bearer JWTs against a JWKS, scopes, open probes.
mod inbound_auth;

// Trace export over OTLP/HTTP: span parentage, sampling, refusals, no patient data.
mod otlp;

// The rule tools and the case runner, as the binary: check DIR, rules check/show/diff.
mod rule_tools;

// Synthetic bundles (issue 8).
mod synth;

// The explain trace (issue 8).
mod explain;

// The workbench routes (issue 8); the page itself: tests/workbench/e2e.mjs.
mod workbench;

// Specimen problems (issue 13, section 5): the specimen cases through the binary, and the Specimen read in patient context.
mod specimen;

// Preterm weight z (UK-WHO preterm table, rcpchgrowth check values) and the dosing-weight rules built on it (issue 13).
mod reference_preterm;

// Sources a clinician can follow: no output text cites memory, a brief or an internal file; every case answer is valid R4 (issue 13).
mod output_text;

// Results an EHR can store: every reference resolves in the answer or as Type/id; declared result types match the answers (issue 14).
mod references;
