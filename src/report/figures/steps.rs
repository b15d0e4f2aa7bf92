//! The wear figure: operations in the run and projected years to rated life, one bar per
//! step, from the run's metrics.

use super::{de, legend, text, Draw, FigureError, FigureMeta, Key, Plot, BANK, INK, MAIN, MEDIUM};
use super::{whole_label, HouseMesh};
use crate::report::ReportContext;
use plotters::coord::Shift;
use plotters::prelude::*;

/// Longest bar of the years panel, years; longer projections are drawn to it and marked.
const YEARS_CAP: f64 = 50.0;

struct WearDraw<'a> {
    ctx: &'a ReportContext<'a>,
}

impl Draw for WearDraw<'_> {
    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        meta: &mut FigureMeta,
    ) -> Result<(), String> {
        let wear = &self.ctx.result.metrics.wear;
        let n = wear.len().max(1);
        let (left, right) = root.split_horizontally(root.dim_in_pixel().0 / 2);
        let max_ops = wear.iter().map(|w| w.operations).max().unwrap_or(0).max(1) as f64;
        legend(&left, 80, 14, &[(Key::Fill(MAIN), "operations in the run")])?;
        let mut ch = ChartBuilder::on(&left)
            .margin_top(30)
            .margin_right(16)
            .x_label_area_size(44)
            .y_label_area_size(70)
            .build_cartesian_2d(0.5..n as f64 + 0.5, 0.0..max_ops * 1.12)
            .map_err(de)?;
        ch.configure_mesh()
            .x_labels(n.min(24))
            .x_label_formatter(&whole_label)
            .y_labels(6)
            .y_label_formatter(&|v| format!("{v:.0}"))
            .x_desc("step")
            .y_desc("operations, count")
            .disable_x_mesh()
            .house()
            .draw()
            .map_err(de)?;
        for w in wear {
            let x = w.step as f64;
            ch.plotting_area()
                .draw(&Rectangle::new(
                    [(x - 0.32, 0.0), (x + 0.32, w.operations as f64)],
                    MAIN.filled(),
                ))
                .map_err(de)?;
        }
        meta.add(
            "operations",
            "count",
            wear.iter().map(|w| w.operations as f64),
        );

        legend(
            &right,
            80,
            14,
            &[
                (Key::Fill(BANK), "years to rated life at this rate"),
                (Key::Fill(WHITE), "fixed or never operated"),
            ],
        )?;
        let years: Vec<Option<f64>> = wear.iter().map(|w| w.years_to_rated_life).collect();
        let top = years
            .iter()
            .flatten()
            .fold(1.0f64, |a, &y| a.max(y.min(YEARS_CAP)));
        let mut ch = ChartBuilder::on(&right)
            .margin_top(30)
            .margin_right(20)
            .x_label_area_size(44)
            .y_label_area_size(70)
            .build_cartesian_2d(0.5..n as f64 + 0.5, 0.0..top * 1.15)
            .map_err(de)?;
        ch.configure_mesh()
            .x_labels(n.min(24))
            .x_label_formatter(&whole_label)
            .y_labels(6)
            .y_label_formatter(&|v| format!("{v:.0}"))
            .x_desc("step")
            .y_desc("years to rated life, years")
            .disable_x_mesh()
            .house()
            .draw()
            .map_err(de)?;
        for (w, y) in wear.iter().zip(&years) {
            let x = w.step as f64;
            match y {
                Some(y) => {
                    let h = y.min(YEARS_CAP);
                    ch.plotting_area()
                        .draw(&Rectangle::new(
                            [(x - 0.32, 0.0), (x + 0.32, h)],
                            BANK.filled(),
                        ))
                        .map_err(de)?;
                    if *y > YEARS_CAP {
                        let (px, py) = ch.backend_coord(&(x, h));
                        root.draw(&Text::new(
                            format!("> {YEARS_CAP:.0}"),
                            (px - 12, py - 16),
                            text(11.0),
                        ))
                        .map_err(de)?;
                    }
                }
                None => {
                    let (px, py) = ch.backend_coord(&(x, 0.0));
                    root.draw(&Text::new(
                        if w.fixed { "fixed" } else { "none" }.to_string(),
                        (px - 12, py - 18),
                        text(10.0).color(&INK),
                    ))
                    .map_err(de)?;
                }
            }
        }
        meta.add(
            "years to rated life",
            "years",
            years.iter().flatten().copied(),
        );
        Ok(())
    }
}

/// (d) Operations in the run and projected years to rated life, one bar per step.
pub fn wear_figure<'a>(ctx: &'a ReportContext<'a>) -> Result<Plot<'a>, FigureError> {
    Ok(Plot::new(
        WearDraw { ctx },
        "step-wear",
        "Which steps did the work".to_string(),
        format!(
            "Left: operations of each step in the run. Right: the years each step's \
             contactor would last at this rate, up to its rated number of operations \
             (longer than {YEARS_CAP:.0} years drawn at {YEARS_CAP:.0}). Steps that carry \
             most operations wear first; a rotating order spreads the wear."
        ),
        MEDIUM,
    ))
}
