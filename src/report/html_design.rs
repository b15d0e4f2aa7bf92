//! The report folder of `design --report DIR`: `report.html` on the shared page of
//! [`super::html_page`], and the kvar duration curve as SVG and PNG.
//!
//! Order: the recommended layout and why it ranks first, the cautions, what the load
//! needs (the duration curve with the levels the best layouts reach, then the figures:
//! the recommended total at the coverage, the largest need, the energy-weighted figure
//! and the light-load need), the ranked candidates with the reason for each place, the
//! notes, and the provenance. Everything is rendered from the [`Design`]; nothing here
//! judges.

use super::design::{
    candidates_sentence, need_rows, row, CANDIDATE_ALIGN, CANDIDATE_HEADERS, DESIGN_CAUTION,
    NEED_NOTE,
};
use super::figures::{duration_curve, escape, DurationData, Ladder, Level};
use super::html_page::{self, caution, end_section, pairs, para, section, table_marked, Page};
use super::{approx, num, pct, ReportError, HARDWARE_CAUTION, TOOL};
use crate::design::{Candidate, Design};
use crate::text::years_text;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// File name stem of the duration curve.
pub const DURATION_FIGURE: &str = "kvar-duration";

/// Layouts whose reachable levels the duration curve shows beside it (the best first).
pub const LADDERS: usize = 4;

/// Points the duration curve is drawn with, less one.
pub const CURVE_POINTS: usize = 1000;

/// The data of the duration curve: the need from its largest to its smallest against
/// the share of time, the recommended total as a line, and the reachable levels of the
/// best [`LADDERS`] candidates.
pub fn duration_data(d: &Design) -> DurationData {
    let n = &d.need;
    let curve: Vec<(f64, f64)> = n
        .duration_curve
        .points(CURVE_POINTS)
        .iter()
        .map(|p| (100.0 * p.share_of_time, p.kvar))
        .collect();
    let ladders: Vec<Ladder> = d
        .candidates
        .iter()
        .take(LADDERS)
        .map(|c| Ladder {
            label: c.label.clone(),
            levels: c.reachable_kvar.clone(),
        })
        .collect();
    let shown = ladders.len();
    let mut caption = format!(
        "The kvar the load needs to reach the {} target, from its largest (left) to its \
         smallest, against the share of the run's time it is reached or exceeded. Dashed: \
         the recommended total, which covers the need {} of the time.",
        n.target,
        pct(n.coverage)
    );
    if shown > 0 {
        let _ = write!(
            caption,
            " Right, on the same scale: every level the {} can reach with its steps \
             (#1 is the recommended layout). The closer the levels, the closer the bank \
             can follow the need; the top level lies at or above the dashed line, since \
             layouts are kept from 100 to 130 % of the recommended total.",
            if shown == 1 {
                "best layout".to_string()
            } else {
                format!("{shown} best layouts")
            }
        );
    }
    DurationData {
        name: DURATION_FIGURE.to_string(),
        title: "How much kvar the load needs, and for how long".to_string(),
        caption,
        y_label: "kvar needed for the target, kvar".to_string(),
        series: "kvar needed".to_string(),
        unit: "kvar".to_string(),
        curve,
        lines: vec![Level {
            label: format!("recommended total {} kvar", num(n.recommended_kvar, 1)),
            value: n.recommended_kvar,
        }],
        ladders,
    }
}

/// Writes the report folder of a design. Returns the files written.
pub fn write_report_dir(d: &Design, dir: &Path) -> Result<Vec<PathBuf>, ReportError> {
    let title = format!("Bank design: {}", d.scenario);
    let subs = vec![
        format!(
            "Target {}; {} candidate layout{} simulated in {} runs on the site's own load \
             profile.",
            d.need.target,
            d.candidates.len(),
            if d.candidates.len() == 1 { "" } else { "s" },
            crate::text::count(d.runs as u64)
        ),
        format!(
            "Recommended total {} kvar: covers the need {} of the time.",
            num(d.need.recommended_kvar, 1),
            pct(d.need.coverage)
        ),
    ];
    html_page::write_report_dir(dir, &title, &subs, |page| {
        recommended(d, page.html());
        need(d, page)?;
        let h = page.html();
        candidates(d, h);
        notes(d, h);
        provenance(d, h);
        Ok(())
    })
}

/// Resonance of a candidate in words.
fn resonance_words(c: &Candidate) -> String {
    let r = &c.resonance;
    let state = match (&r.worst_state, &r.worst_status) {
        (Some(s), Some(st)) => format!("; worst state {s}: {st}"),
        _ => String::new(),
    };
    if r.over_limit {
        format!(
            "a state reached exceeds a harmonic or capacitor limit, {} h a year{state}",
            approx(r.hours_over_limit)
        )
    } else if r.near_harmonic {
        format!(
            "a state reached resonates near a harmonic of the load, {} h a year{state}",
            approx(r.hours_near_harmonic)
        )
    } else {
        format!("no state reached near a harmonic or over a limit{state}")
    }
}

