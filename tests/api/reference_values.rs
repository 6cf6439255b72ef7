//! Check values produced by outside reference libraries, against our tables.
//!
//! - `tests/reference/ucum-check-values.json`: written by
//!   `tests/reference/ucum_check_values.mjs` with the NLM's UCUM library
//!   `@lhncbc/ucum-lhc` (npm, version pinned in `tests/reference/package.json`).
//! - `tests/reference/molar-mass-check-values.json`: written by
//!   `tests/reference/molar_mass_check_values.py` with `molmass` (PyPI, version
//!   pinned in `tests/reference/requirements.txt`).
//!
//! No check value below is typed in from our own tables; each comes from one
//! of those two files (the source is named beside each check). How to
//! regenerate them: `tests/reference/README.md`.

use std::collections::{BTreeMap, BTreeSet};

use calcium_cds::clinical::facts::Analyte;
use calcium_cds::clinical::units::{Dimension, UNITS, UnitError, from_canonical, lookup, to_canonical};
use calcium_cds::rules::model::{AnalyteRule, RuleSet};
use serde_json::Value;

fn reference_json(name: &str) -> Value {
    let path = format!("{}/../tests/reference/{name}", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path}: {e}"));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{path}: {e}"))
}

fn ucum() -> Value {
    reference_json("ucum-check-values.json")
}

fn molmass() -> Value {
    reference_json("molar-mass-check-values.json")
}

fn rules() -> RuleSet {
    calcium_cds::rules::load::load(None).expect("embedded default rules load").rules
}

fn rel_diff(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

fn str_at<'a>(v: &'a Value, key: &str) -> &'a str {
    v[key].as_str().unwrap_or_else(|| panic!("'{key}' is not a string in {v}"))
}

fn f64_at(v: &Value, key: &str) -> f64 {
    v[key].as_f64().unwrap_or_else(|| panic!("'{key}' is not a number in {v}"))
}

/// The base unit of each dimension, as units.rs documents it. An exhaustive
/// match: a new dimension must be added here (and to the .mjs script).
fn base_unit(d: Dimension) -> Option<&'static str> {
    match d {
        Dimension::MassConcentration => Some("g/L"),
        Dimension::SubstanceConcentration => Some("mol/L"),
        Dimension::EquivalentConcentration => Some("eq/L"),
        Dimension::CatalyticConcentration => Some("U/L"),
        Dimension::Mass => Some("kg"),
        Dimension::Length => Some("cm"),
        Dimension::Duration => Some("ms"),
        Dimension::Weeks => Some("wk"),
        Dimension::Ph => None,
        Dimension::MassRatio => Some("g/g"),
        Dimension::SubstanceRatio => Some("mol/mol"),
    }
}

/// Which molmass substance (key in molar-mass-check-values.json) each analyte's
/// molar mass is. PTH(1-84) is a peptide with no formula in the file: its
/// molar mass (9425 g/mol) is not checked by an outside library here.
const ANALYTE_SUBSTANCE: &[(Analyte, &str)] = &[
    (Analyte::CalciumTotal, "Ca"),
    (Analyte::CalciumIonized, "Ca"),
    (Analyte::CalciumAlbuminAdjusted, "Ca"),
    (Analyte::UrineCalcium, "Ca"),
    (Analyte::Phosphate, "P"),
    (Analyte::Magnesium, "Mg"),
    (Analyte::Creatinine, "creatinine"),
    (Analyte::UrineCreatinine, "creatinine"),
    (Analyte::VitaminD25Oh, "calcifediol"),
    (Analyte::VitaminD3_25Oh, "calcifediol"),
    (Analyte::VitaminD1_25, "calcitriol"),
];
const NOT_CHECKED_BY_MOLMASS: &[Analyte] = &[Analyte::PthIntact];

// ---------------------------------------------------------------- UCUM (ucum-lhc)

