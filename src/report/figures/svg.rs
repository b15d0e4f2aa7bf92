//! SVG output with little memory: a plotters backend that writes each shape as an SVG
//! element straight to any `std::io::Write` as it is drawn, so a figure never sits in
//! memory as a whole document. The report writes the same elements to the figure's own
//! `.svg` file and, inline, into `report.html` at once through [`Tee`].
//!
//! The elements are plain SVG 1.1: `line`, `polyline`, `polygon`, `rect`, `circle` and
//! `text`, with solid colours as `#RRGGBB` and an `opacity` only where a colour is not
//! opaque. Text sizes follow plotters' convention (its size divided by 1.24 as the CSS
//! font size), so that the SVG and the PNG drawn from the same code look alike.

use plotters_backend::text_anchor::{HPos, VPos};
use plotters_backend::{
    BackendColor, BackendCoord, BackendStyle, BackendTextStyle, DrawingBackend, DrawingErrorKind,
    FontStyle, FontTransform,
};
use std::fmt;
use std::io::{self, Write};

/// Writes to two writers at once (the second is optional).
pub struct Tee<'a, 'x> {
    /// The first writer.
    pub a: &'a mut (dyn Write + 'x),
    /// The second writer, if any.
    pub b: Option<&'a mut (dyn Write + 'x)>,
}

impl Write for Tee<'_, '_> {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        self.a.write_all(buf)?;
        if let Some(b) = &mut self.b {
            b.write_all(buf)?;
        }
        Ok(buf.len())
    }

    fn flush(&mut self) -> io::Result<()> {
        self.a.flush()?;
        if let Some(b) = &mut self.b {
            b.flush()?;
        }
        Ok(())
    }
}

/// A plotters backend writing SVG elements (no `<svg>` wrapper: the caller writes the
/// opening and closing tags) to `out`.
pub struct SvgStream<'a> {
    out: &'a mut dyn Write,
    size: (u32, u32),
}

impl<'a> SvgStream<'a> {
    /// A backend of `size` pixels writing to `out`.
    pub fn new(out: &'a mut dyn Write, size: (u32, u32)) -> Self {
        SvgStream { out, size }
    }

    fn put(&mut self, args: fmt::Arguments<'_>) -> Result<(), DrawingErrorKind<io::Error>> {
        self.out
            .write_fmt(args)
            .map_err(DrawingErrorKind::DrawingError)
    }

    fn points(
        &mut self,
        path: impl IntoIterator<Item = BackendCoord>,
    ) -> Result<(), DrawingErrorKind<io::Error>> {
        let mut first = true;
        for (x, y) in path {
            if first {
                self.put(format_args!("{x},{y}"))?;
                first = false;
            } else {
                self.put(format_args!(" {x},{y}"))?;
            }
        }
        Ok(())
    }
}

/// `#RRGGBB` of a colour.
struct Hex((u8, u8, u8));

impl fmt::Display for Hex {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let (r, g, b) = self.0;
        write!(f, "#{r:02X}{g:02X}{b:02X}")
    }
}

/// ` opacity="a"` for a colour that is not opaque, nothing otherwise.
struct Opacity(f64);

impl fmt::Display for Opacity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.0 < 1.0 {
            write!(f, " opacity=\"{}\"", self.0)
        } else {
            Ok(())
        }
    }
}

/// Text escaped for XML element content.
struct Esc<'a>(&'a str);

impl fmt::Display for Esc<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for c in self.0.chars() {
            match c {
                '&' => f.write_str("&amp;")?,
                '<' => f.write_str("&lt;")?,
                '>' => f.write_str("&gt;")?,
                '"' => f.write_str("&quot;")?,
                '\'' => f.write_str("&#39;")?,
                c => write!(f, "{c}")?,
            }
        }
        Ok(())
    }
}

