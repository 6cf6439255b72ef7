//! Treatment proposals over HTTP: weight-based draft MedicationRequests, their
//! order in the RequestGroup, and each safety DetectedIssue firing when it
//! should and staying silent otherwise. Invented patients of the invented
//! "Larkspur Children's Hospital". Every expected number is worked out in a
//! comment from the rule data (treatment.toml, formulary.toml), never copied
//! from the service's output. Every result is checked against the R4 schema
//! (`assess_ok`).

use serde_json::{Value, json};

use crate::helpers::{Lab, PATIENT_URL, Scenario, date_years_before, resources, rfc3339, spawn_app};

const ATC: &str = "http://www.whocc.no/atc";
const RXNORM: &str = "http://www.nlm.nih.gov/research/umls/rxnorm";
const SNOMED: &str = "http://snomed.info/sct";
const LOINC: &str = "http://loinc.org";
const UCUM: &str = "http://unitsofmeasure.org";
/// SNOMED CT "Intravenous route" (treatment.toml routes.iv).
const IV_ROUTE: &str = "47625008";
/// SNOMED CT "Oral route" (treatment.toml routes.oral).
const ORAL_ROUTE: &str = "26643006";

const BOLUS: &str = "IV calcium gluconate bolus";
const INFUSION: &str = "Continuous IV calcium gluconate";
const CHLORIDE: &str = "Alternative: IV calcium chloride";
const MAGNESIUM: &str = "IV magnesium sulfate";

// ---------------------------------------------------------------------------
// Building requests

/// A child born `years` whole years and `extra_days` days before the scenario's now.
fn aged(years: i64, extra_days: i64) -> Scenario {
    let mut s = Scenario::new();
    s.birth_date = date_years_before(s.now - extra_days * 86_400, years);
    s
}

/// A child born `days` days ago.
fn aged_days(days: i64) -> Scenario {
    let mut s = Scenario::new();
    s.birth_date = rfc3339(s.now - days * 86_400)[..10].to_owned();
    s
}

fn observation(s: &Scenario, id: &str, loinc: &str, display: &str, value: f64, unit: &str, hours_ago: f64) -> Value {
    json!({
        "resourceType": "Observation", "id": id, "status": "final",
        "code": { "coding": [{ "system": LOINC, "code": loinc, "display": display }] },
        "subject": { "reference": PATIENT_URL },
        "effectiveDateTime": s.time(hours_ago),
        "valueQuantity": { "value": value, "unit": unit, "system": UCUM, "code": unit },
    })
}

fn weight_at(s: &Scenario, kg: f64, hours_ago: f64) -> Value {
    let mut w = observation(s, "wt-1", "29463-7", "Body weight", kg, "kg", hours_ago);
    w["category"] = json!([{ "coding": [{ "system": "http://terminology.hl7.org/CodeSystem/observation-category", "code": "vital-signs" }] }]);
    w
}

fn weight(s: &Scenario, kg: f64) -> Value {
    weight_at(s, kg, 2.0)
}

fn seizure(s: &Scenario) -> Value {
    json!({
        "resourceType": "Condition", "id": "c-seizure",
        "clinicalStatus": { "coding": [{ "system": "http://terminology.hl7.org/CodeSystem/condition-clinical", "code": "active" }] },
        "verificationStatus": { "coding": [{ "system": "http://terminology.hl7.org/CodeSystem/condition-ver-status", "code": "confirmed" }] },
        "code": { "coding": [{ "system": SNOMED, "code": "91175000", "display": "Seizure" }] },
        "subject": { "reference": PATIENT_URL },
        "onsetDateTime": s.time(1.5),
    })
}

fn medication_request(s: &Scenario, id: &str, system: &str, code: &str, display: &str) -> Value {
    json!({
        "resourceType": "MedicationRequest", "id": id, "status": "active", "intent": "order",
        "medicationCodeableConcept": { "coding": [{ "system": system, "code": code, "display": display }] },
        "subject": { "reference": PATIENT_URL }, "authoredOn": s.time(12.0),
    })
}

/// A calcium gluconate administration (ATC A12AA03), with a dose in mg when given.
fn gluconate_given(s: &Scenario, id: &str, status: &str, hours_ago: f64, dose_mg: Option<f64>) -> Value {
    let mut ma = json!({
        "resourceType": "MedicationAdministration", "id": id, "status": status,
        "medicationCodeableConcept": { "coding": [{ "system": ATC, "code": "A12AA03", "display": "calcium gluconate" }] },
        "subject": { "reference": PATIENT_URL },
    });
    if status == "in-progress" {
        ma["effectivePeriod"] = json!({ "start": s.time(hours_ago) });
    } else {
        ma["effectiveDateTime"] = json!(s.time(hours_ago));
    }
    if let Some(mg) = dose_mg {
        ma["dosage"] = json!({ "dose": { "value": mg, "unit": "mg", "system": UCUM, "code": "mg" } });
    }
    ma
}

/// The Scenario's Bundle in a Parameters wrapper with a `vascularAccess` part.
fn with_access(s: &Scenario, access: &str) -> Value {
    json!({
        "resourceType": "Parameters",
        "parameter": [
            { "name": "bundle", "resource": s.bundle() },
            { "name": "vascularAccess", "valueCode": access },
        ]
    })
}

/// Ionized 0.85 mmol/L with an active seizure and a recent weight: symptomatic.
fn symptomatic(s: Scenario, kg: f64) -> Scenario {
    let w = weight(&s, kg);
    let c = seizure(&s);
    s.add(Lab::IonizedCa, "ica-1", 0.85, 1.0).with(w).with(c)
}

// ---------------------------------------------------------------------------
// Reading results

fn medication_requests(result: &Value) -> Vec<&Value> {
    resources(result, "MedicationRequest")
}

/// The resource behind a fullUrl.
fn by_full_url<'a>(result: &'a Value, url: &str) -> Option<&'a Value> {
    result["entry"].as_array()?.iter().find(|e| e["fullUrl"] == url).map(|e| &e["resource"])
}

/// The RequestGroup's treatment action group, if any.
fn treatment_group(result: &Value) -> Option<&Value> {
    resources(result, "RequestGroup")
        .into_iter()
        .flat_map(|g| g["action"].as_array().map(|a| a.iter().collect::<Vec<_>>()).unwrap_or_default())
        .find(|a| a["title"] == "Treatment proposals (drafts)")
}

