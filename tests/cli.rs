//! The real binary on small inputs: exit codes, error wording (file, row,
//! field), JSON layout, and the bundled demo.

mod common;

use serde_json::Value;
use std::path::Path;
use std::process::{Command, Output};

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_eventfence"))
}

fn run(args: &[&str], dir: &Path) -> Output {
    bin().current_dir(dir).args(args).output().unwrap()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

const CAL: &str = "released_at,title,currency,tier,category\n2024-03-08 13:30,Jobs,USD,high,employment\n2024-03-12 12:30,Prices,USD,high,inflation\n";

#[test]
fn demo_analysis_shows_a_difference_and_carries_the_caution() {
    let o = common::demo("analyze")
        .args(["--json", "--placebo", "19", "--bootstrap", "10"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    let j: Value = serde_json::from_slice(&o.stdout).unwrap();
    for key in [
        "tool",
        "inputs",
        "settings",
        "exposure",
        "scenarios",
        "attribution",
        "runs",
        "caution",
    ] {
        assert!(j.get(key).is_some(), "summary lacks {key}");
    }
    let base = &j["scenarios"]["baseline"];
    let removed = &j["scenarios"]["removed"];
    assert_eq!(base["trades"], j["inputs"]["trades"]["rows_imported"]);
    assert_eq!(
        removed["trades"].as_u64().unwrap() + j["exposure"]["exposed_trades"].as_u64().unwrap(),
        base["trades"].as_u64().unwrap()
    );
    let (bn, rn, en) = (
        base["net"].as_f64().unwrap(),
        removed["net"].as_f64().unwrap(),
        j["exposure"]["exposed_pnl"].as_f64().unwrap(),
    );
    assert!((bn - rn - en).abs() < 0.005, "removed + exposed = baseline");
    assert!(
        (bn - rn).abs() > 1000.0,
        "the demo shows a visible difference"
    );
    assert!(base["tcr"].as_f64().unwrap() > removed["tcr"].as_f64().unwrap());
    assert_eq!(j["runs"].as_array().unwrap().len(), 50);
    assert!(
        j["caution"]
            .as_str()
            .unwrap()
            .contains("not investment advice")
    );
    assert_eq!(j["placebo"]["placebos"], 19);
    let p = j["placebo"]["p_share"].as_f64().unwrap();
    assert!((0.05..=1.0).contains(&p), "p is a multiple of 1/20: {p}");
    assert_eq!(j["bootstrap"]["intervals"]["net"]["replicates"], 10);
    assert_eq!(j["tail"]["threshold"], 12.0);
    assert!(
        j["tail"]["threshold_source"]
            .as_str()
            .unwrap()
            .contains("common practice")
    );
    assert!(
        j["warnings"].as_array().unwrap().is_empty(),
        "demo calendar covers the demo trades: {}",
        j["warnings"]
    );
    // Attribution sums equal the exposed P/L.
    let sum: f64 = j["attribution"]["by_release"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["attributed_pnl"].as_f64().unwrap())
        .sum();
    assert!((sum - en).abs() < 0.005);

    let o = common::demo("analyze")
        .args(["--placebo", "0", "--bootstrap", "0"])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.contains("profit factor") && text.contains("not investment advice"));
    assert!(!text.contains('\u{1b}'), "no escape codes in piped output");
}

#[test]
fn bad_rows_name_file_row_and_field_and_can_be_skipped() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("cal.csv"), CAL).unwrap();
    std::fs::write(
        dir.path().join("t.csv"),
        "opened_at,closed_at,instrument,pnl\n\
2024-03-08 13:00,2024-03-08 14:00,EURUSD,10\n\
2024-03-08 13:00,2024-03-08 12:00,EURUSD,5\n\
yesterday,2024-03-08 14:00,EURUSD,5\n\
2024-03-08 13:00,2024-03-08 14:00,EURUSD,\n\
2024-03-08 13:00,2024-03-08 14:00,EURUSD,abc\n\
2024-03-11 13:00,2024-03-11 14:00,GBPUSD,-4\n",
    )
    .unwrap();
    let o = run(
        &["analyze", "--trades", "t.csv", "--calendar", "cal.csv"],
        dir.path(),
    );
    assert!(!o.status.success());
    let e = stderr(&o);
    assert!(e.contains("4 trade row(s) rejected"), "{e}");
    assert!(e.contains("t.csv row 2: closed_at"), "{e}");
    assert!(
        e.contains("t.csv row 3: opened_at: 'yesterday' is not a time"),
        "{e}"
    );
    assert!(e.contains("t.csv row 4: pnl: empty"), "{e}");
    assert!(e.contains("t.csv row 5: pnl: 'abc' is not a number"), "{e}");
    let o = run(
        &[
            "analyze",
            "--trades",
            "t.csv",
            "--calendar",
            "cal.csv",
            "--skip-bad-rows",
            "--json",
        ],
        dir.path(),
    );
    // Completed, with rows skipped: status 3 (README), in every command.
    assert_eq!(o.status.code(), Some(3), "{}", stderr(&o));
    let j: Value = serde_json::from_slice(&o.stdout).unwrap();
    let t = &j["inputs"]["trades"];
    assert_eq!(
        (
            t["rows_read"].as_u64(),
            t["rows_imported"].as_u64(),
            t["rows_rejected"].as_u64()
        ),
        (Some(6), Some(2), Some(4))
    );
    assert_eq!(t["rejected_by_reason"]["missing_value"], 1);
    assert_eq!(t["rejected_by_reason"]["closed_before_opened"], 1);
    assert!(
        j["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w.as_str().unwrap().starts_with("SKIPPED: 4 trade row(s)"))
    );
    assert_eq!(j["exposure"]["exposed_trades"], 1);

    let o = run(
        &["check", "--trades", "t.csv", "--calendar", "cal.csv"],
        dir.path(),
    );
    assert_eq!(
        o.status.code(),
        Some(3),
        "check exits non-zero when rows are rejected"
    );
    assert!(String::from_utf8_lossy(&o.stdout).contains("closed_before_opened"));
}

#[test]
fn flags_and_unmapped_instruments_fail_clearly() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("cal.csv"), CAL).unwrap();
    std::fs::write(
        dir.path().join("t.csv"),
        "opened_at,closed_at,instrument,pnl\n2024-03-08 13:00,2024-03-08 14:00,US500,10\n",
    )
    .unwrap();
    let o = run(
        &[
            "analyze",
            "--trades",
            "t.csv",
            "--calendar",
            "cal.csv",
            "--trades-tz",
            "Mars/Olympus",
        ],
        dir.path(),
    );
    assert!(
        stderr(&o).contains("--trades-tz: unknown time zone 'Mars/Olympus'"),
        "{}",
        stderr(&o)
    );
    let o = run(
        &["analyze", "--trades", "t.csv", "--calendar", "cal.csv"],
        dir.path(),
    );
    assert!(
        stderr(&o).contains("no currencies known for instrument(s) US500"),
        "{}",
        stderr(&o)
    );
    let o = run(
        &["check", "--trades", "t.csv", "--calendar", "cal.csv"],
        dir.path(),
    );
    assert_eq!(
        o.status.code(),
        Some(3),
        "check lists unmapped instruments and exits 3"
    );
    assert!(
        String::from_utf8_lossy(&o.stdout).contains("no currencies known for instrument(s) US500")
    );
    let o = run(
        &[
            "check",
            "--trades",
            "t.csv",
            "--calendar",
            "cal.csv",
            "--instrument-map",
            "US500=USD",
        ],
        dir.path(),
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let o = run(
        &[
            "analyze",
            "--trades",
            "t.csv",
            "--calendar",
            "cal.csv",
            "--instrument-map",
            "US500=USD",
            "--json",
        ],
        dir.path(),
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let o = run(
        &[
            "analyze",
            "--trades",
            "t.csv",
            "--calendar",
            "cal.csv",
            "--map",
            "pnl=Outcome",
        ],
        dir.path(),
    );
    assert!(
        stderr(&o).contains("no column 'Outcome' for pnl"),
        "{}",
        stderr(&o)
    );
    let o = run(
        &[
            "analyze",
            "--trades",
            "t.csv",
            "--calendar",
            "cal.csv",
            "--instrument-map",
            "US500=USD",
            "--cap",
            "lots",
        ],
        dir.path(),
    );
    assert!(stderr(&o).contains("--cap 'lots'"), "{}", stderr(&o));
}

#[test]
fn out_folder_never_overwrites_an_input() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("cal.csv"), CAL).unwrap();
    std::fs::write(
        dir.path().join("trades.csv"),
        "opened_at,closed_at,instrument,pnl\n2024-03-08 13:00,2024-03-08 14:00,EURUSD,10\n",
    )
    .unwrap();
    let o = run(
        &[
            "analyze",
            "--trades",
            "trades.csv",
            "--calendar",
            "cal.csv",
            "--out",
            ".",
        ],
        dir.path(),
    );
    assert!(stderr(&o).contains("refusing to write"), "{}", stderr(&o));
    assert!(
        std::fs::read_to_string(dir.path().join("trades.csv"))
            .unwrap()
            .contains("EURUSD,10")
    );
}

