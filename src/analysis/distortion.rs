//! How much removing the release-exposed trades reorders the optimisation
//! (SPEC §9.3, docs/method.md §10): rank agreement (Spearman's ρ, Kendall's
//! τ-b) between the runs' figure with every trade and without the exposed
//! ones, the overlap of the two top-k sets, and a reference from removing
//! as many randomly chosen trades per run instead.

use serde::Serialize;

/// The distortion figures of one ranking.
#[derive(Debug, Clone, Serialize)]
pub struct Distortion {
    /// The figure the runs are ranked by.
    pub by: crate::analysis::rank::RankBy,
    /// Runs whose figure is defined with every trade and without the
    /// exposed ones: the pairs ρ and τ-b are computed on.
    pub runs_compared: usize,
    /// Spearman's ρ: the correlation of the two figures' average ranks.
    pub spearman_rho: Option<f64>,
    /// Kendall's τ-b (ties counted in both figures).
    pub kendall_tau_b: Option<f64>,
    /// k of the top-k sets.
    pub top_k: usize,
    /// Runs in both top-k sets.
    pub top_overlap: usize,
    /// Runs in the top k with every trade but not without the exposed ones.
    pub left_top: Vec<String>,
    /// Runs in the top k without the exposed trades but not with them.
    pub entered_top: Vec<String>,
    /// The reference from random removal, when asked for.
    pub random_removal: Option<RandomRemoval>,
}

/// Removing, per run, as many randomly chosen trades as it has exposed
/// ones, `draws` times: how far that alone reorders the runs.
#[derive(Debug, Clone, Serialize)]
pub struct RandomRemoval {
    /// Draws made.
    pub draws: usize,
    /// Seed of the draws (each run's stream is named by the run).
    pub seed: u64,
    /// Median ρ over the draws with a defined ρ.
    pub median_rho: Option<f64>,
    /// Median τ-b over the draws with a defined τ-b.
    pub median_tau_b: Option<f64>,
    /// Share of draws whose ρ is at or below the observed ρ: small means
    /// random removal rarely reorders the runs as much as the release
    /// trades do.
    pub share_rho_at_or_below: Option<f64>,
}

/// Average ranks (1-based; tied values share the mean of their places),
/// the ranks Spearman's ρ correlates. Written here: a dozen lines, where a
/// statistics crate would bring far more than this one function.
pub fn average_ranks(values: &[f64]) -> Vec<f64> {
    let mut idx: Vec<usize> = (0..values.len()).collect();
    idx.sort_by(|&a, &b| values[a].total_cmp(&values[b]));
    let mut ranks = vec![0.0; values.len()];
    let mut i = 0;
    while i < idx.len() {
        let mut j = i + 1;
        while j < idx.len() && values[idx[j]] == values[idx[i]] {
            j += 1;
        }
        // Places i+1 ..= j share their mean.
        let mean = (i + 1 + j) as f64 / 2.0;
        for &k in &idx[i..j] {
            ranks[k] = mean;
        }
        i = j;
    }
    ranks
}

/// Spearman's ρ of paired values (ties as average ranks); `None` with
/// fewer than two pairs or when either side is constant.
pub fn spearman_rho(x: &[f64], y: &[f64]) -> Option<f64> {
    if x.len() != y.len() || x.len() < 2 {
        return None;
    }
    let (rx, ry) = (average_ranks(x), average_ranks(y));
    let n = rx.len() as f64;
    let (mx, my) = (rx.iter().sum::<f64>() / n, ry.iter().sum::<f64>() / n);
    let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
    for (a, b) in rx.iter().zip(&ry) {
        let (dx, dy) = (a - mx, b - my);
        sxy += dx * dy;
        sxx += dx * dx;
        syy += dy * dy;
    }
    (sxx > 0.0 && syy > 0.0).then(|| sxy / (sxx * syy).sqrt())
}

/// Kendall's τ-b of paired values, by Knight's O(n log n) algorithm (the
/// `kendalls` crate); `None` with fewer than two pairs or when either side
/// is constant.
pub fn kendall_tau_b(x: &[f64], y: &[f64]) -> Option<f64> {
    if x.len() != y.len() || x.len() < 2 {
        return None;
    }
    kendalls::tau_b_with_comparator(x, y, |a: &f64, b: &f64| a.total_cmp(b))
        .ok()
        .map(|(tau, _)| tau)
        .filter(|t| t.is_finite())
}

/// The defined pairs of two figures (runs where either is undefined are
/// left out).
fn pairs(x: &[Option<f64>], y: &[Option<f64>]) -> (Vec<f64>, Vec<f64>) {
    x.iter()
        .zip(y)
        .filter_map(|(a, b)| Some(((*a)?, (*b)?)))
        .unzip()
}

/// ρ and τ-b of two figures over the runs where both are defined.
pub fn agreement(x: &[Option<f64>], y: &[Option<f64>]) -> (usize, Option<f64>, Option<f64>) {
    let (a, b) = pairs(x, y);
    (a.len(), spearman_rho(&a, &b), kendall_tau_b(&a, &b))
}

