//! The report folder of `sweep --report DIR` and `merge --report DIR`: `report.html` on
//! the shared page of [`super::html_page`], and the trade-off scatter as SVG and PNG.
//!
//! Order: the recommendation in plain words (the sweep's own sentences) with the keys to
//! set, the cautions, the trade-off scatter (the front joined, the recommendation ringed,
//! the scenario's own settings boxed), the front table, the table of all settings (the
//! best [`MAX_SETTINGS_ROWS`] when there are more), the keys varied, the cost a year
//! under the tariff when there is one, the spread over seeds when there are several, and
//! the provenance.
//!
//! Everything is rendered from the [`Outcome`] alone, with no path and no time stamp, so
//! a merge of shards writes the very bytes of the sweep run in one go.

use super::figures::{tradeoff_scatter, TradeoffData, TradeoffPoint};
use super::html_page::{
    self, caution, end_section, pairs, para, section, table, table_marked, Page,
};
use super::sweep::{front_headers, front_row, COLUMNS_NOTE, SIMULATED_NOTE};
use super::{num, pct, ReportError, HARDWARE_CAUTION};
use crate::sweep::front::setting_words;
use crate::sweep::{FrontAxes, Outcome, SettingStats, Spread};
use crate::text::{approx, count, years_text};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// File name stem of the trade-off scatter.
pub const TRADEOFF_FIGURE: &str = "sweep-tradeoff";

/// Most rows of the table of all settings; beyond, the best ones by the front's ranking.
pub const MAX_SETTINGS_ROWS: usize = 100;

/// Where a setting that never reaches a contactor's rated life is drawn on a life axis:
/// this factor past the longest finite life (or 1 year if there is none).
const NEVER_FACTOR: f64 = 1.15;

/// The x and y of a setting on the scatter, with their spread: x the second objective,
/// y the first, in the units of the axis words.
fn xy(axes: FrontAxes, s: &SettingStats, never_x: f64) -> ((f64, Spread), (f64, Spread)) {
    let scale = |sp: Spread, k: f64| Spread {
        median: sp.median * k,
        min: sp.min * k,
        max: sp.max * k,
    };
    let y = match axes {
        FrontAxes::PfOps | FrontAxes::PfLife => s.billed_pf,
        FrontAxes::UnderOps => scale(s.share_under_target, 100.0),
    };
    let x = match axes {
        FrontAxes::PfOps | FrontAxes::UnderOps => s.operations_per_year,
        FrontAxes::PfLife => {
            let life = s.years_to_first_life;
            let cap = |v: f64| if v.is_finite() { v } else { never_x };
            Spread {
                median: cap(life.median),
                min: cap(life.min),
                max: cap(life.max),
            }
        }
    };
    ((x.median, x), (y.median, y))
}

/// The axis words of the scatter, with units: (x, y).
pub fn axis_words(axes: FrontAxes) -> (&'static str, &'static str) {
    match axes {
        FrontAxes::PfOps => (
            "operations a year (fewer is better), count/year",
            "billed PF (higher is better), 0 to 1",
        ),
        FrontAxes::UnderOps => (
            "operations a year (fewer is better), count/year",
            "time under target (less is better), % of the run",
        ),
        FrontAxes::PfLife => (
            "years to the first contactor's rated life (more is better), years",
            "billed PF (higher is better), 0 to 1",
        ),
    }
}

