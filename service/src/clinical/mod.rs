//! The pure clinical core: typed facts in, an assessment out.
//!
//! No I/O and no JSON here. The FHIR reader builds `facts::Facts`; the FHIR
//! writer turns `status::Assessment` into resources.

pub mod bands;
pub mod causes;
pub mod explain;
pub mod facts;
pub mod format;
pub mod growth;
pub mod planner;
pub mod status;
#[cfg(test)]
pub(crate) mod testing;
pub mod time;
pub mod treatment;
pub mod units;
pub mod workup;
