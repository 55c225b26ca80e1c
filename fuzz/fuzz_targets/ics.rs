//! ICS importer: any bytes give releases or an error, never a panic or a
//! hang; what was read is accounted for.
#![no_main]
use eventfence::import::calendar::{CalendarOptions, CalendarSummary, ics};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    // Once without a span (rules must end), once with a 30-year span.
    for span in [None, Some((0, 30 * 365 * 86_400_000))] {
        let opts = CalendarOptions { span, max_occurrences: 2_000, ..CalendarOptions::default() };
        let mut out = Vec::new();
        let mut summary = CalendarSummary::default();
        if ics::read_bytes(data, "fuzz.ics", &opts, &mut out, &mut summary).is_ok() {
            assert!(summary.log.rows_rejected <= summary.rows_read);
            for r in &out {
                assert!(r.end >= r.at, "release ends before it starts");
            }
        }
    }
});
