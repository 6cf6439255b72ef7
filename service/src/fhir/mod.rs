//! FHIR adapters: JSON in (`read`), resources out (`write`), and the pieces
//! they share (profiles, dates, OperationOutcome).

pub mod datetime;
pub mod outcome;
pub mod profiles;
pub mod read;
pub mod write;
pub mod write_explain;
pub mod write_specimen;
pub mod write_treatment;
pub mod write_workup;
