//! The impedance figure: |Z(h)| at the bus for the bank states a run reached (the ones
//! that count most), the supply alone for comparison, the load's harmonic orders with the
//! warning tolerance around them, and for each harmonic the impedance at which the load's
//! current alone would bring that harmonic's voltage to its limit.
//!
//! The curves come from the harmonic model's scan ([`crate::harmonics::scan::Scanner`]);
//! the states and their order of importance from the run's assessment.

use super::HouseMesh;
use super::{
    de, text, Draw, FigureError, FigureMeta, Plot, BAND, BANK, INK, LIMIT, MAIN, MEDIUM, MUTED,
};
use crate::bank::BankState;
use crate::harmonics::is_triplen;
use crate::harmonics::scan::{ScanGrid, Scanner};
use crate::report::{num, steps_label, ReportContext};
use plotters::coord::Shift;
use plotters::prelude::*;

/// Most bank states drawn.
pub const MAX_CURVES: usize = 6;

/// Spacing of the drawn curves, orders (the true peak of each state is added to it).
const STEP: f64 = 0.04;

/// One curve to draw: the states whose curves coincide share it (same kvar of the same
/// kinds of step), listed one label each.
struct Curve {
    labels: Vec<String>,
    points: Vec<(f64, f64)>,
}

struct ZDraw {
    curves: Vec<Curve>,
    supply: Vec<(f64, f64)>,
    /// (order, is triplen, impedance at the voltage limit if one applies).
    harmonics: Vec<(f64, bool, Option<f64>)>,
    tolerance: f64,
    to: f64,
    stiff: bool,
}

/// Line styles of the curves: colour, width and dash (on, off) in pixels; they differ in
/// lightness and pattern so that they part in grey.
const STYLES: [(RGBColor, u32, (i32, i32)); MAX_CURVES] = [
    (INK, 2, (0, 0)),
    (BANK, 2, (0, 0)),
    (MAIN, 2, (9, 5)),
    (LIMIT, 2, (3, 4)),
    (MUTED, 2, (12, 4)),
    (BANK, 1, (5, 3)),
];

/// Draws a polyline in pixels, dashed when `dash.0` > 0.
fn polyline<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    pts: &[(i32, i32)],
    style: ShapeStyle,
    dash: (i32, i32),
) -> Result<(), String> {
    if dash.0 == 0 {
        return area
            .draw(&PathElement::new(pts.to_vec(), style))
            .map_err(de);
    }
    // Walk the polyline, drawing `on` pixels and skipping `off`.
    let mut seg: Vec<(i32, i32)> = Vec::new();
    let mut pos = 0.0f64;
    let period = (dash.0 + dash.1) as f64;
    for w in pts.windows(2) {
        let (a, b) = (w[0], w[1]);
        let len = ((b.0 - a.0) as f64).hypot((b.1 - a.1) as f64);
        let on = pos % period < dash.0 as f64;
        if on {
            if seg.is_empty() {
                seg.push(a);
            }
            seg.push(b);
        } else if seg.len() > 1 {
            area.draw(&PathElement::new(std::mem::take(&mut seg), style))
                .map_err(de)?;
        } else {
            seg.clear();
        }
        pos += len.max(1.0);
    }
    if seg.len() > 1 {
        area.draw(&PathElement::new(seg, style)).map_err(de)?;
    }
    Ok(())
}

