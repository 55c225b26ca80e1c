//! Calendar CSV importer: no input panics; rows are imported or rejected.
#![no_main]
use eventfence::import::calendar::{self, CalendarOptions};
use libfuzzer_sys::fuzz_target;

#[path = "../common.rs"]
mod common;

fuzz_target!(|data: &[u8]| {
    let path = common::scratch("csv", data);
    let opts = CalendarOptions { skip_bad_rows: true, zone: "Europe/London".parse().unwrap(), ..CalendarOptions::default() };
    if let Ok(cal) = calendar::load(std::slice::from_ref(&path), &opts) {
        let s = &cal.summary;
        assert!(s.log.rows_rejected <= s.rows_read);
        assert_eq!(s.releases + s.duplicates_merged, s.rows_read - s.log.rows_rejected);
    }
});
