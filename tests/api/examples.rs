//! Every example request through the CLI binary and the service: the
//! clinically expected result (decided by hand from each file), R4 validity,
//! determinism.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use std::io::Write;
use std::process::{Command, Output, Stdio};

use serde_json::{Value, json};

use crate::helpers::{
    EXAMPLE_NOW, assert_r4_valid, cited_inputs, example, examples_dir, guidance_notes, guidance_status, issue_at,
    issue_expressions, outcome_issues, resources, spawn_app,
};

const BIN: &str = env!("CARGO_BIN_EXE_calcium-cds");

fn round2(v: f64) -> f64 {
    (v * 100.0).round() / 100.0
}

/// What each example must give at 2026-11-30T15:00:00Z, worked out by hand.
struct Expected {
    file: &'static str,
    /// GuidanceResponse.status.
    status: &'static str,
    /// DetectedIssue.severity; None: no DetectedIssue (no hypocalcemia, or not assessable).
    severity: Option<&'static str>,
    /// Text the GuidanceResponse summary (first note) must contain: the band and value used.
    summary: &'static [&'static str],
    /// Albumin-adjusted calcium (LOINC 29265-6), mmol/L, and its interpretation code.
    derived: Option<(f64, &'static str)>,
    /// References the DetectedIssue evidence must cite.
    evidence: &'static [&'static str],
    /// References that must not be cited anywhere as used (DetectedIssue, Provenance).
    not_used: &'static [&'static str],
    /// Expressions (after the Bundle's own path) the result OperationOutcome must list.
    listed: &'static [&'static str],
    /// Work-up: the first ClinicalImpression findings, in order (text prefixes);
    /// empty: no ClinicalImpression (no hypocalcemia).
    leading: &'static [&'static str],
    /// Work-up: LOINC codes of the proposed ServiceRequests, in order.
    proposed: &'static [&'static str],
}

