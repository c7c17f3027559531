//! Tests of the order tracker against closed forms and slow references.

use super::*;
use crate::types::{Complex64, Revolution};

/// A shaft with a linear speed ramp: `f(t) = f0 + a·(t − t_p0)` rev/s, first reference pulse at
/// `t_p0`. Its angle in turns since that pulse is `f0·τ + a·τ²/2`.
#[derive(Clone, Copy)]
struct Shaft {
    f0: f64,
    accel: f64,
    t_p0: f64,
}

impl Shaft {
    fn turns(&self, t: f64) -> f64 {
        let tau = t - self.t_p0;
        self.f0 * tau + 0.5 * self.accel * tau * tau
    }

    fn pulse(&self, k: u64) -> f64 {
        // Root of a/2 τ² + f0 τ − k = 0, in the cancellation-free form.
        let k = k as f64;
        self.t_p0 + 2.0 * k / (self.f0 + (self.f0 * self.f0 + 2.0 * self.accel * k).sqrt())
    }

    /// Revolution `k` with the exact angle model: c1 is the speed at its start, c2 = a/2.
    fn revolution(&self, k: u64) -> Revolution {
        let t_start = self.pulse(k);
        Revolution {
            index: k,
            t_start,
            t_end: self.pulse(k + 1),
            c1: self.f0 + self.accel * (t_start - self.t_p0),
            c2: 0.5 * self.accel,
        }
    }
}

/// Samples of `f` at `t0 + i/fs`, `i < n`.
fn sampled(n: usize, fs: f64, t0: f64, f: impl Fn(f64) -> f64) -> Vec<f32> {
    (0..n).map(|i| f(t0 + i as f64 / fs) as f32).collect()
}

/// Pushes `x` in chunks of `chunk`, and each revolution as soon as its samples (to t_end + 2/fs)
/// are in; returns the spectra and the tracker.
fn run(
    cfg: &OrderMapConfig,
    fs: f64,
    t0: f64,
    x: &[f32],
    revs: &[Revolution],
    chunk: usize,
    anti_alias: bool,
) -> (Vec<OrderSpectrum>, OrderTracker) {
    let mut tr = OrderTracker::new(cfg, fs, t0, 1.0).expect("valid tracker");
    tr.anti_alias = anti_alias;
    let mut out = Vec::new();
    let mut next = 0;
    let mut pushed = 0;
    for c in x.chunks(chunk) {
        tr.push_samples(c);
        pushed += c.len();
        let t_last = t0 + (pushed - 1) as f64 / fs;
        while next < revs.len() && revs[next].t_end + 2.0 / fs <= t_last {
            out.extend(tr.push_revolution(&revs[next]));
            next += 1;
        }
    }
    (out, tr)
}

fn revs_until(shaft: &Shaft, t_max: f64) -> Vec<Revolution> {
    (0..)
        .map(|k| shaft.revolution(k))
        .take_while(|r| r.t_end < t_max)
        .collect()
}

const TAU: f64 = std::f64::consts::TAU;

#[test]
fn pure_orders_read_their_amplitude_on_their_bin() {
    // x = A cos(2π n θ − φ) at constant speed, on-bin orders incl. 0.5X whirl and 7.25X. The
    // window's coherent gain (Harris, Proc. IEEE 66(1), 1978: Hann 0.5) corrects the peak to A.
    // Leakage of an on-bin tone in the periodic windows: Hann only into bins ±1, at A/2 (its DFT
    // kernel is −1/4, 1/2, −1/4; Harris 1978); rectangular nowhere; flat top into bins ±1..±4.
    let fs = 25_600.0;
    let shaft = Shaft {
        f0: 25.0,
        accel: 0.0,
        t_p0: 0.1,
    };
    let revs = revs_until(&shaft, 1.45);
    let n = (1.5 * fs) as usize;
    let a = 3.0;
    for window in [Window::Hann, Window::Rectangular, Window::FlatTop] {
        let cfg = OrderMapConfig {
            window,
            ..OrderMapConfig::default()
        };
        let neighbours = match window {
            Window::Hann => 1,
            Window::Rectangular => 0,
            Window::FlatTop => 4,
        };
        for order in [0.5, 1.0, 2.0, 7.25] {
            let x = sampled(n, fs, 0.0, |t| {
                a * (TAU * order * shaft.turns(t) - 0.7).cos()
            });
            let (spectra, _) = run(&cfg, fs, 0.0, &x, &revs, 1000, true);
            assert_eq!(spectra.len(), revs.len() / 16);
            for s in &spectra {
                let bin = (order * 16.0) as usize;
                let got = f64::from(s.amplitudes[bin]);
                assert!(
                    (got - a).abs() < 0.005 * a,
                    "{window:?} {order}X reads {got}"
                );
                if window == Window::Hann {
                    for nb in [bin - 1, bin + 1] {
                        let v = f64::from(s.amplitudes[nb]);
                        assert!((v - 0.5 * a).abs() < 0.005 * a, "Hann neighbour {v}");
                    }
                }
                for (k, &v) in s.amplitudes.iter().enumerate() {
                    if k.abs_diff(bin) > neighbours {
                        assert!(f64::from(v) < 1e-4 * a, "{window:?} {order}X bin {k} = {v}");
                    }
                }
                assert!((s.speed_rpm - 1500.0).abs() < 1e-6);
                assert_eq!(s.order_step, 1.0 / 16.0);
            }
        }
    }
}

