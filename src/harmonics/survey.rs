//! A resonance survey of a site: the impedance scan of chosen bank states, their
//! resonance, amplification and distortion, and what detuning every step at a given
//! ratio would do to the resonance. This is the library side of `bankstep resonance`;
//! the table, CSV and JSON forms live in [`crate::report::resonance`].

use super::scan::{ScanGrid, Scanner};
use super::{HarmonicModel, StateHarmonics};
use crate::bank::BankState;

/// The detuning ratios compared by default, fractions: 5.67 %, 7 % and 14 % (the usual
/// ratios, tuned to 4.2, 3.8 and 2.7; common practice).
pub const DEFAULT_DETUNINGS: [f64; 3] = [0.0567, 0.07, 0.14];

/// At most this many free steps for "all states" (2^16 states).
pub const MAX_ALL_FREE_STEPS: usize = 16;

/// Parses a list of bank states such as `1+2,1+2+3` (step numbers from 1 joined by `+`,
/// states separated by commas; `none` or `0` is the state with no switched step). Fixed
/// steps (`fixed`) are added to every state, since they are always connected. Returns the
/// states in the order given, without repeats.
pub fn parse_states(
    text: &str,
    n_steps: usize,
    fixed: BankState,
) -> Result<Vec<BankState>, String> {
    let mut out = Vec::new();
    for part in text.split(',') {
        let part = part.trim();
        if part.is_empty() {
            return Err(format!(
                "`{text}`: an empty state; write states like `1+2,1+2+3`"
            ));
        }
        let mut mask = fixed;
        if part != "none" && part != "0" {
            for num in part.split('+') {
                let num = num.trim();
                let n: usize = num.parse().map_err(|_| {
                    format!(
                        "`{num}` in `{part}` is not a step number; write states like `1+2,1+2+3`"
                    )
                })?;
                if n == 0 || n > n_steps {
                    return Err(format!(
                        "step {n} in `{part}` does not exist; the bank has steps 1 to {n_steps}"
                    ));
                }
                mask = mask.with(n);
            }
        }
        if !out.contains(&mask) {
            out.push(mask);
        }
    }
    Ok(out)
}

/// One state of the survey.
#[derive(Debug, Clone, PartialEq)]
pub struct SurveyState {
    /// Connected steps.
    pub mask: BankState,
    /// Step numbers connected.
    pub steps: Vec<usize>,
    /// Nominal kvar connected.
    pub kvar: f64,
    /// Resonance, harmonic voltages and step stress.
    pub harmonics: StateHarmonics,
    /// Time in the state in the run, s (`None` when the states did not come from a run).
    pub time_s: Option<f64>,
}

/// Resonance of the site with every step detuned at one ratio.
#[derive(Debug, Clone, PartialEq)]
pub struct DetuningCase {
    /// Detuning ratio p, fraction.
    pub p: f64,
    /// Tuning order 1/sqrt(p).
    pub tuning_order: f64,
    /// Parallel-resonance order of the full bank (every step connected).
    pub full_bank_order: Option<f64>,
    /// Parallel-resonance order of each surveyed state, in the survey's order.
    pub state_orders: Vec<Option<f64>>,
    /// Highest parallel-resonance order over the surveyed states.
    pub highest_order: Option<f64>,
    /// Estimated voltage THD of the full bank, %.
    pub full_bank_thd_pct: f64,
}

/// A resonance survey.
#[derive(Debug, Clone)]
pub struct Survey {
    /// The precomputed scan of the site as configured (for the curves).
    pub scanner: Scanner,
    /// The surveyed states, in the order asked for (all states: by number of steps, then
    /// by [`BankState`]'s order).
    pub states: Vec<SurveyState>,
    /// The bank as configured: plain steps' orders from sqrt(S_sc/Q_c), full bank.
    pub full_bank_order: Option<f64>,
    /// One entry per detuning ratio compared.
    pub detuning: Vec<DetuningCase>,
}

