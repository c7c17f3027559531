//! Tests of the whole simulator against closed forms and published or recomputed check values.

use std::f64::consts::TAU;

use super::*;
use crate::types::{from_amp_lag, lag_deg, Complex64};

/// Runs a simulator to the end, returning every frame interleaved.
fn run_all(sim: &mut Simulator, block: usize) -> Vec<f32> {
    let mut out = Vec::new();
    while sim.next_block(block, &mut out) > 0 {}
    out
}

/// Column `col` of interleaved frames with `stride` values per frame.
fn column(frames: &[f32], stride: usize, col: usize) -> Vec<f64> {
    frames
        .iter()
        .skip(col)
        .step_by(stride)
        .map(|&x| f64::from(x))
        .collect()
}

/// Slow direct DFT of the nX component over samples `start..start + len`, with the exact shaft
/// angle of each sample: `(2/N) Σ x_k e^{−jnθ_k}` (Dilworth & Blough, SAE 07NVC-176; REFERENCES.md
/// §7). Exact for a steady sinusoid when the span is a whole number of revolutions.
fn nx_dft(sim: &Simulator, x: &[f64], start: usize, len: usize, order: f64) -> Complex64 {
    let dt = 1.0 / sim.sample_rate();
    let mut acc = Complex64::new(0.0, 0.0);
    for (k, &xk) in x.iter().enumerate().skip(start).take(len) {
        let theta = TAU * sim.shaft_angle_at(k as f64 * dt);
        acc += xk * Complex64::from_polar(1.0, -order * theta);
    }
    acc * (2.0 / len as f64)
}

fn one_mode_config(rpm_profile: SpeedProfile, fs: f64, mode: SimMode, probe_deg: f64) -> SimConfig {
    let mut ch = SimChannel::new("x");
    ch.modes = vec![mode];
    ch.probe_angle_deg = probe_deg;
    SimConfig {
        sample_rate: fs,
        profile: rpm_profile,
        channels: vec![ch],
        ..SimConfig::default()
    }
}

#[test]
fn constant_speed_1x_matches_closed_form() {
    // S. S. Rao, Mechanical Vibrations (5th ed.), §3.7 rotating unbalance; REFERENCES.md §4
    // (confirmed): M X/(m e) = r²/D, lag atan2(2ζr, 1 − r²). Within 0.1 % at r = 0.5, 1, 1.5.
    let (fs, nat, zeta, ecc, beta, alpha) = (19_200.0, 3000.0, 0.05, 10.0, 30.0, 45.0);
    for start_at_rest in [false, true] {
        for r in [0.5, 1.0, 1.5] {
            let rpm = r * nat;
            let mode = SimMode {
                natural_rpm: nat,
                damping_ratio: zeta,
                eccentricity: ecc,
                heavy_spot_deg: beta,
                natural_rpm_end: None,
                heavy_spot_step: None,
            };
            let mut cfg =
                one_mode_config(SpeedProfile::constant(rpm, 3.0), fs, mode.clone(), alpha);
            cfg.start_at_rest = start_at_rest;
            let mut sim = Simulator::new(cfg).expect("valid");
            let frames = run_all(&mut sim, 4096);
            let x = column(&frames, 2, 1);
            // Whole revolutions: 768, 384 and 256 samples per turn. A mode started at rest has decayed
            // by e^{−ζω_n t} = e^{−31} after 2 s.
            let spr = (fs * 60.0 / rpm).round() as usize;
            let start = if start_at_rest { 2 * fs as usize } else { 0 };
            let v = nx_dft(&sim, &x, start, 20 * spr, 1.0);
            let expected = unbalance_response(r, zeta) * from_amp_lag(ecc, beta + alpha);
            assert!(
                (v.norm() / expected.norm() - 1.0).abs() < 1e-3,
                "r {r}: |v| {} vs {}",
                v.norm(),
                expected.norm()
            );
            assert!(
                (v / expected).arg().abs() < 1e-3,
                "r {r}: lag {} vs {}",
                lag_deg(v),
                lag_deg(expected)
            );
            assert!((expected - mode.steady_vector(rpm, alpha)).norm() < 1e-12 * expected.norm());
        }
    }
}

#[test]
fn lag_goes_from_heavy_spot_through_90_to_180() {
    // Trade convention (REFERENCES.md §7, confirmed secondary): the 1X lag rises by about 180°
    // through a critical and is 90° above its low-speed value at the critical.
    let mode = SimMode {
        natural_rpm: 3000.0,
        damping_ratio: 0.05,
        eccentricity: 1.0,
        heavy_spot_deg: 40.0,
        natural_rpm_end: None,
        heavy_spot_step: None,
    };
    let low = lag_deg(mode.steady_vector(300.0, 0.0));
    let at = lag_deg(mode.steady_vector(3000.0, 0.0));
    let high = lag_deg(mode.steady_vector(30_000.0, 0.0));
    assert!((low - 40.0).abs() < 1.0, "{low}");
    assert!((at - 130.0).abs() < 1e-9, "{at}");
    assert!((high - 220.0).abs() < 1.0, "{high}");
}

