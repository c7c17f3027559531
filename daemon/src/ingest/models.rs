//! The measured criticals the daemon tracks between run-ups, each with the single-mode model its
//! event fitted.
//!
//! A model comes from a run-up or coast-down whose resonance fit was good; it is stored with its
//! critical so that the estimates resume after a restart. Each (channel, mode) has one model in
//! force, the latest; a new event replaces it and restarts its estimator.

use super::convert::polar;
use veer_storage::{CriticalRow, ModelRow, Polar, Stored};
use veer_tracker::drift::CriticalModel;
use veer_tracker::engine::Event;
use veer_tracker::{from_amp_lag, Complex64};

/// A fit whose rms residual exceeds this share of its peak does not describe its mode well enough
/// to be inverted: the same bound the resonance analysis uses to prefer a fit over the half-power
/// figures.
const MAX_FIT_RESIDUAL: f64 = 0.1;

/// How well a run-up's fit knows the damping ratio, percent: its error biases the lag's inversion
/// by `(1 − r²)/(1 + r²)` times as much (see `docs/critical-estimate.md`), a systematic part of
/// each estimate's uncertainty that averaging cannot remove. The simulated fan's fits land within
/// 2.3 % of its damping ratio (run-up 0.0758 and coast-down 0.0788 against 0.077); without this
/// term the estimates' errors were some six times their stated σ.
pub(crate) const DAMPING_MODEL_PCT: f64 = 3.0;

/// One measured critical with its fitted model.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct TrackedModel {
    /// Channel the critical was found on.
    pub channel: String,
    /// Its mode number on that channel (1 for the lowest).
    pub mode: u32,
    /// End of its event, unix s: with channel and mode, it names the stored critical row.
    pub valid_from: f64,
    /// The critical speed the event measured (the 1X amplitude peak), r/min.
    pub critical_rpm: f64,
    /// The event's AF, if measured.
    pub af: Option<f64>,
    /// The fitted single-mode model.
    pub model: CriticalModel,
    /// The fit's rms residual over its peak.
    pub fit_residual: Option<f64>,
}

impl TrackedModel {
    /// The key alerts of this critical's estimates carry: `channel:mode`.
    pub fn key(&self) -> String {
        format!("{}:{}", self.channel, self.mode)
    }

    /// The measured critical over the fitted natural speed: estimates of the natural speed are
    /// scaled by it, so an estimate with no drift reads the event's own critical.
    pub fn critical_factor(&self) -> f64 {
        self.critical_rpm / self.model.natural_rpm
    }

    /// The model as stored beside critical row `critical_id`.
    pub fn row(&self, critical_id: i64) -> ModelRow {
        ModelRow {
            critical_id,
            natural_rpm: self.model.natural_rpm,
            damping_ratio: self.model.damping_ratio,
            modal: polar(self.model.modal_vector),
            background: polar(self.model.background),
            slow_roll: polar(self.model.slow_roll),
            fit_residual: self.fit_residual,
        }
    }

    /// A model read back from storage; `None` when the stored figures cannot be inverted.
    pub fn from_stored(c: &Stored<CriticalRow>, m: &ModelRow) -> Option<Self> {
        let v = |p: Polar| from_amp_lag(p.amplitude, p.phase_deg);
        let model = CriticalModel {
            natural_rpm: m.natural_rpm,
            damping_ratio: m.damping_ratio,
            modal_vector: v(m.modal),
            background: v(m.background),
            slow_roll: v(m.slow_roll),
        };
        model.validate().ok()?;
        Some(Self {
            channel: c.channel.clone()?,
            mode: c.mode,
            valid_from: c.valid_from,
            critical_rpm: c.speed_rpm,
            af: c.amplification_factor,
            model,
            fit_residual: m.fit_residual,
        })
    }
}

/// The models an event's good fits give, one per critical found: channel, mode as numbered in
/// the event's critical rows.
pub(crate) fn models_of(ev: &Event, t0_unix: f64) -> Vec<TrackedModel> {
    let mut out = Vec::new();
    for c in &ev.channels {
        let slow_roll = c.slow_roll.map_or(Complex64::new(0.0, 0.0), |s| s.vector);
        for (i, cr) in c.criticals.iter().enumerate() {
            let r = &cr.resonance;
            let Some(fit) = r.fit.as_ref() else { continue };
            if !(fit.rms_residual <= MAX_FIT_RESIDUAL) {
                continue;
            }
            let Ok(model) = CriticalModel::from_fit(fit, slow_roll) else {
                continue;
            };
            out.push(TrackedModel {
                channel: c.name.clone(),
                mode: i as u32 + 1,
                valid_from: t0_unix + ev.end_s,
                critical_rpm: r.speed_rpm,
                af: r.amplification_factor,
                model,
                fit_residual: Some(fit.rms_residual),
            });
        }
    }
    out
}
