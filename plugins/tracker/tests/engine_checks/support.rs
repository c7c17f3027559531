//! Shared helpers: simulate a recording, feed it to the engine block by block, collect the results.

use veer_tracker::config::{ChannelConfig, EngineConfig};
use veer_tracker::engine::{Engine, EngineStats, Event, EventKind, RevolutionUpdate, Update};
use veer_tracker::resonance::Resonance;
use veer_tracker::sim::{SimChannel, SimConfig, SimMode, Simulator, SpeedProfile, TachSim};
use veer_tracker::states::StateChange;
use veer_tracker::units::{Amplitude, Unit};

/// Frames per block handed to the engine (a daemon-like block size).
pub const BLOCK: usize = 4096;

/// Everything one run of the engine over a simulated recording produced.
#[derive(Debug, Default)]
pub struct Outcome {
    /// Finished run-ups and coast-downs, in time order.
    pub events: Vec<Event>,
    /// Per-revolution updates (only when asked for).
    pub revolutions: Vec<RevolutionUpdate>,
    /// State changes.
    pub states: Vec<StateChange>,
    /// The engine's counters at the end.
    pub stats: EngineStats,
}

impl Outcome {
    /// The events of one kind.
    pub fn of_kind(&self, kind: EventKind) -> Vec<&Event> {
        self.events.iter().filter(|e| e.kind == kind).collect()
    }

    /// The only event of `kind`, or a panic naming what was found.
    pub fn single(&self, kind: EventKind) -> &Event {
        let found = self.of_kind(kind);
        assert_eq!(
            found.len(),
            1,
            "expected one {} event, got {}: {:?}",
            kind.name(),
            found.len(),
            self.summary()
        );
        found[0]
    }

    /// A short description of the events for failure messages.
    pub fn summary(&self) -> Vec<String> {
        self.events
            .iter()
            .map(|e| {
                let crits: Vec<String> = e
                    .channels
                    .iter()
                    .flat_map(|c| c.criticals.iter())
                    .map(|c| format!("{:.1}", c.resonance.speed_rpm))
                    .collect();
                format!(
                    "{} {:.1}-{:.1} s {:.0}->{:.0} rpm criticals [{}]",
                    e.kind.name(),
                    e.start_s,
                    e.end_s,
                    e.speed_start_rpm,
                    e.speed_end_rpm,
                    crits.join(", ")
                )
            })
            .collect()
    }
}

/// An engine configuration for the simulated channels: displacement in µm, stated pk-pk (the
/// trade's usual detection for proximity probes, so event amplitudes are 2 × the simulated peak).
pub fn engine_config(sim: &SimConfig) -> EngineConfig {
    EngineConfig {
        channels: sim
            .channels
            .iter()
            .map(|c| ChannelConfig {
                name: c.name.clone(),
                amplitude: Amplitude::usual(Unit::Micrometre),
                scale: 1.0,
                angle_deg: c.probe_angle_deg,
            })
            .collect(),
        // The order map is not needed by most checks and costs time in debug builds.
        order_map: None,
        ..EngineConfig::default()
    }
}

/// One channel `x` seeing `modes`, with white noise of `noise_rms` µm, under `profile`.
pub fn sim_config(
    profile: SpeedProfile,
    fs: f64,
    modes: Vec<SimMode>,
    noise_rms: f64,
) -> SimConfig {
    let mut ch = SimChannel::new("x");
    ch.modes = modes;
    ch.noise_rms = noise_rms;
    SimConfig {
        sample_rate: fs,
        profile,
        tach: TachSim::default(),
        channels: vec![ch],
        seed: 7,
        start_at_rest: false,
    }
}

/// Simulates `sim` and runs the engine configured by `cfg` over it.
pub fn run(sim: &SimConfig, cfg: &EngineConfig, emit_revolutions: bool) -> Outcome {
    run_with(sim, cfg, emit_revolutions, |_, _| {})
}