#[test]
fn probe_angle_adds_to_lag_and_runout_and_2x_are_constant_vectors() {
    // Circular orbit of an isotropic rotor (common practice): probes 90° apart see the same
    // amplitude with lags 90° apart. Runout and 2X are constant vectors by construction.
    let fs = 19_200.0;
    let mut x = SimChannel::new("x");
    x.modes[0] = SimMode {
        natural_rpm: 2000.0,
        damping_ratio: 0.1,
        eccentricity: 5.0,
        heavy_spot_deg: 10.0,
        natural_rpm_end: None,
        heavy_spot_step: None,
    };
    x.runout = 0.8;
    x.runout_lag_deg = 200.0;
    x.second_order = 0.3;
    x.second_order_lag_deg = 70.0;
    let mut y = x.clone();
    y.name = "y".into();
    y.probe_angle_deg = 90.0;
    let cfg = SimConfig {
        sample_rate: fs,
        profile: SpeedProfile::constant(1800.0, 1.0),
        channels: vec![x.clone(), y.clone()],
        ..SimConfig::default()
    };
    let mut sim = Simulator::new(cfg).expect("valid");
    let frames = run_all(&mut sim, 1000);
    let spr = 640; // 19 200 samples/s at 30 turns/s
    let xs = column(&frames, 3, 1);
    let ys = column(&frames, 3, 2);
    let vx = nx_dft(&sim, &xs, 0, 10 * spr, 1.0);
    let vy = nx_dft(&sim, &ys, 0, 10 * spr, 1.0);
    let runout = from_amp_lag(0.8, 200.0);
    let (mx, my) = (vx - runout, vy - runout);
    assert!((mx.norm() / my.norm() - 1.0).abs() < 1e-5);
    let dlag = (lag_deg(my) - lag_deg(mx)).rem_euclid(360.0);
    assert!((dlag - 90.0).abs() < 1e-3, "{dlag}");
    assert!((vx - x.steady_1x(1800.0)).norm() < 1e-3 * vx.norm());
    assert!((vy - y.steady_1x(1800.0)).norm() < 1e-3 * vy.norm());
    let v2 = nx_dft(&sim, &xs, 0, 10 * spr, 2.0);
    assert!((v2 - x.steady_2x()).norm() < 1e-5, "2X {v2}");
    assert!((lag_deg(v2) - 70.0).abs() < 1e-3);
}

/// Largest |sample| and the index where it occurs.
fn max_abs(x: &[f64]) -> (f64, usize) {
    x.iter().enumerate().fold(
        (0.0, 0),
        |(m, im), (i, &v)| if v.abs() > m { (v.abs(), i) } else { (m, im) },
    )
}

#[test]
fn slow_sweep_reaches_the_steady_peak() {
    // Steady unbalance peak 1/(2ζ√(1 − ζ²)) = 10.0125 at ζ = 0.05 (Rao §3.7; REFERENCES.md §4).
    // At η = dΩ/dt / ω_n² = 1e-4 the passage changes the peak by a few tenths of a percent
    // (REFERENCES.md §6 table, recomputed); the test asks for 1 %. Lewis (1932, via REFERENCES.md
    // §6, confirmed qualitatively): the run-up peak comes above the coast-down peak's speed.
    let (fs, nat, zeta) = (6400.0, 3000.0, 0.05_f64);
    let wn = nat * TAU / 60.0;
    let eta = 1e-4;
    let rpm_per_s = eta * wn * wn * 60.0 / TAU;
    let span_s = 3000.0 / rpm_per_s;
    let steady_peak = 1.0 / (2.0 * zeta * (1.0 - zeta * zeta).sqrt());
    let mut peak_rpm = Vec::new();
    for (from, to) in [(1500.0, 4500.0), (4500.0, 1500.0)] {
        let mode = SimMode {
            natural_rpm: nat,
            damping_ratio: zeta,
            eccentricity: 1.0,
            heavy_spot_deg: 0.0,
            natural_rpm_end: None,
            heavy_spot_step: None,
        };
        let cfg = one_mode_config(SpeedProfile::ramp(from, to, span_s), fs, mode, 0.0);
        let mut sim = Simulator::new(cfg).expect("valid");
        let frames = run_all(&mut sim, 4096);
        let x = column(&frames, 2, 1);
        let (peak, at) = max_abs(&x);
        assert!(
            (peak / steady_peak - 1.0).abs() < 0.01,
            "{from}→{to}: peak {peak} vs {steady_peak}"
        );
        peak_rpm.push(sim.config().profile.rpm_at(at as f64 / fs));
    }
    assert!(peak_rpm[0] > peak_rpm[1], "{peak_rpm:?}");
    assert!((peak_rpm[0] / nat - 1.0).abs() < 0.02 && (peak_rpm[1] / nat - 1.0).abs() < 0.02);
}

