//! Outputs of `bankstep resonance`: the text tables (the states, their resonance and
//! amplification, and what detuning would do), the impedance curves as CSV for plotting,
//! and everything as one JSON object.
//!
//! In the text tables, states whose connected steps have the same sizes and detuning
//! (e.g. 1+2 and 3+4 of equal steps) behave alike and share one row; the CSV and JSON
//! keep every state.

use crate::bank::{BankState, StepPhase};
use crate::harmonics::limits::CapacitorLimits;
use crate::harmonics::scan::{Peak, ScanGrid};
use crate::harmonics::survey::{Survey, SurveyState};
use crate::harmonics::{Breach, HarmonicVoltage, NearResonance, StepStress};
use crate::report::{approx, count, harmonic_name, num, ReportError};
use crate::report::{file_name, Provenance, Tool, HARDWARE_CAUTION, TOOL};
use crate::scenario::Scenario;
use crate::timebase::HOURS_PER_YEAR;
use serde::ser::{SerializeSeq, SerializeStruct};
use serde::{Serialize, Serializer};
use std::io::Write;

/// What a resonance survey was made from: the scenario, the survey, for states from a run
/// the run length, and whether the JSON carries the curves.
#[derive(Debug, Clone, Copy)]
pub struct ResonanceContext<'a> {
    /// The scenario surveyed.
    pub scenario: &'a Scenario,
    /// The survey.
    pub survey: &'a Survey,
    /// Length of the run the states came from, s (`None` when not from a run).
    pub run_s: Option<f64>,
    /// SHA-256 of the CSV profile that run read, if any.
    pub profile_sha256: Option<&'a str>,
    /// Put the impedance curves (every state's |Z| over the whole grid) in the JSON. They
    /// are large: 12 steps at the default grid are hundreds of megabytes.
    pub curves: bool,
}

/// Most rows of a text table.
const MAX_ROWS: usize = 64;

/// Most amplification columns in the text table (the lowest orders of the spectrum).
const MAX_AMPLIFICATION: usize = 4;

/// Key of states that behave alike: the size, detuning and phase of each connected step.
fn likeness(sc: &Scenario, state: BankState) -> Vec<(u64, u64, usize)> {
    let mut k: Vec<(u64, u64, usize)> = state
        .iter()
        .filter_map(|n| sc.steps.get(n - 1))
        .map(|s| {
            let phase = match s.phase {
                crate::bank::StepPhase::Three => 0,
                crate::bank::StepPhase::Single(p) => 1 + p,
                crate::bank::StepPhase::Star => 4,
                crate::bank::StepPhase::Line(p) => 5 + p,
            };
            (s.kvar.to_bits(), s.detuning.unwrap_or(0.0).to_bits(), phase)
        })
        .collect();
    k.sort_unstable();
    k
}

/// Groups of alike states: (index of the first state, indices of all, total time).
fn groups(ctx: &ResonanceContext<'_>) -> Vec<(usize, Vec<usize>, Option<f64>)> {
    let mut keys: Vec<Vec<(u64, u64, usize)>> = Vec::new();
    let mut out: Vec<(usize, Vec<usize>, Option<f64>)> = Vec::new();
    for (i, s) in ctx.survey.states.iter().enumerate() {
        let k = likeness(ctx.scenario, s.mask);
        match keys.iter().position(|x| *x == k) {
            Some(g) => {
                out[g].1.push(i);
                if let (Some(t), Some(x)) = (&mut out[g].2, s.time_s) {
                    *t += x;
                }
            }
            None => {
                keys.push(k);
                out.push((i, vec![i], s.time_s));
            }
        }
    }
    out
}

/// The label of a group's row: its first state's steps, and how many alike.
fn group_label(sv: &Survey, first: usize, members: usize) -> String {
    let mut label = sv.states[first].mask.label();
    if members > 1 {
        label.push_str(&format!(" (+{} alike)", count(members as u64 - 1)));
    }
    label
}

