//! File renderers: the annotated trade list (CSV or Parquet) and the
//! per-release table (CSV).

use crate::report::types::Exposure;
use crate::report::types::Release;
use crate::report::types::ReleaseLine;
use crate::report::types::Trades;
use crate::report::types::format_utc;
use std::fmt::Write;

/// Quotes a CSV field when it needs it (RFC 4180).
pub fn csv_field(s: &str) -> std::borrow::Cow<'_, str> {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\"")).into()
    } else {
        s.into()
    }
}

fn opt_num(v: f64) -> String {
    if v.is_finite() {
        format!("{v}")
    } else {
        String::new()
    }
}

/// Each input trade with its exposure columns.
pub struct AnnotatedTrades<'a> {
    trades: &'a Trades,
    exposure: &'a Exposure,
    releases: &'a [Release],
    files: &'a [String],
}

pub fn annotated_trades<'a>(
    trades: &'a Trades,
    exposure: &'a Exposure,
    releases: &'a [Release],
    files: &'a [String],
) -> AnnotatedTrades<'a> {
    AnnotatedTrades {
        trades,
        exposure,
        releases,
        files,
    }
}

pub const TRADE_COLUMNS: &[&str] = &[
    "source_file",
    "source_row",
    "run",
    "opened_at",
    "closed_at",
    "instrument",
    "pnl",
    "exposed",
    "matches",
    "nearest_release_id",
    "nearest_release_title",
    "nearest_release_tier",
    "minutes_from_nearest",
];

impl AnnotatedTrades<'_> {
    fn nearest(&self, i: usize) -> Option<&Release> {
        let r = self.exposure.nearest[i];
        (r != u32::MAX).then(|| &self.releases[r as usize])
    }

    pub fn to_csv(&self) -> Vec<u8> {
        let t = self.trades;
        let mut s = String::with_capacity(t.len() * 120);
        s.push_str(&TRADE_COLUMNS.join(","));
        for name in &t.kept_names {
            s.push(',');
            s.push_str(&csv_field(name));
        }
        s.push('\n');
        for i in 0..t.len() {
            let near = self.nearest(i);
            let _ = writeln!(
                s,
                "{},{},{},{},{},{},{},{},{},{},{},{},{}",
                csv_field(&self.files[t.file[i] as usize]),
                t.row[i],
                csv_field(
                    t.runs
                        .get(t.run[i] as usize)
                        .map(String::as_str)
                        .unwrap_or("")
                ),
                format_utc(t.opened[i]),
                format_utc(t.closed[i]),
                csv_field(&t.instruments[t.instrument[i] as usize]),
                t.pnl[i],
                self.exposure.is_exposed(i),
                self.exposure.k[i],
                csv_field(near.map(|r| r.id.as_str()).unwrap_or("")),
                csv_field(near.map(|r| r.title.as_str()).unwrap_or("")),
                near.map(|r| r.tier.as_str()).unwrap_or(""),
                opt_num(self.exposure.minutes_from_nearest[i]),
            );
            if !t.kept.is_empty() {
                s.pop();
                for column in &t.kept {
                    s.push(',');
                    s.push_str(&csv_field(&column[i]));
                }
                s.push('\n');
            }
        }
        s.into_bytes()
    }

    pub fn to_parquet(&self) -> Result<Vec<u8>, FileError> {
        use polars::prelude::*;
        let t = self.trades;
        let n = t.len();
        let near: Vec<Option<&Release>> = (0..n).map(|i| self.nearest(i)).collect();
        let mut df = DataFrame::new(
            n,
            vec![
                Column::new(
                    "source_file".into(),
                    (0..n)
                        .map(|i| self.files[t.file[i] as usize].as_str())
                        .collect::<Vec<_>>(),
                ),
                Column::new("source_row".into(), t.row.clone()),
                Column::new(
                    "run".into(),
                    (0..n)
                        .map(|i| {
                            t.runs
                                .get(t.run[i] as usize)
                                .map(String::as_str)
                                .unwrap_or("")
                        })
                        .collect::<Vec<_>>(),
                ),
                utc_column("opened_at", &t.opened),
                utc_column("closed_at", &t.closed),
                Column::new(
                    "instrument".into(),
                    (0..n)
                        .map(|i| t.instruments[t.instrument[i] as usize].as_str())
                        .collect::<Vec<_>>(),
                ),
                Column::new("pnl".into(), t.pnl.clone()),
                Column::new(
                    "exposed".into(),
                    self.exposure.k.iter().map(|&k| k > 0).collect::<Vec<_>>(),
                ),
                Column::new("matches".into(), self.exposure.k.clone()),
                Column::new(
                    "nearest_release_id".into(),
                    near.iter()
                        .map(|r| r.map(|r| r.id.as_str()))
                        .collect::<Vec<_>>(),
                ),
                Column::new(
                    "nearest_release_title".into(),
                    near.iter()
                        .map(|r| r.map(|r| r.title.as_str()))
                        .collect::<Vec<_>>(),
                ),
                Column::new(
                    "nearest_release_tier".into(),
                    near.iter()
                        .map(|r| r.map(|r| r.tier.as_str()))
                        .collect::<Vec<_>>(),
                ),
                Column::new(
                    "minutes_from_nearest".into(),
                    self.exposure
                        .minutes_from_nearest
                        .iter()
                        .map(|v| v.is_finite().then_some(*v))
                        .collect::<Vec<_>>(),
                ),
            ],
        )?;
        for (name, values) in t.kept_names.iter().zip(&t.kept) {
            df.with_column(Column::new(name.as_str().into(), values.clone()))?;
        }
        parquet_bytes(&mut df)
    }
}

