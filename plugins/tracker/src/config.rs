//! The engine's configuration: one plain struct with a default for every stage, validated before
//! anything runs, and printable so that a report can say exactly how its numbers were made.

use crate::margin::{MarginRule, OperatingRange};
use crate::resonance::ResonanceConfig;
use crate::spectrum::OrderMapConfig;
use crate::states::StateConfig;
use crate::tach::TachConfig;
use crate::units::Amplitude;
use crate::vectors::VectorConfig;
use std::fmt;
use thiserror::Error;

/// One vibration channel.
#[derive(Clone, Debug, PartialEq)]
pub struct ChannelConfig {
    /// The channel's name, as in the recording's header or configuration.
    pub name: String,
    /// Engineering unit of the samples (after `scale`) and how amplitudes are stated.
    pub amplitude: Amplitude,
    /// Engineering units per input unit (e.g. 1000/7.87 µm per V for a 7.87 mV/µm probe).
    pub scale: f64,
    /// Mounting angle of the sensor, degrees in the direction of rotation from the reference mark
    /// (kept for reports; the phase is measured as it is).
    pub angle_deg: f64,
}

/// Where the slow-roll (runout) vector comes from.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum SlowRoll {
    /// From the lowest steady speeds of each event (see [`crate::engine`]).
    Auto,
    /// From the revolutions whose speed lies in this window, r/min.
    Window {
        /// Lowest speed of the window.
        min_rpm: f64,
        /// Highest speed of the window.
        max_rpm: f64,
    },
    /// No compensation.
    Off,
}

/// The margin rule and operating range used to judge each critical.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MarginSettings {
    /// The rule that gives the required margin.
    pub rule: MarginRule,
    /// Minimum operating speed to maximum continuous speed.
    pub range: OperatingRange,
    /// Points before the required margin at which a warning is given.
    pub warn_band_pct: f64,
}

/// Everything the engine needs to know.
#[derive(Clone, Debug)]
pub struct EngineConfig {
    /// Tach decoding and the plausible speed window.
    pub tach: TachConfig,
    /// The vibration channels.
    pub channels: Vec<ChannelConfig>,
    /// nX orders and revolutions per vector.
    pub vectors: VectorConfig,
    /// Order-map settings, or `None` to skip order spectra.
    pub order_map: Option<OrderMapConfig>,
    /// Machine-state detection.
    pub states: StateConfig,
    /// Resonance identification.
    pub resonance: ResonanceConfig,
    /// Slow-roll compensation.
    pub slow_roll: SlowRoll,
    /// Width of the speed bins an event's response is kept in, percent of speed. Small enough to
    /// resolve a sharp critical (AF 25 has a half-power band of 4 %), large enough to bound memory.
    pub bin_pct: f64,
    /// Smallest sweep, as a share of its top speed, that makes an event.
    pub min_sweep_share: f64,
    /// Most order-map rows kept per event and channel; beyond it neighbouring rows are merged.
    pub max_map_rows: usize,
    /// Speed change between order-map rows, percent: rows are taken by speed step on sweeps.
    pub map_step_pct: f64,
    /// Time between order-map rows at steady speed, s.
    pub map_interval_s: f64,
    /// Margin rule and operating range, if known.
    pub margins: Option<MarginSettings>,
}

impl Default for EngineConfig {
    fn default() -> Self {
        Self {
            tach: TachConfig::default(),
            channels: Vec::new(),
            vectors: VectorConfig::default(),
            order_map: Some(OrderMapConfig::default()),
            states: StateConfig::default(),
            resonance: ResonanceConfig::default(),
            slow_roll: SlowRoll::Auto,
            bin_pct: 0.2,
            min_sweep_share: 0.3,
            max_map_rows: 1024,
            map_step_pct: 1.0,
            map_interval_s: 10.0,
            margins: None,
        }
    }
}

