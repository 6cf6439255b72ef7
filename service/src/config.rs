//! Configuration: command line and environment, validated at start.

use std::net::SocketAddr;
use std::path::PathBuf;

use clap::{Args, Parser, Subcommand};

use crate::rules::{self, LoadedRules};

/// Default request body limit, bytes (issue 2: 1 MiB).
pub const DEFAULT_BODY_LIMIT: usize = 1024 * 1024;

/// calcium-cds: FHIR R4 decision support for hypocalcemia in children.
#[derive(Debug, Parser)]
#[command(name = "calcium-cds", version, about)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// Subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Assess one request (a Bundle or Parameters resource) and print the result Bundle.
    Assess(AssessArgs),
    /// Run the HTTP service.
    Serve(Box<ServeArgs>),
    /// Configuration tools.
    #[command(subcommand)]
    Config(ConfigCommand),
    /// Run a directory of cases (NAME.json with NAME.expect.toml) and compare each result with its expectation.
    Check(CheckArgs),
    /// Rule tools for informatics staff: check a site file, show the effective rules, compare two rule sets.
    #[command(subcommand)]
    Rules(RulesCommand),
    /// Make synthetic request bundles for a named scenario (invented patients), or list the scenarios.
    Synth(SynthArgs),
}

/// `synth` options.
#[derive(Debug, Args)]
pub struct SynthArgs {
    /// List the scenarios and stop.
    #[arg(long)]
    pub list: bool,
    /// Scenario name (see --list).
    #[arg(long, required_unless_present = "list")]
    pub scenario: Option<String>,
    /// Age of the child: 3d, 6w, 18mo, 7y.
    #[arg(long, required_unless_present = "list")]
    pub age: Option<String>,
    /// female or male (default: drawn from the seed).
    #[arg(long)]
    pub sex: Option<String>,
    /// Seed: the same seed gives the same bundle.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// How many bundles (seeds seed, seed+1, ...); more than one needs --out.
    #[arg(long, default_value_t = 1)]
    pub count: u32,
    /// Write NAME-AGE-seedN.json files into this directory instead of printing.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// The clock the bundles are dated against (RFC 3339; default: now).
    #[arg(long)]
    pub now: Option<String>,
    /// Rules (codes, bands and ranges are read from them).
    #[command(flatten)]
    pub rules: RuleArgs,
}

/// `check` options.
#[derive(Debug, Args)]
pub struct CheckArgs {
    /// Directory of cases.
    pub dir: PathBuf,
    /// Rules.
    #[command(flatten)]
    pub rules: RuleArgs,
    /// Also write the results as JUnit XML to this file.
    #[arg(long, value_name = "FILE")]
    pub junit: Option<PathBuf>,
}

/// `rules` subcommands.
#[derive(Debug, Subcommand)]
pub enum RulesCommand {
    /// Check a site rule file over the embedded defaults: schema and consistency
    /// problems with file and line. Exit 0 when it loads, 1 otherwise.
    Check {
        /// The site rule file (TOML).
        file: PathBuf,
    },
    /// Print the effective rules, one `path = value` line each, marked `default` or `site`.
    Show {
        /// Site rule file layered over the defaults (none: the defaults alone).
        #[arg(long = "rules", value_name = "FILE")]
        rules: Option<PathBuf>,
    },
    /// Compare two rule sets, each a site file over the defaults or the word `default`.
    /// Exit 0 when they are the same, 1 when they differ, 2 when one cannot be read.
    Diff {
        /// The first rule set.
        a: String,
        /// The second rule set.
        b: String,
    },
}

/// `config` subcommands.
#[derive(Debug, Subcommand)]
pub enum ConfigCommand {
    /// Validate the `serve` configuration (rules, upstream, keys) and print it, secrets masked.
    Check(Box<ServeArgs>),
}

/// Options shared by every subcommand.
#[derive(Debug, Clone, Args)]
pub struct RuleArgs {
    /// Site rule file (TOML) layered over the embedded defaults.
    #[arg(long = "rules", env = "CALCIUM_CDS_RULES", value_name = "FILE")]
    pub rules: Option<PathBuf>,
}