#[test]
fn run_up_keeps_1x_in_its_bin_while_a_fixed_tone_smears() {
    // The point of computed order tracking (Fyfe & Munck, MSSP 11(2), 1997): in the angle domain
    // an order stays in its bin whatever the speed, while a fixed-frequency component sweeps
    // through the orders. Run-up 20 → 41 rev/s at 20 rev/s²; a 200 Hz tone moves from 10X to ~5X.
    let fs = 25_600.0;
    let (a, b, tone) = (2.0, 1.0, 200.0);
    let cfg = OrderMapConfig::default();
    let ramp = Shaft {
        f0: 20.0,
        accel: 20.0,
        t_p0: 0.05,
    };
    let steady = Shaft {
        f0: 20.0,
        accel: 0.0,
        t_p0: 0.05,
    };
    for (shaft, smears, t_max) in [(ramp, true, 1.1), (steady, false, 1.7)] {
        let n = (t_max * fs) as usize + 10;
        let x = sampled(n, fs, 0.0, |t| {
            a * (TAU * shaft.turns(t)).cos() + b * (TAU * tone * t + 0.3).cos()
        });
        let (spectra, _) = run(&cfg, fs, 0.0, &x, &revs_until(&shaft, t_max), 777, true);
        assert_eq!(spectra.len(), 2);
        for s in &spectra {
            // Within 0.1 %: a retune of the filter without rebuilding its state loses 0.2 % here.
            let one_x = f64::from(s.amplitudes[16]);
            assert!(
                (one_x - a).abs() < 0.001 * a,
                "1X reads {one_x} at {} r/min",
                s.speed_rpm
            );
            // The tone's region, 4.5X to 11X, away from the 1X lobe.
            let region = &s.amplitudes[72..=176];
            let peak = region.iter().copied().fold(0.0f32, f32::max);
            let spread = region.iter().filter(|&&v| f64::from(v) > 0.05 * b).count();
            println!(
                "{:.0} r/min: 1X {one_x:.5} (of {a}), tone peak {peak:.3} over {spread} bins",
                s.speed_rpm
            );
            if smears {
                assert!(
                    f64::from(peak) < 0.5 * b,
                    "tone peak {peak} should be smeared"
                );
                assert!(spread >= 10, "tone spread over {spread} bins");
            } else {
                // 200 Hz at 20 rev/s is exactly 10X: one bin, read in full.
                assert!((f64::from(s.amplitudes[160]) - b).abs() < 0.005 * b);
                assert!(spread <= 3);
            }
        }
    }
}

/// Pseudo-random values in [−1, 1) from a 64-bit LCG (Knuth's MMIX constants, common practice).
fn noise(seed: u64, n: usize) -> Vec<f64> {
    let mut s = seed;
    (0..n)
        .map(|_| {
            s = s
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (s >> 11) as f64 / (1u64 << 52) as f64 - 1.0
        })
        .collect()
}

