//! The case runner (`calcium-cds check DIR`): each case is a request file
//! `NAME.json` with an expectation file `NAME.expect.toml` beside it; every
//! case is assessed with the rules in force and its result Bundle compared
//! with what the expectation states. An adapter like the CLI: it reads the
//! FHIR output the EHR would see, not the clinical core's structures.
//!
//! Expectation keys (all optional but `now`):
//!
//! ```toml
//! description = "what the case is about"
//! now = "2026-11-30T15:00:00Z"          # the evaluation clock
//! refused = 422                         # the request must be refused with this status
//! status = "data-required"              # GuidanceResponse.status
//! severity = "high"                     # hypocalcemia DetectedIssue severity, or "none"
//! leading_cause = "vitamin_d_deficiency" # cause id (rules), first in the ClinicalImpression
//! causes_ruled_out = ["..."]            # cause ids whose basis says ruled out
//! causes_unlikely = ["..."]             # cause ids weighed unlikely
//! proposed_tests = ["2731-8"]           # LOINC codes of the ServiceRequests (the exact set)
//! proposals = ["calcium-bolus"]         # treatment proposal keys that must be present
//! proposals_absent = ["calcium-oral"]
//! safety_present = ["bradycardia"]      # safety check keys (DetectedIssue identifiers)
//! safety_absent = ["digoxin"]
//! hypocalcemia = true                   # a hypocalcemia DetectedIssue is (or is not) raised
//! tests_proposed = true                 # at least one next test is (or no test is) proposed
//! adjusted_calcium = true               # an albumin-adjusted calcium Observation is (or is not) computed
//! set_aside = [".valueQuantity.code"]   # each: the end of the element of an input set aside with a warning
//! [safety_text]                        # words a safety check's DetectedIssue.detail must contain
//! weight = ["Unit slip"]
//! [proposal_text]                      # words a proposal's dosage text must contain
//! calcium-infusion = ["mL/kg/day"]
//! [doses.calcium-bolus]                 # dose per administration within [min, max]
//! min = 700.0
//! max = 800.0
//! [rates.calcium-chloride]              # rate (doseAndRate.rateQuantity) within [min, max]
//! min = 6.0
//! max = 7.0
//! ```

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use serde::Deserialize;
use serde_json::Value;

use crate::engine::Engine;

/// Identifier system suffixes written by the FHIR writers.
const SAFETY_SID: &str = "/sid/safety-check";
const PROPOSAL_SID: &str = "/sid/treatment-proposal";
/// The hypocalcemia DetectedIssue's code (SNOMED CT 5291005).
const HYPOCALCEMIA: &str = "5291005";

/// What a case expects.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Expectation {
    /// What the case is about.
    #[serde(default)]
    pub description: String,
    /// Evaluation clock (RFC 3339).
    pub now: String,
    /// The request must be refused with this HTTP status.
    pub refused: Option<u16>,
    /// GuidanceResponse.status.
    pub status: Option<String>,
    /// Hypocalcemia DetectedIssue severity, or "none".
    pub severity: Option<String>,
    /// Cause id first in the ClinicalImpression.
    pub leading_cause: Option<String>,
    /// Cause ids that must be ruled out.
    #[serde(default)]
    pub causes_ruled_out: Vec<String>,
    /// Cause ids that must be weighed unlikely.
    #[serde(default)]
    pub causes_unlikely: Vec<String>,
    /// LOINC codes of the proposed ServiceRequests (the exact set).
    pub proposed_tests: Option<Vec<String>>,
    /// Treatment proposal keys that must be present.
    #[serde(default)]
    pub proposals: Vec<String>,
    /// Treatment proposal keys that must be absent.
    #[serde(default)]
    pub proposals_absent: Vec<String>,
    /// Safety check keys that must be raised.
    #[serde(default)]
    pub safety_present: Vec<String>,
    /// Safety check keys that must not be raised.
    #[serde(default)]
    pub safety_absent: Vec<String>,
    /// A hypocalcemia DetectedIssue is raised (true) or not (false).
    pub hypocalcemia: Option<bool>,
    /// At least one next test is proposed (true) or none is (false).
    pub tests_proposed: Option<bool>,
    /// An albumin-adjusted calcium is computed (true) or not (false).
    pub adjusted_calcium: Option<bool>,
    /// Element endings of inputs that must be set aside with a warning.
    #[serde(default)]
    pub set_aside: Vec<String>,
    /// Texts each safety check's DetectedIssue.detail must contain, by key.
    #[serde(default)]
    pub safety_text: BTreeMap<String, Vec<String>>,
    /// Texts each proposal's dosage instruction text must contain, by key.
    #[serde(default)]
    pub proposal_text: BTreeMap<String, Vec<String>>,
    /// Dose ranges by proposal key.
    #[serde(default)]
    pub doses: BTreeMap<String, DoseRange>,
    /// Rate ranges by proposal key (the proposal's rate unit).
    #[serde(default)]
    pub rates: BTreeMap<String, DoseRange>,
}

