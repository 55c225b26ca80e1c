//! What scripts rely on: `-` for standard input and output, JSON Lines
//! rows from `rank` and `tune`, `--color`, and the same terminal flags in
//! every subcommand. Each check compares with the same run written the
//! ordinary way (a file in, a JSON document out), so a difference is the
//! convention's, not the figures'.

mod common;

use serde_json::Value;
use std::io::Write;
use std::process::{Command, Output, Stdio};

/// Runs `cmd` with `input` on its standard input.
fn with_stdin(mut cmd: Command, input: &[u8]) -> Output {
    let mut child = cmd
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut stdin = child.stdin.take().unwrap();
    let bytes = input.to_vec();
    let writer = std::thread::spawn(move || {
        // The program may refuse before reading everything.
        let _ = stdin.write_all(&bytes);
    });
    let out = child.wait_with_output().unwrap();
    writer.join().unwrap();
    out
}

/// `eventfence analyze` on the demo with the trades or one calendar file
/// swapped for `-`, no chance tests, as JSON.
fn analyze_with(trades: &str, first_calendar: &str) -> Command {
    let r = common::root();
    let mut c = Command::new(env!("CARGO_BIN_EXE_eventfence"));
    c.arg("analyze")
        .args(["--trades", trades])
        .args(["--trades-tz", "America/New_York+07:00", "--calendar"])
        .arg(first_calendar)
        .arg(r.join("calendars/demo-eur.csv"))
        .arg(r.join("calendars/demo-gbp-jpy.ics"))
        .args(["--calendar-tz", "Europe/Berlin", "--instrument-map-file"])
        .arg(r.join("demo/instruments.json"))
        .args(["--placebo", "0", "--bootstrap", "0", "--json", "--quiet"]);
    c
}

fn json(o: &Output) -> Value {
    assert!(
        o.status.success(),
        "exit {:?}: {}",
        o.status,
        String::from_utf8_lossy(&o.stderr)
    );
    serde_json::from_slice(&o.stdout).unwrap()
}

/// The figures of a summary, without the part that names the input files.
fn figures(mut v: Value) -> Value {
    v.as_object_mut().unwrap().remove("inputs");
    v
}

#[test]
fn trades_from_standard_input_equal_the_file() {
    let r = common::root();
    let usd = r.join("calendars/demo-usd.ics").display().to_string();
    let trades = r.join("demo/trades.csv");
    let from_file = json(
        &analyze_with(&trades.display().to_string(), &usd)
            .output()
            .unwrap(),
    );
    let piped = with_stdin(analyze_with("-", &usd), &std::fs::read(&trades).unwrap());
    let from_stdin = json(&piped);
    assert_eq!(from_stdin["inputs"]["trades"]["files"][0], "stdin");
    assert_eq!(from_stdin["headline"], from_file["headline"]);
    assert_eq!(figures(from_stdin), figures(from_file));
}

#[test]
fn a_calendar_from_standard_input_is_told_ics_or_csv_by_its_first_line() {
    let r = common::root();
    let trades = r.join("demo/trades.csv").display().to_string();
    let usd = r.join("calendars/demo-usd.ics");
    let from_file = json(
        &analyze_with(&trades, &usd.display().to_string())
            .output()
            .unwrap(),
    );
    let ics = std::fs::read(&usd).unwrap();
    assert!(ics.starts_with(b"BEGIN:VCALENDAR"));
    let from_stdin = json(&with_stdin(analyze_with(&trades, "-"), &ics));
    assert_eq!(from_stdin["headline"], from_file["headline"]);
    assert_eq!(from_stdin["attribution"], from_file["attribution"]);
    // The CSV calendar through standard input (its first calendar slot):
    // the same releases as the file.
    let eur = r.join("calendars/demo-eur.csv");
    let mut c = Command::new(env!("CARGO_BIN_EXE_eventfence"));
    c.arg("check")
        .args(["--calendar", "-"])
        .args(["--calendar-tz", "Europe/Berlin", "--json"]);
    let piped = json(&with_stdin(c, &std::fs::read(&eur).unwrap()));
    let direct = json(
        &Command::new(env!("CARGO_BIN_EXE_eventfence"))
            .arg("check")
            .arg("--calendar")
            .arg(&eur)
            .args(["--calendar-tz", "Europe/Berlin", "--json"])
            .output()
            .unwrap(),
    );
    assert_eq!(
        piped["calendar"]["releases_by_currency"],
        direct["calendar"]["releases_by_currency"]
    );
    assert!(piped["calendar"]["releases_by_currency"]["EUR"].is_object());
}