/// `assess` options.
#[derive(Debug, Args)]
#[command(after_help = "Exit codes: 0 the result Bundle was printed (also when data is missing); \
1 a configuration problem (rules, --now); 2 the request was refused (its OperationOutcome is printed) \
or the command line is wrong; 66 the request file is missing or unreadable.")]
pub struct AssessArgs {
    /// Request file, or - for standard input.
    pub file: String,
    /// Fix the evaluation clock (RFC 3339, e.g. 2026-11-30T15:00:00Z).
    #[arg(long)]
    pub now: Option<String>,
    /// Also explain: the trace of every rule evaluated, as readable text on
    /// standard error and as a Parameters resource in the result Bundle.
    #[arg(long)]
    pub explain: bool,
    /// Rules.
    #[command(flatten)]
    pub rules: RuleArgs,
}

/// `serve` options.
#[derive(Debug, Clone, Args)]
pub struct ServeArgs {
    /// Address to listen on.
    #[arg(long, env = "CALCIUM_CDS_LISTEN", default_value = "127.0.0.1:8080")]
    pub listen: SocketAddr,
    /// Largest accepted request body, bytes.
    #[arg(long, env = "CALCIUM_CDS_BODY_LIMIT", default_value_t = DEFAULT_BODY_LIMIT)]
    pub body_limit: usize,
    /// Rules.
    #[command(flatten)]
    pub rules: RuleArgs,
    /// Upstream FHIR server for patient-context assessment.
    #[command(flatten)]
    pub upstream: UpstreamArgs,
    /// Limits and lifecycle.
    #[command(flatten)]
    pub limits: LimitArgs,
    /// Inbound authorization.
    #[command(flatten)]
    pub auth: InboundAuthArgs,
    /// Trace export.
    #[command(flatten)]
    pub telemetry: TelemetryArgs,
    /// Serve the browser workbench at /workbench (a page for informatics staff;
    /// no patient data is stored). Turn it off in production.
    #[arg(long = "workbench", env = "CALCIUM_CDS_WORKBENCH", default_value_t = true, action = clap::ArgAction::Set)]
    pub workbench: bool,
    /// Configuration file (TOML, keys are the long option names, e.g. `listen`,
    /// `fhir-base-url`); command line and environment take precedence over it.
    #[arg(long = "config", env = "CALCIUM_CDS_CONFIG", value_name = "FILE")]
    pub config_file: Option<PathBuf>,
}

/// Inbound authorization (off by default).
#[derive(Debug, Clone, Args)]
pub struct InboundAuthArgs {
    /// Require a bearer JWT on every FHIR route (probes stay open).
    #[arg(long = "auth", env = "CALCIUM_CDS_AUTH", default_value_t = false, action = clap::ArgAction::Set)]
    pub enabled: bool,
    /// The JWKS that signs accepted tokens, as a file.
    #[arg(long = "auth-jwks-file", env = "CALCIUM_CDS_AUTH_JWKS_FILE")]
    pub jwks_file: Option<PathBuf>,
    /// The JWKS that signs accepted tokens, as a URL (read at start, every
    /// `auth-jwks-max-age-s`, and on a token naming an unknown key).
    #[arg(long = "auth-jwks-url", env = "CALCIUM_CDS_AUTH_JWKS_URL")]
    pub jwks_url: Option<String>,
    /// Accepted token issuer (`iss`).
    #[arg(long = "auth-issuer", env = "CALCIUM_CDS_AUTH_ISSUER")]
    pub issuer: Option<String>,
    /// This service's audience (`aud`).
    #[arg(long = "auth-audience", env = "CALCIUM_CDS_AUTH_AUDIENCE")]
    pub audience: Option<String>,
    /// Least seconds between two reads of the JWKS URL when a token names an unknown key.
    #[arg(long = "auth-jwks-min-interval-s", env = "CALCIUM_CDS_AUTH_JWKS_MIN_INTERVAL_S", default_value_t = 30)]
    pub jwks_min_interval_s: u64,
    /// Seconds after which the JWKS URL is read again regardless, so that a removed key stops being trusted.
    #[arg(long = "auth-jwks-max-age-s", env = "CALCIUM_CDS_AUTH_JWKS_MAX_AGE_S", default_value_t = 300)]
    pub jwks_max_age_s: u64,
    /// Also require a token on /metrics.
    #[arg(long = "auth-metrics", env = "CALCIUM_CDS_AUTH_METRICS", default_value_t = false, action = clap::ArgAction::Set)]
    pub protect_metrics: bool,
}

