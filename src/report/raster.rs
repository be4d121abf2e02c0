//! The embedded font and the SVG drawings read by usvg (cargo feature `pdf`): the parse options
//! the PDF draws its plots with, and a drawing rasterised to PNG by resvg (`seepd plot --out
//! FILE.png`). No layout here (that is `pdf`'s) and no drawing of our own (`chart`'s).

use std::sync::Arc;

/// DejaVu Sans (free licence, `assets/fonts/DejaVuSans-LICENSE.txt`), embedded.
pub(crate) const FONT: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

/// Parse options whose only font is the embedded DejaVu Sans (also for `sans-serif`), so a
/// drawing looks the same on every machine.
pub(crate) fn svg_options() -> usvg::Options<'static> {
    let mut db = usvg::fontdb::Database::new();
    db.load_font_data(FONT.to_vec());
    db.set_sans_serif_family("DejaVu Sans");
    usvg::Options {
        fontdb: Arc::new(db),
        font_family: "DejaVu Sans".into(),
        ..usvg::Options::default()
    }
}

/// The SVG drawing as a PNG image `scale` times its size in pixels, on white.
///
/// # Errors
/// The SVG does not parse, the size is zero or too large, or the PNG cannot be encoded.
pub fn png(svg: &str, scale: f32) -> anyhow::Result<Vec<u8>> {
    let tree = usvg::Tree::from_str(svg, &svg_options())
        .map_err(|e| anyhow::anyhow!("the drawing is not valid SVG: {e}"))?;
    let size =
        tree.size().to_int_size().scale_by(scale).ok_or_else(|| {
            anyhow::anyhow!("the drawing has no size to rasterise at scale {scale}")
        })?;
    let mut pixmap = resvg::tiny_skia::Pixmap::new(size.width(), size.height())
        .ok_or_else(|| anyhow::anyhow!("cannot make a {size:?} image"))?;
    pixmap.fill(resvg::tiny_skia::Color::WHITE);
    resvg::render(
        &tree,
        resvg::tiny_skia::Transform::from_scale(scale, scale),
        &mut pixmap.as_mut(),
    );
    pixmap
        .encode_png()
        .map_err(|e| anyhow::anyhow!("cannot encode the PNG: {e}"))
}
