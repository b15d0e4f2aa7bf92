//! Figures of a run over time, drawn from its bounded trace: the supply PF against the
//! target with the controller's demand against the dead band, the kvar needed against
//! the kvar delivered, the step raster and the hour-of-day heat map.
//!
//! Each time bucket is drawn as its lowest-to-highest band, so a spike shorter than a
//! pixel still shows at its full height.

use super::HouseMesh;
use super::{
    dashed, de, legend, scale_colour, text, tint, Draw, FigureError, FigureMeta, Key, Plot, BAND,
    BANK, BANK_LIGHT, INK, LIMIT, MAIN, MAIN_LIGHT, MEDIUM, MUTED, OVER, WIDE,
};
use crate::pf::Quadrant;
use crate::report::{num, ReportContext};
use crate::timebase::DAY_S;
use crate::trace::{Bucket, Range, Trace};
use plotters::coord::Shift;
use plotters::prelude::*;

/// The time axis of a run: days from the start for runs of two days or more, else hours.
#[derive(Debug, Clone)]
struct TimeAxis {
    t0: f64,
    unit_s: f64,
    desc: String,
    end: f64,
}

impl TimeAxis {
    fn of(ctx: &ReportContext<'_>, trace: &Trace) -> TimeAxis {
        let t0 = trace.t_first_s();
        let span = trace.intervals() as f64 * trace.dt_s();
        let (unit_s, word) = if span >= 2.0 * DAY_S {
            (DAY_S, "days")
        } else {
            (3600.0, "hours")
        };
        let start = ctx
            .study
            .plan
            .calendar
            .datetime(t0)
            .format("%Y-%m-%d %H:%M");
        TimeAxis {
            t0,
            unit_s,
            desc: format!("time from {start}, {word}"),
            end: (span / unit_s).max(1e-9),
        }
    }

    fn x(&self, t: f64) -> f64 {
        (t - self.t0) / self.unit_s
    }
}

/// The x range of bucket `i`, in axis units.
fn bucket_x(trace: &Trace, ax: &TimeAxis, i: usize) -> (f64, f64) {
    let a = ax.x(trace.bucket_start_s(i));
    let b = ax.x(trace.bucket_start_s(i + 1)).min(ax.end);
    (a, b.max(a))
}

/// The band of a quantity over the buckets as one filled rectangle per bucket, from its
/// lowest to its highest value, clipped to `clip`: together a staircase, drawn without
/// holding the outline in memory.
fn envelope<'t>(
    trace: &'t Trace,
    ax: &'t TimeAxis,
    pick: impl Fn(&Bucket) -> Option<(f64, f64)> + 't,
    clip: (f64, f64),
    style: ShapeStyle,
) -> impl Iterator<Item = Rectangle<(f64, f64)>> + 't {
    trace
        .buckets()
        .iter()
        .enumerate()
        .filter_map(move |(i, bk)| {
            let (lo, hi) = pick(bk)?;
            let (x0, x1) = bucket_x(trace, ax, i);
            Some(Rectangle::new(
                [
                    (x0, hi.clamp(clip.0, clip.1)),
                    (x1, lo.clamp(clip.0, clip.1)),
                ],
                style,
            ))
        })
}

/// The lowest and highest of a range, `None` when it holds nothing.
fn span(r: Range) -> Option<(f64, f64)> {
    (!r.is_empty()).then_some((r.lo, r.hi))
}

/// The spans of buckets with any interval in an overcorrection episode, merged.
fn over_spans(trace: &Trace, ax: &TimeAxis) -> Vec<(f64, f64)> {
    let mut out: Vec<(f64, f64)> = Vec::new();
    for (i, b) in trace.buckets().iter().enumerate() {
        if b.overcorrected == 0 {
            continue;
        }
        let (x0, x1) = bucket_x(trace, ax, i);
        match out.last_mut() {
            Some(last) if (last.1 - x0).abs() < 1e-12 => last.1 = x1,
            _ => out.push((x0, x1)),
        }
    }
    out
}

