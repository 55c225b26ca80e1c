//! Charts as SVG (plotters), in our own colour-blind-safe palette. Each
//! function turns plain data into one self-contained SVG string. Large
//! series are thinned deterministically so every chart stays small.

use plotters::prelude::*;

/// Our palette, named by us: harbour (baseline), kelp (removed), heather
/// (capped), marigold (exposed trades), plum (negative bars), and grey
/// release ticks. The four scenario colours stay at least 15 CAM02-UCS
/// units apart under simulated protan, deutan and tritan vision (Machado et
/// al. 2009, computed with colorspacious: tests/palette.rs and its
/// fixture script); each scenario also has its own line pattern, so charts
/// read in greyscale. Tiers are never colour-coded.
pub const BASELINE: RGBColor = RGBColor(0x1b, 0x4f, 0x8a);
pub const REMOVED: RGBColor = RGBColor(0x23, 0x94, 0x7c);
pub const CAPPED: RGBColor = RGBColor(0xa8, 0x78, 0xd8);
pub const EXPOSED: RGBColor = RGBColor(0xdc, 0x9a, 0x26);
pub const TICK: RGBColor = RGBColor(0xbb, 0xbb, 0xbb);
pub const NEGATIVE: RGBColor = RGBColor(0x70, 0x43, 0x8f);

const SIZE: (u32, u32) = (760, 420);

/// An axis label: grouped thousands without a needless decimal (2,500,
/// -12,000), one decimal under 100 when it is not whole, three under 1.
pub fn axis_number(v: &f64) -> String {
    let a = v.abs();
    let trim = |t: String| {
        if t.contains('.') {
            t.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            t
        }
    };
    let text = if a >= 100.0 {
        let digits = (a.round() as u64).to_string();
        let mut grouped = String::new();
        for (i, ch) in digits.chars().enumerate() {
            if i > 0 && (digits.len() - i).is_multiple_of(3) {
                grouped.push(',');
            }
            grouped.push(ch);
        }
        grouped
    } else if a >= 1.0 {
        trim(format!("{a:.1}"))
    } else {
        trim(format!("{a:.3}"))
    };
    if *v < 0.0 && text != "0" {
        format!("-{text}")
    } else {
        text
    }
}

/// Dash and gap (pixels) of each scenario's line: baseline solid, removed
/// dashed, capped dotted, stressed long-dashed.
const PATTERN: [(u32, u32); 4] = [(0, 0), (9, 5), (2, 4), (16, 4)];

/// Draws one scenario's line (i: 0 baseline, 1 removed, 2 capped, 3
/// stressed) in its colour and pattern, with a matching legend entry.
fn scenario_line<'a, DB, X, Y>(
    c: &mut ChartContext<'a, DB, Cartesian2d<X, Y>>,
    i: usize,
    name: &str,
    pts: Vec<(X::ValueType, f64)>,
) -> Result<(), ChartError>
where
    DB: DrawingBackend + 'a,
    X: plotters::coord::ranged1d::Ranged,
    X::ValueType: Clone + 'static,
    Y: plotters::coord::ranged1d::Ranged<ValueType = f64>,
{
    let col = [BASELINE, REMOVED, CAPPED, EXPOSED][i % 4];
    let style = col.stroke_width(2);
    let (dash, gap) = PATTERN[i % 4];
    let anno = if dash == 0 {
        c.draw_series(LineSeries::new(pts, style)).map_err(err)?
    } else {
        c.draw_series(DashedLineSeries::new(pts, dash, gap, style))
            .map_err(err)?
    };
    anno.label(name).legend(move |(x, y)| {
        if dash == 0 {
            PathElement::new(vec![(x, y), (x + 18, y)], style).into_dyn()
        } else {
            plotters::element::DashedPathElement::new(vec![(x, y), (x + 18, y)], dash, gap, style)
                .into_dyn()
        }
    });
    Ok(())
}
const FONT: &str = "sans-serif";

