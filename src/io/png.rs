//! PNG pictures of our own SVG maps, rendered with resvg. Text is set in
//! the font shipped in `assets/fonts/` (a subset of DejaVu Sans), never a
//! system font, so a PNG is the same on every machine.

use std::sync::Arc;

/// The font every PNG uses for `sans-serif`.
const FONT: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans-subset.ttf");

/// Renders an SVG document to PNG bytes at its own size.
pub fn render(svg: &[u8]) -> Result<Vec<u8>, String> {
    let mut fonts = resvg::usvg::fontdb::Database::new();
    fonts.load_font_data(FONT.to_vec());
    fonts.set_sans_serif_family("DejaVu Sans");
    let options = resvg::usvg::Options {
        font_family: "DejaVu Sans".into(),
        fontdb: Arc::new(fonts),
        ..Default::default()
    };
    let tree = resvg::usvg::Tree::from_data(svg, &options).map_err(|e| e.to_string())?;
    let size = tree.size().to_int_size();
    let mut pixmap =
        resvg::tiny_skia::Pixmap::new(size.width(), size.height()).ok_or_else(|| {
            format!(
                "a picture of {}x{} pixels is too large",
                size.width(),
                size.height()
            )
        })?;
    resvg::render(
        &tree,
        resvg::tiny_skia::Transform::default(),
        &mut pixmap.as_mut(),
    );
    pixmap.encode_png().map_err(|e| e.to_string())
}
