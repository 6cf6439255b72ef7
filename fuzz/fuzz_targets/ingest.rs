//! Any request body through the whole assessment: parse, profile checks,
//! ingestion, clinical core, output. It may refuse (an OperationOutcome);
//! it must never panic, and an answer must be a Bundle that serialises.
#![no_main]

use std::sync::LazyLock;

use calcium_cds::engine::Engine;
use libfuzzer_sys::fuzz_target;

static ENGINE: LazyLock<Engine> = LazyLock::new(|| {
    let rules = calcium_cds::config::load_rules(None).unwrap_or_else(|e| panic!("embedded rules: {e}"));
    Engine::new(rules).unwrap_or_else(|e| panic!("engine: {e}"))
});

/// A fixed clock (2026-11-30T15:00:00Z) so that runs repeat.
const NOW: i64 = 1_796_050_800;

fuzz_target!(|data: &[u8]| {
    match ENGINE.assess(data, NOW, false) {
        Ok(outcome) => {
            assert_eq!(outcome.bundle["resourceType"], "Bundle");
            let text = outcome.bundle.to_string();
            assert!(serde_json::from_str::<serde_json::Value>(&text).is_ok());
        }
        Err(refusal) => {
            let status = refusal.status;
            assert!((400..500).contains(&status), "a refusal is a 4xx, not {status}");
        }
    }
});
