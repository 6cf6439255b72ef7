//! Preterm weight z against check values from rcpchgrowth.
//!
//! `tests/reference/growth/preterm-check-values.json` is written by
//! `tests/reference/growth/make_preterm_tables.py` with rcpchgrowth (the
//! version pinned in `tests/reference/growth/requirements.txt`, 4.6.5 when
//! written). `z` is rcpchgrowth's UK-WHO corrected SDS (its cubic
//! interpolation between weeks); `z_plain_lms` is the plain LMS z from
//! growth.toml's preterm rows with linear interpolation, the service's own
//! arithmetic. No check value below is typed in.

use calcium_cds::clinical::growth::weight_z;
use serde_json::Value;

fn check_values() -> Value {
    let path = format!("{}/../tests/reference/growth/preterm-check-values.json", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path}: {e}"));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{path}: {e}"))
}

#[test]
fn preterm_check_values_were_made_with_the_pinned_rcpchgrowth() {
    let json = check_values();
    let req =
        std::fs::read_to_string(format!("{}/../tests/reference/growth/requirements.txt", env!("CARGO_MANIFEST_DIR")))
            .expect("requirements.txt");
    let pinned = req.lines().find_map(|l| l.trim().strip_prefix("rcpchgrowth==")).expect("rcpchgrowth pinned");
    assert_eq!(json["packages"]["rcpchgrowth"].as_str(), Some(pinned.trim()));
}

#[test]
fn preterm_weight_z_matches_rcpchgrowth_uk_who() {
    // rcpchgrowth 4.6.5 (UK-WHO, corrected SDS). The 27-week boy of 1.0 kg on
    // day 3 is z -0.457 there; the 27-week girl -0.135.
    let rules = calcium_cds::rules::load::load(None).expect("rules").rules;
    let json = check_values();
    let points = json["points"].as_array().expect("points");
    assert!(points.len() >= 6, "only {} points", points.len());
    for p in points {
        let label = p["label"].as_str().unwrap();
        let sex = p["sex"].as_str().unwrap();
        let ga = p["gestation_weeks"].as_f64().unwrap();
        let days = p["days_after_birth"].as_i64().unwrap();
        let kg = p["weight_kg"].as_f64().unwrap();
        let package_z = p["z"].as_f64().unwrap();
        let plain_z = p["z_plain_lms"].as_f64().unwrap();
        let ours = weight_z(&rules, sex, days, Some(ga), kg).unwrap_or_else(|| panic!("{label}: no z"));
        // Same table, same linear interpolation: equal to rounding.
        assert!((ours.z - plain_z).abs() < 1e-3, "{label}: ours {} vs plain LMS {plain_z}", ours.z);
        // rcpchgrowth interpolates cubically between weeks: within 0.01.
        assert!((ours.z - package_z).abs() < 0.01, "{label}: ours {} vs rcpchgrowth {package_z}", ours.z);
    }
}