/// Which states a survey covers.
#[derive(Debug, Clone, PartialEq)]
pub enum Selection {
    /// Every combination of the switched steps, with the fixed ones.
    All,
    /// These states, in this order, with the time spent in each (from a run, or `None`).
    Masks(Vec<(BankState, Option<f64>)>),
}

impl Survey {
    /// Surveys `model` over the states `selection` picks, on `grid`, and compares the
    /// detuning ratios `detunings` (fractions). `fixed` and `switched` are the fixed and
    /// the switched steps. Errors (as a message) when "all states" would exceed
    /// [`MAX_ALL_FREE_STEPS`] switched steps.
    pub fn build(
        model: &HarmonicModel,
        fixed: BankState,
        switched: BankState,
        selection: &Selection,
        grid: ScanGrid,
        detunings: &[f64],
    ) -> Result<Survey, String> {
        let scanner = Scanner::new(model.clone(), grid);
        let mut entries: Vec<(BankState, Option<f64>, Vec<super::scan::Peak>)> = match selection {
            Selection::All => {
                let free = switched.len();
                if free > MAX_ALL_FREE_STEPS {
                    return Err(format!(
                        "{free} switched steps make 2^{free} states; \"all\" allows at most \
                         {MAX_ALL_FREE_STEPS} switched steps: list the states instead"
                    ));
                }
                let mut v: Vec<_> = scanner
                    .scan_all(fixed, switched)
                    .into_iter()
                    .map(|(m, p)| (m, None, p))
                    .collect();
                v.sort_by_key(|e| (e.0.len(), e.0));
                v
            }
            Selection::Masks(list) => list.iter().map(|&(m, t)| (m, t, scanner.scan(m))).collect(),
        };
        let states: Vec<SurveyState> = entries
            .drain(..)
            .map(|(mask, time_s, peaks)| SurveyState {
                mask,
                steps: mask.numbers(),
                kvar: model.q_c(mask),
                harmonics: model.state_with_peaks(mask, peaks),
                time_s,
            })
            .collect();
        let all = model.all_mask();
        let full_bank_order = model.resonance_order(all);
        let detuning = detunings
            .iter()
            .map(|&p| {
                let mp = model.with_detuning(p);
                let sp = Scanner::new(mp.clone(), grid);
                let state_orders: Vec<Option<f64>> = match selection {
                    Selection::All => {
                        let mut v = sp.scan_all(fixed, switched);
                        v.sort_by_key(|e| (e.0.len(), e.0));
                        v.into_iter()
                            .map(|(_, peaks)| peaks.first().map(|x| x.order))
                            .collect()
                    }
                    Selection::Masks(_) => states
                        .iter()
                        .map(|s| sp.scan(s.mask).first().map(|x| x.order))
                        .collect(),
                };
                DetuningCase {
                    p,
                    tuning_order: 1.0 / p.sqrt(),
                    full_bank_order: sp.scan(all).first().map(|x| x.order),
                    highest_order: state_orders.iter().flatten().copied().reduce(f64::max),
                    state_orders,
                    full_bank_thd_pct: mp.thd_pct(all),
                }
            })
            .collect();
        Ok(Survey {
            scanner,
            states,
            full_bank_order,
            detuning,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn state_lists_parse_with_fixed_steps() {
        let none = BankState::EMPTY;
        let states = |list: &[&[usize]]| -> Vec<BankState> {
            list.iter().map(|s| BankState::of_steps(s)).collect()
        };
        assert_eq!(
            parse_states("1+2, 1+2+3", 4, none).unwrap(),
            states(&[&[1, 2], &[1, 2, 3]])
        );
        assert_eq!(
            parse_states("2,none", 4, BankState::of_steps(&[4])).unwrap(),
            states(&[&[2, 4], &[4]])
        );
        let e = parse_states("1+5", 4, none).unwrap_err();
        assert!(e.contains("steps 1 to 4"), "{e}");
        let e = parse_states("1+x", 4, none).unwrap_err();
        assert!(e.contains("`x`"), "{e}");
        assert!(parse_states("1,,2", 4, none).is_err());
    }
}