/// The status of a state: `clear` when no limit is exceeded and no resonance lies near a
/// harmonic present; else `near hN` and/or `over` with the limits exceeded (capacitor
/// voltage judged as held continuously); `-` when there is nothing to judge (no harmonics
/// given and no limit exceeded at the fundamental).
pub fn status(ctx: &ResonanceContext<'_>, s: &SurveyState) -> String {
    let hm = ctx.survey.scanner.model();
    let near = hm.near_resonance(&s.harmonics, ctx.scenario.resonance_tolerance);
    let breaches = s.harmonics.breaches(None);
    let mut parts = Vec::new();
    if let Some(n) = near {
        parts.push(format!("near h{}", num(n.harmonic, 0)));
    }
    if !breaches.is_empty() {
        let mut names: Vec<String> = Vec::new();
        for b in &breaches {
            let n = b.kind.short();
            if !names.contains(&n) {
                names.push(n);
            }
        }
        parts.push(format!("over {}", names.join(", ")));
    }
    if !parts.is_empty() {
        parts.join("; ")
    } else if hm.present_orders().is_empty() {
        "-".to_string()
    } else {
        "clear".to_string()
    }
}

/// The breaches of a state in words, one fragment per kind of limit (the worst step
/// named, the others listed after it).
fn breach_text(breaches: &[Breach]) -> Vec<String> {
    let mut out = Vec::new();
    let mut done: Vec<usize> = Vec::new();
    for (i, b) in breaches.iter().enumerate() {
        if done.contains(&i) {
            continue;
        }
        let same: Vec<usize> = (i..breaches.len())
            .filter(|&j| breaches[j].kind == b.kind)
            .collect();
        done.extend(&same);
        // The worst; the lowest step number among equals.
        let worst = same.iter().map(|&j| &breaches[j]).fold(b, |w, x| {
            if x.ratio() > w.ratio() * (1.0 + 1e-9) {
                x
            } else {
                w
            }
        });
        let others: Vec<String> = same
            .iter()
            .filter_map(|&j| breaches[j].step)
            .filter(|&st| Some(st) != worst.step)
            .map(|st| st.to_string())
            .collect();
        let mut text = worst.to_string();
        if !others.is_empty() {
            text.push_str(&format!(
                ", also step{} {}",
                if others.len() == 1 { "" } else { "s" },
                others.join(", ")
            ));
        }
        out.push(text);
    }
    out
}

/// Appends a table whose column widths fit its content. `left` marks the columns aligned
/// left; the last column is not padded.
fn table(t: &mut String, head: &[String], rows: &[Vec<String>], left: &[bool]) {
    let n = head.len();
    let mut w = vec![0usize; n];
    for r in std::iter::once(head).chain(rows.iter().map(|r| r.as_slice())) {
        for (j, c) in r.iter().enumerate() {
            w[j] = w[j].max(c.chars().count());
        }
    }
    for r in std::iter::once(head).chain(rows.iter().map(|r| r.as_slice())) {
        let mut line = String::from(" ");
        for (j, c) in r.iter().enumerate() {
            line.push(' ');
            let pad = w[j] - c.chars().count();
            let last = j + 1 == n;
            if left[j] {
                line.push_str(c);
                if !last {
                    line.push_str(&" ".repeat(pad));
                }
            } else {
                line.push_str(&" ".repeat(pad));
                line.push_str(c);
            }
            if !last {
                line.push(' ');
            }
        }
        t.push_str(line.trim_end());
        t.push('\n');
    }
}

