//! The explain trace as a Parameters resource (`$assess?_explain=true`,
//! `assess --explain`): one `rules` part naming the rule set, then one `step`
//! part per rule evaluated, in order, each with its stage, rule, question,
//! inputs (what, and where in the request), basis and result. Inputs set
//! aside by the reader come first, as `input` steps.

use serde_json::{Value, json};

use super::read::Ingested;
use super::write::OutputContext;
use crate::clinical::explain::{Stage, Step};

fn string(name: &str, v: &str) -> Value {
    json!({ "name": name, "valueString": v })
}

fn step_part(s: &Step) -> Value {
    let mut parts = vec![
        json!({ "name": "stage", "valueCode": s.stage.code() }),
        string("rule", &s.rule),
        string("question", &s.question),
    ];
    for i in &s.inputs {
        let mut p = vec![string("what", &i.what)];
        if let Some(src) = &i.source {
            p.push(string("source", src.label()));
            p.push(string("expression", &src.expression));
        }
        parts.push(json!({ "name": "input", "part": p }));
    }
    if !s.basis.is_empty() {
        parts.push(string("basis", &s.basis));
    }
    parts.push(string("result", &s.result));
    json!({ "name": "step", "part": parts })
}

/// The reader's set-aside inputs as steps (they come before any rule ran).
pub fn set_aside_steps(ingested: &Ingested) -> Vec<Step> {
    ingested
        .set_aside
        .iter()
        .map(|x| Step {
            stage: Stage::Input,
            rule: "input profiles, codes, units, windows".into(),
            question: "Can this input be used?".into(),
            inputs: vec![crate::clinical::explain::Input {
                what: x.resource.clone(),
                source: Some(crate::clinical::facts::Source {
                    resource_type: x.resource.clone(),
                    reference: None,
                    expression: x.expression.clone(),
                }),
            }],
            basis: String::new(),
            result: format!("set aside: {}", x.reason),
        })
        .collect()
}

/// The Parameters resource.
pub fn parameters(ctx: &OutputContext<'_>, steps: &[Step]) -> Value {
    let rules = &ctx.rules.rules.ruleset;
    let mut params = vec![json!({ "name": "rules", "part": [
        string("name", &rules.name),
        string("version", &rules.version),
        string("hash", &format!("sha256:{}", ctx.rules.sha256)),
    ]})];
    // The trace is read on its own (workbench, `--explain`), so it carries the
    // advisory caution too.
    params.push(string("advisory", &ctx.rules.rules.texts.advisory));
    params.extend(steps.iter().map(step_part));
    json!({
        "resourceType": "Parameters",
        "id": ctx.uuid("explain"),
        "parameter": params,
    })
}