/// Leaf actions under an action, depth first (the order they are shown in).
fn leaves(action: &Value) -> Vec<&Value> {
    match action["action"].as_array() {
        Some(children) => children.iter().flat_map(leaves).collect(),
        None => vec![action],
    }
}

/// Titles of the treatment leaf actions, in order.
fn treatment_titles(result: &Value) -> Vec<String> {
    treatment_group(result)
        .map(|g| leaves(g).iter().map(|a| a["title"].as_str().unwrap_or("").to_owned()).collect())
        .unwrap_or_default()
}

/// The MedicationRequest behind the treatment action whose title starts with `title`.
fn proposal<'a>(result: &'a Value, title: &str) -> Option<&'a Value> {
    let group = treatment_group(result)?;
    let action = leaves(group).into_iter().find(|a| a["title"].as_str().is_some_and(|t| t.starts_with(title)))?;
    let url = action["resource"]["reference"].as_str()?;
    let mr = by_full_url(result, url)?;
    assert_eq!(mr["resourceType"], "MedicationRequest", "{action}");
    Some(mr)
}

fn must<'a>(result: &'a Value, title: &str) -> &'a Value {
    proposal(result, title)
        .unwrap_or_else(|| panic!("no '{title}' proposal; treatment actions {:?}", treatment_titles(result)))
}

fn dosage(mr: &Value) -> &Value {
    &mr["dosageInstruction"][0]
}

fn text(mr: &Value) -> &str {
    dosage(mr)["text"].as_str().unwrap_or("")
}

fn dose(mr: &Value) -> (f64, String) {
    let q = &dosage(mr)["doseAndRate"][0]["doseQuantity"];
    assert_eq!(q["system"], UCUM, "{q}");
    assert_eq!(q["unit"], q["code"], "{q}");
    (q["value"].as_f64().unwrap_or(f64::NAN), q["code"].as_str().unwrap_or("").to_owned())
}

fn rate(mr: &Value) -> (f64, String) {
    let q = &dosage(mr)["doseAndRate"][0]["rateQuantity"];
    assert_eq!(q["system"], UCUM, "{q}");
    (q["value"].as_f64().unwrap_or(f64::NAN), q["code"].as_str().unwrap_or("").to_owned())
}

fn route(mr: &Value) -> &str {
    dosage(mr)["route"]["coding"][0]["code"].as_str().unwrap_or("")
}

fn notes(mr: &Value) -> Vec<&str> {
    mr["note"].as_array().map(|n| n.iter().filter_map(|n| n["text"].as_str()).collect()).unwrap_or_default()
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() < 1e-6
}

/// Safety DetectedIssues whose code text starts with `title`.
fn safety<'a>(result: &'a Value, title: &str) -> Vec<&'a Value> {
    resources(result, "DetectedIssue")
        .into_iter()
        .filter(|d| d["code"]["text"].as_str().is_some_and(|t| t.starts_with(title)))
        .collect()
}

fn one_safety<'a>(result: &'a Value, title: &str) -> &'a Value {
    let found = safety(result, title);
    assert_eq!(found.len(), 1, "expected one '{title}' DetectedIssue; issues: {:?}", issue_titles(result));
    found[0]
}

fn issue_titles(result: &Value) -> Vec<String> {
    resources(result, "DetectedIssue").iter().map(|d| d["code"]["text"].as_str().unwrap_or("").to_owned()).collect()
}

fn act_code(issue: &Value) -> &str {
    issue["code"]["coding"][0]["code"].as_str().unwrap_or("")
}

/// Whether the issue implicates the request entry `index` (1-based after the Patient), by id or fullUrl.
fn implicates(issue: &Value, resource_type: &str, id: &str, index: usize) -> bool {
    let full_url = format!("urn:uuid:0c4a7e2f-5d1b-4e8a-9f3c-{index:012x}");
    issue["implicated"].as_array().is_some_and(|refs| {
        refs.iter().any(|r| {
            let s = r["reference"].as_str().unwrap_or("");
            s == full_url || s == format!("{resource_type}/{id}") || s.ends_with(&format!("/{resource_type}/{id}"))
        })
    })
}

// ---------------------------------------------------------------------------
// 1. Symptomatic hypocalcemia: bolus, then infusion

#[tokio::test]
async fn symptomatic_hypocalcemia_gets_a_capped_bolus_then_an_infusion() {
    let app = spawn_app().await;
    // 6 years and 2 months, 20 kg (near the median for the age).
    let result = app.assess_ok(&symptomatic(aged(6, 60), 20.0).bundle()).await;

    let bolus = must(&result, BOLUS);
    assert_eq!(bolus["status"], "draft");
    assert_eq!(bolus["intent"], "proposal");
    assert_eq!(route(bolus), IV_ROUTE);
    // BNFC 50 mg/kg (pick = low of 50-50) x 20 kg = 1000 mg; the site cap is 1000 mg, not exceeded.
    assert_eq!(dose(bolus), (1000.0, "mg".to_owned()));
    let t = text(bolus);
    // 1000 mg / 100 mg/mL (10% calcium gluconate) = 10 mL.
    assert!(t.starts_with("20 kg x 50 mg/kg = 1000 mg = 10 mL of Calcium gluconate 10%"), "{t}");
    assert!(!t.contains("capped"), "1000 mg is at, not over, the cap: {t}");
    // Elemental calcium: 10 mL x 9.3 mg/mL = 93 mg; 10 mL x 0.465 mEq/mL = 4.65 mEq.
    assert!(t.contains("93 mg elemental calcium, 4.65 mEq"), "{t}");
    // Diluted to 50 mg/mL: 1000 / 50 = 20 mL, i.e. 20 - 10 = 10 mL of diluent.
    assert!(t.contains("dilute with 10 mL 5% dextrose to 20 mL (50 mg/mL"), "{t}");
    // No faster than 100 mg/min: 1000 / 100 = 10 min, and at least 10 min: 10 min.
    assert!(t.contains("over at least 10 min"), "{t}");
    // The chosen source is BNFC, and it is said so.
    assert!(notes(bolus).iter().any(|n| n.starts_with("Chosen: 50-50 mg/kg (BNF for Children")), "{:?}", notes(bolus));
    assert_eq!(dosage(bolus)["timing"]["repeat"]["count"], 1);

    let infusion = must(&result, INFUSION);
    assert_eq!(route(infusion), IV_ROUTE);
    // US label child band 8-13 mg/kg/h, pick low: 20 kg x 8 = 160 mg/h; at 10 mg/mL = 16 mL/h
    // (already on the pump's 0.1 mL/h grid).
    assert_eq!(rate(infusion), (16.0, "mL/h".to_owned()));
    assert!(text(infusion).starts_with("20 kg x 8 mg/kg/h = 160 mg/h; at 10 mg/mL"), "{}", text(infusion));
    // Daily maximum: the band's upper rate 13 mg/kg/h x 24 h x 20 kg = 6240 mg.
    let max = &dosage(infusion)["maxDosePerPeriod"]["numerator"];
    assert!(close(max["value"].as_f64().unwrap(), 6240.0) && max["code"] == "mg", "{max}");

    // The bolus comes before the infusion in the treatment actions.
    let titles = treatment_titles(&result);
    let b = titles.iter().position(|t| t.starts_with(BOLUS)).unwrap();
    let i = titles.iter().position(|t| t.starts_with(INFUSION)).unwrap();
    assert!(b < i, "{titles:?}");
    // No oral calcium when IV calcium is proposed; the only oral proposal is the vitamin D
    // paired with the calcium (the plan states the later step to oral calcium).
    assert!(proposal(&result, "Oral elemental calcium").is_none(), "{titles:?}");
    assert!(
        medication_requests(&result).iter().all(|m| route(m) == IV_ROUTE || text(m).contains("calciferol (vitamin D")),
        "{titles:?}"
    );
}

