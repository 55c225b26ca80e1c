//! Terminal tables (comfy-table). Plain text, no colour codes, so output is
//! the same on a terminal, in a pipe, and under NO_COLOR.

use super::text::*;
use crate::report::check::CheckReport;
use crate::report::summary::Summary;
use crate::report::types::AccountFigures;
use crate::report::types::Tier;
use comfy_table::{
    Cell, CellAlignment, ContentArrangement, ContentLineStyle, LineStyle, Table, TableStyle,
};
use std::fmt::Write;

/// House look: a rule under the header, columns two spaces apart.
const STYLE: TableStyle = TableStyle::new()
    .header_separator(LineStyle::new('─', '─', '─', '─'))
    .header_lines(ContentLineStyle::new(' ', ' ', ' '))
    .content_lines(ContentLineStyle::new(' ', ' ', ' '));

/// A table in the house look.
pub fn new_table(header: &[&str]) -> Table {
    let mut t = Table::new();
    t.load_style(STYLE)
        .set_content_arrangement(ContentArrangement::Dynamic)
        .set_width(100)
        .set_header(header.iter().map(Cell::new));
    t
}

/// A right-aligned cell.
pub fn num(s: impl ToString) -> Cell {
    Cell::new(s.to_string()).set_alignment(CellAlignment::Right)
}

pub fn check(r: &CheckReport) -> String {
    let mut out = String::new();
    if let Some(t) = &r.trades {
        let i = &t.import;
        let _ = writeln!(out, "Trades: {} file(s)", i.files.len());
        let _ = writeln!(
            out,
            "  rows read {}, imported {}, rejected {}",
            i.rows_read, i.rows_imported, i.log.rows_rejected
        );
        let _ = writeln!(out, "  P/L per trade = {}", i.pnl_formed_as);
        if let (Some(u), Some(z)) = (&t.span_utc, &t.span_input_zone) {
            let _ = writeln!(out, "  span (UTC)        {} → {}", u[0], u[1]);
            if t.input_zone.to_string() != "UTC" {
                let _ = writeln!(out, "  span ({})  {} → {}", t.input_zone, z[0], z[1]);
            }
        }
        if t.runs > 0 {
            let _ = writeln!(out, "  parameter sets (runs): {}", t.runs);
        }
        for c in &i.time_columns {
            let file = if i.files.len() > 1 {
                format!("{}: ", c.file)
            } else {
                String::new()
            };
            let _ = writeln!(
                out,
                "  {file}{} from '{}': {}",
                c.field, c.column, c.read_as
            );
        }
        let mut tab = new_table(&["instrument", "trades", "currencies", "from"]);
        for l in &t.instruments {
            let c = &l.currencies;
            tab.add_row(vec![
                Cell::new(&c.instrument),
                num(l.trades),
                Cell::new(if c.currencies.is_empty() {
                    "—".to_string()
                } else {
                    c.currencies.join(" ")
                }),
                Cell::new(format!("{:?}", c.source).to_lowercase()),
            ]);
        }
        let _ = writeln!(out, "{tab}");
        rejections(
            &mut out,
            &i.log.rejected_by_reason,
            i.log
                .rejections
                .iter()
                .map(|r| format!("{} row {}: {}: {}", r.file, r.row, r.field, r.message)),
        );
    }
    if let Some(c) = &r.calendar {
        let i = &c.import;
        let _ = writeln!(out, "\nCalendar: {} file(s)", i.files.len());
        let _ = writeln!(
            out,
            "  rows/events read {}, releases {} ({} from recurrence), duplicates merged {}, rejected {}",
            i.rows_read,
            i.releases,
            i.recurrences_expanded,
            i.duplicates_merged,
            i.log.rows_rejected
        );
        if let Some(s) = &c.span_utc {
            let _ = writeln!(out, "  span (UTC)  {} → {}", s[0], s[1]);
        }
        if i.occurrences_moved + i.occurrences_cancelled > 0 {
            let _ = writeln!(
                out,
                "  instances: {} occurrence(s) moved, {} cancelled (RECURRENCE-ID)",
                i.occurrences_moved, i.occurrences_cancelled
            );
        }
        if i.components_skipped > 0 {
            let _ = writeln!(
                out,
                "  {} component(s) not used (to-dos, journals, alarms…) passed over",
                i.components_skipped
            );
        }
        for n in &i.notes {
            let _ = writeln!(out, "  note: {n}");
        }
        let mut tab = new_table(&["currency", "high", "medium", "low", "total"]);
        for (cur, tiers) in &c.releases_by_currency {
            let g = |t| tiers.get(&t).copied().unwrap_or(0);
            tab.add_row(vec![
                Cell::new(cur),
                num(g(Tier::High)),
                num(g(Tier::Medium)),
                num(g(Tier::Low)),
                num(tiers.values().sum::<usize>()),
            ]);
        }
        let _ = writeln!(out, "{tab}");
        if c.all_day_releases > 0 {
            let _ = writeln!(
                out,
                "  {} all-day release(s): ignored by analyses unless --all-day is given",
                c.all_day_releases
            );
        }
        rejections(
            &mut out,
            &i.log.rejected_by_reason,
            i.log
                .rejections
                .iter()
                .map(|r| format!("{} row {}: {}: {}", r.file, r.row, r.field, r.message)),
        );
    }
    for p in &r.problems {
        let _ = writeln!(out, "\nProblem: {p}");
    }
    let _ = writeln!(out, "\n{}", r.caution);
    out
}

