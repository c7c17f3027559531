//! From a machine's configuration to the order-tracking engine's settings.

use super::error::ConfigError;
use super::key::KeyPath;
use super::model::Machine;
use veer_tracker::config::{
    ChannelConfig, ConfigError as EngineError, EngineConfig, MarginSettings,
};
use veer_tracker::margin::{MarginRule, OperatingRange};
use veer_tracker::spectrum::OrderMapConfig;
use veer_tracker::states::StateConfig;
use veer_tracker::vectors::VectorConfig;

/// Share of the minimum operating speed below which steady running counts as slow roll, when that
/// is lower than the engine's default limit: keeps a slow machine's normal running from being
/// taken for slow roll (common practice: slow roll is well below any operating speed).
const SLOW_ROLL_SHARE: f64 = 0.5;

impl Machine {
    /// The key path of this machine in its file, such as `machine[2] (fan-2)`.
    pub fn key(&self) -> KeyPath {
        KeyPath::machine(self.index, &self.id)
    }

    /// The speeds the machine runs at for long periods: minimum operating speed to MCS.
    pub fn operating_range(&self) -> OperatingRange {
        OperatingRange {
            min_rpm: self.min_operating_rpm,
            max_rpm: self.max_continuous_rpm,
        }
    }

    /// The separation-margin rule the machine is held to.
    pub fn margin_rule(&self) -> MarginRule {
        self.alerts.margin
    }

    /// The engine's settings for this machine, checked by the engine itself. A configuration that
    /// [`super::load`] accepted always gives `Ok`: loading runs the same check.
    pub fn engine_config(&self) -> Result<EngineConfig, ConfigError> {
        let defaults = EngineConfig::default();
        let state_defaults = StateConfig::default();
        let channels = self
            .sensors
            .iter()
            .map(|s| ChannelConfig {
                name: s.channel.clone(),
                amplitude: s.amplitude,
                scale: s.scale,
                angle_deg: s.angle_deg,
            })
            .collect();
        let cfg = EngineConfig {
            tach: self.tach.decoder.clone(),
            channels,
            vectors: VectorConfig {
                orders: self.tracking.orders.clone(),
                revs_per_vector: self.tracking.revs_per_vector,
            },
            order_map: self.tracking.order_map.then(OrderMapConfig::default),
            states: StateConfig {
                slow_roll_max_rpm: state_defaults
                    .slow_roll_max_rpm
                    .min(SLOW_ROLL_SHARE * self.min_operating_rpm),
                ..state_defaults
            },
            slow_roll: self.tracking.slow_roll,
            bin_pct: self.tracking.bin_pct,
            margins: Some(MarginSettings {
                rule: self.alerts.margin,
                range: self.operating_range(),
                warn_band_pct: self.alerts.warn_band_pct,
            }),
            ..defaults
        };
        cfg.validate().map_err(|e| self.engine_error(&e))?;
        Ok(cfg)
    }

    /// Places an error of the engine's own check under the key it most likely comes from. The
    /// file's checks run first and are stricter, so this is a safety net; the engine's message
    /// names its own field in any case.
    fn engine_error(&self, e: &EngineError) -> ConfigError {
        let key = self.key();
        let key = match e {
            EngineError::Tach(_) => key.key("tach"),
            EngineError::Vectors(_) | EngineError::States(_) => key.key("tracking"),
            EngineError::OrderMap(_) => key.key("tracking").key("order_map"),
            EngineError::Margin(_) => key.key("alerts"),
            EngineError::Invalid { field, .. } if field.starts_with("channels") => {
                key.key("sensors")
            }
            EngineError::Invalid { field, .. } if field == "warn_band_pct" => key.key("alerts"),
            _ => key.key("tracking"),
        };
        ConfigError::Invalid {
            file: self.file.clone(),
            key,
            reason: super::error::one_line(&e.to_string()),
        }
    }
}