#[test]
fn ucum_json_was_made_with_the_pinned_library() {
    let json = ucum();
    let pkg: Value = serde_json::from_str(
        &std::fs::read_to_string(format!("{}/../tests/reference/package.json", env!("CARGO_MANIFEST_DIR")))
            .expect("tests/reference/package.json"),
    )
    .expect("package.json is JSON");
    assert_eq!(str_at(&json, "library"), "@lhncbc/ucum-lhc");
    assert_eq!(
        json["version"], pkg["dependencies"]["@lhncbc/ucum-lhc"],
        "ucum-check-values.json was not generated with the version pinned in package.json"
    );
}

#[test]
fn ucum_json_covers_every_unit_in_our_table() {
    // Source: ucum-check-values.json (ucum-lhc). Adding, removing or moving a
    // unit in UNITS without regenerating the file fails here.
    let json = ucum();
    let listed: Vec<(String, String)> = json["units"]
        .as_array()
        .expect("units array")
        .iter()
        .map(|u| (str_at(u, "code").to_owned(), str_at(u, "dimension").to_owned()))
        .collect();
    let ours: Vec<(String, String)> = UNITS.iter().map(|u| (u.code.to_owned(), format!("{:?}", u.dimension))).collect();
    assert_eq!(listed, ours, "regenerate tests/reference/ucum-check-values.json (see its README)");
}

#[test]
fn every_accepted_code_is_valid_ucum() {
    // Source: ucum-lhc UcumLhcUtils.validateUnitString, in ucum-check-values.json.
    let json = ucum();
    for u in UNITS {
        let entry = json["units"]
            .as_array()
            .and_then(|a| a.iter().find(|e| e["code"] == u.code))
            .unwrap_or_else(|| panic!("{} missing from ucum-check-values.json", u.code));
        let v = &entry["validation"];
        assert_eq!(str_at(v, "status"), "valid", "ucum-lhc does not accept '{}': {v}", u.code);
        assert_eq!(str_at(v, "ucum_code"), u.code, "ucum-lhc rewrote '{}': {v}", u.code);
    }
    // The base units themselves, too.
    for (code, v) in json["base_units"].as_object().expect("base_units object") {
        assert_eq!(str_at(v, "status"), "valid", "base unit '{code}': {v}");
    }
}

#[test]
fn every_factor_matches_ucum_lhc() {
    // Source: ucum-lhc UcumLhcUtils.convertUnitTo(code, 1, base), in ucum-check-values.json.
    let json = ucum();
    let entries = json["units"].as_array().expect("units array");
    let mut compared = 0;
    for u in UNITS {
        let entry = entries
            .iter()
            .find(|e| e["code"] == u.code)
            .unwrap_or_else(|| panic!("{} missing from ucum-check-values.json", u.code));
        match base_unit(u.dimension) {
            None => {
                // [pH]: a special (logarithmic) unit in UCUM; no factor is asked for.
                assert!(entry["factor_to_base"].is_null(), "{entry}");
                assert_eq!(entry["special_unit"], Value::Bool(true), "ucum-lhc: {} should be special: {entry}", u.code);
            }
            Some(base) => {
                assert_eq!(str_at(entry, "base_unit"), base, "{}", u.code);
                let base_def = lookup(base).unwrap_or_else(|| panic!("base unit {base} is not in UNITS"));
                assert_eq!(base_def.dimension, u.dimension, "base unit {base} has another dimension");
                assert_eq!(base_def.factor, 1.0, "base unit {base} must have factor 1");
                assert_eq!(str_at(&entry["conversion"], "status"), "succeeded", "{entry}");
                let theirs = f64_at(entry, "factor_to_base");
                assert!(
                    rel_diff(u.factor, theirs) <= 1e-9,
                    "{}: our factor to {base} is {}, ucum-lhc says {theirs}",
                    u.code,
                    u.factor
                );
                compared += 1;
            }
        }
    }
    assert_eq!(compared, UNITS.len() - 1, "all but [pH] compared");
}