/// As [`run`], with `edit_tach(first_frame, tach_samples)` applied to each block's tach samples
/// before the engine sees them (to blank pulses, say).
pub fn run_with(
    sim: &SimConfig,
    cfg: &EngineConfig,
    emit_revolutions: bool,
    mut edit_tach: impl FnMut(u64, &mut [f32]),
) -> Outcome {
    let mut simulator = Simulator::new(sim.clone()).expect("valid simulation");
    let fs = simulator.sample_rate();
    let mut engine = Engine::new(cfg.clone(), fs, 0.0).expect("valid engine configuration");
    engine.set_emit_revolutions(emit_revolutions);
    let nch = simulator.channel_names().len();
    let mut inter = Vec::with_capacity(BLOCK * nch);
    let mut cols: Vec<Vec<f32>> = vec![Vec::with_capacity(BLOCK); nch];
    let mut out = Outcome::default();
    let mut frame = 0u64;
    loop {
        inter.clear();
        let n = simulator.next_block(BLOCK, &mut inter);
        if n == 0 {
            break;
        }
        for c in cols.iter_mut() {
            c.clear();
        }
        // Deinterleave: column 0 is the tach, then the vibration channels.
        for f in inter.chunks_exact(nch) {
            for (c, &x) in cols.iter_mut().zip(f) {
                c.push(x);
            }
        }
        edit_tach(frame, &mut cols[0]);
        frame += n as u64;
        let (t, v) = cols.split_at(1);
        let vibs: Vec<&[f32]> = v.iter().map(|c| c.as_slice()).collect();
        engine.push(&t[0], &vibs).expect("block shape");
        collect(engine.take_updates(), &mut out);
    }
    collect(engine.finish(), &mut out);
    out.stats = engine.stats();
    out
}

fn collect(updates: Vec<Update>, out: &mut Outcome) {
    for u in updates {
        match u {
            Update::Event(e) => out.events.push(*e),
            Update::Revolution(r) => out.revolutions.push(r),
            Update::State(s) => out.states.push(s),
            _ => {}
        }
    }
}

/// The critical of channel 0 nearest `rpm`, or a panic listing what was found.
pub fn critical_near(event: &Event, rpm: f64) -> &Resonance {
    let ch = &event.channels[0];
    ch.criticals
        .iter()
        .map(|c| &c.resonance)
        .min_by(|a, b| {
            (a.speed_rpm - rpm)
                .abs()
                .total_cmp(&(b.speed_rpm - rpm).abs())
        })
        .unwrap_or_else(|| panic!("no critical found near {rpm} rpm in {}", event.kind.name()))
}

/// Relative error of `got` against `want`, percent.
pub fn err_pct(got: f64, want: f64) -> f64 {
    (got - want) / want * 100.0
}

/// Peak speed of a single-mode unbalance response: ωn/√(1 − 2ζ²) (S. S. Rao, Mechanical
/// Vibrations, 5th ed., §3.7 rotating unbalance; REFERENCES §4, confirmed).
pub fn unbalance_peak_rpm(natural_rpm: f64, zeta: f64) -> f64 {
    natural_rpm / (1.0 - 2.0 * zeta * zeta).sqrt()
}

/// Half-power AF of the ideal unbalance displacement curve r²/|1 − r² + 2jζr|, recomputed by
/// bisection (REFERENCES §1.1: AF = Nc/(N2 − N1) at 0.707 × peak; ζ = 0.05 gives 9.900).
pub fn unbalance_half_power_af(zeta: f64) -> f64 {
    let h = |r: f64| r * r / ((1.0 - r * r).powi(2) + (2.0 * zeta * r).powi(2)).sqrt();
    let rp = 1.0 / (1.0 - 2.0 * zeta * zeta).sqrt();
    let level = h(rp) / 2f64.sqrt();
    let cross = |mut a: f64, mut b: f64| {
        // h − level changes sign between a and b.
        let fa = h(a) - level;
        for _ in 0..200 {
            let m = 0.5 * (a + b);
            if (h(m) - level).signum() == fa.signum() {
                a = m;
            } else {
                b = m;
            }
        }
        0.5 * (a + b)
    };
    let r1 = cross(0.5, rp);
    let r2 = cross(2.0, rp);
    rp / (r2 - r1)
}

/// `a − b` wrapped to −180..180 degrees.
pub fn wrap180(d: f64) -> f64 {
    (d + 180.0).rem_euclid(360.0) - 180.0
}

/// Speed of the highest steady 1X amplitude of `ch` (all its modes and runout superposed) within
/// ±10 % of `near_rpm`, by golden-section search on `SimChannel::steady_1x`.
pub fn steady_peak_rpm(ch: &veer_tracker::sim::SimChannel, near_rpm: f64) -> f64 {
    let f = |rpm: f64| ch.steady_1x(rpm).norm();
    let g = (5f64.sqrt() - 1.0) / 2.0;
    let (mut a, mut b) = (0.9 * near_rpm, 1.1 * near_rpm);
    for _ in 0..200 {
        let c = b - g * (b - a);
        let d = a + g * (b - a);
        if f(c) > f(d) {
            b = d;
        } else {
            a = c;
        }
    }
    0.5 * (a + b)
}