impl Draw for ZDraw {
    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        meta: &mut FigureMeta,
    ) -> Result<(), String> {
        let (main, side) = root.split_horizontally(root.dim_in_pixel().0 - 230);
        if self.stiff {
            main.draw(&Text::new(
                "The supply is taken as infinitely stiff: |Z| is zero and no state resonates."
                    .to_string(),
                (60, 60),
                text(14.0),
            ))
            .map_err(de)?;
            return Ok(());
        }
        let mut lo = f64::INFINITY;
        let mut hi = 0.0f64;
        for p in self
            .curves
            .iter()
            .flat_map(|c| c.points.iter())
            .chain(self.supply.iter())
        {
            if p.1 > 0.0 {
                lo = lo.min(p.1);
                hi = hi.max(p.1);
            }
        }
        for (_, _, z) in &self.harmonics {
            if let Some(z) = z {
                hi = hi.max(*z);
            }
        }
        if !(lo.is_finite() && hi > 0.0) {
            lo = 1e-3;
            hi = 1.0;
        }
        let (lo, hi) = (lo * 0.7, hi * 1.6);
        let mut ch = ChartBuilder::on(&main)
            .margin_top(16)
            .margin_right(12)
            .x_label_area_size(44)
            .y_label_area_size(80)
            .build_cartesian_2d(1.0..self.to, (lo..hi).log_scale())
            .map_err(de)?;
        ch.configure_mesh()
            .x_labels(12)
            .y_labels(8)
            .x_desc("harmonic order h (× the fundamental frequency)")
            .y_desc("|Z(h)| at the bus, ohm per phase")
            .x_label_formatter(&|v| format!("{v:.0}"))
            .y_label_formatter(&|v| {
                if *v >= 1.0 {
                    format!("{v:.1}")
                } else {
                    format!("{v:.3}")
                }
            })
            .house()
            .draw()
            .map_err(de)?;
        // The harmonics of the load: a band of the warning tolerance and a line each.
        for &(h, triplen, _) in &self.harmonics {
            if h > self.to {
                continue;
            }
            if !triplen {
                ch.plotting_area()
                    .draw(&Rectangle::new(
                        [(h - self.tolerance, lo), (h + self.tolerance, hi)],
                        BAND.filled(),
                    ))
                    .map_err(de)?;
            }
            ch.plotting_area()
                .draw(&PathElement::new(
                    vec![(h, lo), (h, hi)],
                    MUTED.stroke_width(1),
                ))
                .map_err(de)?;
            let (px, py) = ch.backend_coord(&(h, hi));
            main.draw(&Text::new(
                format!("h{}", num(h, 0)),
                (px + 3, py + 2),
                text(11.0),
            ))
            .map_err(de)?;
        }
        // Pixel positions from `backend_coord` are the backend's: draw them on the root.
        let area = root;
        let px = |pts: &[(f64, f64)]| -> Vec<(i32, i32)> {
            pts.iter()
                .filter(|p| p.1 > 0.0)
                .map(|p| ch.backend_coord(&(p.0, p.1.clamp(lo, hi))))
                .collect()
        };
        polyline(area, &px(&self.supply), MUTED.stroke_width(1), (2, 3))?;
        meta.add("supply alone", "ohm", self.supply.iter().map(|p| p.1));
        for (c, st) in self.curves.iter().zip(STYLES) {
            polyline(area, &px(&c.points), st.0.stroke_width(st.1), st.2)?;
            for label in &c.labels {
                meta.add(label, "ohm", c.points.iter().map(|p| p.1));
            }
        }
        // The impedance at which each harmonic alone reaches its voltage limit.
        let mut limits = Vec::new();
        for &(h, _, z) in &self.harmonics {
            if let (Some(z), true) = (z, h <= self.to) {
                let (x, y) = ch.backend_coord(&(h, z.clamp(lo, hi)));
                area.draw(&PathElement::new(
                    vec![(x - 10, y), (x + 10, y)],
                    LIMIT.stroke_width(3),
                ))
                .map_err(de)?;
                area.draw(&PathElement::new(
                    vec![(x, y), (x, y + 6)],
                    LIMIT.stroke_width(2),
                ))
                .map_err(de)?;
                limits.push(z);
            }
        }
        meta.add("voltage limit", "ohm", limits);

        // The key, one line per curve.
        let mut y = 24;
        side.draw(&Text::new(
            "bank state (steps on)".to_string(),
            (8, y - 7),
            text(12.0),
        ))
        .map_err(de)?;
        y += 22;
        for (c, st) in self.curves.iter().zip(STYLES) {
            polyline(&side, &[(8, y), (40, y)], st.0.stroke_width(st.1), st.2)?;
            for label in &c.labels {
                side.draw(&Text::new(label.clone(), (48, y - 7), text(12.0)))
                    .map_err(de)?;
                y += 16;
            }
            y += 6;
        }
        polyline(&side, &[(8, y), (40, y)], MUTED.stroke_width(1), (2, 3))?;
        side.draw(&Text::new(
            "supply alone".to_string(),
            (48, y - 7),
            text(12.0),
        ))
        .map_err(de)?;
        y += 30;
        side.draw(&PathElement::new(
            vec![(14, y), (34, y)],
            LIMIT.stroke_width(3),
        ))
        .map_err(de)?;
        side.draw(&Text::new(
            "|Z| at which the".to_string(),
            (48, y - 7),
            text(12.0),
        ))
        .map_err(de)?;
        side.draw(&Text::new(
            "harmonic meets its".to_string(),
            (48, y + 8),
            text(12.0),
        ))
        .map_err(de)?;
        side.draw(&Text::new(
            "voltage limit".to_string(),
            (48, y + 23),
            text(12.0),
        ))
        .map_err(de)?;
        y += 48;
        side.draw(&Rectangle::new([(14, y - 6), (34, y + 6)], BAND.filled()))
            .map_err(de)?;
        side.draw(&Text::new(
            "warning tolerance".to_string(),
            (48, y - 7),
            text(12.0),
        ))
        .map_err(de)?;
        Ok(())
    }
}