#[test]
fn rank_on_the_demo_moves_runs_and_fits_80_columns() {
    let o = common::demo("rank").arg("--json").output().unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    let j: Value = serde_json::from_slice(&o.stdout).unwrap();
    let runs = j["runs"].as_array().unwrap();
    assert_eq!(runs.len(), 50);
    let max_shift = runs
        .iter()
        .map(|r| r["rank_shift"].as_i64().unwrap().abs())
        .max()
        .unwrap();
    assert!(max_shift >= 10, "largest rank shift {max_shift}");
    // Ranks are a permutation of 1..=50 in both scenarios.
    for key in ["rank_baseline", "rank_removed"] {
        let mut r: Vec<i64> = runs.iter().map(|x| x[key].as_i64().unwrap()).collect();
        r.sort();
        assert_eq!(r, (1..=50).collect::<Vec<_>>());
    }
    let dir = tempfile::tempdir().unwrap();
    let o = common::demo("rank")
        .arg("--out")
        .arg(dir.path())
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(
        text.lines().all(|l| l.chars().count() <= 80),
        "table wider than 80 columns:\n{text}"
    );
    let csv = std::fs::read_to_string(dir.path().join("runs.csv")).unwrap();
    assert_eq!(csv.lines().count(), 51);
    // The terminal's width (COLUMNS here) is used, and a cell is never
    // split (the table once wrapped at 80 columns, splitting numbers): a
    // wide terminal gets every column, a narrow one whole columns fewer.
    let rows_of = |columns: &str| {
        let o = common::demo("rank")
            .env("COLUMNS", columns)
            .args(["--placebo", "5"])
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&o.stdout).into_owned();
        let rows: Vec<usize> = text
            .lines()
            // Table rows are indented; the text above them may also name
            // runs (the distortion block) at a line's start.
            .filter(|l| l.starts_with("  p") && l[3..].starts_with(|c: char| c.is_ascii_digit()))
            .map(|l| l.split_whitespace().count())
            .collect();
        (rows, text)
    };
    let (wide, text) = rows_of("200");
    assert_eq!(wide.len(), 50, "{text}");
    assert!(
        wide.iter().all(|&n| n == 11) && !text.contains("Left out to fit"),
        "{text}"
    );
    let (narrow, text) = rows_of("60");
    assert_eq!(narrow.len(), 50, "{text}");
    assert!(narrow.iter().all(|&n| n == 7), "{text}");
    assert!(
        text.contains(
            "Left out to fit 60 columns: p, TCR r, TCR b, trades (all in --json and runs.csv)."
        ),
        "{text}"
    );
    let table_width = text
        .lines()
        .filter(|l| l.contains("rk b") || l.starts_with("  p"))
        .map(|l| l.chars().count())
        .max()
        .unwrap();
    assert!(table_width <= 60, "{table_width}");
}

