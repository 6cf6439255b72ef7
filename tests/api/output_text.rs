//! Sources a clinician can follow: no text the service writes cites "memory",
//! a "brief", a lecture or slides, or a bare internal file name (a `.md`,
//! `.toml`, `.rs` or `.py` file of this repository). Every case request of
//! both case sets and every synthetic scenario is assessed with the explain
//! trace, and every string of the answer is read; every case's
//! answer is checked against the official R4 JSON Schema as well.

use std::path::Path;

use calcium_cds::engine::Engine;
use calcium_cds::synth::{self, Catalogue, Request, Sex};
use serde_json::Value;

use crate::helpers::repo_path;
use crate::synth::LOCAL_125D;

/// Words that betray a figure without a published source behind it.
const FORBIDDEN_WORDS: &[&str] = &["memory", "brief", "lecture", "lectures", "slide", "slides"];
/// Endings of this repository's own files.
const INTERNAL_FILE_ENDINGS: &[&str] = &[".md", ".toml", ".rs", ".py"];

/// The problems in one text: forbidden words, and bare file names (a word ending
/// in an internal file ending that is not part of a URL or path).
fn problems(text: &str) -> Vec<String> {
    let mut out = Vec::new();
    // A phrase that points at our own files without naming them.
    if text.to_lowercase().contains("in this file") {
        out.push("'in this file'".to_owned());
    }
    for raw in text.split_whitespace() {
        let word = raw.trim_matches(|c: char| !c.is_alphanumeric() && c != '.' && c != '_' && c != '-' && c != '/');
        let word = word.trim_end_matches('.');
        let lower = word.to_lowercase();
        let bare = lower.trim_matches(|c: char| !c.is_alphanumeric());
        if FORBIDDEN_WORDS.contains(&bare) {
            out.push(format!("'{bare}'"));
        }
        if !lower.contains('/') && INTERNAL_FILE_ENDINGS.iter().any(|e| lower.ends_with(e) && lower.len() > e.len()) {
            out.push(format!("file name '{word}'"));
        }
    }
    out
}

fn strings<'a>(v: &'a Value, at: String, out: &mut Vec<(String, &'a str)>) {
    match v {
        Value::String(s) => out.push((at, s)),
        Value::Array(a) => a.iter().enumerate().for_each(|(i, x)| strings(x, format!("{at}[{i}]"), out)),
        Value::Object(o) => o.iter().for_each(|(k, x)| strings(x, format!("{at}.{k}"), out)),
        _ => {}
    }
}

fn scan(label: &str, v: &Value, found: &mut Vec<String>) {
    let mut all = Vec::new();
    strings(v, String::new(), &mut all);
    for (at, s) in all {
        for p in problems(s) {
            found.push(format!("{label} {at}: {p} in \"{}\"", s.chars().take(160).collect::<String>()));
        }
    }
}

fn engine(site: Option<(&str, &str)>) -> Engine {
    Engine::new(calcium_cds::rules::load::load(site).expect("rules load")).expect("engine")
}

fn case_now(expect: &Path) -> i64 {
    let t: toml::Table = toml::from_str(&std::fs::read_to_string(expect).unwrap()).unwrap();
    let now = t["now"].as_str().unwrap();
    calcium_cds::fhir::datetime::parse_date_time(now).unwrap().when.earliest
}

fn scan_case_dir(e: &Engine, dir: &Path, found: &mut Vec<String>) -> usize {
    let cases = calcium_cds::cases::find_cases(dir).unwrap();
    for (name, request, expect) in &cases {
        let body = std::fs::read(request).unwrap();
        let answer = match e.assess_with(&body, case_now(expect), true, true) {
            Ok(outcome) => outcome.bundle,
            Err(err) => err.to_operation_outcome(),
        };
        scan(name, &answer, found);
        // Every case's answer, with its trace, is valid against the official R4 schema.
        found.extend(crate::helpers::r4_problems(&answer).into_iter().map(|p| format!("{name}: not valid R4: {p}")));
    }
    cases.len()
}

#[test]
fn the_checker_finds_what_it_looks_for() {
    assert_eq!(problems("Common practice (from memory): a figure."), vec!["'memory'"]);
    assert_eq!(problems("See the project brief."), vec!["'brief'"]);
    assert_eq!(problems("As in WORKUP-SOURCES.md (citrate)."), vec!["file name 'WORKUP-SOURCES.md'"]);
    assert_eq!(problems("thresholds in lab-ranges.toml."), vec!["file name 'lab-ranges.toml'"]);
    // A published listing's URL may end in .md; a plain sentence passes.
    assert_eq!(problems("Product strengths in this file."), vec!["'in this file'"]);
    assert!(problems("read in https://github.com/x/y/blob/HEAD/Page/ATC_(A11).md").is_empty());
    assert!(problems("Give over 10 minutes (US label, NDC 63323-360). Briefly flush.").is_empty());
}

#[test]
fn no_answer_cites_memory_a_brief_or_an_internal_file() {
    let mut found = Vec::new();
    let default = engine(None);
    let n = scan_case_dir(&default, &repo_path("tests/cases"), &mut found);
    assert!(n > 50, "{n} cases");
    let site_text = std::fs::read_to_string(repo_path("tests/cases-site/site-rules.toml")).unwrap();
    let site = engine(Some(("site-rules.toml", &site_text)));
    scan_case_dir(&site, &repo_path("tests/cases-site"), &mut found);
    // Every synthetic scenario, once each, with the site code for 1,25-(OH)2D where needed.
    let local = engine(Some(("larkspur-synth-test.toml", LOCAL_125D)));
    let cat = Catalogue::embedded().unwrap();
    let now = 1_796_050_800;
    for sc in &cat.scenarios {
        let needs_site = sc.labs.contains_key(&calcium_cds::clinical::facts::Analyte::VitaminD1_25);
        let e = if needs_site { &local } else { &default };
        let age_days = synth::parse_age(&sc.ages[0]).unwrap();
        let req = Request { scenario: sc.name.clone(), age_days, sex: Some(Sex::Female), seed: 1, now };
        let bundle = synth::make(&e.rules.rules, &cat, &req).unwrap();
        let body = serde_json::to_vec(&bundle).unwrap();
        match e.assess_with(&body, now, true, true) {
            Ok(outcome) => scan(&format!("synth {}", sc.name), &outcome.bundle, &mut found),
            Err(err) => scan(&format!("synth {}", sc.name), &err.to_operation_outcome(), &mut found),
        }
    }
    found.sort();
    found.dedup();
    assert!(found.is_empty(), "{} texts:\n{}", found.len(), found.join("\n"));
}