/// The data of the trade-off scatter: one point per setting (medians over seeds, with
/// the lowest and highest as whiskers when there are several seeds).
pub fn tradeoff_data(o: &Outcome) -> TradeoffData {
    let axes = o.axes();
    let seeds = o.provenance.seeds;
    let longest = o
        .settings
        .iter()
        .flat_map(|s| {
            let l = s.years_to_first_life;
            [l.median, l.min, l.max]
        })
        .filter(|v| v.is_finite())
        .fold(0.0_f64, f64::max);
    let never_x = if longest > 0.0 {
        longest * NEVER_FACTOR
    } else {
        1.0
    };
    let mut any_never = false;
    let points = o
        .settings
        .iter()
        .map(|s| {
            let ((x, xs), (y, ys)) = xy(axes, s, never_x);
            any_never |= axes == FrontAxes::PfLife && !s.years_to_first_life.max.is_finite();
            let spread = |sp: Spread| (seeds > 1).then_some((sp.min, sp.max));
            TradeoffPoint {
                name: format!("setting {}", s.setting),
                x,
                y,
                x_spread: spread(xs),
                y_spread: spread(ys),
                front: s.on_front,
                label: if s.on_front {
                    s.setting.to_string()
                } else {
                    String::new()
                },
            }
        })
        .collect();
    let (x_label, y_label) = axis_words(axes);
    let better = match axes {
        FrontAxes::PfOps => "up and to the left",
        FrontAxes::UnderOps => "down and to the left",
        FrontAxes::PfLife => "up and to the right",
    };
    let mut caption = format!(
        "Each dot is one setting{}: {} against {}; better is {better}. Dark dots joined by \
         the line are the front (numbered by setting): no other setting is at least as good \
         on both and better on one. Ringed: the recommendation; boxed: the scenario's own \
         settings (setting 0).",
        if seeds > 1 {
            format!(" at its median over {seeds} seeds")
        } else {
            String::new()
        },
        y_label,
        x_label
    );
    if seeds > 1 {
        caption.push_str(" Whiskers: the lowest to the highest over the seeds.");
    }
    if any_never {
        let _ = write!(
            caption,
            " Settings whose contactors never operate (no rated life reached) are drawn at \
             {} years, past the longest life.",
            num(never_x, 1)
        );
    }
    TradeoffData {
        name: TRADEOFF_FIGURE.to_string(),
        title: "The trade-off between the settings tried".to_string(),
        caption,
        x_label: x_label.to_string(),
        y_label: y_label.to_string(),
        points,
        recommended: o.recommendation.setting,
        reference: Some(0),
        reference_words: "scenario's own settings".to_string(),
    }
}

/// Writes the report folder of a sweep (or a merge). Returns the files written.
pub fn write_report_dir(o: &Outcome, dir: &Path) -> Result<Vec<PathBuf>, ReportError> {
    let p = &o.provenance;
    let (a, b) = o.axes().words();
    let title = format!("Settings sweep: {}", p.scenario);
    let subs = vec![
        format!(
            "{} settings (the scenario's own as setting 0, then {} varied), {} seed{} each: \
             {} runs on one load profile.",
            count(p.settings as u64),
            count(p.settings.saturating_sub(1) as u64),
            p.seeds,
            if p.seeds == 1 { "" } else { "s" },
            count(p.runs as u64)
        ),
        format!("Front: {a} against {b}."),
    ];
    html_page::write_report_dir(dir, &title, &subs, |page| {
        recommendation(o, page.html());
        figure(o, page)?;
        let h = page.html();
        front(o, h);
        all_settings(o, h);
        varied(o, h);
        if p.currency.is_some() {
            cost(o, h);
        }
        if p.seeds > 1 {
            seeds(o, h);
        }
        provenance(o, h);
        Ok(())
    })
}

fn recommendation(o: &Outcome, h: &mut String) {
    section(h, "recommendation", "Recommendation");
    h.push_str("<div class=\"lead\">\n");
    for s in &o.recommendation.sentences {
        para(h, None, s);
    }
    h.push_str("</div>\n");
    if let Some(r) = o.recommendation.setting {
        if r == 0 {
            para(
                h,
                None,
                "The scenario's own settings are recommended: nothing to change.",
            );
        } else {
            para(h, None, "To try it, set in the scenario:");
            let mut keys = String::new();
            for (k, v) in o.provenance.keys.iter().zip(&o.settings[r].values) {
                let _ = writeln!(keys, "{k} = {v}");
            }
            let _ = writeln!(
                h,
                "<pre class=\"keys\">{}</pre>",
                super::figures::escape(keys.trim_end())
            );
        }
    }
    caution(h, &[SIMULATED_NOTE, HARDWARE_CAUTION]);
    end_section(h);
}

fn figure(o: &Outcome, page: &mut Page<'_>) -> Result<(), ReportError> {
    let data = tradeoff_data(o);
    page.html()
        .push_str("<section id=\"tradeoff\" class=\"figures\">\n<h2>Trade-off</h2>\n");
    page.figure(tradeoff_scatter(&data))?;
    page.html().push_str("</section>\n");
    Ok(())
}

