//! Figures: each one drawn with `plotters` twice from the same code, as SVG text and as a
//! PNG image, with the house style (colours, fonts, legends, axis words) kept here.
//!
//! - [`time`]: what a run did over time, from a finished [`crate::trace::Trace`]: the
//!   supply PF against the target with the controller's demand against the dead band
//!   (overcorrection episodes shaded), the kvar needed against the kvar delivered, the
//!   step states as a raster, and the hour-of-day × day heat map of the supply PF;
//! - [`steps`]: operations and years to rated life per step;
//! - [`impedance`]: |Z(h)| of the bank states reached, with the load's harmonics and the
//!   impedance at which each harmonic reaches its voltage limit;
//! - [`tradeoff`]: plain-data figures for comparing candidate settings or layouts: a
//!   trade-off scatter with its front and a recommendation, and a duration curve with
//!   reachable levels.
//!
//! A figure is a [`Plot`]: its words and a [`Drawing`], drawn only when written. The SVG
//! is written element by element as it is drawn ([`svg`]), to the figure's file and the
//! page at once; the PNG band by band ([`bitmap`]); so no whole image is ever held.
//!
//! Text is measured and, in the PNG, drawn with DejaVu Sans embedded in the binary
//! (`assets/fonts/`), so no system font is needed; the SVG names the generic
//! `sans-serif` family. Every SVG file ends with a `<metadata>` element listing what the
//! figure plotted (series name, unit, lowest and highest value drawn, number of points,
//! and named points such as a sweep's settings), so a test or a reader can check a
//! figure against the JSON report.
//!
//! The palette is chosen to stay apart when printed in grey: the series differ in
//! lightness and in line pattern, not in hue alone.

pub mod bitmap;
pub mod impedance;
pub mod steps;
pub mod svg;
pub mod time;
pub mod tradeoff;

use plotters::coord::Shift;
use plotters::prelude::*;
use std::io::Write;
use std::sync::Once;

pub use impedance::impedance_figure;
pub use steps::wear_figure;
pub use time::{heatmap_figure, kvar_figure, pf_figure, raster_figure};
pub use tradeoff::{
    duration_curve, tradeoff_scatter, DurationData, Ladder, Level, TradeoffData, TradeoffPoint,
};

/// A figure drawn in memory: its file name stem, words, SVG and PNG. The report folders
/// do not hold figures in memory; they write each [`Plot`] straight to its files
/// ([`Plot::write_files`]). This form is for callers that want the bytes.
#[derive(Debug, Clone)]
pub struct Figure {
    /// File name without extension, e.g. `pf-over-time`.
    pub name: String,
    /// The figure's title, a sentence.
    pub title: String,
    /// What the figure shows and how to read it, one or two sentences.
    pub caption: String,
    /// The SVG document (standalone, with its XML namespace, title and metadata).
    pub svg: String,
    /// The PNG image.
    pub png: Vec<u8>,
    /// What was plotted.
    pub meta: FigureMeta,
}

/// What a figure plotted: its series and their extremes, and any points worth naming.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct FigureMeta {
    /// The series drawn.
    pub series: Vec<SeriesMeta>,
    /// Rows of a raster or heat map, if the figure has them.
    pub rows: Option<usize>,
    /// Named points (a setting of a sweep, a level of a layout), in drawing order.
    pub marks: Vec<MarkMeta>,
}

/// One series of a figure.
#[derive(Debug, Clone, PartialEq)]
pub struct SeriesMeta {
    /// Name of the series as the legend says it.
    pub name: String,
    /// Unit of its values (`kvar`, `ohm`, `PF scale`, ...).
    pub unit: String,
    /// Lowest value drawn.
    pub min: f64,
    /// Highest value drawn.
    pub max: f64,
    /// Points (or bars, cells) drawn.
    pub points: usize,
}