/// A chart that could not be drawn or rasterised (the drawing library's
/// own errors carry no type we can keep, so their text is kept).
#[derive(Debug, thiserror::Error)]
pub enum ChartError {
    #[error("chart: {0}")]
    Draw(String),
    #[error("chart SVG: {0}")]
    Svg(#[from] resvg::usvg::Error),
    #[error("chart has no size")]
    NoSize,
    #[error("PNG encoding: {0}")]
    Png(String),
}

type Res = Result<String, ChartError>;

fn err<E: std::fmt::Debug>(e: E) -> ChartError {
    ChartError::Draw(format!("{e:?}"))
}

/// Keeps at most `max` items, evenly spaced, always keeping the last.
pub fn thin<T: Clone>(v: &[T], max: usize) -> Vec<T> {
    if v.len() <= max || max < 2 {
        return v.to_vec();
    }
    let step = (v.len() - 1) as f64 / (max - 1) as f64;
    (0..max)
        .map(|i| v[((i as f64 * step).round() as usize).min(v.len() - 1)].clone())
        .collect()
}

/// Keeps the first `head` items whole (they matter on a log axis) and thins
/// the rest to at most `max` in all.
pub fn thin_head<T: Clone>(v: &[T], head: usize, max: usize) -> Vec<T> {
    if v.len() <= max || head >= max {
        return thin(v, max);
    }
    let mut out = v[..head].to_vec();
    out.extend(thin(&v[head..], max - head));
    out
}

fn range(values: impl Iterator<Item = f64>) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if !lo.is_finite() {
        return (0.0, 1.0);
    }
    if hi - lo < 1e-12 {
        return (lo - 1.0, hi + 1.0);
    }
    let pad = (hi - lo) * 0.05;
    (lo - pad, hi + pad)
}

/// Sorted |P/L| (largest first) of baseline, exposed trades marked, with the
/// removed scenario's curve on the same axes.
pub fn tail_curve(baseline: &[(f64, bool)], removed: &[f64], caption: &str) -> Res {
    let mut s = String::new();
    {
        let root = SVGBackend::with_string(&mut s, SIZE).into_drawing_area();
        root.fill(&WHITE).map_err(err)?;
        let n = baseline.len().max(removed.len()).max(2) as f64;
        let top = baseline
            .first()
            .map(|x| x.0)
            .unwrap_or(1.0)
            .max(removed.first().copied().unwrap_or(0.0))
            * 1.05;
        let mut c = ChartBuilder::on(&root)
            .caption(caption, (FONT, 18))
            .margin(12)
            .x_label_area_size(36)
            .y_label_area_size(60)
            .build_cartesian_2d((1f64..n).log_scale(), 0f64..top.max(1e-9))
            .map_err(err)?;
        c.configure_mesh()
            .x_desc("rank by |P/L| (1 = largest, log scale)")
            .y_desc("|P/L|")
            .y_label_formatter(&axis_number)
            .light_line_style(WHITE)
            .draw()
            .map_err(err)?;
        let pts: Vec<(f64, f64)> = baseline
            .iter()
            .enumerate()
            .map(|(i, x)| ((i + 1) as f64, x.0))
            .collect();
        scenario_line(&mut c, 0, "baseline", thin_head(&pts, 400, 1500))?;
        let rem: Vec<(f64, f64)> = removed
            .iter()
            .enumerate()
            .map(|(i, v)| ((i + 1) as f64, *v))
            .collect();
        scenario_line(&mut c, 1, "removed", thin_head(&rem, 400, 1500))?;
        let exposed: Vec<(f64, f64)> = baseline
            .iter()
            .enumerate()
            .filter(|x| x.1.1)
            .map(|(i, x)| ((i + 1) as f64, x.0))
            .collect();
        c.draw_series(
            thin_head(&exposed, 200, 600)
                .into_iter()
                .map(|p| Circle::new(p, 3, EXPOSED.filled())),
        )
        .map_err(err)?
        .label("exposed trade")
        .legend(|(x, y)| Circle::new((x + 9, y), 3, EXPOSED.filled()));
        c.configure_series_labels()
            .background_style(WHITE.mix(0.9))
            .border_style(BLACK.mix(0.3))
            .draw()
            .map_err(err)?;
        root.present().map_err(err)?;
    }
    Ok(s)
}