fn front(o: &Outcome, h: &mut String) {
    let p = &o.provenance;
    section(h, "front", "Pareto front");
    let ranked_by = if p.currency.is_some() {
        "ranked by cost a year, lowest first"
    } else {
        match o.axes() {
            FrontAxes::UnderOps => "ranked by time under target, least first",
            _ => "ranked by billed PF, highest first",
        }
    };
    para(
        h,
        None,
        &format!(
            "{} of the {} settings are on the front ({ranked_by}); the recommended one is \
             set in bold.",
            count(o.front.len() as u64),
            count(o.settings.len() as u64)
        ),
    );
    let (headers, align) = front_headers(o);
    let hdr: Vec<&str> = headers.iter().map(String::as_str).collect();
    let rows: Vec<Vec<String>> = o
        .front
        .iter()
        .enumerate()
        .map(|(rank, &s)| front_row(o, &o.settings[s], rank + 1, 1))
        .collect();
    let marked: Vec<usize> = o
        .front
        .iter()
        .position(|&s| Some(s) == o.recommendation.setting)
        .into_iter()
        .collect();
    table_marked(h, &hdr, &align, &rows, &marked);
    para(h, Some("aside"), COLUMNS_NOTE);
    if p.seeds > 1 {
        para(
            h,
            Some("aside"),
            "Figures are medians over the seeds; their lowest and highest are under \
             Spread over seeds below.",
        );
    }
    if !o.settings[0].on_front {
        h.push_str("<h3>The scenario's own settings (setting 0), not on the front</h3>\n");
        let mut r = front_row(o, &o.settings[0], 0, 1);
        r[0] = "-".into();
        table(h, &hdr, &align, &[r]);
    }
    end_section(h);
}

/// The settings in the order of the front's ranking: the front as ranked, then the rest
/// by the first objective, then the second (best first), then by number.
fn ranked(o: &Outcome) -> Vec<usize> {
    let axes = o.axes();
    let mut rest: Vec<usize> = (0..o.settings.len())
        .filter(|&s| !o.settings[s].on_front)
        .collect();
    rest.sort_by(|&a, &b| {
        let (pa, pb) = (axes.point(&o.settings[a]), axes.point(&o.settings[b]));
        pb.0.total_cmp(&pa.0)
            .then(pb.1.total_cmp(&pa.1))
            .then(a.cmp(&b))
    });
    o.front.iter().copied().chain(rest).collect()
}

fn all_settings(o: &Outcome, h: &mut String) {
    section(h, "settings", "All settings");
    let n = o.settings.len();
    let shown: Vec<usize> = if n <= MAX_SETTINGS_ROWS {
        (0..n).collect()
    } else {
        ranked(o).into_iter().take(MAX_SETTINGS_ROWS).collect()
    };
    if n <= MAX_SETTINGS_ROWS {
        para(
            h,
            None,
            "Every setting run, in the order of the settings; the front rank is blank for \
             settings off the front.",
        );
    } else {
        para(
            h,
            None,
            &format!(
                "The best {} of the {} settings: the front first, as ranked, then the others \
                 by the first objective. All {} are in the CSV and the JSON outputs.",
                count(MAX_SETTINGS_ROWS as u64),
                count(n as u64),
                count(n as u64)
            ),
        );
    }
    let (mut headers, align) = front_headers(o);
    headers[0] = "front rank".into();
    let hdr: Vec<&str> = headers.iter().map(String::as_str).collect();
    let mut marked = Vec::new();
    let rows: Vec<Vec<String>> = shown
        .iter()
        .enumerate()
        .map(|(i, &s)| {
            if Some(s) == o.recommendation.setting {
                marked.push(i);
            }
            let rank = o.front.iter().position(|&f| f == s);
            let mut r = front_row(o, &o.settings[s], rank.map_or(0, |k| k + 1), 1);
            if rank.is_none() {
                r[0] = String::new();
            }
            r
        })
        .collect();
    table_marked(h, &hdr, &align, &rows, &marked);
    end_section(h);
}

fn varied(o: &Outcome, h: &mut String) {
    let p = &o.provenance;
    section(h, "varied", "What was varied");
    if p.keys.is_empty() {
        para(
            h,
            None,
            "Nothing was varied: the scenario's own settings only.",
        );
    } else {
        let items: Vec<(&str, String)> = p
            .keys
            .iter()
            .enumerate()
            .map(|(k, key)| {
                let mut vals: Vec<&str> = Vec::new();
                for s in o.settings.iter().skip(1) {
                    if let Some(v) = s.values.get(k) {
                        if !vals.contains(&v.as_str()) {
                            vals.push(v);
                        }
                    }
                }
                let own = o.settings[0]
                    .values
                    .get(k)
                    .map_or("default", String::as_str);
                (
                    key.as_str(),
                    format!("{} (the scenario's own: {own})", vals.join(", ")),
                )
            })
            .collect();
        pairs(h, &items);
        para(
            h,
            Some("aside"),
            "The settings are every combination of these values, the first key changing \
             slowest; setting 0 is the scenario as written.",
        );
    }
    end_section(h);
}

