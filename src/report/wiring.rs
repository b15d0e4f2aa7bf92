//! The wiring check as text: one row per wiring of the configured measurement (the
//! assumed wiring first), with the billed PF and its quadrant, the operations, the
//! overcorrected time of the supply and of the worst phase, and the symptom in words.

use crate::analysis::wiring::WiringRow;
use crate::study::Study;
use crate::text::{count, duration, pf_vs};
use std::io::Write;

/// Writes the wiring-check table of `study` for `rows` (from
/// [`crate::analysis::wiring::wiring_check`]).
pub fn write_text(study: &Study, rows: &[WiringRow], out: &mut dyn Write) -> std::io::Result<()> {
    let c = &study.scenario.controller;
    let goal = crate::analysis::findings::billed_goal(c.target);
    let mut t = String::new();
    t.push_str("Wiring check\n------------\n");
    let w = c.wiring();
    let assumed: Vec<String> = w.assumed[..w.n].iter().map(|ch| ch.label()).collect();
    t.push_str(&format!(
        "  The {} measurement ({}) wired as the controller assumes,\n  then each plausible \
         slip in its wiring, on the same load ({} target).\n",
        c.measurement_label(),
        assumed.join(", "),
        c.target
    ));
    let body: Vec<Vec<String>> = rows
        .iter()
        .map(|r| {
            vec![
                r.wiring.clone(),
                pf_vs(r.billed_pf, r.billed_pf_quadrant, goal),
                count(r.operations),
                duration(r.overcorrected_s),
                duration(r.worst_phase_overcorrected_s),
                r.symptom.clone(),
            ]
        })
        .collect();
    super::table(
        &mut t,
        "    ",
        &[
            "wiring",
            "billed PF",
            "operations",
            "overcorrected",
            "worst phase overcorrected",
            "the controller",
        ],
        "lrrrrl",
        &body,
    );
    out.write_all(t.as_bytes())
}
