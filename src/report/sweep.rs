//! The outputs of `bankstep sweep` and `bankstep merge`: the text summary (the front as a
//! ranked table, the recommendation in plain words), the CSV (one row per run, with a
//! `front` column), the JSON (rows, settings, front, recommendation, provenance) and the
//! shard files that `merge` reads back.
//!
//! Everything is rendered from an [`Outcome`]; nothing here judges. The outputs carry no
//! time stamps or paths, so a merged set of shards writes the same bytes as the whole run.

use super::{num, pct, table, wrap_plain, write_json, ReportError, Tool, HARDWARE_CAUTION, TOOL};
use crate::sweep::front::{setting_words, FrontAxes};
use crate::sweep::{Outcome, Row, SettingStats, ShardFile, Spread};
use crate::text::{approx, years_text};
use serde::Serialize;
use std::io::Write;

/// Writes the text summary.
pub fn write_summary(o: &Outcome, out: &mut dyn Write) -> Result<(), ReportError> {
    out.write_all(summary_text(o).as_bytes())?;
    out.flush()?;
    Ok(())
}

/// A PF with its quadrant, three decimals.
fn pf3(x: f64, q: crate::pf::Quadrant) -> String {
    let s = num(x, 3);
    if s == "1.000" {
        s
    } else {
        format!("{s} {}", q.word())
    }
}

/// `median (min–max)` with the range only when there are several seeds.
fn spread(s: &Spread, seeds: u32, f: &dyn Fn(f64) -> String) -> String {
    if seeds > 1 {
        format!("{} ({}–{})", f(s.median), f(s.min), f(s.max))
    } else {
        f(s.median)
    }
}

fn life(y: f64) -> String {
    if y.is_finite() {
        format!("{} y", years_text(y))
    } else {
        "never".to_string()
    }
}

/// What the columns of the front table mean (the summary and the HTML report).
pub(crate) const COLUMNS_NOTE: &str = "billed PF: energy PF of the run's import registers; \
under target: share of time; operations a year: all steps, trips included; first rated \
life: the first contactor to reach its rated operations (step, years from the run start); \
hunting cycles and time overcorrected: in the run; worst state: the bank state with the most \
hours a year × severity, its hours a year and estimated voltage THD at full harmonic load.";

/// The sentence under every sweep's outputs: simulation is not measurement.
pub(crate) const SIMULATED_NOTE: &str = "These are simulated figures on the load profile \
given: check a change on site before relying on it.";

/// The headers of the front table: rank, setting, the keys varied, the figures, and the
/// cost a year when there is a tariff; with the alignment of each column.
pub(crate) fn front_headers(o: &Outcome) -> (Vec<String>, String) {
    let p = &o.provenance;
    let mut headers: Vec<String> = vec!["rank".into(), "setting".into()];
    headers.extend(p.keys.iter().cloned());
    headers.extend(
        [
            "billed PF",
            "under target",
            "operations/year",
            "first rated life",
            "hunting cycles",
            "overcorrected",
            "worst state THD_V",
        ]
        .iter()
        .map(|s| s.to_string()),
    );
    if let Some(c) = &p.currency {
        headers.push(format!("cost {c}/year"));
    }
    let mut align = String::from("rr");
    align.push_str(&"l".repeat(p.keys.len()));
    align.push_str("rrrrrrr");
    if p.currency.is_some() {
        align.push('r');
    }
    (headers, align)
}

