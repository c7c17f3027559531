//! Critical speeds tracked at steady speed (the drift estimators), against the single-mode unbalance
//! response of S. S. Rao, *Mechanical Vibrations*, 5th ed. 2011, §3.7 (REFERENCES §4, confirmed):
//! `v = m·r²/(1 − r² + 2jζr) + b`, lag `φ = atan2(2ζr, 1 − r²)`.
//!
//! The recordings here are per-revolution 1X vectors generated directly from that closed form with
//! Gaussian noise, not sampled waveforms: six hours at 1450 r/min are 522 000 revolutions, and at
//! steady speed (wander periods of minutes against a settling time of a twentieth of a second) the
//! steady-state vector per revolution is what the waveform simulator would give after order tracking.
//! The model comes from a simulated run-up fitted by the crate's own `fit_mode`, so fit error is part
//! of what is checked.

use veer_tracker::drift::{
    Change, CriticalModel, DriftAlert, DriftAlertConfig, DriftAlertEvent, Estimate, Estimator,
    EstimatorConfig, SlopeConfig, SlopeEstimate, SlopeEstimator,
};
use veer_tracker::margin::{required_margin_pct, MarginRule, OperatingRange, Side};
use veer_tracker::resonance::fit_mode;
use veer_tracker::sim::unbalance_response;
use veer_tracker::{from_amp_lag, Complex64, ResponsePoint};

/// Running speed, r/min.
const RUN_RPM: f64 = 1450.0;
/// Damping ratio of the mode.
const ZETA: f64 = 0.1;
/// Per-component noise of one revolution's vector, µm (about 1° of phase at the start).
const NOISE: f64 = 1.0;
/// Six hours, s.
const SIX_HOURS: f64 = 6.0 * 3600.0;

/// SplitMix64 with Box–Muller: deterministic noise without a dependency.
struct Noise(u64);

