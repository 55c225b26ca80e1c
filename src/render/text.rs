//! Shared wording of the terminal and HTML renderers: number formats, the
//! headline sentence, and every table's header and rows as text (the
//! terminal draws them with comfy-table, the HTML report as `<table>`).

use crate::report::summary::Summary;
use crate::report::types::{AccountFigures, Metrics};

/// Formats an optional figure; `—` for null.
pub fn fmt_opt(v: Option<f64>, decimals: usize) -> String {
    match v {
        Some(x) if x.is_finite() => format!("{x:.decimals$}"),
        _ => "—".into(),
    }
}

pub fn pct(v: Option<f64>) -> String {
    match v {
        Some(x) if x.is_finite() => format!("{:.1} %", x * 100.0),
        _ => "—".into(),
    }
}

fn delta(a: Option<f64>, b: Option<f64>, decimals: usize) -> String {
    match (a, b) {
        (Some(a), Some(b)) if a.is_finite() && b.is_finite() => format!("{:+.decimals$}", b - a),
        _ => "".into(),
    }
}

/// (label, getter, decimals, is_percent)
type Row = (&'static str, fn(&Metrics) -> Option<f64>, usize, bool);

const METRIC_ROWS: &[Row] = &[
    ("trades", |m| Some(m.trades as f64), 0, false),
    ("net", |m| Some(m.net), 2, false),
    ("gross profit", |m| Some(m.gross_profit), 2, false),
    ("gross loss", |m| Some(m.gross_loss), 2, false),
    ("win rate", |m| m.win_rate, 3, true),
    ("profit factor", |m| m.profit_factor, 3, false),
    ("average win", |m| m.avg_win, 2, false),
    ("average loss", |m| m.avg_loss, 2, false),
    ("payoff ratio", |m| m.payoff_ratio, 3, false),
    ("expectancy", |m| m.expectancy, 2, false),
    ("largest win", |m| m.largest_win, 2, false),
    ("largest loss", |m| m.largest_loss, 2, false),
    ("max drawdown", |m| m.max_drawdown, 2, false),
    ("max drawdown %", |m| m.max_drawdown_pct, 3, true),
    (
        "longest drawdown (days)",
        |m| m.longest_drawdown_days,
        1,
        false,
    ),
    ("return / drawdown", |m| m.return_to_drawdown, 3, false),
    ("Sharpe (daily, ann.)", |m| m.sharpe, 3, false),
    ("Sortino (daily, ann.)", |m| m.sortino, 3, false),
    ("t-statistic", |m| m.t_stat, 3, false),
    ("time in market", |m| m.time_in_market, 3, true),
    ("tail concentration", |m| m.tcr, 2, false),
];

/// The one-sentence answer.
/// Which releases the answer speaks of, when the user narrowed or
/// reshaped them (`--tiers`, `--window-category`, `--window-title`,
/// `--all-day`); empty for the defaults.
fn release_scope(w: &crate::report::types::WindowSettings) -> String {
    let mut parts = Vec::new();
    if w.tiers.len() < 3 {
        parts.push(format!(
            "tiers {}",
            w.tiers
                .iter()
                .map(|t| t.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        ));
    }
    let shown = |win: &Option<crate::report::types::Window>| {
        win.map_or("off".to_string(), |x| {
            format!("{}/{}", x.pre_min, x.post_min)
        })
    };
    for (cat, win) in &w.by_category {
        parts.push(format!("category {cat} {}", shown(win)));
    }
    for (re, win) in &w.by_title {
        parts.push(format!("titles matching '{}' {}", re.as_str(), shown(win)));
    }
    if w.include_all_day {
        parts.push("all-day releases included".into());
    }
    if parts.is_empty() {
        String::new()
    } else {
        format!(" ({})", parts.join("; "))
    }
}

/// With alternative runs: the median run's Sharpe before and after.
fn median_sharpe_words(s: &Summary) -> String {
    if s.account_figures != AccountFigures::PerRun {
        return String::new();
    }
    let Some(f) = s
        .across_runs
        .as_ref()
        .and_then(|d| d.figures.iter().find(|f| f.metric == "sharpe"))
    else {
        return String::new();
    };
    format!(
        "; the median run's Sharpe goes from {} to {} (over {} runs)",
        fmt_opt(f.baseline.median, 2),
        fmt_opt(f.removed.median, 2),
        f.runs
    )
}

pub fn headline_sentence(s: &Summary) -> String {
    let h = &s.headline;
    let b = &s.scenarios.baseline;
    let r = &s.scenarios.removed;
    format!(
        "{} of {} trades ({}) were exposed to {} of {} used releases{} and made {:.2}, {} of the net {:.2}; without them profit factor goes from {} to {} and net to {:.2}{}{}.",
        s.exposure.exposed_trades,
        s.exposure.trades,
        pct(h.share_of_count),
        s.exposure.releases_touched,
        s.exposure.releases_used,
        release_scope(&s.settings.windows),
        h.exposed_pnl,
        pct(h.share_of_net),
        h.net,
        fmt_opt(b.profit_factor, 2),
        fmt_opt(r.profit_factor, 2),
        r.net,
        median_sharpe_words(s),
        s.placebo.as_ref().map_or(String::new(), |p| format!(
            "; placebo p = {}",
            fmt_opt(p.p_share, 3)
        ))
    )
}

pub const TAIL_HEADER: [&str; 6] = [
    "scenario",
    "tail concentration",
    "above threshold",
    "top bucket (trades)",
    "Hill tail index",
    "Hill k of n",
];

/// Tail figures per scenario, as text rows (HTML).
pub fn tail_rows(s: &Summary) -> Vec<Vec<String>> {
    let t = &s.tail;
    let mut lines = vec![
        ("baseline", &t.baseline),
        ("removed", &t.removed),
        ("capped", &t.capped),
    ];
    if let Some(st) = &t.stressed {
        lines.push(("stressed", st));
    }
    lines
        .iter()
        .map(|(name, l)| {
            vec![
                name.to_string(),
                fmt_opt(l.tcr, 2),
                match l.above_threshold {
                    Some(true) => "yes".into(),
                    Some(false) => "no".into(),
                    None => "—".into(),
                },
                if l.too_few {
                    format!("{} (too few to judge)", l.top_bucket)
                } else {
                    l.top_bucket.to_string()
                },
                l.hill.map_or("—".into(), |h| format!("{:.2}", h.alpha)),
                l.hill.map_or("—".into(), |h| format!("{} of {}", h.k, h.n)),
            ]
        })
        .collect()
}

pub const PLACEBO_HEADER: [&str; 3] = ["statistic", "observed", "p-value"];

/// The placebo test's two statistics, as text rows (HTML).
pub fn placebo_rows(p: &crate::report::types::PlaceboResult) -> Vec<Vec<String>> {
    vec![
        vec![
            "exposed share of net".into(),
            pct(p.observed_share),
            fmt_opt(p.p_share, 4),
        ],
        vec![
            "mean exposed − mean unexposed P/L".into(),
            fmt_opt(p.observed_mean_diff, 2),
            fmt_opt(p.p_mean_diff, 4),
        ],
    ]
}

pub const BOOTSTRAP_HEADER: [&str; 4] = ["figure", "change", "low", "high"];

/// The bootstrap intervals as text rows (terminal and HTML).
pub fn bootstrap_rows(b: &crate::report::types::BootstrapResult) -> Vec<Vec<String>> {
    b.intervals
        .iter()
        .map(|(name, i)| {
            vec![
                name.replace('_', " "),
                fmt_opt(i.observed, 3),
                fmt_opt(i.low, 3),
                fmt_opt(i.high, 3),
            ]
        })
        .collect()
}

pub const SCENARIO_HEADER: [&str; 6] = [
    "figure",
    "baseline",
    "removed",
    "Δ removed",
    "capped",
    "Δ capped",
];

/// The scenario table's header: [`SCENARIO_HEADER`], and the stressed
/// scenario's two columns when there is one.
pub fn scenario_header(s: &Summary) -> Vec<&'static str> {
    let mut h = SCENARIO_HEADER.to_vec();
    if s.scenarios.stressed.is_some() {
        h.extend(["stressed", "Δ stressed"]);
    }
    h
}

/// The scenario table's rows as text, and the labels of the rows this
/// input cannot fill (left out).
pub fn scenario_rows(s: &Summary) -> (Vec<Vec<String>>, Vec<&'static str>) {
    let sc = &s.scenarios;
    let (mut rows, mut left_out) = (Vec::new(), Vec::new());
    for (label, get, dec, is_pct) in METRIC_ROWS {
        let (b, r, c) = (get(&sc.baseline), get(&sc.removed), get(&sc.capped));
        if b.is_none() && r.is_none() && c.is_none() {
            left_out.push(*label);
            continue;
        }
        let f = |v: Option<f64>| if *is_pct { pct(v) } else { fmt_opt(v, *dec) };
        let d = |a: Option<f64>, b: Option<f64>| {
            if *is_pct {
                delta(a.map(|x| x * 100.0), b.map(|x| x * 100.0), 1)
            } else {
                delta(a, b, *dec)
            }
        };
        let mut row = vec![label.to_string(), f(b), f(r), d(b, r), f(c), d(b, c)];
        if let Some(st) = &sc.stressed {
            let v = get(st);
            row.extend([f(v), d(b, v)]);
        }
        rows.push(row);
    }
    (rows, left_out)
}

pub const RUNS_HEADER: [&str; 9] = [
    "run",
    "trades",
    "exposed",
    "net",
    "net removed",
    "PF",
    "PF removed",
    "TCR",
    "TCR removed",
];

/// The first `top` runs by baseline net, as text rows.
pub fn runs_rows(s: &Summary, top: usize) -> Vec<Vec<String>> {
    let mut runs: Vec<&crate::report::types::RunResult> = s.runs.iter().collect();
    runs.sort_by(|a, b| {
        b.scenarios
            .baseline
            .net
            .total_cmp(&a.scenarios.baseline.net)
    });
    runs.iter()
        .take(top)
        .map(|r| {
            let (b, m) = (&r.scenarios.baseline, &r.scenarios.removed);
            vec![
                r.run.clone(),
                r.trades.to_string(),
                r.exposed_trades.to_string(),
                format!("{:.2}", b.net),
                format!("{:.2}", m.net),
                fmt_opt(b.profit_factor, 2),
                fmt_opt(m.profit_factor, 2),
                fmt_opt(b.tcr, 1),
                fmt_opt(m.tcr, 1),
            ]
        })
        .collect()
}

pub const ACROSS_HEADER: [&str; 11] = [
    "figure",
    "runs",
    "median",
    "q1",
    "q3",
    "best",
    "worst",
    "median rem",
    "q1 rem",
    "q3 rem",
    "improved",
];

/// The spread of each account-path figure across runs, as text rows.
pub fn across_rows(d: &crate::report::types::RunDistribution) -> Vec<Vec<String>> {
    d.figures
        .iter()
        .map(|f| {
            let v = |x: Option<f64>| fmt_opt(x, 2);
            vec![
                f.metric.replace('_', " "),
                f.runs.to_string(),
                v(f.baseline.median),
                v(f.baseline.q1),
                v(f.baseline.q3),
                v(f.baseline.best),
                v(f.baseline.worst),
                v(f.removed.median),
                v(f.removed.q1),
                v(f.removed.q3),
                pct(f.share_improved),
            ]
        })
        .collect()
}

/// The distortion block: rank agreement, the top-k sets, and the random
/// removal reference (docs/method.md §10), one sentence each.
pub fn distortion_lines(d: &crate::analysis::distortion::Distortion) -> String {
    let mut out = String::new();
    let num = |v: Option<f64>| v.map_or("-".to_string(), |x| format!("{x:.3}"));
    let names = |v: &[String]| {
        if v.is_empty() {
            "none".to_string()
        } else {
            v.join(", ")
        }
    };
    out.push_str(&format!(
        "Reordering without the exposed trades: Spearman rho {}, Kendall tau-b {} over {} runs (1 = same order); top {}: {} in both, left: {}, entered: {}.\n",
        num(d.spearman_rho),
        num(d.kendall_tau_b),
        d.runs_compared,
        d.top_k,
        d.top_overlap,
        names(&d.left_top),
        names(&d.entered_top)
    ));
    if let Some(r) = &d.random_removal {
        out.push_str(&format!(
            "Removing as many random trades per run instead ({} draws): median rho {}; {} of draws reorder as much or more.\n",
            r.draws,
            num(r.median_rho),
            r.share_rho_at_or_below
                .map_or("-".to_string(), |s| format!("{:.1} %", 100.0 * s))
        ));
    }
    out
}
