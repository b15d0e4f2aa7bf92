//! The gap pass of the scan: spacings between used rows longer than `gap_factor` median
//! spacings, found in a second reading once the median is known, with their messages
//! (and a hint when a gap looks like clocks set forward in naive local times), counted
//! in the tally and kept up to [`MAX_DEFECTS_KEPT`].

use super::defect::{Defect, DefectAction, DefectCounts, DefectKind, MAX_DEFECTS_KEPT};
use super::replay::{AcceptedRows, Plan};
use super::rules;
use super::summary::Tally;
use super::text::{fmt_secs, fmt_time};
use super::tolerance::spacing_key;
use crate::error::ProfileError;
use crate::profile::{DefectPolicy, LoadSample};
use crate::timebase::TimeKind;

/// Reads the used rows of `plan` again and returns the gaps kept in full (in line order)
/// and the time without data across all gaps, µs (each gap's spacing minus the median).
/// Every gap is counted in `counts` and `tally`. `time_only` reads only the time column
/// (allowed when every row of the scan was good).
///
/// Errors: `Row` for the first gap when the gap policy is `stop`; the errors of
/// [`AcceptedRows`] when the file changed since the scan.
pub(super) fn find_gaps(
    plan: &Plan,
    time_only: bool,
    median_us: f64,
    gap_factor: f64,
    counts: &mut DefectCounts,
    tally: &mut Tally,
) -> Result<(Vec<Defect>, f64), ProfileError> {
    let name = plan.name().to_path_buf();
    let time_kind = plan.time_kind;
    let gap_threshold_us = plan.gap_threshold_us;
    let median_s = median_us / 1e6;
    let mut gaps = Vec::new();
    let mut gap_time_us = 0.0;
    let mut rows = AcceptedRows::open(plan, time_only, false)?;
    let mut s = LoadSample::default();
    let mut prev: Option<(f64, u64)> = None;
    let gap_policy = plan.policies[DefectKind::Gap.index()];
    while let Some(t) = rows.next(&mut s)? {
        let line = rows.row_line();
        if let Some((tp, lp)) = prev {
            let key = spacing_key(t - tp);
            if key as f64 > gap_threshold_us {
                let dst = rules::dst_forward(tp, t, median_s, rows.naive_time());
                let mut message = gap_message(
                    time_kind,
                    tp,
                    lp,
                    t,
                    key as f64 / 1e6,
                    gap_factor,
                    median_s,
                    gap_policy,
                );
                if dst {
                    message.push_str(
                        "; this looks like a daylight-saving change (clocks set forward one \
                         hour with times in naive local time), so the profile's time line \
                         has an hour that did not happen: give the times with their UTC \
                         offset (e.g. +01:00)",
                    );
                    tally.dst_line(line);
                }
                if gap_policy == DefectPolicy::Stop {
                    message.push_str(
                        "; set gap = \"hold\" or \"interpolate\" under [load.defects] to \
                         run across it",
                    );
                    return Err(ProfileError::Row {
                        file: name,
                        line,
                        message,
                    });
                }
                let action = if gap_policy == DefectPolicy::Interpolate {
                    DefectAction::Interpolated
                } else {
                    DefectAction::Held
                };
                counts.add(DefectKind::Gap);
                let extra_us = key as f64 - median_us;
                gap_time_us += extra_us;
                tally.gap_seconds(extra_us / 1e6);
                let d = Defect {
                    line,
                    kind: DefectKind::Gap,
                    action,
                    message,
                };
                tally.count(DefectKind::Gap, line, action, || d.to_string());
                if gaps.len() < MAX_DEFECTS_KEPT {
                    gaps.push(d);
                }
            }
        }
        prev = Some((t, line));
    }
    Ok((gaps, gap_time_us))
}

#[allow(clippy::too_many_arguments)]
fn gap_message(
    kind: TimeKind,
    t_prev: f64,
    line_prev: u64,
    t: f64,
    spacing_s: f64,
    factor: f64,
    median_s: f64,
    policy: DefectPolicy,
) -> String {
    let across = match policy {
        DefectPolicy::Interpolate => format!(
            "the load is interpolated across the gap between that row and the row at {}",
            fmt_time(kind, t)
        ),
        _ => format!(
            "that row's load is held across the gap until {}",
            fmt_time(kind, t)
        ),
    };
    format!(
        "gap of {} s after the row at {} (line {line_prev}), more than {} × the median \
         spacing of {} s; {across}",
        fmt_secs(spacing_s),
        fmt_time(kind, t_prev),
        fmt_secs(factor),
        fmt_secs(median_s),
    )
}