#[test]
fn fft_matches_naive_dft_of_the_same_block() {
    // Slow, obviously correct reference: X_k = Σ_n w_n x_n e^{−2πj kn/N}, twiddles from an exact
    // table indexed by kn mod N. Checked on the second block, so the FFT's scratch holds junk.
    let fs = 20_000.0;
    let shaft = Shaft {
        f0: 31.0,
        accel: 4.0,
        t_p0: 0.02,
    };
    let t_max = 1.2;
    let n_samples = (t_max * fs) as usize + 10;
    let nz = noise(42, n_samples);
    let x: Vec<f32> = (0..n_samples)
        .map(|i| {
            let t = i as f64 / fs;
            (1.5 * (TAU * shaft.turns(t)).cos()
                + 0.4 * (TAU * 2.3 * shaft.turns(t)).sin()
                + 0.2 * nz[i]
                + 0.8) as f32
        })
        .collect();
    for window in [Window::Hann, Window::Rectangular, Window::FlatTop] {
        let cfg = OrderMapConfig {
            window,
            ..OrderMapConfig::default()
        };
        let (spectra, tr) = run(&cfg, fs, 0.0, &x, &revs_until(&shaft, t_max), 500, true);
        assert!(spectra.len() >= 2, "{} blocks", spectra.len());
        let block = tr.last_block().expect("a block");
        let n = block.len();
        let w = window.table(n);
        let tw: Vec<Complex64> = (0..n)
            .map(|m| Complex64::from_polar(1.0, -TAU * m as f64 / n as f64))
            .collect();
        let naive: Vec<Complex64> = (0..n)
            .map(|k| {
                (0..n)
                    .map(|j| tw[(k * j) % n] * (w[j] * f64::from(block[j])))
                    .sum()
            })
            .collect();
        let max = naive.iter().map(|c| c.norm()).fold(0.0, f64::max);
        let dev = naive
            .iter()
            .zip(&tr.fft_buf)
            .map(|(a, b)| (a - b).norm())
            .fold(0.0, f64::max);
        assert!(
            dev <= 1e-9 * max,
            "{window:?}: FFT vs naive {dev:e} of {max:e}"
        );
        // And the amplitudes are those DFT values scaled by 2/Σw (1/Σw at bin 0).
        let wsum: f64 = w.iter().sum();
        let last = spectra.last().expect("a spectrum");
        let amax = last.amplitudes.iter().copied().fold(0.0f32, f32::max) as f64;
        for (k, &v) in last.amplitudes.iter().enumerate() {
            let want = naive[k].norm() * if k == 0 { 1.0 } else { 2.0 } / wsum;
            assert!(
                (f64::from(v) - want).abs() <= 1e-6 * amax,
                "bin {k}: {v} vs {want}"
            );
        }
        // The 0.8 offset reads at bin 0 as the mean, within the noise's share.
        assert!((f64::from(last.amplitudes[0]) - 0.8).abs() < 0.05);
    }
}

#[test]
fn order_above_angle_nyquist_does_not_alias() {
    // 64 samples/rev: order 50 folds onto 64 − 50 = 14X (sampling theorem, common practice). The
    // tracking filter (cutoff 25.6 orders, eight poles) must bring it ≥ 40 dB down at bin 14X, at
    // every speed; without it the alias reads at full amplitude, which shows the check can fail.
    let fs = 25_600.0;
    let cfg = OrderMapConfig::default();
    let a = 1.0;
    for speed in [8.0, 25.0, 60.0] {
        let shaft = Shaft {
            f0: speed,
            accel: 0.0,
            t_p0: 0.2,
        };
        let t_max = 0.2 + 34.0 / speed;
        let n = (t_max * fs) as usize + 10;
        let x = sampled(n, fs, 0.0, |t| a * (TAU * 50.0 * shaft.turns(t)).cos());
        let revs = revs_until(&shaft, t_max);
        let (with, _) = run(&cfg, fs, 0.0, &x, &revs, 1000, true);
        let (without, _) = run(&cfg, fs, 0.0, &x, &revs, 1000, false);
        let alias = 14 * 16;
        for (s, raw) in with.iter().zip(&without) {
            let db = -20.0 * (f64::from(s.amplitudes[alias]) / a).log10();
            println!("{speed} rev/s: order 50 at the 14X alias bin is {db:.1} dB down");
            assert!(db >= 40.0, "{speed} rev/s: only {db:.1} dB");
            assert!(
                f64::from(raw.amplitudes[alias]) > 0.9 * a,
                "unfiltered alias missing"
            );
        }
        assert!(!with.is_empty());
    }
}

