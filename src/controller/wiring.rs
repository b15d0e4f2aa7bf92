//! What the controller's measuring inputs are connected to, what it assumes they are
//! connected to, and the power it computes from them.
//!
//! A measuring channel is one current input (a current transformer on one line, maybe
//! with its polarity reversed) and one voltage input (line to neutral, or a line-to-line
//! pair). The controller computes the complex power of the phase it believes it measures
//! as S = c·U·conj(I), where c turns the voltage it expects into that phase's line-to-
//! neutral voltage for a balanced positive-sequence (a, b, c) system:
//!
//! - V_a = V∠0°, V_b = V∠−120°, V_c = V∠+120°, so U_ab = V_a − V_b = √3·V∠+30°,
//!   U_bc = √3·V∠−90°, U_ca = √3·V∠+150° (and U_ba = −U_ab and so on).
//! - For the current of phase x with the pair U_ij expected, c = V_x/U_ij of that
//!   balanced set: magnitude 1/√3, angle the offset the controller subtracts. With I_a
//!   and U_ab the offset is 30° (U_ab leads V_a by 30°); with I_a and U_bc it is −90°
//!   (U_bc lags V_a by 90°, the usual "90° connection" of protection relays); with I_a
//!   and U_ca it is 150°, with U_ac −30°. For a line-to-neutral input of the same phase
//!   c = 1.
//!
//! When the wiring is as assumed and the voltages are balanced, S is exactly the
//! phase's power. A line-to-line input on an unbalanced bus gives a slightly different
//! figure even when wired right (the controller assumes balance); a miswired input gives
//! S = c·s·U_actual·conj(I_y) with s = −1 for a reversed current transformer and y the
//! phase it actually sits on. With conj(I_y) = S_y/V_y this is
//! S = c·s·(U_actual/V_y)·S_y, which [`Channel::measure`] computes from the bus phasors.

use num_complex::Complex64;

/// A voltage input: line to neutral of one phase, or between two lines (U_ij = V_i − V_j).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum VoltagePair {
    /// Line to neutral of phase 0, 1 or 2.
    Ln(usize),
    /// Line i to line j.
    Ll(usize, usize),
}

/// The phasor of 1∠angle (degrees).
fn unit(deg: f64) -> Complex64 {
    Complex64::from_polar(1.0, deg.to_radians())
}

/// Nominal angle of phase `ph` in a positive-sequence set, degrees.
fn phase_angle(ph: usize) -> f64 {
    [0.0, -120.0, 120.0][ph.min(2)]
}

impl VoltagePair {
    /// Reads `an`, `bn`, `cn` (line to neutral) or `ab`, `bc`, `ca`, `ba`, `cb`, `ac`
    /// (line to line), in either case; `None` for anything else.
    pub fn parse(s: &str) -> Option<Self> {
        let s = s.trim().to_ascii_lowercase();
        let b = s.as_bytes();
        if b.len() != 2 {
            return None;
        }
        let ph = |c: u8| match c {
            b'a' => Some(0),
            b'b' => Some(1),
            b'c' => Some(2),
            _ => None,
        };
        match (ph(b[0]), b[1]) {
            (Some(i), b'n') => Some(VoltagePair::Ln(i)),
            (Some(i), c) => match ph(c) {
                Some(j) if j != i => Some(VoltagePair::Ll(i, j)),
                _ => None,
            },
            _ => None,
        }
    }

    /// The pair as written: `an`, `bc`, ...
    pub fn label(self) -> String {
        let n = crate::profile::PHASES;
        match self {
            VoltagePair::Ln(i) => format!("{}n", n[i.min(2)]),
            VoltagePair::Ll(i, j) => format!("{}{}", n[i.min(2)], n[j.min(2)]),
        }
    }

    /// True for a line-to-line pair.
    pub fn is_line_to_line(self) -> bool {
        matches!(self, VoltagePair::Ll(..))
    }

    /// The pair's phasor in a balanced positive-sequence set of 1 pu line to neutral.
    pub fn nominal(self) -> Complex64 {
        match self {
            VoltagePair::Ln(i) => unit(phase_angle(i)),
            VoltagePair::Ll(i, j) => unit(phase_angle(i)) - unit(phase_angle(j)),
        }
    }

