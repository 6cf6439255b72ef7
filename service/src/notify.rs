//! Result notifications (FHIR R4 Subscriptions Backport IG): a notification
//! Bundle (type history, first entry a SubscriptionStatus Parameters) says a
//! result arrived; the service answers fast (202) and does the work on a
//! bounded queue. Handshakes and heartbeats are acknowledged and do nothing.
//! A full queue answers 503 with Retry-After so the sender redelivers; nothing
//! is dropped silently. A delivery already seen (same subscription and event
//! number) is acknowledged and not queued again.

use std::collections::{HashSet, VecDeque};
use std::sync::Mutex;

use serde_json::Value;

use crate::fhir::outcome::{IssueCode, RequestError};

/// One piece of work: an event about a resource.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Job {
    /// The focus reference (e.g. `Observation/123` or an absolute URL).
    pub focus: String,
    /// The focus resource when the payload carried it (full-resource payloads).
    pub resource: Option<Value>,
    /// Dedupe key: subscription and event number.
    pub key: String,
}

/// What a notification asked for.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Notice {
    /// handshake or heartbeat: acknowledge only.
    Acknowledge(String),
    /// Events to work on.
    Events(Vec<Job>),
}

fn str_at<'v>(v: &'v Value, k: &str) -> Option<&'v str> {
    v.get(k).and_then(Value::as_str)
}

fn param<'v>(params: &'v [Value], name: &str) -> Option<&'v Value> {
    params.iter().find(|p| str_at(p, "name") == Some(name))
}

/// Parse a notification Bundle.
pub fn parse(doc: &Value) -> Result<Notice, RequestError> {
    let bad = |expr: &str, msg: &str| RequestError::single(422, IssueCode::Structure, expr, msg);
    if str_at(doc, "resourceType") != Some("Bundle") || str_at(doc, "type") != Some("history") {
        return Err(bad("Bundle.type", "A notification is a Bundle of type history (FHIR Subscriptions Backport IG)."));
    }
    let entries = doc.get("entry").and_then(Value::as_array).map(Vec::as_slice).unwrap_or_default();
    let status = entries
        .first()
        .and_then(|e| e.get("resource"))
        .filter(|r| str_at(r, "resourceType") == Some("Parameters"))
        .ok_or_else(|| bad("Bundle.entry[0].resource", "The first entry must be the SubscriptionStatus Parameters."))?;
    let params = status.get("parameter").and_then(Value::as_array).map(Vec::as_slice).unwrap_or_default();
    let kind = param(params, "type").and_then(|p| str_at(p, "valueCode")).unwrap_or("");
    let subscription = param(params, "subscription")
        .and_then(|p| p.get("valueReference"))
        .and_then(|r| str_at(r, "reference"))
        .ok_or_else(|| {
            bad("Bundle.entry[0].resource.parameter", "SubscriptionStatus has no subscription reference.")
        })?;
    match kind {
        "handshake" | "heartbeat" => return Ok(Notice::Acknowledge(kind.to_owned())),
        "event-notification" => {}
        other => {
            return Err(RequestError::single(
                422,
                IssueCode::NotSupported,
                "Bundle.entry[0].resource.parameter",
                format!("Notification type '{other}' is not handled (handshake, heartbeat, event-notification)."),
            ));
        }
    }
    let mut jobs = Vec::new();
    for (k, ev) in params.iter().filter(|p| str_at(p, "name") == Some("notification-event")).enumerate() {
        let parts = ev.get("part").and_then(Value::as_array).map(Vec::as_slice).unwrap_or_default();
        let number = param(parts, "event-number").and_then(|p| str_at(p, "valueString")).unwrap_or("");
        let focus = param(parts, "focus")
            .and_then(|p| p.get("valueReference"))
            .and_then(|r| str_at(r, "reference"))
            .ok_or_else(|| {
                bad(&format!("Bundle.entry[0].resource.parameter[notification-event {k}]"), "An event has no focus.")
            })?;
        if number.is_empty() {
            return Err(bad("Bundle.entry[0].resource.parameter", "An event has no event-number."));
        }
        // Full-resource payloads carry the focus.
        let resource = entries.iter().skip(1).find_map(|e| {
            let url = str_at(e, "fullUrl").unwrap_or("");
            let r = e.get("resource")?;
            let id = format!("{}/{}", str_at(r, "resourceType")?, str_at(r, "id").unwrap_or(""));
            (url == focus || url.ends_with(&format!("/{focus}")) || id == focus).then(|| r.clone())
        });
        jobs.push(Job { focus: focus.to_owned(), resource, key: format!("{subscription}#{number}") });
    }
    Ok(Notice::Events(jobs))
}

/// Why an event leads to no assessment.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum NotRelevant {
    /// The focus is not an Observation.
    NotAnObservation(String),
    /// The Observation carries none of the codes the rules read.
    OtherCode,
    /// The Observation names no patient subject.
    NoPatient,
}

/// The patient of an event's focus, when it is an Observation with one of
/// `known_codes` (`system|code` tokens: the analytes and vital signs the
/// rules read; a new magnesium or weight changes the assessment too).
pub fn relevant_patient(focus: &Value, known_codes: &[String]) -> Result<String, NotRelevant> {
    let kind = str_at(focus, "resourceType").unwrap_or("");
    if kind != "Observation" {
        return Err(NotRelevant::NotAnObservation(kind.to_owned()));
    }
    let coded = focus
        .get("code")
        .and_then(|c| c.get("coding"))
        .and_then(Value::as_array)
        .into_iter()
        .flatten()
        .filter_map(|c| Some(format!("{}|{}", str_at(c, "system")?, str_at(c, "code")?)))
        .any(|t| known_codes.contains(&t));
    if !coded {
        return Err(NotRelevant::OtherCode);
    }
    focus
        .get("subject")
        .and_then(|s| str_at(s, "reference"))
        .and_then(|s| s.rsplit_once("Patient/").map(|(_, id)| id.to_owned()))
        .ok_or(NotRelevant::NoPatient)
}

