//! Benchmark (not a test): the in-process assessment of each example bundle
//! against the floor set by serde_json alone (parse the same bytes to a
//! `Value` and serialise it back), and the cost of our input-profile checks
//! (jsonschema) on their own.
//!
//! Run: `cargo bench -p calcium-cds --bench assess`, then
//! `python3 bench/ratios.py` prints assess / parse+serialise per example
//! from criterion's estimates (target: at most 2x; docs/benchmarks.md).

#![allow(
    clippy::expect_used,
    clippy::unwrap_used,
    missing_docs,
    reason = "a benchmark stops loudly on a broken example"
)]

use std::hint::black_box;

use calcium_cds::engine::Engine;
use calcium_cds::fhir::profiles::Kind;
use criterion::{Criterion, criterion_group, criterion_main};
use serde_json::Value;

/// A fixed clock (2026-11-30T15:00:00Z), the README's `--now`.
const NOW: i64 = 1_796_050_800;

fn examples() -> Vec<(String, Vec<u8>)> {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../fhir-profiles/examples");
    let mut out: Vec<(String, Vec<u8>)> = std::fs::read_dir(&dir)
        .expect("the examples directory")
        .filter_map(Result::ok)
        .map(|e| e.path())
        .filter(|p| p.extension().is_some_and(|x| x == "json"))
        .map(|p| (p.file_stem().unwrap().to_string_lossy().into_owned(), std::fs::read(&p).unwrap()))
        .collect();
    out.sort();
    out
}

fn kind_of(resource_type: &str) -> Option<Kind> {
    Some(match resource_type {
        "Patient" => Kind::Patient,
        "Observation" => Kind::Observation,
        "Condition" => Kind::Condition,
        "MedicationRequest" => Kind::MedicationRequest,
        "MedicationStatement" => Kind::MedicationStatement,
        "MedicationAdministration" => Kind::MedicationAdministration,
        "Procedure" => Kind::Procedure,
        _ => return None,
    })
}

/// The profile checks an assessment runs: the wrapper, then each entry it reads.
fn check_profiles(engine: &Engine, doc: &Value) -> usize {
    let mut errors = 0;
    let bundle = if doc["resourceType"] == "Parameters" {
        errors += engine.profiles.check(Kind::Parameters, doc).len();
        doc["parameter"].as_array().and_then(|ps| ps.iter().find(|p| p["name"] == "bundle")).map(|p| &p["resource"])
    } else {
        Some(doc)
    };
    if let Some(bundle) = bundle {
        errors += engine.profiles.check(Kind::Bundle, bundle).len();
        for entry in bundle["entry"].as_array().into_iter().flatten() {
            let resource = &entry["resource"];
            if let Some(kind) = resource["resourceType"].as_str().and_then(kind_of) {
                errors += engine.profiles.check(kind, resource).len();
            }
        }
    }
    errors
}

fn bench(c: &mut Criterion) {
    let engine = Engine::new(calcium_cds::config::load_rules(None).expect("embedded rules")).expect("engine");
    for (name, bytes) in examples() {
        let mut group = c.benchmark_group(name.as_str());
        group.bench_function("assess", |b| {
            b.iter(|| {
                let outcome = engine.assess(black_box(&bytes), NOW, true).expect("an example is assessed");
                black_box(outcome.bundle.to_string())
            });
        });
        group.bench_function("parse_serialise", |b| {
            b.iter(|| {
                let v: Value = serde_json::from_slice(black_box(&bytes)).expect("JSON");
                black_box(v.to_string())
            });
        });
        // The same floor for the answer: our result Bundles are 2 to 17 times the size of the request.
        let answer = engine.assess(&bytes, NOW, true).expect("assessed").bundle.to_string().into_bytes();
        group.bench_function("answer_parse_serialise", |b| {
            b.iter(|| {
                let v: Value = serde_json::from_slice(black_box(&answer)).expect("JSON");
                black_box(v.to_string())
            });
        });
        let doc: Value = serde_json::from_slice(&bytes).expect("JSON");
        group.bench_function("profiles", |b| b.iter(|| black_box(check_profiles(&engine, black_box(&doc)))));
        group.finish();
    }
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(30).warm_up_time(std::time::Duration::from_millis(500))
        .measurement_time(std::time::Duration::from_secs(2));
    targets = bench
}
criterion_main!(benches);
