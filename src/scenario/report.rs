//! Validation of `[report]`: billing windows, overcorrection threshold and shortest
//! episode, hunting window.

use super::check::range;
use super::schema::ReportSection;
use super::BillingWindows;
use crate::error::FieldError;

/// What `[report]` gives.
pub(super) struct ReportSettings {
    /// Billing windows.
    pub billing: BillingWindows,
    /// Overcorrection threshold, kvar.
    pub overcorrection_threshold_kvar: f64,
    /// Shortest overcorrection episode, s.
    pub overcorrection_min_s: f64,
    /// Hunting window, s.
    pub hunting_window_s: f64,
    /// Measure unbalance.
    pub unbalance: bool,
}

/// The report settings these keys describe; the defaults depend on the smallest switched
/// step (`smallest`, kvar) and the switching delay (`connect_delay_s`, s).
pub(super) fn report(
    rp: &ReportSection,
    smallest: f64,
    connect_delay_s: f64,
) -> Result<ReportSettings, FieldError> {
    let billing = match rp.billing_window.as_deref().unwrap_or("month") {
        "month" => BillingWindows::Month,
        "run" => BillingWindows::Run,
        other => {
            return Err(FieldError::new(
                "report.billing_window",
                format!("`{other}` is not a billing window; write `month` or `run`"),
            ))
        }
    };
    Ok(ReportSettings {
        billing,
        overcorrection_threshold_kvar: range(
            "report.overcorrection_threshold_kvar",
            rp.overcorrection_threshold_kvar.unwrap_or(smallest),
            0.0,
            1e6,
            "kvar",
        )?,
        overcorrection_min_s: range(
            "report.overcorrection_min_s",
            rp.overcorrection_min_s.unwrap_or(60.0),
            0.0,
            1e7,
            "s",
        )?,
        hunting_window_s: range(
            "report.hunting_window_s",
            rp.hunting_window_s.unwrap_or(10.0 * connect_delay_s),
            0.0,
            1e7,
            "s",
        )?,
        unbalance: rp.unbalance.unwrap_or(false),
    })
}