/// An accepted dose range (the proposal's own unit).
#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DoseRange {
    /// Lowest accepted.
    pub min: f64,
    /// Highest accepted.
    pub max: f64,
}

/// One comparison.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Check {
    /// What was compared.
    pub what: String,
    /// Expected.
    pub expected: String,
    /// Found.
    pub got: String,
    /// Whether they agree.
    pub pass: bool,
}

/// One case and its comparisons.
#[derive(Debug, Clone)]
pub struct CaseResult {
    /// Case name (the file stem).
    pub name: String,
    /// Its comparisons; a case that could not be run has one failed check saying why.
    pub checks: Vec<Check>,
}

impl CaseResult {
    /// Whether every comparison agrees.
    pub fn passed(&self) -> bool {
        self.checks.iter().all(|c| c.pass)
    }
}

/// The cases of a directory: `NAME.json` with `NAME.expect.toml`, by name.
pub fn find_cases(dir: &Path) -> Result<Vec<(String, PathBuf, PathBuf)>, String> {
    let entries = std::fs::read_dir(dir).map_err(|e| format!("cannot read {}: {e}", dir.display()))?;
    let mut cases: Vec<(String, PathBuf, PathBuf)> = entries
        .filter_map(Result::ok)
        .map(|e| e.path())
        .filter_map(|p| {
            let name = p.file_name()?.to_str()?.strip_suffix(".expect.toml")?.to_owned();
            let request = p.with_file_name(format!("{name}.json"));
            Some((name, request, p))
        })
        .collect();
    cases.sort();
    if cases.is_empty() {
        return Err(format!("no cases (NAME.expect.toml beside NAME.json) in {}", dir.display()));
    }
    Ok(cases)
}

/// Run every case of `dir` with `engine`.
pub fn run_dir(engine: &Engine, dir: &Path) -> Result<Vec<CaseResult>, String> {
    Ok(find_cases(dir)?.into_iter().map(|(name, request, expect)| run_case(engine, name, &request, &expect)).collect())
}

fn broken(name: String, why: String) -> CaseResult {
    CaseResult {
        name,
        checks: vec![Check { what: "case".into(), expected: "a runnable case".into(), got: why, pass: false }],
    }
}

/// Run one case.
pub fn run_case(engine: &Engine, name: String, request: &Path, expect: &Path) -> CaseResult {
    let exp: Expectation = match std::fs::read_to_string(expect)
        .map_err(|e| e.to_string())
        .and_then(|t| toml::from_str(&t).map_err(|e| e.to_string()))
    {
        Ok(e) => e,
        Err(e) => return broken(name, format!("{}: {e}", expect.display())),
    };
    let body = match std::fs::read(request) {
        Ok(b) => b,
        Err(e) => return broken(name, format!("{}: {e}", request.display())),
    };
    compare(engine, name, &body, &exp)
}