/// Equity curves (cumulative P/L against the close date, UTC), with faint
/// vertical ticks at top-tier releases. Points are (instant in ms, P/L).
pub fn equity(curves: &[(&str, Vec<(i64, f64)>)], ticks_ms: &[i64], caption: &str) -> Res {
    use chrono::{DateTime, Utc};
    let at = |ms: i64| DateTime::<Utc>::from_timestamp_millis(ms).unwrap_or_default();
    let mut s = String::new();
    {
        let root = SVGBackend::with_string(&mut s, SIZE).into_drawing_area();
        root.fill(&WHITE).map_err(err)?;
        let instants = curves.iter().flat_map(|c| c.1.iter().map(|p| p.0));
        let (x0, x1) = (
            instants.clone().min().unwrap_or(0),
            instants.max().unwrap_or(0),
        );
        // At least a day wide, so that one day's trades still draw.
        let x1 = x1.max(x0 + crate::report::types::DAY_MS);
        let (y0, y1) = range(
            curves
                .iter()
                .flat_map(|c| c.1.iter().map(|p| p.1))
                .chain([0.0]),
        );
        let mut c = ChartBuilder::on(&root)
            .caption(caption, (FONT, 18))
            .margin(12)
            .x_label_area_size(36)
            .y_label_area_size(70)
            .build_cartesian_2d(at(x0)..at(x1), y0..y1)
            .map_err(err)?;
        let span_days = (x1 - x0) / crate::report::types::DAY_MS;
        let date_label = move |d: &DateTime<Utc>| {
            if span_days > 730 {
                d.format("%Y-%m").to_string()
            } else {
                d.format("%Y-%m-%d").to_string()
            }
        };
        c.configure_mesh()
            .x_desc("close date (UTC)")
            .x_labels(7)
            .x_label_formatter(&date_label)
            .y_desc("cumulative P/L")
            .y_label_formatter(&axis_number)
            .light_line_style(WHITE)
            .draw()
            .map_err(err)?;
        c.draw_series(
            thin(ticks_ms, 400)
                .into_iter()
                .filter(|t| *t >= x0 && *t <= x1)
                .map(|t| PathElement::new(vec![(at(t), y0), (at(t), y1)], TICK.mix(0.5))),
        )
        .map_err(err)?
        .label("top-tier release")
        .legend(|(x, y)| PathElement::new(vec![(x + 9, y - 6), (x + 9, y + 6)], TICK));
        for (i, (name, pts)) in curves.iter().enumerate() {
            let pts: Vec<(DateTime<Utc>, f64)> = thin(pts, 1500)
                .into_iter()
                .map(|(t, v)| (at(t), v))
                .collect();
            scenario_line(&mut c, i, name, pts)?;
        }
        c.configure_series_labels()
            .position(SeriesLabelPosition::UpperLeft)
            .background_style(WHITE.mix(0.9))
            .border_style(BLACK.mix(0.3))
            .draw()
            .map_err(err)?;
        root.present().map_err(err)?;
    }
    Ok(s)
}