#[test]
fn other_spellings_follow_ucum_and_our_policy() {
    // What ucum-lhc 7.1.10 said about each (source: ucum-check-values.json,
    // "spellings"); asserted below so this comment cannot go stale unnoticed:
    // - "mg/dl", "mmol/l", "g/l": VALID UCUM ("l" is UCUM's lower-case litre
    //   symbol), each equal to its "L" form: we accept them as that unit.
    // - "mEq/L": invalid ("mEq is not a valid UCUM code"; UCUM has "meq").
    // - "MG/DL": invalid ("DL is not a valid UCUM code"; the case-insensitive form).
    // - "mg%": VALID per ucum-lhc, which carries "milligram percent" as a
    //   table unit equal to mg/dL. Strict UCUM would read "mg.%" as a mass
    //   (1e-5 g); we refuse the ambiguous code.
    // - "µmol/L": invalid ("µmol is not a valid UCUM code"; UCUM writes "umol").
    // - "mmol": valid UCUM (an amount, not a concentration); refused.
    let expected: BTreeMap<&str, (&str, &str)> = [
        ("mg/dl", ("valid", "accept")),
        ("mmol/l", ("valid", "accept")),
        ("g/l", ("valid", "accept")),
        ("mEq/L", ("invalid", "refuse")),
        ("MG/DL", ("invalid", "refuse")),
        ("mg%", ("valid", "refuse")),
        ("µmol/L", ("invalid", "refuse")),
        ("mmol", ("valid", "refuse")),
    ]
    .into_iter()
    .collect();
    let json = ucum();
    let spellings = json["spellings"].as_array().expect("spellings array");
    let codes: BTreeSet<&str> = spellings.iter().map(|r| str_at(r, "code")).collect();
    assert_eq!(codes, expected.keys().copied().collect(), "spellings in the JSON");
    let calcium = rules();
    let ca = calcium.analyte(Analyte::CalciumTotal).expect("calcium_total rule");
    for r in spellings {
        let code = str_at(r, "code");
        let (verdict, policy) = expected[code];
        assert_eq!(str_at(r, "policy"), policy, "{code}");
        assert_eq!(
            str_at(&r["validation"], "status"),
            verdict,
            "ucum-lhc changed its verdict on '{code}'; update the comment above: {r}"
        );
        if policy == "accept" {
            let ours = lookup(code).unwrap_or_else(|| panic!("'{code}' refused by our lookup"));
            assert_eq!(ours.code, str_at(r, "resembles"));
            // ucum-lhc: 1 of this spelling is exactly 1 of the table code.
            assert_eq!(r["conversion_of_1_to_resembled"]["value"].as_f64(), Some(1.0), "{r}");
        } else {
            assert!(lookup(code).is_none(), "'{code}' is accepted by our lookup");
            assert!(
                matches!(to_canonical(1.0, code, ca), Err(UnitError::Unknown(_))),
                "'{code}' is not refused as unknown"
            );
        }
    }
}

// ---------------------------------------------------------------- molar masses (molmass)

#[test]
fn molmass_json_was_made_with_the_pinned_library() {
    let json = molmass();
    let req = std::fs::read_to_string(format!("{}/../tests/reference/requirements.txt", env!("CARGO_MANIFEST_DIR")))
        .expect("tests/reference/requirements.txt");
    let pinned =
        req.lines().find_map(|l| l.trim().strip_prefix("molmass==")).expect("requirements.txt pins molmass==VERSION");
    assert_eq!(str_at(&json, "library"), "molmass");
    assert_eq!(str_at(&json, "version"), pinned.trim(), "regenerate molar-mass-check-values.json");
}

fn substance<'a>(json: &'a Value, key: &str) -> &'a Value {
    let s = &json["substances"][key];
    assert!(s.is_object(), "no substance '{key}' in molar-mass-check-values.json");
    s
}

fn assert_mass_matches(what: &str, ours: f64, s: &Value) {
    let theirs = f64_at(s, "molar_mass_g_per_mol");
    match str_at(s, "kind") {
        // Elements: within 0.01 g/mol.
        "element" => assert!(
            (ours - theirs).abs() <= 0.01,
            "{what}: our molar mass {ours} g/mol, molmass {theirs} ({})",
            str_at(s, "formula")
        ),
        // Compounds: within 0.05 %.
        _ => assert!(
            rel_diff(ours, theirs) <= 5e-4,
            "{what}: our molar mass {ours} g/mol, molmass {theirs} ({})",
            str_at(s, "formula")
        ),
    }
}