impl Noise {
    fn next(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        ((z >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    fn gaussian(&mut self) -> f64 {
        let u1 = self.next();
        let u2 = self.next();
        (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
    }

    fn complex(&mut self, sigma: f64) -> Complex64 {
        Complex64::new(sigma * self.gaussian(), sigma * self.gaussian())
    }
}

/// The machine: one mode, a constant background (tails of other modes) and slow-roll runout.
#[derive(Clone, Copy)]
struct Machine {
    unbalance: Complex64,
    background: Complex64,
    runout: Complex64,
}

impl Machine {
    fn new() -> Self {
        Self {
            unbalance: from_amp_lag(40.0, 60.0),
            background: from_amp_lag(1.5, 30.0),
            runout: from_amp_lag(5.0, 200.0),
        }
    }

    fn vector(&self, rpm: f64, natural_rpm: f64, turn_deg: f64) -> Complex64 {
        let m = self.unbalance * Complex64::from_polar(1.0, -turn_deg.to_radians());
        m * unbalance_response(rpm / natural_rpm, ZETA) + self.background + self.runout
    }
}

/// A run-up from 200 to 2600 r/min with the natural speed at `natural_rpm`, slow-roll compensated and
/// fitted; the model of the critical as the last good event left it.
fn model_from_run_up(machine: &Machine, natural_rpm: f64, noise: &mut Noise) -> CriticalModel {
    let n = 3000;
    let raw: Vec<ResponsePoint> = (0..n)
        .map(|i| {
            let rpm = 200.0 + 2400.0 * i as f64 / (n - 1) as f64;
            ResponsePoint {
                time_s: i as f64 * 0.1,
                speed_rpm: rpm,
                vector: machine.vector(rpm, natural_rpm, 0.0) + noise.complex(NOISE),
            }
        })
        .collect();
    // Slow-roll vector: the mean over 200–350 r/min, as a site would pick it.
    let slow: Vec<_> = raw.iter().filter(|p| p.speed_rpm <= 350.0).collect();
    let slow_roll = slow.iter().map(|p| p.vector).sum::<Complex64>() / slow.len() as f64;
    let compensated: Vec<ResponsePoint> = raw
        .iter()
        .map(|p| ResponsePoint {
            vector: p.vector - slow_roll,
            ..*p
        })
        .collect();
    let peak = compensated
        .iter()
        .max_by(|a, b| a.vector.norm().total_cmp(&b.vector.norm()))
        .expect("points");
    let fit = fit_mode(&compensated, peak.speed_rpm, 0.08).expect("the run-up fits");
    CriticalModel::from_fit(&fit, slow_roll).expect("a valid model")
}

/// Slow, natural wander of the running speed: ±0.5 % at most, periods of 7 and 23 minutes.
fn wander_rpm(t: f64) -> f64 {
    let w = 0.6 * (std::f64::consts::TAU * t / 420.0 + 0.3).sin()
        + 0.4 * (std::f64::consts::TAU * t / 1380.0 + 1.1).sin();
    RUN_RPM * (1.0 + 0.005 * w)
}

/// Natural speed falling linearly from 1.30 to 1.05 times the running speed over six hours.
fn drifting_natural(t: f64) -> f64 {
    RUN_RPM * (1.30 - 0.25 * t / SIX_HOURS)
}

struct Run {
    estimates: Vec<Estimate>,
    slopes: Vec<SlopeEstimate>,
    alerts: Vec<DriftAlertEvent>,
}

fn alert_config(model: &CriticalModel) -> DriftAlertConfig {
    DriftAlertConfig {
        range: OperatingRange::new(1380.0, 1460.0).expect("valid range"),
        rule: MarginRule::Api2005,
        af: Some(0.5 / model.damping_ratio),
        horizon_s: 1800.0,
        trend_window_s: 3600.0,
        sigmas: 2.0,
        persistence: 3,
    }
}

/// Feeds revolution by revolution for `duration_s`; the natural speed and unbalance turn follow
/// `natural(t)` and `turn(t)`.
fn run(
    machine: &Machine,
    model: &CriticalModel,
    duration_s: f64,
    natural: impl Fn(f64) -> f64,
    turn: impl Fn(f64) -> f64,
    noise: &mut Noise,
) -> Run {
    let mut est = Estimator::new(model.clone(), EstimatorConfig::default()).expect("valid");
    let mut slope = SlopeEstimator::new(SlopeConfig {
        damping_ratio: model.damping_ratio,
        slow_roll: model.slow_roll + model.background,
        ..SlopeConfig::default()
    })
    .expect("valid");
    let mut alert = DriftAlert::new(alert_config(model), model).expect("valid alert settings");
    let mut out = Run {
        estimates: Vec::new(),
        slopes: Vec::new(),
        alerts: Vec::new(),
    };
    let mut t = 0.0;
    while t < duration_s {
        let rpm = wander_rpm(t);
        let period = 60.0 / rpm;
        let mid = t + 0.5 * period;
        let v = machine.vector(rpm, natural(mid), turn(mid)) + noise.complex(NOISE);
        if let Some(e) = est.push(mid, rpm, v) {
            if let Some(a) = alert.update(&e) {
                out.alerts.push(a);
            }
            out.estimates.push(e);
        }
        if let Some(s) = slope.push(mid, rpm, v) {
            out.slopes.push(s);
        }
        t += period;
    }
    out
}

/// The time the true critical enters the required margin above the range: the natural speed
/// falls linearly, so the crossing is solved in closed form.
fn true_breach_time(cfg: &DriftAlertConfig) -> f64 {
    let required = required_margin_pct(cfg.rule, Some(0.5 / ZETA), Side::Above);
    let peak = 1.0 / (1.0 - 2.0 * ZETA * ZETA).sqrt();
    let limit_nn = cfg.range.max_rpm * (1.0 + required / 100.0) / peak;
    (1.30 - limit_nn / RUN_RPM) / 0.25 * SIX_HOURS
}

#[test]
fn drifting_critical_is_tracked_and_alerted_in_time() {
    let machine = Machine::new();
    let mut noise = Noise(0x5EED_D21F);
    let model = model_from_run_up(&machine, drifting_natural(0.0), &mut noise);
    eprintln!(
        "run-up fit: Nn {:.1} r/min (true {:.1}), zeta {:.4} (true {ZETA})",
        model.natural_rpm,
        drifting_natural(0.0),
        model.damping_ratio
    );
    let out = run(
        &machine,
        &model,
        SIX_HOURS,
        drifting_natural,
        |_| 0.0,
        &mut noise,
    );
    assert!(out.estimates.len() > 600, "{} windows", out.estimates.len());

    // Tracking: within 2 % wherever the natural-to-running ratio lies in 0.75..1.35 (all of it).
    let mut worst: f64 = 0.0;
    let mut worst_locus: f64 = 0.0;
    let mut sq = 0.0;
    let mut count = 0;
    for e in &out.estimates {
        let truth = drifting_natural(e.time_s);
        let ratio = truth / e.rpm;
        if !(0.75..=1.35).contains(&ratio) {
            continue;
        }
        assert!(e.informative, "{e:?}");
        assert_ne!(e.change, Change::Unbalance, "{e:?}");
        let err = (e.natural_rpm - truth) / truth * 100.0;
        assert!(err.abs() < 2.0, "t {:.0} s: error {err:.3} %", e.time_s);
        // The stated uncertainty is honest to within the model error the fit leaves.
        assert!(e.sigma_rpm > 0.0 && e.sigma_rpm.is_finite());
        worst = worst.max(err.abs());
        worst_locus = worst_locus.max(e.locus_residual);
        sq += err * err;
        count += 1;
    }
    assert!(count > 600);
    let rms = (sq / count as f64).sqrt();
    eprintln!("phase tracking: {count} windows, rms error {rms:.3} %, worst {worst:.3} %, largest locus residual {worst_locus:.4}");

    // Alert: before the true critical enters the margin, and not before the estimate is informative.
    let breach = true_breach_time(&alert_config(&model));
    let first_informative = out
        .estimates
        .iter()
        .find(|e| e.informative)
        .map(|e| e.time_s)
        .expect("an informative window");
    let approaches: Vec<f64> = out
        .alerts
        .iter()
        .filter_map(|a| match a {
            DriftAlertEvent::CriticalApproach { time_s, .. } => Some(*time_s),
            DriftAlertEvent::VectorChange { .. } => None,
        })
        .collect();
    assert!(
        out.alerts
            .iter()
            .all(|a| matches!(a, DriftAlertEvent::CriticalApproach { .. })),
        "no vector-change alert on a pure stiffness drift: {:?}",
        out.alerts
    );
    let first_alert = *approaches.first().expect("the approach is alerted");
    eprintln!(
        "alert at {:.0} s, true breach at {breach:.0} s (lead {:.0} s), first informative {first_informative:.0} s",
        first_alert,
        breach - first_alert
    );
    assert!(
        first_alert < breach,
        "alert {first_alert} after breach {breach}"
    );
    assert!(first_alert >= first_informative);
    let raising = out
        .estimates
        .iter()
        .find(|e| e.time_s == first_alert)
        .expect("the window that raised the alert");
    assert!(raising.informative, "{raising:?}");
    // Not absurdly early either: within the horizon plus the 2σ bound's reach of the breach.
    assert!(
        breach - first_alert < 2.0 * 3600.0,
        "alert {first_alert}, breach {breach}"
    );

    // The slope of the lag against the wander, with no modal vector: informative close to the
    // critical, and there within 3 %.
    let mut slope_worst: f64 = 0.0;
    let mut slope_count = 0;
    for s in out.slopes.iter().filter(|s| s.informative) {
        let truth = drifting_natural(s.time_s);
        let err = (s.natural_rpm - truth) / truth * 100.0;
        assert!(
            err.abs() < 5.0,
            "slope at t {:.0} s: error {err:.2} %",
            s.time_s
        );
        slope_worst = slope_worst.max(err.abs());
        slope_count += 1;
    }
    eprintln!(
        "slope: {slope_count} of {} windows informative, worst {slope_worst:.2} %",
        out.slopes.len()
    );
    assert!(
        slope_count >= out.slopes.len() / 3,
        "{slope_count} informative"
    );
}

#[test]
fn turned_unbalance_is_a_vector_change_not_a_critical_shift() {
    let machine = Machine::new();
    let mut noise = Noise(0xBAD_B1ADE);
    let natural = RUN_RPM * 1.30;
    let model = model_from_run_up(&machine, natural, &mut noise);
    let step_s = 3600.0;
    let out = run(
        &machine,
        &model,
        2.0 * 3600.0,
        |_| natural,
        |t| if t >= step_s { 30.0 } else { 0.0 },
        &mut noise,
    );
    let window = EstimatorConfig::default().window_s;
    for e in &out.estimates {
        if e.time_s + window < step_s {
            assert_ne!(e.change, Change::Unbalance, "{e:?}");
            assert!(e.informative);
        } else if e.time_s - window > step_s {
            assert_eq!(e.change, Change::Unbalance, "{e:?}");
            assert!(!e.informative);
        }
    }
    assert!(
        out.alerts
            .iter()
            .all(|a| matches!(a, DriftAlertEvent::VectorChange { .. })),
        "no critical-shift alert: {:?}",
        out.alerts
    );
    let vector_alerts: Vec<_> = out
        .alerts
        .iter()
        .filter_map(|a| match a {
            DriftAlertEvent::VectorChange {
                time_s,
                locus_residual,
            } => Some((*time_s, *locus_residual)),
            _ => None,
        })
        .collect();
    assert_eq!(vector_alerts.len(), 1, "{vector_alerts:?}");
    let (at, residual) = vector_alerts[0];
    assert!(at > step_s && at < step_s + 5.0 * window, "alert at {at}");
    // What a lag-only tracker would have said: the 30° turn read as a natural speed far inside the
    // required margin, a false critical alarm.
    let after = out
        .estimates
        .iter()
        .find(|e| e.time_s > step_s + window)
        .expect("windows after the step");
    let phase_only = after.by_phase.expect("the lag inverts");
    let cfg = alert_config(&model);
    let required = required_margin_pct(cfg.rule, cfg.af, Side::Above);
    let phase_only_margin =
        (model.critical_rpm(phase_only) - cfg.range.max_rpm) / cfg.range.max_rpm * 100.0;
    eprintln!(
        "vector change at {at:.0} s, locus residual {residual:.3}; lag alone would say {phase_only:.0} r/min, margin {phase_only_margin:.1} % < {required:.1} %"
    );
    assert!(phase_only_margin < required);
}

/// One noisy sweep across the half-power band; returns the natural-speed errors (percent) of the
/// phase-at-90° estimator and of the amplitude-peak estimator.
fn sweep_errors(noise: &mut Noise, sigma_rel: f64) -> (f64, f64) {
    let nn = 1000.0;
    let zeta = 0.05;
    let m = from_amp_lag(10.0, 40.0);
    let sigma = sigma_rel * m.norm() / (2.0 * zeta);
    let k = 21;
    let (mut speeds, mut lags, mut amps) = (Vec::new(), Vec::new(), Vec::new());
    for i in 0..k {
        let rpm = nn * (1.0 - zeta + 2.0 * zeta * i as f64 / (k - 1) as f64);
        let v = m * unbalance_response(rpm / nn, zeta) + noise.complex(sigma);
        let z = v / m;
        speeds.push(rpm);
        lags.push((-z.arg()).to_degrees());
        amps.push(v.norm());
    }
    // Phase held at 90°: straight line of lag against speed, solved for 90° past the mode's lag.
    let n = k as f64;
    let mean = |x: &[f64]| x.iter().sum::<f64>() / n;
    let (sm, lm) = (mean(&speeds), mean(&lags));
    let sxy: f64 = speeds
        .iter()
        .zip(&lags)
        .map(|(s, l)| (s - sm) * (l - lm))
        .sum();
    let sxx: f64 = speeds.iter().map(|s| (s - sm).powi(2)).sum();
    let slope = sxy / sxx;
    let by_phase = sm + (90.0 - lm) / slope;
    // Amplitude maximised: parabola through the points, its vertex, corrected from the peak speed
    // to the natural speed by √(1 − 2ζ²) (Rao §3.7).
    let x: Vec<f64> = speeds.iter().map(|s| (s - nn) / nn).collect();
    let mut a = [[0.0; 3]; 3];
    let mut b = [0.0; 3];
    for (&xi, &yi) in x.iter().zip(&amps) {
        let p = [1.0, xi, xi * xi];
        for ((row, br), &pr) in a.iter_mut().zip(b.iter_mut()).zip(&p) {
            for (cell, &pc) in row.iter_mut().zip(&p) {
                *cell += pr * pc;
            }
            *br += pr * yi;
        }
    }
    let c = solve3(a, b);
    let vertex = nn * (1.0 - c[1] / (2.0 * c[2]));
    let by_amp = vertex * (1.0 - 2.0 * zeta * zeta).sqrt();
    ((by_phase - nn) / nn * 100.0, (by_amp - nn) / nn * 100.0)
}

fn solve3(mut a: [[f64; 3]; 3], mut b: [f64; 3]) -> [f64; 3] {
    for col in 0..3 {
        let piv = (col..3)
            .max_by(|&i, &j| a[i][col].abs().total_cmp(&a[j][col].abs()))
            .expect("rows");
        a.swap(col, piv);
        b.swap(col, piv);
        let (pivot_row, pivot_b) = (a[col], b[col]);
        for (row, br) in a.iter_mut().zip(b.iter_mut()).skip(col + 1) {
            let f = row[col] / pivot_row[col];
            for (cell, &p) in row.iter_mut().zip(&pivot_row).skip(col) {
                *cell -= f * p;
            }
            *br -= f * pivot_b;
        }
    }
    let mut x = [0.0; 3];
    for row in (0..3).rev() {
        let s: f64 = (row + 1..3).map(|k| a[row][k] * x[k]).sum();
        x[row] = (b[row] - s) / a[row][row];
    }
    x
}

#[test]
fn holding_the_phase_at_90_beats_maximising_the_amplitude() {
    // Common practice: a resonance is tracked more precisely by the speed where the lag passes
    // 90° than by the speed of the amplitude maximum, because the lag is steepest where the
    // amplitude is flattest. Same points, same noise, both estimators unbiased on clean data.
    let mut noise = Noise(0x0009_0DE6);
    // On clean data both estimators are close: the straight line through the lag and the parabola
    // through the amplitude leave small model biases (recomputed here, not assumed).
    let (bias_p, bias_a) = sweep_errors(&mut noise, 0.0);
    eprintln!("clean-data bias: phase-90° {bias_p:.4} %, amplitude peak {bias_a:.4} %");
    assert!(
        bias_p.abs() < 0.2 && bias_a.abs() < 0.2,
        "{bias_p} {bias_a}"
    );
    for sigma_rel in [0.01, 0.03] {
        let trials = 400;
        let (mut ep, mut ea) = (Vec::new(), Vec::new());
        for _ in 0..trials {
            let (p, a) = sweep_errors(&mut noise, sigma_rel);
            ep.push(p);
            ea.push(a);
        }
        let stats = |e: &[f64]| {
            let n = e.len() as f64;
            let mean = e.iter().sum::<f64>() / n;
            let sd = (e.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
            let rms = (e.iter().map(|x| x * x).sum::<f64>() / n).sqrt();
            (sd, rms)
        };
        let ((sd_p, rms_p), (sd_a, rms_a)) = (stats(&ep), stats(&ea));
        eprintln!(
            "noise {sigma_rel}: phase-90° sd {sd_p:.4} % rms {rms_p:.4} %; amplitude peak sd {sd_a:.4} % rms {rms_a:.4} %; sd ratio {:.1}",
            sd_a / sd_p
        );
        assert!(sd_a > 2.0 * sd_p, "phase sd {sd_p}, amplitude sd {sd_a}");
        assert!(rms_a > rms_p, "phase rms {rms_p}, amplitude rms {rms_a}");
    }
}