/// A configuration that cannot work, naming the stage and field.
#[derive(Debug, Error)]
#[non_exhaustive]
pub enum ConfigError {
    /// A tach setting.
    #[error(transparent)]
    Tach(#[from] crate::tach::TachError),
    /// A vector setting.
    #[error(transparent)]
    Vectors(#[from] crate::vectors::VectorError),
    /// A state setting.
    #[error(transparent)]
    States(#[from] crate::states::StateError),
    /// An order-map setting.
    #[error(transparent)]
    OrderMap(#[from] crate::spectrum::SpectrumError),
    /// A margin setting.
    #[error(transparent)]
    Margin(#[from] crate::margin::MarginError),
    /// Any other setting.
    #[error("setting `{field}`: {reason}")]
    Invalid {
        /// Name of the setting.
        field: String,
        /// Why it was refused.
        reason: String,
    },
}

fn invalid(field: impl Into<String>, reason: impl Into<String>) -> ConfigError {
    ConfigError::Invalid {
        field: field.into(),
        reason: reason.into(),
    }
}

impl EngineConfig {
    /// Checks every stage, naming the first bad setting.
    pub fn validate(&self) -> Result<(), ConfigError> {
        self.tach.validate()?;
        self.vectors.validate()?;
        self.states.validate()?;
        if let Some(m) = &self.order_map {
            m.validate()?;
        }
        if let Err(e) = self.resonance.validate() {
            return Err(invalid("resonance", e.to_string()));
        }
        if self.channels.is_empty() {
            return Err(invalid(
                "channels",
                "at least one vibration channel is needed",
            ));
        }
        for (i, c) in self.channels.iter().enumerate() {
            if c.name.trim().is_empty() {
                return Err(invalid(format!("channels[{i}].name"), "must not be empty"));
            }
            if !(c.scale.is_finite() && c.scale != 0.0) {
                return Err(invalid(
                    format!("channels[{i}].scale"),
                    "must be a finite, non-zero factor",
                ));
            }
        }
        if let SlowRoll::Window { min_rpm, max_rpm } = self.slow_roll {
            if !(min_rpm >= 0.0 && max_rpm > min_rpm) {
                return Err(invalid("slow_roll", "window needs 0 ≤ min_rpm < max_rpm"));
            }
        }
        if !(self.bin_pct > 0.0 && self.bin_pct <= 5.0) {
            return Err(invalid("bin_pct", "must be between 0 and 5 percent"));
        }
        if !(self.min_sweep_share > 0.0 && self.min_sweep_share < 1.0) {
            return Err(invalid("min_sweep_share", "must be between 0 and 1"));
        }
        if !(self.map_step_pct > 0.0 && self.map_step_pct <= 50.0) {
            return Err(invalid("map_step_pct", "must be between 0 and 50 percent"));
        }
        if !(self.map_interval_s > 0.0) {
            return Err(invalid("map_interval_s", "must be positive"));
        }
        if self.max_map_rows < 2 {
            return Err(invalid("max_map_rows", "must be at least 2"));
        }
        if let Some(m) = &self.margins {
            m.range.validate()?;
            if !(m.warn_band_pct >= 0.0 && m.warn_band_pct < 50.0) {
                return Err(invalid("warn_band_pct", "must be between 0 and 50 points"));
            }
        }
        Ok(())
    }
}

impl fmt::Display for EngineConfig {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let t = &self.tach;
        writeln!(
            f,
            "tach: {} pulse(s)/rev, gap {} teeth, {:?} edge, levels {}, speeds {}-{} r/min",
            t.ppr,
            t.gap_teeth,
            t.edge,
            match t.levels {
                Some(l) => format!("trigger {} rearm {}", l.trigger, l.rearm),
                None => "learnt".to_string(),
            },
            t.min_rpm,
            t.max_rpm
        )?;
        for c in &self.channels {
            writeln!(
                f,
                "channel {}: {} (scale {}, at {}°)",
                c.name, c.amplitude, c.scale, c.angle_deg
            )?;
        }
        let orders: Vec<String> = self
            .vectors
            .orders
            .iter()
            .map(|n| format!("{n}X"))
            .collect();
        writeln!(
            f,
            "vectors: {} over {} rev(s); speed bins {} %",
            orders.join(" "),
            self.vectors.revs_per_vector,
            self.bin_pct
        )?;
        match &self.order_map {
            Some(m) => writeln!(
                f,
                "order map: {} samples/rev, {} revs/block, orders to {}, a row every {} % of speed or {} s",
                m.samples_per_rev, m.revs_per_block, m.max_order, self.map_step_pct, self.map_interval_s
            )?,
            None => writeln!(f, "order map: off")?,
        }
        writeln!(
            f,
            "slow roll: {}",
            match self.slow_roll {
                SlowRoll::Auto => "auto (lowest steady speeds of each event)".to_string(),
                SlowRoll::Window { min_rpm, max_rpm } => format!("{min_rpm}-{max_rpm} r/min"),
                SlowRoll::Off => "off".to_string(),
            }
        )?;
        if let Some(m) = &self.margins {
            writeln!(
                f,
                "margins: rule {}, operating range {}-{} r/min, warning band {} points",
                m.rule.name(),
                m.range.min_rpm,
                m.range.max_rpm,
                m.warn_band_pct
            )?;
        }
        Ok(())
    }
}