/// Lowest and highest over the buckets.
fn extremes(trace: &Trace, pick: impl Fn(&Bucket) -> Range) -> Range {
    let mut r = Range::EMPTY;
    for b in trace.buckets() {
        let x = pick(b);
        if !x.is_empty() {
            r.lo = r.lo.min(x.lo);
            r.hi = r.hi.max(x.hi);
        }
    }
    r
}

/// A value range with a margin, never empty.
fn padded(lo: f64, hi: f64, frac: f64) -> (f64, f64) {
    let (lo, hi) = if lo.is_finite() && hi.is_finite() {
        (lo, hi)
    } else {
        (0.0, 1.0)
    };
    let span = (hi - lo).abs().max(1e-6);
    (lo - frac * span, hi + frac * span)
}

/// The PF on the signed scale of the target.
fn target_scale(ctx: &ReportContext<'_>) -> f64 {
    let t = ctx.scenario().controller.target;
    if t.quadrant == Quadrant::Lead && t.pf < 1.0 {
        2.0 - t.pf
    } else {
        t.pf
    }
}

/// A tick label of the signed PF scale: `0.90 lag`, `1.00`, `0.90 lead`.
fn pf_label(v: f64) -> String {
    if (v - 1.0).abs() < 5e-4 {
        "1.00".to_string()
    } else if v < 1.0 {
        format!("{v:.2} lag")
    } else {
        format!("{:.2} lead", 2.0 - v)
    }
}

/// Lowest PF (lagging) drawn; lower values are drawn at the edge.
const PF_FLOOR: f64 = 0.5;

struct PfDraw<'a> {
    ctx: &'a ReportContext<'a>,
    trace: &'a Trace,
}

