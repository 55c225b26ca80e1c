//! The self-contained HTML report: inline SVG charts, no scripts, no
//! network. Sections: inputs and settings, the headline answer, scenario
//! table, chance tests, charts, top releases, rejected rows, caution.

use super::text::{scenario_header, scenario_rows};
use crate::report::summary::Summary;
use std::fmt::Write;

/// Escapes text for HTML.
pub fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

const STYLE: &str = "body{font-family:sans-serif;max-width:980px;margin:2em auto;color:#222;line-height:1.4}\
h1{font-size:1.5em}h2{font-size:1.2em;margin-top:2em;border-bottom:1px solid #ccc}\
table{border-collapse:collapse;font-size:.9em}td,th{padding:2px 10px;text-align:right}\
td:first-child,th:first-child{text-align:left}tr:nth-child(even){background:#f3f5f8}\
.answer{font-size:1.1em;background:#eef3f9;padding:.8em;border-left:4px solid #1b4f8a}\
.warn{background:#f6f1e4;padding:.5em;border-left:4px solid #a67c00}.caution{font-size:.9em;color:#555;margin-top:3em}\
figure{margin:1.5em 0}figcaption{font-size:.9em;color:#444}";

/// One chart: id, caption, SVG.
/// An HTML table of text rows (escaped).
pub fn table(header: &[&str], rows: &[Vec<String>]) -> String {
    let mut h = String::from("<table><tr>");
    for c in header {
        let _ = write!(h, "<th>{}</th>", esc(c));
    }
    h.push_str("</tr>");
    for row in rows {
        h.push_str("<tr>");
        for c in row {
            let _ = write!(h, "<td>{}</td>", esc(c));
        }
        h.push_str("</tr>");
    }
    h.push_str("</table>");
    h
}

use super::Figure;

