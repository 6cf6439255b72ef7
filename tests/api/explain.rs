//! The explain trace (`assess --explain`, `$assess?_explain=true`): every rule
//! evaluated, with its inputs (and where they came from), basis and result,
//! as text on the CLI and as a Parameters resource in the result Bundle; an
//! analyst can follow each advisory back to the rule that made it.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use std::process::Command;

use serde_json::Value;

use crate::helpers::{FHIR_JSON, assert_r4_valid, repo_path, resources, spawn_app};

const BIN: &str = env!("CARGO_BIN_EXE_calcium-cds");
const NOW: &str = "2026-11-30T15:00:00Z";

fn assess(file: &str, extra: &[&str]) -> (Value, String) {
    let out = Command::new(BIN)
        .args(["assess", repo_path(file).to_str().unwrap(), "--now", NOW])
        .args(extra)
        .env_remove("CALCIUM_CDS_RULES")
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    (serde_json::from_slice(&out.stdout).unwrap(), String::from_utf8_lossy(&out.stderr).into_owned())
}

/// The trace Parameters (the GuidanceResponse's output Parameters is another one).
fn trace_parameters(bundle: &Value) -> Vec<&Value> {
    resources(bundle, "Parameters")
        .into_iter()
        .filter(|p| p["parameter"].as_array().is_some_and(|a| a.iter().any(|x| x["name"] == "rules")))
        .collect()
}

/// (stage, rule, result, input sources) of each step of the trace Parameters.
fn steps(bundle: &Value) -> Vec<(String, String, String, Vec<String>)> {
    let p = trace_parameters(bundle);
    assert_eq!(p.len(), 1, "one trace Parameters");
    let part =
        |parts: &Value, name: &str| -> String {
            parts.as_array().unwrap().iter().find(|x| x["name"] == name).map_or(String::new(), |x| {
                x["valueString"].as_str().or(x["valueCode"].as_str()).unwrap_or("").to_owned()
            })
        };
    p[0]["parameter"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|x| x["name"] == "step")
        .map(|s| {
            let parts = &s["part"];
            let sources = parts
                .as_array()
                .unwrap()
                .iter()
                .filter(|x| x["name"] == "input")
                .map(|i| part(&i["part"], "expression"))
                .collect();
            (part(parts, "stage"), part(parts, "rule"), part(parts, "result"), sources)
        })
        .collect()
}

#[test]
fn the_cli_prints_a_readable_trace_and_the_bundle_carries_it_as_parameters() {
    let (bundle, text) = assess("fhir-profiles/examples/ionized-low-seizure-toddler.json", &["--explain"]);
    assert_r4_valid(&bundle);
    for heading in ["== status", "== causes", "== tests", "== treatment", "== safety"] {
        assert!(text.contains(heading), "{heading}: {text}");
    }
    // The seizure toddler (ionized 0.82 mmol/L, 12.1 kg): the band, the grade, the bolus arithmetic.
    assert!(text.contains("[bands.child]") && text.contains("0.82 mmol/L"), "{text}");
    assert!(text.contains("severe (at or below 0.90 mmol/L"), "{text}");
    assert!(text.contains("12.1 kg"), "{text}");
    // The trace is read on its own, so it carries the advisory caution: first on the
    // CLI, and as the Parameters' `advisory` part.
    let caution = calcium_cds::rules::model::ADVISORY_CAUTION;
    assert!(text.starts_with(caution), "{text}");
    let advisory = trace_parameters(&bundle)[0]["parameter"]
        .as_array()
        .unwrap()
        .iter()
        .find(|x| x["name"] == "advisory")
        .and_then(|x| x["valueString"].as_str())
        .map(str::to_owned);
    assert_eq!(advisory.as_deref(), Some(caution));
    let s = steps(&bundle);
    // Every cause of the rules is weighed in the trace, and every safety check is listed.
    let causes = s.iter().filter(|x| x.0 == "causes" && x.1.starts_with("causes.")).count();
    assert_eq!(causes, 19, "{s:?}");
    // 24 checks: vitamin-d-dose-unmeasurable and impossible-dose joined the 22.
    assert_eq!(s.iter().filter(|x| x.0 == "safety").count(), 24, "{s:?}");
    // The calcium step names the Observation it read, by its place in the request.
    let band = s.iter().find(|x| x.1 == "bands.child").unwrap();
    assert_eq!(band.3.first().map(String::as_str), Some("Bundle.entry[1].resource"));
    // Without --explain: no trace, no text.
    let (plain, quiet) = assess("fhir-profiles/examples/ionized-low-seizure-toddler.json", &[]);
    assert!(trace_parameters(&plain).is_empty());
    assert!(!quiet.contains("== status"));
}