impl Draw for PfDraw<'_> {
    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        meta: &mut FigureMeta,
    ) -> Result<(), String> {
        let (tr, ctx) = (self.trace, self.ctx);
        let ax = TimeAxis::of(ctx, tr);
        let target = target_scale(ctx);
        let band = ctx.scenario().controller.dead_band_kvar;
        let (top, bottom) = root.split_vertically(270);
        let over = over_spans(tr, &ax);

        // Upper panel: the supply PF on one signed scale.
        let pf = extremes(tr, |b| b.pf);
        let lo = pf.lo.min(target).min(1.0) - 0.02;
        let hi = pf.hi.max(target).max(1.0) + 0.02;
        let (lo, hi) = (
            ((lo * 20.0).floor() / 20.0).clamp(PF_FLOOR, 0.95),
            ((hi * 20.0).ceil() / 20.0).clamp(1.05, 2.0 - PF_FLOOR),
        );
        legend(
            &top,
            90,
            14,
            &[
                (Key::Fill(MAIN_LIGHT), "supply PF, lowest to highest"),
                (Key::Dash(INK, 2), "target"),
                (Key::Fill(OVER), "overcorrection episode"),
            ],
        )?;
        let mut ch = ChartBuilder::on(&top)
            .margin_top(28)
            .margin_right(20)
            .x_label_area_size(8)
            .y_label_area_size(88)
            .build_cartesian_2d(0.0..ax.end, lo..hi)
            .map_err(de)?;
        ch.configure_mesh()
            .x_labels(0)
            .y_labels(6)
            .y_label_formatter(&|v| pf_label(*v))
            .y_desc("supply power factor")
            .house()
            .draw()
            .map_err(de)?;
        for &(x0, x1) in &over {
            ch.plotting_area()
                .draw(&Rectangle::new([(x0, lo), (x1, hi)], OVER.filled()))
                .map_err(de)?;
        }
        ch.draw_series(envelope(
            tr,
            &ax,
            |b| span(b.pf),
            (lo, hi),
            MAIN_LIGHT.filled(),
        ))
        .map_err(de)?;
        ch.plotting_area()
            .draw(&PathElement::new(
                vec![(0.0, 1.0), (ax.end, 1.0)],
                MUTED.stroke_width(1),
            ))
            .map_err(de)?;
        let a = ch.backend_coord(&(0.0, target));
        let b = ch.backend_coord(&(ax.end, target));
        dashed(root, a, b, INK.stroke_width(2))?;
        let mut clipped = Vec::new();
        if pf.lo < lo {
            clipped.push(format!("most lagging {} lag", num(pf.lo.min(1.0), 2)));
        }
        if pf.hi > hi {
            clipped.push(format!(
                "most leading {} lead",
                num(2.0 - pf.hi.max(1.0), 2)
            ));
        }
        if !clipped.is_empty() {
            top.draw(&Text::new(
                format!("{}: drawn at the edge", clipped.join(", ")),
                (96, 34),
                text(12.0).color(&MUTED),
            ))
            .map_err(de)?;
        }
        meta.add("supply PF", "PF scale", [pf.lo, pf.hi]);

        // Lower panel: the supply's reactive power against the target and its dead band.
        let sc = ctx.scenario();
        let tan_t = sc.controller.target.tan_phi();
        let thr = sc.overcorrection_threshold_kvar;
        let q = extremes(tr, |b| b.q_kvar);
        // The band of reactive power the controller leaves alone: |P|·tan φ_t ± the dead
        // band, over the range of P in each bucket.
        let band_of = |b: &Bucket| -> Option<(f64, f64)> {
            if b.p_kw.is_empty() {
                return None;
            }
            let (lo, hi) = (b.p_kw.lo, b.p_kw.hi);
            let a_hi = lo.abs().max(hi.abs());
            let a_lo = if lo <= 0.0 && hi >= 0.0 {
                0.0
            } else {
                lo.abs().min(hi.abs())
            };
            let (t0, t1) = (a_lo * tan_t, a_hi * tan_t);
            Some((t0.min(t1) - band, t0.max(t1) + band))
        };
        let (mut blo, mut bhi) = (f64::INFINITY, f64::NEG_INFINITY);
        for b in tr.buckets() {
            if let Some((l, h)) = band_of(b) {
                blo = blo.min(l);
                bhi = bhi.max(h);
            }
        }
        let lagging_target = tan_t >= 0.0;
        let (dlo, dhi) = padded(
            q.lo.min(blo).min(if lagging_target { -thr } else { q.lo }),
            q.hi.max(bhi),
            0.06,
        );
        let mut keys = vec![
            (Key::Fill(MAIN), "supply reactive power, lowest to highest"),
            (Key::Fill(BAND), "target ± dead band"),
        ];
        if lagging_target {
            keys.push((Key::Dash(LIMIT, 1), "overcorrection threshold"));
        }
        keys.push((Key::Line(LIMIT, 3), "most leading in an episode"));
        legend(&bottom, 90, 12, &keys)?;
        let mut ch = ChartBuilder::on(&bottom)
            .margin_top(24)
            .margin_right(20)
            .x_label_area_size(44)
            .y_label_area_size(88)
            .build_cartesian_2d(0.0..ax.end, dlo..dhi)
            .map_err(de)?;
        ch.configure_mesh()
            .x_labels(10)
            .y_labels(6)
            .x_desc(ax.desc.as_str())
            .y_desc("supply reactive power, kvar")
            .y_label_formatter(&|v| format!("{v:.0}"))
            .house()
            .draw()
            .map_err(de)?;
        for &(x0, x1) in &over {
            ch.plotting_area()
                .draw(&Rectangle::new([(x0, dlo), (x1, dhi)], OVER.filled()))
                .map_err(de)?;
        }
        ch.draw_series(envelope(
            tr,
            &ax,
            |b| span(b.q_kvar),
            (dlo, dhi),
            MAIN.filled(),
        ))
        .map_err(de)?;
        // The band over the supply's envelope, see-through, with its edges drawn.
        ch.draw_series(envelope(
            tr,
            &ax,
            band_of,
            (dlo, dhi),
            BAND.mix(0.7).filled(),
        ))
        .map_err(de)?;
        for upper_edge in [true, false] {
            let edge = tr.buckets().iter().enumerate().flat_map(|(i, b)| {
                let (x0, x1) = bucket_x(tr, &ax, i);
                band_of(b)
                    .map(|(l, h)| {
                        let y = if upper_edge { h } else { l }.clamp(dlo, dhi);
                        [(x0, y), (x1, y)]
                    })
                    .into_iter()
                    .flatten()
            });
            ch.plotting_area()
                .draw(&PathElement::new(
                    edge.collect::<Vec<_>>(),
                    INK.stroke_width(1),
                ))
                .map_err(de)?;
        }
        if lagging_target {
            let a = ch.backend_coord(&(0.0, -thr));
            let b = ch.backend_coord(&(ax.end, -thr));
            dashed(root, a, b, LIMIT.stroke_width(1))?;
        }
        let mut deepest = Vec::new();
        for (i, b) in tr.buckets().iter().enumerate() {
            if b.episode_q_min.is_finite() {
                let (x0, x1) = bucket_x(tr, &ax, i);
                let y = b.episode_q_min.clamp(dlo, dhi);
                let (p0, p1) = (ch.backend_coord(&(x0, y)), ch.backend_coord(&(x1, y)));
                root.draw(&PathElement::new(
                    vec![p0, (p1.0.max(p0.0 + 2), p1.1)],
                    LIMIT.stroke_width(3),
                ))
                .map_err(de)?;
                deepest.push(b.episode_q_min);
            }
        }
        meta.add("supply reactive power", "kvar", [q.lo, q.hi]);
        meta.add("most leading in an episode", "kvar", deepest);
        let over_s: u64 = tr.buckets().iter().map(|b| b.overcorrected).sum();
        meta.add("overcorrection episodes", "s", [over_s as f64 * tr.dt_s()]);
        Ok(())
    }
}