/// Signed horizontal bars (attributed P/L by group). Groups with nothing
/// attributed get no row (an empty row reads as a missing bar); with none
/// left the chart says so.
pub fn bars(items: &[(String, f64)], caption: &str) -> Res {
    let items: Vec<(String, f64)> = items.iter().filter(|x| x.1 != 0.0).cloned().collect();
    let mut s = String::new();
    {
        let h = (80 + 28 * items.len().max(1)) as u32;
        let root = SVGBackend::with_string(&mut s, (SIZE.0, h.max(200))).into_drawing_area();
        root.fill(&WHITE).map_err(err)?;
        let (lo, hi) = range(items.iter().map(|x| x.1).chain([0.0]));
        let n = items.len().max(1);
        let mut c = ChartBuilder::on(&root)
            .caption(caption, (FONT, 18))
            .margin(12)
            .x_label_area_size(30)
            .y_label_area_size(130)
            .build_cartesian_2d(lo..hi, (0..n).into_segmented())
            .map_err(err)?;
        let labels: Vec<String> = items.iter().map(|x| x.0.clone()).collect();
        c.configure_mesh()
            .y_labels(n)
            .y_label_formatter(&|v| match v {
                SegmentValue::CenterOf(i) => labels.get(*i).cloned().unwrap_or_default(),
                _ => String::new(),
            })
            .x_desc("attributed P/L")
            .x_label_formatter(&axis_number)
            .light_line_style(WHITE)
            .draw()
            .map_err(err)?;
        c.draw_series(items.iter().enumerate().map(|(i, (_, v))| {
            let col = if *v >= 0.0 { BASELINE } else { NEGATIVE };
            let mut r = Rectangle::new(
                [
                    (0.0, SegmentValue::Exact(i)),
                    (*v, SegmentValue::Exact(i + 1)),
                ],
                col.filled(),
            );
            r.set_margin(4, 4, 0, 0);
            r
        }))
        .map_err(err)?;
        if items.is_empty() {
            root.draw(&Text::new(
                "no P/L attributed to releases",
                (SIZE.0 as i32 / 2 - 110, 100),
                (FONT, 15),
            ))
            .map_err(err)?;
        }
        root.present().map_err(err)?;
    }
    Ok(s)
}

/// Trade P/L against minutes from the nearest release, window bounds drawn.
pub fn scatter(
    points: &[(f64, f64, bool)],
    pre: f64,
    post: f64,
    span_min: f64,
    caption: &str,
) -> Res {
    let mut s = String::new();
    {
        let root = SVGBackend::with_string(&mut s, SIZE).into_drawing_area();
        root.fill(&WHITE).map_err(err)?;
        let inside: Vec<(f64, f64, bool)> = points
            .iter()
            .copied()
            .filter(|p| p.0.abs() <= span_min && p.1.is_finite())
            .collect();
        let (y0, y1) = range(inside.iter().map(|p| p.1));
        let mut c = ChartBuilder::on(&root)
            .caption(caption, (FONT, 18))
            .margin(12)
            .x_label_area_size(36)
            .y_label_area_size(60)
            .build_cartesian_2d(-span_min..span_min, y0..y1)
            .map_err(err)?;
        c.configure_mesh()
            .x_desc("minutes from nearest release to the open")
            .y_desc("P/L")
            .y_label_formatter(&axis_number)
            .light_line_style(WHITE)
            .draw()
            .map_err(err)?;
        let calm: Vec<(f64, f64)> = inside.iter().filter(|p| !p.2).map(|p| (p.0, p.1)).collect();
        let hit: Vec<(f64, f64)> = inside.iter().filter(|p| p.2).map(|p| (p.0, p.1)).collect();
        c.draw_series(
            thin(&calm, 2500)
                .into_iter()
                .map(|p| Circle::new(p, 2, BASELINE.mix(0.35).filled())),
        )
        .map_err(err)?
        .label("not exposed")
        .legend(|(x, y)| Circle::new((x + 9, y), 3, BASELINE.filled()));
        c.draw_series(
            thin(&hit, 1500)
                .into_iter()
                .map(|p| Circle::new(p, 2, EXPOSED.filled())),
        )
        .map_err(err)?
        .label("exposed")
        .legend(|(x, y)| Circle::new((x + 9, y), 3, EXPOSED.filled()));
        for b in [-pre, post] {
            c.draw_series(std::iter::once(PathElement::new(
                vec![(b, y0), (b, y1)],
                BLACK.mix(0.5),
            )))
            .map_err(err)?;
        }
        c.configure_series_labels()
            .background_style(WHITE.mix(0.9))
            .border_style(BLACK.mix(0.3))
            .draw()
            .map_err(err)?;
        root.present().map_err(err)?;
    }
    Ok(s)
}

