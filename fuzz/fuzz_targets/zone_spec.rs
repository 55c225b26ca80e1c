//! Zone specifications: any text parses to a zone or an error; a zone
//! converts any instant both ways without panicking.
#![no_main]
use eventfence::import::zones::{LocalPolicy, Zone};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else { return };
    if let Ok(zone) = text.parse::<Zone>() {
        for ms in [0i64, 1_700_000_000_000, -2_208_988_800_000, 4_102_444_800_000] {
            let local = zone.to_local(ms);
            let _ = zone.format(ms);
            for policy in [LocalPolicy::Error, LocalPolicy::Earlier, LocalPolicy::Later, LocalPolicy::Rfc5545] {
                if let Ok(back) = zone.to_utc(&local, policy) {
                    // An ambiguous local time may resolve to the other instant.
                    assert!((back - ms).abs() <= 3 * 3_600_000, "{zone}: {ms} -> {local} -> {back}");
                }
            }
        }
    }
});
