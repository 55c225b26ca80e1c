//! The chart palette against an outside computation of colour-vision
//! deficiency: tests/fixtures/palette_cvd.json is written by
//! tests/reference/make_palette_fixture.py with colorspacious (Machado,
//! Oliveira & Fernandes 2009 simulation at full severity; CAM02-UCS
//! distance). The chart's scenario colours must be the ones simulated, and
//! every pair must stay at least 15 CAM02-UCS units apart for normal,
//! protan, deutan and tritan vision. The floor of 15 is our own choice
//! (rule of thumb: differences of that size read as different colours at a
//! glance, where about 1 is barely noticeable side by side), not a
//! published threshold; each scenario also has its own line pattern.

#![cfg(feature = "charts")]

use eventfence::render::charts::{BASELINE, CAPPED, EXPOSED, REMOVED};

#[test]
fn scenario_colours_stay_apart_under_colour_vision_deficiencies() {
    let path =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/palette_cvd.json");
    let fixture: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    let hex = |c: plotters::style::RGBColor| format!("{:02x}{:02x}{:02x}", c.0, c.1, c.2);
    let palette = &fixture["palette"];
    for (name, colour) in [
        ("baseline", BASELINE),
        ("removed", REMOVED),
        ("capped", CAPPED),
        // The stressed scenario's line takes the exposed-trade colour.
        ("stressed", EXPOSED),
    ] {
        assert_eq!(
            palette[name].as_str(),
            Some(hex(colour).as_str()),
            "{name}: rerun tests/reference/make_palette_fixture.py after a palette change"
        );
    }
    for vision in ["normal", "protanomaly", "deuteranomaly", "tritanomaly"] {
        let v = &fixture["vision"][vision];
        let d = v["min_delta_e"].as_f64().unwrap();
        assert!(
            d >= 15.0,
            "{vision}: {} only {d:.1} apart",
            v["closest_pair"]
        );
    }
}