/// The summary as text.
pub fn summary_text(o: &Outcome) -> String {
    let p = &o.provenance;
    let axes = o.axes();
    let seeds = p.seeds;
    let mut t = String::new();
    t.push_str(&format!("Sweep of {}\n", p.scenario));
    t.push_str(&format!(
        "  {} settings (the scenario's own as setting 0, then {} varied), {} seed{} each: {} runs\n",
        crate::text::count(p.settings as u64),
        crate::text::count(p.settings.saturating_sub(1) as u64),
        seeds,
        if seeds == 1 { "" } else { "s" },
        crate::text::count(p.runs as u64)
    ));
    for (k, line) in p.keys.iter().zip(variation_lines(&p.variations)) {
        let _ = k;
        t.push_str(&format!("  varied: {line}\n"));
    }
    let (a, b) = axes.words();
    t.push_str(&format!("  front: {a} against {b}\n"));
    if let Some(goal) = o.settings.first().map(|s| s.pf_goal) {
        let g = if goal >= 1.0 {
            "1.00".to_string()
        } else {
            format!("{} lag", num(goal, 2))
        };
        t.push_str(&format!("  billed-PF goal from the target: {g}\n"));
    }
    t.push('\n');
    let ranked_by = if p.currency.is_some() {
        "ranked by cost a year, lowest first"
    } else {
        match axes {
            FrontAxes::UnderOps => "ranked by time under target, least first",
            _ => "ranked by billed PF, highest first",
        }
    };
    t.push_str(&format!(
        "Pareto front: {} of {} settings ({ranked_by})\n",
        o.front.len(),
        o.settings.len()
    ));
    let (headers, align) = front_headers(o);
    let rows: Vec<Vec<String>> = o
        .front
        .iter()
        .enumerate()
        .map(|(rank, &s)| front_row(o, &o.settings[s], rank + 1, seeds))
        .collect();
    let hdr: Vec<&str> = headers.iter().map(String::as_str).collect();
    table(&mut t, "  ", &hdr, &align, &rows);
    wrap_plain(&mut t, "  ", COLUMNS_NOTE);
    if seeds > 1 {
        wrap_plain(
            &mut t,
            "  ",
            "Figures are medians over the seeds, with the lowest and highest in brackets.",
        );
    }
    if !o.settings[0].on_front {
        t.push_str("\nThe scenario's own settings (setting 0), not on the front:\n");
        let row = front_row(o, &o.settings[0], 0, seeds);
        let mut r = row;
        r[0] = "-".into();
        table(&mut t, "  ", &hdr, &align, &[r]);
    }
    t.push_str("\nRecommendation\n");
    for s in &o.recommendation.sentences {
        wrap_plain(&mut t, "  ", s);
    }
    if let Some(r) = o.recommendation.setting {
        let st = &o.settings[r];
        if r != 0 {
            t.push_str("\n  To try it, set in the scenario:\n");
            for (k, v) in p.keys.iter().zip(&st.values) {
                t.push_str(&format!("    {k} = {v}\n"));
            }
        }
    }
    t.push('\n');
    wrap_plain(&mut t, "", SIMULATED_NOTE);
    wrap_plain(&mut t, "", HARDWARE_CAUTION);
    t
}

/// The canonical variations line split back into one line per key.
fn variation_lines(canonical: &str) -> Vec<String> {
    if canonical.is_empty() {
        return Vec::new();
    }
    canonical.split("; ").map(str::to_string).collect()
}

/// One line of the front table.
pub(crate) fn front_row(o: &Outcome, s: &SettingStats, rank: usize, seeds: u32) -> Vec<String> {
    let mut r = vec![rank.to_string(), s.setting.to_string()];
    r.extend(s.values.iter().cloned());
    r.push(spread(&s.billed_pf, seeds, &|x| {
        pf3(x, s.billed_pf_quadrant)
    }));
    r.push(spread(&s.share_under_target, seeds, &pct));
    r.push(spread(&s.operations_per_year, seeds, &approx));
    // The first rated life of the setting's first run names its step.
    let rows: Vec<&Row> = o.rows.iter().filter(|x| x.setting == s.setting).collect();
    let step = rows
        .first()
        .and_then(|x| x.first_life.as_ref())
        .map(|l| format!("step {}, ", l.step))
        .unwrap_or_default();
    r.push(if s.years_to_first_life.median.is_finite() {
        format!("{step}{}", spread(&s.years_to_first_life, seeds, &life))
    } else {
        "never".into()
    });
    let hunting = Spread::of(
        &rows
            .iter()
            .map(|x| x.hunting_cycles as f64)
            .collect::<Vec<_>>(),
    );
    r.push(spread(&hunting, seeds, &|x| num(x, 0)));
    let over = Spread::of(&rows.iter().map(|x| x.overcorrection_s).collect::<Vec<_>>());
    r.push(spread(&over, seeds, &crate::text::duration));
    let worst = rows.first().and_then(|x| x.worst_state.as_ref());
    r.push(match worst {
        Some(w) => format!(
            "{}: {} h/year, {} %",
            crate::text::steps_label(&w.steps),
            approx(w.hours_per_year),
            num(w.thd_pct, 1)
        ),
        None => "none".into(),
    });
    if let Some(c) = &s.cost_per_year {
        r.push(spread(c, seeds, &|x| num(x, 0)));
    }
    r
}

/// Escapes a CSV field (quotes when it holds a comma, a quote or a line break).
fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// A float for CSV: the shortest text that reads back to the same value; no negative
/// zero.
fn f(x: f64) -> String {
    if x == 0.0 {
        "0".into()
    } else {
        format!("{x}")
    }
}