#[test]
fn analyte_molar_masses_match_molmass() {
    // Source: molmass Formula(...).mass, in molar-mass-check-values.json.
    let json = molmass();
    let rules = rules();
    let map: BTreeMap<Analyte, &str> = ANALYTE_SUBSTANCE.iter().copied().collect();
    let mut checked = 0;
    for (analyte, rule) in &rules.analytes {
        let Some(ours) = rule.molar_mass_g_per_mol else { continue };
        if NOT_CHECKED_BY_MOLMASS.contains(analyte) {
            continue;
        }
        let key = map.get(analyte).unwrap_or_else(|| {
            panic!("analyte {} has a molar mass but no molmass substance in ANALYTE_SUBSTANCE", analyte.key())
        });
        assert_mass_matches(analyte.key(), ours, substance(&json, key));
        checked += 1;
    }
    assert_eq!(checked, ANALYTE_SUBSTANCE.len(), "every mapped analyte has a molar mass in the rules");

    // The urine calcium/creatinine ratio: Ca over creatinine.
    let ratio = rules
        .analyte(Analyte::UrineCalciumCreatinineRatio)
        .and_then(|r| r.ratio_molar_masses_g_per_mol.as_ref())
        .expect("ratio molar masses");
    assert_mass_matches("ratio numerator", ratio.numerator, substance(&json, "Ca"));
    assert_mass_matches("ratio denominator", ratio.denominator, substance(&json, "creatinine"));
}

/// Our conversion factor from 1 `from` to `to` for an analyte, via its canonical unit.
fn our_factor(from: &str, to: &str, rule: &AnalyteRule) -> f64 {
    let a = to_canonical(1.0, from, rule).unwrap_or_else(|e| panic!("{e}"));
    let b = to_canonical(1.0, to, rule).unwrap_or_else(|e| panic!("{e}"));
    a / b
}

#[test]
fn chemistry_conversions_match_ucum_lhc_with_molmass_weights() {
    // Source: ucum-lhc convertUnitTo(from, 1, to, {molecularWeight, charge}) with
    // the molecular weight computed by molmass, in ucum-check-values.json.
    let json = ucum();
    let rules = rules();
    let mut compared = 0;
    for c in json["chemistry"].as_array().expect("chemistry array") {
        let (sub, from, to) = (str_at(c, "substance"), str_at(c, "from"), str_at(c, "to"));
        assert_eq!(str_at(&c["result"], "status"), "succeeded", "{c}");
        assert_eq!(f64_at(c, "value"), 1.0);
        let theirs = f64_at(&c["result"], "value");
        let analytes: Vec<Analyte> = ANALYTE_SUBSTANCE.iter().filter(|(_, s)| *s == sub).map(|(a, _)| *a).collect();
        assert!(!analytes.is_empty(), "no analyte for substance {sub}");
        for analyte in analytes {
            let rule = rules.analyte(analyte).expect("rule");
            if let Some(charge) = c["charge"].as_f64() {
                assert_eq!(rule.valence, Some(charge), "{}: valence vs ucum-lhc charge", analyte.key());
            }
            let ours = our_factor(from, to, rule);
            assert!(
                rel_diff(ours, theirs) <= 5e-4,
                "{}: 1 {from} = {ours} {to} for us, {theirs} per ucum-lhc with molmass weight {}",
                analyte.key(),
                c["molecular_weight_g_per_mol"]
            );
            compared += 1;
        }
    }
    assert!(compared >= 20, "only {compared} comparisons made");
}