impl Default for InboundAuthArgs {
    fn default() -> Self {
        Self {
            enabled: false,
            jwks_file: None,
            jwks_url: None,
            issuer: None,
            audience: None,
            jwks_min_interval_s: 30,
            jwks_max_age_s: 300,
            protect_metrics: false,
        }
    }
}

impl InboundAuthArgs {
    /// The verifier when authorization is on; an error naming what is missing or wrong.
    pub fn verifier(&self) -> Result<Option<crate::inbound_auth::Verifier>, String> {
        if !self.enabled {
            return Ok(None);
        }
        let issuer = self.issuer.clone().ok_or("CALCIUM_CDS_AUTH is on but CALCIUM_CDS_AUTH_ISSUER is not set")?;
        let audience =
            self.audience.clone().ok_or("CALCIUM_CDS_AUTH is on but CALCIUM_CDS_AUTH_AUDIENCE is not set")?;
        let jwks = match (&self.jwks_file, &self.jwks_url) {
            (Some(_), Some(_)) => {
                return Err("set CALCIUM_CDS_AUTH_JWKS_FILE or CALCIUM_CDS_AUTH_JWKS_URL, not both".into());
            }
            (Some(path), None) => std::fs::read_to_string(path)
                .map_err(|e| format!("cannot read the JWKS file {}: {e}", path.display()))?,
            (None, Some(url)) => {
                crate::upstream::https_or_loopback("CALCIUM_CDS_AUTH_JWKS_URL", url)?;
                fetch_jwks(url)?
            }
            (None, None) => {
                return Err("CALCIUM_CDS_AUTH is on but neither CALCIUM_CDS_AUTH_JWKS_FILE nor _JWKS_URL is set".into());
            }
        };
        let source = self.jwks_url.as_ref().map(|url| crate::inbound_auth::JwksSource {
            url: url.clone(),
            min_interval: std::time::Duration::from_secs(self.jwks_min_interval_s),
            max_age: std::time::Duration::from_secs(self.jwks_max_age_s.max(1)),
        });
        crate::inbound_auth::Verifier::new(&jwks, issuer, audience, source).map(Some)
    }
}

/// Read a JWKS over HTTP(S) on a thread of its own (start-up is not async).
fn fetch_jwks(url: &str) -> Result<String, String> {
    let url = url.to_owned();
    std::thread::spawn(move || {
        let rt = tokio::runtime::Builder::new_current_thread().enable_all().build().map_err(|e| e.to_string())?;
        rt.block_on(crate::inbound_auth::fetch_jwks(&url))
    })
    .join()
    .map_err(|_| "the JWKS fetch failed".to_owned())?
}

impl ServeArgs {
    /// Checks across settings; each problem names the settings.
    pub fn cross_checks(&self) -> Vec<String> {
        let mut problems = Vec::new();
        if self.upstream.fhir_base_url.is_some() && self.limits.request_timeout_ms <= self.upstream.upstream_deadline_ms
        {
            problems.push(format!(
                "request-timeout-ms ({}) must be above upstream-deadline-ms ({}), or every slow gather is cut short",
                self.limits.request_timeout_ms, self.upstream.upstream_deadline_ms
            ));
        }
        if self.limits.max_in_flight == 0 {
            problems.push("max-in-flight must be at least 1".into());
        }
        if self.upstream.queue_capacity == 0 {
            problems.push("queue-capacity must be at least 1".into());
        }
        if self.telemetry.otlp_queue == 0 || self.telemetry.otlp_batch == 0 {
            problems.push("otlp-queue and otlp-batch must be at least 1".into());
        }
        if let Err(e) = self.telemetry.export_settings() {
            problems.push(e);
        }
        // Keys that decide who may call the service are fetched from here.
        if let Some(url) = &self.auth.jwks_url
            && let Err(e) = crate::upstream::https_or_loopback("CALCIUM_CDS_AUTH_JWKS_URL", url)
        {
            problems.push(e);
        }
        problems
    }
}

