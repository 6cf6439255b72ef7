//! The assessment pipeline shared by the CLI and the HTTP service:
//! request bytes -> facts -> assessment -> result Bundle.

use serde_json::Value;

use crate::clinical::{explain, status, treatment, workup};
use crate::fhir::outcome::RequestError;
use crate::fhir::profiles::Profiles;
use crate::fhir::{read, write};
use crate::rules::LoadedRules;

/// Everything an assessment needs, built once at start-up.
#[derive(Debug)]
pub struct Engine {
    /// Rules in force.
    pub rules: LoadedRules,
    /// Compiled input profiles.
    pub profiles: Profiles,
    /// Base of canonical URLs in the output.
    pub canonical_base: String,
}

/// The service version, from Cargo.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");

/// Default base of canonical URLs (placeholder domain; see DEVELOPERS.md).
pub const DEFAULT_CANONICAL_BASE: &str = "https://calcium-cds.example.org/fhir";

/// What one assessment produced, for callers that log or count.
#[derive(Debug, Clone)]
pub struct Outcome {
    /// The result Bundle.
    pub bundle: Value,
    /// GuidanceResponse.status.
    pub status: &'static str,
    /// DetectedIssue severity, when hypocalcemia was found.
    pub severity: Option<&'static str>,
    /// Number of inputs listed as set aside or not used.
    pub not_used: usize,
    /// The explain trace, when asked for.
    pub trace: Option<Vec<explain::Step>>,
}

impl Engine {
    /// Build from loaded rules.
    pub fn new(rules: LoadedRules) -> Result<Self, String> {
        Ok(Self { rules, profiles: Profiles::compile()?, canonical_base: DEFAULT_CANONICAL_BASE.to_owned() })
    }

    /// Assess a request body. `now` is unix seconds; `now_fixed` stops a
    /// `now` part in the request from overriding it.
    pub fn assess(&self, body: &[u8], now: i64, now_fixed: bool) -> Result<Outcome, RequestError> {
        self.assess_with(body, now, now_fixed, false)
    }

    /// As `assess`; with `explain`, the result Bundle carries the trace of
    /// every rule evaluated as a Parameters resource (and `Outcome.trace` has it).
    pub fn assess_with(&self, body: &[u8], now: i64, now_fixed: bool, explain: bool) -> Result<Outcome, RequestError> {
        let doc = read::parse(body)?;
        self.assess_document(&doc, now, now_fixed, &[], explain)
    }

    /// How far back a patient-context gather must look, days: the longest
    /// result window of the rules.
    pub fn lookback_days(&self) -> u32 {
        let r = &self.rules.rules;
        let hours = r.next_tests.iter().map(|t| t.max_age_hours).fold(r.windows.result_max_age_hours, f64::max);
        (hours / 24.0).ceil() as u32
    }

    /// The `system|code` tokens of every recognised observation code.
    pub fn observation_code_tokens(&self) -> Vec<String> {
        self.rules.rules.observation_codes.iter().map(|c| format!("{}|{}", c.system, c.code)).collect()
    }

    /// Assess a parsed document; `failed` lists upstream searches that failed
    /// (the assessment then says so and asks for the missing data).
    pub fn assess_document(
        &self,
        doc: &Value,
        now: i64,
        now_fixed: bool,
        failed: &[crate::upstream::FailedCall],
        explain: bool,
    ) -> Result<Outcome, RequestError> {
        let mut ingested = read::read_value(doc, &self.rules.rules, &self.profiles, now, now_fixed)?;
        for f in failed {
            ingested.set_aside.push(read::SetAside {
                expression: String::new(),
                resource: format!("upstream {}", f.what),
                reason: format!("failed ({}); assessed without it", f.how),
                severity: crate::fhir::outcome::IssueSeverityLevel::Warning,
                code: crate::fhir::outcome::IssueCode::Incomplete,
            });
        }
        let mut assessment = status::assess(&ingested.facts, &self.rules.rules);
        let ctx = write::OutputContext {
            rules: &self.rules,
            software_version: VERSION,
            canonical_base: &self.canonical_base,
            now: ingested.facts.now,
            // Over the parsed document, so that whitespace does not change ids.
            request_digest: write::request_digest(doc),
            identifiers: &ingested.identifiers,
        };
        let workup = assessment.finding.as_ref().and_then(|f| workup::run(&ingested.facts, &self.rules.rules, f));
        if let Some(w) = &workup {
            assessment.unused.extend(w.unused.iter().cloned());
            if w.leading_tied && !w.plan.proposals.is_empty() && assessment.status != status::GuidanceStatus::Failure {
                assessment.status = status::GuidanceStatus::DataRequired;
            }
        }
        let treatment = assessment
            .finding
            .as_ref()
            .and_then(|f| treatment::plan(&self.rules.rules, &ingested.facts, f, workup.as_ref()));
        // Everything recognised that no rule read is listed too.
        let read_by_workup: Vec<&str> = workup
            .iter()
            .flat_map(|w| w.readings.labs.values().chain(w.readings.egfr.iter()))
            .flat_map(|r| r.sources.iter().map(|s| s.expression.as_str()))
            .collect();
        let mut listed: Vec<String> = assessment.unused.iter().map(|u| u.source.expression.clone()).collect();
        if let Some(w) = treatment.as_ref().and_then(|t| t.weight.as_ref()) {
            listed.push(w.source.expression.clone());
        }
        let rest: Vec<_> = status::unused_by_status(&ingested.facts)
            .into_iter()
            .filter(|u| {
                !read_by_workup.contains(&u.source.expression.as_str()) && !listed.contains(&u.source.expression)
            })
            .collect();
        assessment.unused.extend(rest);
        if !failed.is_empty() && assessment.status != status::GuidanceStatus::Failure {
            assessment.status = status::GuidanceStatus::DataRequired;
        }
        let trace = explain.then(|| {
            let mut steps = crate::fhir::write_explain::set_aside_steps(&ingested);
            steps.extend(explain::trace(&self.rules.rules, &assessment, workup.as_ref(), treatment.as_ref()));
            steps
        });
        let bundle =
            write::result_bundle(&ctx, &ingested, &assessment, workup.as_ref(), treatment.as_ref(), trace.as_deref());
        Ok(Outcome {
            bundle,
            trace,
            status: assessment.status.code(),
            severity: assessment.finding.as_ref().and_then(|f| f.severity).map(|s| s.code()),
            not_used: ingested.set_aside.len() + assessment.unused.len(),
        })
    }
}
