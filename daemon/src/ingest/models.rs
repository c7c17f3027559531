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
use veer_tracker::resonance::fit_mode;
use veer_tracker::units::{to_displacement_um, SensorKind, Unit};
use veer_tracker::{from_amp_lag, Complex64, ResponsePoint};

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

/// A critical this close to another (percent of its speed) on the same channel is taken to be the
/// same mode: the bound the shift rule also uses to match criticals.
pub(crate) const SAME_MODE_PCT: f64 = 25.0;

/// One measured critical with its fitted model.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct TrackedModel {
    /// The name its estimates and alerts go by (`x:1`), kept from model to model of one mode.
    pub track: String,
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
    /// The key alerts of this critical's estimates carry: its track.
    pub fn key(&self) -> String {
        self.track.clone()
    }

    /// Relative distance of this critical's speed from `rpm`, percent.
    pub fn distance_pct(&self, rpm: f64) -> f64 {
        ((self.critical_rpm - rpm) / rpm * 100.0).abs()
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
            track: self.track.clone(),
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
            track: m.track.clone(),
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

/// A 1X vector of a channel in `unit` at `rpm` in the form the model is made in: as it is for a
/// displacement channel, the displacement (µm peak) for a velocity or acceleration one, whose 1X
/// vector is jω (or −ω²) times the displacement's (standard identities; REFERENCES §7) and so
/// does not have the single-mode unbalance response's shape. `None` at zero speed.
pub(crate) fn model_form(v: Complex64, unit: Unit, rpm: f64) -> Option<Complex64> {
    match unit.kind() {
        SensorKind::Displacement => Some(v),
        SensorKind::Velocity | SensorKind::Acceleration => to_displacement_um(v, unit, 1.0, rpm),
    }
}

/// The models an event's good fits give, one per critical found: channel, mode as numbered in
/// the event's critical rows.
///
/// On a displacement channel the model is the event's own fit, on the slow-roll compensated
/// response. On a velocity or acceleration channel the response is first turned into the
/// displacement and fitted again (no slow roll is subtracted: a casing transducer sees no
/// runout), so that the model has the shape it assumes; the live vectors are turned the same way.
pub(crate) fn models_of(ev: &Event, t0_unix: f64) -> Vec<TrackedModel> {
    let mut out = Vec::new();
    for c in &ev.channels {
        let unit = c.amplitude.unit;
        let slow_roll = c.slow_roll.map_or(Complex64::new(0.0, 0.0), |s| s.vector);
        let converted: Option<Vec<ResponsePoint>> =
            (unit.kind() != SensorKind::Displacement).then(|| {
                c.response
                    .iter()
                    .filter_map(|p| {
                        model_form(p.vector, unit, p.speed_rpm)
                            .map(|vector| ResponsePoint { vector, ..*p })
                    })
                    .collect()
            });
        for (i, cr) in c.criticals.iter().enumerate() {
            let r = &cr.resonance;
            let (fit, sr) = match &converted {
                None => (r.fit.clone(), slow_roll),
                Some(points) => (
                    fit_mode(points, r.speed_rpm, r.damping_ratio.unwrap_or(0.05)),
                    Complex64::new(0.0, 0.0),
                ),
            };
            let Some(fit) = fit else { continue };
            if !(fit.rms_residual <= MAX_FIT_RESIDUAL) {
                continue;
            }
            let Ok(model) = CriticalModel::from_fit(&fit, sr) else {
                continue;
            };
            out.push(TrackedModel {
                track: format!("{}:{}", c.name, i + 1),
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

/// Gives each of an event's `new` models the track of the `current` model of the same mode: on
/// the same channel, nearest in critical speed within [`SAME_MODE_PCT`], each current model taken
/// by one new model at most (closest pairs first). A mode not tracked yet keeps `channel:mode`,
/// or the next free number on its channel if a remaining track has that name.
pub(crate) fn assign_tracks(current: &[TrackedModel], new: &mut [TrackedModel]) {
    let mut pairs: Vec<(f64, usize, usize)> = Vec::new();
    for (i, n) in new.iter().enumerate() {
        for (j, c) in current.iter().enumerate() {
            let d = c.distance_pct(n.critical_rpm);
            if c.channel == n.channel && d <= SAME_MODE_PCT {
                pairs.push((d, i, j));
            }
        }
    }
    pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut given: Vec<Option<String>> = vec![None; new.len()];
    let mut taken = vec![false; current.len()];
    for (_, i, j) in pairs {
        if given[i].is_none() && !taken[j] {
            given[i] = Some(current[j].track.clone());
            taken[j] = true;
        }
    }
    // Names still in use: the current tracks no new model continues, and those just given.
    let mut used: Vec<String> = current
        .iter()
        .zip(&taken)
        .filter(|(_, t)| !**t)
        .map(|(c, _)| c.track.clone())
        .chain(given.iter().flatten().cloned())
        .collect();
    for (n, g) in new.iter_mut().zip(given) {
        n.track = match g {
            Some(t) => t,
            None => {
                let mut k = n.mode;
                let mut name = format!("{}:{k}", n.channel);
                while used.contains(&name) {
                    k += 1;
                    name = format!("{}:{k}", n.channel);
                }
                used.push(name.clone());
                name
            }
        };
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn model(channel: &str, mode: u32, critical_rpm: f64, track: &str) -> TrackedModel {
        TrackedModel {
            track: track.to_string(),
            channel: channel.to_string(),
            mode,
            valid_from: 0.0,
            critical_rpm,
            af: Some(5.0),
            model: CriticalModel {
                natural_rpm: critical_rpm,
                damping_ratio: 0.1,
                modal_vector: Complex64::new(10.0, 0.0),
                background: Complex64::new(0.0, 0.0),
                slow_roll: Complex64::new(0.0, 0.0),
            },
            fit_residual: None,
        }
    }

    #[test]
    fn a_mode_keeps_its_track_whatever_the_event_numbers_it() {
        let current = [
            model("x", 1, 1200.0, "x:1"),
            model("x", 2, 2400.0, "x:2"),
            model("y", 1, 1210.0, "y:1"),
        ];
        // A run-up that missed the first mode numbers the second 1, and finds a new one.
        let mut new = [
            model("x", 1, 2380.0, ""),
            model("x", 2, 3600.0, ""),
            model("y", 1, 1190.0, ""),
        ];
        assign_tracks(&current, &mut new);
        let tracks: Vec<&str> = new.iter().map(|m| m.track.as_str()).collect();
        // 3600 is 50 % from 2400: a new mode, numbered past the names x still uses (x:1, x:2).
        assert_eq!(tracks, ["x:2", "x:3", "y:1"]);
        // Two new criticals near one old one: the nearer continues it, the other is new.
        let mut two = [model("x", 1, 1300.0, ""), model("x", 2, 1210.0, "")];
        assign_tracks(&current[..1], &mut two);
        let tracks: Vec<&str> = two.iter().map(|m| m.track.as_str()).collect();
        assert_eq!(tracks, ["x:2", "x:1"]);
    }
}