fn expectations() -> Vec<Expected> {
    vec![
        // Girl, 2 y 2 mo (child band, ionized 1.11-1.30): 0.82 mmol/L is at or below
        // the severe grade 0.9, and a seizure that morning makes it symptomatic: high.
        Expected {
            // With only an ionized calcium, the work-up cannot tell the leading causes
            // apart (issue 3): data-required; it proposes PTH, phosphate, 25-OH vitamin D and magnesium.
            file: "ionized-low-seizure-toddler.json",
            status: "data-required",
            severity: Some("high"),
            summary: &["0.82 mmol/L", "Child (2 to under 12 years)", "symptomatic"],
            derived: None,
            evidence: &[
                "urn:uuid:ca24593e-0148-5e0c-8984-f5ceeb674c4e",
                "urn:uuid:52735eca-05f4-5ffa-8b82-257b98e33be1",
            ],
            // The weight (12.1 kg) is the dosing weight of the IV proposals.
            not_used: &[],
            listed: &[],
            leading: &["Nutritional vitamin D deficiency", "Dietary calcium deficiency", "Hypoparathyroidism"],
            proposed: &["2731-8", "2777-1", "62292-8", "19123-9"],
        },
        // Boy, 7 y (child band, adjusted 2.20-2.70): 7.6 + 0.8 x (4.0 - 2.6) = 8.72 mg/dL
        // = 2.18 mmol/L, low. QTc 468 ms (> 440) 35 min after the draw: symptomatic, high.
        // Albumin 26 g/L is below 30 g/L: the estimate is unreliable, ionized Ca required.
        Expected {
            file: "total-calcium-low-albumin-child.json",
            status: "data-required",
            severity: Some("high"),
            summary: &["2.18 mmol/L", "Child (2 to under 12 years)", "symptomatic"],
            derived: Some((round2((7.6 + 0.8 * (4.0 - 2.6)) * 10.0 / 40.078), "L")),
            evidence: &[
                "Observation/ca-tot-73115-1",
                "Observation/alb-73115-1",
                "urn:uuid:a0c0040f-1a2a-5ebb-8296-a44302f55660",
            ],
            not_used: &[],
            listed: &[],
            leading: &["Nutritional vitamin D deficiency"],
            proposed: &["2731-8", "2777-1", "62292-8", "19123-9"],
        },
        // Girl, 14 y (adolescent, adjusted 2.20-2.70): 1.95 + 0.02 x (40 - 31) = 2.13 mmol/L,
        // low but above the mild grade 2.0: low severity. Albumin 31 g/L (not < 30):
        // an ionized calcium is requested to confirm.
        Expected {
            file: "total-calcium-si-units.json",
            status: "data-required",
            severity: Some("low"),
            summary: &["2.13 mmol/L", "Adolescent (12 to under 19 years)"],
            derived: Some((round2(1.95 + 0.02 * (40.0 - 31.0)), "L")),
            evidence: &["Observation/ca-tot-58820-7", "Observation/alb-58820-7"],
            not_used: &[],
            listed: &[],
            leading: &["Nutritional vitamin D deficiency"],
            proposed: &["2731-8", "2777-1", "62292-8", "19123-9"],
        },
        // Boy, 15 y: ionized 1.24 within 1.11-1.30. The total and albumin are not used
        // (ionized preferred), so no adjusted calcium is derived.
        Expected {
            file: "normal-calcium-adolescent.json",
            status: "success",
            severity: None,
            summary: &["No hypocalcemia", "1.24 mmol/L", "Adolescent (12 to under 19 years)"],
            derived: None,
            evidence: &[],
            not_used: &[
                "urn:uuid:d41eee28-7b5f-5fc7-936b-d37eed2e57c6",
                "urn:uuid:6292940e-67f0-5409-94f4-7004165e13ea",
            ],
            listed: &[".entry[2].resource", ".entry[3].resource"],
            leading: &[],
            proposed: &[],
        },
        // Girl, 2 days, gestation unknown: term-neonate band (ionized 1.10-1.35);
        // 0.95 is at or below the mild grade 1.0 (moderate), above the severe 0.7.
        Expected {
            file: "neonate-day-two.json",
            status: "data-required",
            severity: Some("moderate"),
            summary: &["0.95 mmol/L", "Neonate (0-28 days)", "1.10-1.35"],
            derived: None,
            evidence: &["urn:uuid:44547499-ba6e-54ea-a7e7-91015a9b5bd0"],
            not_used: &[],
            // The weight is the dosing weight of the oral calcium proposal.
            listed: &[],
            leading: &["Nutritional vitamin D deficiency"],
            // A neonate: PTH and 25-OH vitamin D weigh more (blood volume), phosphate first.
            proposed: &["2777-1", "2731-8", "19123-9", "62292-8"],
        },
        // Child, 6 y: ionized 1.02 below 1.11 but above the mild grade 1.0: low.
        Expected {
            file: "parameters-wrapper.json",
            status: "data-required",
            severity: Some("low"),
            summary: &["1.02 mmol/L", "Child (2 to under 12 years)"],
            derived: None,
            evidence: &["urn:uuid:ba87959c-313b-5ac4-8b48-5c4d04653156"],
            not_used: &[],
            listed: &[],
            leading: &["Nutritional vitamin D deficiency"],
            proposed: &["2731-8", "2777-1", "62292-8", "19123-9"],
        },
        // No calcium at all: nothing to judge; the albumin is listed as not used.
        Expected {
            file: "albumin-only.json",
            status: "data-required",
            severity: None,
            summary: &["Not assessed"],
            derived: None,
            evidence: &[],
            not_used: &["urn:uuid:ecc466e2-3a41-55f3-ae6d-de9ab6d0ff3f"],
            listed: &[".entry[1].resource"],
            leading: &[],
            proposed: &[],
        },
        // Girl, 9 y: the one usable result is ionized 1.05 (low, above the mild grade).
        // The entered-in-error 0.71 (which would be severe) must not be used.
        Expected {
            file: "set-aside-mix.json",
            status: "data-required",
            severity: Some("low"),
            summary: &["1.05 mmol/L", "Child (2 to under 12 years)"],
            derived: None,
            evidence: &["Observation/ica-usable"],
            not_used: &[
                "Observation/tca-preliminary",
                "Observation/ica-entered-in-error",
                "Observation/tca-data-absent",
                "Observation/tca-no-ucum-code",
                "Observation/ica-other-patient",
                "Observation/tca-future",
            ],
            listed: &[
                ".entry[2].resource",
                ".entry[3].resource.status",
                ".entry[4].resource.dataAbsentReason",
                ".entry[5].resource.valueQuantity.code",
                ".entry[6].resource.subject.reference",
                ".entry[7].resource.effectiveDateTime",
            ],
            leading: &["Nutritional vitamin D deficiency"],
            proposed: &["2731-8", "2777-1", "62292-8", "19123-9"],
        },
        // Boy, 25 months (child band): ionized 0.98 is at or below the mild grade 1.0:
        // moderate. 25-OH vitamin D 6 ng/mL (15 nmol/L, deficient below 30), PTH high,
        // phosphate low, ALP high: nutritional vitamin D deficiency is the one likely
        // cause (Work-up (a)-(c)), so the status is success. The 1,25-(OH)2D tests are
        // not proposed: a low 25-OH vitamin D makes both vitamin D-dependent types unlikely.
        Expected {
            file: "workup-vitamin-d-deficiency-toddler.json",
            status: "success",
            severity: Some("moderate"),
            summary: &["0.98 mmol/L", "Child (2 to under 12 years)"],
            derived: None,
            evidence: &[],
            not_used: &[],
            // The weight is the dosing weight; the height is not used because there
            // is no creatinine for an eGFR.
            listed: &[".entry[8].resource"],
            leading: &["Nutritional vitamin D deficiency", "Dietary calcium deficiency"],
            proposed: &["2160-0", "11558-4"],
        },
        // Girl, 11 y: ionized 0.92 (mild: moderate). Magnesium 0.9 mg/dL = 0.37 mmol/L is
        // low, furosemide is active: hypomagnesemia leads (Work-up (d)), and PTH is held
        // back until magnesium is corrected, so it is not proposed.
        Expected {
            file: "workup-hypomagnesemia-furosemide.json",
            status: "success",
            severity: Some("moderate"),
            summary: &["0.92 mmol/L", "Child (2 to under 12 years)"],
            derived: None,
            evidence: &[],
            not_used: &[],
            listed: &[],
            leading: &["Hypomagnesemia"],
            // No PTH (held back); the urine Ca/Cr and 1,25-(OH)2D have no verified order code.
            proposed: &["62292-8", "11558-4", "(text only)", "(text only)"],
        },
    ]
}

