//! UCUM unit codes and values through the conversion to each analyte's
//! canonical unit and back: never a panic; a finite value converted to the
//! canonical unit and back is the value again (relative 1e-9).
#![no_main]

use std::sync::LazyLock;

use calcium_cds::clinical::units::{from_canonical, lookup, to_canonical};
use calcium_cds::rules::LoadedRules;
use libfuzzer_sys::fuzz_target;

static RULES: LazyLock<LoadedRules> =
    LazyLock::new(|| calcium_cds::config::load_rules(None).unwrap_or_else(|e| panic!("embedded rules: {e}")));

fuzz_target!(|data: &[u8]| {
    if data.len() < 8 {
        return;
    }
    let (value, code) = data.split_at(8);
    let value = f64::from_le_bytes(value.try_into().unwrap_or([0; 8]));
    let Ok(code) = std::str::from_utf8(code) else { return };
    let _ = lookup(code);
    for rule in RULES.rules.analytes.values() {
        let Ok(canonical) = to_canonical(value, code, rule) else { continue };
        if !(value.is_finite() && canonical.is_finite()) || value.abs() > 1e12 || value.abs() < 1e-12 {
            continue;
        }
        let back = from_canonical(canonical, code, rule).unwrap_or_else(|e| panic!("{code} converts one way only: {e}"));
        assert!((back - value).abs() <= 1e-9 * value.abs(), "{value} {code} -> {canonical} -> {back}");
    }
});