#[test]
fn spectra_do_not_depend_on_push_sizes() {
    let fs = 12_800.0;
    let shaft = Shaft {
        f0: 15.0,
        accel: 8.0,
        t_p0: 0.03,
    };
    let t_max = 2.5;
    let n = (t_max * fs) as usize + 10;
    let nz = noise(7, n);
    let x: Vec<f32> = (0..n)
        .map(|i| {
            let t = i as f64 / fs;
            ((TAU * shaft.turns(t)).cos() + 0.3 * (TAU * 0.5 * shaft.turns(t)).cos() + 0.1 * nz[i])
                as f32
        })
        .collect();
    let cfg = OrderMapConfig {
        revs_per_block: 8,
        ..OrderMapConfig::default()
    };
    let revs = revs_until(&shaft, t_max);
    let (reference, tr_ref) = run(&cfg, fs, 0.0, &x, &revs, 1000, true);
    assert!(reference.len() >= 4);
    for chunk in [1, 7] {
        let (s, tr) = run(&cfg, fs, 0.0, &x, &revs, chunk, true);
        assert_eq!(s, reference, "chunk {chunk}");
        assert_eq!(tr.last_block(), tr_ref.last_block());
    }
}

#[test]
fn gaps_restart_the_block() {
    let fs = 10_000.0;
    let shaft = Shaft {
        f0: 20.0,
        accel: 0.0,
        t_p0: 0.01,
    };
    let cfg = OrderMapConfig {
        revs_per_block: 4,
        ..OrderMapConfig::default()
    };
    let x = sampled(30_000, fs, 0.0, |t| (TAU * shaft.turns(t)).cos());
    let mut tr = OrderTracker::new(&cfg, fs, 0.0, 0.5).expect("valid");
    tr.push_samples(&x);
    // Revolutions 0, 1, 2, then 4 (3 missing): no block until 4, 5, 6, 7 are in.
    for k in [0, 1, 2] {
        assert!(tr.push_revolution(&shaft.revolution(k)).is_none());
    }
    for k in [4, 5, 6] {
        assert!(
            tr.push_revolution(&shaft.revolution(k)).is_none(),
            "rev {k}"
        );
    }
    let s = tr
        .push_revolution(&shaft.revolution(7))
        .expect("block 4..=7");
    let want_mid = 0.5 * (shaft.pulse(4) + shaft.pulse(8));
    assert!((s.time_s - want_mid).abs() < 1e-12);
    // reset_block discards a partial block.
    for k in [8, 9, 10] {
        assert!(tr.push_revolution(&shaft.revolution(k)).is_none());
    }
    tr.reset_block();
    assert!(tr.push_revolution(&shaft.revolution(11)).is_none());
    // A revolution whose samples are not there yet, or a non-physical one, gives nothing.
    assert!(tr.push_revolution(&shaft.revolution(80)).is_none());
    let bad = Revolution {
        c1: -1.0,
        ..shaft.revolution(12)
    };
    assert!(tr.push_revolution(&bad).is_none());
}

#[test]
fn memory_stays_bounded_without_revolutions() {
    let fs = 10_000.0;
    let max_rev_s = 0.25;
    let mut tr = OrderTracker::new(&OrderMapConfig::default(), fs, 0.0, max_rev_s).expect("valid");
    let chunk = vec![0.5f32; 1234];
    for _ in 0..200 {
        tr.push_samples(&chunk);
    }
    let cap = (2.0 * max_rev_s * fs) as usize + 8 + chunk.len();
    assert!(
        tr.buffered_samples() <= cap,
        "{} > {cap}",
        tr.buffered_samples()
    );
    assert!(tr.buffered_samples() >= cap - 10);
}