/// The median of a part of the cost over a setting's runs.
fn part(o: &Outcome, s: usize, f: &dyn Fn(&crate::sweep::CostPerYear) -> f64) -> f64 {
    let v: Vec<f64> = o
        .rows
        .iter()
        .filter(|r| r.setting == s)
        .filter_map(|r| r.cost.as_ref().map(f))
        .collect();
    Spread::of(&v).median
}

fn cost(o: &Outcome, h: &mut String) {
    let c = o.provenance.currency.clone().unwrap_or_default();
    section(h, "cost", "Cost a year under the tariff");
    para(
        h,
        None,
        &format!(
            "The scenario's [tariff] priced in {c}: the charges of each billing window scaled \
             to a 365-day year, and the contactors and capacitor steps worn per year at their \
             prices. The front settings and the scenario's own{}.",
            if o.provenance.seeds > 1 {
                ", medians over the seeds"
            } else {
                ""
            }
        ),
    );
    let mut list: Vec<usize> = o.front.clone();
    if !list.contains(&0) {
        list.push(0);
    }
    let money = |x: f64| format!("{} {c}", num(x, 0));
    let rows: Vec<Vec<String>> = list
        .iter()
        .map(|&s| {
            let st = &o.settings[s];
            vec![
                s.to_string(),
                if s == 0 {
                    "scenario's own".to_string()
                } else if st.on_front {
                    "front".to_string()
                } else {
                    String::new()
                },
                money(st.cost_per_year.map_or(f64::NAN, |x| x.median)),
                money(part(o, s, &|x| x.reactive_energy)),
                money(part(o, s, &|x| x.pf_penalty)),
                money(part(o, s, &|x| x.contactors)),
                money(part(o, s, &|x| x.capacitors)),
            ]
        })
        .collect();
    let marked: Vec<usize> = list
        .iter()
        .position(|&s| Some(s) == o.recommendation.setting)
        .into_iter()
        .collect();
    table_marked(
        h,
        &[
            "setting",
            "",
            "total a year",
            "reactive energy",
            "PF penalty",
            "contactors worn",
            "capacitors worn",
        ],
        "rlrrrrr",
        &rows,
        &marked,
    );
    end_section(h);
}

fn seeds(o: &Outcome, h: &mut String) {
    let n = o.provenance.seeds;
    section(h, "seeds", "Spread over seeds");
    para(
        h,
        None,
        &format!(
            "Each setting ran {n} times on the synthetic load, with run.seed from the \
             scenario's seed up by one each time. The figures elsewhere are medians; here \
             are the lowest and highest of the front settings and the scenario's own. A wide \
             range means the choice between close settings rests on chance as much as on \
             the settings."
        ),
    );
    let mut list: Vec<usize> = o.front.clone();
    if !list.contains(&0) {
        list.push(0);
    }
    let trio = |s: Spread, f: &dyn Fn(f64) -> String| {
        format!("{} ({} to {})", f(s.median), f(s.min), f(s.max))
    };
    let life = |y: f64| {
        if y.is_finite() {
            format!("{} y", years_text(y))
        } else {
            "never".to_string()
        }
    };
    let rows: Vec<Vec<String>> = list
        .iter()
        .map(|&s| {
            let st = &o.settings[s];
            vec![
                s.to_string(),
                trio(st.billed_pf, &|x| {
                    let t = num(x, 3);
                    if t == "1.000" {
                        t
                    } else {
                        format!("{t} {}", st.billed_pf_quadrant.word())
                    }
                }),
                trio(st.share_under_target, &pct),
                trio(st.operations_per_year, &approx),
                trio(st.years_to_first_life, &life),
            ]
        })
        .collect();
    table(
        h,
        &[
            "setting",
            "billed PF",
            "under target",
            "operations/year",
            "first rated life",
        ],
        "rrrrr",
        &rows,
    );
    end_section(h);
}

fn provenance(o: &Outcome, h: &mut String) {
    let p = &o.provenance;
    let rec = o
        .recommendation
        .setting
        .map(|r| setting_words(&o.settings[r]))
        .unwrap_or_else(|| "none".to_string());
    html_page::provenance(
        h,
        &[
            ("Tool", p.tool.clone()),
            ("Scenario", p.scenario.clone()),
            ("Scenario SHA-256", p.scenario_sha256.clone()),
            ("Profile SHA-256", p.profile_sha256.join(", ")),
            (
                "Variations",
                if p.variations.is_empty() {
                    "none".to_string()
                } else {
                    p.variations.clone()
                },
            ),
            ("Seeds per setting", p.seeds.to_string()),
            ("Settings", count(p.settings as u64)),
            ("Runs", count(p.runs as u64)),
            ("Front", p.front.name().to_string()),
            ("Recommended", rec),
        ],
    );
}