#[test]
fn every_safety_advisory_in_the_bundle_has_a_raised_step_naming_its_rule() {
    let (bundle, _) = assess("tests/cases/safety-digoxin-toddler.json", &["--explain"]);
    let s = steps(&bundle);
    let raised: Vec<_> = s.iter().filter(|x| x.0 == "safety" && x.2.starts_with("raised")).collect();
    let issues: Vec<&Value> = resources(&bundle, "DetectedIssue")
        .into_iter()
        .filter(|d| {
            d["identifier"]
                .as_array()
                .is_some_and(|i| i.iter().any(|x| x["system"].as_str().unwrap_or("").ends_with("/sid/safety-check")))
        })
        .collect();
    assert!(!issues.is_empty());
    assert_eq!(raised.len(), issues.len(), "{raised:?}");
    let digoxin = raised.iter().find(|x| x.1 == "safety_sources.digoxin").expect("the digoxin step");
    // Its input is the MedicationStatement of the request.
    assert!(digoxin.3.iter().any(|e| e.starts_with("Bundle.entry[")), "{digoxin:?}");
    // Checks that did not fire are listed as such.
    assert!(s.iter().any(|x| x.0 == "safety" && x.2 == "not raised"));
}

#[test]
fn a_site_value_shows_in_the_trace_basis() {
    // An analyst's steeper albumin slope: the trace of the adjusted calcium shows the
    // formula with the site's slope, so the changed advisory leads back to it.
    let dir = std::env::temp_dir().join(format!("calcium-cds-explain-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let site = dir.join("site.toml");
    std::fs::write(&site, "[albumin_adjustment]\nconventional_slope_mg_dl_per_g_dl = 1.2\n").unwrap();
    let file = "fhir-profiles/examples/total-calcium-low-albumin-child.json";
    let (default, text_default) = assess(file, &["--explain"]);
    let (changed, text_site) = assess(file, &["--explain", "--rules", site.to_str().unwrap()]);
    let adjusted = |t: &str| {
        t.lines().skip_while(|l| !l.starts_with("[albumin_adjustment]")).take(5).collect::<Vec<_>>().join("\n")
    };
    assert!(adjusted(&text_default).contains("0.8"), "{}", adjusted(&text_default));
    assert!(adjusted(&text_site).contains("1.2"), "{}", adjusted(&text_site));
    assert_ne!(steps(&default), steps(&changed));
}

#[tokio::test]
async fn the_http_operation_adds_the_trace_only_when_asked_and_refuses_a_bad_flag() {
    let app = spawn_app().await;
    // The example's own clock: without it the trace depends on today's date (the
    // calcium result would be set aside as too old a few days after the example's date).
    let mut wrapper: Value = serde_json::from_str(
        &std::fs::read_to_string(repo_path("fhir-profiles/examples/parameters-wrapper.json")).unwrap(),
    )
    .unwrap();
    wrapper["parameter"].as_array_mut().unwrap().push(serde_json::json!({ "name": "now", "valueDateTime": NOW }));
    let body = wrapper.to_string();
    let post = |query: &'static str| {
        let client = app.client.clone();
        let url = format!("{}/fhir/$assess{query}", app.address);
        let body = body.clone();
        async move { client.post(url).header(reqwest::header::CONTENT_TYPE, FHIR_JSON).body(body).send().await.unwrap() }
    };
    let with = post("?_explain=true").await;
    assert_eq!(with.status().as_u16(), 200);
    let b: Value = with.json().await.unwrap();
    assert_r4_valid(&b);
    assert!(steps(&b).len() > 20);
    let without: Value = post("?_explain=false").await.json().await.unwrap();
    assert!(trace_parameters(&without).is_empty());
    let bad = post("?_explain=yes").await;
    assert_eq!(bad.status().as_u16(), 400);
    let oo: Value = bad.json().await.unwrap();
    assert_eq!(oo["resourceType"], "OperationOutcome");
    assert_eq!(oo["issue"][0]["expression"][0], "_explain");
}

#[test]
fn the_band_step_says_why_a_neonate_is_judged_on_the_birth_weight_limits() {
    // Vuralli 2019: < 1.1 mmol/L for term and preterm over 1500 g, < 1.0 under 1500 g.
    let (bundle, text) = assess("tests/cases/late-preterm-35wk-2600g-ionized-1.05-low.json", &["--explain"]);
    assert_r4_valid(&bundle);
    let band =
        text.lines().skip_while(|l| !l.starts_with("[bands.term-neonate]")).take(4).collect::<Vec<_>>().join("\n");
    assert!(band.contains("Birth weight 2.6 kg is not below 1.5 kg"), "{band}");
    let (bundle, text) = assess("tests/cases/vlbw-29wk-1200g-ionized-1.05-normal.json", &["--explain"]);
    assert_r4_valid(&bundle);
    let band =
        text.lines().skip_while(|l| !l.starts_with("[bands.vlbw-neonate]")).take(4).collect::<Vec<_>>().join("\n");
    assert!(band.contains("Birth weight 1.2 kg is below 1.5 kg"), "{band}");
    let (bundle, text) = assess("tests/cases/neonate-1100g-gestation-unknown-seizure.json", &["--explain"]);
    assert_r4_valid(&bundle);
    let weight = text
        .lines()
        .skip_while(|l| !l.contains("Which weight are doses based on?"))
        .take(5)
        .collect::<Vec<_>>()
        .join("\n");
    assert!(weight.contains("1.1 kg used; to be confirmed"), "{weight}");
    // The other new outputs (unit slip refusal, fluid-load warning) are valid R4 too.
    for file in
        ["tests/cases/neonate-weight-unit-slip-1100-kg.json", "tests/cases/neonate-term-day1-infusion-fluid-load.json"]
    {
        let (bundle, _) = assess(file, &["--explain"]);
        assert_r4_valid(&bundle);
    }
}
