//! Charts and report from the demo: every SVG parses as XML and holds the
//! expected series and labels; report.html is self-contained and small.

mod common;

use std::path::Path;

fn demo(cmd: &str, out: &Path, extra: &[&str]) {
    let o = common::demo(cmd)
        .arg("--out")
        .arg(out)
        .args(extra)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

fn svg(path: &Path) -> String {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    roxmltree::Document::parse(&text)
        .unwrap_or_else(|e| panic!("{} is not well-formed XML: {e}", path.display()));
    text
}

/// A JSON file the run wrote.
fn json_file(path: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

fn texts(svg: &str) -> Vec<String> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text().map(|t| t.trim().to_string()))
        .collect()
}

fn count(svg: &str, tag: &str, stroke: &str) -> usize {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| {
            n.has_tag_name(tag)
                && (n.attribute("stroke") == Some(stroke) || n.attribute("fill") == Some(stroke))
        })
        .count()
}

#[test]
fn every_chart_renders_with_its_series() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("a");
    demo(
        "analyze",
        &out,
        &["--placebo", "19", "--bootstrap", "20", "--png"],
    );
    for id in ["tail", "equity", "by-category", "by-currency", "scatter"] {
        // PNG signature, then the IHDR width (760 px) as a big-endian u32.
        let png = std::fs::read(out.join(format!("chart-{id}.png"))).unwrap();
        assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n", "{id}");
        assert_eq!(
            u32::from_be_bytes(png[16..20].try_into().unwrap()),
            760,
            "{id}"
        );
    }
    let tail = svg(&out.join("chart-tail.svg"));
    let t = texts(&tail);
    for label in ["baseline", "removed", "exposed trade"] {
        assert!(
            t.iter().any(|x| x == label),
            "tail chart lacks legend '{label}'"
        );
    }
    assert!(t.iter().any(|x| x.starts_with("Sorted |P/L|: TCR")));
    // Two curves (plus their legend swatches) in the scenario colours.
    assert!(count(&tail, "polyline", "#1B4F8A") >= 1 && count(&tail, "polyline", "#23947C") >= 1);
    let eq = svg(&out.join("chart-equity.svg"));
    for (label, colour) in [
        ("baseline", "#1B4F8A"),
        ("removed", "#23947C"),
        ("capped", "#A878D8"),
    ] {
        assert!(
            texts(&eq).iter().any(|x| x == label),
            "equity lacks {label}"
        );
        assert!(
            count(&eq, "polyline", colour) >= 1,
            "equity lacks the {label} curve"
        );
    }
    let summary = json_file(&out.join("summary.json"));
    let cats = summary["attribution"]["by_category"].as_object().unwrap();
    let bars = svg(&out.join("chart-by-category.svg"));
    let bar_count = count(&bars, "rect", "#1B4F8A") + count(&bars, "rect", "#70438F");
    assert_eq!(bar_count, cats.len(), "one bar per category");
    for k in cats.keys() {
        assert!(texts(&bars).iter().any(|x| x == k), "bar label {k}");
    }
    let curs = summary["attribution"]["by_currency"].as_object().unwrap();
    let bars = svg(&out.join("chart-by-currency.svg"));
    assert_eq!(
        count(&bars, "rect", "#1B4F8A") + count(&bars, "rect", "#70438F"),
        curs.len()
    );
    let sc = svg(&out.join("chart-scatter.svg"));
    assert!(
        texts(&sc).iter().any(|x| x == "exposed") && texts(&sc).iter().any(|x| x == "not exposed")
    );

    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(
        html.len() < 2 * 1024 * 1024,
        "report.html is {} bytes",
        html.len()
    );
    // Five analysis charts, and with the demo's runs the rank chart.
    assert_eq!(html.matches("<svg").count(), 6);
    let rk = svg(&out.join("chart-rank-shift.svg"));
    assert_eq!(
        count(&rk, "circle", "#1B4F8A") + count(&rk, "polygon", "#DC9A26"),
        50 + 2,
        "one point per run plus two legend swatches"
    );
    for needle in ["<script", "src=", "href=", "@import", "url("] {
        assert!(
            !html.contains(needle),
            "report.html must not reference anything external ({needle})"
        );
    }
    assert!(
        html.contains("not investment advice")
            && html.contains("Rejected rows")
            && html.contains("Scenarios")
    );

    let out = dir.path().join("r");
    demo("rank", &out, &[]);
    let rk = svg(&out.join("chart-rank-shift.svg"));
    // Runs in either top 10 (from runs.csv's ranks) are triangles, the
    // others circles; each kind has one legend swatch more.
    let runs = std::fs::read_to_string(out.join("runs.csv")).unwrap();
    let header: Vec<&str> = runs.lines().next().unwrap().split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let (rb, rr) = (col("rank_baseline"), col("rank_removed"));
    let in_top = runs
        .lines()
        .skip(1)
        .filter(|l| {
            let f: Vec<&str> = l.split(',').collect();
            f[rb].parse::<usize>().unwrap() <= 10 || f[rr].parse::<usize>().unwrap() <= 10
        })
        .count();
    assert!((10..=20).contains(&in_top), "{in_top} runs in a top 10");
    assert_eq!(
        count(&rk, "circle", "#1B4F8A"),
        50 - in_top + 1,
        "one point per run outside the top sets plus the legend swatch"
    );
    assert_eq!(
        count(&rk, "polygon", "#DC9A26"),
        in_top + 1,
        "one triangle per run in a top 10 plus the legend swatch"
    );
    let out = dir.path().join("t");
    demo("tune", &out, &["--pre", "0..30/15", "--post", "0..60/30"]);
    let hm = svg(&out.join("chart-tune.svg"));
    let tune = json_file(&out.join("tune.json"));
    let frontier = tune["cells"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|c| c["frontier"] == true)
        .count();
    assert!(frontier > 0);
    assert_eq!(
        count(&hm, "rect", "#DC9A26"),
        frontier,
        "frontier cells outlined"
    );
}

