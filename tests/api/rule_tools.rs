//! The tools informatics staff use without reading Rust, run as the binary:
//! `check DIR` over the shipped case set (tests/cases), what a changed
//! threshold does to it, and `rules check`, `rules show`, `rules diff`.

use std::process::{Command, Output};

use crate::helpers::repo_path;

const BIN: &str = env!("CARGO_BIN_EXE_calcium-cds");

fn run(args: &[&str]) -> Output {
    Command::new(BIN).args(args).env_remove("CALCIUM_CDS_RULES").output().expect("the binary runs")
}

fn text(o: &Output) -> String {
    format!("{}{}", String::from_utf8_lossy(&o.stdout), String::from_utf8_lossy(&o.stderr))
}

fn temp_file(name: &str, content: &str) -> std::path::PathBuf {
    let dir = std::env::temp_dir().join(format!("calcium-cds-rule-tools-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("a temp dir");
    let path = dir.join(name);
    std::fs::write(&path, content).expect("written");
    path
}

/// A site file an analyst might write: a steeper albumin slope (conventional units).
const STEEPER_SLOPE: &str = "[ruleset]\nversion = \"larkspur-2026-12\"\n\n[albumin_adjustment]\n# Larkspur's lab chose a steeper slope\nconventional_slope_mg_dl_per_g_dl = 1.2\n";

#[test]
fn the_shipped_case_set_passes_with_the_default_rules_and_writes_junit() {
    let cases = repo_path("tests/cases");
    let junit = temp_file("cases.xml", "");
    let out = run(&["check", cases.to_str().unwrap(), "--junit", junit.to_str().unwrap()]);
    let t = text(&out);
    assert!(out.status.success(), "{t}");
    let cases_on_disk = std::fs::read_dir(&cases)
        .unwrap()
        .filter(|e| e.as_ref().unwrap().file_name().to_string_lossy().ends_with(".expect.toml"))
        .count();
    assert!(cases_on_disk >= 12, "{cases_on_disk} cases");
    assert!(t.contains(&format!("{cases_on_disk} case(s), {cases_on_disk} passed, 0 failed")), "{t}");
    let xml = std::fs::read_to_string(&junit).unwrap();
    assert!(xml.contains(&format!("tests=\"{cases_on_disk}\" failures=\"0\"")), "{xml}");
    assert!(!xml.contains("<failure"), "{xml}");
}

#[test]
fn the_site_case_set_passes_with_the_larkspur_site_file_and_fails_without_it() {
    // tests/cases-site: a local 1,25-dihydroxyvitamin D code and saline as the bolus
    // diluent (tests/cases-site/README.md). With the site file every case passes; with
    // the defaults alone the vitamin D-dependent rickets cases and the saline notice fail.
    let dir = repo_path("tests/cases-site");
    let site = dir.join("site-rules.toml");
    let out = run(&["check", dir.to_str().unwrap(), "--rules", site.to_str().unwrap()]);
    assert!(out.status.success(), "{}", text(&out));
    let out = run(&["check", dir.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(1), "{}", text(&out));
    let t = text(&out);
    for case in ["vddr-type1-leads", "vddr-type2-leads", "safety-saline-diluent"] {
        assert!(t.lines().any(|l| l.contains(case) && l.contains("FAIL")), "{case}: {t}");
    }
}

#[test]
fn a_changed_threshold_fails_exactly_the_cases_it_changes() {
    // 7.6 + 1.2 x (4.0 - 2.6) = 9.28 mg/dL = 2.32 mmol/L: within the child band's 2.20-2.70,
    // so the 7-year-old with total calcium 7.6 mg/dL is no longer hypocalcemic. The SI cases
    // use the SI slope and do not change.
    let site = temp_file("steeper.toml", STEEPER_SLOPE);
    let junit = temp_file("steeper.xml", "");
    let cases = repo_path("tests/cases");
    let out =
        run(&["check", cases.to_str().unwrap(), "--rules", site.to_str().unwrap(), "--junit", junit.to_str().unwrap()]);
    let t = text(&out);
    assert_eq!(out.status.code(), Some(1), "{t}");
    assert!(t.contains("larkspur-2026-12"), "the table names the rule set in force: {t}");
    let failing: Vec<&str> = t.lines().filter(|l| l.ends_with("FAIL")).collect();
    assert!(!failing.is_empty(), "{t}");
    assert!(failing.iter().all(|l| l.starts_with("total-calcium-low-albumin-child ")), "{failing:?}");
    assert!(failing.iter().any(|l| l.contains("severity") && l.contains("high") && l.contains("none")), "{failing:?}");
    let xml = std::fs::read_to_string(&junit).unwrap();
    assert!(xml.contains("failures=\"1\""), "{xml}");
    assert!(xml.contains("<failure message=\"") && xml.contains("severity: expected high, got none"), "{xml}");
}

#[test]
fn rules_check_points_at_the_line_of_a_bad_value() {
    let site = temp_file(
        "bad.toml",
        "[ruleset]\nversion = \"larkspur-bad\"\n\n[albumin_adjustment]\nconventional_slope_mg_dl_per_g_dl = -3\n",
    );
    let out = run(&["rules", "check", site.to_str().unwrap()]);
    let t = text(&out);
    assert_eq!(out.status.code(), Some(1), "{t}");
    assert!(t.contains(&format!("{}:5: albumin_adjustment.conventional_slope_mg_dl_per_g_dl", site.display())), "{t}");
    let good = temp_file("good.toml", STEEPER_SLOPE);
    let out = run(&["rules", "check", good.to_str().unwrap()]);
    assert!(out.status.success(), "{}", text(&out));
    assert!(text(&out).contains("larkspur-2026-12"), "{}", text(&out));
}

#[test]
fn a_site_file_cannot_replace_the_advisory_caution_only_add_after_it() {
    // Replacing the caution is refused by `rules check` and by `assess`, at its line.
    let replace = temp_file(
        "replace-caution.toml",
        "[ruleset]\nversion = \"larkspur-x\"\n\n[texts]\nadvisory = \"Follow this.\"\n",
    );
    let out = run(&["rules", "check", replace.to_str().unwrap()]);
    let t = text(&out);
    assert_eq!(out.status.code(), Some(1), "{t}");
    assert!(t.contains("texts.advisory") && t.contains("cannot be replaced"), "{t}");
    let case = repo_path("fhir-profiles/examples/ionized-low-seizure-toddler.json");
    let out =
        run(&["assess", case.to_str().unwrap(), "--now", "2026-11-30T15:00:00Z", "--rules", replace.to_str().unwrap()]);
    assert!(!out.status.success(), "a replaced caution never reaches an answer");
    // A site note is added after the fixed caution, in every resource that carries it.
    let note = "Larkspur Children's: page the on-call pharmacist before any IV calcium.";
    let add = temp_file("add-note.toml", &format!("[texts]\nsite_note = \"{note}\"\n"));
    let out = run(&["rules", "check", add.to_str().unwrap()]);
    assert!(out.status.success(), "{}", text(&out));
    let out = run(&[
        "assess",
        case.to_str().unwrap(),
        "--now",
        "2026-11-30T15:00:00Z",
        "--rules",
        add.to_str().unwrap(),
        "--explain",
    ]);
    assert!(out.status.success(), "{}", text(&out));
    let body = String::from_utf8_lossy(&out.stdout);
    let combined = format!("{} {note}", calcium_cds::rules::model::ADVISORY_CAUTION);
    let fixed_count = body.matches(calcium_cds::rules::model::ADVISORY_CAUTION).count();
    assert!(fixed_count > 3, "the caution is in the GuidanceResponse, proposals, issues and trace: {fixed_count}");
    assert_eq!(body.matches(&combined).count(), fixed_count, "every caution is followed by the site note");
    // The explain text on stderr opens with the caution and the note.
    assert!(String::from_utf8_lossy(&out.stderr).starts_with(&combined), "{}", String::from_utf8_lossy(&out.stderr));
}

#[test]
fn rules_show_marks_site_values_and_rules_diff_lists_them() {
    let site = temp_file("show.toml", STEEPER_SLOPE);
    let out = run(&["rules", "show", "--rules", site.to_str().unwrap()]);
    let t = text(&out);
    assert!(out.status.success(), "{t}");
    assert!(t.lines().any(|l| l == "albumin_adjustment.conventional_slope_mg_dl_per_g_dl = 1.2  # site"), "{t}");
    assert!(t.lines().any(|l| l == "ruleset.version = \"larkspur-2026-12\"  # site"));
    assert!(t.lines().any(|l| l.starts_with("albumin_adjustment.si_slope") || l.contains("# default")));
    let out = run(&["rules", "diff", "default", site.to_str().unwrap()]);
    let t = text(&out);
    assert_eq!(out.status.code(), Some(1), "different rule sets: {t}");
    assert!(t.contains("~ albumin_adjustment.conventional_slope_mg_dl_per_g_dl: 0.8 -> 1.2"), "{t}");
    assert!(t.contains("# 2 difference(s)"), "the slope and the version: {t}");
    let out = run(&["rules", "diff", "default", "default"]);
    assert!(out.status.success(), "{}", text(&out));
}

#[test]
fn every_case_request_that_is_not_meant_to_be_refused_is_valid_r4() {
    let mut checked = 0;
    for dir in [repo_path("tests/cases"), repo_path("tests/cases-site")] {
        for entry in std::fs::read_dir(&dir).unwrap() {
            let path = entry.unwrap().path();
            let Some(name) = path.file_name().and_then(|n| n.to_str()).and_then(|n| n.strip_suffix(".expect.toml"))
            else {
                continue;
            };
            if std::fs::read_to_string(&path).unwrap().lines().any(|l| l.starts_with("refused")) {
                continue;
            }
            let request: serde_json::Value =
                serde_json::from_str(&std::fs::read_to_string(dir.join(format!("{name}.json"))).unwrap()).unwrap();
            crate::helpers::assert_r4_valid(&request);
            checked += 1;
        }
    }
    assert!(checked >= 80, "{checked}");
}

#[test]
fn a_reader_that_closes_the_pipe_early_does_not_make_the_binary_panic() {
    // `calcium-cds rules show | head -1`: stdout closes after the first line.
    use std::io::Read;
    let mut child = Command::new(BIN)
        .args(["rules", "show"])
        .env_remove("CALCIUM_CDS_RULES")
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("the binary runs");
    let mut first = [0u8; 64];
    child.stdout.take().expect("stdout").read_exact(&mut first).expect("the first bytes");
    let out = child.wait_with_output().expect("it ends");
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!err.contains("panicked"), "{err}");
    assert!(out.status.success(), "{:?} {err}", out.status);
}