/// The path of the request's Bundle: "Bundle", or the Parameters part holding it.
fn bundle_path(request: &Value) -> String {
    match request["resourceType"].as_str() {
        Some("Parameters") => {
            let k = request["parameter"]
                .as_array()
                .and_then(|p| p.iter().position(|p| p["name"] == "bundle"))
                .expect("a bundle part");
            format!("Parameters.parameter[{k}].resource")
        }
        _ => "Bundle".to_owned(),
    }
}

fn check(e: &Expected, request: &Value, result: &Value, how: &str) {
    let file = e.file;
    assert_eq!(result["resourceType"], "Bundle", "{file} ({how})");
    assert_eq!(result["type"], "collection", "{file} ({how})");
    assert_r4_valid(result);
    assert_eq!(guidance_status(result), e.status, "{file} ({how}): GuidanceResponse.status");

    let summary = guidance_notes(result).first().cloned().unwrap_or_default();
    for wanted in e.summary {
        assert!(summary.contains(wanted), "{file} ({how}): summary lacks {wanted:?}: {summary}");
    }

    let issues = crate::helpers::hypocalcemia_issues(result);
    match e.severity {
        None => assert!(issues.is_empty(), "{file} ({how}): unexpected DetectedIssue {issues:?}"),
        Some(severity) => {
            assert_eq!(issues.len(), 1, "{file} ({how})");
            assert_eq!(issues[0]["severity"], severity, "{file} ({how}): severity");
            let cited = cited_inputs(&issues[0]["evidence"]);
            for r in e.evidence {
                assert!(cited.iter().any(|c| c == r), "{file} ({how}): evidence lacks {r}: {cited:?}");
            }
        }
    }

    let derived = resources(result, "Observation");
    match e.derived {
        None => assert!(derived.is_empty(), "{file} ({how}): unexpected derived Observation"),
        Some((mmol, interpretation)) => {
            assert_eq!(derived.len(), 1, "{file} ({how})");
            let obs = derived[0];
            assert!(
                obs["code"]["coding"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .any(|c| c["system"] == "http://loinc.org" && c["code"] == "29265-6"),
                "{file} ({how}): {obs}"
            );
            let q = &obs["valueQuantity"];
            let value = q["value"].as_f64().expect("a value");
            assert!((value - mmol).abs() < 1e-9, "{file} ({how}): adjusted calcium {value}, expected {mmol}");
            assert_eq!(q["system"], "http://unitsofmeasure.org");
            assert_eq!(q["code"], "mmol/L");
            assert_eq!(obs["interpretation"][0]["coding"][0]["code"], interpretation, "{file} ({how})");
        }
    }

    let used: Vec<String> = resources(result, "DetectedIssue")
        .into_iter()
        .chain(resources(result, "Provenance"))
        .flat_map(|r| {
            let mut refs = cited_inputs(&r["evidence"]);
            refs.extend(cited_inputs(&r["entity"]));
            refs
        })
        .collect();
    for r in e.not_used {
        assert!(!used.iter().any(|u| u == r), "{file} ({how}): {r} is cited as used");
    }

    let prefix = bundle_path(request);
    let outcome = outcome_issues(result);
    for suffix in e.listed {
        let at = format!("{prefix}{suffix}");
        assert!(
            issue_at(&outcome, &at).is_some(),
            "{file} ({how}): not listed at {at}; {:?}",
            issue_expressions(&outcome)
        );
    }
    if e.listed.is_empty() {
        assert!(issue_expressions(&outcome).is_empty(), "{file} ({how}): unexpected issues {outcome:?}");
    }

    // Work-up.
    let impressions = resources(result, "ClinicalImpression");
    if e.leading.is_empty() {
        assert!(impressions.is_empty(), "{file} ({how}): unexpected ClinicalImpression");
    } else {
        assert_eq!(impressions.len(), 1, "{file} ({how})");
        let findings = impressions[0]["finding"].as_array().expect("findings");
        for (k, wanted) in e.leading.iter().enumerate() {
            let text = findings[k]["itemCodeableConcept"]["text"].as_str().unwrap_or("");
            assert!(text.starts_with(wanted), "{file} ({how}): finding {k} is {text:?}, expected {wanted:?}");
        }
    }
    let proposed: Vec<String> = resources(result, "ServiceRequest")
        .iter()
        .map(|sr| {
            assert_eq!(sr["status"], "draft", "{file} ({how})");
            assert_eq!(sr["intent"], "proposal", "{file} ({how})");
            sr["code"]["coding"][0]["code"].as_str().unwrap_or("(text only)").to_owned()
        })
        .collect();
    assert_eq!(proposed, e.proposed, "{file} ({how}): proposed next tests");
}

fn run(args: &[&str], stdin: Option<&[u8]>) -> Output {
    let mut child = Command::new(BIN)
        .args(args)
        .stdin(if stdin.is_some() { Stdio::piped() } else { Stdio::null() })
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the binary starts");
    if let Some(input) = stdin {
        let mut pipe = child.stdin.take().expect("a stdin pipe");
        pipe.write_all(input).expect("stdin written");
    }
    child.wait_with_output().expect("the binary ends")
}

fn assess_file(file: &str) -> Output {
    let path = examples_dir().join(file);
    run(&["assess", path.to_str().expect("a UTF-8 path"), "--now", EXAMPLE_NOW], None)
}

fn stdout_json(out: &Output, what: &str) -> Value {
    let text = String::from_utf8_lossy(&out.stdout);
    serde_json::from_str(&text).unwrap_or_else(|e| {
        panic!("{what}: stdout is not JSON ({e}); stderr: {}", String::from_utf8_lossy(&out.stderr))
    })
}

#[test]
fn every_example_file_has_an_expectation() {
    let mut files: Vec<String> = std::fs::read_dir(examples_dir())
        .expect("the examples directory")
        .filter_map(|e| e.ok())
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.ends_with(".json"))
        .collect();
    files.sort();
    let mut expected: Vec<String> = expectations().iter().map(|e| e.file.to_owned()).collect();
    expected.sort();
    assert_eq!(files, expected);
}