/// The heat map's colour for a value's position `shade` (0 = lowest, 1 =
/// highest) between the grid's least and greatest value: white to dark
/// blue.
fn heat_colour(shade: f64) -> RGBColor {
    let shade = shade.clamp(0.0, 1.0);
    let mix = |w: u8, d: u8| (w as f64 + (d as f64 - w as f64) * shade) as u8;
    RGBColor(
        mix(0xf4, BASELINE.0),
        mix(0xf7, BASELINE.1),
        mix(0xfb, BASELINE.2),
    )
}

/// Heat map of tail reduction over the pre × post grid, frontier cells
/// outlined, with a colour scale (`scale_label` names the value); cells
/// without a value are grey.
pub fn heatmap(
    pre: &[i64],
    post: &[i64],
    value: &dyn Fn(usize, usize) -> Option<f64>,
    frontier: &dyn Fn(usize, usize) -> bool,
    caption: &str,
    scale_label: &str,
) -> Res {
    let mut s = String::new();
    {
        let root = SVGBackend::with_string(&mut s, SIZE).into_drawing_area();
        root.fill(&WHITE).map_err(err)?;
        let root = root.titled(caption, (FONT, 18)).map_err(err)?;
        let (grid_area, scale_area) = root.split_horizontally(SIZE.0 - 120);
        let mut c = ChartBuilder::on(&grid_area)
            .margin(12)
            .x_label_area_size(36)
            .y_label_area_size(50)
            .build_cartesian_2d(0..post.len(), 0..pre.len())
            .map_err(err)?;
        c.configure_mesh()
            .disable_mesh()
            .x_labels(post.len())
            .y_labels(pre.len())
            .x_label_formatter(&|i| post.get(*i).map(|v| v.to_string()).unwrap_or_default())
            .y_label_formatter(&|i| pre.get(*i).map(|v| v.to_string()).unwrap_or_default())
            .x_desc("minutes after")
            .y_desc("minutes before")
            .draw()
            .map_err(err)?;
        let vals: Vec<f64> = (0..pre.len())
            .flat_map(|a| (0..post.len()).map(move |b| (a, b)))
            .filter_map(|(a, b)| value(a, b))
            .collect();
        let (lo, hi) = range(vals.into_iter());
        for a in 0..pre.len() {
            for b in 0..post.len() {
                let col = value(a, b).map_or(TICK, |v| heat_colour((v - lo) / (hi - lo)));
                c.draw_series(std::iter::once(Rectangle::new(
                    [(b, a), (b + 1, a + 1)],
                    col.filled(),
                )))
                .map_err(err)?;
                if frontier(a, b) {
                    c.draw_series(std::iter::once(Rectangle::new(
                        [(b, a), (b + 1, a + 1)],
                        EXPOSED.stroke_width(3),
                    )))
                    .map_err(err)?;
                }
            }
        }
        // The scale: the same colours from the least to the greatest value.
        let mut k = ChartBuilder::on(&scale_area)
            .margin_top(12)
            .margin_bottom(48)
            .margin_right(8)
            .y_label_area_size(62)
            .build_cartesian_2d(0.0..1.0, lo..hi)
            .map_err(err)?;
        k.configure_mesh()
            .disable_mesh()
            .disable_x_axis()
            .y_labels(6)
            .y_label_formatter(&axis_number)
            .y_label_style((FONT, 12))
            .axis_desc_style((FONT, 13))
            .y_desc(scale_label)
            .draw()
            .map_err(err)?;
        const STEPS: usize = 48;
        k.draw_series((0..STEPS).map(|i| {
            let (f0, f1) = (i as f64 / STEPS as f64, (i + 1) as f64 / STEPS as f64);
            Rectangle::new(
                [(0.0, lo + (hi - lo) * f0), (1.0, lo + (hi - lo) * f1)],
                heat_colour((f0 + f1) / 2.0).filled(),
            )
        }))
        .map_err(err)?;
        root.present().map_err(err)?;
    }
    Ok(s)
}

