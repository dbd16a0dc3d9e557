//! PNG output: our SVG rasterized with `resvg` (pure Rust, tiny-skia renderer).
//!
//! Text needs a font, and a fresh machine may have none: the DejaVu Sans
//! regular face (Bitstream Vera licence, public-domain DejaVu changes) is
//! embedded from the `dejavu` crate and is the only font the renderer sees, so
//! the same SVG gives the same PNG on every machine.
//!
//! ```
//! use fluxloom::plot::{png::svg_to_png, Figure};
//!
//! let fig = Figure::new(200.0, 150.0);
//! let bytes = svg_to_png(&fig.to_svg(), 1.0).unwrap();
//! assert_eq!(&bytes[1..4], b"PNG");
//! ```

use std::sync::{Arc, OnceLock};

use super::Figure;

/// Why an SVG could not be turned into a PNG.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("cannot render PNG: {0}")]
pub struct PngError(pub String);

/// The font database with the embedded DejaVu Sans, built once.
fn fonts() -> Arc<resvg::usvg::fontdb::Database> {
    static DB: OnceLock<Arc<resvg::usvg::fontdb::Database>> = OnceLock::new();
    DB.get_or_init(|| {
        let mut db = resvg::usvg::fontdb::Database::new();
        db.load_font_data(dejavu::sans::regular().to_vec());
        db.set_sans_serif_family("DejaVu Sans");
        Arc::new(db)
    })
    .clone()
}

/// Rasterizes an SVG document to PNG bytes, `scale` device pixels per SVG pixel
/// (2.0 for slides). The output size is the SVG's width and height times `scale`,
/// rounded up.
///
/// # Errors
/// [`PngError`] when the SVG does not parse, the size is zero, or encoding fails.
pub fn svg_to_png(svg: &str, scale: f32) -> Result<Vec<u8>, PngError> {
    let options = resvg::usvg::Options {
        fontdb: fonts(),
        font_family: "DejaVu Sans".to_string(),
        ..resvg::usvg::Options::default()
    };
    let tree = resvg::usvg::Tree::from_str(svg, &options).map_err(|e| PngError(e.to_string()))?;
    let size = tree.size();
    let width = (size.width() * scale).ceil() as u32;
    let height = (size.height() * scale).ceil() as u32;
    let mut pixmap = resvg::tiny_skia::Pixmap::new(width, height)
        .ok_or_else(|| PngError(format!("image size {width} x {height} px is empty")))?;
    resvg::render(
        &tree,
        resvg::tiny_skia::Transform::from_scale(scale, scale),
        &mut pixmap.as_mut(),
    );
    pixmap.encode_png().map_err(|e| PngError(e.to_string()))
}

impl Figure {
    /// The figure as PNG bytes at `scale` device pixels per figure pixel.
    ///
    /// # Errors
    /// See [`svg_to_png`].
    pub fn to_png(&self, scale: f32) -> Result<Vec<u8>, PngError> {
        svg_to_png(&self.to_svg(), scale)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::{Axis, PointStyle};

    #[test]
    fn png_has_the_stated_size_and_is_not_blank() {
        let mut fig = Figure::new(320.0, 240.0);
        fig.x_axis = Axis::linear("x (mag)", 0.0, 1.0);
        fig.y_axis = Axis::linear("y (mag)", 0.0, 1.0);
        fig.points(&[(0.5, 0.5)], &PointStyle::default(), "p");
        let bytes = fig.to_png(2.0).unwrap();
        let decoder = png::Decoder::new(std::io::Cursor::new(bytes));
        let mut reader = decoder.read_info().unwrap();
        let mut buf = vec![0; reader.output_buffer_size().unwrap()];
        let info = reader.next_frame(&mut buf).unwrap();
        assert_eq!((info.width, info.height), (640, 480));
        let dark = buf.chunks(4).filter(|p| p[0] < 100 && p[3] > 200).count();
        assert!(dark > 500, "only {dark} dark pixels");
    }

    #[test]
    fn broken_svg_is_an_error() {
        let err = svg_to_png("<svg", 1.0).unwrap_err();
        assert!(err.to_string().starts_with("cannot render PNG: "));
    }
}
