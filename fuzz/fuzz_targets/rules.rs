//! Any site rule file (TOML text) layered over the embedded defaults: it
//! loads or is refused with a RuleError; never a panic.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else { return };
    let _ = calcium_cds::rules::load::load(Some(("fuzz-site.toml", text)));
});