/// One named point of a figure, in the units of its axes.
#[derive(Debug, Clone, PartialEq)]
pub struct MarkMeta {
    /// What the point is, e.g. `setting 3` or a layout's label.
    pub name: String,
    /// Its x value (axis units; for a column of levels, the column from 0).
    pub x: f64,
    /// Its y value (axis units).
    pub y: f64,
    /// Space-separated roles, e.g. `front recommended`.
    pub tags: String,
}

impl FigureMeta {
    /// Records a series from the values drawn (non-finite values are left out).
    pub fn add(&mut self, name: &str, unit: &str, values: impl IntoIterator<Item = f64>) {
        let (mut lo, mut hi, mut n) = (f64::INFINITY, f64::NEG_INFINITY, 0);
        for v in values {
            if v.is_finite() {
                lo = lo.min(v);
                hi = hi.max(v);
                n += 1;
            }
        }
        self.series.push(SeriesMeta {
            name: name.to_string(),
            unit: unit.to_string(),
            min: lo,
            max: hi,
            points: n,
        });
    }

    /// Records a named point.
    pub fn mark(&mut self, name: &str, x: f64, y: f64, tags: &str) {
        self.marks.push(MarkMeta {
            name: name.to_string(),
            x,
            y,
            tags: tags.to_string(),
        });
    }

    /// The series named `name`.
    pub fn get(&self, name: &str) -> Option<&SeriesMeta> {
        self.series.iter().find(|s| s.name == name)
    }
}

/// A figure could not be drawn.
#[derive(Debug, thiserror::Error)]
#[error("cannot draw the figure {figure}: {message}")]
pub struct FigureError {
    /// The figure's name.
    pub figure: String,
    /// What went wrong.
    pub message: String,
}

/// Pixel size of a wide figure (time plots).
pub const WIDE: (u32, u32) = (1100, 520);
/// Pixel size of a medium figure.
pub const MEDIUM: (u32, u32) = (1100, 440);

// The palette: ink for text and axes; the main series dark, envelopes light, the bank
// mid-dark and warm, so that every pair differs in lightness as well as hue.
/// Text and axes.
pub const INK: RGBColor = RGBColor(0x24, 0x2c, 0x33);
/// Grid lines.
pub const GRID: RGBColor = RGBColor(0xdd, 0xe2, 0xe6);
/// The main series (deep teal).
pub const MAIN: RGBColor = RGBColor(0x17, 0x5a, 0x73);
/// The light envelope of the main series (pale teal).
pub const MAIN_LIGHT: RGBColor = RGBColor(0xa9, 0xcf, 0xdc);
/// The bank's output (burnt orange).
pub const BANK: RGBColor = RGBColor(0xb8, 0x57, 0x1f);
/// The bank's envelope (pale apricot).
pub const BANK_LIGHT: RGBColor = RGBColor(0xf2, 0xc9, 0xa8);
/// The dead band and other allowed zones (pale sage).
pub const BAND: RGBColor = RGBColor(0xdc, 0xe6, 0xcf);
/// Overcorrection shading (pale rose).
pub const OVER: RGBColor = RGBColor(0xf3, 0xb9, 0xc0);
/// Limits and warnings (dark crimson).
pub const LIMIT: RGBColor = RGBColor(0x8c, 0x1c, 0x2e);
/// Secondary lines (mid grey).
pub const MUTED: RGBColor = RGBColor(0x7d, 0x86, 0x8e);

/// Stops of the sequential colour scale (dark plum to pale straw), monotonic in
/// lightness so that it reads in grey.
const SCALE: [(u8, u8, u8); 6] = [
    (0x1e, 0x14, 0x3c),
    (0x4a, 0x2a, 0x6e),
    (0x8a, 0x3b, 0x7c),
    (0xc9, 0x5c, 0x6a),
    (0xee, 0x9a, 0x5c),
    (0xfb, 0xe9, 0xa9),
];