/// Writes the CSV: one row per run, units in the column names, a `front` column (1 when
/// the run's setting is on the front).
pub fn write_csv(o: &Outcome, out: &mut dyn Write) -> Result<(), ReportError> {
    let p = &o.provenance;
    let mut head: Vec<String> = vec!["run".into(), "setting".into()];
    head.extend(p.keys.iter().cloned());
    head.extend(
        [
            "seed",
            "billed_pf",
            "billed_pf_quadrant",
            "pf_goal",
            "pf_shortfall",
            "share_under_target_pct",
            "share_leading_pct",
            "operations",
            "operations_per_year",
            "first_life_step",
            "first_life_years",
            "first_life_date",
            "hunting_cycles",
            "overcorrection_s",
            "overcorrection_episodes",
            "worst_state_steps",
            "worst_state_hours_per_year",
            "worst_state_thd_pct",
            "worst_state_status",
        ]
        .iter()
        .map(|s| s.to_string()),
    );
    if let Some(c) = &p.currency {
        head.push(format!("cost_{c}_per_year"));
    }
    head.push("front".into());
    let line: Vec<String> = head.iter().map(|h| csv_field(h)).collect();
    writeln!(out, "{}", line.join(","))?;
    for r in &o.rows {
        let mut c: Vec<String> = vec![r.run.to_string(), r.setting.to_string()];
        c.extend(r.values.iter().map(|v| csv_field(v)));
        c.push(r.seed.to_string());
        c.push(f(r.billed_pf));
        c.push(r.billed_pf_quadrant.word().into());
        c.push(f(r.pf_goal));
        c.push(f(r.pf_shortfall));
        c.push(f(r.share_under_target * 100.0));
        c.push(f(r.share_leading * 100.0));
        c.push(r.operations.to_string());
        c.push(f(r.operations_per_year));
        match &r.first_life {
            Some(l) => {
                c.push(l.step.to_string());
                c.push(f(l.years));
                c.push(l.date.clone().unwrap_or_default());
            }
            None => c.extend([String::new(), String::new(), String::new()]),
        }
        c.push(r.hunting_cycles.to_string());
        c.push(f(r.overcorrection_s));
        c.push(r.overcorrection_episodes.to_string());
        match &r.worst_state {
            Some(w) => {
                c.push(crate::text::steps_label(&w.steps));
                c.push(f(w.hours_per_year));
                c.push(f(w.thd_pct));
                c.push(csv_field(&w.status));
            }
            None => c.extend([String::new(), String::new(), String::new(), String::new()]),
        }
        if p.currency.is_some() {
            c.push(r.cost.map(|x| f(x.total)).unwrap_or_default());
        }
        c.push(
            if o.settings[r.setting].on_front {
                "1"
            } else {
                "0"
            }
            .into(),
        );
        writeln!(out, "{}", c.join(","))?;
    }
    out.flush()?;
    Ok(())
}

/// A row in the JSON: its figures and whether its setting is on the front.
#[derive(Serialize)]
struct RowJson<'a> {
    #[serde(flatten)]
    row: &'a Row,
    front: bool,
}

#[derive(Serialize)]
struct Objectives {
    name: &'static str,
    first: &'static str,
    second: &'static str,
}

#[derive(Serialize)]
struct SweepJson<'a> {
    tool: Tool,
    provenance: &'a crate::sweep::Fingerprint,
    objectives: Objectives,
    front: &'a [usize],
    recommendation: &'a crate::sweep::Recommendation,
    settings: &'a [SettingStats],
    rows: Vec<RowJson<'a>>,
}

/// Writes the JSON: tool, provenance (with the keys varied: every `values` array follows
/// their order), the objectives, the front (setting indices, ranked), the
/// recommendation, every setting's figures and every run's row.
pub fn write_json_report(o: &Outcome, out: &mut dyn Write) -> Result<(), ReportError> {
    let rows: Vec<RowJson<'_>> = o
        .rows
        .iter()
        .map(|r| RowJson {
            row: r,
            front: o.settings[r.setting].on_front,
        })
        .collect();
    let axes = o.axes();
    let (first, second) = axes.words();
    let doc = SweepJson {
        tool: TOOL,
        provenance: &o.provenance,
        objectives: Objectives {
            name: axes.name(),
            first,
            second,
        },
        front: &o.front,
        recommendation: &o.recommendation,
        settings: &o.settings,
        rows,
    };
    write_json(out, &doc)
}

/// Writes a shard file (plain JSON, every number exactly as computed so that the merge
/// reads back the same values).
pub fn write_shard(f: &ShardFile, out: &mut dyn Write) -> Result<(), ReportError> {
    serde_json::to_writer_pretty(&mut *out, f)?;
    out.write_all(b"\n")?;
    out.flush()?;
    Ok(())
}

/// Reads a shard file written by [`write_shard`].
pub fn read_shard(bytes: &[u8]) -> Result<ShardFile, ReportError> {
    Ok(serde_json::from_slice(bytes)?)
}

/// The words for a setting, for callers that print one.
pub fn setting_line(s: &SettingStats) -> String {
    setting_words(s)
}
