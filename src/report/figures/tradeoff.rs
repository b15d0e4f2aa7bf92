//! Figures from plain data, for commands that compare many runs or layouts:
//!
//! - a trade-off scatter: every candidate, the ones on the front joined, the recommended
//!   one ringed and the reference (the scenario's own settings) boxed, with the spread
//!   over seeds as whiskers when there is one;
//! - a duration curve: a quantity from its highest to its lowest against the share of
//!   time, with horizontal reference lines (the recommended total) and, beside it on the
//!   same scale, one column per candidate layout with a tick at every level it can reach.
//!
//! They take no study and no trace: the caller hands the numbers and the words. Each
//! point and level drawn is named in the SVG's metadata (`<mark>`), so a test can check
//! the figure against the command's JSON.

use super::HouseMesh;
use super::{
    dashed, de, legend, text, Draw, FigureError, FigureMeta, Key, Plot, BANK, GRID, INK, LIMIT,
    MAIN, MAIN_LIGHT, MEDIUM, MUTED,
};
use plotters::coord::Shift;
use plotters::prelude::*;

/// One candidate of a trade-off scatter.
#[derive(Debug, Clone, PartialEq)]
pub struct TradeoffPoint {
    /// What the point is, for the metadata, e.g. `setting 3`.
    pub name: String,
    /// Value on the x axis, in the unit of [`TradeoffData::x_label`].
    pub x: f64,
    /// Value on the y axis, in the unit of [`TradeoffData::y_label`].
    pub y: f64,
    /// Lowest and highest x over seeds, drawn as a whisker (`None`: none).
    pub x_spread: Option<(f64, f64)>,
    /// Lowest and highest y over seeds, drawn as a whisker (`None`: none).
    pub y_spread: Option<(f64, f64)>,
    /// True when no other candidate is better on both axes (the front).
    pub front: bool,
    /// Short label written beside the point (empty for none).
    pub label: String,
}

/// A trade-off scatter.
#[derive(Debug, Clone, PartialEq)]
pub struct TradeoffData {
    /// File name stem, e.g. `sweep-tradeoff`.
    pub name: String,
    /// Title, a sentence.
    pub title: String,
    /// Caption: what the axes mean and which way is better.
    pub caption: String,
    /// Axis label of x with its unit, e.g. `operations a year, count/year`.
    pub x_label: String,
    /// Axis label of y with its unit.
    pub y_label: String,
    /// The candidates.
    pub points: Vec<TradeoffPoint>,
    /// Index into `points` of the recommended candidate, if any.
    pub recommended: Option<usize>,
    /// Index into `points` of the reference candidate (the scenario's own), if any.
    pub reference: Option<usize>,
    /// Legend words of the reference, e.g. `scenario's own settings`.
    pub reference_words: String,
}

/// A horizontal reference line of a duration curve.
#[derive(Debug, Clone, PartialEq)]
pub struct Level {
    /// Its words, e.g. `recommended total 300 kvar`.
    pub label: String,
    /// The level, in the unit of the y axis.
    pub value: f64,
}

/// The levels one candidate can reach, drawn as a column of ticks.
#[derive(Debug, Clone, PartialEq)]
pub struct Ladder {
    /// Name of the candidate, e.g. `6x50`.
    pub label: String,
    /// Every level it reaches, in the unit of the y axis.
    pub levels: Vec<f64>,
}

/// A duration curve.
#[derive(Debug, Clone, PartialEq)]
pub struct DurationData {
    /// File name stem.
    pub name: String,
    /// Title, a sentence.
    pub title: String,
    /// Caption.
    pub caption: String,
    /// Axis label of the quantity with its unit, e.g. `kvar needed for the target, kvar`.
    pub y_label: String,
    /// Name of the curve in the metadata, e.g. `kvar needed`.
    pub series: String,
    /// Unit of the quantity, e.g. `kvar`.
    pub unit: String,
    /// The curve: (share of time %, value) from 0 to 100 %, the value not increasing.
    pub curve: Vec<(f64, f64)>,
    /// Horizontal reference lines across the figure.
    pub lines: Vec<Level>,
    /// One column of reachable levels per candidate, in order.
    pub ladders: Vec<Ladder>,
}

/// Most points a duration curve is best drawn with (see [`duration_points`]).
pub const DURATION_POINTS: usize = 1000;