fn rejections(
    out: &mut String,
    by_reason: &std::collections::BTreeMap<String, usize>,
    lines: impl Iterator<Item = String>,
) {
    if by_reason.is_empty() {
        return;
    }
    let _ = writeln!(out, "  rejected rows by reason:");
    for (reason, n) in by_reason {
        let _ = writeln!(out, "    {reason:<24} {n}");
    }
    let _ = writeln!(out, "  first rejected rows:");
    for l in lines.take(20) {
        let _ = writeln!(out, "    {l}");
    }
}

pub fn analyze(s: &Summary) -> String {
    let mut out = String::new();
    analyze_header(s, &mut out);
    let _ = writeln!(out, "\n{}\n", headline_sentence(s));
    let h = &s.headline;
    let _ = writeln!(
        out,
        "Exposed trades: {} of net, {} of gross profit, {} of gross loss, {} of trades. Cap for 'capped': {}.\n",
        pct(h.share_of_net),
        pct(h.share_of_gross_profit),
        pct(h.share_of_gross_loss),
        pct(h.share_of_count),
        fmt_opt(s.cap_value, 4)
    );
    scenario_table(s, &mut out);
    out.push_str(&across_runs_text(s));
    if let Some(d) = &s.distortion {
        let _ = writeln!(
            out,
            "Ranked by {}: {}",
            super::label(&d.by),
            super::text::distortion_lines(d)
        );
    }
    let _ = writeln!(out, "{}", chance_text(s));
    if let Some(b) = &s.bootstrap {
        let _ = writeln!(out, "{}", grid(&BOOTSTRAP_HEADER, &bootstrap_rows(b)));
    }
    let _ = writeln!(out);
    attribution_tables(s, &mut out);
    if !s.runs.is_empty() {
        let _ = writeln!(
            out,
            "Runs (top 10 of {} by baseline net; all runs in --json / summary.json):",
            s.runs.len()
        );
        let _ = writeln!(out, "{}", grid(&RUNS_HEADER, &runs_rows(s, 10)));
    }
    let _ = writeln!(out, "{}", s.caution);
    out
}