impl ServeArgs {
    /// Every settings check `serve` runs before it listens; `config check` runs
    /// exactly this too, so that the two never disagree (issue 14). The rule
    /// files are checked by both through the same loader, beside this.
    /// Each problem names the settings.
    pub fn startup_problems(&self) -> Vec<String> {
        let mut problems = self.cross_checks();
        if let Err(e) = self.upstream.client() {
            problems.push(format!("upstream: {e}"));
        }
        if let Err(e) = self.auth.verifier() {
            problems.push(format!("inbound auth: {e}"));
        }
        problems
    }
}

/// Options whose values are never printed.
pub const SECRET_OPTIONS: &[&str] = &["fhir-token"];

/// A command line that could not be turned into a configuration.
#[derive(Debug)]
pub enum CliError {
    /// clap's own error (usage, a bad value): it prints and exits itself.
    Usage(clap::Error),
    /// The configuration file could not be used.
    File(String),
}

/// The configuration file named by `--config` or `CALCIUM_CDS_CONFIG`, if any.
fn config_file_named(args: &[std::ffi::OsString]) -> Option<PathBuf> {
    let mut it = args.iter().map(|a| a.to_string_lossy().into_owned());
    while let Some(a) = it.next() {
        if a == "--config" {
            return it.next().map(PathBuf::from);
        }
        if let Some(v) = a.strip_prefix("--config=") {
            return Some(PathBuf::from(v));
        }
    }
    std::env::var_os("CALCIUM_CDS_CONFIG").map(PathBuf::from)
}

/// The file's settings as (long option name, value text); unknown names are errors.
fn read_config_file(path: &std::path::Path, known: &[String]) -> Result<Vec<(String, String)>, String> {
    let text =
        std::fs::read_to_string(path).map_err(|e| format!("cannot read the config file {}: {e}", path.display()))?;
    let table: toml::Table =
        toml::from_str(&text).map_err(|e| format!("the config file {} is not TOML: {e}", path.display()))?;
    let mut out = Vec::new();
    for (key, value) in table {
        if key == "config" || !known.contains(&key) {
            return Err(format!(
                "the config file {} has an unknown setting '{key}' (settings are the long option names of `serve`: {})",
                path.display(),
                known.join(", ")
            ));
        }
        let text = match value {
            toml::Value::String(s) => s,
            toml::Value::Integer(i) => i.to_string(),
            toml::Value::Boolean(b) => b.to_string(),
            toml::Value::Float(f) => f.to_string(),
            other => {
                return Err(format!(
                    "the config file {}: '{key}' must be a string, number or boolean, not {}",
                    path.display(),
                    other.type_str()
                ));
            }
        };
        out.push((key, text));
    }
    Ok(out)
}

fn serve_option_names() -> Vec<String> {
    use clap::CommandFactory;
    let cmd = Cli::command();
    cmd.find_subcommand("serve")
        .map(|s| s.get_arguments().filter_map(|a| a.get_long().map(str::to_owned)).collect())
        .unwrap_or_default()
}