/// A padded range of the finite values (0 to 1 when there are none). When all values
/// are (nearly) equal, the range opens to 5 % of their size (at least 1) on each side, so
/// that the ticks stay readable.
fn range(values: impl Iterator<Item = f64>) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if !lo.is_finite() {
        return (0.0, 1.0);
    }
    let size = lo.abs().max(hi.abs());
    if hi - lo <= 1e-9 * size.max(1.0) {
        let pad = if size > 0.0 { 0.05 * size } else { 1.0 };
        return (lo - pad, hi + pad);
    }
    let span = hi - lo;
    (lo - 0.08 * span, hi + 0.08 * span)
}

/// A tick label with the decimals that ticks about an eighth of `span` apart need.
fn tick(v: f64, span: f64) -> String {
    let decimals = if span > 0.0 && span.is_finite() {
        (-(span / 8.0).log10().floor()).clamp(0.0, 4.0) as usize
    } else {
        2
    };
    crate::text::num(v, decimals)
}

impl Draw for TradeoffData {
    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        meta: &mut FigureMeta,
    ) -> Result<(), String> {
        let pts: Vec<&TradeoffPoint> = self
            .points
            .iter()
            .filter(|p| p.x.is_finite() && p.y.is_finite())
            .collect();
        let xs = pts.iter().flat_map(|p| {
            let (a, b) = p.x_spread.unwrap_or((p.x, p.x));
            [p.x, a, b]
        });
        let ys = pts.iter().flat_map(|p| {
            let (a, b) = p.y_spread.unwrap_or((p.y, p.y));
            [p.y, a, b]
        });
        let (x0, x1) = range(xs);
        let (y0, y1) = range(ys);
        let mut keys = vec![
            (Key::Dot(MAIN_LIGHT, MUTED), "candidate"),
            (Key::Line(MAIN, 2), "front: none better on both axes"),
            (Key::Ring(LIMIT, 3), "recommended"),
        ];
        if self.reference.is_some() {
            keys.push((Key::Square(INK, 2), self.reference_words.as_str()));
        }
        legend(root, 100, 14, &keys)?;
        let mut ch = ChartBuilder::on(root)
            .margin_top(30)
            .margin_left(12)
            .margin_right(30)
            .x_label_area_size(46)
            .y_label_area_size(92)
            .build_cartesian_2d(x0..x1, y0..y1)
            .map_err(de)?;
        let (xs, ys) = (x1 - x0, y1 - y0);
        ch.configure_mesh()
            .x_labels(10)
            .y_labels(8)
            .x_label_formatter(&|v| tick(*v, xs))
            .y_label_formatter(&|v| tick(*v, ys))
            .x_desc(self.x_label.as_str())
            .y_desc(self.y_label.as_str())
            .house()
            .draw()
            .map_err(de)?;
        // Whiskers first, so that the points sit on top.
        for p in &pts {
            if let Some((a, b)) = p.x_spread {
                ch.plotting_area()
                    .draw(&PathElement::new(
                        vec![(a, p.y), (b, p.y)],
                        MUTED.stroke_width(1),
                    ))
                    .map_err(de)?;
            }
            if let Some((a, b)) = p.y_spread {
                ch.plotting_area()
                    .draw(&PathElement::new(
                        vec![(p.x, a), (p.x, b)],
                        MUTED.stroke_width(1),
                    ))
                    .map_err(de)?;
            }
        }
        let mut front: Vec<(f64, f64)> =
            pts.iter().filter(|p| p.front).map(|p| (p.x, p.y)).collect();
        front.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.total_cmp(&b.1)));
        ch.plotting_area()
            .draw(&PathElement::new(front.clone(), MAIN.stroke_width(2)))
            .map_err(de)?;
        // Candidates off the front, then the front over them.
        for on in [false, true] {
            for p in pts.iter().filter(|p| p.front == on) {
                let fill = if on { MAIN } else { MAIN_LIGHT };
                ch.plotting_area()
                    .draw(&Circle::new((p.x, p.y), 5, fill.filled()))
                    .map_err(de)?;
                if !on {
                    ch.plotting_area()
                        .draw(&Circle::new((p.x, p.y), 5, MUTED))
                        .map_err(de)?;
                }
            }
        }
        for p in &pts {
            if !p.label.is_empty() {
                let (px, py) = ch.backend_coord(&(p.x, p.y));
                root.draw(&Text::new(p.label.clone(), (px + 8, py - 17), text(11.0)))
                    .map_err(de)?;
            }
        }
        let finite = |i: usize| {
            self.points
                .get(i)
                .filter(|p| p.x.is_finite() && p.y.is_finite())
        };
        if let Some(p) = self.reference.and_then(finite) {
            let (px, py) = ch.backend_coord(&(p.x, p.y));
            root.draw(&Rectangle::new(
                [(px - 9, py - 9), (px + 9, py + 9)],
                INK.stroke_width(2),
            ))
            .map_err(de)?;
            root.draw(&Text::new(
                "own settings".to_string(),
                (px + 14, py + 8),
                text(12.0),
            ))
            .map_err(de)?;
        }
        if let Some(p) = self.recommended.and_then(finite) {
            ch.plotting_area()
                .draw(&Circle::new((p.x, p.y), 12, LIMIT.stroke_width(3)))
                .map_err(de)?;
            let (px, py) = ch.backend_coord(&(p.x, p.y));
            root.draw(&Text::new(
                "recommended".to_string(),
                (px + 15, py - 6),
                text(12.0).color(&LIMIT),
            ))
            .map_err(de)?;
        }
        meta.add("candidates x", &self.x_label, pts.iter().map(|p| p.x));
        meta.add("candidates y", &self.y_label, pts.iter().map(|p| p.y));
        meta.add("front y", &self.y_label, front.iter().map(|p| p.1));
        for (i, p) in self.points.iter().enumerate() {
            let mut tags = Vec::new();
            if p.front {
                tags.push("front");
            }
            if self.recommended == Some(i) {
                tags.push("recommended");
            }
            if self.reference == Some(i) {
                tags.push("reference");
            }
            if !(p.x.is_finite() && p.y.is_finite()) {
                tags.push("not-drawn");
            }
            meta.mark(&p.name, p.x, p.y, &tags.join(" "));
        }
        Ok(())
    }
}