// ---------------------------------------------------------------------------
// 2. Dose rises with weight until the cap

#[tokio::test]
async fn the_bolus_rises_with_weight_until_the_10_ml_cap() {
    let app = spawn_app().await;
    // (age, weight, expected dose): each weight near the median for the age, all beyond the
    // neonatal band so that BNFC 50 mg/kg applies; dose = min(kg x 50, 1000).
    let cases: [(Scenario, f64, f64); 6] = [
        (aged_days(100), 5.0, 250.0), // 5 x 50 = 250
        (aged(1, 15), 10.0, 500.0),   // 10 x 50 = 500
        (aged(3, 30), 15.0, 750.0),   // 15 x 50 = 750
        (aged(6, 60), 20.0, 1000.0),  // 20 x 50 = 1000 (= the cap)
        (aged(8, 30), 25.0, 1000.0),  // 25 x 50 = 1250 > 1000: capped
        (aged(12, 30), 40.0, 1000.0), // 40 x 50 = 2000 > 1000: capped
    ];
    for (s, kg, expected) in cases {
        let result = app.assess_ok(&symptomatic(s, kg).bundle()).await;
        let bolus = must(&result, BOLUS);
        let (mg, unit) = dose(bolus);
        assert_eq!(unit, "mg");
        assert!(close(mg, expected), "{kg} kg: dose {mg}, expected {expected}");
        // The volume in the text times 100 mg/mL is the dose.
        let t = text(bolus);
        let ml: f64 = t
            .split(" mg = ")
            .nth(1)
            .and_then(|x| x.split(" mL").next())
            .and_then(|x| x.parse().ok())
            .unwrap_or_else(|| panic!("no volume in {t}"));
        assert!(close(ml * 100.0, expected), "{kg} kg: {ml} mL x 100 mg/mL != {expected} mg");
        let raw = kg * 50.0;
        if raw > 1000.0 {
            assert!(t.contains(&format!("{raw} mg, capped at the maximum single dose 1000 mg")), "{t}");
        } else {
            assert!(!t.contains("capped"), "{t}");
        }
    }
}

// ---------------------------------------------------------------------------
// 3. Asymptomatic mild hypocalcemia: oral calcium only

#[tokio::test]
async fn asymptomatic_mild_hypocalcemia_gets_oral_liquid_calcium_under_6_years() {
    let app = spawn_app().await;
    let s = aged(3, 60);
    let w = weight(&s, 14.0);
    let result = app.assess_ok(&s.add(Lab::IonizedCa, "ica-1", 1.05, 1.0).with(w).bundle()).await;
    assert!(
        proposal(&result, BOLUS).is_none() && proposal(&result, INFUSION).is_none(),
        "{:?}",
        treatment_titles(&result)
    );
    let all = medication_requests(&result);
    // Oral calcium, and vitamin D paired with it: 25-OH vitamin D is not measured, so the
    // maintenance dose, 600 IU/day from 1 year (treatment.toml vitamin_d.maintenance; IOM RDA).
    assert_eq!(all.len(), 2, "{:?}", treatment_titles(&result));
    assert_eq!(dose(must(&result, "Cholecalciferol")), (600.0, "[iU]".to_owned()));
    let oral = all[0];
    assert_eq!(route(oral), ORAL_ROUTE);
    assert!(
        oral["medicationCodeableConcept"]["text"]
            .as_str()
            .unwrap()
            .starts_with("Calcium carbonate oral suspension 1250 mg/5 mL")
    );
    let repeat = &dosage(oral)["timing"]["repeat"];
    assert_eq!(
        (repeat["frequency"].as_i64(), repeat["period"].as_f64(), repeat["periodUnit"].as_str()),
        (Some(4), Some(1.0), Some("d"))
    );
    // 14 kg x 50 mg/kg/day = 700 mg/day; / 4 = 175 mg per dose; 500 mg elemental per 5 mL =
    // 100 mg/mL, so 1.75 mL, rounded to the 0.1 mL step (liquid_round_ml) = 1.8 mL.
    assert_eq!(dose(oral), (1.8, "mL".to_owned()));
    let t = text(oral);
    assert!(t.starts_with("14 kg x 50 mg/kg/day elemental calcium = 700 mg/day, in 4 doses"), "{t}");
    assert!(t.contains("= 175 mg per dose = 1.8 mL of"), "{t}");
    // The daily ceiling for 1 through 8 years is the IOM upper limit, 2500 mg/day.
    let max = &dosage(oral)["maxDosePerPeriod"]["numerator"];
    assert!(close(max["value"].as_f64().unwrap(), 2500.0) && max["code"] == "mg", "{max}");
    assert!(
        safety(&result, "Peripheral IV calcium").is_empty(),
        "no IV, no IV-line warning: {:?}",
        issue_titles(&result)
    );
}

