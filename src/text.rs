//! Quantities in words: numbers with thousands separators, shares, durations, years,
//! step sets and harmonic orders, written the same way in every finding and report.
//! Findings (in [`crate::analysis`]) and report writers (in [`crate::report`]) both use
//! these, so a figure reads the same wherever it appears.

/// Inserts thousands separators into the integer part of a formatted number.
fn group(text: &str) -> String {
    let (sign, rest) = match text.strip_prefix('-') {
        Some(r) => ("-", r),
        None => ("", text),
    };
    let (int, frac) = match rest.find('.') {
        Some(i) => rest.split_at(i),
        None => (rest, ""),
    };
    let mut out = String::with_capacity(text.len() + int.len() / 3);
    out.push_str(sign);
    for (i, c) in int.chars().enumerate() {
        if i > 0 && (int.len() - i) % 3 == 0 {
            out.push(',');
        }
        out.push(c);
    }
    out.push_str(frac);
    out
}

/// A number with `decimals` decimals and thousands separators, e.g. `12,345.6`.
pub fn num(x: f64, decimals: usize) -> String {
    if !x.is_finite() {
        return "n/a".to_string();
    }
    let s = format!("{x:.decimals$}");
    // Avoid printing `-0.0`.
    let s = if s.starts_with('-') && s[1..].chars().all(|c| c == '0' || c == '.') {
        s[1..].to_string()
    } else {
        s
    };
    group(&s)
}

/// A count with thousands separators, e.g. `100,000`.
pub fn count(n: u64) -> String {
    group(&n.to_string())
}

/// An extrapolated quantity rounded to three significant figures, e.g. `47,600` or `2.13`.
pub fn approx(x: f64) -> String {
    if !x.is_finite() {
        return "n/a".to_string();
    }
    let a = x.abs();
    if a == 0.0 {
        "0".to_string()
    } else if a >= 1000.0 {
        let mag = 10f64.powi(a.log10().floor() as i32 - 2);
        num((x / mag).round() * mag, 0)
    } else if a >= 100.0 {
        num(x, 0)
    } else if a >= 10.0 {
        num(x, 1)
    } else {
        num(x, 2)
    }
}

/// Years to a rated life: one decimal below 10 years, else three significant figures.
pub fn years_text(y: f64) -> String {
    if y < 10.0 {
        num(y, 1)
    } else {
        approx(y)
    }
}

/// A share of run time (0..1) as a percentage with its unit, e.g. `38 %` or `4.2 %`.
pub fn pct(share: f64) -> String {
    let p = share * 100.0;
    if p == 0.0 {
        "0 %".to_string()
    } else if p < 10.0 {
        format!("{} %", num(p, 1))
    } else {
        format!("{} %", num(p, 0))
    }
}

/// A duration in words with its unit: `45 s`, `41 min`, `3.5 h`, `31 h`, `2.5 days`.
pub fn duration(s: f64) -> String {
    if !s.is_finite() {
        "n/a".to_string()
    } else if s < 120.0 {
        format!("{} s", num(s, 0))
    } else if s < 7200.0 {
        format!("{} min", num(s / 60.0, 0))
    } else if s < 36_000.0 {
        format!("{} h", num(s / 3600.0, 1))
    } else if s < 3.0 * 86_400.0 {
        format!("{} h", num(s / 3600.0, 0))
    } else {
        format!("{} days", num(s / 86_400.0, 1))
    }
}

/// The controller's protections in words, `; `-separated (`none` when none is set):
/// "overvoltage above 440 V after 5 s; at most 20 operations per hour".
pub fn protections(p: &crate::controller::ProtectionParams) -> String {
    let mut prot = Vec::new();
    if let Some(v) = p.overvoltage_v {
        prot.push(format!(
            "overvoltage above {} V after {}",
            num(v, 0),
            duration(p.overvoltage_delay_s)
        ));
    }
    if let Some(a) = p.min_current_a {
        prot.push(format!(
            "loss of current below {} A after {}",
            num(a, 1),
            duration(p.min_current_delay_s)
        ));
    }
    if p.trip_on_export {
        prot.push(format!("export after {}", duration(p.export_delay_s)));
    }
    if let Some(x) = p.thd_limit_pct {
        prot.push(format!(
            "voltage THD above {} % after {}",
            num(x, 1),
            duration(p.thd_delay_s)
        ));
    }
    if let Some(n) = p.max_operations_per_hour {
        prot.push(format!("at most {n} operations per hour"));
    }
    if prot.is_empty() {
        "none".to_string()
    } else {
        prot.join("; ")
    }
}

/// A set of step numbers joined by `+`, e.g. `1+2+3`; `none` for the empty set.
pub fn steps_label(steps: &[usize]) -> String {
    join_steps(steps.iter().copied())
}