#[test]
fn standard_input_is_read_once_and_not_as_parquet() {
    let both = with_stdin(
        analyze_with("-", "-"),
        b"opened_at,closed_at,instrument,pnl\n",
    );
    assert_eq!(both.status.code(), Some(1));
    let err = String::from_utf8_lossy(&both.stderr);
    assert!(err.contains("standard input (-) can be read once"), "{err}");
    let r = common::root();
    let usd = r.join("calendars/demo-usd.ics").display().to_string();
    let parquet = with_stdin(analyze_with("-", &usd), b"PAR1\x15\x04");
    assert_eq!(parquet.status.code(), Some(1));
    let err = String::from_utf8_lossy(&parquet.stderr);
    assert!(
        err.contains("stdin") && err.contains("Parquet is read from a file"),
        "{err}"
    );
}

#[test]
fn schedule_output_dash_is_standard_output() {
    let r = common::root();
    let run = |extra: &[&str]| {
        let o = Command::new(env!("CARGO_BIN_EXE_eventfence"))
            .arg("schedule")
            .arg("--calendar")
            .arg(r.join("calendars/demo-usd.ics"))
            .args(["--calendar-tz", "Europe/Berlin", "--instruments", "US500"])
            .args(["--instrument-map", "US500=USD"])
            .args([
                "--from",
                "2024-03-01",
                "--to",
                "2024-03-31",
                "--format",
                "csv",
            ])
            .args(extra)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        o.stdout
    };
    let plain = run(&[]);
    let dashed = run(&["--output", "-"]);
    assert!(plain.len() > 100);
    assert_eq!(plain, dashed);
    assert!(!std::path::Path::new("-").exists());
}