/// Parse the command line, with the configuration file's settings as defaults
/// (precedence: command line, then environment, then the file, then built-in defaults).
/// Also returns the option names whose values came from the file.
pub fn parse_cli(args: Vec<std::ffi::OsString>) -> Result<(Cli, ArgSources), CliError> {
    use clap::{CommandFactory, FromArgMatches};
    let known = serve_option_names();
    let from_file = match config_file_named(&args) {
        Some(path) => read_config_file(&path, &known).map_err(CliError::File)?,
        None => Vec::new(),
    };
    let apply = |mut c: clap::Command| {
        for (key, value) in &from_file {
            let id = c.get_arguments().find(|a| a.get_long() == Some(key.as_str())).map(|a| a.get_id().clone());
            if let Some(id) = id {
                // Leaked once at start: a handful of short strings for the life of the process.
                let value: &'static str = Box::leak(value.clone().into_boxed_str());
                c = c.mut_arg(id, |a| a.default_value(value));
            }
        }
        c
    };
    let cmd =
        Cli::command().mut_subcommand("serve", apply).mut_subcommand("config", |c| c.mut_subcommand("check", apply));
    let matches = cmd.try_get_matches_from(args).map_err(CliError::Usage)?;
    let cli = Cli::from_arg_matches(&matches).map_err(CliError::Usage)?;
    let mut sources = ArgSources::default();
    let sub = match matches.subcommand() {
        Some(("serve", m)) => Some(m),
        Some(("config", m)) => m.subcommand_matches("check"),
        _ => None,
    };
    if let Some(m) = sub {
        let serve = Cli::command();
        let args: Vec<&clap::Arg> =
            serve.find_subcommand("serve").map(|c| c.get_arguments().collect()).unwrap_or_default();
        for arg in args {
            let (Some(long), id) = (arg.get_long(), arg.get_id().as_str()) else { continue };
            let source = match m.value_source(id) {
                Some(clap::parser::ValueSource::CommandLine) => "command line",
                Some(clap::parser::ValueSource::EnvVariable) => "environment",
                Some(clap::parser::ValueSource::DefaultValue) if from_file.iter().any(|(k, _)| k == long) => {
                    "config file"
                }
                Some(_) => "default",
                None => "not set",
            };
            let value = m
                .try_get_raw(id)
                .ok()
                .flatten()
                .map(|vals| vals.map(|v| v.to_string_lossy().into_owned()).collect::<Vec<_>>().join(","));
            sources.0.push((long.to_owned(), value, source));
        }
    }
    Ok((cli, sources))
}

/// Each `serve` option: long name, raw value, where it came from.
#[derive(Debug, Default)]
pub struct ArgSources(pub Vec<(String, Option<String>, &'static str)>);

impl ArgSources {
    /// The effective configuration as TOML-like lines, secrets masked.
    pub fn render(&self) -> String {
        let mut lines: Vec<String> = self
            .0
            .iter()
            .map(|(name, value, source)| {
                let shown = match value {
                    None => "\"\"".to_owned(),
                    Some(_) if SECRET_OPTIONS.contains(&name.as_str()) => "\"***\"".to_owned(),
                    Some(v) => format!("{v:?}"),
                };
                format!("{name} = {shown}  # {source}")
            })
            .collect();
        lines.sort();
        lines.join("\n")
    }
}

/// Limits and lifecycle (operational settings).
#[derive(Debug, Clone, Args)]
pub struct LimitArgs {
    /// FHIR requests served at once; beyond it the answer is 503 with Retry-After.
    #[arg(long, env = "CALCIUM_CDS_MAX_IN_FLIGHT", default_value_t = 64)]
    pub max_in_flight: usize,
    /// Time a FHIR request may take, milliseconds (above the upstream deadline); then 503.
    #[arg(long, env = "CALCIUM_CDS_REQUEST_TIMEOUT_MS", default_value_t = 15000)]
    pub request_timeout_ms: u64,
    /// On SIGTERM, time between readiness going false and the listener closing, milliseconds.
    #[arg(long, env = "CALCIUM_CDS_SHUTDOWN_DELAY_MS", default_value_t = 5000)]
    pub shutdown_delay_ms: u64,
    /// Time in-flight requests get to finish after the listener closes, seconds.
    #[arg(long, env = "CALCIUM_CDS_SHUTDOWN_TIMEOUT_S", default_value_t = 25)]
    pub shutdown_timeout_s: u64,
}

impl Default for LimitArgs {
    fn default() -> Self {
        Self { max_in_flight: 64, request_timeout_ms: 15000, shutdown_delay_ms: 5000, shutdown_timeout_s: 25 }
    }
}

/// Trace export over OTLP/HTTP (off unless an endpoint is set).
#[derive(Debug, Clone, Args)]
pub struct TelemetryArgs {
    /// OTLP/HTTP base URL of a collector (e.g. http://otel-collector:4318); spans go to
    /// `<url>/v1/traces` in the JSON encoding. Unset: no trace export.
    #[arg(long = "otlp-endpoint", env = "CALCIUM_CDS_OTLP_ENDPOINT")]
    pub otlp_endpoint: Option<String>,
    /// Longest wait before a partly filled batch of spans is sent, milliseconds.
    #[arg(long = "otlp-flush-ms", env = "CALCIUM_CDS_OTLP_FLUSH_MS", default_value_t = 1000)]
    pub otlp_flush_ms: u64,
    /// Spans waiting for export at most; beyond it new spans are dropped and counted.
    #[arg(long = "otlp-queue", env = "CALCIUM_CDS_OTLP_QUEUE", default_value_t = 2048)]
    pub otlp_queue: usize,
    /// Spans per export request at most.
    #[arg(long = "otlp-batch", env = "CALCIUM_CDS_OTLP_BATCH", default_value_t = 512)]
    pub otlp_batch: usize,
    /// Time an export request may take, milliseconds.
    #[arg(long = "otlp-timeout-ms", env = "CALCIUM_CDS_OTLP_TIMEOUT_MS", default_value_t = 5000)]
    pub otlp_timeout_ms: u64,
}

impl Default for TelemetryArgs {
    fn default() -> Self {
        Self { otlp_endpoint: None, otlp_flush_ms: 1000, otlp_queue: 2048, otlp_batch: 512, otlp_timeout_ms: 5000 }
    }
}

impl TelemetryArgs {
    /// The export settings, when an endpoint is set; an error for a bad URL.
    pub fn export_settings(&self) -> Result<Option<crate::otlp::ExportSettings>, String> {
        let Some(endpoint) = &self.otlp_endpoint else { return Ok(None) };
        Ok(Some(crate::otlp::ExportSettings {
            traces_url: crate::otlp::traces_url(endpoint)?,
            flush: std::time::Duration::from_millis(self.otlp_flush_ms.max(1)),
            queue: self.otlp_queue.max(1),
            batch: self.otlp_batch.max(1),
            timeout: std::time::Duration::from_millis(self.otlp_timeout_ms.max(1)),
        }))
    }
}

/// A secret that never prints.
#[derive(Clone, PartialEq, Eq)]
pub struct Secret(pub String);

impl std::fmt::Debug for Secret {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Secret(***)")
    }
}

impl std::str::FromStr for Secret {
    type Err = std::convert::Infallible;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Ok(Self(s.to_owned()))
    }
}

