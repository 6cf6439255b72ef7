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
    Serve(ServeArgs),
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