/// (a) The supply PF over time against the target, and the controller's demand against
/// the dead band, with overcorrection episodes shaded.
pub fn pf_figure<'a>(
    ctx: &'a ReportContext<'a>,
    trace: &'a Trace,
) -> Result<Plot<'a>, FigureError> {
    let c = &ctx.scenario().controller;
    Ok(Plot::new(
        PfDraw { ctx, trace },
        "pf-over-time",
        "Supply power factor against the target".to_string(),
        format!(
            "Top: the supply PF (lagging below 1.00, leading above), each pixel column from \
             its lowest to its highest value, against the {} target. Bottom: the supply's \
             reactive power against the band the controller leaves alone (the target's kvar \
             at the active power drawn, ±{} kvar dead band); above the band it adds \
             capacitance, below it takes some away. Shaded: overcorrection episodes ({} of \
             them), with the most leading point of each marked.",
            c.target,
            num(c.dead_band_kvar, 1),
            trace.episodes()
        ),
        WIDE,
    ))
}

struct KvarDraw<'a> {
    ctx: &'a ReportContext<'a>,
    trace: &'a Trace,
}

impl Draw for KvarDraw<'_> {
    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        meta: &mut FigureMeta,
    ) -> Result<(), String> {
        let (tr, ctx) = (self.trace, self.ctx);
        let ax = TimeAxis::of(ctx, tr);
        let need = extremes(tr, |b| b.needed_kvar);
        let bank = extremes(tr, |b| b.bank_kvar);
        let load = extremes(tr, |b| b.load_q_kvar);
        let installed: f64 = ctx.scenario().steps.iter().map(|s| s.kvar).sum();
        let (lo, hi) = padded(
            need.lo.min(bank.lo).min(0.0),
            need.hi.max(bank.hi).max(load.hi).max(installed),
            0.05,
        );
        legend(
            root,
            90,
            14,
            &[
                (Key::Fill(MAIN_LIGHT), "needed for the target"),
                (Key::Line(MAIN, 1), "needed, mean"),
                (Key::Fill(BANK_LIGHT), "delivered by the bank"),
                (Key::Line(BANK, 2), "delivered, mean"),
                (Key::Line(MUTED, 1), "load alone, highest"),
            ],
        )?;
        let mut ch = ChartBuilder::on(root)
            .margin_top(30)
            .margin_right(20)
            .x_label_area_size(44)
            .y_label_area_size(88)
            .build_cartesian_2d(0.0..ax.end, lo..hi)
            .map_err(de)?;
        ch.configure_mesh()
            .x_labels(10)
            .y_labels(8)
            .x_desc(ax.desc.as_str())
            .y_desc("reactive power, kvar")
            .y_label_formatter(&|v| format!("{v:.0}"))
            .house()
            .draw()
            .map_err(de)?;
        ch.draw_series(envelope(
            tr,
            &ax,
            |b| span(b.needed_kvar),
            (lo, hi),
            MAIN_LIGHT.filled(),
        ))
        .map_err(de)?;
        ch.draw_series(envelope(
            tr,
            &ax,
            |b| span(b.bank_kvar),
            (lo, hi),
            BANK_LIGHT.mix(0.6).filled(),
        ))
        .map_err(de)?;
        let mean = |sum: fn(&Bucket) -> f64| -> Vec<(f64, f64)> {
            let mut v = Vec::with_capacity(2 * tr.buckets().len());
            for (i, b) in tr.buckets().iter().enumerate() {
                if b.intervals == 0 {
                    continue;
                }
                let (x0, x1) = bucket_x(tr, &ax, i);
                let y = (sum(b) / b.intervals as f64).clamp(lo, hi);
                v.push((x0, y));
                v.push((x1, y));
            }
            v
        };
        ch.plotting_area()
            .draw(&PathElement::new(
                mean(|b| b.needed_sum),
                MAIN.stroke_width(1),
            ))
            .map_err(de)?;
        ch.plotting_area()
            .draw(&PathElement::new(
                mean(|b| b.bank_sum),
                BANK.stroke_width(2),
            ))
            .map_err(de)?;
        // The load's own highest reactive power per bucket, a thin grey line.
        let load_hi: Vec<(f64, f64)> = tr
            .buckets()
            .iter()
            .enumerate()
            .filter(|(_, b)| !b.load_q_kvar.is_empty())
            .flat_map(|(i, b)| {
                let (x0, x1) = bucket_x(tr, &ax, i);
                let y = b.load_q_kvar.hi.clamp(lo, hi);
                [(x0, y), (x1, y)]
            })
            .collect();
        ch.plotting_area()
            .draw(&PathElement::new(load_hi, MUTED.stroke_width(1)))
            .map_err(de)?;
        meta.add("needed for the target", "kvar", [need.lo, need.hi]);
        meta.add("delivered by the bank", "kvar", [bank.lo, bank.hi]);
        meta.add("load reactive power", "kvar", [load.lo, load.hi]);
        Ok(())
    }
}