/// Writes the text tables.
pub fn write_text(ctx: &ResonanceContext<'_>, out: &mut dyn Write) -> Result<(), ReportError> {
    let sc = ctx.scenario;
    let sv = ctx.survey;
    let hm = sv.scanner.model();
    let grid = sv.scanner.grid();
    let mut t = String::new();
    t.push_str(&format!(
        "bankstep {}: resonance scan of \"{}\" ({})\n",
        env!("CARGO_PKG_VERSION"),
        sc.name,
        file_name(&sc.path)
    ));
    let s_sc = hm.short_circuit_kva();
    let line = format!(
        "Bus {} V, {} Hz; short-circuit power {}; scan orders {} to {} by {}, peaks refined.",
        num(sc.supply.nominal_voltage_v, 0),
        num(sc.supply.frequency_hz, 0),
        if s_sc.is_finite() {
            format!("{} kVA", num(s_sc, 0))
        } else {
            "infinite (no resonance with the supply)".to_string()
        },
        num(grid.from, 0),
        num(grid.to, 0),
        grid.step
    );
    super::wrap_plain(&mut t, "", &line);
    if sc.spectrum.orders.is_empty() {
        t.push_str("Load harmonics: none given in the scenario.\n");
    } else {
        let list: Vec<String> = sc
            .spectrum
            .orders
            .iter()
            .map(|(h, p)| format!("h{} {} %", num(*h, 0), num(*p, 1)))
            .collect();
        let line = format!(
            "Load harmonics, current in % of the fundamental of {} kVA{}: {}.",
            num(sc.spectrum.reference_kva, 0),
            sc.spectrum
                .preset
                .map(|p| format!(", {} preset: {}", p.name(), p.source()))
                .unwrap_or_default(),
            list.join(", ")
        );
        super::wrap_plain(&mut t, "", &line);
        let line = format!(
            "The harmonic load is taken at its full rating of {} kVA in every state, whatever \
             the rest of the load does when the state is reached: the estimate assumes the \
             full harmonic load.",
            num(sc.spectrum.reference_kva, 0)
        );
        super::wrap_plain(&mut t, "", &line);
    }
    if !hm.background().is_empty() {
        let list: Vec<String> = hm
            .background()
            .iter()
            .map(|(h, p)| format!("h{} {} %", num(*h, 0), num(*p, 1)))
            .collect();
        let line = format!(
            "Grid background distortion, % of U_n: {}; a source behind the supply impedance, \
             added in magnitude to the load's part (phases unknown: the safe side).",
            list.join(", ")
        );
        super::wrap_plain(&mut t, "", &line);
    }
    if hm.has_triplen() {
        let text = if other_connections(sc) {
            "Triplen orders (3, 9, 15, ...) are zero-sequence: delta-connected steps and steps \
             line to line do not carry them and the transformer's delta winding (taken as Dyn) \
             blocks the grid's part, so they are solved with the transformer's impedance alone \
             and the steps line to neutral and in earthed star only, and a resonance near them \
             is not flagged (the scan and its peaks are the positive-sequence circuit)."
        } else {
            "Triplen orders (3, 9, 15, ...) are zero-sequence: three-phase steps (taken as \
             delta-connected) do not carry them and the transformer's delta winding (taken as \
             Dyn) blocks the grid's part, so they are solved with the transformer's impedance \
             alone and the single-phase steps only, and a resonance near them is not flagged \
             (the scan and its peaks are the positive-sequence circuit)."
        };
        super::wrap_plain(&mut t, "", text);
    }
    let cl = hm.options.capacitor_limits;
    let line = format!(
        "Limits: bus {}; capacitors {}, rms voltage judged as held continuously ({} × rated, \
         {}{}). Warning tolerance ±{} orders.",
        hm.options.voltage_limits.name(),
        cl.standard(),
        num(cl.admissible_voltage(None), 2),
        cl.voltage_duration(None),
        match cl {
            CapacitorLimits::Iec60831 => "; 1.10 is admitted for 8 h in every 24 h only",
            CapacitorLimits::Ieee18 => "",
        },
        num(sc.resonance_tolerance, 2)
    );
    super::wrap_plain(&mut t, "", &line);
    t.push('\n');

    let amp_orders: Vec<f64> = sc
        .spectrum
        .orders
        .iter()
        .map(|x| x.0)
        .take(MAX_AMPLIFICATION)
        .collect();
    let gs = groups(ctx);
    t.push_str(&format!(
        "Bank states ({} state{}; alike states share a row)\n",
        count(sv.states.len() as u64),
        if sv.states.len() == 1 { "" } else { "s" }
    ));
    let mut head: Vec<String> = ["steps on", "kvar", "order", "peak", "f Hz", "|Z| ohm"]
        .iter()
        .map(|x| x.to_string())
        .collect();
    for h in &amp_orders {
        head.push(format!("×h{}", num(*h, 0)));
    }
    head.push("THD_V".to_string());
    if ctx.run_s.is_some() {
        head.push("h/year".to_string());
    }
    head.push("status".to_string());
    let mut left = vec![false; head.len()];
    left[0] = true;
    *left.last_mut().expect("a status column") = true;
    let mut rows = Vec::new();
    let mut details: Vec<(String, Vec<String>)> = Vec::new();
    for (first, members, time) in gs.iter().take(MAX_ROWS) {
        let s = &sv.states[*first];
        let label = group_label(sv, *first, members.len());
        let peak = s.harmonics.peaks.first();
        let mut row = vec![
            label.clone(),
            num(s.kvar, 0),
            s.harmonics.order.map_or("none".to_string(), |o| num(o, 2)),
            peak.map_or("-".to_string(), |p| num(p.order, 2)),
            s.harmonics
                .order
                .map_or("-".to_string(), |o| num(o * hm.frequency_hz(), 0)),
            peak.map_or("-".to_string(), |p| num(p.impedance_ohm, 3)),
        ];
        for h in &amp_orders {
            let a = s
                .harmonics
                .harmonics
                .iter()
                .find(|x| x.order == *h)
                .map_or(1.0, |x| x.amplification);
            row.push(num(a, 1));
        }
        row.push(format!("{} %", num(s.harmonics.thd_pct, 1)));
        if let Some(run) = ctx.run_s {
            let h = time.map_or(0.0, |x| x / run.max(1e-9) * HOURS_PER_YEAR);
            row.push(approx(h));
        }
        row.push(status(ctx, s));
        rows.push(row);
        let b = s.harmonics.breaches(None);
        if !b.is_empty() {
            details.push((label, breach_text(&b)));
        }
    }
    table(&mut t, &head, &rows, &left);
    if gs.len() > MAX_ROWS {
        t.push_str(&format!(
            "  ... and {} more groups (every state is in --csv and --json)\n",
            count((gs.len() - MAX_ROWS) as u64)
        ));
    }
    super::wrap_plain(
        &mut t,
        "  ",
        "order: sqrt(S_sc/Q_c) for plain steps, the scan peak otherwise; peak: the strongest \
         peak of |Z(h)|, |Z| its height in ohm per phase; ×hN: |Z| with the state over |Z| \
         without any step at harmonic N (above 1 the bank amplifies it); THD_V: estimated bus \
         voltage THD with the harmonic load at its rating.",
    );
    super::wrap_plain(
        &mut t,
        "  ",
        &format!(
            "status: clear when no limit is exceeded and no resonance lies within ±{} orders \
             of a harmonic present; near hN: a resonance within that of harmonic N; over: the \
             limits exceeded, V_hN a harmonic voltage, THD_V the voltage THD, and of a step's \
             capacitors I_C the rms current, U_C the rms voltage, U_C peak the peak voltage, \
             Q_C the kvar (listed below).",
            num(sc.resonance_tolerance, 2)
        ),
    );
    if !details.is_empty() {
        t.push('\n');
        t.push_str("Limits exceeded (the first state of each row)\n");
        for (label, texts) in &details {
            super::wrap_plain(&mut t, "    ", &format!("{label}: {}.", texts.join("; ")));
        }
    }
    t.push('\n');

    // What detuning would do.
    let lowest = hm.lowest_harmonic();
    super::wrap_plain(
        &mut t,
        "",
        "What detuning would do (same kvar per step, every step detuned at p; resonance of \
         each state with the supply)",
    );
    let all = hm.all_mask();
    let built_highest = sv
        .states
        .iter()
        .filter_map(|s| s.harmonics.order)
        .reduce(f64::max);
    let below = |x: Option<f64>| match (x, lowest) {
        (Some(o), Some(l)) => {
            if o < l {
                "yes"
            } else {
                "no"
            }
        }
        (None, Some(_)) => "no resonance",
        _ => "",
    };
    let head: Vec<String> = vec![
        "p".to_string(),
        "tuning order".to_string(),
        "full bank".to_string(),
        "highest state".to_string(),
        "full THD_V".to_string(),
        lowest.map_or(String::new(), |h| {
            format!("all below the {}?", harmonic_name(h))
        }),
    ];
    let mut rows = vec![vec![
        "as built".to_string(),
        "-".to_string(),
        sv.full_bank_order.map_or("none".to_string(), |o| num(o, 2)),
        built_highest.map_or("none".to_string(), |o| num(o, 2)),
        format!("{} %", num(hm.thd_pct(all), 1)),
        below(built_highest).to_string(),
    ]];
    for d in &sv.detuning {
        rows.push(vec![
            format!("{} %", num(d.p * 100.0, 2)),
            num(d.tuning_order, 2),
            d.full_bank_order.map_or("none".to_string(), |o| num(o, 2)),
            d.highest_order.map_or("none".to_string(), |o| num(o, 2)),
            format!("{} %", num(d.full_bank_thd_pct, 1)),
            below(d.highest_order).to_string(),
        ]);
    }
    table(
        &mut t,
        &head,
        &rows,
        &[true, false, false, false, false, true],
    );
    t.push('\n');
    let mut head = vec!["steps on".to_string(), "as built".to_string()];
    for d in &sv.detuning {
        head.push(format!("{} %", num(d.p * 100.0, 2)));
    }
    let mut left = vec![false; head.len()];
    left[0] = true;
    t.push_str("  Resonant order per state:\n");
    let mut rows = Vec::new();
    for (first, members, _) in gs.iter().take(MAX_ROWS) {
        let s = &sv.states[*first];
        let mut row = vec![
            group_label(sv, *first, members.len()),
            s.harmonics.order.map_or("none".to_string(), |o| num(o, 2)),
        ];
        for d in &sv.detuning {
            row.push(d.state_orders[*first].map_or("none".to_string(), |o| num(o, 2)));
        }
        rows.push(row);
    }
    table(&mut t, &head, &rows, &left);
    let u = sc.supply.nominal_voltage_v;
    let volts: Vec<String> = sv
        .detuning
        .iter()
        .map(|d| format!("{} V at {} %", num(u / (1.0 - d.p), 0), num(d.p * 100.0, 2)))
        .collect();
    if !volts.is_empty() {
        t.push('\n');
        super::wrap_plain(
            &mut t,
            "  ",
            &format!(
                "A detuned step's capacitors see U/(1 − p): {}; rate them above it. A detuned \
                 step delivers Q_R·(U/U_R)²/(1 − p) from capacitors rated Q_R at U_R.",
                volts.join(", ")
            ),
        );
    }
    t.push('\n');
    super::wrap_plain(&mut t, "  ", HARDWARE_CAUTION);
    out.write_all(t.as_bytes())?;
    out.flush()?;
    Ok(())
}