/// (g) A trade-off scatter: every candidate, the front joined by a line, the
/// recommendation ringed, the reference boxed.
pub fn tradeoff_scatter(data: &TradeoffData) -> Result<Plot<'_>, FigureError> {
    Ok(Plot::new(
        data,
        &data.name,
        data.title.clone(),
        data.caption.clone(),
        MEDIUM,
    ))
}

impl<D: Draw + ?Sized> Draw for &D {
    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        meta: &mut FigureMeta,
    ) -> Result<(), String> {
        (**self).draw(root, meta)
    }
}

/// The values sorted from highest to lowest, reduced to at most `n` points evenly spread
/// over the share of time (the first and the last always kept): (share of time %, value).
/// For callers holding one value per equal stretch of time.
pub fn duration_points(values: &[f64], n: usize) -> Vec<(f64, f64)> {
    let mut v: Vec<f64> = values.iter().copied().filter(|x| x.is_finite()).collect();
    v.sort_by(|a, b| b.total_cmp(a));
    let len = v.len();
    if len == 0 {
        return Vec::new();
    }
    if len == 1 {
        return vec![(0.0, v[0]), (100.0, v[0])];
    }
    let n = n.clamp(2, len);
    (0..n)
        .map(|i| {
            let j = ((i as f64) * (len - 1) as f64 / (n - 1) as f64).round() as usize;
            (100.0 * j as f64 / (len - 1) as f64, v[j])
        })
        .collect()
}

/// Line styles of the reference lines: colour, width, dashed.
const LINE_STYLES: [(RGBColor, u32, bool); 3] =
    [(LIMIT, 2, true), (INK, 1, true), (MUTED, 2, false)];

/// Pixel width of one column of levels.
const LADDER_W: u32 = 92;

/// Pixel height of one row of the key under the figure.
const KEY_ROW: u32 = 22;

/// Pixels between the axis words and the key under the figure.
const KEY_GAP: u32 = 16;

