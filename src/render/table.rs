//! Terminal tables (comfy-table). Plain text, no colour codes, so output is
//! the same on a terminal, in a pipe, and under NO_COLOR.

use crate::calendar::Tier;
use crate::cmd::check::CheckReport;
use comfy_table::{Cell, CellAlignment, ContentArrangement, ContentLineStyle, LineStyle, Table, TableStyle};
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
        .set_header(header.iter().map(|h| Cell::new(h)));
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
        let _ = writeln!(out, "  rows read {}, imported {}, rejected {}", i.rows_read, i.rows_imported, i.rows_rejected);
        if let (Some(u), Some(z)) = (&t.span_utc, &t.span_input_zone) {
            let _ = writeln!(out, "  span (UTC)        {} → {}", u[0], u[1]);
            let _ = writeln!(out, "  span ({})  {} → {}", t.input_zone, z[0], z[1]);
        }
        if t.runs > 0 {
            let _ = writeln!(out, "  parameter sets (runs): {}", t.runs);
        }
        let mut tab = new_table(&["instrument", "trades", "currencies", "from"]);
        for l in &t.instruments {
            let c = &l.currencies;
            tab.add_row(vec![
                Cell::new(&c.instrument),
                num(l.trades),
                Cell::new(if c.currencies.is_empty() { "—".to_string() } else { c.currencies.join(" ") }),
                Cell::new(format!("{:?}", c.source).to_lowercase()),
            ]);
        }
        let _ = writeln!(out, "{tab}");
        rejections(&mut out, &i.rejected_by_reason, i.rejections.iter().map(|r| format!("{} row {}: {}: {}", r.file, r.row, r.field, r.message)));
    }
    if let Some(c) = &r.calendar {
        let i = &c.import;
        let _ = writeln!(out, "\nCalendar: {} file(s)", i.files.len());
        let _ = writeln!(
            out,
            "  rows/events read {}, releases {} ({} from recurrence), duplicates merged {}, rejected {}",
            i.rows_read, i.releases, i.recurrences_expanded, i.duplicates_merged, i.rows_rejected
        );
        if let Some(s) = &c.span_utc {
            let _ = writeln!(out, "  span (UTC)  {} → {}", s[0], s[1]);
        }
        let mut tab = new_table(&["currency", "high", "medium", "low", "total"]);
        for (cur, tiers) in &c.releases_by_currency {
            let g = |t| tiers.get(&t).copied().unwrap_or(0);
            tab.add_row(vec![Cell::new(cur), num(g(Tier::High)), num(g(Tier::Medium)), num(g(Tier::Low)), num(tiers.values().sum::<usize>())]);
        }
        let _ = writeln!(out, "{tab}");
        if c.all_day_releases > 0 {
            let _ = writeln!(out, "  {} all-day release(s): ignored by analyses unless --all-day is given", c.all_day_releases);
        }
        rejections(&mut out, &i.rejected_by_reason, i.rejections.iter().map(|r| format!("{} row {}: {}: {}", r.file, r.row, r.field, r.message)));
    }
    for p in &r.problems {
        let _ = writeln!(out, "\nProblem: {p}");
    }
    let _ = writeln!(out, "\n{}", r.caution);
    out
}

fn rejections(out: &mut String, by_reason: &std::collections::BTreeMap<String, usize>, lines: impl Iterator<Item = String>) {
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