/// Upstream FHIR client options (operational settings, not clinical ones).
#[derive(Debug, Clone, Args)]
pub struct UpstreamArgs {
    /// Base URL of the EHR's FHIR server; enables POST /fhir/Patient/{id}/$assess.
    #[arg(long = "fhir-base-url", env = "CALCIUM_CDS_FHIR_BASE_URL")]
    pub fhir_base_url: Option<String>,
    /// Static bearer token for the FHIR server (never logged).
    #[arg(long = "fhir-token", env = "CALCIUM_CDS_FHIR_TOKEN", hide_env_values = true)]
    pub fhir_token: Option<Secret>,
    /// File holding the bearer token.
    #[arg(long = "fhir-token-file", env = "CALCIUM_CDS_FHIR_TOKEN_FILE")]
    pub fhir_token_file: Option<PathBuf>,
    /// Per-call timeout, milliseconds.
    #[arg(long, env = "CALCIUM_CDS_UPSTREAM_TIMEOUT_MS", default_value_t = 3000)]
    pub upstream_timeout_ms: u64,
    /// Overall deadline of a gather, milliseconds.
    #[arg(long, env = "CALCIUM_CDS_UPSTREAM_DEADLINE_MS", default_value_t = 10000)]
    pub upstream_deadline_ms: u64,
    /// Retries after the first try, per call.
    #[arg(long, env = "CALCIUM_CDS_UPSTREAM_RETRIES", default_value_t = 2)]
    pub upstream_retries: u32,
    /// Pages followed per search.
    #[arg(long, env = "CALCIUM_CDS_UPSTREAM_PAGE_LIMIT", default_value_t = 5)]
    pub upstream_page_limit: u32,
    /// `_count` per page.
    #[arg(long, env = "CALCIUM_CDS_UPSTREAM_PAGE_SIZE", default_value_t = 100)]
    pub upstream_page_size: u32,
    /// Write results back to the FHIR server (conditional creates; off by default).
    #[arg(long, env = "CALCIUM_CDS_WRITE_BACK", default_value_t = false, action = clap::ArgAction::Set)]
    pub write_back: bool,
    /// Notification jobs waiting at most; a full queue answers 503 with Retry-After.
    #[arg(long, env = "CALCIUM_CDS_QUEUE_CAPACITY", default_value_t = 64)]
    pub queue_capacity: usize,
    /// SMART Backend Services: the token endpoint (enables SMART authorization).
    #[arg(long = "smart-token-url", env = "CALCIUM_CDS_SMART_TOKEN_URL")]
    pub smart_token_url: Option<String>,
    /// SMART Backend Services: the registered client id.
    #[arg(long = "smart-client-id", env = "CALCIUM_CDS_SMART_CLIENT_ID")]
    pub smart_client_id: Option<String>,
    /// SMART Backend Services: the private key (PEM) that signs the client assertion.
    #[arg(long = "smart-key-file", env = "CALCIUM_CDS_SMART_KEY_FILE")]
    pub smart_key_file: Option<PathBuf>,
    /// SMART Backend Services: the key id (`kid`) of that key in the registered JWK Set.
    #[arg(long = "smart-key-id", env = "CALCIUM_CDS_SMART_KEY_ID")]
    pub smart_key_id: Option<String>,
    /// SMART Backend Services: RS384 or ES384.
    #[arg(long = "smart-alg", env = "CALCIUM_CDS_SMART_ALG", default_value = "ES384")]
    pub smart_alg: String,
    /// SMART Backend Services: scopes requested (space separated).
    #[arg(long = "smart-scope", env = "CALCIUM_CDS_SMART_SCOPE", default_value = DEFAULT_SMART_SCOPE)]
    pub smart_scope: String,
}

