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
pub struct AssessArgs {
    /// Request file, or - for standard input.
    pub file: String,
    /// Fix the evaluation clock (RFC 3339, e.g. 2026-11-30T15:00:00Z).
    #[arg(long)]
    pub now: Option<String>,
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
        let Some(base) = &self.fhir_base_url else { return Ok(None) };
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
