//! PNG output with little memory: a figure is drawn in horizontal bands, each band into
//! one small RGB buffer that is handed to a streaming PNG encoder before the next band is
//! drawn. The whole image never sits in memory, neither raw nor compressed; only the
//! band and the encoder's window do.
//!
//! [`Band`] is a plotters backend the size of the whole figure that keeps only the
//! pixels of rows `y0..y1`; everything outside is dropped as it is drawn. Drawing a
//! figure once per band costs the drawing time times the number of bands, which for
//! these figures (a few thousand shapes each) is a few milliseconds a band. Its pixels
//! are those plotters' own bitmap backend draws: the same fast paths for filled
//! rectangles and one-pixel horizontal and vertical lines, the same alpha blend, and
//! the shared rasterizer for the rest.

use super::{Draw, FigureMeta};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters_backend::{
    BackendColor, BackendCoord, BackendStyle, DrawingBackend, DrawingErrorKind,
};
use std::io::Write;

/// Bytes of RGB a band may hold (rows of the figure's width are fitted into it; a band
/// is at least one row).
pub const BAND_BYTES: usize = 32 * 1024;

/// Points of a wide path filled at a time.
const PATH_PIECE: usize = 64;

/// The backend's error: it has none of its own.
#[derive(Debug)]
pub struct BandError;

impl std::fmt::Display for BandError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("band backend error")
    }
}

impl std::error::Error for BandError {}

/// A drawing backend of the whole figure's size that keeps rows `y0..y1` in `buf`.
pub struct Band<'a> {
    buf: &'a mut [u8],
    size: (u32, u32),
    y0: i32,
    y1: i32,
}

impl<'a> Band<'a> {
    /// A band over rows `y0..y1` of a figure of `size` pixels; `buf` holds at least
    /// (y1 − y0) × width × 3 bytes and should start white.
    pub fn new(buf: &'a mut [u8], size: (u32, u32), y0: u32, y1: u32) -> Self {
        Band {
            buf,
            size,
            y0: y0 as i32,
            y1: y1 as i32,
        }
    }

    /// Byte offset of pixel (x, y), which must lie in the band.
    #[inline]
    fn at(&self, x: i32, y: i32) -> usize {
        (((y - self.y0) as usize) * self.size.0 as usize + x as usize) * 3
    }

    /// Fills columns x0..x1 of rows y0..y1 (exclusive ends, any order), clipped to the
    /// band, blending with `alpha` below 1 as plotters' bitmap backend does.
    fn fill(&mut self, a: (i32, i32), b: (i32, i32), rgb: (u8, u8, u8), alpha: f64) {
        let w = self.size.0 as i32;
        let (x0, x1) = (a.0.min(b.0).max(0), a.0.max(b.0).min(w));
        let (y0, y1) = (
            a.1.min(b.1).max(0).max(self.y0),
            a.1.max(b.1).min(self.size.1 as i32).min(self.y1),
        );
        if x0 >= x1 || y0 >= y1 {
            return;
        }
        let alpha = alpha.clamp(0.0, 1.0);
        if alpha == 0.0 {
            return;
        }
        let solid = alpha >= 1.0;
        let a256 = (256.0 * alpha).floor() as u64;
        for y in y0..y1 {
            let start = self.at(x0, y);
            let row = &mut self.buf[start..start + (x1 - x0) as usize * 3];
            for px in row.chunks_exact_mut(3) {
                if solid {
                    px.copy_from_slice(&[rgb.0, rgb.1, rgb.2]);
                } else {
                    blend(&mut px[0], rgb.0, a256);
                    blend(&mut px[1], rgb.1, a256);
                    blend(&mut px[2], rgb.2, a256);
                }
            }
        }
    }
}

/// The blend of plotters' bitmap backend: `prev` moved towards `new` by a/256.
#[inline]
fn blend(prev: &mut u8, new: u8, a: u64) {
    if new > *prev {
        *prev += (u64::from(new - *prev) * a / 256) as u8
    } else {
        *prev -= (u64::from(*prev - new) * a / 256) as u8
    }
}