/// The colour of `x` in 0..1 on the sequential scale.
pub fn scale_colour(x: f64) -> RGBColor {
    let x = if x.is_finite() {
        x.clamp(0.0, 1.0)
    } else {
        0.0
    };
    let pos = x * (SCALE.len() - 1) as f64;
    let i = (pos.floor() as usize).min(SCALE.len() - 2);
    let f = pos - i as f64;
    let mix = |a: u8, b: u8| (a as f64 + (b as f64 - a as f64) * f).round() as u8;
    let (a, b) = (SCALE[i], SCALE[i + 1]);
    RGBColor(mix(a.0, b.0), mix(a.1, b.1), mix(a.2, b.2))
}

/// `c` blended with white: 1 gives `c`, 0 gives white. Solid tints print the same
/// everywhere, where transparency may not.
pub fn tint(c: RGBColor, f: f64) -> RGBColor {
    let f = f.clamp(0.0, 1.0);
    let m = |x: u8| (255.0 - (255.0 - x as f64) * f).round() as u8;
    RGBColor(m(c.0), m(c.1), m(c.2))
}

/// The font family every figure uses.
pub const FAMILY: &str = "sans-serif";

static FONT: Once = Once::new();

/// Registers the embedded font under [`FAMILY`] (once per process).
fn register_font() {
    FONT.call_once(|| {
        let bytes: &'static [u8] = include_bytes!("../../../assets/fonts/DejaVuSans.ttf");
        // The embedded file is a valid font; if it were not, text would be missing from
        // the figures and the tests that read their labels would fail.
        let _ = plotters::style::register_font(FAMILY, FontStyle::Normal, bytes);
    });
}

/// Text style of a size, in ink.
pub fn text(size: f64) -> TextStyle<'static> {
    (FAMILY, size).into_font().color(&INK)
}

/// The house style of every chart's mesh: label and axis text, grid and axis colours.
pub trait HouseMesh {
    /// Applies the house style.
    fn house(&mut self) -> &mut Self;
}

impl<X, Y, XT, YT, DB> HouseMesh for plotters::chart::MeshStyle<'_, '_, X, Y, DB>
where
    X: Ranged<ValueType = XT> + plotters::coord::ranged1d::ValueFormatter<XT>,
    Y: Ranged<ValueType = YT> + plotters::coord::ranged1d::ValueFormatter<YT>,
    DB: DrawingBackend,
{
    fn house(&mut self) -> &mut Self {
        self.label_style(text(12.0))
            .axis_desc_style(text(13.0))
            .light_line_style(WHITE)
            .bold_line_style(GRID)
            .axis_style(MUTED)
    }
}

/// A tick label for whole numbers only (steps numbered 1, 2, …), blank between them.
pub fn whole_label(v: &f64) -> String {
    if (v - v.round()).abs() < 1e-9 {
        format!("{v:.0}")
    } else {
        String::new()
    }
}

/// Something that draws itself on any plotters backend.
pub trait Draw {
    /// Draws on `root` (already filled white) and records what it plotted in `meta`.
    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        meta: &mut FigureMeta,
    ) -> Result<(), String>;
}

/// Converts a drawing error into words.
pub(crate) fn de<E: std::fmt::Debug>(e: E) -> String {
    format!("{e:?}")
}

/// Something drawable as SVG elements and as a PNG, whatever its data: the object-safe
/// face of [`Draw`], so that figures of different kinds can wait in one list.
pub trait Drawing {
    /// Writes the SVG elements of the figure (no `<svg>` wrapper) to `out` and returns
    /// what was plotted.
    fn svg_elements(&self, size: (u32, u32), out: &mut dyn Write) -> Result<FigureMeta, String>;
    /// Writes the figure as a PNG to `out`, drawn band by band.
    fn png(&self, size: (u32, u32), out: &mut dyn Write) -> Result<(), String>;
}

