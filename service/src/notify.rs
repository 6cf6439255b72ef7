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
    /// The patient id when the payload carried the resource.
    pub patient_id: Option<String>,
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
        // Full-resource payloads carry the focus: take the patient from it.
        let patient_id = entries.iter().skip(1).find_map(|e| {
            let url = str_at(e, "fullUrl").unwrap_or("");
            let r = e.get("resource")?;
            let id = format!("{}/{}", str_at(r, "resourceType")?, str_at(r, "id").unwrap_or(""));
            (url == focus || url.ends_with(&format!("/{focus}")) || id == focus)
                .then(|| str_at(r.get("subject")?, "reference"))
                .flatten()
                .and_then(|s| s.rsplit_once("Patient/").map(|(_, id)| id.to_owned()))
        });
        jobs.push(Job { focus: focus.to_owned(), patient_id, key: format!("{subscription}#{number}") });
    }
    Ok(Notice::Events(jobs))
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
