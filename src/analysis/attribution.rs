//! Attribution (docs/method.md §3): each exposed trade's P/L split equally over the
//! releases it matched, summed by release, category, currency and tier, and
//! the headline shares.
//!
//! Invariant, checked on every run: baseline net = exposed + unexposed P/L,
//! and the per-release amounts add up to the exposed P/L.

use crate::engine::exposure::Exposure;
use crate::import::calendar::Release;
use serde::Serialize;
use std::collections::BTreeMap;

/// One used release and what it touched.
#[derive(Debug, Clone, Serialize)]
pub struct ReleaseLine {
    /// Release id.
    pub id: String,
    /// Release instant, ISO 8601 UTC.
    pub released_at: String,
    /// Release title.
    pub title: String,
    /// ISO 4217 currency.
    pub currency: String,
    /// Tier (`high`, `medium`, `low`).
    pub tier: &'static str,
    /// Category, when the calendar gives one.
    pub category: Option<String>,
    /// Trades that matched this release.
    pub trades_touched: usize,
    /// Σ pnl ÷ k over those trades.
    pub attributed_pnl: f64,
}

/// A group of releases (a category, currency or tier).
#[derive(Debug, Clone, Default, Serialize)]
pub struct GroupLine {
    /// Releases of the group that count (tier and window).
    pub releases_used: usize,
    /// Of them, releases at least one trade was exposed to.
    pub releases_touched: usize,
    /// Trade–release matches in the group.
    pub matches: usize,
    /// P/L attributed to the group's releases.
    pub attributed_pnl: f64,
}

/// One series: the releases of one currency with one normalised title
/// (every monthly payroll report, say), the unit traders think in.
#[derive(Debug, Clone, Default, Serialize)]
pub struct SeriesLine {
    /// ISO 4217 currency.
    pub currency: String,
    /// The title as the calendar first writes it.
    pub title: String,
    /// Releases of the series that count (tier and window).
    pub releases_used: usize,
    /// Of them, releases at least one trade was exposed to.
    pub releases_touched: usize,
    /// Trades exposed to at least one release of the series.
    pub trades: usize,
    /// P/L attributed to the series' releases.
    pub attributed_pnl: f64,
    /// Attributed P/L ÷ releases used.
    pub mean_per_release: Option<f64>,
}

/// Headline shares.
#[derive(Debug, Clone, Default, Serialize)]
pub struct Headline {
    /// Σ P/L of all trades.
    pub net: f64,
    /// Σ P/L of the exposed trades.
    pub exposed_pnl: f64,
    /// Σ P/L of the other trades.
    pub unexposed_pnl: f64,
    /// exposed P/L ÷ net P/L.
    pub share_of_net: Option<f64>,
    /// exposed winners' P/L ÷ gross profit.
    pub share_of_gross_profit: Option<f64>,
    /// exposed losers' P/L ÷ gross loss.
    pub share_of_gross_loss: Option<f64>,
    /// exposed trades ÷ trades.
    pub share_of_count: Option<f64>,
}

/// Every attribution table of one analysis (docs/method.md §3).
#[derive(Debug, Clone, Default, Serialize)]
pub struct Attribution {
    /// Used releases in time order.
    pub by_release: Vec<ReleaseLine>,
    /// By release category.
    pub by_category: BTreeMap<String, GroupLine>,
    /// By currency.
    pub by_currency: BTreeMap<String, GroupLine>,
    /// By tier.
    pub by_tier: BTreeMap<String, GroupLine>,
    /// By series (currency and normalised title), largest |attributed P/L|
    /// first.
    pub by_series: Vec<SeriesLine>,
    /// Net, exposed and unexposed P/L and the exposed shares.
    pub headline: Headline,
}

#[derive(Debug, thiserror::Error)]
#[error(
    "internal error: P/L not conserved ({what}: {left} vs {right}); please report this with your inputs"
)]
/// Two sums that must agree to the cent did not: a defect, reported rather than hidden.
pub struct ConservationError {
    /// Which sums.
    pub what: &'static str,
    /// The first sum.
    pub left: f64,
    /// The second sum.
    pub right: f64,
}

/// Per-release touched counts and attributed sums (indexed like `releases`).
pub fn per_release(exp: &Exposure, pnl: &[f64], n_releases: usize) -> (Vec<usize>, Vec<f64>) {
    let mut touched = vec![0usize; n_releases];
    let mut amount = vec![0.0f64; n_releases];
    for (&p, m) in pnl.iter().zip(exp.match_lists()) {
        if m.is_empty() {
            continue;
        }
        let share = p / m.len() as f64;
        for &r in m {
            touched[r as usize] += 1;
            amount[r as usize] += share;
        }
    }
    (touched, amount)
}

