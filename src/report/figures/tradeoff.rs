//! Figures from plain data, for commands that compare many runs or layouts: a trade-off
//! scatter (every candidate, the ones on the front joined, one recommendation ringed) and
//! a duration curve (a quantity sorted from highest to lowest against the share of time,
//! with a horizontal line per candidate for the level it can reach).
//!
//! They take no study and no trace: the caller hands the numbers and the words.

use super::{
    dashed, de, legend, render, text, Draw, Figure, FigureError, FigureMeta, Key, BANK, GRID, INK,
    LIMIT, MAIN, MAIN_LIGHT, MEDIUM, MUTED,
};
use plotters::coord::Shift;
use plotters::prelude::*;

/// One candidate of a trade-off scatter.
#[derive(Debug, Clone, PartialEq)]
pub struct TradeoffPoint {
    /// Value on the x axis, in the unit of [`TradeoffData::x_label`].
    pub x: f64,
    /// Value on the y axis, in the unit of [`TradeoffData::y_label`].
    pub y: f64,
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
    /// Axis label of x with its unit, e.g. `operations per year, count`.
    pub x_label: String,
    /// Axis label of y with its unit.
    pub y_label: String,
    /// The candidates.
    pub points: Vec<TradeoffPoint>,
    /// Index into `points` of the recommended candidate, if any.
    pub recommended: Option<usize>,
}

/// One reachable level of a duration curve (a candidate layout).
#[derive(Debug, Clone, PartialEq)]
pub struct Level {
    /// Name of the candidate, e.g. `6 × 50 kvar`.
    pub label: String,
    /// The level it can reach, in the unit of the y axis.
    pub value: f64,
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
    /// The values, one per interval (or per equal stretch of time), in any order.
    pub values: Vec<f64>,
    /// Horizontal lines, one per candidate.
    pub levels: Vec<Level>,
}

/// Most points a duration curve is drawn with (sorted values are picked evenly, the
/// highest and the lowest always among them).
pub const DURATION_POINTS: usize = 1000;

fn range(values: impl Iterator<Item = f64>) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if !lo.is_finite() {
        return (0.0, 1.0);
    }
    let span = (hi - lo).abs().max(1e-6 * hi.abs().max(1.0));
    (lo - 0.08 * span, hi + 0.08 * span)
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
        let (x0, x1) = range(pts.iter().map(|p| p.x));
        let (y0, y1) = range(pts.iter().map(|p| p.y));
        legend(
            root,
            90,
            14,
            &[
                (Key::Fill(MAIN_LIGHT), "candidate"),
                (Key::Line(MAIN, 2), "front: none better on both axes"),
                (Key::Line(LIMIT, 3), "recommended"),
            ],
        )?;
        let mut ch = ChartBuilder::on(root)
            .margin_top(30)
            .margin_right(24)
            .x_label_area_size(44)
            .y_label_area_size(88)
            .build_cartesian_2d(x0..x1, y0..y1)
            .map_err(de)?;
        ch.configure_mesh()
            .x_labels(10)
            .y_labels(8)
            .x_desc(self.x_label.as_str())
            .y_desc(self.y_label.as_str())
            .label_style(text(12.0))
            .axis_desc_style(text(13.0))
            .light_line_style(WHITE)
            .bold_line_style(GRID)
            .axis_style(MUTED)
            .draw()
            .map_err(de)?;
        let mut front: Vec<(f64, f64)> =
            pts.iter().filter(|p| p.front).map(|p| (p.x, p.y)).collect();
        front.sort_by(|a, b| a.0.total_cmp(&b.0));
        ch.draw_series(std::iter::once(PathElement::new(
            front.clone(),
            MAIN.stroke_width(2),
        )))
        .map_err(de)?;
        for p in &pts {
            let style = if p.front {
                MAIN.filled()
            } else {
                MAIN_LIGHT.filled()
            };
            ch.draw_series(std::iter::once(Circle::new((p.x, p.y), 5, style)))
                .map_err(de)?;
            if !p.front {
                ch.draw_series(std::iter::once(Circle::new((p.x, p.y), 5, MUTED)))
                    .map_err(de)?;
            }
            if !p.label.is_empty() {
                let (px, py) = ch.backend_coord(&(p.x, p.y));
                root.draw(&Text::new(p.label.clone(), (px + 8, py - 16), text(11.0)))
                    .map_err(de)?;
            }
        }
        if let Some(p) = self.recommended.and_then(|i| self.points.get(i)) {
            ch.draw_series(std::iter::once(Circle::new(
                (p.x, p.y),
                11,
                LIMIT.stroke_width(3),
            )))
            .map_err(de)?;
            let (px, py) = ch.backend_coord(&(p.x, p.y));
            root.draw(&Text::new(
                "recommended".to_string(),
                (px + 14, py + 4),
                text(12.0).color(&LIMIT),
            ))
            .map_err(de)?;
        }
        meta.add("candidates x", "x", pts.iter().map(|p| p.x));
        meta.add("candidates y", "y", pts.iter().map(|p| p.y));
        meta.add("front y", "y", front.iter().map(|p| p.1));
        Ok(())
    }
}

