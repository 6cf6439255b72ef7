//! Rule data: the typed model the core reads, and the loader that builds it
//! from the embedded default files plus an optional site file.

pub mod load;
pub mod model;
pub mod tools;
pub mod treatment_model;

pub use load::{LoadedRules, RuleError};