/// Assess a request and compare the result with an expectation.
pub fn compare(engine: &Engine, name: String, body: &[u8], exp: &Expectation) -> CaseResult {
    let Ok(now) = crate::fhir::datetime::parse_date_time(&exp.now).map(|d| d.when.earliest) else {
        return broken(name, format!("now '{}' is not a dateTime", exp.now));
    };
    let result = engine.assess(body, now, true);
    let mut checks = Vec::new();
    let mut check = |what: &str, expected: String, got: String| {
        let pass = expected == got;
        checks.push(Check { what: what.to_owned(), expected, got, pass });
    };
    let bundle = match (&result, exp.refused) {
        (Err(e), Some(status)) => {
            check("refused", status.to_string(), e.status.to_string());
            return CaseResult { name, checks };
        }
        (Ok(_), Some(status)) => {
            check("refused", status.to_string(), "answered".into());
            return CaseResult { name, checks };
        }
        (Err(e), None) => {
            check("answered", "a result Bundle".into(), format!("refused with {}", e.status));
            return CaseResult { name, checks };
        }
        (Ok(o), None) => &o.bundle,
    };
    let view = View::of(bundle, &engine.canonical_base, &engine.rules.rules.output_codes.adjusted_calcium.code);
    if let Some(s) = &exp.status {
        check("status", s.clone(), view.status.clone());
    }
    if let Some(s) = &exp.severity {
        check("severity", s.clone(), view.severity.clone().unwrap_or_else(|| "none".into()));
    }
    let label = |id: &str| {
        engine
            .rules
            .rules
            .causes
            .iter()
            .find(|c| c.id == id)
            .map_or_else(|| format!("(unknown cause id {id})"), |c| c.label.clone())
    };
    if let Some(id) = &exp.leading_cause {
        check("leading cause", label(id), view.causes.first().map_or_else(|| "(no causes)".into(), |c| c.0.clone()));
    }
    let wanted = exp
        .causes_ruled_out
        .iter()
        .map(|id| (id, "ruled out"))
        .chain(exp.causes_unlikely.iter().map(|id| (id, "unlikely")));
    for (id, want) in wanted {
        let l = label(id);
        let got = view.causes.iter().find(|c| c.0 == l).map_or("(not listed)", |c| c.1.as_str());
        check(&format!("cause {id}"), want.into(), got.to_owned());
    }
    if let Some(tests) = &exp.proposed_tests {
        let mut want = tests.clone();
        want.sort();
        let mut got = view.tests.clone();
        got.sort();
        let list = |v: &[String]| if v.is_empty() { "(none)".to_owned() } else { v.join(", ") };
        check("proposed tests", list(&want), list(&got));
    }
    for key in &exp.proposals {
        check(&format!("proposal {key}"), "present".into(), present(view.doses.contains_key(key)));
    }
    for key in &exp.proposals_absent {
        check(&format!("proposal {key}"), "absent".into(), present(view.doses.contains_key(key)));
    }
    for key in &exp.safety_present {
        check(&format!("safety {key}"), "present".into(), present(view.safety.contains(key)));
    }
    for key in &exp.safety_absent {
        check(&format!("safety {key}"), "absent".into(), present(view.safety.contains(key)));
    }
    let yes_no = |b: bool| if b { "yes" } else { "no" }.to_owned();
    if let Some(want) = exp.hypocalcemia {
        check("hypocalcemia", yes_no(want), yes_no(view.severity.is_some()));
    }
    if let Some(want) = exp.tests_proposed {
        check("tests proposed", yes_no(want), yes_no(!view.tests.is_empty()));
    }
    if let Some(want) = exp.adjusted_calcium {
        check("adjusted calcium", yes_no(want), yes_no(view.adjusted));
    }
    for ending in &exp.set_aside {
        let got = view.set_aside.iter().find(|e| e.ends_with(ending.as_str()));
        check(
            &format!("set aside {ending}"),
            "set aside with a warning".into(),
            got.map_or_else(|| "(not set aside)".to_owned(), |_| "set aside with a warning".to_owned()),
        );
    }
    for (map, texts, what) in
        [(&exp.safety_text, &view.safety_detail, "safety"), (&exp.proposal_text, &view.proposal_text, "proposal")]
    {
        for (key, words) in map {
            for w in words {
                let got = match texts.get(key) {
                    None => "(no such resource)".to_owned(),
                    Some(t) if t.contains(w.as_str()) => w.clone(),
                    Some(t) => t.chars().take(200).collect(),
                };
                check(&format!("{what} {key} text"), w.clone(), got);
            }
        }
    }
    for (key, range) in &exp.doses {
        let want = format!(
            "{} to {}",
            crate::clinical::treatment::num_trim(range.min),
            crate::clinical::treatment::num_trim(range.max)
        );
        let got = match view.doses.get(key) {
            None => "(no such proposal)".to_owned(),
            Some(None) => "(no dose)".to_owned(),
            Some(Some((v, _))) if (range.min..=range.max).contains(v) => want.clone(),
            Some(Some((v, unit))) => format!("{} {unit}", crate::clinical::treatment::num_trim(*v)),
        };
        check(&format!("dose {key}"), want, got);
    }
    for (key, range) in &exp.rates {
        let want = format!(
            "{} to {}",
            crate::clinical::treatment::num_trim(range.min),
            crate::clinical::treatment::num_trim(range.max)
        );
        let got = match view.rates.get(key) {
            None => "(no such proposal)".to_owned(),
            Some(None) => "(no rate)".to_owned(),
            Some(Some((v, _))) if (range.min..=range.max).contains(v) => want.clone(),
            Some(Some((v, unit))) => format!("{} {unit}", crate::clinical::treatment::num_trim(*v)),
        };
        check(&format!("rate {key}"), want, got);
    }
    CaseResult { name, checks }
}