/// (b) The kvar the site needs to reach the target against the kvar the bank delivers:
/// the bank's staircase.
pub fn kvar_figure<'a>(
    ctx: &'a ReportContext<'a>,
    trace: &'a Trace,
) -> Result<Plot<'a>, FigureError> {
    Ok(Plot::new(
        KvarDraw { ctx, trace },
        "kvar-needed-delivered",
        "Reactive power needed against reactive power delivered".to_string(),
        format!(
            "Light blue: the kvar the bank would have to deliver to put the supply exactly on \
             the {} target; orange: the kvar the connected steps delivered, a staircase of \
             whole steps. Where orange lies above blue the bank overcorrects; below, the \
             site draws reactive power beyond the target. Grey line: the load's own reactive \
             power at its highest.",
            ctx.scenario().controller.target
        ),
        MEDIUM,
    ))
}

struct RasterDraw<'a> {
    ctx: &'a ReportContext<'a>,
    trace: &'a Trace,
}

/// Levels the share of time on is drawn in (equal neighbours merge into one box).
const LEVELS: f64 = 16.0;

impl Draw for RasterDraw<'_> {
    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        meta: &mut FigureMeta,
    ) -> Result<(), String> {
        let (tr, ctx) = (self.trace, self.ctx);
        let ax = TimeAxis::of(ctx, tr);
        let steps = &ctx.scenario().steps;
        let n = steps.len().max(1);
        legend(
            root,
            90,
            14,
            &[
                (Key::Fill(MAIN), "connected all the time"),
                (Key::Fill(tint(MAIN, 0.35)), "part of the time"),
                (Key::Fill(WHITE), "open"),
            ],
        )?;
        let mut ch = ChartBuilder::on(root)
            .margin_top(30)
            .margin_right(20)
            .x_label_area_size(44)
            .y_label_area_size(110)
            .build_cartesian_2d(0.0..ax.end, 0.0..n as f64)
            .map_err(de)?;
        ch.configure_mesh()
            .x_labels(10)
            .y_labels(0)
            .disable_y_mesh()
            .x_desc(ax.desc.as_str())
            .house()
            .draw()
            .map_err(de)?;
        let mut boxes = 0usize;
        for (s, spec) in steps.iter().enumerate() {
            let step = s + 1;
            // Step 1 on top.
            let y1 = (n - s) as f64;
            let y0 = y1 - 1.0;
            let mut run: Option<(f64, f64, f64)> = None;
            let mut rects = Vec::new();
            for i in 0..tr.buckets().len() {
                let share = (tr.on_share(i, step) * LEVELS).round() / LEVELS;
                let (x0, x1) = bucket_x(tr, &ax, i);
                match &mut run {
                    Some((_, e, v)) if *v == share => *e = x1,
                    _ => {
                        if let Some(r) = run.take() {
                            rects.push(r);
                        }
                        run = Some((x0, x1, share));
                    }
                }
            }
            rects.extend(run);
            for (x0, x1, v) in rects {
                if v <= 0.0 {
                    continue;
                }
                boxes += 1;
                ch.plotting_area()
                    .draw(&Rectangle::new(
                        [(x0, y0 + 0.08), (x1, y1 - 0.08)],
                        tint(MAIN, 0.15 + 0.85 * v).filled(),
                    ))
                    .map_err(de)?;
            }
            let (px, py) = ch.backend_coord(&(0.0, y0 + 0.5));
            let label = if spec.fixed {
                format!("step {step}, {} kvar fixed", num(spec.kvar, 0))
            } else {
                format!("step {step}, {} kvar", num(spec.kvar, 0))
            };
            root.draw(&Text::new(label, (px - 104, py - 7), text(12.0)))
                .map_err(de)?;
        }
        meta.rows = Some(steps.len());
        meta.add("boxes", "count", [boxes as f64]);
        Ok(())
    }
}