/// The first lines of `analyze`: input counts and settings, how P/L was
/// formed, and the warnings.
fn analyze_header(s: &Summary, out: &mut String) {
    let _ = writeln!(
        out,
        "eventfence analyze: {} trades{} · {} releases ({} used) · rule {} · windows (min) {} · sizing {} · days in {}",
        s.exposure.trades,
        if s.runs.is_empty() {
            String::new()
        } else {
            format!(" in {} runs", s.runs.len())
        },
        s.inputs.calendar.releases,
        s.exposure.releases_used,
        super::label(&s.settings.exposure_rule),
        super::windows_text(&s.settings.windows),
        super::label(&s.settings.scenario.sizing),
        s.settings.report_tz
    );
    let _ = writeln!(out, "P/L per trade = {}", s.inputs.trades.pnl_formed_as);
    for warning in &s.warnings {
        let _ = writeln!(out, "WARNING {warning}");
    }
}

/// The scenario table, with what it leaves to the per-run section.
fn scenario_table(s: &Summary, out: &mut String) {
    let (rows, left_out) = scenario_rows(s);
    let t = grid(&super::text::scenario_header(s), &rows);
    let _ = writeln!(out, "{t}");
    if s.account_figures == AccountFigures::PerRun {
        let _ = writeln!(
            out,
            "The table pools the trades of {} alternative runs: Sharpe, Sortino, drawdowns, return/drawdown,\nt and time in market describe one account, so they are given per run below (--pool reads\nall runs as one account).",
            s.runs.len()
        );
    } else if left_out.contains(&"max drawdown %") {
        let _ = writeln!(
            out,
            "max drawdown % needs the account's equity: --initial-equity, or an equity or return column."
        );
    }
}

/// The releases with the largest attributed P/L, then the attribution by
/// category, currency and tier.
fn attribution_tables(s: &Summary, out: &mut String) {
    let mut top: Vec<&crate::report::types::ReleaseLine> = s
        .attribution
        .by_release
        .iter()
        .filter(|r| r.trades_touched > 0)
        .collect();
    top.sort_by(|a, b| b.attributed_pnl.abs().total_cmp(&a.attributed_pnl.abs()));
    if !top.is_empty() {
        let _ = writeln!(out, "Releases with the largest attributed P/L:");
        let mut t = new_table(&[
            "released (UTC)",
            "title",
            "ccy",
            "tier",
            "trades",
            "attributed",
        ]);
        for r in top.iter().take(10) {
            t.add_row(vec![
                Cell::new(&r.released_at[..16]),
                Cell::new(&r.title),
                Cell::new(&r.currency),
                Cell::new(r.tier),
                num(r.trades_touched),
                num(format!("{:.2}", r.attributed_pnl)),
            ]);
        }
        let _ = writeln!(out, "{t}");
    }
    let series = &s.attribution.by_series;
    if !series.is_empty() {
        let _ = writeln!(
            out,
            "Series (top 10 of {} by |attributed P/L|; all in --json / summary.json):",
            series.len()
        );
        let mut t = new_table(&[
            "series",
            "currency",
            "used",
            "touched",
            "trades",
            "attributed",
            "per release",
        ]);
        for l in series.iter().take(10) {
            t.add_row(vec![
                Cell::new(&l.title),
                Cell::new(&l.currency),
                num(l.releases_used),
                num(l.releases_touched),
                num(l.trades),
                num(format!("{:.2}", l.attributed_pnl)),
                num(l.mean_per_release.map_or("-".into(), |m| format!("{m:.2}"))),
            ]);
        }
        let _ = writeln!(out, "{t}");
    }
    for (name, groups) in [
        ("category", &s.attribution.by_category),
        ("currency", &s.attribution.by_currency),
        ("tier", &s.attribution.by_tier),
    ] {
        let mut t = new_table(&[name, "releases used", "touched", "matches", "attributed"]);
        for (k, g) in groups {
            t.add_row(vec![
                Cell::new(k),
                num(g.releases_used),
                num(g.releases_touched),
                num(g.matches),
                num(format!("{:.2}", g.attributed_pnl)),
            ]);
        }
        let _ = writeln!(out, "{t}");
    }
}