#[tokio::test]
async fn from_6_years_oral_calcium_is_whole_tablets_with_the_age_upper_limit() {
    let app = spawn_app().await;
    let s = aged(10, 60);
    let w = weight(&s, 32.0);
    let result = app.assess_ok(&s.add(Lab::IonizedCa, "ica-1", 1.05, 1.0).with(w).bundle()).await;
    let all = medication_requests(&result);
    // Oral calcium and the maintenance vitamin D paired with it (25-OH vitamin D not measured).
    assert_eq!(all.len(), 2, "{:?}", treatment_titles(&result));
    let oral = all[0];
    assert_eq!(route(oral), ORAL_ROUTE);
    assert!(
        oral["medicationCodeableConcept"]["text"]
            .as_str()
            .unwrap()
            .starts_with("Calcium carbonate chewable tablet 500 mg (200 mg elemental Ca)")
    );
    assert_eq!(dosage(oral)["timing"]["repeat"]["frequency"], 4);
    // 32 kg x 50 = 1600 mg/day; / 4 = 400 mg per dose. The 1250 mg tablet (500 mg elemental,
    // not divisible): 1 tablet = 500 mg is 25% above, more than the 10% rounding tolerance
    // (oral.rounding_tolerance_pct). The next tablet, the 200 mg elemental chewable:
    // 400 / 200 = 2 tablets, exactly the dose.
    assert_eq!(dose(oral), (2.0, "{tbl}".to_owned()));
    let t = text(oral);
    assert!(t.starts_with("32 kg x 50 mg/kg/day elemental calcium = 1600 mg/day"), "{t}");
    assert!(t.contains("= 400 mg per dose = 2 tablets of"), "{t}");
    assert!(
        t.contains("Not used: 1 tablet of Calcium carbonate tablet 1250 mg (500 mg elemental Ca) = 500 mg, 25% above"),
        "{t}"
    );
    // 9 to 18 years: IOM upper limit 3000 mg/day.
    let max = &dosage(oral)["maxDosePerPeriod"]["numerator"];
    assert!(close(max["value"].as_f64().unwrap(), 3000.0) && max["code"] == "mg", "{max}");
}

#[tokio::test]
async fn a_capped_tablet_dose_never_exceeds_the_stated_daily_maximum() {
    let app = spawn_app().await;
    let s = aged(16, 60);
    let w = weight(&s, 70.0);
    let result = app.assess_ok(&s.add(Lab::IonizedCa, "ica-1", 1.05, 1.0).with(w).bundle()).await;
    let oral = medication_requests(&result)[0];
    // 70 kg x 50 = 3500 mg/day, above the 9-18 y upper limit 3000 mg/day: capped to 3000,
    // 750 mg per dose = 1.5 tablets of 500 mg, which cannot be split: 1 is 33% below and
    // 2 pass the maximum. 200 mg chewables: 4 pass the maximum, 3 are 20% below. The
    // 100 mg/mL liquid: 7.5 mL = 750 mg.
    let max = dosage(oral)["maxDosePerPeriod"]["numerator"]["value"].as_f64().unwrap();
    assert!(close(max, 3000.0), "{max}");
    let (ml, unit) = dose(oral);
    assert_eq!((ml, unit.as_str()), (7.5, "mL"), "{}", text(oral));
    // 4 doses a day of it stay within the maximum.
    let per_day = ml * 100.0 * 4.0;
    assert!(per_day <= max, "{ml} mL x 100 mg/mL x 4 = {per_day} mg/day > {max} mg/day: {}", text(oral));
}

#[tokio::test]
async fn a_capped_oral_dose_shows_the_uncapped_product_before_the_cap() {
    let app = spawn_app().await;
    let s = aged(16, 60);
    let w = weight(&s, 70.0);
    let result = app.assess_ok(&s.add(Lab::IonizedCa, "ica-1", 1.05, 1.0).with(w).bundle()).await;
    let oral = medication_requests(&result)[0];
    // 70 kg x 50 mg/kg/day = 3500 mg/day, then capped at 3000 mg/day (IOM UL, 9-18 y).
    let t = text(oral);
    assert!(t.starts_with("70 kg x 50 mg/kg/day elemental calcium = 3500 mg/day"), "{t}");
    assert!(t.contains("capped at the daily upper limit 3000 mg/day"), "{t}");
}

// ---------------------------------------------------------------------------
// 4. Weight problems

async fn assert_no_weight_based_dose(app: &crate::helpers::TestApp, request: &Value, why: &str, detail_has: &[&str]) {
    let result = app.assess_ok(request).await;
    assert!(medication_requests(&result).is_empty(), "{why}: {:?}", treatment_titles(&result));
    assert!(treatment_group(&result).is_none(), "{why}: no treatment actions expected");
    let issue = one_safety(&result, "No weight-based dose");
    assert_eq!(issue["severity"], "high", "{why}");
    assert_eq!(act_code(issue), "DOSE", "{why}");
    let detail = issue["detail"].as_str().unwrap_or("");
    for d in detail_has {
        assert!(detail.contains(d), "{why}: '{d}' not in {detail}");
    }
}

#[tokio::test]
async fn no_proposal_without_a_current_plausible_weight() {
    let app = spawn_app().await;
    let base = || {
        let s = aged(6, 60);
        let c = seizure(&s);
        s.add(Lab::IonizedCa, "ica-1", 0.85, 1.0).with(c)
    };
    // No weight at all.
    assert_no_weight_based_dose(&app, &base().bundle(), "no weight", &["No body weight is recorded"]).await;
    // A weight 8 days old (the limit is 7 days, treatment.toml weight.max_age_days).
    let s = base();
    let stale = weight_at(&s, 20.0, 24.0 * 8.0);
    assert_no_weight_based_dose(&app, &s.with(stale).bundle(), "stale weight", &["older than 7 days"]).await;
    // Implausible for a 6-year-old: 95 kg (far above) and 2 kg (far below), |z| > 5.
    for kg in [95.0, 2.0] {
        let s = base();
        let w = weight(&s, kg);
        assert_no_weight_based_dose(&app, &s.with(w).bundle(), &format!("{kg} kg"), &["implausible", "z ="]).await;
    }
    // A plausible, recent weight: proposals.
    let s = base();
    let w = weight(&s, 20.0);
    let result = app.assess_ok(&s.with(w).bundle()).await;
    assert!(proposal(&result, BOLUS).is_some(), "{:?}", treatment_titles(&result));
    assert!(safety(&result, "No weight-based dose").is_empty(), "{:?}", issue_titles(&result));
}