/// The distortion of a ranking: `names` with their figure with every trade
/// (`baseline`), without the exposed trades (`removed`), and their ranks
/// (1 = best) in each; `random` holds, per draw, every run's figure after
/// removing as many random trades (empty when not asked for).
#[allow(clippy::too_many_arguments)]
pub fn distortion(
    by: crate::analysis::rank::RankBy,
    names: &[&str],
    baseline: &[Option<f64>],
    removed: &[Option<f64>],
    ranks: (&[usize], &[usize]),
    top_k: usize,
    random: &[Vec<Option<f64>>],
    seed: u64,
) -> Distortion {
    let (runs_compared, spearman_rho, kendall_tau_b) = agreement(baseline, removed);
    let top = |r: &[usize]| -> Vec<usize> { (0..names.len()).filter(|&i| r[i] <= top_k).collect() };
    let (tb, tr) = (top(ranks.0), top(ranks.1));
    let top_overlap = tb.iter().filter(|i| tr.contains(i)).count();
    let by_rank = |mut v: Vec<usize>, r: &[usize]| -> Vec<String> {
        v.sort_by_key(|&i| r[i]);
        v.into_iter().map(|i| names[i].to_string()).collect()
    };
    let left_top = by_rank(
        tb.iter().copied().filter(|i| !tr.contains(i)).collect(),
        ranks.0,
    );
    let entered_top = by_rank(
        tr.iter().copied().filter(|i| !tb.contains(i)).collect(),
        ranks.1,
    );
    let random_removal = (!random.is_empty()).then(|| {
        let mut rhos = Vec::with_capacity(random.len());
        let mut taus = Vec::with_capacity(random.len());
        for draw in random {
            let (_, r, t) = agreement(baseline, draw);
            rhos.extend(r);
            taus.extend(t);
        }
        let share = spearman_rho.and_then(|obs| {
            (!rhos.is_empty())
                .then(|| rhos.iter().filter(|&&r| r <= obs).count() as f64 / rhos.len() as f64)
        });
        RandomRemoval {
            draws: random.len(),
            seed,
            median_rho: median(&mut rhos),
            median_tau_b: median(&mut taus),
            share_rho_at_or_below: share,
        }
    });
    Distortion {
        by,
        runs_compared,
        spearman_rho,
        kendall_tau_b,
        top_k,
        top_overlap,
        left_top,
        entered_top,
        random_removal,
    }
}

fn median(v: &mut [f64]) -> Option<f64> {
    crate::analysis::metrics::quantile_type7_unsorted(v, 0.5)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// ../shared/REFERENCES.md "Rank agreement": ten items, every adjacent
    /// pair swapped: ρ = 1 − 60/990 (analytic), τ = 35/45 (5 discordant
    /// of 45 pairs; analytic, and scipy 1.17.1).
    #[test]
    fn adjacent_swaps_of_ten() {
        let a: Vec<f64> = (1..=10).map(f64::from).collect();
        let b: Vec<f64> = [2, 1, 4, 3, 6, 5, 8, 7, 10, 9].map(f64::from).to_vec();
        assert!((spearman_rho(&a, &b).unwrap() - (1.0 - 60.0 / 990.0)).abs() < 1e-12);
        assert!((kendall_tau_b(&a, &b).unwrap() - 35.0 / 45.0).abs() < 1e-12);
    }

    /// ../shared/REFERENCES.md "Rank agreement", with ties (scipy 1.17.1).
    #[test]
    fn ties_as_scipy() {
        let x = [3.1, 2.0, 2.0, 5.5, 4.2, 1.0, 6.6, 3.1];
        let y = [2.9, 1.5, 2.5, 5.0, 4.8, 0.2, 6.0, 2.0];
        assert!((spearman_rho(&x, &y).unwrap() - 0.9398272507881659).abs() < 1e-12);
        assert!((kendall_tau_b(&x, &y).unwrap() - 0.8894991799933214).abs() < 1e-12);
    }

    #[test]
    fn average_ranks_share_places() {
        assert_eq!(
            average_ranks(&[10.0, 20.0, 10.0, 30.0, 20.0, 20.0]),
            vec![1.5, 4.0, 1.5, 6.0, 4.0, 4.0]
        );
    }

    #[test]
    fn constant_or_short_input_has_no_agreement() {
        assert_eq!(spearman_rho(&[1.0, 1.0, 1.0], &[1.0, 2.0, 3.0]), None);
        assert_eq!(kendall_tau_b(&[1.0, 1.0, 1.0], &[1.0, 2.0, 3.0]), None);
        assert_eq!(spearman_rho(&[1.0], &[1.0]), None);
    }

    #[test]
    fn top_sets_and_random_reference() {
        let names = ["a", "b", "c", "d"];
        let base = [Some(4.0), Some(3.0), Some(2.0), Some(1.0)];
        let removed = [Some(1.0), Some(3.0), Some(2.0), Some(4.0)];
        // Ranks: baseline a b c d; removed d b c a.
        let d = distortion(
            crate::analysis::rank::RankBy::Net,
            &names,
            &base,
            &removed,
            (&[1, 2, 3, 4], &[4, 2, 3, 1]),
            2,
            &[
                base.to_vec(),
                removed.to_vec(),
                vec![Some(4.0), Some(3.0), Some(1.0), Some(2.0)],
            ],
            5,
        );
        assert_eq!(d.top_overlap, 1);
        assert_eq!(d.left_top, vec!["a"]);
        assert_eq!(d.entered_top, vec!["d"]);
        // Observed ρ: ranks (4,3,2,1) vs (1,3,2,4): Σd² = 9+0+0+9 = 18,
        // ρ = 1 − 6·18/(4·15) = −0.8.
        assert!((d.spearman_rho.unwrap() + 0.8).abs() < 1e-12);
        let r = d.random_removal.unwrap();
        // Draw ρ: 1, −0.8, and (4,3,1,2): Σd² = 2, ρ = 0.8; median 0.8;
        // one of three at or below −0.8.
        assert!((r.median_rho.unwrap() - 0.8).abs() < 1e-12);
        assert!((r.share_rho_at_or_below.unwrap() - 1.0 / 3.0).abs() < 1e-12);
    }
}
