//! The browser workbench (`/workbench`): a static page embedded in the binary
//! (no external assets), the scenario list and the synthetic-bundle maker it
//! uses. The page itself calls `$assess?_explain=true` like any client. Off
//! with `--workbench false` / `CALCIUM_CDS_WORKBENCH=false`.

use actix_web::HttpResponse;
use actix_web::http::header::{self, HeaderValue};
use serde_json::{Value, json};

use crate::engine::Engine;
use crate::fhir::outcome::{IssueCode, RequestError};
use crate::synth::{self, Catalogue};

const INDEX: &str = include_str!("../workbench/index.html");
const SCRIPT: &str = include_str!("../workbench/app.js");
const STYLE: &str = include_str!("../workbench/app.css");

/// The page's policy: its own origin only (the proof that it loads nothing from elsewhere).
pub const CONTENT_SECURITY_POLICY: &str = "default-src 'self'; img-src 'self' data: blob:; style-src 'self'; script-src 'self'; connect-src 'self'; frame-ancestors 'none'; base-uri 'none'; form-action 'none'";

/// One of the embedded assets.
#[derive(Debug, Clone, Copy)]
pub enum Asset {
    /// index.html.
    Page,
    /// app.js.
    Script,
    /// app.css.
    Style,
}

/// Serve an embedded asset.
pub fn asset(which: Asset) -> HttpResponse {
    let (body, content_type) = match which {
        Asset::Page => (INDEX, "text/html; charset=utf-8"),
        Asset::Script => (SCRIPT, "text/javascript; charset=utf-8"),
        Asset::Style => (STYLE, "text/css; charset=utf-8"),
    };
    let mut res = HttpResponse::Ok().content_type(content_type).body(body);
    let h = res.headers_mut();
    h.insert(header::CONTENT_SECURITY_POLICY, HeaderValue::from_static(CONTENT_SECURITY_POLICY));
    h.insert(header::X_CONTENT_TYPE_OPTIONS, HeaderValue::from_static("nosniff"));
    h.insert(header::CACHE_CONTROL, HeaderValue::from_static("no-cache"));
    res
}

/// The scenario list, as JSON (not a FHIR resource).
pub fn scenarios(cat: &Catalogue) -> Value {
    let list: Vec<Value> = cat
        .scenarios
        .iter()
        .map(|s| json!({ "name": s.name, "group": s.group, "summary": s.summary, "ages": [s.ages[0], s.ages[1]] }))
        .collect();
    json!({ "scenarios": list })
}

fn bad(param: &str, msg: impl Into<String>) -> RequestError {
    RequestError::single(400, IssueCode::Value, param, msg)
}

/// Make a synthetic request from the query `scenario=&age=&seed=&sex=`.
pub fn synth(engine: &Engine, cat: &Catalogue, query: &str, now: i64) -> Result<Value, RequestError> {
    let mut scenario = None;
    let mut age = None;
    let mut seed = 1u64;
    let mut sex = None;
    for pair in query.split('&').filter(|p| !p.is_empty()) {
        let (k, v) = pair.split_once('=').unwrap_or((pair, ""));
        match k {
            "scenario" => scenario = Some(v.to_owned()),
            "age" => age = Some(synth::parse_age(v).map_err(|e| bad("age", e.0))?),
            "seed" => seed = v.parse().map_err(|_| bad("seed", "The seed must be a whole number."))?,
            "sex" if !v.is_empty() => sex = Some(synth::Sex::parse(v).map_err(|e| bad("sex", e.0))?),
            _ => {}
        }
    }
    let scenario = scenario.ok_or_else(|| bad("scenario", "Name a scenario (see /workbench/scenarios)."))?;
    let age_days = age.ok_or_else(|| bad("age", "Give an age, e.g. 18mo."))?;
    if cat.get(&scenario).is_none() {
        return Err(bad("scenario", format!("No scenario '{scenario}'.")));
    }
    let req = synth::Request { scenario, age_days, sex, seed, now };
    synth::make(&engine.rules.rules, cat, &req)
        .map_err(|e| RequestError::single(422, IssueCode::BusinessRule, "scenario", e.0))
}