/// The key rows under a duration curve: `#1 label` entries wrapped to `width` pixels.
fn key_rows(labels: &[String], width: i32) -> Vec<Vec<String>> {
    // About 7 pixels a character at 13 px (DejaVu Sans averages a little over half an em).
    let mut rows: Vec<Vec<String>> = vec![Vec::new()];
    let mut used = 0;
    for (i, l) in labels.iter().enumerate() {
        let entry = format!("#{} {l}", i + 1);
        let w = 7 * entry.chars().count() as i32 + 28;
        if used > 0 && used + w > width {
            rows.push(Vec::new());
            used = 0;
        }
        used += w;
        if let Some(r) = rows.last_mut() {
            r.push(entry);
        }
    }
    rows
}

impl Draw for DurationData {
    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        meta: &mut FigureMeta,
    ) -> Result<(), String> {
        let (w, h) = root.dim_in_pixel();
        let labels: Vec<String> = self.ladders.iter().map(|l| l.label.clone()).collect();
        let rows = key_rows(&labels, w as i32 - 120);
        let key_h = if self.ladders.is_empty() {
            0
        } else {
            KEY_ROW * rows.len() as u32 + KEY_GAP
        };
        let (y0, y1) = range(
            self.curve
                .iter()
                .map(|p| p.1)
                .chain(self.lines.iter().map(|l| l.value))
                .chain(self.ladders.iter().flat_map(|l| l.levels.iter().copied()))
                .chain(std::iter::once(0.0)),
        );
        let ladders_w = if self.ladders.is_empty() {
            0
        } else {
            LADDER_W * self.ladders.len() as u32 + 30
        };
        let body = root.margin(0, key_h, 0, 0);
        let (left, right) = body.split_horizontally(w.saturating_sub(ladders_w).max(200));
        let mut keys = vec![(
            Key::Fill(MAIN_LIGHT),
            "share of the time the need reaches the value",
        )];
        for (l, st) in self.lines.iter().zip(LINE_STYLES.iter().cycle()) {
            keys.push((
                if st.2 {
                    Key::Dash(st.0, st.1)
                } else {
                    Key::Line(st.0, st.1)
                },
                l.label.as_str(),
            ));
        }
        legend(root, 100, 14, &keys)?;
        let mut ch = ChartBuilder::on(&left)
            .margin_top(34)
            .margin_left(12)
            .margin_right(16)
            .x_label_area_size(46)
            .y_label_area_size(92)
            .build_cartesian_2d(0.0..100.0, y0..y1)
            .map_err(de)?;
        let span = y1 - y0;
        ch.configure_mesh()
            .x_labels(11)
            .y_labels(8)
            .x_label_formatter(&|v| crate::text::num(*v, 0))
            .y_label_formatter(&|v| tick(*v, span))
            .x_desc("share of time, %")
            .y_desc(self.y_label.as_str())
            .house()
            .draw()
            .map_err(de)?;
        let base = 0f64.clamp(y0, y1);
        ch.plotting_area()
            .draw(&Polygon::new(
                self.curve
                    .iter()
                    .copied()
                    .chain([
                        (self.curve.last().map_or(100.0, |p| p.0), base),
                        (self.curve.first().map_or(0.0, |p| p.0), base),
                    ])
                    .collect::<Vec<_>>(),
                MAIN_LIGHT.filled(),
            ))
            .map_err(de)?;
        ch.plotting_area()
            .draw(&PathElement::new(self.curve.clone(), MAIN.stroke_width(2)))
            .map_err(de)?;

        // The columns of levels, on the same vertical scale: the same top margin and the
        // same height of the axis area below.
        let mut lad = None;
        if !self.ladders.is_empty() {
            let n = self.ladders.len() as f64;
            let c = ChartBuilder::on(&right)
                .margin_top(34)
                .margin_right(24)
                .x_label_area_size(46)
                .y_label_area_size(6)
                .build_cartesian_2d(0.0..n, y0..y1)
                .map_err(de)?;
            lad = Some(c);
        }
        if let Some(c) = &mut lad {
            c.configure_mesh()
                .disable_x_mesh()
                .x_labels(0)
                .y_labels(8)
                .y_label_formatter(&|_| String::new())
                .light_line_style(WHITE)
                .bold_line_style(GRID)
                .axis_style(MUTED)
                .draw()
                .map_err(de)?;
            for (i, l) in self.ladders.iter().enumerate() {
                let x = i as f64;
                let top = l.levels.iter().copied().fold(0.0, f64::max);
                c.plotting_area()
                    .draw(&PathElement::new(
                        vec![(x + 0.5, 0.0_f64.clamp(y0, y1)), (x + 0.5, top)],
                        MUTED.stroke_width(1),
                    ))
                    .map_err(de)?;
                for &v in &l.levels {
                    c.plotting_area()
                        .draw(&PathElement::new(
                            vec![(x + 0.16, v), (x + 0.84, v)],
                            BANK.stroke_width(2),
                        ))
                        .map_err(de)?;
                    meta.mark(&l.label, x, v, "level");
                }
                let (px, py) = c.backend_coord(&(x + 0.5, y0));
                let head = format!("#{}", i + 1);
                let st = text(13.0);
                let tw = right
                    .estimate_text_size(&head, &st)
                    .map(|(w, _)| w as i32)
                    .unwrap_or(16);
                root.draw(&Text::new(head, (px - tw / 2, py + 10), st))
                    .map_err(de)?;
            }
            let (px, py) = c.backend_coord(&(0.0, y0));
            root.draw(&Text::new(
                "levels each layout reaches, kvar".to_string(),
                (px, py + 28),
                text(12.0),
            ))
            .map_err(de)?;
        }

        // Reference lines across both panels, drawn last.
        for (l, st) in self.lines.iter().zip(LINE_STYLES.iter().cycle()) {
            let v = l.value.clamp(y0, y1);
            let a = ch.backend_coord(&(0.0, v));
            let b = match &lad {
                Some(c) => c.backend_coord(&(self.ladders.len() as f64, v)),
                None => ch.backend_coord(&(100.0, v)),
            };
            if st.2 {
                dashed(root, a, b, st.0.stroke_width(st.1))?;
            } else {
                root.draw(&PathElement::new(vec![a, b], st.0.stroke_width(st.1)))
                    .map_err(de)?;
            }
        }

        // The key of the columns, under the figure.
        if !self.ladders.is_empty() {
            let st = text(13.0);
            for (r, row) in rows.iter().enumerate() {
                let y = (h - key_h + KEY_GAP - 6 + KEY_ROW * r as u32) as i32;
                let mut x = 100;
                for entry in row {
                    root.draw(&Text::new(entry.clone(), (x, y), st.clone()))
                        .map_err(de)?;
                    let tw = root
                        .estimate_text_size(entry, &st)
                        .map(|(w, _)| w as i32)
                        .unwrap_or(7 * entry.len() as i32);
                    x += tw + 28;
                }
            }
        }
        meta.add(&self.series, &self.unit, self.curve.iter().map(|p| p.1));
        for l in &self.lines {
            meta.add(&l.label, &self.unit, [l.value]);
        }
        for l in &self.ladders {
            meta.add(&l.label, &self.unit, l.levels.iter().copied());
        }
        Ok(())
    }
}

