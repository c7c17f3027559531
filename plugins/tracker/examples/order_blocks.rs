//! Writes order-map blocks of a simulated run-up as JSON lines, for an independent check of the
//! spectra with numpy (`scripts/check_order_spectra.py`).
//!
//! Each line holds one block: the window's name, the resampled angle-domain block before windowing,
//! and veer's amplitudes. The signal is generated here with plain sines so the check depends on
//! nothing but the order tracker:
//!
//! ```text
//! cargo run -q --release -p veer-tracker --example order_blocks | python3 scripts/check_order_spectra.py
//! ```

use std::f64::consts::TAU;
use std::fmt::Write as _;
use std::io::Write as _;

use veer_tracker::spectrum::{OrderMapConfig, OrderSpectrum, OrderTracker, Window};
use veer_tracker::Revolution;

/// Sample rate, Hz.
const FS: f64 = 12_800.0;
/// Run-up: speed `F0 + ACCEL·τ` rev/s from the first reference pulse at `T_P0`.
const F0: f64 = 10.0;
const ACCEL: f64 = 3.75;
const T_P0: f64 = 0.05;
/// Length of the record, s.
const DURATION: f64 = 8.2;
/// Samples per push, as a data logger would deliver them.
const CHUNK: usize = 1000;

/// Shaft angle in turns since the first pulse.
fn turns(t: f64) -> f64 {
    let tau = t - T_P0;
    F0 * tau + 0.5 * ACCEL * tau * tau
}

/// Time of reference pulse `k` (root of `ACCEL/2·τ² + F0·τ − k = 0`).
fn pulse(k: u64) -> f64 {
    let k = k as f64;
    T_P0 + 2.0 * k / (F0 + (F0 * F0 + 2.0 * ACCEL * k).sqrt())
}

/// Revolution `k` with its exact quadratic angle model.
fn revolution(k: u64) -> Revolution {
    let t_start = pulse(k);
    Revolution {
        index: k,
        t_start,
        t_end: pulse(k + 1),
        c1: F0 + ACCEL * (t_start - T_P0),
        c2: 0.5 * ACCEL,
    }
}

/// The vibration signal, µm: 1X, 2X, a 0.5X whirl, 7.25X, an order-50 component above the angle
/// Nyquist (which the anti-alias filter must remove), a fixed 60 Hz pickup and some noise.
fn signal(t: f64, noise: f64) -> f64 {
    let th = TAU * turns(t);
    40.0 * (th - 0.6).cos()
        + 12.0 * (2.0 * th + 1.1).cos()
        + 5.0 * (0.5 * th).cos()
        + 3.0 * (7.25 * th + 0.2).sin()
        + 4.0 * (50.0 * th).cos()
        + 2.0 * (TAU * 60.0 * t).cos()
        + noise
}

/// Deterministic noise in [−0.5, 0.5) from a 64-bit LCG (Knuth's MMIX constants).
struct Lcg(u64);

impl Lcg {
    fn next(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (self.0 >> 11) as f64 / (1u64 << 53) as f64 - 0.5
    }
}

/// A JSON array of `f32` values in shortest round-trip form.
fn json_array(out: &mut String, values: &[f32]) {
    out.push('[');
    for (i, v) in values.iter().enumerate() {
        if i > 0 {
            out.push(',');
        }
        if v.is_finite() {
            let _ = write!(out, "{v:e}");
        } else {
            out.push_str("null");
        }
    }
    out.push(']');
}

fn json_line(
    window: Window,
    cfg: &OrderMapConfig,
    block: usize,
    s: &OrderSpectrum,
    x: &[f32],
) -> String {
    let mut out = String::with_capacity(16 * (x.len() + s.amplitudes.len()));
    let _ = write!(
        out,
        "{{\"block\":{block},\"window\":\"{}\",\"samples_per_rev\":{},\"revs_per_block\":{},\
         \"time_s\":{},\"speed_rpm\":{},\"order_step\":{},\"resampled\":",
        window.name(),
        cfg.samples_per_rev,
        cfg.revs_per_block,
        s.time_s,
        s.speed_rpm,
        s.order_step
    );
    json_array(&mut out, x);
    out.push_str(",\"amplitudes\":");
    json_array(&mut out, &s.amplitudes);
    out.push('}');
    out
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let windows = [Window::Hann, Window::Rectangular, Window::FlatTop];
    let mut trackers = Vec::new();
    for window in windows {
        let cfg = OrderMapConfig {
            window,
            ..OrderMapConfig::default()
        };
        trackers.push((window, OrderTracker::new(&cfg, FS, 0.0, 0.5)?, 0usize));
    }
    let n = (DURATION * FS) as usize;
    let mut noise = Lcg(2024);
    let x: Vec<f32> = (0..n)
        .map(|i| signal(i as f64 / FS, noise.next()) as f32)
        .collect();

    let stdout = std::io::stdout();
    let mut out = std::io::BufWriter::new(stdout.lock());
    let mut next_rev = 0u64;
    let mut pushed = 0usize;
    for chunk in x.chunks(CHUNK) {
        for (_, tr, _) in trackers.iter_mut() {
            tr.push_samples(chunk);
        }
        pushed += chunk.len();
        let t_last = (pushed - 1) as f64 / FS;
        // A revolution is ready once the samples to its end plus two samples are in.
        while revolution(next_rev).t_end + 2.0 / FS <= t_last {
            let rev = revolution(next_rev);
            for (window, tr, blocks) in trackers.iter_mut() {
                if let Some(s) = tr.push_revolution(&rev) {
                    let block = tr.last_block().ok_or("spectrum without a block")?;
                    writeln!(
                        out,
                        "{}",
                        json_line(*window, tr.config(), *blocks, &s, block)
                    )?;
                    *blocks += 1;
                }
            }
            next_rev += 1;
        }
    }
    out.flush()?;
    Ok(())
}
