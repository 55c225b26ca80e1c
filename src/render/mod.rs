//! Renderers: turn result structs into bytes (terminal tables, CSV,
//! Parquet). No computation happens here; `output` owns the paths and atomic writes.

#[cfg(feature = "charts")]
pub mod charts;
pub mod files;
pub mod html;
pub mod output;
#[cfg(feature = "charts")]
pub mod png;
pub mod schedule;
pub mod table;
pub mod term;
pub mod text;

/// The snake_case name an enum has in JSON (`overlap`, `fixed`, `sharpe`),
/// so terminal, HTML and JSON use the same words.
pub fn label<T: serde::Serialize>(v: &T) -> String {
    serde_json::to_value(v)
        .ok()
        .and_then(|v| v.as_str().map(String::from))
        .unwrap_or_default()
}

/// Tier windows as "high 15/30, medium 5/10, low off".
pub fn windows_text(w: &crate::report::types::WindowSettings) -> String {
    let f = |x: Option<crate::report::types::Window>| {
        x.map_or("off".to_string(), |w| {
            format!("{}/{}", w.pre_min, w.post_min)
        })
    };
    format!(
        "high {}, medium {}, low {}",
        f(w.high),
        f(w.medium),
        f(w.low)
    )
}

/// A drawn chart with its caption: what the chart renderer hands the HTML
/// report.
pub struct Figure {
    /// File stem and anchor (`chart-ID.svg`).
    pub id: &'static str,
    /// One sentence under the chart.
    pub caption: String,
    /// The SVG document.
    pub svg: String,
}
