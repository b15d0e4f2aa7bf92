//! The outputs of `bankstep design`: the plain-text report (what the load needs, the
//! ranked candidates with a reason each, the cautions), one JSON object for scripts and
//! figures (the duration curve and each candidate's reachable kvar levels included), and a
//! CSV table with one row per candidate.
//!
//! Everything said here was decided in [`crate::design`]; this module only renders it.

use super::{
    approx, num, pct, table, wrap_plain, write_json as json_out, ReportError, HARDWARE_CAUTION,
};
use crate::design::{Candidate, Design};
use crate::text::duration;
use serde::Serialize;
use std::io::Write;

/// The cautions of a design report, beside the general one: what detuning reactors do to
/// the capacitors, and that a design is an estimate to be confirmed.
pub const DESIGN_CAUTION: &str = "Detuning reactors raise the voltage across the \
capacitors to U/(1 − p) (430 V on a 400 V bus with 7 %), so detuned steps need capacitors \
rated above it (the candidates here use the usual rating); never put reactors in front of \
capacitors rated for the bus voltage alone. A bank that resonates near a harmonic of the \
load can destroy its capacitors within weeks. The layouts are judged on the profile given, \
with the harmonic load at its full rating: confirm the chosen layout with a harmonic \
study and the makers' data before ordering it.";

/// Writes the plain-text report.
pub fn write_text(d: &Design, out: &mut dyn Write) -> Result<(), ReportError> {
    let mut t = String::new();
    let title = format!("Bank design for {}", d.scenario);
    t.push_str(&title);
    t.push('\n');
    t.push_str(&"=".repeat(title.chars().count()));
    t.push_str("\n\n");

    t.push_str("What the load needs\n");
    let rows = need_rows(&d.need);
    let width = rows.iter().map(|r| r[0].chars().count()).max().unwrap_or(0);
    for r in &rows {
        let pad = " ".repeat(width - r[0].chars().count() + 2);
        wrap_hanging(
            &mut t,
            &format!("  {}{pad}", r[0]),
            &" ".repeat(width + 4),
            &r[1],
        );
    }
    t.push('\n');
    wrap_plain(&mut t, "  ", NEED_NOTE);
    t.push('\n');

    t.push_str("Candidates\n");
    wrap_plain(&mut t, "  ", &candidates_sentence(d));
    t.push('\n');
    if d.candidates.is_empty() {
        t.push_str("  No candidate to rank.\n\n");
    } else {
        let rows: Vec<Vec<String>> = d.candidates.iter().map(row).collect();
        table(&mut t, "  ", &CANDIDATE_HEADERS, CANDIDATE_ALIGN, &rows);
        t.push('\n');
        t.push_str("Why each stands where it does\n");
        for c in &d.candidates {
            t.push_str(&format!("  {:>2}. {}\n", c.rank, c.label));
            wrap_plain(&mut t, "      ", &format!("{}.", c.description));
            wrap_plain(&mut t, "      ", &c.reason);
            wrap_plain(&mut t, "      ", &c.light_load_sentence());
            wrap_plain(
                &mut t,
                "      ",
                &format!("Best settings: {}.", c.settings.join(", ")),
            );
        }
        t.push('\n');
    }
    if !d.notes.is_empty() {
        t.push_str("Notes\n");
        for note in &d.notes {
            wrap_plain(&mut t, "  ", note);
        }
        t.push('\n');
    }
    wrap_plain(&mut t, "  ", HARDWARE_CAUTION);
    wrap_plain(&mut t, "  ", DESIGN_CAUTION);
    out.write_all(t.as_bytes())?;
    out.flush()?;
    Ok(())
}