#[test]
fn rank_json_lines_are_the_runs_of_the_json_document() {
    let doc = json(
        &common::demo("rank")
            .args(["--json", "--quiet", "--distortion-draws", "0"])
            .output()
            .unwrap(),
    );
    let o = common::demo("rank")
        .args(["--format", "jsonl", "--quiet", "--distortion-draws", "0"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = String::from_utf8(o.stdout).unwrap();
    let lines: Vec<Value> = text
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let runs = doc["runs"].as_array().unwrap();
    assert_eq!(runs.len(), 50, "the demo has 50 runs");
    assert_eq!(lines.len(), runs.len());
    assert_eq!(&lines, runs);
    assert!(text.ends_with('\n') && !text.contains("\n\n"));
    // --json and --format together are refused as a bad flag.
    let both = common::demo("rank")
        .args(["--json", "--format", "jsonl"])
        .output()
        .unwrap();
    assert_eq!(both.status.code(), Some(2));
}

#[test]
fn tune_json_lines_are_the_cells_of_the_json_document() {
    let grid = ["--pre", "0..30/15", "--post", "0..60/30", "--quiet"];
    let doc = json(
        &common::demo("tune")
            .args(grid)
            .arg("--json")
            .output()
            .unwrap(),
    );
    let o = common::demo("tune")
        .args(grid)
        .args(["--format", "jsonl"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let lines: Vec<Value> = String::from_utf8(o.stdout)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let cells = doc["cells"].as_array().unwrap();
    assert_eq!(cells.len(), 9, "3 pre × 3 post windows");
    assert_eq!(&lines, cells);
    assert_eq!(lines[5]["pre_min"], 15);
    assert_eq!(lines[5]["post_min"], 60);
}

/// ANSI emphasis escapes (bold, or bold blue).
fn has_escapes(bytes: &[u8]) -> bool {
    String::from_utf8_lossy(bytes).contains("\x1b[1")
}

#[test]
fn color_flag_overrides_the_terminal_and_no_color() {
    let run = |color: Option<&str>, no_color: bool| {
        let mut c = common::demo("analyze");
        c.args(["--placebo", "0", "--bootstrap", "0", "--quiet"]);
        if let Some(when) = color {
            c.args(["--color", when]);
        }
        if no_color {
            c.env("NO_COLOR", "1");
        } else {
            c.env_remove("NO_COLOR");
        }
        let o = c.output().unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        o.stdout
    };
    // Piped (not a terminal): auto gives none.
    assert!(!has_escapes(&run(None, false)));
    assert!(!has_escapes(&run(Some("auto"), false)));
    let always = run(Some("always"), false);
    assert!(has_escapes(&always));
    // The answer sentence is the bold line.
    let text = String::from_utf8_lossy(&always);
    let bold = text.lines().find(|l| l.starts_with("\x1b[1m")).unwrap();
    assert!(bold.contains(" were exposed to "), "{bold}");
    assert!(has_escapes(&run(Some("always"), true)));
    assert!(!has_escapes(&run(Some("never"), false)));
    let bad = common::demo("analyze")
        .args(["--color", "sometimes"])
        .output()
        .unwrap();
    assert_eq!(bad.status.code(), Some(2));
}

/// `text` without the emphasis escapes.
fn plain(text: &[u8]) -> String {
    String::from_utf8_lossy(text)
        .replace("\x1b[1;34m", "")
        .replace("\x1b[1m", "")
        .replace("\x1b[0m", "")
}

/// Every subcommand takes `--quiet` and `--color`, and `--color` acts in
/// each: with the USD calendar alone the demo leaves EUR, GBP and JPY
/// unjudged, so every command has warnings (check: problems; schedule: on
/// standard error) that `always` emphasises and `never` does not, the text
/// otherwise the same.
#[test]
fn every_subcommand_takes_the_terminal_flags() {
    let r = common::root();
    for sub in ["analyze", "check", "rank", "tune", "schedule"] {
        let run = |when: &str| {
            let mut c = Command::new(env!("CARGO_BIN_EXE_eventfence"));
            c.arg(sub)
                .arg("--calendar")
                .arg(r.join("calendars/demo-usd.ics"))
                .args(["--calendar-tz", "Europe/Berlin", "--quiet", "--color", when]);
            match sub {
                "schedule" => {
                    c.args(["--instruments", "EURUSD", "--from", "2024-03-01"]);
                    c.args(["--to", "2024-03-02"]);
                }
                _ => {
                    c.arg("--trades").arg(r.join("demo/trades.csv"));
                    c.args([
                        "--trades-tz",
                        "America/New_York+07:00",
                        "--instrument-map-file",
                    ]);
                    c.arg(r.join("demo/instruments.json"));
                }
            }
            match sub {
                "analyze" => {
                    c.args(["--placebo", "0", "--bootstrap", "0"]);
                }
                "rank" => {
                    c.args(["--distortion-draws", "0"]);
                }
                "tune" => {
                    c.args(["--pre", "0..15/15", "--post", "0..30/30"]);
                }
                _ => {}
            }
            let o = c.output().unwrap();
            assert_eq!(
                o.status.code(),
                Some(3),
                "{sub} {when}: {}",
                String::from_utf8_lossy(&o.stderr)
            );
            if sub == "schedule" {
                o.stderr
            } else {
                o.stdout
            }
        };
        let (always, never) = (run("always"), run("never"));
        assert!(
            String::from_utf8_lossy(&always).contains("\x1b[1;34m"),
            "{sub}: warnings emphasised"
        );
        assert!(!has_escapes(&never), "{sub}");
        assert_eq!(plain(&always), String::from_utf8_lossy(&never), "{sub}");
    }
}