impl<D: Draw> Drawing for D {
    fn svg_elements(&self, size: (u32, u32), out: &mut dyn Write) -> Result<FigureMeta, String> {
        register_font();
        let mut meta = FigureMeta::default();
        let root = svg::SvgStream::new(out, size).into_drawing_area();
        root.fill(&WHITE).map_err(de)?;
        self.draw(&root, &mut meta)?;
        root.present().map_err(de)?;
        Ok(meta)
    }

    fn png(&self, size: (u32, u32), out: &mut dyn Write) -> Result<(), String> {
        register_font();
        bitmap::write_png(self, size, out).map(|_| ())
    }
}

/// A figure ready to be drawn: its words, pixel size and drawing. Nothing is drawn until
/// [`Plot::write_files`] or [`Plot::render`] is called, so a report can draw its figures
/// one at a time and keep only one in hand.
pub struct Plot<'a> {
    /// File name without extension, e.g. `pf-over-time`.
    pub name: String,
    /// The figure's title, a sentence.
    pub title: String,
    /// What the figure shows and how to read it.
    pub caption: String,
    /// Pixel size of the PNG, and the SVG's view box.
    pub size: (u32, u32),
    /// What draws it.
    pub drawing: Box<dyn Drawing + 'a>,
}

/// Where [`Plot::write`] puts a figure: the figure's own files, and its inline copy.
pub struct Outputs<'a> {
    /// The standalone SVG document (the figure's `.svg` file).
    pub svg: &'a mut dyn Write,
    /// The PNG image (the figure's `.png` file).
    pub png: &'a mut dyn Write,
    /// The same SVG elements inline, for an HTML page (`None`: no page).
    pub inline: Option<&'a mut dyn Write>,
}

/// A figure's output failed.
fn io_err(name: &str, e: impl std::fmt::Display) -> FigureError {
    FigureError {
        figure: name.to_string(),
        message: e.to_string(),
    }
}

impl<'a> Plot<'a> {
    /// A plot of `drawing` with its words and pixel size.
    pub fn new<D: Draw + 'a>(
        drawing: D,
        name: &str,
        title: String,
        caption: String,
        size: (u32, u32),
    ) -> Self {
        Plot {
            name: name.to_string(),
            title,
            caption,
            size,
            drawing: Box::new(drawing),
        }
    }

    /// Draws the figure once as SVG elements into the standalone document and, at the
    /// same time, into the inline copy; then once as a PNG, band by band. Holds no more
    /// than one band of pixels and the writers' buffers. Returns what was plotted.
    pub fn write(&self, out: Outputs<'_>) -> Result<FigureMeta, FigureError> {
        let (w, h) = self.size;
        let err = |e: std::io::Error| io_err(&self.name, e);
        write!(
            out.svg,
            "<svg width=\"{w}\" height=\"{h}\" viewBox=\"0 0 {w} {h}\" \
             xmlns=\"http://www.w3.org/2000/svg\">\n<title>{}</title>\n",
            escape(&self.title)
        )
        .map_err(err)?;
        let mut inline = out.inline;
        if let Some(page) = &mut inline {
            // The HTML parser knows SVG: no namespace; the page sets the width.
            writeln!(
                page,
                "<svg role=\"img\" aria-label=\"{}\" viewBox=\"0 0 {w} {h}\">",
                escape(&self.title)
            )
            .map_err(err)?;
        }
        let meta = {
            // `as_deref_mut` would keep the page's longer trait-object lifetime, which the
            // borrow of `out.svg` beside it cannot share; the reborrow shortens it.
            #[allow(clippy::option_as_ref_deref)]
            let mut tee = svg::Tee {
                a: &mut *out.svg,
                b: inline.as_mut().map(|p| &mut **p),
            };
            self.drawing
                .svg_elements(self.size, &mut tee)
                .map_err(|m| io_err(&self.name, m))?
        };
        if let Some(page) = &mut inline {
            page.write_all(b"</svg>").map_err(err)?;
        }
        write_metadata(out.svg, &self.name, &meta).map_err(err)?;
        out.svg.write_all(b"</svg>\n").map_err(err)?;
        out.svg.flush().map_err(err)?;
        self.drawing
            .png(self.size, out.png)
            .map_err(|m| io_err(&self.name, m))?;
        out.png.flush().map_err(err)?;
        Ok(meta)
    }

    /// Writes `NAME.svg` and `NAME.png` into `dir`, and the inline SVG into `page` if
    /// given. Returns what was plotted and the two paths.
    pub fn write_files(
        &self,
        dir: &std::path::Path,
        page: Option<&mut dyn Write>,
    ) -> Result<(FigureMeta, [std::path::PathBuf; 2]), FigureError> {
        let svg_path = dir.join(format!("{}.svg", self.name));
        let png_path = dir.join(format!("{}.png", self.name));
        let open = |p: &std::path::Path| {
            std::fs::File::create(p)
                .map(std::io::BufWriter::new)
                .map_err(|e| io_err(&self.name, format!("{}: {e}", p.display())))
        };
        let mut svg = open(&svg_path)?;
        let mut png = open(&png_path)?;
        let meta = self.write(Outputs {
            svg: &mut svg,
            png: &mut png,
            inline: page.map(|p| {
                let p: &mut dyn Write = p;
                p
            }),
        })?;
        Ok((meta, [svg_path, png_path]))
    }

    /// Draws the figure into memory.
    pub fn render(&self) -> Result<Figure, FigureError> {
        let mut svg = Vec::new();
        let mut png = Vec::new();
        let meta = self.write(Outputs {
            svg: &mut svg,
            png: &mut png,
            inline: None,
        })?;
        Ok(Figure {
            name: self.name.clone(),
            title: self.title.clone(),
            caption: self.caption.clone(),
            svg: String::from_utf8(svg).map_err(|e| io_err(&self.name, e))?,
            png,
            meta,
        })
    }
}