/// What the load needs as label and value pairs (the text report and the HTML report).
pub(crate) fn need_rows(n: &crate::design::KvarNeed) -> Vec<Vec<String>> {
    vec![
        vec!["Target".into(), n.target.clone()],
        vec![
            "Recommended total".into(),
            format!(
                "{} kvar: covers the need {} of the time",
                num(n.recommended_kvar, 1),
                pct(n.coverage)
            ),
        ],
        vec![
            "Largest need".into(),
            format!("{} kvar", num(n.max_kvar, 1)),
        ],
        vec![
            "Energy-weighted".into(),
            format!(
                "{} kvar: delivers {} of the {} kvarh needed",
                num(n.energy_weighted_kvar, 1),
                pct(n.coverage),
                approx(n.kvarh_needed)
            ),
        ],
        vec!["Mean need".into(), format!("{} kvar", num(n.mean_kvar, 1))],
        vec![
            "Light-load need".into(),
            format!(
                "{} kvar (exceeded 90 % of the time the load needs any)",
                num(n.light_load_kvar, 1)
            ),
        ],
        vec![
            "No need".into(),
            format!(
                "{} of the time (exporting or idle {}, leading load {}, the rest at or past \
                 the target)",
                pct(n.share_no_need),
                pct(n.share_export),
                pct(n.share_leading_load)
            ),
        ],
        vec![
            "Profile read".into(),
            format!(
                "{} samples over {}{}",
                crate::text::count(n.samples_read),
                duration(n.duration_s),
                match n.grid_kvar {
                    Some(g) => format!(", need rounded up to {} kvar steps", num(g, 2)),
                    None => String::new(),
                }
            ),
        ],
    ]
}

/// The sentence that says how the need is worked out.
pub(crate) const NEED_NOTE: &str = "The need at an instant is Q − P·tan φ_target of the \
three-phase load (the kvar that brings it to the target), zero while the site exports or is \
idle, while the load already leads, or while it is at or past the target.";

/// The sentence on the candidates tried.
pub(crate) fn candidates_sentence(d: &Design) -> String {
    let detuning: Vec<String> = d
        .options
        .detuning
        .iter()
        .map(|&p| {
            if p > 0.0 {
                format!("{} % detuned", crate::design::layout::pct_text(p))
            } else {
                "plain".to_string()
            }
        })
        .collect();
    format!(
        "Layouts of {} kvar steps, 2 to {} steps, with an effective total from {} to {} \
         kvar (100 to 130 % of the recommended total), {}; each run with {} controller \
         settings (ordering, dead band, switching delay) and judged at its best. {} \
         simulation runs. Overcorrected means leading by more than {} kvar.",
        sizes_text(&d.options.sizes_kvar),
        d.options.max_steps,
        num(d.band_kvar.0, 1),
        num(d.band_kvar.1, 1),
        crate::text::join_and(&detuning),
        d.settings_tried.len(),
        crate::text::count(d.runs as u64),
        num(d.overcorrection_threshold_kvar, 1)
    )
}

/// The headers of the candidate table and their alignment.
pub(crate) const CANDIDATE_HEADERS: [&str; 9] = [
    "#",
    "layout",
    "kvar",
    "steps",
    "target",
    "billed PF",
    "ops/year",
    "overcorrected",
    "resonance",
];

/// The alignment of [`CANDIDATE_HEADERS`].
pub(crate) const CANDIDATE_ALIGN: &str = "rllrllrrl";

/// Wraps `text` to 90 columns after `first` on the first line and `rest` on the others.
fn wrap_hanging(t: &mut String, first: &str, rest: &str, text: &str) {
    let mut line = String::from(first);
    let mut start = first.chars().count();
    for word in text.split_whitespace() {
        let len = line.chars().count();
        if len > start && len + 1 + word.chars().count() > 90 {
            t.push_str(line.trim_end());
            t.push('\n');
            line = String::from(rest);
            start = rest.chars().count();
        }
        if line.chars().count() > start {
            line.push(' ');
        }
        line.push_str(word);
    }
    t.push_str(line.trim_end());
    t.push('\n');
}

/// Sizes as `5, 10, 12.5, 25`.
fn sizes_text(sizes: &[f64]) -> String {
    sizes
        .iter()
        .map(|&s| num(s, if s.fract() == 0.0 { 0 } else { 1 }))
        .collect::<Vec<_>>()
        .join(", ")
}