#[test]
fn config_errors_name_the_field() {
    assert_eq!(OrderMapConfig::default().validate(), Ok(()));
    let field_of = |c: OrderMapConfig| match c.validate() {
        Err(SpectrumError::InvalidConfig { field, .. }) => field,
        other => panic!("expected a config error, got {other:?}"),
    };
    let d = OrderMapConfig::default;
    assert_eq!(
        field_of(OrderMapConfig {
            samples_per_rev: 48,
            ..d()
        }),
        "samples_per_rev"
    );
    assert_eq!(
        field_of(OrderMapConfig {
            samples_per_rev: 4,
            ..d()
        }),
        "samples_per_rev"
    );
    assert_eq!(
        field_of(OrderMapConfig {
            revs_per_block: 0,
            ..d()
        }),
        "revs_per_block"
    );
    assert_eq!(
        field_of(OrderMapConfig {
            max_order: 25.7,
            ..d()
        }),
        "max_order"
    );
    assert_eq!(
        field_of(OrderMapConfig {
            max_order: f64::NAN,
            ..d()
        }),
        "max_order"
    );
    assert_eq!(
        OrderMapConfig {
            max_order: 25.6,
            ..d()
        }
        .validate(),
        Ok(())
    );
    let arg_of = |fs: f64, t0: f64, m: f64| match OrderTracker::new(&d(), fs, t0, m) {
        Err(SpectrumError::InvalidArgument { name, .. }) => name,
        other => panic!("expected an argument error, got {other:?}"),
    };
    assert_eq!(arg_of(0.0, 0.0, 1.0), "sample_rate");
    assert_eq!(arg_of(1e4, f64::INFINITY, 1.0), "t0");
    assert_eq!(arg_of(1e4, 0.0, -1.0), "max_rev_s");
    assert_eq!(arg_of(1e6, 0.0, 1e6), "max_rev_s");
    // Bins 0..=max_order on the 1/16 grid.
    assert_eq!(
        OrderMapConfig {
            max_order: 7.25,
            ..d()
        }
        .bin_count(),
        117
    );
}

/// Feeds revolutions the way the engine does when it samples the order map by rows: each row is
/// one settling revolution and a block of revolutions, each pushed with only its own samples (and
/// three before, four after) through `push_samples_at`; between rows `gap` revolutions are skipped.
/// Returns the spectra with the decimation factor each was made with.
fn run_rows(
    cfg: &OrderMapConfig,
    fs: f64,
    x: &[f32],
    revs: &[Revolution],
    gap: usize,
) -> (Vec<(OrderSpectrum, usize)>, OrderTracker) {
    let mut tr = OrderTracker::new(cfg, fs, 0.0, 1.0).expect("valid tracker");
    let mut out = Vec::new();
    let row = cfg.revs_per_block + 1;
    for (k, rev) in revs.iter().enumerate() {
        if k % (row + gap) >= row {
            tr.skip_revolution(rev);
            continue;
        }
        let from = ((rev.t_start * fs).floor() as usize).saturating_sub(3);
        let to = ((rev.t_end * fs).ceil() as usize + 4).min(x.len());
        tr.push_samples_at(from as u64, &x[from..to]);
        if let Some(s) = tr.push_revolution(rev) {
            out.push((s, tr.decimation()));
        }
    }
    (out, tr)
}