/// Writes the impedance curves: a column `h` (harmonic order), a column `supply_only_ohm`
/// (no step connected), then one column of |Z| in ohm per state, named by its steps
/// (`z_1+2_ohm`).
pub fn write_csv(ctx: &ResonanceContext<'_>, out: &mut dyn Write) -> Result<(), ReportError> {
    let sv = ctx.survey;
    let sc = &sv.scanner;
    let mut line = String::from("h,supply_only_ohm");
    for s in &sv.states {
        line.push_str(&format!(",z_{}_ohm", s.mask.label()));
    }
    line.push('\n');
    out.write_all(line.as_bytes())?;
    let decimals = decimals_of(sc.grid().step);
    for j in 0..sc.grid().len() {
        line.clear();
        line.push_str(&format!("{:.*}", decimals, sc.grid().order(j)));
        line.push_str(&format!(",{}", sig(sc.impedance_at(j, BankState::EMPTY))));
        for s in &sv.states {
            line.push_str(&format!(",{}", sig(sc.impedance_at(j, s.mask))));
        }
        line.push('\n');
        out.write_all(line.as_bytes())?;
    }
    out.flush()?;
    Ok(())
}

/// Decimals that show a grid step exactly (0.01 → 2).
fn decimals_of(step: f64) -> usize {
    (0..=6)
        .find(|&d| {
            let f = 10f64.powi(d as i32);
            ((step * f).round() - step * f).abs() < 1e-9
        })
        .unwrap_or(6)
}

