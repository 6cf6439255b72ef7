//! The work-up once hypocalcemia is established: causes, then next tests.

use super::causes::{self, CauseResult, Context, Readings};
use super::facts::{Analyte, Facts};
use super::planner::{self, Plan};
use super::status::{CalciumFinding, Unused};
use crate::rules::model::RuleSet;

/// The work-up result.
#[derive(Debug, Clone)]
pub struct Workup {
    /// Causes, in order (most likely first).
    pub causes: Vec<CauseResult>,
    /// Next tests.
    pub plan: Plan,
    /// The labs read.
    pub readings: Readings,
    /// Inputs not used by the work-up.
    pub unused: Vec<Unused>,
    /// More than one cause shares the leading label.
    pub leading_tied: bool,
}

impl Workup {
    /// Causes at the leading label (likely, else possible).
    pub fn leading(&self) -> Vec<&CauseResult> {
        let Some(top) = self.causes.first().map(|c| c.label).filter(|l| l.is_open()) else { return Vec::new() };
        self.causes.iter().filter(|c| c.label == top).collect()
    }
}

/// Run the work-up for a low calcium. `None` when there is no hypocalcemia or
/// no usable birth date.
pub fn run(facts: &Facts, rules: &RuleSet, finding: &CalciumFinding) -> Option<Workup> {
    if !finding.is_low() || rules.causes.is_empty() {
        return None;
    }
    let ctx = Context::new(facts, finding.when)?;
    let (readings, stale) = causes::read_labs(rules, facts, &ctx);
    let results = causes::evaluate(rules, &ctx, &readings, &facts.events);
    let height_known = !facts.of(Analyte::BodyHeight).is_empty();
    let plan = planner::plan(rules, &ctx, &readings, &facts.events, &results, height_known);
    let top = results.first().map(|c| c.label);
    let leading_tied = match top {
        Some(l) if l.is_open() => results.iter().filter(|c| c.label == l).count() > 1,
        _ => false,
    };
    let unused = stale.into_iter().map(|(source, reason)| Unused { source, reason }).collect();
    Some(Workup { causes: results, plan, readings, unused, leading_tied })
}