// ---------------------------------------------------------------------------
// 5. Safety checks: each fires when it should and is silent otherwise

#[tokio::test]
async fn digoxin_with_iv_calcium_is_flagged_and_only_then() {
    let app = spawn_app().await;
    for (system, code) in [(ATC, "C01AA05"), (RXNORM, "3407")] {
        let s = symptomatic(aged(6, 60), 20.0);
        let mr = medication_request(&s, "mr-digoxin", system, code, "digoxin");
        let result = app.assess_ok(&s.with(mr).bundle()).await;
        let issue = one_safety(&result, "Digoxin with IV calcium");
        assert_eq!(act_code(issue), "DRG", "{issue}");
        assert_eq!(issue["severity"], "high");
        // Entries: 1 ionized, 2 weight, 3 seizure, 4 digoxin.
        assert!(implicates(issue, "MedicationRequest", "mr-digoxin", 4), "{issue}");
    }
    let result = app.assess_ok(&symptomatic(aged(6, 60), 20.0).bundle()).await;
    assert!(safety(&result, "Digoxin").is_empty(), "{:?}", issue_titles(&result));
}

#[tokio::test]
async fn sodium_bicarbonate_with_iv_calcium_warns_of_precipitation() {
    let app = spawn_app().await;
    let s = symptomatic(aged(6, 60), 20.0);
    let mr = medication_request(&s, "mr-bicarb", ATC, "B05XA02", "sodium bicarbonate");
    let result = app.assess_ok(&s.with(mr).bundle()).await;
    let issue = one_safety(&result, "Sodium bicarbonate or phosphate with IV calcium");
    assert_eq!(act_code(issue), "DRG");
    assert_eq!(issue["severity"], "high");
    assert!(issue["detail"].as_str().unwrap().contains("precipitate"), "{issue}");
    assert!(implicates(issue, "MedicationRequest", "mr-bicarb", 4), "{issue}");
    let result = app.assess_ok(&symptomatic(aged(6, 60), 20.0).bundle()).await;
    assert!(safety(&result, "Sodium bicarbonate").is_empty(), "{:?}", issue_titles(&result));
}

/// A MedicationAdministration in the named ATC code, `hours_ago` before now.
fn given(s: &Scenario, id: &str, code: &str, display: &str, status: &str, hours_ago: f64) -> Value {
    let mut ma = json!({
        "resourceType": "MedicationAdministration", "id": id, "status": status,
        "medicationCodeableConcept": { "coding": [{ "system": ATC, "code": code, "display": display }] },
        "subject": { "reference": PATIENT_URL },
    });
    if status == "in-progress" {
        ma["effectivePeriod"] = json!({ "start": s.time(hours_ago) });
    } else {
        ma["effectiveDateTime"] = json!(s.time(hours_ago));
    }
    ma
}

#[tokio::test]
async fn only_current_digoxin_and_bicarbonate_are_flagged() {
    let app = spawn_app().await;
    // Digoxin: an order completed, written 60 days ago, and a dose given 30 days ago are
    // past the 14-day window; a dose 2 days ago is not.
    for (status, hours, fires) in [("completed", 60.0 * 24.0, false), ("completed", 2.0 * 24.0, true)] {
        let s = symptomatic(aged(6, 60), 20.0);
        let mut mr = medication_request(&s, "mr-digoxin", ATC, "C01AA05", "digoxin");
        mr["status"] = json!(status);
        mr["authoredOn"] = json!(s.time(hours));
        let ma = given(&s, "ma-digoxin", "C01AA05", "digoxin", "completed", 30.0 * 24.0);
        let result = app.assess_ok(&s.with(mr).with(ma).bundle()).await;
        assert_eq!(!safety(&result, "Digoxin").is_empty(), fires, "{status} {hours} h: {:?}", issue_titles(&result));
    }
    // A MedicationStatement: active (being taken, dated when it started 90 days ago) yes;
    // completed 60 days ago no (the reader passes the statement's status to the core).
    for (status, hours, fires) in [("active", 90.0 * 24.0, true), ("completed", 60.0 * 24.0, false)] {
        let s = symptomatic(aged(6, 60), 20.0);
        let statement = json!({
            "resourceType": "MedicationStatement", "id": "ms-digoxin", "status": status,
            "medicationCodeableConcept": {"coding": [{"system": ATC, "code": "C01AA05", "display": "digoxin"}]},
            "subject": {"reference": PATIENT_URL}, "effectiveDateTime": s.time(hours)
        });
        let result = app.assess_ok(&s.with(statement).bundle()).await;
        assert_eq!(!safety(&result, "Digoxin").is_empty(), fires, "statement {status}: {:?}", issue_titles(&result));
    }
    // Sodium bicarbonate: given 20 days ago, no; 1 hour ago, or running, yes.
    for (status, hours, fires) in
        [("completed", 20.0 * 24.0, false), ("completed", 1.0, true), ("in-progress", 10.0, true)]
    {
        let s = symptomatic(aged(6, 60), 20.0);
        let ma = given(&s, "ma-bicarb", "B05XA02", "sodium bicarbonate", status, hours);
        let result = app.assess_ok(&s.with(ma).bundle()).await;
        assert_eq!(
            !safety(&result, "Sodium bicarbonate").is_empty(),
            fires,
            "{status} {hours} h: {:?}",
            issue_titles(&result)
        );
    }
}

#[tokio::test]
async fn ceftriaxone_is_flagged_in_a_neonate_not_in_a_two_month_old() {
    let app = spawn_app().await;
    // 10 days old, 3.5 kg; 61 days old, 5 kg (both near the median for the age).
    for (s, kg, neonate) in [(aged_days(10), 3.5, true), (aged_days(61), 5.0, false)] {
        let s = symptomatic(s, kg);
        let mr = medication_request(&s, "mr-cef", ATC, "J01DD04", "ceftriaxone");
        let result = app.assess_ok(&s.with(mr).bundle()).await;
        assert!(proposal(&result, BOLUS).is_some(), "IV calcium proposed: {:?}", treatment_titles(&result));
        let found = safety(&result, "Ceftriaxone in a neonate");
        if neonate {
            assert_eq!(found.len(), 1, "{:?}", issue_titles(&result));
            assert_eq!(found[0]["severity"], "high");
            assert!(implicates(found[0], "MedicationRequest", "mr-cef", 4), "{}", found[0]);
        } else {
            assert!(found.is_empty(), "61 days old is past 28 days: {:?}", issue_titles(&result));
            // Past 28 days: the any-age rule (never together through one line) still warns.
            let line = safety(&result, "Ceftriaxone with IV calcium: never through the same line");
            assert_eq!(line.len(), 1, "{:?}", issue_titles(&result));
            assert_eq!(line[0]["severity"], "moderate");
        }
    }
}