/// Keys already queued, bounded (oldest forgotten first).
#[derive(Debug)]
pub struct Seen {
    inner: Mutex<(HashSet<String>, VecDeque<String>)>,
    capacity: usize,
}

impl Seen {
    /// A set remembering at most `capacity` keys.
    pub fn new(capacity: usize) -> Self {
        Self { inner: Mutex::new((HashSet::new(), VecDeque::new())), capacity: capacity.max(1) }
    }
    /// True when the key was already recorded.
    pub fn contains(&self, key: &str) -> bool {
        self.inner.lock().map(|g| g.0.contains(key)).unwrap_or(false)
    }
    /// Forget a key (its work failed: a redelivery is worked again).
    pub fn remove(&self, key: &str) {
        if let Ok(mut g) = self.inner.lock()
            && g.0.remove(key)
        {
            g.1.retain(|k| k != key);
        }
    }
    /// Record a key.
    pub fn insert(&self, key: String) {
        if let Ok(mut g) = self.inner.lock()
            && g.0.insert(key.clone())
        {
            g.1.push_back(key);
            while g.1.len() > self.capacity {
                if let Some(old) = g.1.pop_front() {
                    g.0.remove(&old);
                }
            }
        }
    }
}

/// Resource types written back (the ones that carry an identifier).
const WRITTEN: &[&str] = &[
    "Device",
    "GuidanceResponse",
    "Observation",
    "DetectedIssue",
    "ClinicalImpression",
    "ServiceRequest",
    "MedicationRequest",
    "RequestGroup",
];

/// Identifier system of written results.
pub fn identifier_system(canonical_base: &str) -> String {
    format!("{canonical_base}/sid/result")
}

/// Is there something to say (hypocalcemia, a safety issue, or next tests)?
pub fn worth_writing(result: &Value) -> bool {
    result.get("entry").and_then(Value::as_array).into_iter().flatten().any(|e| {
        matches!(e.get("resource").and_then(|r| str_at(r, "resourceType")), Some("DetectedIssue" | "ServiceRequest"))
    })
}

/// The write-back transaction: every written resource gets an identifier
/// derived from the input content, the rule-set hash and its place in the
/// result, and is a conditional create on it, so a redelivery or a retry
/// creates nothing twice.
pub fn transaction(result: &Value, input_digest: &[u8; 32], rules_sha: &str, canonical_base: &str) -> Value {
    use sha2::{Digest, Sha256};
    let system = identifier_system(canonical_base);
    let mut entries = Vec::new();
    for (k, e) in result.get("entry").and_then(Value::as_array).into_iter().flatten().enumerate() {
        let Some(r) = e.get("resource") else { continue };
        let Some(t) = str_at(r, "resourceType").filter(|t| WRITTEN.contains(t)) else { continue };
        let mut h = Sha256::new();
        h.update(input_digest);
        h.update(rules_sha.as_bytes());
        h.update(k.to_be_bytes());
        h.update(t.as_bytes());
        let value: String = h.finalize().iter().take(16).map(|b| format!("{b:02x}")).collect();
        let mut r = r.clone();
        if let Some(o) = r.as_object_mut() {
            o.remove("id");
            let mut ids = o.get("identifier").and_then(Value::as_array).cloned().unwrap_or_default();
            ids.push(serde_json::json!({ "system": system, "value": value }));
            o.insert("identifier".into(), Value::Array(ids));
        }
        entries.push(serde_json::json!({
            "fullUrl": e.get("fullUrl").cloned().unwrap_or(Value::Null),
            "resource": r,
            "request": { "method": "POST", "url": t, "ifNoneExist": format!("identifier={system}|{value}") },
        }));
    }
    serde_json::json!({ "resourceType": "Bundle", "type": "transaction", "entry": entries })
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    fn known() -> Vec<String> {
        vec!["http://loinc.org|1994-3".to_owned()]
    }

    #[test]
    fn only_observations_with_a_known_code_and_a_patient_are_relevant() {
        let ica = json!({ "resourceType": "Observation", "code": { "coding": [{ "system": "http://loinc.org", "code": "1994-3" }] }, "subject": { "reference": "Patient/p-1" } });
        assert_eq!(relevant_patient(&ica, &known()), Ok("p-1".to_owned()));
        let other = json!({ "resourceType": "Observation", "code": { "coding": [{ "system": "http://loinc.org", "code": "718-7" }] }, "subject": { "reference": "Patient/p-1" } });
        assert_eq!(relevant_patient(&other, &known()), Err(NotRelevant::OtherCode));
        let report = json!({ "resourceType": "DiagnosticReport" });
        assert_eq!(relevant_patient(&report, &known()), Err(NotRelevant::NotAnObservation("DiagnosticReport".into())));
        let group = json!({ "resourceType": "Observation", "code": { "coding": [{ "system": "http://loinc.org", "code": "1994-3" }] }, "subject": { "reference": "Group/g-1" } });
        assert_eq!(relevant_patient(&group, &known()), Err(NotRelevant::NoPatient));
    }

    #[test]
    fn a_forgotten_key_is_no_longer_seen() {
        let seen = Seen::new(2);
        seen.insert("s#1".into());
        seen.insert("s#2".into());
        seen.remove("s#1");
        assert!(!seen.contains("s#1") && seen.contains("s#2"));
        seen.insert("s#3".into());
        seen.insert("s#4".into());
        assert!(!seen.contains("s#2"), "the oldest is forgotten past the capacity");
    }
}