/// Baseline rank against removed rank, one point per run, with the
/// no-change diagonal.
/// Rank with every trade against rank without the exposed ones, one point
/// per run; runs in either top `top_k` are drawn larger and in the accent
/// colour, with the two top-k borders as lines.
pub fn rank_shift(points: &[(usize, usize, String)], top_k: usize, caption: &str) -> Res {
    let mut s = String::new();
    {
        let root = SVGBackend::with_string(&mut s, (560, 560)).into_drawing_area();
        root.fill(&WHITE).map_err(err)?;
        let n = points.len().max(2) as f64 + 1.0;
        let mut c = ChartBuilder::on(&root)
            .caption(caption, (FONT, 18))
            .margin(12)
            .x_label_area_size(36)
            .y_label_area_size(50)
            .build_cartesian_2d(0f64..n, 0f64..n)
            .map_err(err)?;
        c.configure_mesh()
            .x_desc("rank with all trades")
            .y_desc("rank without release trades")
            .light_line_style(WHITE)
            .draw()
            .map_err(err)?;
        c.draw_series(std::iter::once(PathElement::new(
            vec![(0.0, 0.0), (n, n)],
            TICK.stroke_width(1),
        )))
        .map_err(err)?;
        let in_top = |p: &(usize, usize, String)| p.0 <= top_k || p.1 <= top_k;
        let pts: Vec<(f64, f64)> = points
            .iter()
            .filter(|p| !in_top(p))
            .map(|p| (p.0 as f64, p.1 as f64))
            .collect();
        c.draw_series(
            thin(&pts, 3000)
                .into_iter()
                .map(|p| Circle::new(p, 3, BASELINE.filled())),
        )
        .map_err(err)?
        .label("run")
        .legend(|(x, y)| Circle::new((x + 9, y), 3, BASELINE.filled()));
        let edge = top_k as f64 + 0.5;
        if edge < n {
            for line in [vec![(edge, 0.0), (edge, n)], vec![(0.0, edge), (n, edge)]] {
                c.draw_series(std::iter::once(PathElement::new(
                    line,
                    EXPOSED.stroke_width(1),
                )))
                .map_err(err)?;
            }
        }
        c.draw_series(
            points
                .iter()
                .filter(|p| in_top(p))
                .map(|p| TriangleMarker::new((p.0 as f64, p.1 as f64), 5, EXPOSED.filled())),
        )
        .map_err(err)?
        .label(format!("in a top {top_k}"))
        .legend(|(x, y)| TriangleMarker::new((x + 9, y), 5, EXPOSED.filled()));
        // The ten runs that move most carry their names.
        let mut moved: Vec<&(usize, usize, String)> = points.iter().collect();
        moved.sort_by_key(|p| std::cmp::Reverse((p.0 as i64 - p.1 as i64).abs()));
        c.draw_series(moved.iter().take(10).map(|p| {
            Text::new(
                p.2.clone(),
                (p.0 as f64 + n * 0.01, p.1 as f64 + n * 0.01),
                (FONT, 11).into_font(),
            )
        }))
        .map_err(err)?;
        c.configure_series_labels()
            .position(SeriesLabelPosition::LowerRight)
            .background_style(WHITE.mix(0.9))
            .draw()
            .map_err(err)?;
        root.present().map_err(err)?;
    }
    Ok(s)
}