    /// The pair's phasor from the line-to-neutral phasors `v`.
    #[inline]
    pub fn of(self, v: &[Complex64; 3]) -> Complex64 {
        match self {
            VoltagePair::Ln(i) => v[i],
            VoltagePair::Ll(i, j) => v[i] - v[j],
        }
    }

    /// Every pair of the same kind (line to neutral, or line to line in either order).
    pub fn same_kind(self) -> Vec<VoltagePair> {
        if self.is_line_to_line() {
            let mut v = Vec::new();
            for i in 0..3 {
                for j in 0..3 {
                    if i != j {
                        v.push(VoltagePair::Ll(i, j));
                    }
                }
            }
            v
        } else {
            (0..3).map(VoltagePair::Ln).collect()
        }
    }
}

/// The angle the controller subtracts for the current of phase `x` measured against
/// `pair`, degrees: the angle of the pair's nominal phasor against V_x (0 for the
/// phase's own line-to-neutral voltage, 30 for I_a with U_ab, −90 for I_a with U_bc).
pub fn offset_deg(x: usize, pair: VoltagePair) -> f64 {
    let r = pair.nominal() / unit(phase_angle(x));
    let d = r.arg().to_degrees();
    // Round away the last digits of the trigonometry: the offsets are whole degrees.
    (d * 1e9).round() / 1e9
}

/// One measuring channel: a current input and a voltage input.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Channel {
    /// The line whose current the current transformer carries: 0, 1 or 2.
    pub current: usize,
    /// The current transformer's polarity is reversed (P1/P2 or S1/S2 swapped).
    pub reversed: bool,
    /// The voltage input.
    pub voltage: VoltagePair,
}

impl Channel {
    /// The channel of phase `x` with its own line-to-neutral voltage.
    pub fn phase(x: usize) -> Self {
        Channel {
            current: x,
            reversed: false,
            voltage: VoltagePair::Ln(x),
        }
    }

    /// The factor c = V_x/U of the balanced set with which the controller turns
    /// U·conj(I) into the power of phase `self.current` (see the module docs).
    pub fn correction(self) -> Complex64 {
        unit(phase_angle(self.current)) / self.voltage.nominal()
    }

    /// The power (kW + j kvar) the controller computes on this channel, wired as `self`,
    /// with the correction `c` of the channel it assumes: c·s·(U/V_y)·S_y, with the bus
    /// line-to-neutral phasors `v` (any common scale) and the supply-side power of each
    /// phase `s_ph` (kW + j kvar).
    #[inline]
    pub fn measure(self, c: Complex64, v: &[Complex64; 3], s_ph: &[Complex64; 3]) -> Complex64 {
        let y = self.current;
        let u = self.voltage.of(v);
        let s = c * (u / v[y]) * s_ph[y];
        if self.reversed {
            -s
        } else {
            s
        }
    }

    /// How the channel is wired, in words: `I_b reversed with U_ca`.
    pub fn label(self) -> String {
        format!(
            "I_{}{} with U_{}",
            crate::profile::PHASES[self.current.min(2)],
            if self.reversed { " reversed" } else { "" },
            self.voltage.label()
        )
    }
}

/// The measuring channels as the controller assumes them and as they are wired: one
/// channel for a single current transformer, three for a measurement on every phase
/// (channel x assumed to be phase x with its own line-to-neutral voltage).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Wiring {
    /// Channels in use: 1 or 3.
    pub n: usize,
    /// What the controller assumes of each channel.
    pub assumed: [Channel; 3],
    /// How each channel is actually wired.
    pub actual: [Channel; 3],
    /// The controller's correction of each channel, from its assumption.
    pub c: [Complex64; 3],
}

impl Wiring {
    /// Wiring as assumed: one channel, or three.
    pub fn new(assumed: &[Channel]) -> Self {
        let n = assumed.len().clamp(1, 3);
        let mut a = [Channel::phase(0), Channel::phase(1), Channel::phase(2)];
        a[..n].copy_from_slice(&assumed[..n]);
        Wiring {
            n,
            assumed: a,
            actual: a,
            c: a.map(Channel::correction),
        }
    }

    /// The same assumption with the channels wired as `actual`.
    pub fn wired(mut self, actual: &[Channel]) -> Self {
        let n = actual.len().min(self.n);
        self.actual[..n].copy_from_slice(&actual[..n]);
        self
    }

