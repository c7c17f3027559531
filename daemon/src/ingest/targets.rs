//! What the daemon estimates between run-ups, and the estimator each target gets.
//!
//! A measured critical with a good fit is estimated from the lag (and amplitude) of the 1X vector
//! against its model ([`Estimator`]). A critical known only from the configuration (design,
//! shop test) with an AF is estimated from the slope of the lag against the small wander of the
//! running speed ([`SlopeEstimator`]), which needs no run-up: only the damping ratio, taken as
//! `1/(2·AF)` (API RP 684's AF of a single mode, `AF ≈ 1/(2ζ)`), and which side of the running
//! speed the critical lies on. The slope estimate is dropped on a channel once a run-up there has
//! measured a critical near it: the model's estimate is far more precise.

use super::models::{model_form, TrackedModel, DAMPING_MODEL_PCT, SAME_MODE_PCT};
use crate::config::model::Machine;
use veer_tracker::drift::{Estimate, Estimator, EstimatorConfig, SlopeConfig, SlopeEstimator};
use veer_tracker::margin::{actual_margin_pct, Side};
use veer_tracker::units::Unit;
use veer_tracker::Complex64;

/// Length of a slope window, s: it must hold several cycles of the speed's wander.
const SLOPE_WINDOW_S: f64 = 600.0;

/// A configured critical estimated on one channel from the slope of the lag.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct DesignTrack {
    /// Channel.
    pub channel: String,
    /// Its number in the configuration's list (1 for the first): its mode in the critical table.
    pub mode: u32,
    /// The key of the known critical (`design-1`, `shop-test-2`, ...).
    pub name: String,
    /// Its configured speed, r/min.
    pub rpm: f64,
    /// Its AF.
    pub af: f64,
    /// Whether the machine runs below it.
    pub below_critical: bool,
}

impl DesignTrack {
    /// Damping ratio from the AF of a single mode, `ζ = 1/(2·AF)` (API RP 684; common practice).
    pub fn damping_ratio(&self) -> f64 {
        0.5 / self.af
    }

    /// The critical (amplitude peak) over the natural speed, `1/√(1 − 2ζ²)` (Rao §3.7).
    pub fn critical_factor(&self) -> f64 {
        let z = self.damping_ratio();
        1.0 / (1.0 - 2.0 * z * z).max(1e-6).sqrt()
    }
}

/// The configured criticals of `machine` that can be estimated by the slope on each sensor:
/// those with an AF above 1 (so that `ζ < 0.5`) and outside the operating range.
pub(crate) fn design_tracks(machine: &Machine) -> Vec<DesignTrack> {
    let range = machine.operating_range();
    let mut out = Vec::new();
    for s in &machine.sensors {
        for (i, c) in machine.criticals.iter().enumerate() {
            let Some(af) = c.af.filter(|a| a.is_finite() && *a > 1.0) else {
                continue;
            };
            let (side, _) = actual_margin_pct(c.rpm, &range);
            if side == Side::Inside {
                continue;
            }
            out.push(DesignTrack {
                channel: s.channel.clone(),
                mode: i as u32 + 1,
                name: format!("{}-{}", c.origin.name(), i + 1),
                rpm: c.rpm,
                af,
                below_critical: side == Side::Above,
            });
        }
    }
    out
}

/// The one configured critical among `designs` that the measured model `m` stands for: on its
/// channel, the nearest in speed within [`SAME_MODE_PCT`].
pub(crate) fn design_for<'a>(
    designs: impl IntoIterator<Item = &'a DesignTrack>,
    m: &TrackedModel,
) -> Option<&'a DesignTrack> {
    designs
        .into_iter()
        .filter(|d| d.channel == m.channel && m.distance_pct(d.rpm) <= SAME_MODE_PCT)
        .min_by(|a, b| m.distance_pct(a.rpm).total_cmp(&m.distance_pct(b.rpm)))
}

/// What an estimate is about.
#[derive(Clone, Debug, PartialEq)]
pub(crate) enum Target {
    /// A measured critical and its model.
    Model(TrackedModel),
    /// A configured critical, by the slope.
    Design(DesignTrack),
}