/// (g) A duration curve with its reference lines and, beside it on the same scale, the
/// levels each candidate reaches.
pub fn duration_curve(data: &DurationData) -> Result<Plot<'_>, FigureError> {
    let rows = key_rows(
        &data
            .ladders
            .iter()
            .map(|l| l.label.clone())
            .collect::<Vec<_>>(),
        MEDIUM.0 as i32 - 120,
    );
    let extra = if data.ladders.is_empty() {
        0
    } else {
        KEY_ROW * rows.len() as u32 + KEY_GAP
    };
    Ok(Plot::new(
        data,
        &data.name,
        data.title.clone(),
        data.caption.clone(),
        (MEDIUM.0, MEDIUM.1 + extra),
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn duration_points_keep_both_ends() {
        let v: Vec<f64> = (0..10_000).map(|i| ((i * 7919) % 10_000) as f64).collect();
        let p = duration_points(&v, 100);
        assert_eq!(p.len(), 100);
        assert_eq!(p[0], (0.0, 9999.0));
        assert_eq!(p[99], (100.0, 0.0));
        assert!(p.windows(2).all(|w| w[0].1 >= w[1].1 && w[0].0 < w[1].0));
    }

    #[test]
    fn key_rows_wrap_to_the_width() {
        let labels: Vec<String> = (0..6).map(|i| format!("layout number {i}")).collect();
        let rows = key_rows(&labels, 400);
        assert!(rows.len() > 1);
        assert_eq!(rows.iter().map(Vec::len).sum::<usize>(), 6);
        assert_eq!(rows[0][0], "#1 layout number 0");
    }
}
