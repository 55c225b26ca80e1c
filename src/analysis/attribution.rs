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
    let mut a = Attribution {
        headline: sums.headline,
        ..Default::default()
    };
    let h = &mut a.headline;
    let ratio = |x: f64, y: f64| (y != 0.0).then(|| x / y);
    h.share_of_net = ratio(h.exposed_pnl, h.net);
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