    /// True when every channel is wired as assumed.
    pub fn as_assumed(&self) -> bool {
        self.assumed[..self.n] == self.actual[..self.n]
    }

    /// True when the power can be taken from each phase's P and Q directly (as assumed,
    /// line-to-neutral inputs), with no phasor needed.
    pub fn is_direct(&self) -> bool {
        self.as_assumed()
            && self.assumed[..self.n]
                .iter()
                .all(|c| c.voltage == VoltagePair::Ln(c.current) && !c.reversed)
    }

    /// The power each channel's controller computes (kW + j kvar), channel by channel.
    #[inline]
    pub fn measure(&self, v: &[Complex64; 3], s_ph: &[Complex64; 3]) -> [Complex64; 3] {
        let mut out = [Complex64::new(0.0, 0.0); 3];
        for (i, o) in out.iter_mut().enumerate().take(self.n) {
            *o = self.actual[i].measure(self.c[i], v, s_ph);
        }
        out
    }

    /// The actual wiring in words: `as assumed`, the one channel as wired
    /// (`I_b reversed with U_an`), or for three channels the currents they carry and the
    /// reversed ones (`a, b, c carry I_b, I_c, I_a`; `reversed on a`).
    pub fn label(&self) -> String {
        if self.as_assumed() {
            return "as assumed".to_string();
        }
        if self.n == 1 {
            return self.actual[0].label();
        }
        let names = crate::profile::PHASES;
        let mut parts = Vec::new();
        if (0..3).any(|i| self.actual[i].current != self.assumed[i].current) {
            let carry: Vec<String> = (0..3)
                .map(|i| format!("I_{}", names[self.actual[i].current.min(2)]))
                .collect();
            parts.push(format!("a, b, c carry {}", carry.join(", ")));
        }
        let rev: Vec<String> = (0..3)
            .filter(|&i| self.actual[i].reversed != self.assumed[i].reversed)
            .map(|i| names[i].to_string())
            .collect();
        if !rev.is_empty() {
            parts.push(format!("reversed on {}", crate::text::join_and(&rev)));
        }
        if (0..3).any(|i| self.actual[i].voltage != self.assumed[i].voltage) {
            let v: Vec<String> = (0..3)
                .map(|i| format!("U_{}", self.actual[i].voltage.label()))
                .collect();
            parts.push(format!("voltages {}", v.join(", ")));
        }
        parts.join("; ")
    }

