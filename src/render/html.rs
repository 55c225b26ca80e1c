//! The self-contained HTML report: inline SVG charts, no scripts, no
//! network. Sections: inputs and settings, the headline answer, scenario
//! table, chance tests, charts, top releases, rejected rows, caution.

use crate::report::Summary;
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
pub struct Figure {
    pub id: &'static str,
    pub caption: String,
    pub svg: String,
}

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
        esc(&super::table::headline_sentence(s))
    );
    for w in &s.warnings {
        let _ = write!(h, "<p class=\"warn\">{}</p>", esc(w));
    }
    let _ = write!(h, "<h2>Inputs and settings</h2><table>");
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
            super::table::fmt_opt(s.cap_value, 4),
        ),
        ("report zone for days", s.settings.report_tz.to_string()),
    ];
    for (k, v) in rows {
        let _ = write!(h, "<tr><td>{}</td><td>{}</td></tr>", esc(k), esc(&v));
    }
    let _ = write!(h, "</table>");
    let _ = write!(h, "<h2>Scenarios</h2>{}", super::table::scenario_html(s));
    let _ = write!(
        h,
        "<h2>Is it chance?</h2><p>{}</p>",
        esc(&super::table::chance_text(s)).replace('\n', "<br>")
    );
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
    let _ = write!(h, "<p class=\"caution\">{}</p></body></html>", esc(caution));
    h
}