/// The account-path figures as their spread across runs (with runs).
fn across_runs_text(s: &Summary) -> String {
    let mut out = String::new();
    if let Some(d) = &s.across_runs {
        let _ = writeln!(
            out,
            "{}",
            match s.account_figures {
                AccountFigures::Pooled =>
                    "Across runs (the table above reads all runs as one account, --pool):",
                _ =>
                    "Across runs: each run is an alternative account; its account-path figures, spread over runs:",
            }
        );
        let mut t = grid(&ACROSS_HEADER, &across_rows(d));
        // Whole cells only: a number split over two lines misreads.
        t.set_content_arrangement(ContentArrangement::Disabled);
        let _ = writeln!(out, "{t}");
        let _ = writeln!(
            out,
            "Runs above the tail threshold: {} with all trades, {} without the exposed ones.\n",
            pct(d.share_above_tcr_threshold_baseline),
            pct(d.share_above_tcr_threshold_removed)
        );
    }
    out
}

/// The rank table. `width`: the terminal's columns, when known. Cells are
/// never wrapped (a number split over two lines misreads): when the table
/// is wider than the terminal, whole columns are left out (placebo p, then
/// the tail columns, then trades), said in a line, and the rest stays
/// whole; all columns are in --json and runs.csv.
pub fn rank(r: &crate::report::rank::RankReport, width: Option<usize>) -> String {
    let mut out = String::new();
    let by = super::label(&r.by);
    for warning in &r.warnings {
        let _ = writeln!(out, "WARNING {warning}");
    }
    let _ = writeln!(
        out,
        "{} of {} runs ranked by {by} (rank 1 best).",
        r.runs.len(),
        r.runs_total
    );
    for line in super::text::distortion_lines(&r.distortion).lines() {
        let _ = writeln!(out, "{}", wrap(line, 78));
    }
    let stressed = r.compared == crate::analysis::rank::Compared::Stressed;
    let _ = writeln!(
        out,
        "{}",
        if stressed {
            format!(
                "base/str: {by} with all trades / with release-exposed trades charged the stress cost;"
            )
        } else {
            format!("base/rem: {by} with all trades / without release-exposed trades;")
        }
    );
    let _ = writeln!(
        out,
        "exposed: % of the run's trades exposed to a release; shift > 0: the run moves up\nonce release trades are removed."
    );
    let _ = writeln!(
        out,
        "TCR b/r: tail concentration {}. P/L per trade = {}.",
        basis_words(r.tcr_basis),
        r.pnl_formed_as
    );
    if let Some(first) = r.runs.first() {
        let _ = writeln!(
            out,
            "Open one run in full: the same inputs to analyze, with --run {}.\n",
            first.run
        );
    }
    let with_p = r.runs.iter().any(|x| x.placebo_p.is_some());
    let mut header = vec![
        "run", "trades", "exposed", "base", "rem", "TCR b", "TCR r", "rk b", "rk r", "shift",
    ];
    if stressed {
        // Columns 4, 8 and 9 show the stressed scenario.
        header[4] = "str";
        header[8] = "rk s";
    }
    if with_p {
        header.push("p");
    }
    let rows: Vec<Vec<String>> = r
        .runs
        .iter()
        .map(|x| {
            let mut row = vec![
                x.run.clone(),
                x.trades.to_string(),
                x.exposed_share_of_trades
                    .map_or("—".into(), |v| format!("{:.1}", 100.0 * v)),
                fmt_opt(x.by_baseline, 2),
                fmt_opt(
                    if stressed {
                        x.by_stressed
                    } else {
                        x.by_removed
                    },
                    2,
                ),
                fmt_opt(x.tcr_baseline, 1),
                fmt_opt(x.tcr_removed, 1),
                x.rank_baseline.to_string(),
                if stressed {
                    x.rank_stressed.map_or("—".into(), |v| v.to_string())
                } else {
                    x.rank_removed.to_string()
                },
                if stressed {
                    x.rank_stressed.map_or("—".into(), |v| {
                        format!("{:+}", x.rank_baseline as i64 - v as i64)
                    })
                } else {
                    format!("{:+}", x.rank_shift)
                },
            ];
            if with_p {
                row.push(fmt_opt(x.placebo_p, 3));
            }
            row
        })
        .collect();
    let render = |keep: &[usize]| {
        let mut t = new_table(&keep.iter().map(|&k| header[k]).collect::<Vec<_>>());
        t.set_content_arrangement(ContentArrangement::Disabled);
        for row in &rows {
            t.add_row(
                keep.iter()
                    .map(|&k| {
                        if k == 0 {
                            Cell::new(&row[k])
                        } else {
                            num(&row[k])
                        }
                    })
                    .collect::<Vec<_>>(),
            );
        }
        t.to_string()
    };
    let widest = |text: &str| text.lines().map(|l| l.chars().count()).max().unwrap_or(0);
    let mut keep: Vec<usize> = (0..header.len()).collect();
    let mut table = render(&keep);
    let mut dropped = Vec::new();
    // Least needed first: p, TCR r, TCR b, trades.
    for k in [10, 6, 5, 1] {
        match width {
            Some(w) if widest(&table) > w && keep.contains(&k) => {
                keep.retain(|&c| c != k);
                dropped.push(header[k]);
                table = render(&keep);
            }
            _ => {}
        }
    }
    let _ = writeln!(out, "{table}");
    if !dropped.is_empty() {
        let _ = writeln!(
            out,
            "Left out to fit {} columns: {} (all in --json and runs.csv).",
            width.unwrap_or(0),
            dropped.join(", ")
        );
    }
    let _ = writeln!(out, "{}", wrap(r.caution, 78));
    out
}