#[test]
fn low_speed_pure_orders_read_their_amplitude() {
    // 300 r/min at 51.2 kHz: the cutoff (25.6X = 128 Hz) is 1/400 of the sample rate, so the
    // samples are decimated ahead of the Butterworth (by 30 here: 51 200 / (12 × 128 × 1.05 × the
    // row's expected speed rise, none at constant speed), floored). Pure orders must still read their
    // amplitude within 0.5 % (coherent gain, Harris 1978), both with every revolution pushed and
    // with rows as the engine takes them.
    let fs = 51_200.0;
    let shaft = Shaft {
        f0: 5.0,
        accel: 0.0,
        t_p0: 0.13,
    };
    let t_max = 0.2 + 80.0 / shaft.f0;
    let n = (t_max * fs) as usize;
    let revs = revs_until(&shaft, t_max - 0.01);
    let cfg = OrderMapConfig::default();
    let a = 2.5;
    let want_d = (fs / (12.0 * 25.6 * shaft.f0 * 1.05)).floor() as usize;
    for order in [0.5, 1.0, 2.0, 7.25, 12.0] {
        let x = sampled(n, fs, 0.0, |t| {
            a * (TAU * order * shaft.turns(t) + 0.3).cos() + 0.8
        });
        let (every, tr) = run(&cfg, fs, 0.0, &x, &revs, 4096, true);
        assert_eq!(tr.decimation(), want_d);
        let (rows, _) = run_rows(&cfg, fs, &x, &revs, 16);
        assert_eq!(every.len(), revs.len() / 16);
        // Rows of 17 revolutions every 33: all complete ones are there.
        assert_eq!(rows.len(), (revs.len() + 16) / 33, "{order}X rows");
        let bin = (order * 16.0) as usize;
        let mut worst = 0.0f64;
        for s in every.iter().chain(rows.iter().map(|(s, _)| s)) {
            let got = f64::from(s.amplitudes[bin]);
            worst = worst.max((got - a).abs() / a);
            assert!((got - a).abs() < 0.005 * a, "{order}X reads {got}");
            for nb in [bin - 1, bin + 1] {
                let v = f64::from(s.amplitudes[nb]);
                assert!((v - 0.5 * a).abs() < 0.005 * a, "Hann neighbour {v}");
            }
            // Bin 0 holds the offset and Hann spreads it onto bin 1.
            for (k, &v) in s.amplitudes.iter().enumerate().skip(2) {
                if k.abs_diff(bin) > 1 {
                    assert!(f64::from(v) < 1e-4 * a, "{order}X bin {k} = {v}");
                }
            }
            assert!((f64::from(s.amplitudes[0]) - 0.8).abs() < 1e-4);
        }
        for (_, d) in &rows {
            assert_eq!(*d, want_d);
        }
        println!("{order}X at 300 r/min, D = {want_d}: worst amplitude error {worst:.2e}");
    }
}

#[test]
fn low_speed_alias_of_decimation_is_rejected() {
    // After decimation by D, a tone at j·fs/D ± f folds onto f (sampling theorem, common practice).
    // At 300 r/min and 51.2 kHz, tones placed to fold exactly onto 3X, 14X and 20X, near the first
    // and a higher folding band, must be at least 40 dB down at their bins: only the CIC stands
    // between them and the map. Where the closed form (Hogenauer 1981) puts them above the f32
    // noise floor they must read its level within 1 dB: 72 dB down for the 20X fold, the least
    // rejected. A first-order CIC (a plain boxcar) would leave that one only 24 dB down, and keeping
    // every D-th sample would pass it whole (checked below on the samples themselves).
    let fs = 51_200.0;
    let shaft = Shaft {
        f0: 5.0,
        accel: 0.0,
        t_p0: 0.11,
    };
    let t_max = 0.2 + 36.0 / shaft.f0;
    let n = (t_max * fs) as usize;
    let revs = revs_until(&shaft, t_max - 0.01);
    let cfg = OrderMapConfig::default();
    let probe = sampled(n, fs, 0.0, |t| (TAU * shaft.turns(t)).cos());
    let (_, tr) = run(&cfg, fs, 0.0, &probe, &revs, 4096, true);
    let d = tr.decimation();
    assert!(d >= 16, "decimation {d}");
    let fd = fs / d as f64;
    for (j, sign, order) in [
        (1.0, -1.0, 3.0),
        (1.0, 1.0, 14.0),
        (1.0, -1.0, 20.0),
        (5.0, 1.0, 3.0),
    ] {
        let f_order = order * shaft.f0;
        let tone = j * fd + sign * f_order;
        // Kept every D-th sample from the prime point (sample 0), the tone is the order exactly.
        for m in [1usize, 7, 1234] {
            let t = (m * d) as f64 / fs;
            let folded = (TAU * tone * t).cos();
            let alias = (TAU * sign * f_order * t).cos();
            assert!((folded - alias).abs() < 1e-6, "fold of {tone} Hz");
        }
        let x = sampled(n, fs, 0.0, |t| (TAU * tone * t).cos());
        let (spectra, _) = run(&cfg, fs, 0.0, &x, &revs, 4096, true);
        assert!(!spectra.is_empty());
        let bin = (order * 16.0) as usize;
        let mut lp = filter::AntiAliasFilter::new(fd);
        lp.set_cutoff(25.6 * shaft.f0);
        let gain = decimate::cic_magnitude(tone, fs, d)
            * decimate::compensator_gain(f_order, fd, d)
            * lp.magnitude(f_order);
        let want_db = -20.0 * gain.log10();
        for s in &spectra {
            let db = -20.0 * f64::from(s.amplitudes[bin]).log10();
            println!(
                "tone {tone:.1} Hz (j = {j}): {db:.1} dB down at {order}X (closed form {want_db:.1}), D = {d}"
            );
            assert!(
                db >= 40.0,
                "{tone} Hz folds onto {order}X only {db:.1} dB down"
            );
            if want_db < 100.0 {
                assert!((db - want_db).abs() < 1.0, "{db:.1} dB vs {want_db:.1}");
            }
        }
    }
}

