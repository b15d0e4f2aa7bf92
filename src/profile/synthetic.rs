//! Seeded synthetic load generator (stand-in until the generator lands).

use crate::error::{FieldError, ProfileError};
use crate::profile::{LoadSample, LoadSource};
use crate::timebase::Calendar;
use serde::{Deserialize, Serialize};

/// Generator settings.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
pub struct SyntheticConfig {
    /// Base load, kW.
    #[serde(default)]
    pub base_kw: f64,
}

impl SyntheticConfig {
    /// Checks ranges.
    pub fn validate(&self, _prefix: &str) -> Result<(), FieldError> {
        Ok(())
    }
}

/// The generator.
pub struct SyntheticProfile {
    p: f64,
}

impl SyntheticProfile {
    /// Builds the generator.
    pub fn new(
        cfg: &SyntheticConfig,
        _seed: u64,
        _calendar: Calendar,
        _t_first_s: f64,
        _dt_s: f64,
    ) -> Self {
        SyntheticProfile { p: cfg.base_kw }
    }
}

impl LoadSource for SyntheticProfile {
    fn sample(&mut self, _k: u64, _t_s: f64, out: &mut LoadSample) -> Result<(), ProfileError> {
        out.p_kw = [self.p / 3.0; 3];
        out.q_kvar = [self.p / 6.0; 3];
        Ok(())
    }
}