/// The read scopes the gather needs (SMART v1 scope syntax, the most widely accepted).
/// With write-back on, a site adds the write scopes its server wants.
pub const DEFAULT_SMART_SCOPE: &str = "system/Patient.read system/Observation.read system/MedicationRequest.read \
system/MedicationStatement.read system/MedicationAdministration.read system/Condition.read system/Procedure.read";

impl Default for UpstreamArgs {
    fn default() -> Self {
        Self {
            fhir_base_url: None,
            fhir_token: None,
            fhir_token_file: None,
            upstream_timeout_ms: 3000,
            upstream_deadline_ms: 10000,
            upstream_retries: 2,
            upstream_page_limit: 5,
            upstream_page_size: 100,
            write_back: false,
            queue_capacity: 64,
            smart_token_url: None,
            smart_client_id: None,
            smart_key_file: None,
            smart_key_id: None,
            smart_alg: "ES384".into(),
            smart_scope: DEFAULT_SMART_SCOPE.into(),
        }
    }
}

impl UpstreamArgs {
    /// The client, when a base URL is configured; an error for a bad URL or token file.
    pub fn client(&self) -> Result<Option<crate::upstream::FhirClient>, String> {
        let Some(base) = &self.fhir_base_url else {
            let smart = self.smart()?;
            if smart.is_some() || self.fhir_token.is_some() || self.fhir_token_file.is_some() {
                return Err("upstream credentials are set but CALCIUM_CDS_FHIR_BASE_URL is not".into());
            }
            return Ok(None);
        };
        let parsed =
            reqwest::Url::parse(base).map_err(|e| format!("CALCIUM_CDS_FHIR_BASE_URL '{base}' is not a URL: {e}"))?;
        if !matches!(parsed.scheme(), "http" | "https") {
            return Err(format!("CALCIUM_CDS_FHIR_BASE_URL must be http or https, not {}", parsed.scheme()));
        }
        let token = match (&self.fhir_token, &self.fhir_token_file) {
            (Some(t), _) => Some(t.0.clone()),
            (None, Some(path)) => Some(
                std::fs::read_to_string(path)
                    .map_err(|e| format!("cannot read the token file {}: {e}", path.display()))?
                    .trim()
                    .to_owned(),
            ),
            (None, None) => None,
        };
        let auth = match (token, self.smart()?) {
            (Some(_), Some(_)) => {
                return Err("both a static token and SMART Backend Services are configured; choose one".into());
            }
            (Some(t), None) => crate::upstream::Auth::Static(t),
            (None, Some(source)) => crate::upstream::Auth::Smart(std::sync::Arc::new(source)),
            (None, None) => crate::upstream::Auth::None,
        };
        // A credential is sent to the base: never in the clear over a network.
        if !matches!(auth, crate::upstream::Auth::None) {
            crate::upstream::https_or_loopback("CALCIUM_CDS_FHIR_BASE_URL (a credential is configured)", base)?;
        }
        let http = reqwest::Client::builder()
            .pool_idle_timeout(std::time::Duration::from_secs(90))
            .build()
            .map_err(|e| format!("HTTP client: {e}"))?;
        Ok(Some(crate::upstream::FhirClient::new(
            http,
            crate::upstream::UpstreamSettings {
                base_url: base.trim_end_matches('/').to_owned(),
                auth,
                call_timeout: std::time::Duration::from_millis(self.upstream_timeout_ms),
                deadline: std::time::Duration::from_millis(self.upstream_deadline_ms),
                max_retries: self.upstream_retries,
                page_limit: self.upstream_page_limit.max(1),
                page_size: self.upstream_page_size.max(1),
            },
        )))
    }
}