/// Sorted |P/L| ÷ mean |P/L| of several runs on one chart (log rank
/// axis), each in its own colour and line pattern, with the tail
/// threshold as a horizontal line.
pub fn tail_shapes(curves: &[(String, Vec<f64>)], threshold: f64, caption: &str) -> Res {
    let mut s = String::new();
    {
        let root = SVGBackend::with_string(&mut s, SIZE).into_drawing_area();
        root.fill(&WHITE).map_err(err)?;
        let n = curves.iter().map(|c| c.1.len()).max().unwrap_or(0).max(2) as f64;
        let top = curves
            .iter()
            .filter_map(|c| c.1.first().copied())
            .fold(threshold, f64::max)
            * 1.05;
        let mut c = ChartBuilder::on(&root)
            .caption(caption, (FONT, 18))
            .margin(12)
            .x_label_area_size(36)
            .y_label_area_size(60)
            .build_cartesian_2d((1f64..n).log_scale(), 0f64..top.max(1e-9))
            .map_err(err)?;
        c.configure_mesh()
            .x_desc("rank by |P/L| within the run (1 = largest, log scale)")
            .y_desc("|P/L| ÷ the run's mean |P/L|")
            .x_label_formatter(&axis_number)
            .y_label_formatter(&axis_number)
            .light_line_style(WHITE)
            .draw()
            .map_err(err)?;
        c.draw_series(std::iter::once(plotters::element::DashedPathElement::new(
            vec![(1.0, threshold), (n, threshold)],
            4,
            4,
            TICK.stroke_width(2),
        )))
        .map_err(err)?
        .label(format!("tail threshold {}", axis_number(&threshold)))
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], TICK.stroke_width(2)));
        const COLOURS: [RGBColor; 5] = [BASELINE, REMOVED, CAPPED, EXPOSED, NEGATIVE];
        for (i, (name, v)) in curves.iter().enumerate() {
            let pts: Vec<(f64, f64)> = v
                .iter()
                .enumerate()
                .map(|(k, y)| ((k + 1) as f64, *y))
                .collect();
            let style = COLOURS[i % COLOURS.len()].stroke_width(2);
            let (dash, gap) = PATTERN[(i / COLOURS.len() + i) % PATTERN.len()];
            let pts = thin_head(&pts, 400, 1500);
            let anno = if dash == 0 {
                c.draw_series(LineSeries::new(pts, style)).map_err(err)?
            } else {
                c.draw_series(DashedLineSeries::new(pts, dash, gap, style))
                    .map_err(err)?
            };
            anno.label(name.clone()).legend(move |(x, y)| {
                if dash == 0 {
                    PathElement::new(vec![(x, y), (x + 18, y)], style).into_dyn()
                } else {
                    plotters::element::DashedPathElement::new(
                        vec![(x, y), (x + 18, y)],
                        dash,
                        gap,
                        style,
                    )
                    .into_dyn()
                }
            });
        }
        c.configure_series_labels()
            .background_style(WHITE.mix(0.9))
            .border_style(BLACK.mix(0.3))
            .draw()
            .map_err(err)?;
        root.present().map_err(err)?;
    }
    Ok(s)
}

/// Everything the analyze charts draw.
pub struct AnalyzeCharts<'a> {
    pub summary: &'a crate::report::summary::Summary,
    pub sorted_abs: &'a [(f64, bool)],
    /// The removed scenario's magnitudes on the same basis, largest first.
    pub removed_abs: &'a [f64],
    /// Scenario (close instant, P/L) in close order: baseline, removed, capped.
    /// baseline, removed, capped, and stressed when there is one.
    pub curves: &'a [Vec<(i64, f64)>],
    pub span_start: i64,
    /// Instants of used high-tier releases.
    pub high_releases: Vec<i64>,
    /// (minutes from nearest release, P/L, exposed) per trade.
    pub scatter: Vec<(f64, f64, bool)>,
}