/// A value with 6 significant figures.
fn sig(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return "0".to_string();
    }
    let d = (5 - x.abs().log10().floor() as i32).clamp(0, 12) as usize;
    format!("{x:.d$}")
}

/// One state in the JSON document.
#[derive(Serialize)]
struct StateJson<'a> {
    steps: &'a [usize],
    kvar: f64,
    order: Option<f64>,
    frequency_hz: Option<f64>,
    peaks: &'a [Peak],
    nearest_harmonic: Option<f64>,
    near_harmonic: Option<f64>,
    near_resonance: Option<NearResonance>,
    status: String,
    breaches: Vec<Breach>,
    time_s: Option<f64>,
    hours_per_year: Option<f64>,
    thd_pct: f64,
    thd_limit_pct: f64,
    harmonics: &'a [HarmonicVoltage],
    step_stress: &'a [StepStress],
    limit_ratio: f64,
    severity: f64,
}

#[derive(Serialize)]
struct DetuningStateJson<'a> {
    steps: &'a [usize],
    order: Option<f64>,
}

#[derive(Serialize)]
struct DetuningJson<'a> {
    detuning_pct: f64,
    tuning_order: f64,
    capacitor_voltage_v: f64,
    full_bank_order: Option<f64>,
    highest_order: Option<f64>,
    full_bank_thd_pct: f64,
    states: Vec<DetuningStateJson<'a>>,
}