impl DrawingBackend for Band<'_> {
    type ErrorType = BandError;

    fn get_size(&self) -> (u32, u32) {
        self.size
    }

    fn ensure_prepared(&mut self) -> Result<(), DrawingErrorKind<BandError>> {
        Ok(())
    }

    fn present(&mut self) -> Result<(), DrawingErrorKind<BandError>> {
        Ok(())
    }

    fn draw_pixel(
        &mut self,
        p: BackendCoord,
        color: BackendColor,
    ) -> Result<(), DrawingErrorKind<BandError>> {
        if p.0 < 0 || p.0 >= self.size.0 as i32 || p.1 < self.y0 || p.1 >= self.y1 {
            return Ok(());
        }
        let alpha = color.alpha;
        if alpha <= 0.0 {
            return Ok(());
        }
        let i = self.at(p.0, p.1);
        let (r, g, b) = color.rgb;
        if alpha >= 1.0 - 1.0 / 256.0 {
            self.buf[i..i + 3].copy_from_slice(&[r, g, b]);
        } else {
            let a = (alpha * 256.0).floor() as u64;
            blend(&mut self.buf[i], r, a);
            blend(&mut self.buf[i + 1], g, a);
            blend(&mut self.buf[i + 2], b, a);
        }
        Ok(())
    }

    fn draw_line<S: BackendStyle>(
        &mut self,
        from: BackendCoord,
        to: BackendCoord,
        style: &S,
    ) -> Result<(), DrawingErrorKind<BandError>> {
        if (from.0 == to.0 || from.1 == to.1) && style.stroke_width() == 1 {
            let c = style.color();
            if from.1 == to.1 || c.alpha < 1.0 {
                self.fill(from, (to.0 + 1, to.1 + 1), c.rgb, c.alpha);
            } else {
                // A vertical line, both ends included.
                let (a, b) = (from.1.min(to.1), from.1.max(to.1));
                self.fill((from.0, a), (from.0 + 1, b + 1), c.rgb, 1.0);
            }
            return Ok(());
        }
        plotters_backend::rasterizer::draw_line(self, from, to, style)
    }

    fn draw_path<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        path: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<BandError>> {
        if style.color().alpha == 0.0 {
            return Ok(());
        }
        if style.stroke_width() <= 1 {
            let mut begin: Option<BackendCoord> = None;
            for end in path {
                if let Some(b) = begin {
                    self.draw_line(b, end, style)?;
                }
                begin = Some(end);
            }
            return Ok(());
        }
        // A wide path is filled as the outline of pieces of PATH_PIECE points, each
        // starting where the last ended, so that a long curve never needs its whole
        // outline in memory. A path of up to PATH_PIECE points is one piece, drawn as
        // plotters draws it.
        let mut piece: Vec<BackendCoord> = Vec::with_capacity(PATH_PIECE);
        for p in path {
            piece.push(p);
            if piece.len() == PATH_PIECE {
                let outline =
                    plotters_backend::rasterizer::polygonize(&piece, style.stroke_width());
                self.fill_polygon(outline, &style.color())?;
                let last = piece[PATH_PIECE - 1];
                piece.clear();
                piece.push(last);
            }
        }
        if piece.len() > 1 {
            let outline = plotters_backend::rasterizer::polygonize(&piece, style.stroke_width());
            self.fill_polygon(outline, &style.color())?;
        }
        Ok(())
    }

    fn draw_rect<S: BackendStyle>(
        &mut self,
        upper_left: BackendCoord,
        bottom_right: BackendCoord,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<BandError>> {
        if fill {
            let c = style.color();
            self.fill(upper_left, bottom_right, c.rgb, c.alpha);
            return Ok(());
        }
        plotters_backend::rasterizer::draw_rect(self, upper_left, bottom_right, style, fill)
    }
}

/// Rows per band for a figure `width` pixels wide.
pub fn band_rows(width: u32) -> u32 {
    ((BAND_BYTES / (width.max(1) as usize * 3)) as u32).max(1)
}

/// Draws `d` at `size` pixels as a PNG written to `out`, band by band. Returns what the
/// first band's drawing recorded (every band records the same).
pub fn write_png<D: Draw, W: Write>(d: &D, size: (u32, u32), out: W) -> Result<FigureMeta, String> {
    let (w, h) = size;
    let rows = band_rows(w).min(h.max(1));
    let mut buf = vec![255u8; rows as usize * w as usize * 3];
    let mut enc = png::Encoder::new(out, w, h);
    enc.set_color(png::ColorType::Rgb);
    enc.set_depth(png::BitDepth::Eight);
    enc.set_compression(png::Compression::Fast);
    let mut writer = enc.write_header().map_err(|e| e.to_string())?;
    let mut stream = writer
        .stream_writer_with_size(16 * 1024)
        .map_err(|e| e.to_string())?;
    let mut meta = FigureMeta::default();
    let mut y0 = 0;
    while y0 < h {
        let y1 = (y0 + rows).min(h);
        let len = (y1 - y0) as usize * w as usize * 3;
        let band = &mut buf[..len];
        band.fill(255);
        {
            let root: DrawingArea<Band<'_>, Shift> =
                Band::new(band, size, y0, y1).into_drawing_area();
            let mut m = FigureMeta::default();
            d.draw(&root, &mut m)?;
            root.present().map_err(super::de)?;
            if y0 == 0 {
                meta = m;
            }
        }
        stream.write_all(band).map_err(|e| e.to_string())?;
        y0 = y1;
    }
    stream.finish().map_err(|e| e.to_string())?;
    writer.finish().map_err(|e| e.to_string())?;
    Ok(meta)
}

