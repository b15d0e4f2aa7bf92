//! The time-series CSV: an engine [`Observer`] that writes one row per interval (or every
//! N-th interval) while the run goes, through a buffered writer.
//!
//! Columns, units in the names:
//!
//! | column | meaning |
//! | --- | --- |
//! | `time_s` | start t_k of the interval, in the profile's time base, s |
//! | `p_kw` | three-phase supply-side active power, kW |
//! | `q_kvar` | three-phase supply-side reactive power, kvar (load convention) |
//! | `pf` | supply-side power factor, 0..1 |
//! | `pf_quadrant` | `lag` (Q ≥ 0) or `lead` (Q < 0) |
//! | `u_bus_v` | bus voltage, line-to-line equivalent: √3 × mean of the phase voltages, V |
//! | `demand_kvar` | the controller's demand ΔQ, kvar (> 0: wants more capacitance) |
//! | `bank_kvar` | reactive power delivered by the connected steps, kvar |
//! | `steps_on` | connected step numbers joined by `+` during the interval; empty if none |
//! | `operation` | what the controller did at the end of the interval (`close 3`, `open 2`, `trip export`); empty if nothing. It takes effect from the next interval. |
//! | `p_a_kw`, `p_b_kw`, `p_c_kw` | supply-side active power of each phase, kW |
//! | `q_a_kvar`, `q_b_kvar`, `q_c_kvar` | supply-side reactive power of each phase, kvar (load convention) |
//! | `pf_a`, `pf_b`, `pf_c` | power factor of each phase, 0..1 |
//! | `pf_a_quadrant`, ... | `lag` (the phase's Q ≥ 0) or `lead` (Q < 0) |
//! | `u_a_v`, `u_b_v`, `u_c_v` | bus voltage of each phase, line to neutral, V |
//!
//! Rows are written with `write!` straight into the buffer: nothing is allocated per row.

use crate::bank::BankState;
use crate::engine::{IntervalRecord, Observer};
use crate::error::RunError;
use crate::pf::{pf_of, quadrant_of};
use crate::report::ReportError;
use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::Path;

/// The header row of the time-series CSV.
pub const HEADER: &str = "time_s,p_kw,q_kvar,pf,pf_quadrant,u_bus_v,demand_kvar,bank_kvar,\
steps_on,operation,p_a_kw,p_b_kw,p_c_kw,q_a_kvar,q_b_kvar,q_c_kvar,pf_a,pf_b,pf_c,\
pf_a_quadrant,pf_b_quadrant,pf_c_quadrant,u_a_v,u_b_v,u_c_v";

/// Writes the time-series CSV as an engine observer.
pub struct TimeseriesWriter<W: Write> {
    out: W,
    every: u64,
    time_decimals: usize,
    name: String,
    rows: u64,
}

impl TimeseriesWriter<BufWriter<File>> {
    /// Creates (or truncates) `path` and writes the header. `every` ≥ 1 keeps every
    /// `every`-th interval (1 keeps all); `dt_s` and `t_first_s` choose how many decimals
    /// the time column needs.
    pub fn create(path: &Path, every: u64, dt_s: f64, t_first_s: f64) -> Result<Self, ReportError> {
        let file = File::create(path)?;
        Self::new(
            BufWriter::with_capacity(1 << 16, file),
            every,
            dt_s,
            t_first_s,
            path.display().to_string(),
        )
    }
}

impl<W: Write> TimeseriesWriter<W> {
    /// Wraps a writer (buffer it yourself) and writes the header. `name` identifies the
    /// output in error messages, e.g. the file name.
    pub fn new(
        mut out: W,
        every: u64,
        dt_s: f64,
        t_first_s: f64,
        name: impl Into<String>,
    ) -> Result<Self, ReportError> {
        writeln!(out, "{HEADER}")?;
        Ok(TimeseriesWriter {
            out,
            every: every.max(1),
            time_decimals: time_decimals(dt_s, t_first_s),
            name: name.into(),
            rows: 0,
        })
    }

    /// Number of data rows written so far.
    pub fn rows(&self) -> u64 {
        self.rows
    }

    /// Flushes the output and hands back the writer.
    pub fn finish(mut self) -> Result<W, ReportError> {
        self.out.flush()?;
        Ok(self.out)
    }

