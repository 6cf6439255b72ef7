//! The next-test planner: of the tests not yet resulted, which would best
//! split the causes still open, for the least burden.
//!
//! For each candidate test, every possible result (low, normal, high) is
//! tried in turn: the cause engine is re-run as if that result had come back,
//! and the open weight (likely and possible causes, weighted by the rule
//! data) is measured. The gain is the open weight now minus its mean over the
//! results; the three results are weighted equally, because the service
//! claims no probabilities. Gain divided by the test's burden ranks the tests.

use super::causes::{self, CauseResult, Context, LabReading, Readings};
use super::facts::{Analyte, CodedEvent};
use super::format::num;
use crate::rules::model::{LabOutcome, NextTest, RuleSet};

/// A proposed test.
#[derive(Debug, Clone)]
pub struct Proposal {
    /// The test.
    pub test: NextTest,
    /// Open weight removed on average.
    pub gain: f64,
    /// Burden used.
    pub burden: f64,
    /// gain / burden.
    pub score: f64,
    /// Why, in words.
    pub reason: String,
}

/// A test held back, and why.
#[derive(Debug, Clone)]
pub struct Deferred {
    /// The test.
    pub test: NextTest,
    /// Why.
    pub reason: String,
}

/// The plan.
#[derive(Debug, Clone, Default)]
pub struct Plan {
    /// Proposals, best first.
    pub proposals: Vec<Proposal>,
    /// Tests held back.
    pub deferred: Vec<Deferred>,
}

/// Open weight of a set of cause results.
pub fn open_weight(rules: &RuleSet, results: &[CauseResult]) -> f64 {
    results
        .iter()
        .map(|r| match r.label {
            causes::CauseLabel::Likely => rules.planner.likely_weight,
            causes::CauseLabel::Possible => rules.planner.possible_weight,
            _ => 0.0,
        })
        .sum()
}

fn with_result(readings: &Readings, analyte: Analyte, outcome: LabOutcome, height_known: bool) -> Readings {
    let mut r = readings.clone();
    let reading = LabReading { analyte, outcome, text: String::new(), sources: Vec::new() };
    if analyte == Analyte::Creatinine && height_known {
        // A high creatinine at a known height means a low eGFR.
        let egfr = if outcome == LabOutcome::High { LabOutcome::Low } else { LabOutcome::Normal };
        r.egfr = Some(LabReading { analyte, outcome: egfr, text: String::new(), sources: Vec::new() });
    }
    r.labs.insert(analyte, reading);
    r
}

/// Plan the next tests.
pub fn plan(
    rules: &RuleSet,
    ctx: &Context,
    readings: &Readings,
    events: &[CodedEvent],
    now: &[CauseResult],
    height_known: bool,
) -> Plan {
    let mut plan = Plan::default();
    let before = open_weight(rules, now);
    let mut scored = Vec::new();
    for (index, test) in rules.next_tests.iter().enumerate() {
        if readings.labs.contains_key(&test.analyte) || test.analyte == Analyte::VitaminD3_25Oh {
            continue;
        }
        if let Some(d) = &test.deferred_when
            && readings.labs.get(&d.lab).is_some_and(|r| d.is.matches(r.outcome))
        {
            plan.deferred.push(Deferred { test: test.clone(), reason: d.reason.clone() });
            continue;
        }
        let mut after = Vec::new();
        for &outcome in &test.outcomes {
            let hypothetical = with_result(readings, test.analyte, outcome, height_known);
            let results = causes::evaluate_labels(rules, ctx, &hypothetical, events);
            after.push((outcome, open_weight(rules, &results), results));
        }
        let mean = after.iter().map(|(_, w, _)| *w).sum::<f64>() / after.len() as f64;
        let gain = before - mean;
        if gain <= 0.0 {
            continue;
        }
        let burden = if ctx.neonate() { test.neonatal_burden } else { test.burden };
        let score = gain / burden;
        let splits: Vec<String> = after
            .iter()
            .map(|(o, _, results)| {
                let open: Vec<&str> = results.iter().filter(|r| r.label.is_open()).map(|r| r.name.as_str()).collect();
                format!("if {}: {} open", o.label(), open.len())
            })
            .collect();
        let reason = format!(
            "{}: would lower the open weight from {} to {} on average ({}); burden {} ({}); score {}.",
            test.label,
            num(before, 1),
            num(mean, 2),
            splits.join("; "),
            num(burden, 1),
            test.burden_source,
            num(score, 2)
        );
        scored.push((index, Proposal { test: test.clone(), gain, burden, score, reason }));
    }
    scored.sort_by(|(ia, a), (ib, b)| b.score.total_cmp(&a.score).then(ia.cmp(ib)));
    plan.proposals = scored.into_iter().map(|(_, p)| p).take(rules.planner.max_proposals).collect();
    plan
}