#[test]
fn every_example_through_the_cli_gives_the_expected_result_deterministically() {
    for e in expectations() {
        let first = assess_file(e.file);
        assert_eq!(first.status.code(), Some(0), "{}: stderr {}", e.file, String::from_utf8_lossy(&first.stderr));
        let second = assess_file(e.file);
        assert_eq!(second.status.code(), Some(0), "{}", e.file);
        assert!(first.stdout == second.stdout, "{}: two runs differ", e.file);
        let request: Value = serde_json::from_str(&example(e.file)).expect("the example is JSON");
        check(&e, &request, &stdout_json(&first, e.file), "CLI");
    }
}

/// The request with `now` fixed by a Parameters part, as the service's
/// clock is the real one.
fn with_now(request: &Value) -> Value {
    let now = json!({ "name": "now", "valueDateTime": EXAMPLE_NOW });
    match request["resourceType"].as_str() {
        Some("Parameters") => {
            let mut p = request.clone();
            p["parameter"].as_array_mut().expect("parameters").push(now);
            p
        }
        _ => json!({ "resourceType": "Parameters", "parameter": [{ "name": "bundle", "resource": request }, now] }),
    }
}

#[tokio::test]
async fn every_example_through_the_service_is_valid_and_gives_the_expected_result() {
    let app = spawn_app().await;
    for e in expectations() {
        // As it is, on the real clock: accepted and valid whatever the date.
        let text = example(e.file);
        let response = app.post_assess(text.clone(), "application/fhir+json").await;
        assert_eq!(response.status().as_u16(), 200, "{}", e.file);
        let result: Value = response.json().await.expect("JSON");
        assert_r4_valid(&result);

        // At the examples' evaluation time: the expected result.
        let request = with_now(&serde_json::from_str(&text).expect("JSON"));
        let result = app.assess_ok(&request).await;
        check(&e, &request, &result, "HTTP");
    }
}