impl Target {
    /// Channel of the vectors.
    pub fn channel(&self) -> &str {
        match self {
            Target::Model(m) => &m.channel,
            Target::Design(d) => &d.channel,
        }
    }

    /// The key its alerts carry: `channel:mode` for a measured critical, `channel:design-1` for
    /// a configured one.
    pub fn key(&self) -> String {
        match self {
            Target::Model(m) => m.key(),
            Target::Design(d) => format!("{}:{}", d.channel, d.name),
        }
    }

    /// Critical speed over natural speed.
    pub fn critical_factor(&self) -> f64 {
        match self {
            Target::Model(m) => m.critical_factor(),
            Target::Design(d) => d.critical_factor(),
        }
    }

    /// The critical's speed as known before the estimates, r/min.
    pub fn critical_rpm(&self) -> f64 {
        match self {
            Target::Model(m) => m.critical_rpm,
            Target::Design(d) => d.rpm,
        }
    }

    /// Its AF.
    pub fn af(&self) -> Option<f64> {
        match self {
            Target::Model(m) => m.af,
            Target::Design(d) => Some(d.af),
        }
    }

    /// The 1X vector its model predicts at `rpm` (zero for a configured critical: no model).
    pub fn expected(&self, rpm: f64) -> Complex64 {
        match self {
            Target::Model(m) => m.model.predict(rpm),
            Target::Design(_) => Complex64::new(0.0, 0.0),
        }
    }

    /// Whether a measured model `m` continues this target: the same track.
    pub fn continued_by(&self, m: &TrackedModel) -> bool {
        matches!(self, Target::Model(t) if t.track == m.track)
    }
}

/// The estimator of a target.
#[derive(Clone, Debug)]
enum Method {
    Model(Box<Estimator>),
    Slope(Box<SlopeEstimator>),
}

/// A target and its live estimator, fed the 1X vector of every steady revolution of its channel.
#[derive(Clone, Debug)]
pub(crate) struct Tracker {
    pub target: Target,
    /// Index of the channel among the runner's channels.
    pub channel_index: usize,
    method: Method,
}

impl Tracker {
    /// A tracker of `target` on channel `channel_index`, with model windows of `window_s`.
    pub fn new(target: Target, channel_index: usize, window_s: f64) -> Option<Self> {
        let method = match &target {
            Target::Model(m) => {
                let cfg = EstimatorConfig {
                    window_s,
                    damping_model_pct: DAMPING_MODEL_PCT,
                    ..EstimatorConfig::default()
                };
                Method::Model(Box::new(Estimator::new(m.model.clone(), cfg).ok()?))
            }
            Target::Design(d) => {
                let cfg = SlopeConfig {
                    window_s: SLOPE_WINDOW_S.max(window_s),
                    damping_ratio: d.damping_ratio(),
                    below_critical: d.below_critical,
                    ..SlopeConfig::default()
                };
                Method::Slope(Box::new(SlopeEstimator::new(cfg).ok()?))
            }
        };
        Some(Self {
            target,
            channel_index,
            method,
        })
    }

    /// A revolution's raw 1X vector of a channel in `unit` as this tracker takes it: a model
    /// in the model's form ([`model_form`]); the slope as it is, since turning velocity into
    /// displacement adds a constant 90° to the lag, which its slope does not see.
    pub fn vector_form(&self, v: Complex64, unit: Unit, rpm: f64) -> Option<Complex64> {
        match self.method {
            Method::Model(_) => model_form(v, unit, rpm),
            Method::Slope(_) => Some(v),
        }
    }

    /// One steady revolution (time unix s, speed r/min, 1X vector in [`Self::vector_form`]).
    pub fn push(&mut self, time_s: f64, rpm: f64, v: Complex64) -> Option<Estimate> {
        match &mut self.method {
            Method::Model(e) => e.push(time_s, rpm, v),
            Method::Slope(e) => e.push(time_s, rpm, v).map(|s| s.to_estimate()),
        }
    }

    /// Drops the window in progress (the speed left steady state, or the tach was lost).
    pub fn reset(&mut self) {
        match &mut self.method {
            Method::Model(e) => e.reset(),
            Method::Slope(e) => e.reset(),
        }
    }
}