/// The series lines: releases grouped by currency and normalised title
/// (the key duplicate merging uses), with each series' distinct exposed
/// trades.
fn series_lines(
    exp: &Exposure,
    releases: &[Release],
    used: &[bool],
    touched: &[usize],
    amount: &[f64],
) -> Vec<SeriesLine> {
    let mut index: std::collections::HashMap<(String, String), usize> = Default::default();
    let mut lines: Vec<SeriesLine> = Vec::new();
    let mut series_of = vec![usize::MAX; releases.len()];
    for (i, r) in releases.iter().enumerate() {
        if !used[i] {
            continue;
        }
        let key = (
            r.currency.clone(),
            crate::import::calendar::normalise_title(&r.title),
        );
        let k = *index.entry(key).or_insert_with(|| {
            lines.push(SeriesLine {
                currency: r.currency.clone(),
                title: r.title.clone(),
                ..Default::default()
            });
            lines.len() - 1
        });
        series_of[i] = k;
        let line = &mut lines[k];
        line.releases_used += 1;
        line.releases_touched += usize::from(touched[i] > 0);
        line.attributed_pnl += amount[i];
    }
    // Each exposed trade counts once per series it met, however many of
    // the series' releases it matched.
    let mut seen: Vec<usize> = Vec::new();
    for m in exp.match_lists() {
        seen.clear();
        for &r in m {
            let k = series_of[r as usize];
            if k != usize::MAX && !seen.contains(&k) {
                seen.push(k);
                lines[k].trades += 1;
            }
        }
    }
    for l in &mut lines {
        l.mean_per_release =
            (l.releases_used > 0).then(|| l.attributed_pnl / l.releases_used as f64);
    }
    lines.sort_by(|a, b| {
        b.attributed_pnl
            .abs()
            .total_cmp(&a.attributed_pnl.abs())
            .then_with(|| (&a.currency, &a.title).cmp(&(&b.currency, &b.title)))
    });
    lines
}

/// Tolerance for "to the cent" comparisons of sums of many floats.
fn cent_tolerance(scale: f64) -> f64 {
    0.005f64.max(scale * 1e-12)
}

/// Net, exposed and unexposed P/L, with gross profit and loss overall and
/// of the exposed trades, and Σ|P/L| (the tolerance's scale). Without
/// branches (a win or an exposure is a coin flip to the predictor): adding
/// 0.0 for the other side leaves each sum as it was.
fn headline_sums(exp: &Exposure, pnl: &[f64]) -> HeadlineSums {
    let mut s = HeadlineSums::default();
    let h = &mut s.headline;
    for (&p, &k) in pnl.iter().zip(&exp.k) {
        let exposed = k > 0;
        s.abs_total += p.abs();
        h.net += p;
        h.exposed_pnl += if exposed { p } else { 0.0 };
        h.unexposed_pnl += if exposed { 0.0 } else { p };
        let (win, loss) = (p.max(0.0), p.min(0.0));
        s.gross_profit += win;
        s.gross_loss += loss;
        s.exposed_gross_profit += if exposed { win } else { 0.0 };
        s.exposed_gross_loss += if exposed { loss } else { 0.0 };
    }
    s
}

/// The one-pass sums behind the headline shares.
#[derive(Default)]
struct HeadlineSums {
    /// Net, exposed and unexposed P/L (shares still empty).
    headline: Headline,
    /// Σ max(P/L, 0) over all trades.
    gross_profit: f64,
    /// Σ min(P/L, 0) over all trades.
    gross_loss: f64,
    /// Σ max(P/L, 0) over the exposed trades.
    exposed_gross_profit: f64,
    /// Σ min(P/L, 0) over the exposed trades.
    exposed_gross_loss: f64,
    /// Σ|P/L|: the scale of the conservation tolerance.
    abs_total: f64,
}