/// rank's tail-shape chart: by default the top 3 runs with all trades and
/// the top 3 without the exposed ones (from runs.csv's ranks), each a line
/// named in the legend; `--curves` picks the runs; each curve is the run's
/// sorted |P/L| over its mean, so it starts at max |P/L| ÷ mean |P/L|.
#[test]
fn rank_overlays_the_tail_shapes_it_is_asked_for() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("r");
    demo("rank", &out, &["--distortion-draws", "0"]);
    let runs = std::fs::read_to_string(out.join("runs.csv")).unwrap();
    let header: Vec<&str> = runs.lines().next().unwrap().split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let rows: Vec<Vec<&str>> = runs
        .lines()
        .skip(1)
        .map(|l| l.split(',').collect())
        .collect();
    let top = |c: usize| -> Vec<String> {
        let mut v: Vec<&Vec<&str>> = rows.iter().collect();
        v.sort_by_key(|r| r[c].parse::<usize>().unwrap());
        v.iter().take(3).map(|r| r[0].to_string()).collect()
    };
    let mut want = top(col("rank_baseline"));
    for r in top(col("rank_removed")) {
        if !want.contains(&r) {
            want.push(r);
        }
    }
    let shapes = svg(&out.join("chart-tail-shapes.svg"));
    let labels = texts(&shapes);
    for r in &want {
        assert!(labels.contains(r), "legend names {r}: {labels:?}");
    }
    assert!(labels.iter().any(|t| t == "tail threshold 12"));
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(html.contains("Tail shapes"));

    let out = dir.path().join("c");
    demo(
        "rank",
        &out,
        &["--distortion-draws", "0", "--curves", "p07,p12"],
    );
    let labels = texts(&svg(&out.join("chart-tail-shapes.svg")));
    let runs_named: Vec<&String> = labels
        .iter()
        .filter(|t| t.starts_with('p') && t.len() == 3)
        .collect();
    assert_eq!(runs_named, vec!["p07", "p12"]);

    for (extra, message) in [
        (vec!["--curves", "p99"], "--curves: no run 'p99'"),
        (vec!["--curves", "p07", "--no-out"], "give --out"),
    ] {
        let mut cmd = common::demo("rank");
        if extra.last() == Some(&"--no-out") {
            cmd.args(&extra[..extra.len() - 1]);
        } else {
            cmd.arg("--out").arg(dir.path().join("e")).args(&extra);
        }
        let o = cmd.output().unwrap();
        assert!(!o.status.success());
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(err.contains(message), "{err}");
    }
}

/// With --stress the stressed scenario is drawn wherever the others are:
/// its equity curve (its own colour, named in the legend), its column in
/// the report's scenario table and its tail line.
#[test]
fn stressed_scenario_in_the_charts_and_report() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("s");
    demo(
        "analyze",
        &out,
        &["--placebo", "0", "--bootstrap", "0", "--stress", "pct:20"],
    );
    let eq = svg(&out.join("chart-equity.svg"));
    assert!(texts(&eq).iter().any(|x| x == "stressed"));
    // The curve and its legend swatch in the fourth scenario colour.
    assert!(count(&eq, "polyline", "#DC9A26") + count(&eq, "path", "#DC9A26") >= 2);
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(html.contains("<th>stressed</th>") && html.contains("<th>Δ stressed</th>"));
    let summary = json_file(&out.join("summary.json"));
    assert!(summary["tail"]["stressed"]["tcr"].is_number());
    assert!(summary["scenarios"]["stressed"]["net"].is_number());
}