    fn row(&mut self, r: &IntervalRecord<'_>) -> std::io::Result<()> {
        let (mut p, mut q, mut v, mut bank) = (0.0, 0.0, 0.0, 0.0);
        for ph in r.phases {
            p += ph.p_kw;
            q += ph.q_kvar;
            v += ph.v_ln;
            bank += ph.q_bank_kvar;
        }
        let u_bus = 3f64.sqrt() * v / 3.0;
        let o = &mut self.out;
        write!(
            o,
            "{:.*},{:.3},{:.3},{:.4},{},{:.2},{:.3},{:.3},",
            self.time_decimals,
            r.t_s,
            p,
            q,
            pf_of(p, q),
            quadrant_of(q).word(),
            u_bus,
            r.decision.demand_kvar,
            bank,
        )?;
        write_steps(o, r.mask)?;
        o.write_all(b",")?;
        let d = r.decision;
        if let Some(t) = d.trip {
            write!(o, "trip {}", crate::text::trip_word(t))?;
        } else {
            let mut sep = "";
            if !d.closed.is_empty() {
                o.write_all(b"close ")?;
                write_steps(o, d.closed)?;
                sep = " ";
            }
            if !d.opened.is_empty() {
                write!(o, "{sep}open ")?;
                write_steps(o, d.opened)?;
            }
        }
        let ph = r.phases;
        write!(
            o,
            ",{:.3},{:.3},{:.3},{:.3},{:.3},{:.3},{:.4},{:.4},{:.4},{},{},{},{:.2},{:.2},{:.2}",
            ph[0].p_kw,
            ph[1].p_kw,
            ph[2].p_kw,
            ph[0].q_kvar,
            ph[1].q_kvar,
            ph[2].q_kvar,
            pf_of(ph[0].p_kw, ph[0].q_kvar),
            pf_of(ph[1].p_kw, ph[1].q_kvar),
            pf_of(ph[2].p_kw, ph[2].q_kvar),
            quadrant_of(ph[0].q_kvar).word(),
            quadrant_of(ph[1].q_kvar).word(),
            quadrant_of(ph[2].q_kvar).word(),
            ph[0].v_ln,
            ph[1].v_ln,
            ph[2].v_ln,
        )?;
        o.write_all(b"\n")
    }
}

impl<W: Write> Observer for TimeseriesWriter<W> {
    fn interval(&mut self, r: &IntervalRecord<'_>) -> Result<(), RunError> {
        if r.k % self.every != 0 {
            return Ok(());
        }
        self.row(r).map_err(|e| {
            RunError::Config(format!("{}: cannot write the time series: {e}", self.name))
        })?;
        self.rows += 1;
        Ok(())
    }
}

/// Writes the step numbers of a state joined by `+`, nothing for the empty state (unlike
/// [`BankState::label`], which says `none`), without allocating.
fn write_steps<W: Write + ?Sized>(o: &mut W, state: BankState) -> std::io::Result<()> {
    for (i, n) in state.iter().enumerate() {
        if i > 0 {
            o.write_all(b"+")?;
        }
        write!(o, "{n}")?;
    }
    Ok(())
}

/// Decimals the time column needs: none for whole-second steps from a whole second, else
/// enough for the step (at most 6).
fn time_decimals(dt_s: f64, t_first_s: f64) -> usize {
    (0..=6)
        .find(|&d| {
            let scale = 10f64.powi(d as i32);
            let whole = |x: f64| ((x * scale).round() - x * scale).abs() < 1e-6;
            whole(dt_s) && whole(t_first_s)
        })
        .unwrap_or(6)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::controller::Decision;
    use crate::profile::LoadSample;
    use crate::supply::PhaseSolution;

    fn record<'a>(
        k: u64,
        load: &'a LoadSample,
        phases: &'a [PhaseSolution; 3],
        decision: &'a Decision,
        mask: BankState,
    ) -> IntervalRecord<'a> {
        IntervalRecord {
            k,
            t_s: k as f64,
            load,
            phases,
            mask,
            decision,
        }
    }

    #[test]
    fn rows_carry_units_steps_and_operations() {
        let load = LoadSample::default();
        let ph = PhaseSolution {
            v_ln: 230.0,
            p_kw: 100.0,
            q_kvar: -10.0,
            q_bank_kvar: 50.0,
        };
        let phases = [ph; 3];
        let close = Decision {
            demand_kvar: 40.0,
            closed: BankState::of_steps(&[3]),
            ..Decision::default()
        };
        let trip = Decision {
            opened: BankState::of_steps(&[1, 3]),
            trip: Some(crate::controller::Trip::Export),
            ..Decision::default()
        };
        let mut w = TimeseriesWriter::new(Vec::new(), 2, 1.0, 0.0, "mem").unwrap();
        for (k, d) in [&close, &close, &trip, &Decision::default()]
            .into_iter()
            .enumerate()
        {
            let on = BankState::of_steps(&[1, 2]);
            w.interval(&record(k as u64, &load, &phases, d, on))
                .unwrap();
        }
        assert_eq!(w.rows(), 2);
        let text = String::from_utf8(w.finish().unwrap()).unwrap();
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines[0], HEADER);
        assert_eq!(
            lines[1],
            "0,300.000,-30.000,0.9950,lead,398.37,40.000,150.000,1+2,close 3,\
             100.000,100.000,100.000,-10.000,-10.000,-10.000,0.9950,0.9950,0.9950,\
             lead,lead,lead,230.00,230.00,230.00"
        );
        assert!(lines[2].starts_with("2,"), "{}", lines[2]);
        assert!(lines[2].contains(",1+2,trip export,"), "{}", lines[2]);
        assert_eq!(lines.len(), 3);
    }

    #[test]
    fn time_decimals_follow_the_step() {
        assert_eq!(time_decimals(1.0, 0.0), 0);
        assert_eq!(time_decimals(0.5, 0.0), 1);
        assert_eq!(time_decimals(1.0, 1_767_571_200.25), 2);
    }
}