/// Instants (ms) as a Parquet timestamp column in UTC, so readers get
/// instants rather than text to parse.
fn utc_column(name: &str, ms: &[i64]) -> polars::prelude::Column {
    use polars::prelude::*;
    Int64Chunked::from_vec(name.into(), ms.to_vec())
        .into_datetime(TimeUnit::Milliseconds, Some(TimeZone::UTC))
        .into_series()
        .into()
}

/// releases.csv: one row per used release.
pub fn releases_csv(lines: &[ReleaseLine]) -> Vec<u8> {
    let mut s =
        String::from("id,released_at,title,currency,tier,category,trades_touched,attributed_pnl\n");
    for r in lines {
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{},{}",
            csv_field(&r.id),
            r.released_at,
            csv_field(&r.title),
            r.currency,
            r.tier,
            csv_field(r.category.as_deref().unwrap_or("")),
            r.trades_touched,
            r.attributed_pnl
        );
    }
    s.into_bytes()
}

/// tail.csv: baseline |P/L| (or |return|, by the tail basis) sorted
/// descending, with the exposed flag.
pub fn tail_csv(sorted: &[(f64, bool)], basis: crate::report::types::TailBasis) -> Vec<u8> {
    let mut s = String::from(match basis {
        crate::report::types::TailBasis::Amount => "rank,abs_pnl,exposed\n",
        crate::report::types::TailBasis::Return => "rank,abs_return,exposed\n",
    });
    for (i, (v, e)) in sorted.iter().enumerate() {
        let _ = writeln!(s, "{},{},{}", i + 1, v, e);
    }
    s.into_bytes()
}

pub const RUN_COLUMNS: &[&str] = &[
    "run",
    "trades",
    "exposed_trades",
    "exposed_pnl",
    "exposed_share_of_trades",
    "exposed_share_of_net",
    "net_baseline",
    "net_removed",
    "profit_factor_baseline",
    "profit_factor_removed",
    "sharpe_baseline",
    "sharpe_removed",
    "max_drawdown_baseline",
    "max_drawdown_removed",
    "tcr_baseline",
    "tcr_removed",
    "by_baseline",
    "by_removed",
    "rank_baseline",
    "rank_removed",
    "rank_shift",
    "placebo_p",
    "in_top_baseline",
    "in_top_removed",
];