/// The curves, computed while they are written (so that a large survey is not held in
/// memory twice).
struct Curves<'a>(&'a Survey);

struct Curve<'a>(&'a Survey, BankState);

impl Serialize for Curve<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let sc = &self.0.scanner;
        let mut seq = s.serialize_seq(Some(sc.grid().len()))?;
        for j in 0..sc.grid().len() {
            seq.serialize_element(&sc.impedance_at(j, self.1))?;
        }
        seq.end()
    }
}

struct Orders<'a>(&'a ScanGrid);

impl Serialize for Orders<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let mut seq = s.serialize_seq(Some(self.0.len()))?;
        for j in 0..self.0.len() {
            seq.serialize_element(&self.0.order(j))?;
        }
        seq.end()
    }
}

#[derive(Serialize)]
struct CurveJson<'a> {
    steps: &'a [usize],
    impedance_ohm: Curve<'a>,
}

impl Serialize for Curves<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let sv = self.0;
        let mut st = s.serialize_struct("Curves", 3)?;
        st.serialize_field("h", &Orders(sv.scanner.grid()))?;
        st.serialize_field("supply_only_ohm", &Curve(sv, BankState::EMPTY))?;
        let states: Vec<CurveJson<'_>> = sv
            .states
            .iter()
            .map(|x| CurveJson {
                steps: &x.steps,
                impedance_ohm: Curve(sv, x.mask),
            })
            .collect();
        st.serialize_field("states", &states)?;
        st.end()
    }
}

#[derive(Serialize)]
struct SupplyJson {
    nominal_voltage_v: f64,
    frequency_hz: f64,
    short_circuit_kva: Option<f64>,
}

#[derive(Serialize)]
struct Document<'a> {
    tool: Tool,
    provenance: Provenance,
    scenario: String,
    study: &'a str,
    supply: SupplyJson,
    grid: &'a ScanGrid,
    tolerance_orders: f64,
    voltage_limits: &'static str,
    capacitor_limits: &'static str,
    capacitor_voltage_limit: f64,
    capacitor_voltage_judged_as: &'static str,
    damping_kw: f64,
    spectrum: Vec<(f64, f64)>,
    harmonic_load_kva: f64,
    harmonic_load_note: &'static str,
    background_pct: &'a [(f64, f64)],
    triplen_note: Option<&'static str>,
    full_bank_order: Option<f64>,
    states: Vec<StateJson<'a>>,
    detuning: Vec<DetuningJson<'a>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    curves: Option<Curves<'a>>,
}

/// What the JSON says about the harmonic load.
const HARMONIC_LOAD_NOTE: &str = "the harmonic load is taken at its full rating in every \
state: the estimate assumes the full harmonic load";

/// True when some step is in earthed star or line to line, so that the triplen notes
/// name the connections (with delta and line-to-neutral steps only they keep their
/// shorter words).
fn other_connections(sc: &Scenario) -> bool {
    sc.steps
        .iter()
        .any(|s| matches!(s.phase, StepPhase::Star | StepPhase::Line(_)))
}

/// What the JSON says about triplen orders when the bank has steps in earthed star or line
/// to line and the spectrum has triplen orders.
const TRIPLEN_NOTE_CONNECTIONS: &str = "triplen orders are zero-sequence: solved with the \
transformer's impedance alone and the steps line to neutral and in earthed star only (delta \
steps and steps line to line carry none; the transformer taken as Dyn), and not used for \
near_harmonic";

