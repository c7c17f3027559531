//! The fictional demo plant, Tarnmoor Works: machines whose rotors `simulate` and `demo` play.
//!
//! Every figure here is invented for the demo and examples; `config-examples/` describes the same
//! machines as configuration.

use veer_tracker::sim::{SimChannel, SimMode, SpeedProfile, TachSim};

/// A simulated machine of the demo plant.
#[derive(Clone, Debug)]
pub(crate) struct DemoMachine {
    pub id: &'static str,
    pub name: &'static str,
    pub unit: &'static str,
    pub min_operating_rpm: f64,
    pub max_continuous_rpm: f64,
    /// Speed profile of the demo: slow roll, run-up, hold, coast-down.
    pub profile: Vec<(f64, f64)>,
    pub channels: Vec<SimChannel>,
    pub tach: TachSim,
}

fn probe(name: &str, angle: f64, modes: Vec<SimMode>, runout: f64, noise: f64) -> SimChannel {
    SimChannel {
        modes,
        probe_angle_deg: angle,
        runout,
        runout_lag_deg: 200.0,
        second_order: 0.12 * runout.max(1.0),
        second_order_lag_deg: 40.0,
        noise_rms: noise,
        offset: -250.0,
        ..SimChannel::new(name)
    }
}

fn mode(rpm: f64, zeta: f64, ecc: f64, heavy: f64) -> SimMode {
    SimMode {
        natural_rpm: rpm,
        damping_ratio: zeta,
        eccentricity: ecc,
        heavy_spot_deg: heavy,
        natural_rpm_end: None,
        heavy_spot_step: None,
    }
}

/// The machines of the demo plant.
pub(crate) fn machines() -> Vec<DemoMachine> {
    let tg_modes = vec![
        mode(1380.0, 0.045, 3.0, 30.0),
        mode(2420.0, 0.06, 2.2, 250.0),
    ];
    let comp_modes = vec![mode(2900.0, 0.07, 2.5, 120.0)];
    let fan_modes = vec![mode(1210.0, 0.077, 0.35, 80.0)];
    vec![
        DemoMachine {
            id: "tg-1",
            name: "Steam turbine generator 1",
            unit: "um",
            min_operating_rpm: 2950.0,
            max_continuous_rpm: 3030.0,
            profile: vec![
                (0.0, 300.0),
                (15.0, 300.0),
                (105.0, 3000.0),
                (135.0, 3000.0),
                (255.0, 200.0),
            ],
            channels: vec![
                probe("x", 45.0, tg_modes.clone(), 4.0, 0.6),
                probe("y", 135.0, tg_modes, 4.0, 0.6),
            ],
            tach: TachSim::default(),
        },
        DemoMachine {
            id: "comp-3",
            name: "Process gas compressor 3",
            unit: "um",
            min_operating_rpm: 5200.0,
            max_continuous_rpm: 6800.0,
            profile: vec![
                (0.0, 400.0),
                (10.0, 400.0),
                (70.0, 6200.0),
                (90.0, 6200.0),
                (170.0, 300.0),
            ],
            channels: vec![
                probe("x", 45.0, comp_modes.clone(), 3.0, 0.5),
                probe("y", 135.0, comp_modes, 3.0, 0.5),
            ],
            tach: TachSim::default(),
        },
        DemoMachine {
            id: "fan-2",
            name: "Cooling tower fan 2",
            unit: "mm/s",
            min_operating_rpm: 600.0,
            max_continuous_rpm: 1000.0,
            profile: vec![
                (0.0, 150.0),
                (20.0, 150.0),
                (140.0, 1450.0),
                (150.0, 1450.0),
                (290.0, 100.0),
            ],
            channels: vec![SimChannel {
                modes: fan_modes,
                noise_rms: 0.05,
                ..SimChannel::new("v")
            }],
            tach: TachSim::default(),
        },
    ]
}

/// The demo machine with this id, or an error listing the ids.
pub(crate) fn machine(id: &str) -> anyhow::Result<DemoMachine> {
    let all = machines();
    let ids: Vec<&str> = all.iter().map(|m| m.id).collect();
    all.iter()
        .find(|m| m.id == id)
        .cloned()
        .ok_or_else(|| anyhow::anyhow!("no demo machine `{id}` (known: {})", ids.join(", ")))
}

/// The machine's demo speed profile.
pub(crate) fn profile(m: &DemoMachine) -> anyhow::Result<SpeedProfile> {
    SpeedProfile::new(m.profile.clone())
        .map_err(|e| anyhow::anyhow!("demo profile of {}: {e}", m.id))
}
