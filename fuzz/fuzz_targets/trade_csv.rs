//! Trade CSV importer: every data row is imported or rejected, never lost;
//! no input panics.
#![no_main]
use eventfence::import::trades::{self, TradeOptions};
use libfuzzer_sys::fuzz_target;

#[path = "../common.rs"]
mod common;

fuzz_target!(|data: &[u8]| {
    let path = common::scratch("csv", data);
    let opts = TradeOptions { skip_bad_rows: true, zone: "America/New_York".parse().unwrap(), ..TradeOptions::default() };
    if let Ok((t, s)) = trades::load(std::slice::from_ref(&path), &opts) {
        assert_eq!(s.rows_read, s.rows_imported + s.log.rows_rejected);
        assert_eq!(t.len(), s.rows_imported);
        assert_eq!(t.opened.len(), t.closed.len());
        assert!(t.pnl.iter().all(|v| v.is_finite()));
    }
});