/// What the JSON says about triplen orders when the spectrum has any.
const TRIPLEN_NOTE: &str = "triplen orders are zero-sequence: solved with the transformer's \
impedance alone and the single-phase steps only (three-phase steps taken as delta-connected, \
the transformer as Dyn), and not used for near_harmonic";

/// Writes the whole survey as one JSON object: the states with their resonance,
/// harmonic voltages, step stress, status and limits exceeded, the detuning comparison,
/// and, when the context asks for them, the curves (`curves.h` and one `impedance_ohm`
/// array per state, ohm).
pub fn write_json(ctx: &ResonanceContext<'_>, out: &mut dyn Write) -> Result<(), ReportError> {
    let sc = ctx.scenario;
    let sv = ctx.survey;
    let hm = sv.scanner.model();
    let s_sc = hm.short_circuit_kva();
    let tol = sc.resonance_tolerance;
    let states = sv
        .states
        .iter()
        .map(|s| StateJson {
            steps: &s.steps,
            kvar: s.kvar,
            order: s.harmonics.order,
            frequency_hz: s.harmonics.order.map(|o| o * hm.frequency_hz()),
            peaks: &s.harmonics.peaks,
            nearest_harmonic: s.harmonics.order.and_then(|o| hm.nearest_harmonic(o)),
            near_harmonic: hm.near_resonance(&s.harmonics, tol).map(|n| n.harmonic),
            near_resonance: hm.near_resonance(&s.harmonics, tol),
            status: status(ctx, s),
            breaches: s.harmonics.breaches(None),
            time_s: s.time_s,
            hours_per_year: match (s.time_s, ctx.run_s) {
                (Some(t), Some(r)) => Some(t / r.max(1e-9) * HOURS_PER_YEAR),
                _ => None,
            },
            thd_pct: s.harmonics.thd_pct,
            thd_limit_pct: s.harmonics.thd_limit_pct,
            harmonics: &s.harmonics.harmonics,
            step_stress: &s.harmonics.steps,
            limit_ratio: s.harmonics.limit_ratio,
            severity: s.harmonics.severity,
        })
        .collect();
    let u = sc.supply.nominal_voltage_v;
    let detuning = sv
        .detuning
        .iter()
        .map(|d| DetuningJson {
            detuning_pct: d.p * 100.0,
            tuning_order: d.tuning_order,
            capacitor_voltage_v: u / (1.0 - d.p),
            full_bank_order: d.full_bank_order,
            highest_order: d.highest_order,
            full_bank_thd_pct: d.full_bank_thd_pct,
            states: sv
                .states
                .iter()
                .zip(&d.state_orders)
                .map(|(s, o)| DetuningStateJson {
                    steps: &s.steps,
                    order: *o,
                })
                .collect(),
        })
        .collect();
    let doc = Document {
        tool: TOOL,
        provenance: Provenance::new(sc, ctx.profile_sha256),
        scenario: file_name(&sc.path),
        study: &sc.name,
        supply: SupplyJson {
            nominal_voltage_v: u,
            frequency_hz: sc.supply.frequency_hz,
            short_circuit_kva: s_sc.is_finite().then_some(s_sc),
        },
        grid: sv.scanner.grid(),
        tolerance_orders: tol,
        voltage_limits: hm.options.voltage_limits.name(),
        capacitor_limits: hm.options.capacitor_limits.standard(),
        capacitor_voltage_limit: hm.options.capacitor_limits.admissible_voltage(None),
        capacitor_voltage_judged_as: hm.options.capacitor_limits.voltage_duration(None),
        damping_kw: hm.options.damping_kw,
        spectrum: sc.spectrum.orders.clone(),
        harmonic_load_kva: sc.spectrum.reference_kva,
        harmonic_load_note: HARMONIC_LOAD_NOTE,
        background_pct: hm.background(),
        triplen_note: hm.has_triplen().then_some(if other_connections(sc) {
            TRIPLEN_NOTE_CONNECTIONS
        } else {
            TRIPLEN_NOTE
        }),
        full_bank_order: sv.full_bank_order,
        states,
        detuning,
        curves: ctx.curves.then_some(Curves(sv)),
    };
    super::write_json(out, &doc)
}