/// Builds the attribution tables and checks conservation.
pub fn attribute(
    exp: &Exposure,
    pnl: &[f64],
    releases: &[Release],
    used: &[bool],
) -> Result<Attribution, ConservationError> {
    // The per-release split beside the headline sums (independent passes).
    let ((touched, amount), sums) = rayon::join(
        || per_release(exp, pnl, releases.len()),
        || headline_sums(exp, pnl),
    );
    let by_series = series_lines(exp, releases, used, &touched, &amount);
    let mut a = Attribution {
        headline: sums.headline,
        by_series,
        ..Default::default()
    };
    let h = &mut a.headline;
    let ratio = |x: f64, y: f64| (y != 0.0).then(|| x / y);
    h.share_of_net = crate::analysis::metrics::share_of_net(h.exposed_pnl, h.net, sums.abs_total);
    h.share_of_gross_profit = ratio(sums.exposed_gross_profit, sums.gross_profit);
    h.share_of_gross_loss = ratio(sums.exposed_gross_loss, sums.gross_loss);
    h.share_of_count = ratio(exp.exposed_count() as f64, pnl.len() as f64);
    let tol = cent_tolerance(sums.abs_total);
    if (h.net - (h.exposed_pnl + h.unexposed_pnl)).abs() > tol {
        return Err(ConservationError {
            what: "baseline net vs exposed + unexposed",
            left: h.net,
            right: h.exposed_pnl + h.unexposed_pnl,
        });
    }
    let attributed: f64 = amount.iter().sum();
    if (attributed - h.exposed_pnl).abs() > tol {
        return Err(ConservationError {
            what: "sum over releases vs exposed P/L",
            left: attributed,
            right: h.exposed_pnl,
        });
    }
    for (i, r) in releases.iter().enumerate() {
        if !used[i] {
            continue;
        }
        a.by_release.push(ReleaseLine {
            id: r.id.clone(),
            released_at: crate::import::zones::format_utc(r.at),
            title: r.title.clone(),
            currency: r.currency.clone(),
            tier: r.tier.as_str(),
            category: r.category.clone(),
            trades_touched: touched[i],
            attributed_pnl: amount[i],
        });
        let cat = r.category.clone().unwrap_or_else(|| "(none)".into());
        for g in [
            a.by_category.entry(cat).or_default(),
            a.by_currency.entry(r.currency.clone()).or_default(),
            a.by_tier.entry(r.tier.as_str().to_string()).or_default(),
        ] {
            g.releases_used += 1;
            g.releases_touched += usize::from(touched[i] > 0);
            g.matches += touched[i];
            g.attributed_pnl += amount[i];
        }
    }
    Ok(a)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::import::calendar::Tier;

    fn release(id: &str, at: i64, title: &str, currency: &str) -> Release {
        Release {
            id: id.into(),
            at,
            end: at,
            all_day: false,
            title: title.into(),
            currency: currency.into(),
            tier: Tier::High,
            category: None,
            region: None,
        }
    }

    /// Worked by hand: two payroll releases written differently (one
    /// series), one EUR release, and a third payroll release outside the
    /// windows (not used). Trade 0 (+10) meets payroll 0; trade 1 (+6)
    /// meets both payrolls (3 to each, one trade of the series); trade 2
    /// (−4) meets the EUR release; trade 3 (+100) none.
    #[test]
    fn series_group_by_currency_and_normalised_title() {
        let releases = [
            release("a", 0, "US Payrolls Report", "USD"),
            release("b", 1, "us payrolls-report", "USD"),
            release("c", 2, "Euro prices", "EUR"),
            release("d", 3, "US payrolls report", "USD"),
        ];
        let used = [true, true, true, false];
        let exp = Exposure {
            k: vec![1, 2, 1, 0],
            match_release: vec![0, 0, 1, 2],
            nearest: Vec::new(),
            minutes_from_nearest: Vec::new(),
        };
        let pnl = [10.0, 6.0, -4.0, 100.0];
        let a = attribute(&exp, &pnl, &releases, &used).unwrap();
        let s = &a.by_series;
        assert_eq!(s.len(), 2);
        assert_eq!(
            (s[0].currency.as_str(), s[0].title.as_str()),
            ("USD", "US Payrolls Report")
        );
        assert_eq!(
            (s[0].releases_used, s[0].releases_touched, s[0].trades),
            (2, 2, 2)
        );
        assert_eq!(s[0].attributed_pnl, 16.0);
        assert_eq!(s[0].mean_per_release, Some(8.0));
        assert_eq!(
            (s[1].currency.as_str(), s[1].releases_used, s[1].trades),
            ("EUR", 1, 1)
        );
        assert_eq!(
            (s[1].attributed_pnl, s[1].mean_per_release),
            (-4.0, Some(-4.0))
        );
        // The series add up to the exposed P/L.
        let total: f64 = s.iter().map(|l| l.attributed_pnl).sum();
        assert_eq!(total, a.headline.exposed_pnl);
    }
}