#[tokio::test]
async fn an_arterial_line_is_never_for_calcium() {
    let app = spawn_app().await;
    for access in ["arterial", "umbilical-arterial"] {
        let result = app.assess_ok(&with_access(&symptomatic(aged(6, 60), 20.0), access)).await;
        let issue = one_safety(&result, "Arterial line: never give calcium");
        assert_eq!(issue["severity"], "high", "{access}");
        assert!(safety(&result, "Peripheral IV calcium").is_empty(), "{access}: {:?}", issue_titles(&result));
        assert!(proposal(&result, CHLORIDE).is_none(), "{access}");
    }
    for access in ["peripheral", "central", "unknown"] {
        let result = app.assess_ok(&with_access(&symptomatic(aged(6, 60), 20.0), access)).await;
        assert!(safety(&result, "Arterial line").is_empty(), "{access}: {:?}", issue_titles(&result));
    }
}

#[tokio::test]
async fn a_peripheral_or_unknown_line_warns_of_extravasation() {
    let app = spawn_app().await;
    let s = symptomatic(aged(6, 60), 20.0);
    // Without a vascularAccess part the line is unknown.
    for (request, what) in [
        (with_access(&s, "peripheral"), "peripheral"),
        (with_access(&s, "unknown"), "unknown"),
        (s.bundle(), "not stated"),
    ] {
        let result = app.assess_ok(&request).await;
        let issue = one_safety(&result, "Peripheral IV calcium: extravasation risk");
        assert_eq!(issue["severity"], "moderate", "{what}");
        assert!(proposal(&result, CHLORIDE).is_none(), "{what}: chloride is for a central line only");
    }
}

#[tokio::test]
async fn a_central_line_offers_calcium_chloride_as_an_exactly_one_alternative() {
    let app = spawn_app().await;
    let result = app.assess_ok(&with_access(&symptomatic(aged(6, 60), 20.0), "central")).await;
    let chloride = must(&result, CHLORIDE);
    assert_eq!(route(chloride), IV_ROUTE);
    assert!(chloride["medicationCodeableConcept"]["text"].as_str().unwrap().starts_with("Calcium chloride 10%"));
    // AHA PALS 20 mg/kg x 20 kg = 400 mg (under the 1000 mg cap) = 4 mL of 100 mg/mL;
    // elemental 4 mL x 27.3 mg/mL = 109.2 mg.
    assert_eq!(dose(chloride), (400.0, "mg".to_owned()));
    assert!(
        text(chloride).contains("= 4 mL of") && text(chloride).contains("109.2 mg elemental calcium"),
        "{}",
        text(chloride)
    );
    assert!(safety(&result, "Peripheral IV calcium").is_empty(), "{:?}", issue_titles(&result));
    // The gluconate bolus and the chloride are one choice: a sub-group with exactly-one.
    let group = treatment_group(&result).unwrap();
    let choice = group["action"]
        .as_array()
        .unwrap()
        .iter()
        .find(|a| a["selectionBehavior"] == "exactly-one")
        .unwrap_or_else(|| panic!("no exactly-one sub-group in {group}"));
    let inside: Vec<&str> = choice["action"].as_array().unwrap().iter().map(|a| a["title"].as_str().unwrap()).collect();
    assert_eq!(inside.len(), 2, "{inside:?}");
    assert!(inside[0].starts_with(BOLUS) && inside[1].starts_with(CHLORIDE), "{inside:?}");
    // And the choice comes before the infusion.
    let titles = treatment_titles(&result);
    let c = titles.iter().position(|t| t.starts_with(CHLORIDE)).unwrap();
    let i = titles.iter().position(|t| t.starts_with(INFUSION)).unwrap();
    assert!(c < i, "{titles:?}");
}

#[tokio::test]
async fn a_central_line_offers_calcium_chloride_and_no_extravasation_warning() {
    // The part of the central-line behaviour that works (the grouping is tested above).
    let app = spawn_app().await;
    let result = app.assess_ok(&with_access(&symptomatic(aged(6, 60), 20.0), "central")).await;
    let chloride = must(&result, CHLORIDE);
    // 20 mg/kg x 20 kg = 400 mg = 4 mL of 10% (100 mg/mL).
    assert_eq!(dose(chloride), (400.0, "mg".to_owned()));
    assert!(text(chloride).contains("400 mg calcium chloride = 4 mL of"), "{}", text(chloride));
    assert!(safety(&result, "Peripheral IV calcium").is_empty(), "{:?}", issue_titles(&result));
    assert!(proposal(&result, BOLUS).is_some());
}

#[tokio::test]
async fn a_prolonged_qtc_is_flagged_and_a_normal_one_is_not() {
    let app = spawn_app().await;
    // Threshold: QTc > 440 ms (calcium.toml qtc.prolonged_above_ms).
    for (ms, prolonged) in [(470.0, true), (420.0, false)] {
        let s = symptomatic(aged(6, 60), 20.0);
        let q = observation(&s, "qtc-1", "8636-3", "QT interval corrected", ms, "ms", 1.0);
        let result = app.assess_ok(&s.with(q).bundle()).await;
        let found = safety(&result, "Prolonged QTc");
        assert_eq!(found.len(), usize::from(prolonged), "{ms} ms: {:?}", issue_titles(&result));
        if prolonged {
            assert!(found[0]["detail"].as_str().unwrap().starts_with("QTc 470 ms (> 440 ms)"), "{}", found[0]);
        }
    }
}