/// The equity chart's time axis is in dates: its labels are the months
/// from the demo's first close (January 2021) to its last (2024), in
/// order, under "close date (UTC)".
#[test]
fn equity_time_axis_is_in_dates() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("a");
    demo("analyze", &out, &["--placebo", "0", "--bootstrap", "0"]);
    let eq = texts(&svg(&out.join("chart-equity.svg")));
    assert!(eq.iter().any(|t| t == "close date (UTC)"), "{eq:?}");
    assert!(!eq.iter().any(|t| t.contains("days since")));
    let months: Vec<&String> = eq
        .iter()
        .filter(|t| {
            t.len() == 7
                && t.as_bytes()[4] == b'-'
                && t[..4].parse::<u32>().is_ok()
                && t[5..].parse::<u32>().is_ok_and(|m| (1..=12).contains(&m))
        })
        .collect();
    assert!(months.len() >= 4, "{eq:?}");
    assert!(months.windows(2).all(|w| w[0] < w[1]), "{months:?}");
    assert!(months[0].as_str() >= "2021-01" && months.last().unwrap().as_str() <= "2025-01");
}

/// The tune heat map carries its colour scale: a labelled gradient from
/// the grid's least to its greatest TCR reduction (tune.json's cells).
#[test]
fn tune_heat_map_has_a_colour_scale() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("t");
    demo("tune", &out, &["--pre", "0..30/15", "--post", "0..60/30"]);
    let hm = svg(&out.join("chart-tune.svg"));
    let t = texts(&hm);
    assert!(t.iter().any(|x| x == "TCR reduction"), "{t:?}");
    let tune = json_file(&out.join("tune.json"));
    let reductions: Vec<f64> = tune["cells"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|c| c["tcr_reduction"].as_f64())
        .collect();
    let (lo, hi) = reductions
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        });
    // Scale labels are numbers inside [lo, hi] (plus the range's margin).
    let labels: Vec<f64> = t.iter().filter_map(|x| x.parse::<f64>().ok()).collect();
    let pad = (hi - lo) * 0.1 + 0.01;
    let on_scale = labels
        .iter()
        .filter(|v| **v >= lo - pad && **v <= hi + pad && v.fract() != 0.0)
        .count();
    assert!(
        on_scale >= 2,
        "scale labels {labels:?} for range {lo}..{hi}"
    );
    // 9 cells + 48 scale steps, all filled rectangles.
    let doc = roxmltree::Document::parse(&hm).unwrap();
    let filled = doc
        .descendants()
        .filter(|n| n.has_tag_name("rect") && n.attribute("fill").is_some_and(|f| f != "none"))
        .count();
    assert!(filled >= 9 + 48, "{filled} filled rectangles");
}

/// A bar chart shows no row for a group with nothing attributed: one run
/// (p01) with one-minute windows leaves categories and currencies untouched.
#[test]
fn bar_charts_have_no_empty_rows() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("a");
    demo(
        "analyze",
        &out,
        &[
            "--placebo",
            "0",
            "--bootstrap",
            "0",
            "--run",
            "p01",
            "--window",
            "high=0/1",
            "--window",
            "medium=0/1",
        ],
    );
    let summary = json_file(&out.join("summary.json"));
    let cats = summary["attribution"]["by_category"].as_object().unwrap();
    let nonzero: Vec<&String> = cats
        .iter()
        .filter(|(_, g)| g["attributed_pnl"].as_f64() != Some(0.0))
        .map(|(k, _)| k)
        .collect();
    assert!(nonzero.len() < cats.len(), "the case has an empty group");
    let bars = svg(&out.join("chart-by-category.svg"));
    assert_eq!(
        count(&bars, "rect", "#1B4F8A") + count(&bars, "rect", "#70438F"),
        nonzero.len()
    );
    let t = texts(&bars);
    for (k, g) in cats {
        let shown = t.iter().any(|x| x == k);
        assert_eq!(shown, g["attributed_pnl"].as_f64() != Some(0.0), "{k}");
    }
    // Only USD has attributed P/L here: one bar, three currencies left out.
    let curs = texts(&svg(&out.join("chart-by-currency.svg")));
    assert!(curs.iter().any(|x| x == "USD"));
    assert!(!curs.iter().any(|x| x == "EUR" || x == "GBP" || x == "JPY"));
}