/// Escapes text for XML and HTML (element content and attribute values).
pub fn escape(text: &str) -> String {
    let mut s = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => s.push_str("&amp;"),
            '<' => s.push_str("&lt;"),
            '>' => s.push_str("&gt;"),
            '"' => s.push_str("&quot;"),
            '\'' => s.push_str("&#39;"),
            _ => s.push(c),
        }
    }
    s
}

/// A number for the metadata: shortest round-trip form, `none` when not finite.
fn meta_num(x: f64) -> String {
    if x.is_finite() {
        format!("{x}")
    } else {
        "none".to_string()
    }
}

/// Writes the `<metadata>` element: what the figure plotted, for tests and readers.
fn write_metadata(out: &mut dyn Write, name: &str, meta: &FigureMeta) -> std::io::Result<()> {
    write!(
        out,
        "<metadata>\n<figure xmlns=\"urn:bankstep:figure\" name=\"{}\"{}>\n",
        escape(name),
        meta.rows
            .map(|r| format!(" rows=\"{r}\""))
            .unwrap_or_default()
    )?;
    for s in &meta.series {
        writeln!(
            out,
            "<series name=\"{}\" unit=\"{}\" min=\"{}\" max=\"{}\" points=\"{}\"/>",
            escape(&s.name),
            escape(&s.unit),
            meta_num(s.min),
            meta_num(s.max),
            s.points
        )?;
    }
    for m in &meta.marks {
        writeln!(
            out,
            "<mark name=\"{}\" x=\"{}\" y=\"{}\" tags=\"{}\"/>",
            escape(&m.name),
            meta_num(m.x),
            meta_num(m.y),
            escape(&m.tags)
        )?;
    }
    out.write_all(b"</figure>\n</metadata>\n")
}

/// One key of a legend.
#[derive(Debug, Clone, Copy)]
pub enum Key {
    /// A filled box.
    Fill(RGBColor),
    /// A solid line.
    Line(RGBColor, u32),
    /// A dashed line.
    Dash(RGBColor, u32),
    /// A dot of a colour with a thin outline of another.
    Dot(RGBColor, RGBColor),
    /// A ring: an unfilled circle of a colour and stroke width.
    Ring(RGBColor, u32),
    /// An unfilled square of a colour and stroke width.
    Square(RGBColor, u32),
}