#[tokio::test]
async fn a_high_calcium_phosphate_product_is_flagged() {
    let app = spawn_app().await;
    // Total calcium 7.0 mg/dL with albumin 4.0 g/dL (adjusted = total), a 6-year-old.
    // Phosphate 10 mg/dL: 7.0 x 10 = 70 mg2/dL2 > 65 (12 years and younger). Phosphate
    // 4.5 mg/dL: 7.0 x 4.5 = 31.5, under 65.
    for (phosphate, high) in [(10.0, true), (4.5, false)] {
        let s = aged(6, 60);
        let w = weight(&s, 20.0);
        let p =
            observation(&s, "po4-1", "2777-1", "Phosphate [Mass/volume] in Serum or Plasma", phosphate, "mg/dL", 1.0);
        let request =
            s.add(Lab::TotalCa, "tca-1", 7.0, 1.0).add(Lab::Albumin, "alb-1", 4.0, 1.0).with(p).with(w).bundle();
        let result = app.assess_ok(&request).await;
        assert!(!medication_requests(&result).is_empty(), "calcium is proposed: {:?}", issue_titles(&result));
        let found = safety(&result, "High calcium-phosphate product");
        assert_eq!(found.len(), usize::from(high), "phosphate {phosphate}: {:?}", issue_titles(&result));
        if high {
            assert!(found[0]["detail"].as_str().unwrap().contains("= 70 mg2/dL2, above 65"), "{}", found[0]);
        }
    }
}

#[tokio::test]
async fn a_running_calcium_infusion_with_a_normal_ionized_calcium_warns_of_overshoot() {
    let app = spawn_app().await;
    // Ionized 1.20 is within 1.11-1.30 (child band): not low.
    for (ionized, status, fires) in
        [(1.20, "in-progress", true), (1.20, "completed", false), (0.85, "in-progress", false)]
    {
        let s = aged(6, 60);
        let w = weight(&s, 20.0);
        let ma = gluconate_given(&s, "ma-ca", status, 3.0, None);
        let result = app.assess_ok(&s.add(Lab::IonizedCa, "ica-1", ionized, 1.0).with(w).with(ma).bundle()).await;
        let found = safety(&result, "Calcium infusion running with a calcium that is not low");
        assert_eq!(found.len(), usize::from(fires), "{ionized} {status}: {:?}", issue_titles(&result));
        if fires {
            assert!(implicates(found[0], "MedicationAdministration", "ma-ca", 3), "{}", found[0]);
            assert!(medication_requests(&result).is_empty(), "calcium is normal: no proposal");
        }
    }
}

#[tokio::test]
async fn calcium_already_given_plus_the_infusion_above_the_daily_maximum_is_flagged() {
    let app = spawn_app().await;
    // 20 kg, 6 years: infusion 16 mL/h x 10 mg/mL = 160 mg/h, x 24 h = 3840 mg.
    // Daily maximum: 13 mg/kg/h (upper rate of the band) x 24 h x 20 kg = 6240 mg.
    // 3000 mg given 3 h ago: 3000 + 3840 = 6840 > 6240 -> flagged.
    // 2000 mg given 3 h ago: 2000 + 3840 = 5840 <= 6240 -> silent.
    // 3000 mg given 30 h ago: outside the last 24 h, counts 0: 3840 <= 6240 -> silent.
    for (mg, hours_ago, fires) in [(3000.0, 3.0, true), (2000.0, 3.0, false), (3000.0, 30.0, false)] {
        let s = symptomatic(aged(6, 60), 20.0);
        let ma = gluconate_given(&s, "ma-ca", "completed", hours_ago, Some(mg));
        let result = app.assess_ok(&s.with(ma).bundle()).await;
        assert_eq!(rate(must(&result, INFUSION)), (16.0, "mL/h".to_owned()));
        let found = safety(&result, "Daily maximum");
        assert_eq!(found.len(), usize::from(fires), "{mg} mg {hours_ago} h ago: {:?}", issue_titles(&result));
        if fires {
            assert_eq!(act_code(found[0]), "DOSEH");
            assert_eq!(found[0]["severity"], "high");
            let d = found[0]["detail"].as_str().unwrap();
            assert!(d.contains("(3000 mg)") && d.contains("(3840 mg)") && d.contains("= 6240 mg"), "{d}");
            assert!(implicates(found[0], "MedicationAdministration", "ma-ca", 4), "{}", found[0]);
        }
    }
}

// ---------------------------------------------------------------------------
// 6. Low magnesium: magnesium first

#[tokio::test]
async fn low_magnesium_puts_magnesium_sulfate_first() {
    let app = spawn_app().await;
    // Magnesium 1.0 mg/dL / 2.4305 = 0.41 mmol/L, below 0.65 (7 d to 18 y).
    let s = symptomatic(aged(6, 60), 20.0);
    let mg = observation(&s, "mg-1", "19123-9", "Magnesium [Mass/volume] in Serum or Plasma", 1.0, "mg/dL", 1.0);
    let result = app.assess_ok(&s.with(mg).bundle()).await;
    let titles = treatment_titles(&result);
    assert!(titles[0].starts_with(MAGNESIUM), "{titles:?}");
    let b = titles.iter().position(|t| t.starts_with(BOLUS)).unwrap();
    let i = titles.iter().position(|t| t.starts_with(INFUSION)).unwrap();
    assert!(0 < b && b < i, "{titles:?}");
    let m = must(&result, MAGNESIUM);
    assert_eq!(route(m), IV_ROUTE);
    // AHA PALS 25-50 mg/kg, pick high: 20 kg x 50 = 1000 mg (under the 2000 mg cap) = 1000 / 500
    // = 2 mL of 50%; at most 200 mg/mL: 1000 / 200 = 5 mL or more; over max(60, 1000/150 = 6.7)
    // = 60 min; 1000 mg / 60 min = 16.67 -> 16.7 mg/min.
    assert_eq!(dose(m), (1000.0, "mg".to_owned()));
    let t = text(m);
    assert!(t.contains("20 kg x 50 mg/kg = 1000 mg magnesium sulfate = 2 mL of Magnesium sulfate 50%"), "{t}");
    // Elemental: 2 mL x 49.3 = 98.6 mg magnesium; 2 x 4.06 = 8.12 mEq.
    assert!(t.contains("98.6 mg elemental magnesium, 8.12 mEq"), "{t}");
    assert!(t.contains("dilute to 5 mL or more (at most 200 mg/mL;") && t.contains("and give over 60 min"), "{t}");
    assert_eq!(rate(m), (16.7, "mg/min".to_owned()));

    // A normal magnesium (2.0 mg/dL / 2.4305 = 0.82 mmol/L): no magnesium proposal.
    let s = symptomatic(aged(6, 60), 20.0);
    let mg = observation(&s, "mg-1", "19123-9", "Magnesium [Mass/volume] in Serum or Plasma", 2.0, "mg/dL", 1.0);
    let result = app.assess_ok(&s.with(mg).bundle()).await;
    assert!(proposal(&result, MAGNESIUM).is_none(), "{:?}", treatment_titles(&result));
    assert!(treatment_titles(&result)[0].starts_with(BOLUS), "{:?}", treatment_titles(&result));
}