fn present(yes: bool) -> String {
    if yes { "present" } else { "absent" }.to_owned()
}

/// What a result Bundle says, as the case runner compares it.
#[derive(Debug, Default)]
struct View {
    status: String,
    severity: Option<String>,
    /// ClinicalImpression findings in order: (cause label, "likely" / "possible" / "unlikely" / "ruled out").
    causes: Vec<(String, String)>,
    /// LOINC codes of ServiceRequests.
    tests: Vec<String>,
    /// Treatment proposals by key: their dose per administration and unit.
    doses: BTreeMap<String, Option<(f64, String)>>,
    /// Treatment proposals by key: their rate and unit.
    rates: BTreeMap<String, Option<(f64, String)>>,
    /// Safety check keys raised.
    safety: Vec<String>,
    /// DetectedIssue.detail of each safety check raised.
    safety_detail: BTreeMap<String, String>,
    /// Dosage instruction text of each proposal.
    proposal_text: BTreeMap<String, String>,
    /// An albumin-adjusted calcium Observation was computed.
    adjusted: bool,
    /// Elements of inputs set aside with a warning or an error.
    set_aside: Vec<String>,
}

fn identifier(r: &Value, system: &str) -> Option<String> {
    r["identifier"].as_array()?.iter().find(|i| i["system"] == system)?["value"].as_str().map(str::to_owned)
}