/// Draws a legend as one row of keys starting at pixel (x, y) of `area`.
pub fn legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    x: i32,
    y: i32,
    keys: &[(Key, &str)],
) -> Result<(), String> {
    let style = text(13.0);
    let mut x = x;
    for (key, label) in keys {
        match *key {
            Key::Fill(c) => {
                area.draw(&Rectangle::new(
                    [(x, y - 6), (x + 22, y + 6)],
                    c.filled().stroke_width(1),
                ))
                .map_err(de)?;
                area.draw(&Rectangle::new([(x, y - 6), (x + 22, y + 6)], MUTED))
                    .map_err(de)?;
            }
            Key::Line(c, w) => {
                area.draw(&PathElement::new(
                    vec![(x, y), (x + 22, y)],
                    c.stroke_width(w),
                ))
                .map_err(de)?;
            }
            Key::Dash(c, w) => {
                for s in 0..3 {
                    let x0 = x + s * 8;
                    area.draw(&PathElement::new(
                        vec![(x0, y), (x0 + 5, y)],
                        c.stroke_width(w),
                    ))
                    .map_err(de)?;
                }
            }
            Key::Dot(fill, edge) => {
                area.draw(&Circle::new((x + 11, y), 5, fill.filled()))
                    .map_err(de)?;
                area.draw(&Circle::new((x + 11, y), 5, edge)).map_err(de)?;
            }
            Key::Ring(c, w) => {
                area.draw(&Circle::new((x + 11, y), 7, c.stroke_width(w)))
                    .map_err(de)?;
            }
            Key::Square(c, w) => {
                area.draw(&Rectangle::new(
                    [(x + 4, y - 7), (x + 18, y + 7)],
                    c.stroke_width(w),
                ))
                .map_err(de)?;
            }
        }
        area.draw(&Text::new(
            label.to_string(),
            (x + 28, y - 7),
            style.clone(),
        ))
        .map_err(de)?;
        let w = area
            .estimate_text_size(label, &style)
            .map(|(w, _)| w as i32)
            .unwrap_or(8 * label.len() as i32);
        x += 28 + w + 22;
    }
    Ok(())
}

/// Draws a dashed horizontal or sloped line between two pixel points.
pub fn dashed<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    from: (i32, i32),
    to: (i32, i32),
    style: ShapeStyle,
) -> Result<(), String> {
    let (dx, dy) = ((to.0 - from.0) as f64, (to.1 - from.1) as f64);
    let len = dx.hypot(dy);
    if len < 1.0 {
        return Ok(());
    }
    let (on, off) = (7.0, 5.0);
    let mut s = 0.0;
    while s < len {
        let e = (s + on).min(len);
        let p = |d: f64| {
            (
                from.0 + (dx * d / len).round() as i32,
                from.1 + (dy * d / len).round() as i32,
            )
        };
        area.draw(&PathElement::new(vec![p(s), p(e)], style))
            .map_err(de)?;
        s += on + off;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scale_is_monotonic_in_lightness() {
        // Relative luminance weights of ITU-R BT.709 (common practice for grey conversion).
        let lum = |c: RGBColor| 0.2126 * c.0 as f64 + 0.7152 * c.1 as f64 + 0.0722 * c.2 as f64;
        let mut last = -1.0;
        for i in 0..=50 {
            let l = lum(scale_colour(i as f64 / 50.0));
            assert!(l > last, "step {i}: {l} after {last}");
            last = l;
        }
    }

    #[test]
    fn escaping() {
        assert_eq!(
            escape("a<b & \"c\" 'd'>"),
            "a&lt;b &amp; &quot;c&quot; &#39;d&#39;&gt;"
        );
    }
}
