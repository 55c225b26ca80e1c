//! PNG copies of the SVG charts, rasterised with resvg. Fonts come from the
//! system (fontdb); with none installed, text is left out of the PNG.

use super::charts::ChartError;
use resvg::{tiny_skia, usvg};
use std::sync::OnceLock;

fn options() -> &'static usvg::Options<'static> {
    static OPTS: OnceLock<usvg::Options<'static>> = OnceLock::new();
    OPTS.get_or_init(|| {
        let mut o = usvg::Options::default();
        let db = o.fontdb_mut();
        db.load_system_fonts();
        // Charts ask for the generic "sans-serif": point it at a font that
        // is actually installed.
        let families: Vec<String> = db
            .faces()
            .flat_map(|f| f.families.iter().map(|x| x.0.clone()))
            .collect();
        let pick = [
            "DejaVu Sans",
            "Liberation Sans",
            "Noto Sans",
            "Arial",
            "FreeSans",
        ]
        .iter()
        .find(|p| families.iter().any(|f| f == *p))
        .map(|p| p.to_string())
        .or_else(|| families.first().cloned());
        if let Some(f) = pick {
            db.set_sans_serif_family(f);
        }
        o
    })
}

/// Whether any system font was found (PNG text needs one).
pub fn have_fonts() -> bool {
    !options().fontdb.is_empty()
}

/// Rasterises an SVG at its own size, on a white background.
pub fn svg_to_png(svg: &str) -> Result<Vec<u8>, ChartError> {
    let tree = usvg::Tree::from_str(svg, options())?;
    let size = tree.size().to_int_size();
    let mut pixmap =
        tiny_skia::Pixmap::new(size.width(), size.height()).ok_or(ChartError::NoSize)?;
    pixmap.fill(tiny_skia::Color::WHITE);
    resvg::render(&tree, tiny_skia::Transform::default(), &mut pixmap.as_mut());
    pixmap
        .encode_png()
        .map_err(|e| ChartError::Png(e.to_string()))
}