/// One row of the candidate table.
pub(crate) fn row(c: &Candidate) -> Vec<String> {
    let resonance = if c.resonance.over_limit {
        format!(
            "over a limit {} h/year",
            approx(c.resonance.hours_over_limit)
        )
    } else if c.resonance.near_harmonic {
        format!(
            "near a harmonic {} h/year",
            approx(c.resonance.hours_near_harmonic)
        )
    } else {
        "clear".to_string()
    };
    vec![
        c.rank.to_string(),
        c.label.clone(),
        num(c.total_kvar, 1),
        c.steps.to_string(),
        if c.meets_target { "met" } else { "missed" }.to_string(),
        c.billed_text(),
        approx(c.operations_per_year),
        pct(c.overcorrected_share),
        resonance,
    ]
}

/// The JSON object: `tool`, `provenance`, then the design.
#[derive(Serialize)]
struct JsonDesign<'a> {
    tool: super::Tool,
    provenance: Provenance<'a>,
    #[serde(flatten)]
    design: &'a Design,
    cautions: [&'static str; 2],
}

/// The `provenance` object, as in the other JSON outputs.
#[derive(Serialize)]
struct Provenance<'a> {
    tool_version: &'static str,
    scenario_sha256: &'a str,
    profile_sha256: Option<&'a str>,
    seed: u64,
}

/// Writes the design as one JSON object: what the load needs (with the duration curve,
/// `need.curve`), the options, and the ranked candidates (each with its reachable kvar
/// levels, `candidates[i].reachable_kvar`).
pub fn write_json(d: &Design, out: &mut dyn Write) -> Result<(), ReportError> {
    json_out(
        out,
        &JsonDesign {
            tool: super::TOOL,
            provenance: Provenance {
                tool_version: super::TOOL.version,
                scenario_sha256: &d.scenario_sha256,
                profile_sha256: d.profile_sha256.as_deref(),
                seed: d.seed,
            },
            design: d,
            cautions: [HARDWARE_CAUTION, DESIGN_CAUTION],
        },
    )
}

/// The columns of the CSV table.
pub const CSV_HEADER: &str = "rank,layout,family,detuning_pct,rated_voltage_v,steps,\
total_kvar,smallest_step_kvar,meets_target,billed_pf,billed_pf_quadrant,\
operations_per_year,overcorrected_share,overcorrection_episodes,hours_near_harmonic,\
hours_over_limit,worst_state,worst_status,settings,reason";

/// Writes one CSV row per candidate, best first.
pub fn write_csv(d: &Design, out: &mut dyn Write) -> Result<(), ReportError> {
    let mut t = String::from(CSV_HEADER);
    t.push('\n');
    for c in &d.candidates {
        let fields = [
            c.rank.to_string(),
            quote(&c.label),
            serde_plain(&c.layout.family),
            format!("{}", c.layout.detuning * 100.0),
            format!("{}", c.layout.rated_voltage_v),
            c.steps.to_string(),
            format!("{:.3}", c.total_kvar),
            format!("{:.3}", c.smallest_step_kvar),
            c.meets_target.to_string(),
            format!("{:.4}", c.billed_pf),
            c.billed_pf_quadrant.word().to_string(),
            format!("{:.0}", c.operations_per_year),
            format!("{:.6}", c.overcorrected_share),
            c.overcorrection_episodes.to_string(),
            format!("{:.1}", c.resonance.hours_near_harmonic),
            format!("{:.1}", c.resonance.hours_over_limit),
            quote(c.resonance.worst_state.as_deref().unwrap_or("")),
            quote(c.resonance.worst_status.as_deref().unwrap_or("")),
            quote(&c.settings.join("; ")),
            quote(&c.reason),
        ];
        t.push_str(&fields.join(","));
        t.push('\n');
    }
    out.write_all(t.as_bytes())?;
    out.flush()?;
    Ok(())
}

/// A CSV field in double quotes, inner quotes doubled.
fn quote(s: &str) -> String {
    format!("\"{}\"", s.replace('"', "\"\""))
}

/// The serde name of a unit enum variant (`equal`, `small-plus-equal`, ...).
fn serde_plain<T: Serialize>(v: &T) -> String {
    serde_json::to_value(v)
        .ok()
        .and_then(|v| v.as_str().map(str::to_string))
        .unwrap_or_default()
}
