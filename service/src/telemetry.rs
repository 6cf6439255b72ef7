//! Logging: JSON lines on stderr, one per request, never any patient data.
//!
//! What may be logged: method, route template, status, latency, request id,
//! guidance status, severity and counts. What may not: bodies, names,
//! identifiers, birth dates, resource ids (DEVELOPERS.md: telemetry).

use tracing_subscriber::EnvFilter;

/// Install the global subscriber. `json` selects JSON lines; the filter comes
/// from `CALCIUM_CDS_LOG` (default `info`). Safe to call more than once.
pub fn init(json: bool) {
    let filter = EnvFilter::try_from_env("CALCIUM_CDS_LOG").unwrap_or_else(|_| EnvFilter::new("info"));
    let builder = tracing_subscriber::fmt().with_env_filter(filter).with_writer(std::io::stderr).with_target(false);
    let _ = if json { builder.json().flatten_event(true).try_init() } else { builder.compact().try_init() };
}
