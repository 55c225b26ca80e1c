//! The bad-input corpus (tests/bad_inputs/) against its table in
//! docs/bad-inputs.md: each file gives the outcome the table states, with the
//! quoted text, and nothing panics. Every file in the folder must be in the
//! table, and every row of the table must have its file.

mod common;

use serde_json::Value;
use std::collections::BTreeSet;
use std::process::Output;

struct Case {
    file: String,
    flags: Vec<String>,
    outcome: String,
    text: String,
}

fn cases() -> Vec<Case> {
    let doc = std::fs::read_to_string(common::root().join("docs/bad-inputs.md")).unwrap();
    doc.lines()
        .filter(|l| l.starts_with("| `"))
        .map(|l| {
            let l = l.replace("\\|", "\u{0}");
            let cells: Vec<String> = l
                .split('|')
                .map(|c| c.trim().trim_matches('`').replace('\u{0}', "|"))
                .collect();
            Case {
                file: cells[1].clone(),
                flags: cells[2].split_whitespace().map(String::from).collect(),
                outcome: cells[3].clone(),
                text: cells[4].clone(),
            }
        })
        .collect()
}

fn check(c: &Case, extra: &[&str]) -> Output {
    let dir = common::root().join("tests/bad_inputs");
    let role = if c.file.starts_with("trades-") {
        "--trades"
    } else {
        "--calendar"
    };
    std::process::Command::new(env!("CARGO_BIN_EXE_eventfence"))
        .current_dir(&dir)
        .args(["check", role, &c.file, "--unmapped", "none"])
        .args(&c.flags)
        .args(extra)
        .output()
        .unwrap()
}

fn text(o: &Output) -> String {
    format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    )
}

#[test]
fn every_bad_input_behaves_as_documented() {
    let cases = cases();
    assert!(
        cases.len() >= 30,
        "the corpus has {} documented cases",
        cases.len()
    );
    let on_disk: BTreeSet<String> = std::fs::read_dir(common::root().join("tests/bad_inputs"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    let documented: BTreeSet<String> = cases.iter().map(|c| c.file.clone()).collect();
    assert_eq!(on_disk, documented, "files and table differ");

    let mut failures = Vec::new();
    for c in &cases {
        let plain = check(c, &[]);
        let all = text(&plain);
        let mut fail = |why: String| failures.push(format!("{}: {why}\n{all}", c.file));
        if all.contains("panicked") {
            fail("panicked".into());
            continue;
        }
        let words: Vec<&str> = c.outcome.split_whitespace().collect();
        match words.as_slice() {
            ["refused"] => {
                if plain.status.code() != Some(1) {
                    fail(format!("exit {:?}, expected 1", plain.status.code()));
                }
                if !all.contains(&c.file) || !all.contains(&c.text) {
                    fail(format!("message lacks the file name or '{}'", c.text));
                }
            }
            ["imported", n] | ["rejected", _, "of", n] | ["attention", n] => {
                let rejected: usize = if words[0] == "rejected" {
                    words[1].parse().unwrap()
                } else {
                    0
                };
                let read: usize = n.parse().unwrap();
                let expect_code = if rejected > 0 || words[0] == "attention" {
                    3
                } else {
                    0
                };
                if plain.status.code() != Some(expect_code) {
                    fail(format!(
                        "exit {:?}, expected {expect_code}",
                        plain.status.code()
                    ));
                }
                if words[0] == "attention" && !all.contains(&c.text) {
                    fail(format!("the output lacks '{}'", c.text));
                }
                if rejected > 0
                    && !(all.contains(&c.file) && all.contains(" row ") && all.contains(&c.text))
                {
                    fail(format!("the listing lacks file, row or '{}'", c.text));
                }
                let o = check(c, &["--skip-bad-rows", "--json"]);
                let j: Value = match serde_json::from_slice(&o.stdout) {
                    Ok(j) => j,
                    Err(e) => {
                        fail(format!("no JSON with --skip-bad-rows: {e}"));
                        continue;
                    }
                };
                let import = if c.file.starts_with("trades-") {
                    &j["trades"]["import"]
                } else {
                    &j["calendar"]["import"]
                };
                let got = (
                    import["rows_read"].as_u64().unwrap() as usize,
                    import["rows_rejected"].as_u64().unwrap() as usize,
                );
                if got != (read, rejected) {
                    fail(format!(
                        "read/rejected {got:?}, expected ({read}, {rejected})"
                    ));
                }
                if rejected > 0 {
                    let r = &import["rejections"][0];
                    let line = format!(
                        "{}: {}",
                        r["field"].as_str().unwrap(),
                        r["message"].as_str().unwrap()
                    );
                    if !line.contains(&c.text) || r["row"].as_u64().unwrap_or(0) == 0 {
                        fail(format!(
                            "first rejection '{line}' lacks '{}' or a row",
                            c.text
                        ));
                    }
                }
            }
            _ => fail(format!("unknown outcome '{}' in the table", c.outcome)),
        }
    }
    assert!(
        failures.is_empty(),
        "{} case(s) differ from docs/bad-inputs.md:\n{}",
        failures.len(),
        failures.join("\n---\n")
    );
}
