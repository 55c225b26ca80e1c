//! summary.json against its published layout, docs/summary.schema.json
//! (JSON Schema draft 2020-12, checked by the `jsonschema` crate, an
//! implementation independent of ours): the demo's summaries in the
//! settings that change its shape validate, and a renamed figure or a
//! raised schema_version does not.

mod common;

use serde_json::Value;

fn validator() -> jsonschema::Validator {
    let text = std::fs::read_to_string(common::root().join("docs/summary.schema.json")).unwrap();
    let schema: Value = serde_json::from_str(&text).unwrap();
    jsonschema::draft202012::new(&schema).expect("the schema is valid draft 2020-12")
}

fn errors(v: &jsonschema::Validator, doc: &Value) -> Vec<String> {
    v.iter_errors(doc)
        .map(|e| format!("{} at {}", e, e.instance_path()))
        .collect()
}

/// The demo's summary under `extra` flags, from --json and from --out.
fn summaries(extra: &[&str]) -> Vec<Value> {
    let dir = tempfile::tempdir().unwrap();
    let o = common::demo("analyze")
        .args(["--quiet", "--json", "--out"])
        .arg(dir.path())
        .args(extra)
        .output()
        .unwrap();
    assert!(
        matches!(o.status.code(), Some(0 | 3)),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let printed: Value = serde_json::from_slice(&o.stdout).unwrap();
    let written: Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("summary.json")).unwrap()).unwrap();
    vec![printed, written]
}

#[test]
fn the_demo_summaries_follow_the_published_schema() {
    let v = validator();
    let variants: [&[&str]; 4] = [
        // runs as alternatives, chance tests on
        &["--placebo", "19", "--bootstrap", "20"],
        // one account: pooled, stressed, equity known
        &[
            "--pool",
            "--stress",
            "amount:5",
            "--initial-equity",
            "100000",
            "--placebo",
            "0",
            "--bootstrap",
            "20",
        ],
        // one run, compounding (return basis), no chance tests
        &[
            "--run",
            "p01",
            "--sizing",
            "compounding",
            "--initial-equity",
            "100000",
            "--placebo",
            "0",
            "--bootstrap",
            "0",
        ],
        // windows by category and title, all-day releases, a fixed cap
        &[
            "--window-category",
            "rates=60/120",
            "--window-title",
            "(?i)payroll=30/90",
            "--all-day",
            "--cap",
            "amount:200",
            "--placebo",
            "0",
            "--bootstrap",
            "0",
        ],
    ];
    for extra in variants {
        for doc in summaries(extra) {
            let errs = errors(&v, &doc);
            assert!(errs.is_empty(), "{extra:?}: {errs:#?}");
        }
    }
}

#[test]
fn the_schema_refuses_a_renamed_figure_and_another_version() {
    let v = validator();
    let doc = summaries(&["--placebo", "0", "--bootstrap", "0"]).remove(0);
    assert!(errors(&v, &doc).is_empty());
    let mut renamed = doc.clone();
    let baseline = renamed["scenarios"]["baseline"].as_object_mut().unwrap();
    let sharpe = baseline.remove("sharpe").unwrap();
    baseline.insert("sharp".into(), sharpe);
    let errs = errors(&v, &renamed);
    assert!(errs.iter().any(|e| e.contains("sharp")), "{errs:?}");
    let mut raised = doc.clone();
    raised["tool"]["schema_version"] = Value::from(3);
    assert!(!errors(&v, &raised).is_empty());
    let mut wrong_type = doc;
    wrong_type["exposure"]["exposed_trades"] = Value::from("1139");
    assert!(!errors(&v, &wrong_type).is_empty());
}