impl DrawingBackend for SvgStream<'_> {
    type ErrorType = io::Error;

    fn get_size(&self) -> (u32, u32) {
        self.size
    }

    fn ensure_prepared(&mut self) -> Result<(), DrawingErrorKind<io::Error>> {
        Ok(())
    }

    fn present(&mut self) -> Result<(), DrawingErrorKind<io::Error>> {
        self.out.flush().map_err(DrawingErrorKind::DrawingError)
    }

    fn draw_pixel(
        &mut self,
        p: BackendCoord,
        c: BackendColor,
    ) -> Result<(), DrawingErrorKind<io::Error>> {
        if c.alpha == 0.0 {
            return Ok(());
        }
        self.put(format_args!(
            "<rect x=\"{}\" y=\"{}\" width=\"1\" height=\"1\" fill=\"{}\"{}/>\n",
            p.0,
            p.1,
            Hex(c.rgb),
            Opacity(c.alpha)
        ))
    }

    fn draw_line<S: BackendStyle>(
        &mut self,
        from: BackendCoord,
        to: BackendCoord,
        style: &S,
    ) -> Result<(), DrawingErrorKind<io::Error>> {
        let c = style.color();
        if c.alpha == 0.0 {
            return Ok(());
        }
        self.put(format_args!(
            "<line x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\" stroke=\"{}\" stroke-width=\"{}\"{}/>\n",
            from.0,
            from.1,
            to.0,
            to.1,
            Hex(c.rgb),
            style.stroke_width(),
            Opacity(c.alpha)
        ))
    }

    fn draw_rect<S: BackendStyle>(
        &mut self,
        upper_left: BackendCoord,
        bottom_right: BackendCoord,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<io::Error>> {
        let c = style.color();
        if c.alpha == 0.0 {
            return Ok(());
        }
        let (x, y) = upper_left;
        let (w, h) = (bottom_right.0 - x, bottom_right.1 - y);
        if fill {
            self.put(format_args!(
                "<rect x=\"{x}\" y=\"{y}\" width=\"{w}\" height=\"{h}\" fill=\"{}\"{}/>\n",
                Hex(c.rgb),
                Opacity(c.alpha)
            ))
        } else {
            self.put(format_args!(
                "<rect x=\"{x}\" y=\"{y}\" width=\"{w}\" height=\"{h}\" fill=\"none\" \
                 stroke=\"{}\"{}/>\n",
                Hex(c.rgb),
                Opacity(c.alpha)
            ))
        }
    }

    fn draw_path<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        path: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<io::Error>> {
        let c = style.color();
        if c.alpha == 0.0 {
            return Ok(());
        }
        self.put(format_args!(
            "<polyline fill=\"none\" stroke=\"{}\" stroke-width=\"{}\"{} points=\"",
            Hex(c.rgb),
            style.stroke_width(),
            Opacity(c.alpha)
        ))?;
        self.points(path)?;
        self.put(format_args!("\"/>\n"))
    }

    fn fill_polygon<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        path: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<io::Error>> {
        let c = style.color();
        if c.alpha == 0.0 {
            return Ok(());
        }
        self.put(format_args!(
            "<polygon fill=\"{}\"{} points=\"",
            Hex(c.rgb),
            Opacity(c.alpha)
        ))?;
        self.points(path)?;
        self.put(format_args!("\"/>\n"))
    }

    fn draw_circle<S: BackendStyle>(
        &mut self,
        center: BackendCoord,
        radius: u32,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<io::Error>> {
        let c = style.color();
        if c.alpha == 0.0 {
            return Ok(());
        }
        let (x, y) = center;
        if fill {
            self.put(format_args!(
                "<circle cx=\"{x}\" cy=\"{y}\" r=\"{radius}\" fill=\"{}\"{}/>\n",
                Hex(c.rgb),
                Opacity(c.alpha)
            ))
        } else {
            self.put(format_args!(
                "<circle cx=\"{x}\" cy=\"{y}\" r=\"{radius}\" fill=\"none\" stroke=\"{}\" \
                 stroke-width=\"{}\"{}/>\n",
                Hex(c.rgb),
                style.stroke_width(),
                Opacity(c.alpha)
            ))
        }
    }

    fn draw_text<S: BackendTextStyle>(
        &mut self,
        text: &str,
        style: &S,
        pos: BackendCoord,
    ) -> Result<(), DrawingErrorKind<io::Error>> {
        let c = style.color();
        if c.alpha == 0.0 {
            return Ok(());
        }
        let (x, y) = pos;
        let anchor = match style.anchor().h_pos {
            HPos::Left => "start",
            HPos::Right => "end",
            HPos::Center => "middle",
        };
        let dy = match style.anchor().v_pos {
            VPos::Top => "0.76em",
            VPos::Center => "0.5ex",
            VPos::Bottom => "-0.5ex",
        };
        let weight = match style.style() {
            FontStyle::Normal => String::new(),
            FontStyle::Bold => " font-weight=\"bold\"".to_string(),
            other => format!(" font-style=\"{}\"", other.as_str()),
        };
        let turn = match style.transform() {
            FontTransform::Rotate90 => format!(" transform=\"rotate(90, {x}, {y})\""),
            FontTransform::Rotate180 => format!(" transform=\"rotate(180, {x}, {y})\""),
            FontTransform::Rotate270 => format!(" transform=\"rotate(270, {x}, {y})\""),
            _ => String::new(),
        };
        self.put(format_args!(
            "<text x=\"{x}\" y=\"{y}\" dy=\"{dy}\" text-anchor=\"{anchor}\" font-family=\"{}\" \
             font-size=\"{}\" fill=\"{}\"{}{weight}{turn}>{}</text>\n",
            Esc(style.family().as_str()),
            style.size() / 1.24,
            Hex(c.rgb),
            Opacity(c.alpha),
            Esc(text)
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::SvgStream;
    use plotters::prelude::*;

    #[test]
    fn shapes_and_text_are_well_formed_xml() {
        let mut out = Vec::new();
        {
            let root = SvgStream::new(&mut out, (100, 50)).into_drawing_area();
            root.draw(&Rectangle::new([(1, 2), (30, 40)], RED.filled()))
                .unwrap();
            root.draw(&PathElement::new(vec![(0, 0), (5, 5), (9, 1)], BLUE))
                .unwrap();
            root.draw(&Polygon::new(vec![(0, 0), (5, 5), (9, 1)], BLUE.mix(0.5)))
                .unwrap();
            root.draw(&Circle::new((10, 10), 3, BLACK.stroke_width(2)))
                .unwrap();
            root.draw(&Text::new(
                "a < b & \"c\"".to_string(),
                (3, 4),
                ("sans-serif", 12.4).into_font(),
            ))
            .unwrap();
            root.present().unwrap();
        }
        let body = String::from_utf8(out).unwrap();
        let doc = format!("<svg xmlns=\"http://www.w3.org/2000/svg\">{body}</svg>");
        roxmltree::Document::parse(&doc).unwrap_or_else(|e| panic!("{e}: {doc}"));
        assert!(
            body.contains("<rect x=\"1\" y=\"2\" width=\"29\" height=\"38\" fill=\"#FF0000\"/>")
        );
        assert!(body.contains("points=\"0,0 5,5 9,1\""));
        assert!(body.contains("opacity=\"0.5\""));
        assert!(body.contains(">a &lt; b &amp; &quot;c&quot;</text>"));
        assert!(body.contains("font-size=\"10\""));
    }
}