pub fn analyze_report(s: &Summary, figures: &[Figure]) -> String {
    let mut h = String::new();
    let _ = write!(
        h,
        "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>eventfence report</title><style>{STYLE}</style></head><body>"
    );
    let _ = write!(h, "<h1>Release exposure report</h1>");
    let _ = write!(
        h,
        "<p class=\"answer\">{}</p>",
        esc(&super::text::headline_sentence(s))
    );
    for w in &s.warnings {
        let _ = write!(h, "<p class=\"warn\">{}</p>", esc(w));
    }
    let _ = write!(h, "<h2>What was read, and how</h2><table>");
    let t = &s.inputs.trades;
    let c = &s.inputs.calendar;
    let rows = [
        ("trade files", t.files.join(", ")),
        (
            "trade rows read / imported / rejected",
            format!(
                "{} / {} / {}",
                t.rows_read, t.rows_imported, t.rows_rejected
            ),
        ),
        ("trade time zone", t.input_tz.clone()),
        ("P/L per trade", t.pnl_formed_as.clone()),
        ("calendar files", c.files.join(", ")),
        (
            "releases / used / touched",
            format!(
                "{} / {} / {}",
                c.releases, s.exposure.releases_used, s.exposure.releases_touched
            ),
        ),
        ("calendar time zone", c.calendar_tz.clone()),
        ("exposure rule", super::label(&s.settings.exposure_rule)),
        (
            "windows (minutes before/after)",
            super::windows_text(&s.settings.windows),
        ),
        ("sizing", super::label(&s.settings.scenario.sizing)),
        (
            "cap for capped scenario",
            super::text::fmt_opt(s.cap_value, 4),
        ),
        ("report zone for days", s.settings.report_tz.to_string()),
    ];
    for (k, v) in rows {
        let _ = write!(h, "<tr><td>{}</td><td>{}</td></tr>", esc(k), esc(&v));
    }
    let _ = write!(h, "</table>");
    let _ = write!(h, "<h2>Scenarios</h2>{}", scenario_html(s));
    if s.account_figures == crate::report::types::AccountFigures::PerRun {
        let _ = write!(
            h,
            "<p>The table pools the trades of {} alternative runs. Sharpe, Sortino, drawdowns, return/drawdown, t and time in market describe one account, so they are given per run, as their spread across runs (--pool reads all runs as one account).</p>",
            s.runs.len()
        );
    }
    if let Some(d) = &s.across_runs {
        let _ = write!(
            h,
            "<h2>Across runs</h2>{}<p>Runs above the tail threshold: {} with all trades, {} without the exposed ones.</p>",
            table(&super::text::ACROSS_HEADER, &super::text::across_rows(d)),
            super::text::pct(d.share_above_tcr_threshold_baseline),
            super::text::pct(d.share_above_tcr_threshold_removed)
        );
    }
    if let Some(d) = &s.distortion {
        let _ = write!(
            h,
            "<p>Ranked by {}: {}</p>",
            esc(&super::label(&d.by)),
            esc(&super::text::distortion_lines(d))
        );
    }
    if !s.runs.is_empty() {
        let _ = write!(
            h,
            "<h2>Runs</h2><p>The top 10 of {} runs by baseline net; every run is in summary.json.</p>{}",
            s.runs.len(),
            table(&super::text::RUNS_HEADER, &super::text::runs_rows(s, 10))
        );
    }
    let _ = write!(
        h,
        "<h2>Is it chance?</h2><p>Does the result lean on a few outsized trades (tail concentration above {} — {}), and would releases on other days have caught as much P/L (placebo p-values: small means the real release times matter)? The bootstrap intervals show how far each change could move by chance alone.</p>",
        s.tail.threshold,
        esc(s.tail.threshold_source)
    );
    let _ = write!(
        h,
        "<h3>Tail per scenario, {}</h3>{}",
        match s.tail.tcr_basis {
            crate::report::types::TailBasis::Amount => "on P/L amounts",
            crate::report::types::TailBasis::Return =>
                "on per-trade returns (P/L ÷ equity before the trade), since every trade's return is known",
        },
        table(&super::text::TAIL_HEADER, &super::text::tail_rows(s))
    );
    if let Some(p) = &s.placebo {
        let _ = write!(
            h,
            "<h3>Placebo calendars ({}, seed {})</h3>{}",
            p.placebos,
            p.seed,
            table(&super::text::PLACEBO_HEADER, &super::text::placebo_rows(p))
        );
    }
    if let Some(b) = &s.bootstrap {
        let _ = write!(
            h,
            "<h3>Bootstrap ({} resamples, seed {}): {:.0} % intervals of removed − baseline</h3>{}",
            b.resamples,
            b.seed,
            b.confidence * 100.0,
            table(
                &super::text::BOOTSTRAP_HEADER,
                &super::text::bootstrap_rows(b)
            )
        );
    }
    let _ = write!(h, "<h2>Charts</h2>");
    for f in figures {
        let _ = write!(
            h,
            "<figure id=\"{}\">{}<figcaption>{}</figcaption></figure>",
            f.id,
            strip_xml_decl(&f.svg),
            esc(&f.caption)
        );
    }
    let _ = write!(
        h,
        "<h2>Releases with the largest attributed P/L</h2><table><tr><th>released (UTC)</th><th>title</th><th>currency</th><th>tier</th><th>trades</th><th>attributed</th></tr>"
    );
    let mut top: Vec<_> = s
        .attribution
        .by_release
        .iter()
        .filter(|r| r.trades_touched > 0)
        .collect();
    top.sort_by(|a, b| b.attributed_pnl.abs().total_cmp(&a.attributed_pnl.abs()));
    for r in top.iter().take(15) {
        let _ = write!(
            h,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{:.2}</td></tr>",
            esc(&r.released_at),
            esc(&r.title),
            esc(&r.currency),
            r.tier,
            r.trades_touched,
            r.attributed_pnl
        );
    }
    let _ = write!(
        h,
        "</table><h2>Series</h2><p>Releases of one currency and title (every monthly report of one kind) taken together; the 15 with the largest |attributed P/L|, all in summary.json.</p><table><tr><th>series</th><th>currency</th><th>releases used</th><th>touched</th><th>trades</th><th>attributed</th><th>per release</th></tr>"
    );
    for l in s.attribution.by_series.iter().take(15) {
        let _ = write!(
            h,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{:.2}</td><td>{}</td></tr>",
            esc(&l.title),
            esc(&l.currency),
            l.releases_used,
            l.releases_touched,
            l.trades,
            l.attributed_pnl,
            l.mean_per_release.map_or("-".into(), |m| format!("{m:.2}"))
        );
    }
    let _ = write!(h, "</table><h2>Rejected rows</h2>");
    if t.rows_rejected + c.rows_rejected == 0 {
        let _ = write!(
            h,
            "<p>None: every trade row and calendar row was imported.</p>"
        );
    } else {
        let _ = write!(
            h,
            "<table><tr><th>input</th><th>reason</th><th>rows</th></tr>"
        );
        for (src, m) in [
            ("trades", &t.rejected_by_reason),
            ("calendar", &c.rejected_by_reason),
        ] {
            for (k, v) in m {
                let _ = write!(h, "<tr><td>{src}</td><td>{}</td><td>{v}</td></tr>", esc(k));
            }
        }
        let _ = write!(h, "</table>");
    }
    let _ = write!(h, "<p class=\"caution\">{}</p>", esc(s.caution));
    let _ = write!(
        h,
        "<p class=\"caution\">{} {}</p></body></html>",
        esc(s.tool.name),
        esc(s.tool.version)
    );
    h
}