/// (c) The step states over time: one row per step, darker where the step was
/// connected for more of the pixel column.
pub fn raster_figure<'a>(
    ctx: &'a ReportContext<'a>,
    trace: &'a Trace,
) -> Result<Plot<'a>, FigureError> {
    let n = ctx.scenario().steps.len();
    let h = (110 + 26 * n as u32).clamp(220, 1800);
    Ok(Plot::new(
        RasterDraw { ctx, trace },
        "step-states",
        "Which steps were connected, and when".to_string(),
        "One row per step (step 1 at the top). Dark: connected for the whole pixel column; \
         lighter: connected for part of it; blank: open. Rows that change shade often \
         belong to steps doing much of the switching."
            .to_string(),
        (WIDE.0, h),
    ))
}

struct HeatDraw<'a> {
    ctx: &'a ReportContext<'a>,
    trace: &'a Trace,
}

impl HeatDraw<'_> {
    /// The PF range the colour scale spans, on the signed scale.
    fn span(&self) -> (f64, f64) {
        let (_, _, cells) = self.trace.hours();
        let target = target_scale(self.ctx);
        let mut lo = target.min(1.0);
        let mut hi = 1.0f64;
        for c in cells {
            if let Some(v) = c.pf_scale() {
                lo = lo.min(v);
                hi = hi.max(v);
            }
        }
        let lo = ((lo * 20.0).floor() / 20.0).max(PF_FLOOR);
        let hi = ((hi * 20.0).ceil() / 20.0).max(lo + 0.05);
        (lo, hi)
    }
}