#[test]
fn assess_reads_standard_input() {
    let file = "set-aside-mix.json";
    let from_file = assess_file(file);
    let from_stdin = run(&["assess", "-", "--now", EXAMPLE_NOW], Some(example(file).as_bytes()));
    assert_eq!(from_stdin.status.code(), Some(0), "stderr {}", String::from_utf8_lossy(&from_stdin.stderr));
    assert!(from_stdin.stdout == from_file.stdout, "stdin and file give different output");
    assert!(!from_stdin.stdout.is_empty());
}

#[test]
fn the_parameters_wrapper_assesses_like_its_bundle() {
    let wrapper: Value = serde_json::from_str(&example("parameters-wrapper.json")).expect("JSON");
    let inner = wrapper["parameter"][0]["resource"].to_string();
    let direct = run(&["assess", "-", "--now", EXAMPLE_NOW], Some(inner.as_bytes()));
    assert_eq!(direct.status.code(), Some(0));
    let direct = stdout_json(&direct, "inner bundle");
    let wrapped = stdout_json(&assess_file("parameters-wrapper.json"), "wrapper");
    assert_eq!(guidance_status(&direct), guidance_status(&wrapped));
    assert_eq!(guidance_notes(&direct).first(), guidance_notes(&wrapped).first());
    let severity = |b: &Value| crate::helpers::hypocalcemia_issues(b).first().map(|d| d["severity"].clone());
    assert_eq!(severity(&direct), severity(&wrapped));
    assert!(severity(&direct).is_some());
}

#[test]
fn a_request_level_error_exits_2_with_an_operation_outcome() {
    let patient = json!({ "resourceType": "Patient", "birthDate": "2020-01-01" }).to_string();
    let out = run(&["assess", "-", "--now", EXAMPLE_NOW], Some(patient.as_bytes()));
    assert_eq!(out.status.code(), Some(2), "stderr {}", String::from_utf8_lossy(&out.stderr));
    let oo = stdout_json(&out, "refused request");
    assert_eq!(oo["resourceType"], "OperationOutcome", "{oo}");
    assert_r4_valid(&oo);
    let issues = oo["issue"].as_array().cloned().unwrap_or_default();
    assert!(issue_expressions(&issues).iter().any(|e| e == "resourceType"), "{oo}");

    let out = run(&["assess", "-", "--now", EXAMPLE_NOW], Some(b"not json"));
    assert_eq!(out.status.code(), Some(2));
    assert_eq!(stdout_json(&out, "not JSON")["resourceType"], "OperationOutcome");
}

#[test]
fn a_malformed_now_is_refused() {
    let path = examples_dir().join("albumin-only.json");
    let path = path.to_str().expect("a UTF-8 path");
    for now in ["2026-11-30", "2026-11-30T15:00:00", "2026-11-30T15:00Z", "yesterday", "2026-13-30T15:00:00Z", ""] {
        let out = run(&["assess", path, "--now", now], None);
        let code = out.status.code();
        assert!(code.is_some() && code != Some(0), "--now {now:?} exited {code:?}");
        assert!(
            !String::from_utf8_lossy(&out.stdout).contains("\"GuidanceResponse\""),
            "--now {now:?} still produced an assessment"
        );
    }
}