fn strip_xml_decl(svg: &str) -> &str {
    match svg.find("<svg") {
        Some(i) => &svg[i..],
        None => svg,
    }
}

/// A page holding charts only (rank and tune reports).
pub fn charts_page(
    title: &str,
    intro: &str,
    warnings: &[String],
    figures: &[Figure],
    tables: &str,
    caution: &str,
) -> String {
    let mut h = format!(
        "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>{}</title><style>{STYLE}</style></head><body><h1>{}</h1><p>{}</p>",
        esc(title),
        esc(title),
        esc(intro)
    );
    for w in warnings {
        let _ = write!(h, "<p class=\"warn\">{}</p>", esc(w));
    }
    for f in figures {
        let _ = write!(
            h,
            "<figure id=\"{}\">{}<figcaption>{}</figcaption></figure>",
            f.id,
            strip_xml_decl(&f.svg),
            esc(&f.caption)
        );
    }
    h.push_str(tables);
    let _ = write!(h, "<p class=\"caution\">{}</p></body></html>", esc(caution));
    h
}

/// The rank report's per-run table: every run, the largest rank shifts
/// first (as given), with the ranking figure and both ranks.
pub fn rank_table(rows: &[crate::report::types::RunRow], by: &str) -> String {
    use super::text::{fmt_opt, pct};
    let header = [
        "run",
        "trades",
        "exposed trades",
        "exposed share of net",
        &format!("{by} with all trades"),
        &format!("{by} without exposed"),
        "rank with all",
        "rank without",
        "shift",
        "TCR with all",
        "TCR without",
        "placebo p",
    ];
    let body: Vec<Vec<String>> = rows
        .iter()
        .map(|r| {
            vec![
                r.run.clone(),
                r.trades.to_string(),
                pct(r.exposed_share_of_trades),
                pct(r.exposed_share_of_net),
                fmt_opt(r.by_baseline, 3),
                fmt_opt(r.by_removed, 3),
                r.rank_baseline.to_string(),
                r.rank_removed.to_string(),
                format!("{:+}", r.rank_shift),
                fmt_opt(r.tcr_baseline, 2),
                fmt_opt(r.tcr_removed, 2),
                fmt_opt(r.placebo_p, 3),
            ]
        })
        .collect();
    let header: Vec<&str> = header.iter().map(|h| h.as_ref()).collect();
    format!(
        "<h2>Runs</h2><p>Every run, the largest rank shifts first; a positive shift means the run moves up once the exposed trades are removed.</p>{}",
        table(&header, &body)
    )
}

/// The scenario table as HTML.
pub fn scenario_html(s: &Summary) -> String {
    table(&scenario_header(s), &scenario_rows(s).0)
}