/// Wraps text at spaces to lines of at most `width` characters.
pub fn wrap(text: &str, width: usize) -> String {
    let mut out = String::new();
    let mut line = 0;
    for word in text.split_whitespace() {
        if line > 0 && line + 1 + word.chars().count() > width {
            out.push('\n');
            line = 0;
        } else if line > 0 {
            out.push(' ');
            line += 1;
        }
        out.push_str(word);
        line += word.chars().count();
    }
    out
}

/// The tail basis in a few words.
fn basis_words(b: crate::report::types::TailBasis) -> &'static str {
    match b {
        crate::report::types::TailBasis::Amount => "on P/L amounts",
        crate::report::types::TailBasis::Return => "on per-trade returns",
    }
}

/// The tune grid as a table (one row per cell), frontier cells marked.
pub fn tune(r: &crate::report::tune::TuneReport, frontier_only: bool) -> String {
    let mut out = String::new();
    for warning in &r.warnings {
        let _ = writeln!(out, "WARNING {warning}");
    }
    let res = &r.result;
    let _ = writeln!(
        out,
        "{} × {} cells; P/L per trade = {}; baseline TCR {}{} ({}); * = on the frontier (most tail reduction for least time blocked).\n",
        res.pre.len(),
        res.post.len(),
        r.pnl_formed_as,
        fmt_opt(res.tcr_baseline, 2),
        if res.account_figures == AccountFigures::PerRun {
            " (median run)"
        } else {
            ""
        },
        basis_words(res.tcr_basis)
    );
    let per_run = res.account_figures == AccountFigures::PerRun;
    if per_run {
        let _ = writeln!(
            out,
            "Runs are alternative accounts: TCR, its reduction, Sharpe and max DD are medians over the\n{} runs of each run's own figure; 'runs TCR↓' is the share of runs whose TCR falls (--pool\nreads all runs as one account).\n",
            res.runs
        );
    }
    let mut header = vec![
        "pre",
        "post",
        "removed",
        "% of net",
        "TCR after",
        "Sharpe after",
        "max DD after",
        "blocked",
    ];
    if per_run {
        header.insert(5, "TCR cut");
        header.push("runs TCR↓");
    }
    let stressed = res.cells.iter().any(|c| c.net_stressed.is_some());
    if stressed {
        header.push("net str");
    }
    header.push("");
    let mut t = new_table(&header);
    if stressed {
        // One column more than 100 characters hold: the table grows
        // rather than split a number across lines.
        t.set_content_arrangement(ContentArrangement::Disabled);
    }
    for c in res.cells.iter().filter(|c| c.frontier || !frontier_only) {
        let mut row = vec![
            num(c.pre_min),
            num(c.post_min),
            num(c.trades_removed),
            num(pct(c.share_of_net_removed)),
            num(fmt_opt(c.tcr_after, 2)),
            num(fmt_opt(c.sharpe_after, 2)),
            num(fmt_opt(c.max_drawdown_after, 2)),
            num(format!("{:.2} %", c.blocked_share * 100.0)),
        ];
        if per_run {
            row.insert(5, num(fmt_opt(c.tcr_reduction, 2)));
            row.push(num(pct(c.runs_tcr_reduced)));
        }
        if stressed {
            row.push(num(fmt_opt(c.net_stressed, 2)));
        }
        row.push(Cell::new(if c.frontier { "*" } else { "" }));
        t.add_row(row);
    }
    let _ = writeln!(out, "{t}");
    let _ = writeln!(out, "{}", wrap(r.caution, 78));
    out
}

