//! Results an EHR can store (issue 14, sections 5 and 6): every literal
//! reference in every answer resolves inside the answer (a `fullUrl`) or is a
//! relative `Type/id` of the input; and the resource types the service
//! declares for its result Bundle are exactly the types its answers hold.
//!
//! The answers are those of every example (fhir-profiles/examples), every
//! case of tests/cases (default rules) and tests/cases-site (the site rules),
//! each assessed with the explain trace so that every resource type can occur.

use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;

use calcium_cds::engine::Engine;
use serde_json::Value;

use crate::helpers::{EXAMPLE_NOW, examples_dir, repo_path};

fn engine(site: Option<(&str, &str)>) -> Engine {
    Engine::new(calcium_cds::rules::load::load(site).expect("rules load")).expect("engine")
}

fn instant(text: &str) -> i64 {
    calcium_cds::fhir::datetime::parse_date_time(text).expect("a dateTime").when.earliest
}

/// Every answer: (label, answer Bundle or request-level OperationOutcome).
pub fn all_answers() -> Vec<(String, Value)> {
    let mut out = Vec::new();
    let default = engine(None);
    let answer = |e: &Engine, body: &[u8], now: i64| match e.assess_with(body, now, true, true) {
        Ok(outcome) => outcome.bundle,
        Err(err) => err.to_operation_outcome(),
    };
    let mut files: Vec<_> = std::fs::read_dir(examples_dir())
        .expect("examples")
        .filter_map(Result::ok)
        .map(|d| d.path())
        .filter(|p| p.extension().is_some_and(|x| x == "json"))
        .collect();
    files.sort();
    for f in files {
        let body = std::fs::read(&f).expect("example");
        out.push((format!("example {}", f.display()), answer(&default, &body, instant(EXAMPLE_NOW))));
    }
    let mut cases = |e: &Engine, dir: &Path| {
        for (name, request, expect) in calcium_cds::cases::find_cases(dir).expect("cases") {
            let t: toml::Table = toml::from_str(&std::fs::read_to_string(&expect).expect("expect")).expect("toml");
            let now = instant(t["now"].as_str().expect("now"));
            let body = std::fs::read(&request).expect("request");
            out.push((format!("case {name}"), answer(e, &body, now)));
        }
    };
    cases(&default, &repo_path("tests/cases"));
    let site_text = std::fs::read_to_string(repo_path("tests/cases-site/site-rules.toml")).expect("site rules");
    let site = engine(Some(("site-rules.toml", &site_text)));
    cases(&site, &repo_path("tests/cases-site"));
    out
}

/// Every object holding a string `reference`, with its path.
fn references<'a>(v: &'a Value, at: String, out: &mut Vec<(String, &'a Value)>) {
    match v {
        Value::Array(a) => a.iter().enumerate().for_each(|(i, x)| references(x, format!("{at}[{i}]"), out)),
        Value::Object(o) => {
            if o.get("reference").is_some_and(Value::is_string) {
                out.push((at.clone(), v));
            }
            o.iter().for_each(|(k, x)| references(x, format!("{at}.{k}"), out));
        }
        _ => {}
    }
}

/// A relative literal reference `Type/id` (FHIR R4 3.1.0.4.2: `[type]/[id]`).
fn relative(reference: &str) -> Option<(&str, &str)> {
    let (ty, id) = reference.split_once('/')?;
    let type_ok = ty.len() > 1
        && ty.starts_with(|c: char| c.is_ascii_uppercase())
        && ty.chars().all(|c| c.is_ascii_alphanumeric());
    let id_ok = (1..=64).contains(&id.len()) && id.bytes().all(|b| b.is_ascii_alphanumeric() || b == b'-' || b == b'.');
    (type_ok && id_ok).then_some((ty, id))
}