/// The analyze figures, in report order.
pub fn analyze_figures(d: &AnalyzeCharts) -> Result<Vec<super::Figure>, ChartError> {
    use super::Figure;
    let s = d.summary;
    let t = &s.tail;
    let what = match t.tcr_basis {
        crate::report::types::TailBasis::Amount => "|P/L|",
        crate::report::types::TailBasis::Return => "|return|",
    };
    let caption = format!(
        "Sorted {what}: TCR {} → {} (threshold {})",
        super::text::fmt_opt(t.baseline.tcr, 1),
        super::text::fmt_opt(t.removed.tcr, 1),
        t.threshold
    );
    let eq = |c: &[(i64, f64)]| {
        let mut acc = 0.0;
        std::iter::once((d.span_start, 0.0))
            .chain(c.iter().map(|&(t, p)| {
                acc += p;
                (t, acc)
            }))
            .collect::<Vec<_>>()
    };
    let curves: Vec<(&str, Vec<(i64, f64)>)> = ["baseline", "removed", "capped", "stressed"]
        .into_iter()
        .zip(d.curves)
        .map(|(name, c)| (name, eq(c)))
        .collect();
    let cats: Vec<(String, f64)> = s
        .attribution
        .by_category
        .iter()
        .map(|(k, g)| (k.clone(), g.attributed_pnl))
        .collect();
    let curs: Vec<(String, f64)> = s
        .attribution
        .by_currency
        .iter()
        .map(|(k, g)| (k.clone(), g.attributed_pnl))
        .collect();
    let high = s
        .settings
        .windows
        .high
        .unwrap_or(crate::report::types::Window {
            pre_min: 0,
            post_min: 0,
        });
    Ok(vec![
        Figure {
            id: "tail",
            caption: format!(
                "Trades by size of {what}, largest first; exposed trades marked. A steep start means a few trades carry the result."
            ),
            svg: tail_curve(d.sorted_abs, d.removed_abs, &caption)?,
        },
        Figure {
            id: "equity",
            caption: if d.summary.account_figures == crate::report::types::AccountFigures::PerRun {
                format!(
                    "Cumulative P/L of the three scenarios, summed over all {} runs (alternative parameter sets, so no account anyone held: read it for where in time the exposed P/L sits); grey ticks are top-tier releases.",
                    d.summary.runs.len()
                )
            } else {
                "Cumulative P/L of the three scenarios; grey ticks are top-tier releases.".into()
            },
            svg: equity(
                &curves,
                &d.high_releases,
                if d.summary.account_figures == crate::report::types::AccountFigures::PerRun {
                    "Summed P/L of all runs: baseline, removed, capped"
                } else {
                    "Equity: baseline, removed, capped"
                },
            )?,
        },
        Figure {
            id: "by-category",
            caption: "P/L attributed to releases, by category.".into(),
            svg: bars(&cats, "Attributed P/L by category")?,
        },
        Figure {
            id: "by-currency",
            caption: "P/L attributed to releases, by currency.".into(),
            svg: bars(&curs, "Attributed P/L by currency")?,
        },
        Figure {
            id: "scatter",
            caption: format!(
                "Trade P/L against minutes from the nearest relevant release to the open; lines at −{} and +{} minutes (high-tier window).",
                high.pre_min, high.post_min
            ),
            svg: scatter(
                &d.scatter,
                high.pre_min as f64,
                high.post_min as f64,
                240.0,
                "P/L around releases",
            )?,
        },
    ])
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn axis_labels_group_thousands_without_needless_decimals() {
        let cases = [
            (2500.0, "2,500"),
            (-12000.0, "-12,000"),
            (1234567.4, "1,234,567"),
            (250.0, "250"),
            (12.5, "12.5"),
            (40.0, "40"),
            (0.125, "0.125"),
            (0.1, "0.1"),
            (0.0, "0"),
            (-0.5, "-0.5"),
        ];
        for (v, want) in cases {
            assert_eq!(axis_number(&v), want, "{v}");
        }
    }

    #[test]
    fn thinning_keeps_ends_and_bounds() {
        let v: Vec<usize> = (0..10_000).collect();
        let t = thin(&v, 100);
        assert_eq!(t.len(), 100);
        assert_eq!((t[0], t[99]), (0, 9_999));
        assert_eq!(thin(&v[..5], 100).len(), 5);
    }
}