fn opt(v: Option<f64>) -> String {
    v.filter(|x| x.is_finite())
        .map(|x| x.to_string())
        .unwrap_or_default()
}

/// runs.csv: one row per run, columns as `RUN_COLUMNS`, then
/// `by_stressed` and `rank_stressed` with `--stress`.
pub fn runs_csv(rows: &[crate::report::types::RunRow]) -> Vec<u8> {
    let stressed = rows.iter().any(|r| r.rank_stressed.is_some());
    let mut s = RUN_COLUMNS.join(",");
    if stressed {
        s.push_str(",by_stressed,rank_stressed");
    }
    s.push('\n');
    for r in rows {
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
            csv_field(&r.run),
            r.trades,
            r.exposed_trades,
            r.exposed_pnl,
            opt(r.exposed_share_of_trades),
            opt(r.exposed_share_of_net),
            r.net_baseline,
            r.net_removed,
            opt(r.profit_factor_baseline),
            opt(r.profit_factor_removed),
            opt(r.sharpe_baseline),
            opt(r.sharpe_removed),
            opt(r.max_drawdown_baseline),
            opt(r.max_drawdown_removed),
            opt(r.tcr_baseline),
            opt(r.tcr_removed),
            opt(r.by_baseline),
            opt(r.by_removed),
            r.rank_baseline,
            r.rank_removed,
            r.rank_shift,
            opt(r.placebo_p),
            r.in_top_baseline,
            r.in_top_removed
        );
        if stressed {
            s.pop();
            let _ = writeln!(
                s,
                ",{},{}",
                opt(r.by_stressed),
                r.rank_stressed.map_or(String::new(), |v| v.to_string())
            );
        }
    }
    s.into_bytes()
}

/// runs.parquet: the same columns.
pub fn runs_parquet(rows: &[crate::report::types::RunRow]) -> Result<Vec<u8>, FileError> {
    use polars::prelude::*;
    let f = |g: fn(&crate::report::types::RunRow) -> Option<f64>| {
        rows.iter().map(g).collect::<Vec<_>>()
    };
    let mut df = DataFrame::new(
        rows.len(),
        vec![
            Column::new(
                "run".into(),
                rows.iter().map(|r| r.run.as_str()).collect::<Vec<_>>(),
            ),
            Column::new(
                "trades".into(),
                rows.iter().map(|r| r.trades as u64).collect::<Vec<_>>(),
            ),
            Column::new(
                "exposed_trades".into(),
                rows.iter()
                    .map(|r| r.exposed_trades as u64)
                    .collect::<Vec<_>>(),
            ),
            Column::new("exposed_pnl".into(), f(|r| Some(r.exposed_pnl))),
            Column::new(
                "exposed_share_of_trades".into(),
                f(|r| r.exposed_share_of_trades),
            ),
            Column::new("exposed_share_of_net".into(), f(|r| r.exposed_share_of_net)),
            Column::new("net_baseline".into(), f(|r| Some(r.net_baseline))),
            Column::new("net_removed".into(), f(|r| Some(r.net_removed))),
            Column::new(
                "profit_factor_baseline".into(),
                f(|r| r.profit_factor_baseline),
            ),
            Column::new(
                "profit_factor_removed".into(),
                f(|r| r.profit_factor_removed),
            ),
            Column::new("sharpe_baseline".into(), f(|r| r.sharpe_baseline)),
            Column::new("sharpe_removed".into(), f(|r| r.sharpe_removed)),
            Column::new(
                "max_drawdown_baseline".into(),
                f(|r| r.max_drawdown_baseline),
            ),
            Column::new("max_drawdown_removed".into(), f(|r| r.max_drawdown_removed)),
            Column::new("tcr_baseline".into(), f(|r| r.tcr_baseline)),
            Column::new("tcr_removed".into(), f(|r| r.tcr_removed)),
            Column::new("by_baseline".into(), f(|r| r.by_baseline)),
            Column::new("by_removed".into(), f(|r| r.by_removed)),
            Column::new(
                "rank_baseline".into(),
                rows.iter()
                    .map(|r| r.rank_baseline as u64)
                    .collect::<Vec<_>>(),
            ),
            Column::new(
                "rank_removed".into(),
                rows.iter()
                    .map(|r| r.rank_removed as u64)
                    .collect::<Vec<_>>(),
            ),
            Column::new(
                "rank_shift".into(),
                rows.iter().map(|r| r.rank_shift).collect::<Vec<_>>(),
            ),
            Column::new("placebo_p".into(), f(|r| r.placebo_p)),
            Column::new(
                "in_top_baseline".into(),
                rows.iter().map(|r| r.in_top_baseline).collect::<Vec<_>>(),
            ),
            Column::new(
                "in_top_removed".into(),
                rows.iter().map(|r| r.in_top_removed).collect::<Vec<_>>(),
            ),
        ],
    )?;
    if rows.iter().any(|r| r.rank_stressed.is_some()) {
        df.with_column(Column::new("by_stressed".into(), f(|r| r.by_stressed)))?;
        df.with_column(Column::new(
            "rank_stressed".into(),
            rows.iter()
                .map(|r| r.rank_stressed.map(|v| v as u64))
                .collect::<Vec<_>>(),
        ))?;
    }
    parquet_bytes(&mut df)
}