fn recommended(d: &Design, h: &mut String) {
    section(h, "recommended", "Recommended layout");
    match d.recommended() {
        Some(c) => {
            h.push_str("<div class=\"lead\">\n");
            para(h, None, &format!("{}: {}.", c.label, c.description));
            para(h, None, &c.reason);
            para(h, None, &c.light_load_sentence());
            h.push_str("</div>\n");
            let life = match c.years_to_first_contactor_life {
                Some(y) => format!("{} years", years_text(y)),
                None => "no contactor operates".to_string(),
            };
            pairs(
                h,
                &[
                    (
                        "Effective total",
                        format!(
                            "{} kvar in {} switched steps",
                            num(c.total_kvar, 1),
                            c.steps
                        ),
                    ),
                    (
                        "Billed PF",
                        format!(
                            "{}, {} the goal of {}",
                            c.billed_text(),
                            if c.meets_target { "meets" } else { "misses" },
                            c.goal_text()
                        ),
                    ),
                    (
                        "Operations",
                        format!("{} a year", approx(c.operations_per_year)),
                    ),
                    ("First contactor at rated life", life),
                    (
                        "Overcorrected",
                        format!(
                            "{} of the time (leading by more than {} kvar)",
                            pct(c.overcorrected_share),
                            num(c.overcorrection_threshold_kvar, 1)
                        ),
                    ),
                    ("Resonance", resonance_words(c)),
                    ("Best settings", c.settings.join(", ")),
                ],
            );
        }
        None => {
            para(
                h,
                None,
                "No candidate to rank: no layout of the sizes given fits the band around the \
                 recommended total (see the notes below).",
            );
        }
    }
    caution(
        h,
        &[
            HARDWARE_CAUTION,
            DESIGN_CAUTION,
            "A design is a plan, not an order: the layout, its detuning and its capacitors' \
             rating are for a qualified engineer to confirm against local codes and licensed \
             practice.",
        ],
    );
    end_section(h);
}

fn need(d: &Design, page: &mut Page<'_>) -> Result<(), ReportError> {
    let data = duration_data(d);
    page.html()
        .push_str("<section id=\"need\" class=\"figures\">\n<h2>What the load needs</h2>\n");
    page.figure(duration_curve(&data))?;
    let h = page.html();
    let rows = need_rows(&d.need);
    let items: Vec<(&str, String)> = rows.iter().map(|r| (r[0].as_str(), r[1].clone())).collect();
    pairs(h, &items);
    para(h, Some("aside"), NEED_NOTE);
    end_section(h);
    Ok(())
}

fn candidates(d: &Design, h: &mut String) {
    section(h, "candidates", "Candidates");
    para(h, None, &candidates_sentence(d));
    if d.candidates.is_empty() {
        para(h, None, "No candidate to rank.");
        end_section(h);
        return;
    }
    let rows: Vec<Vec<String>> = d.candidates.iter().map(row).collect();
    table_marked(h, &CANDIDATE_HEADERS, CANDIDATE_ALIGN, &rows, &[0]);
    h.push_str("<h3>Why each stands where it does</h3>\n<ol class=\"findings\">\n");
    for c in &d.candidates {
        let _ = writeln!(
            h,
            "<li class=\"{}\"><b>{}</b>: {}. {}<span class=\"advice\">{}</span>\
             <span class=\"advice\"><b>Best settings:</b> {}.</span></li>",
            if c.rank == 1 { "note" } else { "info" },
            escape(&c.label),
            escape(&c.description),
            escape(&c.reason),
            escape(&c.light_load_sentence()),
            escape(&c.settings.join(", "))
        );
    }
    h.push_str("</ol>\n");
    end_section(h);
}

fn notes(d: &Design, h: &mut String) {
    if d.notes.is_empty() {
        return;
    }
    section(h, "notes", "Notes");
    h.push_str("<ul>\n");
    for n in &d.notes {
        let _ = writeln!(h, "<li>{}</li>", escape(n));
    }
    h.push_str("</ul>\n");
    end_section(h);
}

fn provenance(d: &Design, h: &mut String) {
    let o = &d.options;
    let sizes: Vec<String> = o.sizes_kvar.iter().map(|s| num(*s, 1)).collect();
    let detuning: Vec<String> = o
        .detuning
        .iter()
        .map(|p| format!("{} %", crate::design::layout::pct_text(*p)))
        .collect();
    html_page::provenance(
        h,
        &[
            ("Tool", format!("bankstep {}", TOOL.version)),
            ("Scenario", d.scenario.clone()),
            ("Scenario SHA-256", d.scenario_sha256.clone()),
            (
                "Profile SHA-256",
                d.profile_sha256
                    .clone()
                    .unwrap_or_else(|| "none (synthetic load)".to_string()),
            ),
            ("Seed", d.seed.to_string()),
            (
                "Options",
                format!(
                    "coverage {}; sizes {} kvar; at most {} steps; detuning {}; at most {} \
                     layouts per ratio",
                    pct(o.coverage),
                    sizes.join(", "),
                    o.max_steps,
                    detuning.join(", "),
                    o.max_layouts
                ),
            ),
            ("Runs", crate::text::count(d.runs as u64)),
        ],
    );
}
