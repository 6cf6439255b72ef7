//! calcium-cds: a stateless HL7 FHIR R4 decision-support service for
//! hypocalcemia in children.
//!
//! Data walks one way: FHIR JSON (`fhir::read`) -> typed facts
//! (`clinical::facts`) -> the pure clinical core (`clinical::status`) ->
//! FHIR resources (`fhir::write`). Rules are data (`rules`). The adapters
//! around the core are `http`, `cli`, `config` and `telemetry`.

pub mod cases;
pub mod cli;
pub mod clinical;
pub mod config;
pub mod engine;
pub mod fhir;
pub mod http;
pub mod inbound_auth;
pub mod metrics;
pub mod notify;
pub mod otlp;
pub mod rules;
pub mod smart;
pub mod synth;
pub mod telemetry;
pub mod trace;
pub mod upstream;
pub mod workbench;