/// The references of one answer that resolve neither inside it nor as `Type/id`.
fn dangling(answer: &Value) -> Vec<String> {
    let mut full_urls: BTreeMap<&str, &str> = BTreeMap::new();
    for e in answer["entry"].as_array().into_iter().flatten() {
        if let Some(u) = e["fullUrl"].as_str() {
            full_urls.insert(u, e["resource"]["resourceType"].as_str().unwrap_or(""));
        }
    }
    let mut found = Vec::new();
    references(answer, String::new(), &mut found);
    let mut bad = Vec::new();
    for (at, r) in found {
        let reference = r["reference"].as_str().unwrap_or("");
        let declared = r["type"].as_str();
        let resolved_type =
            if let Some(ty) = full_urls.get(reference) { Some(*ty) } else { relative(reference).map(|(ty, _)| ty) };
        match resolved_type {
            None => bad.push(format!("{at}: '{reference}' resolves neither in the answer nor as Type/id")),
            Some(ty) if declared.is_some_and(|d| d != ty) => {
                bad.push(format!("{at}: '{reference}' is a {ty} but Reference.type says {declared:?}"))
            }
            Some(_) => {}
        }
    }
    bad
}

#[test]
fn the_checker_refuses_what_would_dangle() {
    let answer = serde_json::json!({
        "resourceType": "Bundle",
        "entry": [
            { "fullUrl": "urn:uuid:1", "resource": { "resourceType": "GuidanceResponse",
                "subject": { "reference": "urn:uuid:2" },
                "performer": { "reference": "urn:uuid:3", "type": "Device" },
                "evaluationMessage": [{ "reference": "urn:uuid:1", "type": "OperationOutcome" }] } },
            { "fullUrl": "urn:uuid:3", "resource": { "resourceType": "Device",
                "parent": { "reference": "Device/d-1" },
                "owner": { "reference": "http://other.example/fhir/Organization/1" },
                "patient": { "display": "no reference at all" } } }
        ]
    });
    let bad = dangling(&answer);
    assert_eq!(bad.len(), 3, "{bad:#?}");
    assert!(bad[0].contains("urn:uuid:2"), "{bad:#?}");
    assert!(bad.iter().any(|b| b.contains("Reference.type says Some(\"OperationOutcome\")")), "{bad:#?}");
    assert!(bad.iter().any(|b| b.contains("other.example")), "{bad:#?}");
}

#[test]
fn every_reference_in_every_answer_resolves_in_the_answer_or_as_type_and_id() {
    let answers = all_answers();
    assert!(answers.len() > 100, "{} answers", answers.len());
    let mut bad = Vec::new();
    let mut checked = 0;
    for (label, answer) in &answers {
        let mut refs = Vec::new();
        references(answer, String::new(), &mut refs);
        checked += refs.len();
        bad.extend(dangling(answer).into_iter().map(|b| format!("{label} {b}")));
    }
    assert!(checked > 2000, "{checked} references checked");
    // The request Patients without an id but with an identifier (most case Patients)
    // are the subject by identifier.
    let by_identifier = answers
        .iter()
        .filter_map(|(_, a)| a["entry"].as_array()?.first().cloned())
        .filter(|e| e["resource"]["subject"]["identifier"]["value"].is_string())
        .count();
    assert!(by_identifier > 50, "{by_identifier} GuidanceResponses name their subject by identifier");
    assert!(bad.is_empty(), "{} dangling references:\n{}", bad.len(), bad.join("\n"));
}

/// The resource types of the entries of every answer Bundle.
pub fn types_seen(answers: &[(String, Value)]) -> BTreeSet<String> {
    answers
        .iter()
        .filter(|(_, a)| a["resourceType"] == "Bundle")
        .flat_map(|(_, a)| a["entry"].as_array().into_iter().flatten())
        .filter_map(|e| e["resource"]["resourceType"].as_str().map(str::to_owned))
        .collect()
}

#[test]
fn the_declared_result_types_are_the_types_the_answers_hold() {
    let declared: BTreeSet<String> =
        calcium_cds::fhir::write::RESULT_RESOURCE_TYPES.iter().map(|t| (*t).to_owned()).collect();
    let seen = types_seen(&all_answers());
    assert_eq!(declared, seen, "declared (left) and seen in the answers of every example and case (right)");
}