impl View {
    fn of(bundle: &Value, canonical_base: &str, adjusted_code: &str) -> Self {
        let mut v = Self::default();
        let (safety_sid, proposal_sid) =
            (format!("{canonical_base}{SAFETY_SID}"), format!("{canonical_base}{PROPOSAL_SID}"));
        for r in bundle["entry"].as_array().into_iter().flatten().map(|e| &e["resource"]) {
            match r["resourceType"].as_str() {
                Some("GuidanceResponse") => v.status = r["status"].as_str().unwrap_or("").to_owned(),
                Some("DetectedIssue") => {
                    let hypocalcemia =
                        r["code"]["coding"].as_array().into_iter().flatten().any(|c| c["code"] == HYPOCALCEMIA);
                    if hypocalcemia {
                        v.severity = r["severity"].as_str().map(str::to_owned);
                    } else if let Some(key) = identifier(r, &safety_sid) {
                        v.safety_detail.insert(key.clone(), r["detail"].as_str().unwrap_or("").to_owned());
                        v.safety.push(key);
                    }
                }
                Some("ClinicalImpression") => {
                    for f in r["finding"].as_array().into_iter().flatten() {
                        let name = f["itemCodeableConcept"]["text"].as_str().unwrap_or("").to_owned();
                        let basis = f["basis"].as_str().unwrap_or("").to_ascii_lowercase();
                        let label = ["likely", "possible", "unlikely", "ruled out"]
                            .into_iter()
                            .find(|w| basis.starts_with(w))
                            .unwrap_or("?");
                        v.causes.push((name, label.to_owned()));
                    }
                }
                Some("Observation") => {
                    v.adjusted |=
                        r["code"]["coding"].as_array().into_iter().flatten().any(|c| c["code"] == adjusted_code);
                }
                Some("OperationOutcome") => {
                    for i in r["issue"].as_array().into_iter().flatten() {
                        if matches!(i["severity"].as_str(), Some("warning" | "error" | "fatal")) {
                            let elements = i["expression"].as_array().into_iter().flatten();
                            v.set_aside.extend(elements.filter_map(|e| e.as_str().map(str::to_owned)));
                        }
                    }
                }
                Some("ServiceRequest") => v.tests.extend(
                    r["code"]["coding"]
                        .as_array()
                        .into_iter()
                        .flatten()
                        .filter_map(|c| c["code"].as_str().map(str::to_owned)),
                ),
                Some("MedicationRequest") => {
                    if let Some(key) = identifier(r, &proposal_sid) {
                        let q = &r["dosageInstruction"][0]["doseAndRate"][0]["doseQuantity"];
                        let dose = q["value"].as_f64().map(|x| (x, q["unit"].as_str().unwrap_or("").to_owned()));
                        let text = r["dosageInstruction"][0]["text"].as_str().unwrap_or("").to_owned();
                        v.proposal_text.insert(key.clone(), text);
                        let q = &r["dosageInstruction"][0]["doseAndRate"][0]["rateQuantity"];
                        let rate = q["value"].as_f64().map(|x| (x, q["unit"].as_str().unwrap_or("").to_owned()));
                        v.rates.insert(key.clone(), rate);
                        v.doses.insert(key, dose);
                    }
                }
                _ => {}
            }
        }
        v
    }
}

/// The results as a table: case, what, expected, got, pass/FAIL; then a total line.
pub fn table(results: &[CaseResult]) -> String {
    let mut rows = vec![["case".to_owned(), "check".into(), "expected".into(), "got".into(), "result".into()]];
    for r in results {
        for c in &r.checks {
            rows.push([
                r.name.clone(),
                c.what.clone(),
                c.expected.clone(),
                c.got.clone(),
                if c.pass { "pass" } else { "FAIL" }.into(),
            ]);
        }
    }
    let widths: Vec<usize> =
        (0..5).map(|i| rows.iter().map(|r| r[i].chars().count()).max().unwrap_or(0).min(60)).collect();
    let mut out = String::new();
    for row in &rows {
        let cells: Vec<String> = row.iter().zip(&widths).map(|(c, w)| format!("{c:<w$}")).collect();
        out.push_str(cells.join("  ").trim_end());
        out.push('\n');
    }
    let failed = results.iter().filter(|r| !r.passed()).count();
    out.push_str(&format!("{} case(s), {} passed, {failed} failed\n", results.len(), results.len() - failed));
    out
}

fn xml(s: &str) -> String {
    s.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;").replace('"', "&quot;")
}

/// The results as JUnit XML (one testcase per case; its failed checks in the failure message).
pub fn junit(results: &[CaseResult], suite: &str) -> String {
    let failed = results.iter().filter(|r| !r.passed()).count();
    let mut out = format!(
        "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<testsuites>\n  <testsuite name=\"{}\" tests=\"{}\" failures=\"{failed}\">\n",
        xml(suite),
        results.len()
    );
    for r in results {
        out.push_str(&format!("    <testcase classname=\"{}\" name=\"{}\"", xml(suite), xml(&r.name)));
        if r.passed() {
            out.push_str("/>\n");
        } else {
            let why: Vec<String> = r
                .checks
                .iter()
                .filter(|c| !c.pass)
                .map(|c| format!("{}: expected {}, got {}", c.what, c.expected, c.got))
                .collect();
            out.push_str(&format!(">\n      <failure message=\"{}\"/>\n    </testcase>\n", xml(&why.join("; "))));
        }
    }
    out.push_str("  </testsuite>\n</testsuites>\n");
    out
}