/// Sweep of `x'' + 2ζx' + x = cos φ(t)`, `φ' = Ω0 ± ηt`, from steady state at Ω0 until Ω reaches
/// the other end; returns (max |x|, Ω at the max).
fn transient_passage(zeta: f64, eta: f64, up: bool) -> (f64, f64) {
    let dt = 0.01;
    let (w0, w1) = if up { (0.5, 1.5) } else { (1.5, 0.5) };
    let rate = if up { eta } else { -eta };
    let steps = ((w1 - w0) / rate / dt).round() as usize;
    let mut s = Sdof::new(1.0, zeta, dt).expect("valid");
    let (q, v) = s
        .periodic_response(Complex64::new(1.0, 0.0), w0)
        .expect("damped");
    s.set_state(q.re, v.re, 1.0);
    let (mut peak, mut at) = (s.displacement().abs(), w0);
    for k in 1..=steps {
        let t = k as f64 * dt;
        let x = s.step((w0 * t + 0.5 * rate * t * t).cos());
        if x.abs() > peak {
            peak = x.abs();
            at = w0 + rate * t;
        }
    }
    (peak, at)
}

#[test]
fn transient_passage_table() {
    // REFERENCES.md §6, recomputed table (numerical integration of x'' + 2ζx' + x = cos φ(t),
    // start in steady state; not a published number), asked within 1 %, held here to 0.2 % (the
    // table has four digits). Qualitative facts from Lewis,
    // Trans. ASME 54 (1932), confirmed via later abstracts: lower peak than steady, later on run-up,
    // earlier on coast-down.
    #[allow(clippy::approx_constant)] // 1.0471 is a tabulated speed ratio, not π/3
    let table = [
        (0.01, 1e-4, 44.96, 1.0125, 45.18, 0.9871),
        (0.01, 1e-3, 28.32, 1.0564, 28.74, 0.9443),
        (0.01, 1e-2, 12.13, 1.1993, 12.55, 0.7850),
        (0.02, 1e-4, 24.49, 1.0081, 24.59, 0.9909),
        (0.02, 1e-3, 19.67, 1.0471, 19.97, 0.9506),
        (0.05, 1e-4, 9.995, 1.0015, 10.015, 0.9934),
        (0.05, 1e-3, 9.592, 1.0285, 9.722, 0.9666),
        (0.05, 1e-2, 7.028, 1.1390, 7.365, 0.8177),
    ];
    for (zeta, eta, up_peak, up_at, down_peak, down_at) in table {
        let (p, a) = transient_passage(zeta, eta, true);
        assert!(
            (p / up_peak - 1.0).abs() < 0.002,
            "ζ {zeta} η {eta} up: peak {p} vs {up_peak}"
        );
        assert!(
            (a / up_at - 1.0).abs() < 0.002,
            "ζ {zeta} η {eta} up: at {a} vs {up_at}"
        );
        let (p, a) = transient_passage(zeta, eta, false);
        assert!(
            (p / down_peak - 1.0).abs() < 0.002,
            "ζ {zeta} η {eta} down: peak {p} vs {down_peak}"
        );
        assert!(
            (a / down_at - 1.0).abs() < 0.002,
            "ζ {zeta} η {eta} down: at {a} vs {down_at}"
        );
    }
}