/// grid.csv: one row per tune cell (heat-map data), with `net_stressed`
/// and `profit_factor_stressed` last under `--stress`.
pub fn grid_csv(cells: &[crate::report::types::Cell]) -> Vec<u8> {
    let stressed = cells.iter().any(|c| c.net_stressed.is_some());
    let mut s = String::from(
        "pre_min,post_min,trades_removed,share_of_net_removed,tcr_after,tcr_reduction,sharpe_after,max_drawdown_after,runs_tcr_reduced,runs_sharpe_improved,blocked_share,frontier",
    );
    s.push_str(if stressed {
        ",net_stressed,profit_factor_stressed\n"
    } else {
        "\n"
    });
    for c in cells {
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{},{},{},{},{},{}",
            c.pre_min,
            c.post_min,
            c.trades_removed,
            opt(c.share_of_net_removed),
            opt(c.tcr_after),
            opt(c.tcr_reduction),
            opt(c.sharpe_after),
            opt(c.max_drawdown_after),
            opt(c.runs_tcr_reduced),
            opt(c.runs_sharpe_improved),
            c.blocked_share,
            c.frontier
        );
        if stressed {
            s.pop();
            let _ = writeln!(
                s,
                ",{},{}",
                opt(c.net_stressed),
                opt(c.profit_factor_stressed)
            );
        }
    }
    s.into_bytes()
}

/// Why a file renderer could not produce its bytes.
#[derive(Debug, thiserror::Error)]
pub enum FileError {
    /// polars could not build or write the frame.
    #[error(transparent)]
    Frame(#[from] polars::error::PolarsError),
    /// Parquet output asked of a build without the `parquet` feature.
    #[error("this build writes no Parquet (built without the `parquet` feature); choose csv")]
    NoParquet,
}

/// A frame as Parquet bytes: behind the `parquet` feature, which the
/// command line enables by default.
fn parquet_bytes(df: &mut polars::prelude::DataFrame) -> Result<Vec<u8>, FileError> {
    #[cfg(feature = "parquet")]
    {
        let mut buf = Vec::new();
        polars::prelude::ParquetWriter::new(&mut buf).finish(df)?;
        Ok(buf)
    }
    #[cfg(not(feature = "parquet"))]
    {
        let _ = df;
        Err(FileError::NoParquet)
    }
}