/// (f) |Z(h)| for the bank states the run reached that count most (hours × severity),
/// with the load's harmonics and the voltage limits marked.
pub fn impedance_figure<'a>(ctx: &'a ReportContext<'a>) -> Result<Plot<'a>, FigureError> {
    let model = ctx.study.harmonic_model();
    let r = &ctx.assessment.resonance;
    let sc = ctx.scenario();
    // The states that count most first, as the summary ranks them.
    let mut states: Vec<_> = r.states.iter().filter(|s| s.kvar > 0.0).collect();
    states.sort_by(|a, b| {
        (b.hours_per_year * b.severity.max(1e-9))
            .total_cmp(&(a.hours_per_year * a.severity.max(1e-9)))
            .then(b.hours_per_year.total_cmp(&a.hours_per_year))
            .then(a.steps.len().cmp(&b.steps.len()))
    });
    states.truncate(MAX_CURVES);
    let top_order = sc
        .spectrum
        .orders
        .iter()
        .map(|o| o.0)
        .chain(states.iter().filter_map(|s| s.peak_order))
        .fold(7.0f64, f64::max);
    let to = (top_order + 3.0).clamp(10.0, 50.0);
    let grid = ScanGrid {
        from: 1.0,
        to,
        step: STEP,
    };
    let scanner = Scanner::new(model.clone(), grid);
    let orders: Vec<f64> = (0..grid.len()).map(|j| grid.order(j)).collect();
    let curve = |mask: BankState, peak: Option<(f64, f64)>| -> Vec<(f64, f64)> {
        let mut pts: Vec<(f64, f64)> = orders.iter().copied().zip(scanner.curve(mask)).collect();
        // The refined peak, so that the curve reaches its true height.
        if let Some((h, z)) = peak {
            if h > 1.0 && h < to {
                let at = pts.partition_point(|p| p.0 < h);
                pts.insert(at, (h, z));
            }
        }
        pts
    };
    let mut curves: Vec<Curve> = Vec::new();
    for s in &states {
        let points = curve(
            BankState::of_steps(&s.steps),
            s.peak_order.zip(s.peak_impedance_ohm),
        );
        let label = steps_label(&s.steps);
        let same = |c: &Curve| {
            c.points.len() == points.len()
                && c.points
                    .iter()
                    .zip(&points)
                    .all(|(a, b)| a.0 == b.0 && (a.1 - b.1).abs() <= 1e-9 * a.1.abs().max(1e-12))
        };
        match curves.iter_mut().find(|c| same(c)) {
            Some(c) => c.labels.push(label),
            None => curves.push(Curve {
                labels: vec![label],
                points,
            }),
        }
    }
    let supply = curve(BankState::EMPTY, None);
    let u_n = sc.supply.nominal_voltage_v;
    let s_ref = sc.spectrum.reference_kva;
    let harmonics = sc
        .spectrum
        .orders
        .iter()
        .map(|&(h, pct)| {
            let triplen = is_triplen(h);
            // V_h = I_h·|Z| with I_h = pct/100 · S_ref/(√3·U_n): the limit l % of U_n/√3
            // is met at |Z| = l·U_n² / (pct·S_ref), S_ref in VA.
            let z = (!triplen && pct > 0.0 && s_ref > 0.0)
                .then(|| {
                    model
                        .options
                        .voltage_limits
                        .individual_pct(u_n, h)
                        .map(|l| l * u_n * u_n / (pct * s_ref * 1e3))
                })
                .flatten();
            (h, triplen, z)
        })
        .collect();
    let d = ZDraw {
        curves,
        supply,
        harmonics,
        tolerance: sc.resonance_tolerance,
        to,
        stiff: model.is_stiff(),
    };
    Ok(Plot::new(
        d,
        "impedance-by-state",
        "Which bank states resonate".to_string(),
        format!(
            "|Z(h)|, the impedance the load's harmonic currents meet at the bus, for the \
             bank states reached that count most (time × severity), on a logarithmic scale; \
             states with the same connected kvar of the same kinds of step share one curve. \
             A peak inside a shaded band (±{} orders around a harmonic of the load) is a \
             resonance near that harmonic. Where a curve passes above a red mark, the load's \
             current at that harmonic alone would push the bus voltage over its limit \
             ({}); triplen orders (3, 9, ...) meet the zero-sequence circuit instead and \
             carry no mark.",
            num(sc.resonance_tolerance, 2),
            r.voltage_limits
        ),
        MEDIUM,
    ))
}