#[test]
fn published_creatinine_and_calcium_factors_agree_with_molmass() {
    // Source: molmass molar masses (molar-mass-check-values.json) and ucum-lhc
    // conversions driven by them (ucum-check-values.json). 88.4 umol/L per mg/dL
    // and 4.008 mg/dL per mmol/L are the published SI conversion factors.
    let mm = molmass();
    let uc = ucum();
    let rules = rules();
    let chem = |sub: &str, from: &str, to: &str| -> f64 {
        let c = uc["chemistry"]
            .as_array()
            .and_then(|a| a.iter().find(|c| c["substance"] == sub && c["from"] == from && c["to"] == to))
            .unwrap_or_else(|| panic!("no {sub} {from}->{to} in ucum-check-values.json"));
        f64_at(&c["result"], "value")
    };

    // Creatinine: 1 mg/dL = 10 mg/L = 10 000 / M umol/L.
    let m_creat = f64_at(substance(&mm, "creatinine"), "molar_mass_g_per_mol");
    let molmass_creat = 1e4 / m_creat;
    let ucum_creat = chem("creatinine", "mg/dL", "umol/L");
    assert!(rel_diff(ucum_creat, molmass_creat) <= 1e-9, "{ucum_creat} vs {molmass_creat}");
    let cr = rules.analyte(Analyte::Creatinine).expect("creatinine rule");
    assert_eq!(cr.canonical_unit, "umol/L");
    let ours = to_canonical(1.0, "mg/dL", cr).expect("mg/dL converts");
    assert!(rel_diff(ours, molmass_creat) <= 1e-3, "creatinine: 1 mg/dL = {ours} umol/L, molmass {molmass_creat}");
    assert!(rel_diff(88.4, molmass_creat) <= 1e-3, "published 88.4 vs molmass {molmass_creat}");

    // Calcium: 1 mmol/L = M mg/L = M / 10 mg/dL.
    let m_ca = f64_at(substance(&mm, "Ca"), "molar_mass_g_per_mol");
    let molmass_ca = m_ca / 10.0;
    let ucum_ca = chem("Ca", "mmol/L", "mg/dL");
    assert!(rel_diff(ucum_ca, molmass_ca) <= 1e-9, "{ucum_ca} vs {molmass_ca}");
    let ca = rules.analyte(Analyte::CalciumTotal).expect("calcium rule");
    assert_eq!(ca.canonical_unit, "mmol/L");
    let ours = from_canonical(1.0, "mg/dL", ca).expect("mg/dL converts");
    assert!(rel_diff(ours, molmass_ca) <= 1e-3, "calcium: 1 mmol/L = {ours} mg/dL, molmass {molmass_ca}");
    let back = to_canonical(molmass_ca, "mg/dL", ca).expect("mg/dL converts");
    assert!(rel_diff(back, 1.0) <= 1e-3, "calcium: {molmass_ca} mg/dL = {back} mmol/L");
    assert!(rel_diff(4.008, molmass_ca) <= 1e-3, "published 4.008 vs molmass {molmass_ca}");
}

#[test]
fn molmass_salt_entries_are_complete_for_dosing_work() {
    // Source: molmass composition(), in molar-mass-check-values.json. Not yet
    // used by the rules; this pins that the file carries what dosing will need.
    let json = molmass();
    for key in [
        "calcium_gluconate_monohydrate",
        "calcium_gluconate_anhydrous",
        "calcium_chloride_dihydrate",
        "calcium_carbonate",
        "calcium_citrate_tetrahydrate",
        "calcium_lactate_pentahydrate",
        "magnesium_sulfate_heptahydrate",
    ] {
        let s = substance(&json, key);
        let mass = f64_at(s, "molar_mass_g_per_mol");
        let fraction = f64_at(s, "mass_fraction");
        let element = str_at(s, "fraction_of");
        let element_mass = f64_at(substance(&json, element), "molar_mass_g_per_mol");
        let atoms = f64_at(s, "atoms_of_element");
        assert!(fraction > 0.0 && fraction < 1.0, "{key}: {fraction}");
        assert!(rel_diff(fraction, atoms * element_mass / mass) <= 1e-9, "{key}: fraction inconsistent with masses");
    }
}
