//! FHIR date and dateTime parsing: never a panic; what parses is a span that
//! does not end before it starts, and a date-only value keeps its precision.
#![no_main]

use calcium_cds::fhir::datetime::{parse_date, parse_date_time};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(s) = std::str::from_utf8(data) else { return };
    let _ = parse_date(s);
    if let Ok(dt) = parse_date_time(s) {
        assert!(dt.when.earliest <= dt.when.latest, "{s}: {:?}", dt.when);
        assert_eq!(dt.date_only.is_some(), !s.contains('T'), "{s}");
    }
});