#[test]
fn decimation_steps_down_within_a_fast_run_up() {
    // A run-up from 120 to 1200 r/min, long enough that the factor chosen at the first revolution
    // (for the speed expected 17 revolutions on) is outgrown within the record: the stream restarts with smaller factors at
    // the previous revolution's start, and the blocks go on. 1X must stay within 0.1 % through the
    // changes, as in the run-up test, and no block may be lost.
    let fs = 25_600.0;
    let shaft = Shaft {
        f0: 2.0,
        accel: 1.0,
        t_p0: 0.05,
    };
    let t_max = 18.0;
    let n = (t_max * fs) as usize + 10;
    let revs = revs_until(&shaft, t_max - 0.01);
    let cfg = OrderMapConfig::default();
    let a = 2.0;
    let x = sampled(n, fs, 0.0, |t| a * (TAU * shaft.turns(t)).cos());
    let mut tr = OrderTracker::new(&cfg, fs, 0.0, 1.0).expect("valid tracker");
    tr.push_samples(&x);
    let mut factors = Vec::new();
    let mut spectra = Vec::new();
    for rev in &revs {
        spectra.extend(tr.push_revolution(rev));
        if factors.last() != Some(&tr.decimation()) {
            factors.push(tr.decimation());
        }
    }
    println!("factors {factors:?}, {} spectra", spectra.len());
    assert!(factors.len() >= 3, "factors {factors:?}");
    assert!(factors.windows(2).all(|w| w[1] < w[0]));
    assert_eq!(spectra.len(), revs.len() / 16);
    for s in &spectra {
        let one_x = f64::from(s.amplitudes[16]);
        println!("{:.0} r/min: 1X {one_x:.5} (of {a})", s.speed_rpm);
        assert!(
            (one_x - a).abs() < 0.001 * a,
            "1X reads {one_x} at {:.0} r/min",
            s.speed_rpm
        );
    }
}

#[test]
fn decimated_spectra_do_not_depend_on_push_sizes() {
    // The same streaming independence with decimation, through changes of the factor: a run-up
    // from 180 to 900 r/min at 12.8 kHz, every revolution pushed.
    let fs = 12_800.0;
    let shaft = Shaft {
        f0: 3.0,
        accel: 2.0,
        t_p0: 0.07,
    };
    let t_max = 6.0;
    let n = (t_max * fs) as usize + 10;
    let nz = noise(11, n);
    let x: Vec<f32> = (0..n)
        .map(|i| {
            let t = i as f64 / fs;
            ((TAU * shaft.turns(t)).cos() + 0.4 * (TAU * 3.5 * shaft.turns(t)).sin() + 0.1 * nz[i])
                as f32
        })
        .collect();
    let cfg = OrderMapConfig {
        revs_per_block: 8,
        ..OrderMapConfig::default()
    };
    let revs = revs_until(&shaft, t_max);
    let (reference, tr_ref) = run(&cfg, fs, 0.0, &x, &revs, 4096, true);
    assert!(reference.len() >= 4);
    assert!(tr_ref.decimation() > 1);
    for chunk in [1, 7, 1000] {
        let (s, tr) = run(&cfg, fs, 0.0, &x, &revs, chunk, true);
        assert_eq!(s, reference, "chunk {chunk}");
        assert_eq!(tr.last_block(), tr_ref.last_block());
        assert_eq!(tr.decimation(), tr_ref.decimation());
    }
}

