//! `calcium-cds config check`: the effective configuration with its sources,
//! secrets masked, and a clear message and exit code for each bad value.

use std::process::{Command, Output};

fn run(args: &[&str], env: &[(&str, &str)]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_calcium-cds"))
        .args(args)
        .env_clear()
        .envs(env.iter().copied())
        .output()
        .expect("the binary runs")
}

fn temp_file(name: &str, contents: &str) -> String {
    crate::upstream::temp_file(&format!("config-{name}"), contents).display().to_string()
}

#[test]
fn the_effective_configuration_shows_each_source_and_masks_the_token() {
    let file = temp_file(
        "good",
        "listen = \"0.0.0.0:9090\"\nfhir-base-url = \"https://ehr.larkspur-childrens.example.org/fhir\"\nupstream-retries = 1\n",
    );
    let out = run(
        &["config", "check", "--config", &file, "--body-limit", "2048"],
        &[("CALCIUM_CDS_FHIR_TOKEN", "larkspur-very-secret-77"), ("CALCIUM_CDS_UPSTREAM_RETRIES", "3")],
    );
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(out.status.success(), "{text} {}", String::from_utf8_lossy(&out.stderr));
    assert!(!text.contains("larkspur-very-secret-77"), "the token is masked: {text}");
    assert!(text.contains("fhir-token = \"***\"  # environment"), "{text}");
    assert!(text.contains("listen = \"0.0.0.0:9090\"  # config file"), "{text}");
    assert!(text.contains("body-limit = \"2048\"  # command line"), "{text}");
    assert!(text.contains("upstream-retries = \"3\"  # environment"), "the environment beats the file: {text}");
    assert!(text.contains("max-in-flight = \"64\"  # default"), "{text}");
    assert!(text.contains("# rule set: calcium-cds-default"), "{text}");
}

#[test]
fn bad_settings_are_refused_with_a_message_naming_them() {
    let unknown = temp_file("unknown", "lisen = \"0.0.0.0:8080\"\n");
    let out = run(&["config", "check", "--config", &unknown], &[]);
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("unknown setting 'lisen'"));

    let bad_value = temp_file("value", "listen = \"nonsense\"\n");
    let out = run(&["config", "check", "--config", &bad_value], &[]);
    assert_eq!(out.status.code(), Some(2), "a usage error");
    assert!(String::from_utf8_lossy(&out.stderr).contains("--listen"));

    let out = run(
        &["config", "check"],
        &[
            ("CALCIUM_CDS_FHIR_BASE_URL", "https://ehr.larkspur-childrens.example.org/fhir"),
            ("CALCIUM_CDS_REQUEST_TIMEOUT_MS", "5000"),
        ],
    );
    assert_eq!(out.status.code(), Some(1));
    assert!(
        String::from_utf8_lossy(&out.stderr).contains("request-timeout-ms (5000) must be above upstream-deadline-ms")
    );

    let out = run(&["config", "check"], &[("CALCIUM_CDS_SMART_CLIENT_ID", "larkspur-cds")]);
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("CALCIUM_CDS_SMART_TOKEN_URL"));

    let out = run(&["config", "check", "--rules", "/nonexistent/site.toml"], &[]);
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("/nonexistent/site.toml"));
}

#[test]
fn serve_refuses_the_same_bad_configuration_before_listening() {
    let out = run(
        &["serve", "--listen", "127.0.0.1:0"],
        &[
            ("CALCIUM_CDS_FHIR_BASE_URL", "https://ehr.larkspur-childrens.example.org/fhir"),
            ("CALCIUM_CDS_REQUEST_TIMEOUT_MS", "5000"),
        ],
    );
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("request-timeout-ms"));
}

#[test]
fn config_check_and_serve_agree_on_inbound_auth_without_an_issuer() {
    // Issue 14: `config check` said ok while `serve` refused; both run one start-up check now.
    let env = [("CALCIUM_CDS_AUTH", "true")];
    let check = run(&["config", "check"], &env);
    assert_eq!(check.status.code(), Some(1), "{}", String::from_utf8_lossy(&check.stdout));
    assert!(String::from_utf8_lossy(&check.stderr).contains("CALCIUM_CDS_AUTH_ISSUER"));
    let serve = run(&["serve", "--listen", "127.0.0.1:0"], &env);
    assert_eq!(serve.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&serve.stderr).contains("CALCIUM_CDS_AUTH_ISSUER"));
}

#[test]
fn assess_on_a_missing_file_is_a_usage_error_with_its_own_code() {
    let out = run(&["assess", "/nonexistent/request.json"], &[]);
    assert_eq!(out.status.code(), Some(66), "not 2, the code of a refused request");
    assert!(String::from_utf8_lossy(&out.stderr).contains("cannot read /nonexistent/request.json"));
    let help = run(&["assess", "--help"], &[]);
    assert!(String::from_utf8_lossy(&help.stdout).contains("66 the request file is missing or unreadable"));
}