/// Step numbers joined by `+` in the order given, e.g. `1+2+3`; `none` when there are none.
pub fn join_steps(steps: impl IntoIterator<Item = usize>) -> String {
    let mut s = String::new();
    for (i, n) in steps.into_iter().enumerate() {
        if i > 0 {
            s.push('+');
        }
        s.push_str(&n.to_string());
    }
    if s.is_empty() {
        s.push_str("none");
    }
    s
}

/// A harmonic order in words: `5th`, `11th`, `23rd`; a non-integer order as `order 4.5`.
pub fn harmonic_name(h: f64) -> String {
    let r = h.round();
    if (h - r).abs() > 1e-9 || r < 1.0 {
        return format!("order {} harmonic", num(h, 1));
    }
    let n = r as u64;
    let suffix = match (n % 10, n % 100) {
        (_, 11..=13) => "th",
        (1, _) => "st",
        (2, _) => "nd",
        (3, _) => "rd",
        _ => "th",
    };
    format!("{n}{suffix} harmonic")
}

/// `value` with `decimals` decimals, or with as many more (up to 6) as it takes not to read
/// as `limit` when it is not equal to it: near a limit, the digits that decide it are shown
/// (7.985 against 8 reads `7.99`, 0.9498 against 0.95 reads `0.9498`).
pub fn deciding(value: f64, limit: f64, decimals: usize) -> String {
    let mut d = decimals;
    loop {
        let shown = format!("{value:.d$}");
        let reads_as_limit = shown.parse::<f64>().is_ok_and(|x| x == limit);
        if !reads_as_limit || value == limit || d >= 6 {
            return num(value, d);
        }
        d += 1;
    }
}

/// A percentage beside its limit, with the digits that decide it: `7.99 % (limit 8.0 %)`.
pub fn pct_vs_limit(value: f64, limit: f64, decimals: usize) -> String {
    format!(
        "{} % (limit {} %)",
        deciding(value, limit, decimals),
        num(limit, decimals)
    )
}

/// A PF with its quadrant, with the digits needed to tell it from `target` (two decimals
/// unless more are needed): `0.9498 lag` against a 0.95 target, `0.93 lag` otherwise.
pub fn pf_vs(value: f64, quadrant: crate::pf::Quadrant, target: f64) -> String {
    let shown = deciding(value, target, 2);
    if shown == "1.00" && value == 1.0 {
        shown
    } else {
        format!("{shown} {}", quadrant.word())
    }
}

/// Items joined as a reader lists them: `a`, `a and b`, `a, b and c`.
pub fn join_and(items: &[String]) -> String {
    match items.len() {
        0 => String::new(),
        1 => items[0].clone(),
        n => format!("{} and {}", items[..n - 1].join(", "), items[n - 1]),
    }
}

/// The word for a protection trip in the `operation` column.
pub fn trip_word(t: crate::controller::Trip) -> &'static str {
    match t {
        crate::controller::Trip::Overvoltage => "overvoltage",
        crate::controller::Trip::LossOfCurrent => "loss-of-current",
        crate::controller::Trip::Export => "export",
        crate::controller::Trip::Distortion => "distortion",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn near_a_limit_the_deciding_digits_show() {
        assert_eq!(deciding(7.985, 8.0, 1), "7.99");
        assert_eq!(deciding(7.5, 8.0, 1), "7.5");
        assert_eq!(deciding(8.0, 8.0, 1), "8.0");
        assert_eq!(pct_vs_limit(7.985, 8.0, 1), "7.99 % (limit 8.0 %)");
        assert_eq!(pf_vs(0.9498, crate::pf::Quadrant::Lag, 0.95), "0.9498 lag");
        assert_eq!(pf_vs(0.93, crate::pf::Quadrant::Lag, 0.95), "0.93 lag");
        assert_eq!(pf_vs(0.95, crate::pf::Quadrant::Lag, 0.95), "0.95 lag");
    }

    #[test]
    fn numbers_have_separators_and_units() {
        assert_eq!(count(100_000), "100,000");
        assert_eq!(count(12), "12");
        assert_eq!(num(1234.56, 1), "1,234.6");
        assert_eq!(num(-0.01, 1), "0.0");
        assert_eq!(num(-1234.0, 0), "-1,234");
        assert_eq!(approx(47_632.0), "47,600");
        assert_eq!(approx(2.134), "2.13");
        assert_eq!(pct(0.38), "38 %");
        assert_eq!(pct(0.042), "4.2 %");
        assert_eq!(duration(45.0), "45 s");
        assert_eq!(duration(41.0 * 60.0), "41 min");
        assert_eq!(duration(31.0 * 3600.0), "31 h");
        assert_eq!(duration(3.0 * 86_400.0), "3.0 days");
        assert_eq!(steps_label(&[1, 2, 3]), "1+2+3");
        assert_eq!(steps_label(&[]), "none");
        assert_eq!(harmonic_name(5.0), "5th harmonic");
        assert_eq!(harmonic_name(23.0), "23rd harmonic");
        assert_eq!(harmonic_name(11.0), "11th harmonic");
        assert_eq!(harmonic_name(4.5), "order 4.5 harmonic");
    }
}
