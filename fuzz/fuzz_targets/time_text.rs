//! Time stamps: any text with any format gives a stamp or an error.
#![no_main]
use eventfence::import::timefmt::{TimeFormat, parse_stamp};
use eventfence::import::zones::{LocalPolicy, Zone};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else { return };
    // "format\u{1}stamp" fuzzes a user pattern; otherwise the built-in forms.
    let (fmt, stamp) = match text.split_once('\u{1}') {
        Some((f, s)) => match TimeFormat::parse(f) {
            Ok(f) => (f, s),
            Err(_) => return,
        },
        None => (TimeFormat::Auto, text),
    };
    if let Ok(st) = parse_stamp(stamp, &fmt) {
        let zone: Zone = "Australia/Lord_Howe".parse().unwrap();
        let _ = st.resolve(&zone, LocalPolicy::Rfc5545);
        let _ = st.resolve(&Zone::Utc, LocalPolicy::Error);
    }
});