#[test]
fn busy_only_while_a_row_is_under_way() {
    // A caller samples rows: it pushes revolutions while the tracker is busy or it wants a row, and
    // skips them otherwise. Skipped revolutions must not make the tracker busy (which would have
    // the caller push and filter every other revolution between rows); a pushed settling
    // revolution and a block in progress must.
    let fs = 10_000.0;
    let shaft = Shaft {
        f0: 20.0,
        accel: 0.0,
        t_p0: 0.01,
    };
    let cfg = OrderMapConfig {
        revs_per_block: 4,
        ..OrderMapConfig::default()
    };
    let x = sampled(30_000, fs, 0.0, |t| (TAU * shaft.turns(t)).cos());
    let mut tr = OrderTracker::new(&cfg, fs, 0.0, 0.5).expect("valid");
    let push = |tr: &mut OrderTracker, k: u64| {
        let rev = shaft.revolution(k);
        let from = ((rev.t_start * fs).floor() as usize).saturating_sub(3);
        let to = (rev.t_end * fs).ceil() as usize + 4;
        tr.push_samples_at(from as u64, &x[from..to]);
        tr.push_revolution(&rev)
    };
    assert!(!tr.busy());
    for k in 0..3 {
        assert!(push(&mut tr, k).is_none());
        assert!(tr.busy(), "block in progress at {k}");
    }
    assert!(push(&mut tr, 3).is_some());
    assert!(!tr.busy());
    for k in 4..9 {
        tr.skip_revolution(&shaft.revolution(k));
        assert!(!tr.busy(), "skipped {k}");
    }
    // The next row: one settling revolution, then a block of four.
    assert!(push(&mut tr, 9).is_none());
    assert!(tr.busy(), "settled");
    for k in 10..13 {
        assert!(push(&mut tr, k).is_none());
        assert!(tr.busy());
    }
    let s = push(&mut tr, 13).expect("block 10..=13");
    assert!((s.time_s - 0.5 * (shaft.pulse(10) + shaft.pulse(14))).abs() < 1e-12);
    assert!(!tr.busy());
    tr.skip_revolution(&shaft.revolution(14));
    assert!(push(&mut tr, 15).is_none());
    tr.reset_block();
    assert!(!tr.busy());
}

#[test]
#[ignore = "throughput figure; run with --release -- --ignored --nocapture"]
fn throughput() {
    let fs = 51_200.0;
    let shaft = Shaft {
        f0: 50.0,
        accel: 0.5,
        t_p0: 0.01,
    };
    let t_max = 60.0;
    let n = (t_max * fs) as usize;
    let x = sampled(n, fs, 0.0, |t| (TAU * shaft.turns(t)).cos());
    let revs = revs_until(&shaft, t_max - 0.01);
    let cfg = OrderMapConfig::default();
    let start = std::time::Instant::now();
    let (spectra, _) = run(&cfg, fs, 0.0, &x, &revs, 1024, true);
    let dt = start.elapsed().as_secs_f64();
    println!(
        "{} samples, {} revolutions, {} spectra in {dt:.3} s: {:.1} M samples/s",
        n,
        revs.len(),
        spectra.len(),
        n as f64 / dt / 1e6
    );
    assert!(!spectra.is_empty());
}

#[test]
#[ignore = "throughput figures by speed; run with --release -- --ignored --nocapture"]
fn throughput_by_speed() {
    // Constant speeds through the range where the raw rate is far above the cutoff (decimated)
    // and where it is not, at 25.6 kHz, every revolution pushed.
    let fs = 25_600.0;
    let t_max = 40.0;
    let n = (t_max * fs) as usize;
    let cfg = OrderMapConfig::default();
    for rpm in [400.0, 1000.0, 2000.0, 3000.0, 6000.0] {
        let shaft = Shaft {
            f0: rpm / 60.0,
            accel: 0.0,
            t_p0: 0.01,
        };
        let x = sampled(n, fs, 0.0, |t| (TAU * shaft.turns(t)).cos());
        let revs = revs_until(&shaft, t_max - 0.01);
        let mut best = f64::INFINITY;
        for _ in 0..5 {
            let start = std::time::Instant::now();
            let (spectra, _) = run(&cfg, fs, 0.0, &x, &revs, 1024, true);
            best = best.min(start.elapsed().as_secs_f64());
            assert!(!spectra.is_empty());
        }
        println!("{rpm} r/min: {:.1} M samples/s", n as f64 / best / 1e6);
    }
}