#[test]
fn no_colour_codes_and_no_progress_bar_in_pipes() {
    let o = common::demo("analyze")
        .env("NO_COLOR", "1")
        .args(["--placebo", "5", "--bootstrap", "5"])
        .output()
        .unwrap();
    assert!(o.status.success());
    assert!(
        !o.stdout.contains(&0x1b) && !o.stderr.contains(&0x1b),
        "escape codes in output"
    );
    assert!(
        o.stderr.is_empty(),
        "stderr is a pipe: no progress bar expected, got {}",
        stderr(&o)
    );
}

/// A trade input estimated to need more memory than allowed is refused
/// before reading, naming the file, the estimate and the way out.
#[test]
fn input_larger_than_the_memory_budget_is_refused_up_front() {
    let o = common::demo("check")
        .args(["--max-memory", "8M"])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let e = stderr(&o);
    assert!(
        e.contains("trades.csv") && e.contains("rows need about") && e.contains("--max-memory"),
        "{e}"
    );
    let o = common::demo("check")
        .args(["--max-memory", "4G"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
}

/// The answer sentence names the releases it speaks of when the user
/// narrowed them (it once read the same whatever --tiers said).
#[test]
fn answer_sentence_reflects_the_release_selection() {
    let first_answer = |extra: &[&str]| {
        let o = common::demo("analyze")
            .args(["--placebo", "0", "--bootstrap", "0"])
            .args(extra)
            .env("NO_COLOR", "1")
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&o.stdout).into_owned();
        text.lines()
            .find(|l| l.contains("were exposed to"))
            .unwrap()
            .to_string()
    };
    assert!(first_answer(&[]).contains(" used releases and made "));
    let narrowed = first_answer(&[
        "--tiers",
        "high",
        "--window-title",
        "(?i)payroll=30/90",
        "--window-category",
        "rates=off",
    ]);
    assert!(narrowed.contains("used releases (tiers high; category rates off; titles matching '(?i)payroll' 30/90) and made"), "{narrowed}");
}

/// `--run p07` gives the figures of a file holding only run p07.
#[test]
fn run_flag_equals_a_file_of_that_run() {
    let dir = tempfile::tempdir().unwrap();
    let demo = std::fs::read_to_string(common::root().join("demo/trades.csv")).unwrap();
    let mut lines = demo.lines();
    let mut only = format!("{}\n", lines.next().unwrap());
    for l in lines.filter(|l| l.starts_with("p07,")) {
        only.push_str(l);
        only.push('\n');
    }
    let p07 = dir.path().join("p07.csv");
    std::fs::write(&p07, only).unwrap();
    let figures = |j: &Value| {
        let mut v = j.clone();
        let m = v.as_object_mut().unwrap();
        m.remove("inputs");
        v
    };
    let a = common::demo("analyze")
        .args([
            "--json",
            "--placebo",
            "19",
            "--bootstrap",
            "20",
            "--run",
            "p07",
        ])
        .output()
        .unwrap();
    assert!(a.status.success(), "{}", stderr(&a));
    let a: Value = serde_json::from_slice(&a.stdout).unwrap();
    assert_eq!(
        a["inputs"]["trades"]["runs_selected"],
        serde_json::json!(["p07"])
    );
    let cmd = common::demo("analyze");
    let args: Vec<std::ffi::OsString> = cmd.get_args().map(|s| s.to_owned()).collect();
    let mut b = Command::new(env!("CARGO_BIN_EXE_eventfence"));
    for (k, arg) in args.iter().enumerate() {
        if k > 0 && args[k - 1] == "--trades" {
            b.arg(&p07);
        } else {
            b.arg(arg);
        }
    }
    let b = b
        .args(["--json", "--placebo", "19", "--bootstrap", "20"])
        .output()
        .unwrap();
    assert!(b.status.success(), "{}", stderr(&b));
    let b: Value = serde_json::from_slice(&b.stdout).unwrap();
    assert_eq!(figures(&a), figures(&b));
    assert_eq!(a["runs"].as_array().unwrap().len(), 1);
    let e = common::demo("analyze")
        .args(["--run", "p99"])
        .output()
        .unwrap();
    assert_eq!(e.status.code(), Some(1));
    assert!(
        stderr(&e).contains("--run p99: no such run; runs are p01, p02"),
        "{}",
        stderr(&e)
    );
}

/// The across-runs figures of the demo (50 runs), recomputed here from the
/// per-run figures in the same summary: median and quartiles by linear
/// interpolation between order statistics (numpy's default), best and
/// worst, and the share of runs improved without the exposed trades.
#[test]
fn across_runs_spread_matches_the_runs() {
    let o = common::demo("analyze")
        .args(["--json", "--placebo", "0", "--bootstrap", "0"])
        .output()
        .unwrap();
    let j: Value = serde_json::from_slice(&o.stdout).unwrap();
    let runs = j["runs"].as_array().unwrap();
    let quantile = |v: &[f64], p: f64| {
        let h = (v.len() - 1) as f64 * p;
        let (lo, hi) = (h.floor() as usize, h.ceil() as usize);
        v[lo] + (h - lo as f64) * (v[hi] - v[lo])
    };
    for (metric, higher) in [("sharpe", true), ("max_drawdown", false), ("t_stat", true)] {
        let pairs: Vec<(f64, f64)> = runs
            .iter()
            .filter_map(|r| {
                Some((
                    r["scenarios"]["baseline"][metric].as_f64()?,
                    r["scenarios"]["removed"][metric].as_f64()?,
                ))
            })
            .collect();
        let mut base: Vec<f64> = pairs.iter().map(|p| p.0).collect();
        base.sort_by(f64::total_cmp);
        let f = j["across_runs"]["figures"]
            .as_array()
            .unwrap()
            .iter()
            .find(|f| f["metric"] == metric)
            .unwrap();
        let close = |a: &Value, b: f64| (a.as_f64().unwrap() - b).abs() < 1e-9 * b.abs().max(1.0);
        assert_eq!(f["runs"].as_u64().unwrap() as usize, pairs.len());
        assert!(
            close(&f["baseline"]["median"], quantile(&base, 0.5)),
            "{metric} median"
        );
        assert!(
            close(&f["baseline"]["q1"], quantile(&base, 0.25)),
            "{metric} q1"
        );
        assert!(
            close(&f["baseline"]["q3"], quantile(&base, 0.75)),
            "{metric} q3"
        );
        let (lo, hi) = (base[0], base[base.len() - 1]);
        assert!(
            close(&f["baseline"]["best"], if higher { hi } else { lo }),
            "{metric} best"
        );
        let improved = pairs
            .iter()
            .filter(|(b, r)| if higher { r > b } else { r < b })
            .count() as f64
            / pairs.len() as f64;
        assert!(close(&f["share_improved"], improved), "{metric} improved");
    }
    let above = runs
        .iter()
        .filter(|r| {
            r["scenarios"]["baseline"]["tcr"]
                .as_f64()
                .is_some_and(|t| t > 12.0)
        })
        .count() as f64;
    let with_tcr = runs
        .iter()
        .filter(|r| r["scenarios"]["baseline"]["tcr"].is_f64())
        .count() as f64;
    assert!(
        (j["across_runs"]["share_above_tcr_threshold_baseline"]
            .as_f64()
            .unwrap()
            - above / with_tcr)
            .abs()
            < 1e-12
    );
}

/// Runs are alternative accounts (the demo's 50 parameter sets): the
/// pooled scenario figures keep what sums over runs (trades, net, gross
/// profit and loss, each equal to the per-run sums) and leave out every
/// account-path figure, which is given per run and across runs instead;
/// the bootstrap keeps only figures that are sums or shares. `--pool`
/// reads the same trades as one account and fills them again.
#[test]
fn runs_are_alternatives_unless_pooled() {
    let json = |extra: &[&str]| -> Value {
        let o = common::demo("analyze")
            .args(["--json", "--placebo", "0", "--bootstrap", "20"])
            .args(extra)
            .output()
            .unwrap();
        serde_json::from_slice(&o.stdout).unwrap()
    };
    let j = json(&[]);
    assert_eq!(j["account_figures"], "per_run");
    let runs = j["runs"].as_array().unwrap();
    assert_eq!(runs.len(), 50);
    for scenario in ["baseline", "removed", "capped"] {
        let m = &j["scenarios"][scenario];
        for path in [
            "max_drawdown",
            "longest_drawdown_days",
            "return_to_drawdown",
            "sharpe",
            "sortino",
            "t_stat",
            "time_in_market",
        ] {
            assert!(m[path].is_null(), "{scenario}.{path} = {}", m[path]);
        }
        // Each run has its own cap, so only trades sum in 'capped'.
        let sums: &[&str] = if scenario == "capped" {
            &["trades"]
        } else {
            &["trades", "net", "gross_profit", "gross_loss"]
        };
        for &sum in sums {
            let total: f64 = runs
                .iter()
                .map(|r| r["scenarios"][scenario][sum].as_f64().unwrap())
                .sum();
            let got = m[sum].as_f64().unwrap();
            assert!(
                (got - total).abs() < 1e-6 * total.abs().max(1.0),
                "{scenario}.{sum}: {got} vs Σ runs {total}"
            );
        }
        assert!(runs[0]["scenarios"][scenario]["sharpe"].is_f64());
    }
    let intervals: Vec<&str> = j["bootstrap"]["intervals"]
        .as_object()
        .unwrap()
        .keys()
        .map(|k| k.as_str())
        .collect();
    assert_eq!(intervals, ["net", "profit_factor", "tcr"]);
    let pooled = json(&["--pool"]);
    assert_eq!(pooled["account_figures"], "pooled");
    assert!(pooled["scenarios"]["baseline"]["sharpe"].is_f64());
    assert!(
        pooled["scenarios"]["removed"]["max_drawdown"]
            .as_f64()
            .unwrap()
            > 0.0
    );
    assert_eq!(
        pooled["scenarios"]["baseline"]["net"],
        j["scenarios"]["baseline"]["net"]
    );
    assert_eq!(
        pooled["bootstrap"]["intervals"].as_object().unwrap().len(),
        5
    );
    // One run picked out is one account.
    let one = json(&["--run", "p07"]);
    assert_eq!(one["account_figures"], "one_account");
    assert!(one["scenarios"]["baseline"]["sharpe"].is_f64());
}

/// `schedule --trades F --run a` writes the windows of the instruments run
/// `a` traded, and no others: a traded EURUSD only, b USDJPY only.
#[test]
fn schedule_for_one_run_covers_its_instruments() {
    let dir = tempfile::tempdir().unwrap();
    let trades = dir.path().join("t.csv");
    std::fs::write(
        &trades,
        "run,opened_at,closed_at,instrument,pnl\n\
         a,2024-03-01T10:00:00Z,2024-03-01T11:00:00Z,EURUSD,5\n\
         b,2024-03-01T10:00:00Z,2024-03-01T11:00:00Z,USDJPY,5\n",
    )
    .unwrap();
    let r = common::root();
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_eventfence"))
        .arg("schedule")
        .arg("--calendar")
        .arg(r.join("calendars/demo-usd.ics"))
        .arg(r.join("calendars/demo-eur.csv"))
        .args(["--calendar-tz", "Europe/Berlin", "--trades"])
        .arg(&trades)
        .args(["--run", "a", "--from", "2024-03-01", "--to", "2024-03-31"])
        .args(["--format", "csv"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    let text = String::from_utf8_lossy(&o.stdout);
    let instruments: std::collections::BTreeSet<&str> = text
        .lines()
        .skip(1)
        .map(|l| l.split(',').next().unwrap())
        .collect();
    assert_eq!(instruments.into_iter().collect::<Vec<_>>(), ["EURUSD"]);
}

/// The rank report lists every run, largest |shift| first, with both
/// ranks, and its chart names the runs that move most.
#[test]
fn rank_report_has_the_run_table_and_names_on_the_chart() {
    let dir = tempfile::tempdir().unwrap();
    let o = common::demo("rank")
        .args(["--json", "--out"])
        .arg(dir.path())
        .output()
        .unwrap();
    let j: Value = serde_json::from_slice(&o.stdout).unwrap();
    let mut runs: Vec<(i64, String)> = j["runs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            (
                r["rank_shift"].as_i64().unwrap(),
                r["run"].as_str().unwrap().to_string(),
            )
        })
        .collect();
    let html = std::fs::read_to_string(dir.path().join("report.html")).unwrap();
    let table = &html[html.find("<h2>Runs</h2>").expect("run table")..];
    assert_eq!(table.matches("<tr>").count(), 51, "header + 50 runs");
    // Rows in order of |shift|, never increasing.
    let shifts: Vec<i64> = table
        .split("<tr>")
        .skip(2)
        .map(|row| {
            let cells: Vec<&str> = row
                .split("<td>")
                .skip(1)
                .map(|c| c.split("</td>").next().unwrap())
                .collect();
            cells[8].parse::<i64>().unwrap()
        })
        .collect();
    assert!(
        shifts.windows(2).all(|w| w[0].abs() >= w[1].abs()),
        "{shifts:?}"
    );
    runs.sort_by_key(|r| -r.0.abs());
    let svg = std::fs::read_to_string(dir.path().join("chart-rank-shift.svg")).unwrap();
    assert!(
        svg.contains(&format!(">\n{}\n<", runs[0].1)),
        "most moved run {} named",
        runs[0].1
    );
}

/// The analyze report shows what the terminal shows for runs: the spread
/// across runs and the per-run table, with the pooled table's note.
#[test]
fn analyze_report_has_the_run_tables() {
    let dir = tempfile::tempdir().unwrap();
    let o = common::demo("analyze")
        .args(["--placebo", "0", "--bootstrap", "0", "--out"])
        .arg(dir.path())
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    let html = std::fs::read_to_string(dir.path().join("report.html")).unwrap();
    let across = &html[html.find("<h2>Across runs</h2>").expect("across runs")..];
    assert!(
        across.contains("<td>sharpe</td><td>50</td>"),
        "sharpe over 50 runs"
    );
    let runs = &html[html.find("<h2>Runs</h2>").expect("run table")..];
    let table = &runs[..runs.find("</table>").unwrap()];
    assert_eq!(table.matches("<tr>").count(), 11, "header + top 10");
    assert!(html.contains("The table pools the trades of 50 alternative runs"));
    // The pooled scenario table has no Sharpe row.
    let scen = &html[html.find("<h2>Scenarios</h2>").unwrap()..];
    let scen = &scen[..scen.find("</table>").unwrap()];
    assert!(!scen.contains("Sharpe"), "{scen}");
}

/// Every `--json` names its layout version and the tz database release the
/// zones came from (chrono-tz's compiled-in IANA release, e.g. "2025b").
#[test]
fn every_json_carries_schema_and_tzdb_versions() {
    let tzdb = |v: &Value| {
        let t = v["tool"]["tzdb_version"]
            .as_str()
            .unwrap_or_default()
            .to_string();
        assert_eq!(v["tool"]["schema_version"], 2, "{}", v["tool"]);
        // IANA releases are a year and a letter.
        assert!(
            t.len() == 5
                && t[..4].parse::<u32>().is_ok_and(|y| y >= 2020)
                && t.as_bytes()[4].is_ascii_lowercase(),
            "{t}"
        );
        t
    };
    let mut seen = Vec::new();
    for (cmd, extra) in [
        ("analyze", &["--placebo", "0", "--bootstrap", "0"][..]),
        ("rank", &[][..]),
        ("tune", &["--pre", "0..15/15", "--post", "0..30/30"][..]),
        ("check", &[][..]),
    ] {
        let o = common::demo(cmd)
            .arg("--json")
            .args(extra)
            .output()
            .unwrap();
        let v: Value = serde_json::from_slice(&o.stdout).unwrap_or_else(|e| panic!("{cmd}: {e}"));
        seen.push(tzdb(&v));
    }
    let r = common::root();
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_eventfence"))
        .arg("schedule")
        .arg("--calendar")
        .arg(r.join("calendars/demo-usd.ics"))
        .args([
            "--currencies",
            "USD",
            "--from",
            "2024-03-01",
            "--to",
            "2024-03-08",
        ])
        .args(["--format", "json"])
        .output()
        .unwrap();
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    seen.push(tzdb(&v));
    seen.dedup();
    assert_eq!(seen.len(), 1, "{seen:?}");
}

/// rank with --stress: every run has its stressed figure and rank (a
/// permutation of 1..=50); ranked by net, the stressed net is the baseline
/// net less 15 per exposed trade (amount:15, fixed sizing: conservation);
/// runs.csv carries the two columns; --scenario stressed sets them beside
/// all trades in the table, and needs --stress.
#[test]
fn rank_ranks_the_stressed_scenario() {
    let dir = tempfile::tempdir().unwrap();
    let o = common::demo("rank")
        .args([
            "--by",
            "net",
            "--stress",
            "amount:15",
            "--distortion-draws",
            "0",
            "--json",
        ])
        .args(["--scenario", "stressed", "--out"])
        .arg(dir.path())
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let j: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(j["compared"], "stressed");
    let runs = j["runs"].as_array().unwrap();
    let mut ranks: Vec<i64> = runs
        .iter()
        .map(|r| r["rank_stressed"].as_i64().unwrap())
        .collect();
    ranks.sort();
    assert_eq!(ranks, (1..=50).collect::<Vec<_>>());
    for r in runs {
        let want =
            r["net_baseline"].as_f64().unwrap() - 15.0 * r["exposed_trades"].as_f64().unwrap();
        let got = r["by_stressed"].as_f64().unwrap();
        assert!((got - want).abs() < 1e-6, "{}: {got} vs {want}", r["run"]);
    }
    // Sorted by the stressed rank.
    let order: Vec<i64> = runs
        .iter()
        .map(|r| r["rank_stressed"].as_i64().unwrap())
        .collect();
    assert!(order.windows(2).all(|w| w[0] < w[1]));
    let csv = std::fs::read_to_string(dir.path().join("runs.csv")).unwrap();
    assert!(
        csv.lines()
            .next()
            .unwrap()
            .ends_with(",placebo_p,in_top_baseline,in_top_removed,by_stressed,rank_stressed")
    );
    let o = common::demo("rank")
        .args(["--scenario", "stressed"])
        .output()
        .unwrap();
    assert!(!o.status.success());
    assert!(String::from_utf8_lossy(&o.stderr).contains("--scenario stressed needs --stress"));
}

/// `eventfence man` prints a roff manual page from the clap definitions,
/// naming every subcommand; every subcommand takes the common --quiet.
#[test]
fn man_page_and_common_flags() {
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_eventfence"))
        .arg("man")
        .output()
        .unwrap();
    assert!(o.status.success());
    let page = String::from_utf8(o.stdout).unwrap();
    assert!(
        page.contains(".TH eventfence 1"),
        "{}",
        &page[..200.min(page.len())]
    );
    for sub in ["analyze", "check", "rank", "schedule", "tune"] {
        assert!(page.contains(sub), "man page lacks {sub}");
    }
    let root = common::root();
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_eventfence"))
        .args([
            "schedule",
            "--quiet",
            "--currencies",
            "USD",
            "--from",
            "2024-03-01",
        ])
        .args(["--to", "2024-03-08", "--calendar"])
        .arg(root.join("calendars/demo-usd.ics"))
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}