/// Tail, placebo and bootstrap findings as text lines (terminal and HTML).
pub fn chance_text(s: &Summary) -> String {
    let mut out = String::new();
    let tail = &s.tail;
    let (what, basis) = match tail.tcr_basis {
        crate::report::types::TailBasis::Amount => ("|P/L|", "on P/L amounts"),
        crate::report::types::TailBasis::Return => (
            "|return|",
            "on per-trade returns (P/L ÷ equity before the trade), since every trade's return is known",
        ),
    };
    let _ = writeln!(
        out,
        "Tail concentration {basis}: mean of the top {} % {what} over mean {what}; threshold {} — {}.",
        tail.p, tail.threshold, tail.threshold_source
    );
    let mut lines = vec![
        ("baseline", &tail.baseline),
        ("removed", &tail.removed),
        ("capped", &tail.capped),
    ];
    if let Some(st) = &tail.stressed {
        lines.push(("stressed", st));
    }
    for (name, l) in lines {
        let _ = writeln!(
            out,
            "  {name:<8} TCR {} ({}){}; Hill tail index {}",
            fmt_opt(l.tcr, 2),
            match l.above_threshold {
                Some(true) => "above threshold: leans on a handful of trades",
                Some(false) => "at or below threshold",
                None => "undefined",
            },
            if l.too_few {
                format!(
                    ", top bucket of {} trade(s) is too few to judge",
                    l.top_bucket
                )
            } else {
                String::new()
            },
            l.hill.map_or("—".to_string(), |h| format!(
                "{:.2} (k = {} of {})",
                h.alpha, h.k, h.n
            )),
        );
    }
    if let Some(p) = &s.placebo {
        let _ = writeln!(
            out,
            "Placebo calendars ({}, seed {}): exposed share of net {} → p = {}; mean exposed − mean unexposed {} → p = {}.",
            p.placebos,
            p.seed,
            pct(p.observed_share),
            fmt_opt(p.p_share, 4),
            fmt_opt(p.observed_mean_diff, 2),
            fmt_opt(p.p_mean_diff, 4)
        );
    }
    if let Some(b) = &s.bootstrap {
        let _ = write!(
            out,
            "Bootstrap ({} resamples, seed {}): {:.0} % intervals of removed − baseline:",
            b.resamples,
            b.seed,
            b.confidence * 100.0
        );
    }
    out
}

/// A terminal table of text rows: the first column as text, the rest
/// right-aligned numbers.
fn grid(header: &[&str], rows: &[Vec<String>]) -> Table {
    let mut t = new_table(header);
    for row in rows {
        t.add_row(
            row.iter()
                .enumerate()
                .map(|(k, v)| if k == 0 { Cell::new(v) } else { num(v) })
                .collect::<Vec<_>>(),
        );
    }
    t
}