impl Draw for HeatDraw<'_> {
    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        meta: &mut FigureMeta,
    ) -> Result<(), String> {
        let (tr, ctx) = (self.trace, self.ctx);
        let (first_day, per_col, cells) = tr.hours();
        let cols = (cells.len() / 24).max(1);
        let (lo, hi) = self.span();
        let (main, bar) = root.split_horizontally(WIDE.0 - 150);
        let start = ctx
            .study
            .plan
            .calendar
            .datetime(first_day as f64 * DAY_S - ctx.study.plan.calendar.offset_s)
            .format("%Y-%m-%d");
        let xdesc = if per_col == 1 {
            format!("day from {start}")
        } else {
            format!("day from {start} ({per_col} days per column)")
        };
        let mut ch = ChartBuilder::on(&main)
            .margin_top(16)
            .margin_right(10)
            .x_label_area_size(44)
            .y_label_area_size(70)
            .build_cartesian_2d(0.0..(cols as i64 * per_col) as f64, 0.0..24.0)
            .map_err(de)?;
        ch.configure_mesh()
            .x_labels(10)
            .y_labels(9)
            .disable_mesh()
            .x_desc(xdesc.as_str())
            .y_desc("hour of the day, h")
            .x_label_formatter(&|v| format!("{v:.0}"))
            .y_label_formatter(&|v| format!("{v:.0}:00"))
            .label_style(text(12.0))
            .axis_desc_style(text(13.0))
            .axis_style(MUTED)
            .draw()
            .map_err(de)?;
        let mut values = Vec::new();
        let q = |v: f64| ((v - lo) / (hi - lo) * 40.0).round() / 40.0;
        for c in 0..cols {
            let x0 = (c as i64 * per_col) as f64;
            let x1 = x0 + per_col as f64;
            // Equal neighbouring hours merge into one box; hour 0 at the bottom.
            let mut h = 0;
            while h < 24 {
                let v = cells[c * 24 + h].pf_scale();
                let mut e = h + 1;
                while e < 24 && cells[c * 24 + e].pf_scale().map(q) == v.map(q) {
                    if let Some(x) = cells[c * 24 + e].pf_scale() {
                        values.push(x);
                    }
                    e += 1;
                }
                if let Some(v) = v {
                    values.push(v);
                    ch.plotting_area()
                        .draw(&Rectangle::new(
                            [(x0, h as f64), (x1, e as f64)],
                            scale_colour(q(v)).filled(),
                        ))
                        .map_err(de)?;
                }
                h = e;
            }
        }
        // The colour bar.
        let top = 16;
        let bottom = main.dim_in_pixel().1 as i32 - 44;
        let x = 20;
        let steps = 60;
        for i in 0..steps {
            let y0 = bottom - (bottom - top) * i / steps;
            let y1 = bottom - (bottom - top) * (i + 1) / steps;
            bar.draw(&Rectangle::new(
                [(x, y1), (x + 18, y0)],
                scale_colour((i as f64 + 0.5) / steps as f64).filled(),
            ))
            .map_err(de)?;
        }
        bar.draw(&Rectangle::new([(x, top), (x + 18, bottom)], MUTED))
            .map_err(de)?;
        let mark = |v: f64| bottom - ((v - lo) / (hi - lo) * (bottom - top) as f64).round() as i32;
        let target = target_scale(ctx);
        let mut ticks = vec![(lo, pf_label(lo)), (hi, pf_label(hi))];
        if target > lo && target < hi {
            ticks.push((target, format!("{} target", pf_label(target))));
        }
        if 1.0 > lo + 0.02 && 1.0 < hi - 0.02 {
            ticks.push((1.0, "1.00".to_string()));
        }
        for (v, l) in ticks {
            let y = mark(v);
            bar.draw(&PathElement::new(vec![(x + 18, y), (x + 24, y)], INK))
                .map_err(de)?;
            bar.draw(&Text::new(l, (x + 27, y - 7), text(12.0)))
                .map_err(de)?;
        }
        bar.draw(&Text::new(
            "PF of the hour".to_string(),
            (x - 6, bottom + 14),
            text(12.0),
        ))
        .map_err(de)?;
        meta.rows = Some(24);
        meta.add("hourly PF", "PF scale", values);
        Ok(())
    }
}

/// (e) The supply PF of each hour of each day: the PF of the hour's mean power, dark
/// where it lags most, pale where it leads most.
pub fn heatmap_figure<'a>(
    ctx: &'a ReportContext<'a>,
    trace: &'a Trace,
) -> Result<Plot<'a>, FigureError> {
    Ok(Plot::new(
        HeatDraw { ctx, trace },
        "pf-by-hour",
        "Power factor by hour of the day".to_string(),
        "Each box is one hour of one day: the PF of the supply's mean power over that hour. \
         Dark: lagging most; pale: leading most; the colour bar marks the target and unity. \
         Patterns that repeat at the same hour point at the shift or process behind them."
            .to_string(),
        MEDIUM,
    ))
}