impl UpstreamArgs {
    /// The SMART token source, when configured; an error naming what is missing or wrong.
    fn smart(&self) -> Result<Option<crate::smart::TokenSource>, String> {
        let given = [
            ("CALCIUM_CDS_SMART_TOKEN_URL", self.smart_token_url.is_some()),
            ("CALCIUM_CDS_SMART_CLIENT_ID", self.smart_client_id.is_some()),
            ("CALCIUM_CDS_SMART_KEY_FILE", self.smart_key_file.is_some()),
            ("CALCIUM_CDS_SMART_KEY_ID", self.smart_key_id.is_some()),
        ];
        if given.iter().all(|(_, set)| !set) {
            return Ok(None);
        }
        let missing: Vec<&str> = given.iter().filter(|(_, set)| !set).map(|(name, _)| *name).collect();
        if !missing.is_empty() {
            return Err(format!("SMART Backend Services is partly configured; missing {}", missing.join(", ")));
        }
        let (Some(url), Some(client_id), Some(key_file), Some(key_id)) =
            (&self.smart_token_url, &self.smart_client_id, &self.smart_key_file, &self.smart_key_id)
        else {
            return Ok(None);
        };
        let parsed =
            reqwest::Url::parse(url).map_err(|e| format!("CALCIUM_CDS_SMART_TOKEN_URL '{url}' is not a URL: {e}"))?;
        if !matches!(parsed.scheme(), "http" | "https") {
            return Err(format!("CALCIUM_CDS_SMART_TOKEN_URL must be http or https, not {}", parsed.scheme()));
        }
        // The signed client assertion and the access token cross this connection.
        crate::upstream::https_or_loopback("CALCIUM_CDS_SMART_TOKEN_URL", url)?;
        let alg =
            self.smart_alg.parse::<crate::smart::SigningAlg>().map_err(|e| format!("CALCIUM_CDS_SMART_ALG: {e}"))?;
        let pem = std::fs::read(key_file)
            .map_err(|e| format!("cannot read the SMART key file {}: {e}", key_file.display()))?;
        crate::smart::TokenSource::new(
            crate::smart::SmartSettings {
                token_url: url.clone(),
                client_id: client_id.clone(),
                scope: self.smart_scope.clone(),
                key_id: key_id.clone(),
                alg,
            },
            &pem,
        )
        .map(Some)
        .map_err(|e| format!("CALCIUM_CDS_SMART_KEY_FILE {}: {e}", key_file.display()))
    }
}

/// Load the rules: embedded defaults, plus the site file when given.
pub fn load_rules(site: Option<&PathBuf>) -> Result<LoadedRules, String> {
    match site {
        None => rules::load::load(None).map_err(|e| e.to_string()),
        Some(path) => {
            let text =
                std::fs::read_to_string(path).map_err(|e| format!("cannot read rule file {}: {e}", path.display()))?;
            let name = path.display().to_string();
            rules::load::load(Some((&name, &text))).map_err(|e| e.to_string())
        }
    }
}