// ---------------------------------------------------------------------------
// 7. Vitamin D

fn lab(s: &Scenario, id: &str, loinc: &str, value: f64, unit: &str) -> Value {
    observation(s, id, loinc, loinc, value, unit, 1.0)
}

#[tokio::test]
async fn nutritional_vitamin_d_deficiency_gets_cholecalciferol_for_90_days() {
    let app = spawn_app().await;
    // 18 months, 10.5 kg. 25-OH D 6 ng/mL x 2.496 = 15 nmol/L (< 30 deficient); PTH 150 pg/mL x
    // 0.106 = 15.9 pmol/L (> 6.25 high); phosphate 2.5 mg/dL = 0.81 mmol/L (< 0.90 low); ALP
    // 900 U/L (> 335 high); ionized 0.98 (mild, asymptomatic: oral calcium).
    let s = aged(1, 183);
    let extra = [
        weight(&s, 10.5),
        lab(&s, "d25", "62292-8", 6.0, "ng/mL"),
        lab(&s, "pth", "2731-8", 150.0, "pg/mL"),
        lab(&s, "po4", "2777-1", 2.5, "mg/dL"),
        lab(&s, "alp", "6768-6", 900.0, "U/L"),
    ];
    let mut s = s.add(Lab::IonizedCa, "ica-1", 0.98, 1.0);
    for r in extra {
        s = s.with(r);
    }
    let result = app.assess_ok(&s.bundle()).await;
    let d = must(&result, "Cholecalciferol");
    assert_eq!(route(d), ORAL_ROUTE);
    // SPEG 6 months-12 years: 3000-6400 IU/day, pick low = 3000 IU once daily; the 3000 IU/mL
    // colecalciferol solution (UK SmPC): 3000 / 3000 = 1 mL; for 90 days (treatment_days).
    assert_eq!(dose(d), (3000.0, "[iU]".to_owned()));
    let repeat = &dosage(d)["timing"]["repeat"];
    assert_eq!(repeat["frequency"], 1);
    assert_eq!(repeat["periodUnit"], "d");
    assert_eq!(repeat["boundsDuration"]["value"], 90);
    assert_eq!(repeat["boundsDuration"]["code"], "d");
    assert!(
        text(d).contains("3000 IU once daily = 3000 IU / 3000 IU per mL = 1 mL: give 1 mL of Colecalciferol"),
        "{}",
        text(d)
    );
    assert!(notes(d).iter().any(|n| n.starts_with("Chosen: 3000-6400 IU/d (SPEG")), "{:?}", notes(d));
    assert!(proposal(&result, "Calcitriol").is_none(), "{:?}", treatment_titles(&result));
    assert!(proposal(&result, "Oral elemental calcium").is_some(), "{:?}", treatment_titles(&result));
}

#[tokio::test]
async fn likely_hypoparathyroidism_gets_calcitriol_without_a_dose() {
    let app = spawn_app().await;
    // 8 years, 25 kg. PTH 5 pg/mL x 0.106 = 0.53 pmol/L (< 1.17 low); phosphate 7.5 mg/dL =
    // 2.42 mmol/L (> 1.80 high); magnesium 2.0 mg/dL = 0.82 mmol/L (normal); 25-OH D 30 ng/mL
    // = 75 nmol/L (sufficient).
    let s = aged(8, 60);
    let extra = [
        weight(&s, 25.0),
        lab(&s, "pth", "2731-8", 5.0, "pg/mL"),
        lab(&s, "po4", "2777-1", 7.5, "mg/dL"),
        lab(&s, "mg", "19123-9", 2.0, "mg/dL"),
        lab(&s, "d25", "62292-8", 30.0, "ng/mL"),
    ];
    let mut s = s.add(Lab::IonizedCa, "ica-1", 0.98, 1.0);
    for r in extra {
        s = s.with(r);
    }
    let result = app.assess_ok(&s.bundle()).await;
    let c = must(&result, "Calcitriol");
    assert!(c["medicationCodeableConcept"]["text"].as_str().unwrap().starts_with("Calcitriol"));
    assert!(dosage(c).get("doseAndRate").is_none(), "no dose: {c}");
    assert!(notes(c).contains(&"No dose is proposed: specialist dosing."), "{:?}", notes(c));
    assert!(
        text(c).contains("Hypoparathyroidism") && text(c).contains("Refer to pediatric endocrinology"),
        "{}",
        text(c)
    );
    assert!(proposal(&result, "Cholecalciferol").is_none(), "{:?}", treatment_titles(&result));
}

// ---------------------------------------------------------------------------
// 8. Every MedicationRequest is a draft proposal with the advisory note

#[tokio::test]
async fn every_medication_request_is_an_advisory_draft_proposal() {
    let app = spawn_app().await;
    let mut requests = Vec::new();
    // IV: magnesium, bolus, infusion, chloride (central line).
    let s = symptomatic(aged(6, 60), 20.0);
    let mg = observation(&s, "mg-1", "19123-9", "Magnesium [Mass/volume] in Serum or Plasma", 1.0, "mg/dL", 1.0);
    // With vitamin D paired to the calcium (25-OH vitamin D not measured: maintenance dose).
    requests.push((with_access(&s.with(mg), "central"), 5));
    // Oral liquid and tablets.
    for (s, kg) in [(aged(3, 60), 14.0), (aged(10, 60), 32.0)] {
        let w = weight(&s, kg);
        requests.push((s.add(Lab::IonizedCa, "ica-1", 1.05, 1.0).with(w).bundle(), 2));
    }
    let mut seen = 0;
    for (request, expected) in requests {
        let result = app.assess_ok(&request).await;
        let all = medication_requests(&result);
        assert_eq!(all.len(), expected, "{:?}", treatment_titles(&result));
        for mr in all {
            assert_eq!(mr["status"], "draft", "{mr}");
            assert_ne!(mr["status"], "active");
            assert_eq!(mr["intent"], "proposal", "{mr}");
            assert!(notes(mr).iter().any(|n| n.starts_with("Advisory only")), "{:?}", notes(mr));
            seen += 1;
        }
    }
    // 5 + 2 + 2 (each plan with its vitamin D).
    assert_eq!(seen, 9);
}