/// First time the shaft reaches `turns`, by bisection on `shaft_angle_at` (independent of the
/// closed-form inverse the simulator uses).
fn crossing_time(sim: &Simulator, turns: f64, mut lo: f64, mut hi: f64) -> f64 {
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if sim.shaft_angle_at(mid) < turns {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

#[test]
fn tach_edges_sit_on_the_angle_crossings_and_missing_teeth_are_missing() {
    // Definition of the tach model (module doc): tooth k of turn m rises at θ = 2π(m + k/ppr) and
    // falls `duty` of a pitch later; mid-level crossings interpolated linearly give the edge times.
    let fs = 25_600.0;
    let dt = 1.0 / fs;
    let ppr = 4u32;
    let duty = 0.3;
    let cfg = SimConfig {
        sample_rate: fs,
        profile: SpeedProfile::ramp(600.0, 3000.0, 2.0)
            .then_hold(1.0)
            .then_ramp_to(1200.0, 1.0),
        tach: TachSim {
            ppr,
            missing: vec![2],
            jitter_s: 0.0,
            duty,
            low: -1.0,
            high: 4.0,
        },
        channels: vec![],
        ..SimConfig::default()
    };
    let mut sim = Simulator::new(cfg).expect("valid");
    let tach = column(&run_all(&mut sim, 1000), 1, 0);
    let mid = 1.5;
    let mut rising = Vec::new();
    let mut worst: f64 = 0.0;
    for n in 1..tach.len() {
        let (a, b) = (tach[n - 1], tach[n]);
        let rise = a < mid && b >= mid;
        let fall = a >= mid && b < mid;
        if !(rise || fall) {
            continue;
        }
        let t = (n - 1) as f64 * dt + dt * (mid - a) / (b - a);
        let turns = sim.shaft_angle_at(t) * f64::from(ppr);
        let g = if rise {
            turns.round()
        } else {
            (turns - duty).round()
        };
        let target = (g + if rise { 0.0 } else { duty }) / f64::from(ppr);
        let exact = crossing_time(&sim, target, t - 2.0 * dt, t + 2.0 * dt);
        worst = worst.max((t - exact).abs() / dt);
        if rise {
            rising.push(g as u64);
        }
    }
    assert!(worst < 1e-4, "worst edge error {worst} samples");
    // Every tooth from 1 (tooth 0 sits on sample 0) up to the last before the end, but no tooth 2.
    let last = (sim.shaft_angle_at((tach.len() - 2) as f64 * dt) * f64::from(ppr)).floor() as u64;
    let expected: Vec<u64> = (1..=last).filter(|g| g % u64::from(ppr) != 2).collect();
    assert_eq!(rising, expected);
    assert!(rising.len() > 100);
}

#[test]
fn blocks_of_any_size_give_identical_samples() {
    let mut a = SimChannel::new("a");
    a.modes.push(SimMode {
        natural_rpm: 4100.0,
        damping_ratio: 0.03,
        eccentricity: 0.4,
        heavy_spot_deg: 250.0,
        natural_rpm_end: None,
        heavy_spot_step: None,
    });
    a.noise_rms = 0.05;
    a.runout = 0.1;
    a.second_order = 0.02;
    a.tones = vec![
        Tone {
            freq_hz: 50.0,
            amplitude: 0.03,
        },
        Tone {
            freq_hz: 131.7,
            amplitude: 0.01,
        },
    ];
    a.offset = -8.0;
    let mut b = a.clone();
    b.name = "b".into();
    b.probe_angle_deg = 90.0;
    let cfg = SimConfig {
        sample_rate: 10_240.0,
        profile: SpeedProfile::run_up_hold_coast_down(300.0, 4800.0, 0.3, 1.2, 0.4, 0.9),
        tach: TachSim {
            ppr: 8,
            missing: vec![0, 5],
            jitter_s: 2e-6,
            ..TachSim::default()
        },
        channels: vec![a, b],
        seed: 42,
        start_at_rest: false,
    };
    let mut s1 = Simulator::new(cfg.clone()).expect("valid");
    let mut s2 = Simulator::new(cfg).expect("valid");
    let o1 = run_all(&mut s1, 1000);
    let o2 = run_all(&mut s2, 4096);
    assert_eq!(o1.len() as u64, 3 * s1.total_frames());
    assert_eq!(s1.total_frames(), (3.1 * 10_240.0_f64).round() as u64);
    assert!(o1.iter().zip(&o2).all(|(x, y)| x.to_bits() == y.to_bits()));
    assert_eq!(o1.len(), o2.len());
    assert_eq!(s1.channel_names(), vec!["tach", "a", "b"]);
    let mut extra = Vec::new();
    assert_eq!(s1.next_block(10, &mut extra), 0);
    assert!(extra.is_empty());
}

#[test]
fn noise_and_tones_have_their_configured_size() {
    // R.m.s. of white Gaussian noise and DFT amplitude of a tone (common practice).
    let fs = 8000.0;
    let mut ch = SimChannel::new("n");
    ch.modes.clear();
    ch.noise_rms = 0.5;
    ch.offset = 3.0;
    ch.tones = vec![Tone {
        freq_hz: 50.0,
        amplitude: 0.2,
    }];
    let cfg = SimConfig {
        sample_rate: fs,
        profile: SpeedProfile::constant(600.0, 20.0),
        channels: vec![ch],
        ..SimConfig::default()
    };
    let mut sim = Simulator::new(cfg).expect("valid");
    let x = column(&run_all(&mut sim, 4096), 2, 1);
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let tone = x
        .iter()
        .enumerate()
        .map(|(k, &v)| (v - mean) * Complex64::from_polar(1.0, -TAU * 50.0 * k as f64 / fs))
        .sum::<Complex64>()
        * (2.0 / n);
    let var = x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n - 0.5 * 0.2 * 0.2;
    assert!((mean - 3.0).abs() < 0.01, "mean {mean}");
    assert!(
        (tone.norm() - 0.2).abs() < 0.01 && tone.arg().abs() < 0.05,
        "tone {tone}"
    );
    assert!(
        (var.sqrt() / 0.5 - 1.0).abs() < 0.01,
        "noise rms {}",
        var.sqrt()
    );
}

#[test]
fn validation_names_the_bad_field() {
    let mut cfg = SimConfig::default();
    cfg.channels[0].modes[0].damping_ratio = -0.1;
    assert_eq!(
        Simulator::new(cfg)
            .err()
            .map(|e| e.field().to_string())
            .as_deref(),
        Some("channels[0].modes[0].damping_ratio")
    );
    let mut cfg = SimConfig::default();
    cfg.channels.push(SimChannel::new("x"));
    assert_eq!(cfg.validate().expect_err("dup").field(), "channels[1].name");
    let mut cfg = SimConfig::default();
    cfg.tach.missing = vec![1];
    assert_eq!(
        cfg.validate().expect_err("range").field(),
        "tach.missing[0]"
    );
    let mut cfg = SimConfig::default();
    cfg.tach.duty = 1.0;
    assert_eq!(cfg.validate().expect_err("duty").field(), "tach.duty");
    let cfg = SimConfig {
        sample_rate: 100.0,
        ..SimConfig::default()
    };
    assert_eq!(cfg.validate().expect_err("slow").field(), "sample_rate");
    let mut cfg = SimConfig::default();
    cfg.channels[0].tones.push(Tone {
        freq_hz: 20_000.0,
        amplitude: 1.0,
    });
    assert_eq!(
        cfg.validate().expect_err("tone").field(),
        "channels[0].tones[0].freq_hz"
    );
    let mut cfg = SimConfig::default();
    cfg.profile.points[1].0 = -1.0;
    assert_eq!(
        cfg.validate().expect_err("time").field(),
        "profile.points[1].time_s"
    );
    let mut cfg = one_mode_config(
        SpeedProfile::constant(3000.0, 1.0),
        25_600.0,
        SimMode {
            natural_rpm: 3000.0,
            damping_ratio: 0.0,
            eccentricity: 1.0,
            heavy_spot_deg: 0.0,
            natural_rpm_end: None,
            heavy_spot_step: None,
        },
        0.0,
    );
    assert_eq!(
        Simulator::new(cfg.clone())
            .err()
            .map(|e| e.field().to_string())
            .as_deref(),
        Some("channels[0].modes[0].damping_ratio")
    );
    cfg.start_at_rest = true;
    assert!(Simulator::new(cfg).is_ok());
    assert!(SimConfig::default().validate().is_ok());
}

fn measure(label: &str, cfg: SimConfig) {
    let nch = cfg.channels.len();
    let mut sim = Simulator::new(cfg).expect("valid");
    let mut out = Vec::with_capacity(4096 * (nch + 1));
    let start = std::time::Instant::now();
    let mut frames = 0u64;
    let mut check = 0.0f64;
    loop {
        out.clear();
        let n = sim.next_block(4096, &mut out);
        if n == 0 {
            break;
        }
        frames += n as u64;
        check += f64::from(out[out.len() - 1]);
    }
    let secs = start.elapsed().as_secs_f64();
    let rate = frames as f64 * nch as f64 / secs / 1e6;
    println!("{label}: {frames} frames x {nch} channels in {secs:.3} s: {rate:.1} M frames/s·channel ({check:.1})");
}

/// Throughput in release: `cargo test --release -p veer-tracker sim::tests::throughput -- --ignored --nocapture`.
#[test]
#[ignore]
fn throughput() {
    let mut ch = SimChannel::new("c0");
    ch.modes.push(SimMode {
        natural_rpm: 7000.0,
        ..SimMode::default()
    });
    ch.runout = 0.5;
    ch.second_order = 0.1;
    ch.noise_rms = 0.1;
    ch.tones = vec![Tone {
        freq_hz: 50.0,
        amplitude: 0.1,
    }];
    let channels = |ch: &SimChannel| -> Vec<SimChannel> {
        (0..4)
            .map(|i| SimChannel {
                name: format!("c{i}"),
                ..ch.clone()
            })
            .collect()
    };
    let full = SimConfig {
        profile: SpeedProfile::run_up_hold_coast_down(300.0, 6000.0, 10.0, 60.0, 20.0, 60.0),
        tach: TachSim {
            ppr: 60,
            missing: vec![0],
            jitter_s: 1e-6,
            ..TachSim::default()
        },
        channels: channels(&ch),
        ..SimConfig::default()
    };
    measure(
        "2 modes, runout, 2X, tone, noise; 60-tooth tach",
        full.clone(),
    );
    let mut quiet = ch.clone();
    quiet.noise_rms = 0.0;
    measure(
        "same without noise",
        SimConfig {
            channels: channels(&quiet),
            ..full.clone()
        },
    );
    let mut bare = SimChannel::new("c0");
    bare.modes = vec![SimMode::default()];
    measure(
        "1 mode only, 1-pulse tach",
        SimConfig {
            channels: channels(&bare),
            tach: TachSim::default(),
            ..full.clone()
        },
    );
    let mut changing = bare.clone();
    changing.modes[0].natural_rpm_end = Some(1200.0);
    changing.modes[0].heavy_spot_step = Some((30.0, 30.0));
    measure(
        "same with the natural speed halving and a heavy-spot step",
        SimConfig {
            channels: channels(&changing),
            tach: TachSim::default(),
            ..full
        },
    );
}

/// The 1X vector over `revs` whole revolutions centred on time `t` (constant speed, `spr` samples
/// per revolution exactly).
fn vector_around(sim: &Simulator, x: &[f64], t: f64, spr: usize, revs: usize) -> Complex64 {
    let centre = (t * sim.sample_rate()).round() as usize;
    nx_dft(sim, x, centre - revs * spr / 2, revs * spr, 1.0)
}

/// A mode like the fan's of the demo plant (ζ = 0.077) with its critical placed at 1.30 × the
/// running speed of 1450 r/min.
fn fan_mode() -> SimMode {
    SimMode {
        natural_rpm: 1885.0,
        damping_ratio: 0.077,
        eccentricity: 2.0,
        heavy_spot_deg: 80.0,
        natural_rpm_end: None,
        heavy_spot_step: None,
    }
}

#[test]
fn drifting_natural_speed_follows_the_closed_form_at_each_time() {
    // S. S. Rao, Mechanical Vibrations (5th ed.), §3.7 rotating unbalance: steady amplitude
    // r²/√((1 − r²)² + (2ζr)²)·e, lag atan2(2ζr, 1 − r²) + β + α, here with r = Ω/ω_n(t).
    //
    // Tolerance. The natural speed moves from 1885 to 1522 r/min (r from 0.77 to 0.95) over 60 s,
    // so the response trails the quasi-static vector A₀(t) = F/D(t), D = ω_n² − Ω² + 2jζω_nΩ.
    // Putting q = Re(A e^{jΩt}) into q'' + 2ζω_n q' + ω_n² q = Re(F e^{jΩt}) gives exactly
    // A'' + (2jΩ + 2ζω_n)A' + D A = F, so to first order in the slow rate
    // A ≈ A₀ − (2jΩ + 2ζω_n)/D · A₀' (slowly varying amplitude, common practice). That lag term
    // is the quasi-static model's own error; the test allows twice its size plus 1e-3 for the
    // sampling (the hold's (Ωh)²/12 = 3.6e-4 at 2320 Hz, module doc, and the stepped ω_n, within
    // 1e-4 relative of the true one in zero-mean steps, see `changes`). The first-order
    // prediction itself must match within 1e-3 relative: what is left is second order in the rate.
    let (fs, rpm, duration) = (2320.0, 1450.0, 60.0);
    let spr = 96; // 2320 samples/s at 1450/60 turns/s, exactly
    let probe = 30.0;
    let mode = SimMode {
        natural_rpm_end: Some(1522.0),
        ..fan_mode()
    };
    let cfg = one_mode_config(
        SpeedProfile::constant(rpm, duration),
        fs,
        mode.clone(),
        probe,
    );
    let mut sim = Simulator::new(cfg).expect("valid");
    let x = column(&run_all(&mut sim, 4096), 2, 1);
    let omega = rpm * TAU / 60.0;
    for t in [5.0, 15.0, 25.0, 35.0, 45.0, 55.0] {
        let v = vector_around(&sim, &x, t, spr, 10);
        let a0 = mode.steady_vector_at(rpm, probe, t, duration);
        let dt_fd = 0.5;
        let a0_rate = (mode.steady_vector_at(rpm, probe, t + dt_fd, duration)
            - mode.steady_vector_at(rpm, probe, t - dt_fd, duration))
            / (2.0 * dt_fd);
        let wn = mode.natural_rpm_at(t, duration) * TAU / 60.0;
        let d = Complex64::new(wn * wn - omega * omega, 2.0 * 0.077 * wn * omega);
        let lag_term = Complex64::new(2.0 * 0.077 * wn, 2.0 * omega) / d * a0_rate;
        let first_order = a0 - lag_term;
        let err_qs = (v - a0).norm() / a0.norm();
        let err_fo = (v - first_order).norm() / a0.norm();
        let allowed = 2.0 * lag_term.norm() / a0.norm() + 1e-3;
        println!(
            "t {t}: |v| {:.5} lag {:.3}°, closed form |A0| {:.5} lag {:.3}°; error {err_qs:.2e} \
             (allowed {allowed:.2e}), against the first-order lag {err_fo:.2e}",
            v.norm(),
            lag_deg(v),
            a0.norm(),
            lag_deg(a0)
        );
        assert!(err_qs < allowed, "t {t}: error {err_qs} vs {allowed}");
        assert!(err_fo < 1e-3, "t {t}: first-order error {err_fo}");
        // The drift matters: the vector is far from the undrifted mode's.
        let fixed = fan_mode().steady_vector(rpm, probe);
        if t > 20.0 {
            assert!((v - fixed).norm() > 20.0 * allowed * a0.norm(), "t {t}");
        }
    }
}

#[test]
fn heavy_spot_step_turns_the_lag_and_keeps_the_amplitude() {
    // A turn of the heavy spot by Δβ multiplies the steady 1X vector by e^{−jΔβ} (Rao §3.7: the
    // response is linear in the unbalance phasor ε e^{−jβ}). The turn's transient decays as
    // e^{−ζω_n t} with 1/(ζω_n) = 0.066 s here; 2 s later it is e^{−30} of the change. Both steady
    // states are exact periodic responses of the stepped system, so the lag change is 30° to the
    // f32 rounding of the output (about 1e-7 relative); asked within 1e-4° and 1e-5 relative.
    let (fs, rpm, duration, at) = (2320.0, 1450.0, 8.0, 3.0);
    let spr = 96;
    let probe = 30.0;
    let mode = SimMode {
        heavy_spot_step: Some((at, 30.0)),
        ..fan_mode()
    };
    let cfg = one_mode_config(
        SpeedProfile::constant(rpm, duration),
        fs,
        mode.clone(),
        probe,
    );
    let mut sim = Simulator::new(cfg).expect("valid");
    let x = column(&run_all(&mut sim, 4096), 2, 1);
    // Ten revolutions ending just before the step, and ten centred 2.5 s after it.
    let start_before = (at * fs) as usize - 10 * spr;
    let before = nx_dft(&sim, &x, start_before, 10 * spr, 1.0);
    let after = vector_around(&sim, &x, at + 2.5, spr, 10);
    let turn = lag_deg(after) - lag_deg(before);
    let ratio = after.norm() / before.norm();
    println!(
        "before |v| {:.6} lag {:.5}°, after |v| {:.6} lag {:.5}°: turn {turn:.6}°, ratio {ratio:.8}",
        before.norm(),
        lag_deg(before),
        after.norm(),
        lag_deg(after)
    );
    assert!((turn - 30.0).abs() < 1e-4, "turn {turn}");
    assert!((ratio - 1.0).abs() < 1e-5, "ratio {ratio}");
    // And each matches the closed form for its time (hold error 3.6e-4, module doc).
    for (v, t) in [(before, at - 0.3), (after, at + 2.5)] {
        let expected = mode.steady_vector_at(rpm, probe, t, duration);
        assert!(
            (v - expected).norm() < 1e-3 * expected.norm(),
            "t {t}: {v} vs {expected}"
        );
    }
    // The step is at its time: two revolutions just after it still carry the transient (the
    // free response at ω_d beating with 1X), one second later (15 time constants) it is gone.
    let start_at = (at * fs) as usize;
    let early = nx_dft(&sim, &x, start_at, 2 * spr, 1.0);
    let settled = nx_dft(&sim, &x, start_at + fs as usize, 2 * spr, 1.0);
    assert!(
        (early - after).norm() > 0.05 * after.norm(),
        "early {early}"
    );
    assert!(
        (settled - after).norm() < 1e-5 * after.norm(),
        "settled {settled}"
    );
}

#[test]
fn blocks_of_any_size_give_identical_samples_with_drift_and_step() {
    let mut a = SimChannel::new("a");
    a.modes = vec![
        SimMode {
            natural_rpm_end: Some(2900.0),
            heavy_spot_step: Some((1.7, -45.0)),
            ..SimMode::default()
        },
        SimMode {
            natural_rpm: 4100.0,
            damping_ratio: 0.03,
            eccentricity: 0.4,
            heavy_spot_deg: 250.0,
            natural_rpm_end: Some(3900.0),
            heavy_spot_step: Some((0.0, 10.0)),
        },
    ];
    a.noise_rms = 0.05;
    a.tones = vec![Tone {
        freq_hz: 50.0,
        amplitude: 0.03,
    }];
    let mut b = a.clone();
    b.name = "b".into();
    b.probe_angle_deg = 90.0;
    // Step on an exact sample (1.25 s × 2048) and at a rebuild boundary of the first mode.
    b.modes[0].heavy_spot_step = Some((1.25, 20.0));
    let cfg = SimConfig {
        sample_rate: 2048.0,
        profile: SpeedProfile::run_up_hold_coast_down(300.0, 4800.0, 0.6, 1.0, 0.4, 0.9),
        channels: vec![a, b],
        seed: 7,
        ..SimConfig::default()
    };
    let reference = run_all(&mut Simulator::new(cfg.clone()).expect("valid"), 4096);
    for block in [1, 255, 256, 1000, 1025] {
        let o = run_all(&mut Simulator::new(cfg.clone()).expect("valid"), block);
        assert_eq!(o.len(), reference.len());
        assert!(
            o.iter()
                .zip(&reference)
                .all(|(x, y)| x.to_bits() == y.to_bits()),
            "block {block}"
        );
    }
    // The changes are really in the output: without them the samples differ.
    let mut plain = cfg;
    for ch in &mut plain.channels {
        for m in &mut ch.modes {
            m.natural_rpm_end = None;
            m.heavy_spot_step = None;
        }
    }
    let o = run_all(&mut Simulator::new(plain).expect("valid"), 4096);
    assert!(o.iter().zip(&reference).any(|(x, y)| (x - y).abs() > 1e-3));
}

#[test]
fn validation_names_the_bad_change() {
    let bad = |m: SimMode| {
        let mut cfg = SimConfig::default();
        cfg.channels[0].modes.push(m);
        cfg.validate().expect_err("invalid").field().to_string()
    };
    assert_eq!(
        bad(SimMode {
            natural_rpm_end: Some(0.0),
            ..SimMode::default()
        }),
        "channels[0].modes[1].natural_rpm_end"
    );
    assert_eq!(
        bad(SimMode {
            natural_rpm_end: Some(f64::INFINITY),
            ..SimMode::default()
        }),
        "channels[0].modes[1].natural_rpm_end"
    );
    assert_eq!(
        bad(SimMode {
            heavy_spot_step: Some((f64::NAN, 30.0)),
            ..SimMode::default()
        }),
        "channels[0].modes[1].heavy_spot_step.time_s"
    );
    assert_eq!(
        bad(SimMode {
            heavy_spot_step: Some((-1.0, 30.0)),
            ..SimMode::default()
        }),
        "channels[0].modes[1].heavy_spot_step.time_s"
    );
    assert_eq!(
        bad(SimMode {
            heavy_spot_step: Some((1.0, f64::INFINITY)),
            ..SimMode::default()
        }),
        "channels[0].modes[1].heavy_spot_step.degrees"
    );
    let mut cfg = SimConfig::default();
    cfg.channels[0].modes[0].natural_rpm_end = Some(2000.0);
    cfg.channels[0].modes[0].heavy_spot_step = Some((3.0, 90.0));
    assert!(cfg.validate().is_ok());
}

#[test]
fn changes_at_a_time_follow_the_settings() {
    // Definitions of the fields (linear drift in time, a step of the heavy spot).
    let m = SimMode {
        natural_rpm: 2000.0,
        natural_rpm_end: Some(1500.0),
        heavy_spot_deg: 10.0,
        heavy_spot_step: Some((4.0, 30.0)),
        ..SimMode::default()
    };
    assert_eq!(m.natural_rpm_at(0.0, 10.0), 2000.0);
    assert_eq!(m.natural_rpm_at(5.0, 10.0), 1750.0);
    assert_eq!(m.natural_rpm_at(10.0, 10.0), 1500.0);
    assert_eq!(m.natural_rpm_at(12.0, 10.0), 1500.0);
    assert_eq!(m.heavy_spot_deg_at(3.9), 10.0);
    assert_eq!(m.heavy_spot_deg_at(4.0), 40.0);
    let at = m.steady_vector_at(1000.0, 5.0, 5.0, 10.0);
    let fixed = SimMode {
        natural_rpm: 1750.0,
        heavy_spot_deg: 40.0,
        natural_rpm_end: None,
        heavy_spot_step: None,
        ..m.clone()
    };
    assert!((at - fixed.steady_vector(1000.0, 5.0)).norm() < 1e-15);
    let ch = SimChannel {
        modes: vec![m.clone()],
        ..SimChannel::new("x")
    };
    assert_eq!(ch.steady_1x_at(1000.0, 0.0, 10.0), ch.steady_1x(1000.0));
}
