//! Shared by the end-to-end tests: the binary, and a subcommand already
//! pointed at the bundled demo (trades on the server clock, the three demo
//! calendars, US500 mapped to USD).

#![allow(dead_code)]

use std::path::PathBuf;
use std::process::Command;

pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// `eventfence SUB` with the demo inputs.
pub fn demo(sub: &str) -> Command {
    let r = root();
    let mut c = Command::new(env!("CARGO_BIN_EXE_eventfence"));
    c.arg(sub)
        .arg("--trades")
        .arg(r.join("demo/trades.csv"))
        .args(["--trades-tz", "America/New_York+07:00", "--calendar"])
        .arg(r.join("calendars/demo-usd.ics"))
        .arg(r.join("calendars/demo-eur.csv"))
        .arg(r.join("calendars/demo-gbp-jpy.ics"))
        .args(["--calendar-tz", "Europe/Berlin", "--instrument-map-file"])
        .arg(r.join("demo/instruments.json"));
    c
}