/// (g) A trade-off scatter: every candidate, the front joined by a line, the
/// recommendation ringed.
pub fn tradeoff_scatter(data: &TradeoffData) -> Result<Figure, FigureError> {
    render(
        data,
        &data.name,
        data.title.clone(),
        data.caption.clone(),
        MEDIUM,
    )
}

/// The values sorted from highest to lowest, reduced to at most `n` points evenly spread
/// over the share of time (the first and the last always kept): (share of time %, value).
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

struct DurationDraw<'a> {
    data: &'a DurationData,
    curve: Vec<(f64, f64)>,
}

/// Line styles of the levels: colour, width, dashed.
const LEVEL_STYLES: [(RGBColor, u32, bool); 4] = [
    (BANK, 2, false),
    (LIMIT, 2, true),
    (INK, 1, true),
    (MUTED, 2, false),
];

impl Draw for DurationDraw<'_> {
    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        meta: &mut FigureMeta,
    ) -> Result<(), String> {
        let d = self.data;
        let (y0, y1) = range(
            self.curve
                .iter()
                .map(|p| p.1)
                .chain(d.levels.iter().map(|l| l.value))
                .chain(std::iter::once(0.0)),
        );
        legend(
            root,
            90,
            14,
            &[(Key::Fill(MAIN_LIGHT), "share of time at or above the value")],
        )?;
        let mut ch = ChartBuilder::on(root)
            .margin_top(30)
            .margin_right(190)
            .x_label_area_size(44)
            .y_label_area_size(88)
            .build_cartesian_2d(0.0..100.0, y0..y1)
            .map_err(de)?;
        ch.configure_mesh()
            .x_labels(11)
            .y_labels(8)
            .x_desc("share of time, %")
            .y_desc(d.y_label.as_str())
            .label_style(text(12.0))
            .axis_desc_style(text(13.0))
            .light_line_style(WHITE)
            .bold_line_style(GRID)
            .axis_style(MUTED)
            .draw()
            .map_err(de)?;
        let base = 0f64.clamp(y0, y1);
        ch.draw_series(std::iter::once(Polygon::new(
            self.curve
                .iter()
                .copied()
                .chain([(100.0, base), (0.0, base)])
                .collect::<Vec<_>>(),
            MAIN_LIGHT.filled(),
        )))
        .map_err(de)?;
        ch.draw_series(std::iter::once(PathElement::new(
            self.curve.clone(),
            MAIN.stroke_width(2),
        )))
        .map_err(de)?;
        // Pixel positions from `backend_coord` are the backend's: draw them on the root.
        let area = root;
        for (l, st) in d.levels.iter().zip(LEVEL_STYLES.iter().cycle()) {
            let a = ch.backend_coord(&(0.0, l.value.clamp(y0, y1)));
            let b = ch.backend_coord(&(100.0, l.value.clamp(y0, y1)));
            if st.2 {
                dashed(area, a, b, st.0.stroke_width(st.1))?;
            } else {
                area.draw(&PathElement::new(vec![a, b], st.0.stroke_width(st.1)))
                    .map_err(de)?;
            }
            root.draw(&Text::new(l.label.clone(), (b.0 + 8, b.1 - 7), text(12.0)))
                .map_err(de)?;
        }
        meta.add(&d.y_label, "", self.curve.iter().map(|p| p.1));
        meta.add("levels", "", d.levels.iter().map(|l| l.value));
        Ok(())
    }
}

/// (g) A duration curve with one horizontal line per candidate's reachable level.
pub fn duration_curve(data: &DurationData) -> Result<Figure, FigureError> {
    let curve = duration_points(&data.values, DURATION_POINTS);
    render(
        &DurationDraw { data, curve },
        &data.name,
        data.title.clone(),
        data.caption.clone(),
        MEDIUM,
    )
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
}