    /// Every plausible miswiring of the assumed channels, each as actual channels: for
    /// one current transformer the current from either other phase, reversed, reversed
    /// on either other phase, and every other voltage pair of the same kind; for three,
    /// one channel reversed, all reversed, the currents rotated (two ways) and two of
    /// them swapped (three ways).
    pub fn miswirings(&self) -> Vec<[Channel; 3]> {
        let mut out = Vec::new();
        let base = self.assumed;
        if self.n == 1 {
            let a = base[0];
            let mut push = |c: Channel| {
                if c != a {
                    let mut w = base;
                    w[0] = c;
                    out.push(w);
                }
            };
            for y in 0..3 {
                push(Channel { current: y, ..a });
            }
            push(Channel {
                reversed: true,
                ..a
            });
            for y in 0..3 {
                if y != a.current {
                    push(Channel {
                        current: y,
                        reversed: true,
                        ..a
                    });
                }
            }
            for p in a.voltage.same_kind() {
                push(Channel { voltage: p, ..a });
            }
        } else {
            for i in 0..3 {
                let mut w = base;
                w[i].reversed = true;
                out.push(w);
            }
            let mut w = base;
            for c in &mut w {
                c.reversed = true;
            }
            out.push(w);
            for perm in [[1, 2, 0], [2, 0, 1], [1, 0, 2], [2, 1, 0], [0, 2, 1]] {
                let mut w = base;
                for (i, c) in w.iter_mut().enumerate() {
                    c.current = base[perm[i]].current;
                }
                out.push(w);
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // The offsets of a balanced positive-sequence set, worked from the phasor diagram
    // (U_ab = √3·V∠30°, U_bc = √3·V∠−90°, U_ca = √3·V∠150°; common practice).
    #[test]
    fn offsets_of_the_usual_connections() {
        assert_eq!(offset_deg(0, VoltagePair::Ln(0)), 0.0);
        assert_eq!(offset_deg(0, VoltagePair::Ll(0, 1)), 30.0);
        assert_eq!(offset_deg(0, VoltagePair::Ll(1, 2)), -90.0);
        assert_eq!(offset_deg(0, VoltagePair::Ll(2, 0)), 150.0);
        assert_eq!(offset_deg(0, VoltagePair::Ll(0, 2)), -30.0);
        // I_b with U_ca is the "90° connection" of phase b, as I_a with U_bc.
        assert_eq!(offset_deg(1, VoltagePair::Ll(2, 0)), -90.0);
        assert!((VoltagePair::Ll(0, 1).nominal().norm() - 3f64.sqrt()).abs() < 1e-12);
    }

    #[test]
    fn pairs_read_and_write() {
        assert_eq!(VoltagePair::parse("BC"), Some(VoltagePair::Ll(1, 2)));
        assert_eq!(VoltagePair::parse("an"), Some(VoltagePair::Ln(0)));
        assert_eq!(VoltagePair::parse("aa"), None);
        assert_eq!(VoltagePair::parse("abc"), None);
        assert_eq!(VoltagePair::Ll(2, 0).label(), "ca");
    }

    /// A balanced bus at 230 V and 10 kW + j5 kvar on every phase.
    fn balanced() -> ([Complex64; 3], [Complex64; 3]) {
        let v = [0.0, -120.0, 120.0].map(|d| Complex64::from_polar(230.0, f64::to_radians(d)));
        (v, [Complex64::new(10.0, 5.0); 3])
    }

    // Wired as assumed on a balanced bus, every voltage input gives the phase's own power.
    #[test]
    fn right_wiring_reads_the_phase() {
        let (v, s) = balanced();
        for pair in VoltagePair::Ln(0)
            .same_kind()
            .into_iter()
            .chain(VoltagePair::Ll(0, 1).same_kind())
        {
            for x in 0..3 {
                let ch = Channel {
                    current: x,
                    reversed: false,
                    voltage: pair,
                };
                let m = ch.measure(ch.correction(), &v, &s);
                assert!((m - s[x]).norm() < 1e-9, "{pair:?} {x}: {m}");
            }
        }
    }

    // Hand derivation, balanced load S = P + jQ per phase, controller set for I_a with
    // U_an: a reversed current transformer reads −S (it sees export and a leading load);
    // the current of phase b with U_an reads S·(V_a/V_b) = S·1∠120°, so
    // P' = P·cos120° − Q·sin120°, Q' = P·sin120° + Q·cos120°.
    #[test]
    fn miswired_single_channel_by_hand() {
        let (v, s) = balanced();
        let a = Channel::phase(0);
        let rev = Channel {
            reversed: true,
            ..a
        };
        assert!((rev.measure(a.correction(), &v, &s) + s[0]).norm() < 1e-9);
        let b = Channel { current: 1, ..a };
        let m = b.measure(a.correction(), &v, &s);
        let (c, sn) = (f64::cos(120f64.to_radians()), f64::sin(120f64.to_radians()));
        assert!((m.re - (10.0 * c - 5.0 * sn)).abs() < 1e-9);
        assert!((m.im - (10.0 * sn + 5.0 * c)).abs() < 1e-9);
    }

    #[test]
    fn miswirings_are_distinct_and_never_the_assumption() {
        for w in [
            Wiring::new(&[Channel::phase(0)]),
            Wiring::new(&[Channel {
                current: 0,
                reversed: false,
                voltage: VoltagePair::Ll(1, 2),
            }]),
            Wiring::new(&[Channel::phase(0), Channel::phase(1), Channel::phase(2)]),
        ] {
            let all = w.miswirings();
            let mut sorted = all.clone();
            sorted.sort();
            sorted.dedup();
            assert_eq!(sorted.len(), all.len());
            assert!(all.iter().all(|m| m[..w.n] != w.assumed[..w.n]));
        }
        assert_eq!(Wiring::new(&[Channel::phase(0)]).miswirings().len(), 7);
        assert_eq!(
            Wiring::new(&[Channel::phase(0), Channel::phase(1), Channel::phase(2)])
                .miswirings()
                .len(),
            9
        );
    }
}