#[cfg(test)]
mod tests {
    use super::{write_png, Band};
    use crate::report::figures::{Draw, FigureMeta};
    use plotters::coord::Shift;
    use plotters::prelude::*;

    /// A drawing with every path of the backend: filled and outlined rectangles, lines
    /// of width 1 and 3 in every direction, a blended fill, a circle, a polygon and text.
    struct Sample;

    impl Draw for Sample {
        fn draw<DB: DrawingBackend>(
            &self,
            root: &DrawingArea<DB, Shift>,
            _meta: &mut FigureMeta,
        ) -> Result<(), String> {
            let de = super::super::de;
            root.fill(&WHITE).map_err(de)?;
            let c = RGBColor(0x17, 0x5a, 0x73);
            root.draw(&Rectangle::new([(5, 5), (60, 40)], c.filled()))
                .map_err(de)?;
            root.draw(&Rectangle::new([(70, 8), (120, 50)], c.stroke_width(1)))
                .map_err(de)?;
            root.draw(&Rectangle::new(
                [(30, 20), (90, 70)],
                RGBColor(200, 30, 40).mix(0.5).filled(),
            ))
            .map_err(de)?;
            for (a, b, w) in [
                ((0, 60), (140, 60), 1),
                ((100, 0), (100, 90), 1),
                ((130, 80), (10, 2), 1),
                ((10, 85), (135, 30), 3),
            ] {
                root.draw(&PathElement::new(vec![a, b], c.stroke_width(w)))
                    .map_err(de)?;
            }
            root.draw(&Circle::new((40, 70), 9, c.filled()))
                .map_err(de)?;
            root.draw(&Polygon::new(
                vec![(110, 70), (139, 75), (120, 99), (105, 90)],
                RGBColor(0xb8, 0x57, 0x1f).filled(),
            ))
            .map_err(de)?;
            super::super::register_font();
            root.draw(&Text::new(
                "kvar 0.95 lag",
                (8, 44),
                super::super::text(13.0),
            ))
            .map_err(de)?;
            Ok(())
        }
    }

    /// The PNG drawn band by band decodes to the very pixels plotters' bitmap backend
    /// draws in one piece (bands of 7 rows, so that shapes and text cross band edges).
    #[test]
    fn bands_give_the_pixels_of_the_whole_bitmap() {
        let size = (140, 100);
        let mut whole = vec![255u8; 140 * 100 * 3];
        {
            let root = BitMapBackend::with_buffer(&mut whole, size).into_drawing_area();
            Sample.draw(&root, &mut FigureMeta::default()).unwrap();
            root.present().unwrap();
        }
        let mut banded = vec![255u8; 140 * 100 * 3];
        let mut y0 = 0;
        while y0 < 100 {
            let y1 = (y0 + 7).min(100);
            let len = (y1 - y0) as usize * 140 * 3;
            let mut band = vec![255u8; len];
            {
                let root = Band::new(&mut band, size, y0, y1).into_drawing_area();
                Sample.draw(&root, &mut FigureMeta::default()).unwrap();
            }
            let start = y0 as usize * 140 * 3;
            banded[start..start + len].copy_from_slice(&band);
            y0 = y1;
        }
        // Opaque drawing is exact; the half-transparent rectangle may differ by one
        // level in a channel, since plotters blends whole rectangles in packed integer
        // arithmetic that rounds a little differently from its per-pixel blend.
        let mut blended = 0;
        for (i, (a, b)) in whole.chunks(3).zip(banded.chunks(3)).enumerate() {
            let (x, y) = (i % 140, i / 140);
            let in_blend = (30..90).contains(&x) && (20..70).contains(&y);
            if in_blend {
                blended += usize::from(a != b);
                assert!(
                    a.iter().zip(b).all(|(p, q)| p.abs_diff(*q) <= 1),
                    "({x}, {y}): {a:?} against {b:?}"
                );
            } else {
                assert_eq!(a, b, "({x}, {y})");
            }
        }
        assert!(blended < 60 * 50);
    }

    #[test]
    fn streamed_png_decodes_to_the_figure_size() {
        let mut out = Vec::new();
        write_png(&Sample, (140, 100), &mut out).unwrap();
        let dec = png::Decoder::new(std::io::Cursor::new(out));
        let mut r = dec.read_info().unwrap();
        let mut buf = vec![0; r.output_buffer_size().unwrap()];
        let info = r.next_frame(&mut buf).unwrap();
        assert_eq!((info.width, info.height), (140, 100));
        // Not blank: the filled rectangle's teal is there.
        assert!(buf.chunks(3).any(|p| p == [0x17, 0x5a, 0x73]));
    }
}
