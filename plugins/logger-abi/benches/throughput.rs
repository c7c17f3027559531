//! Throughput of the C interface against the Rust API on the same simulated data: the engine
//! pushed directly (`Engine::push`), and through `veer_push_f32_planar` and `veer_push_f32`
//! (interleaved) called as the extern functions they are. Prints the median of several runs of
//! each and the ratios; the interface should cost well under 10 %.
//!
//! `cargo bench -p veer-logger-abi`

use std::time::Instant;
use veer_abi::exports::{
    veer_create, veer_destroy, veer_finish, veer_poll_json, veer_push_f32, veer_push_f32_planar,
    veer_set_revolutions,
};
use veer_tracker::engine::Engine;
use veer_tracker::sim::{SimChannel, SimConfig, SimMode, Simulator, SpeedProfile, TachSim};

const RATE: f64 = 25_600.0;
const BLOCK: usize = 4096;
const RUNS: usize = 11;

const CONFIG: &str = "min_operating_rpm = 5200\nmax_continuous_rpm = 6800\n\
tach = { channel = \"tach\", min_rpm = 30, max_rpm = 60000 }\n\
sensors = [ { channel = \"x\", units = \"um\" }, { channel = \"y\", units = \"um\" } ]\n";

/// A 60 s run-up through one mode, channel-major: `[tach, x, y]`.
fn simulate() -> Vec<Vec<f32>> {
    let mode = SimMode {
        natural_rpm: 2900.0,
        damping_ratio: 0.07,
        ..SimMode::default()
    };
    let cfg = SimConfig {
        sample_rate: RATE,
        profile: SpeedProfile::run_up_and_hold(300.0, 7000.0, 50.0, 10.0),
        tach: TachSim::default(),
        channels: vec![
            SimChannel {
                modes: vec![mode.clone()],
                ..SimChannel::new("x")
            },
            SimChannel {
                modes: vec![mode],
                probe_angle_deg: 90.0,
                ..SimChannel::new("y")
            },
        ],
        ..SimConfig::default()
    };
    let mut sim = Simulator::new(cfg).expect("a valid simulation");
    let mut inter = Vec::new();
    while sim.next_block(1 << 16, &mut inter) > 0 {}
    let mut cols: Vec<Vec<f32>> = (0..3)
        .map(|_| Vec::with_capacity(inter.len() / 3))
        .collect();
    for f in inter.chunks_exact(3) {
        for (c, &x) in cols.iter_mut().zip(f) {
            c.push(x);
        }
    }
    cols
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn rust_api(cols: &[Vec<f32>]) -> f64 {
    let cfg = veer_abi::config::parse(CONFIG).expect("config");
    let t = Instant::now();
    let mut e = Engine::new(cfg, RATE, 0.0).expect("engine");
    let n = cols[0].len();
    let mut at = 0;
    while at < n {
        let end = (at + BLOCK).min(n);
        let vib = [&cols[1][at..end], &cols[2][at..end]];
        e.push(&cols[0][at..end], &vib).expect("push");
        std::hint::black_box(e.take_updates());
        at = end;
    }
    let events = e.finish();
    let el = t.elapsed().as_secs_f64();
    assert!(
        e.stats().revolutions > 1000,
        "the tach was decoded: {:?}",
        e.stats()
    );
    std::hint::black_box(events);
    el
}

fn drain(h: u64, buf: &mut [u8]) {
    let mut len = 0usize;
    while veer_poll_json(h, buf.as_mut_ptr().cast(), buf.len(), &mut len) == 1 {}
}

fn c_api(cols: &[Vec<f32>], interleaved: bool) -> f64 {
    let config = std::ffi::CString::new(CONFIG).expect("no NUL");
    let mut buf = vec![0u8; 1 << 20];
    let n = cols[0].len();
    let inter: Vec<f32> = (0..n)
        .flat_map(|i| [cols[0][i], cols[1][i], cols[2][i]])
        .collect();
    let t = Instant::now();
    let mut h = 0u64;
    assert_eq!(veer_create(config.as_ptr(), &mut h), 0);
    // Per-revolution results off, as in the Rust run: the same work inside the engine.
    assert_eq!(veer_set_revolutions(h, 0), 0);
    let mut at = 0;
    while at < n {
        let end = (at + BLOCK).min(n);
        let t0 = at as f64 / RATE;
        let r = if interleaved {
            veer_push_f32(h, inter[3 * at..3 * end].as_ptr(), end - at, 3, RATE, t0)
        } else {
            let ptrs = [
                cols[0][at..].as_ptr(),
                cols[1][at..].as_ptr(),
                cols[2][at..].as_ptr(),
            ];
            veer_push_f32_planar(h, ptrs.as_ptr(), 3, end - at, RATE, t0)
        };
        assert_eq!(r, 0);
        drain(h, &mut buf);
        at = end;
    }
    assert_eq!(veer_finish(h), 0);
    drain(h, &mut buf);
    let el = t.elapsed().as_secs_f64();
    assert_eq!(veer_destroy(h), 0);
    el
}

fn main() {
    let cols = simulate();
    let samples = (cols[0].len() * 3) as f64;
    let _ = rust_api(&cols); // warm-up
    let mut rust = Vec::new();
    let mut planar = Vec::new();
    let mut inter = Vec::new();
    for _ in 0..RUNS {
        rust.push(rust_api(&cols));
        planar.push(c_api(&cols, false));
        inter.push(c_api(&cols, true));
    }
    let (r, p, i) = (median(rust), median(planar), median(inter));
    println!(
        "{} frames x 3 channels, blocks of {BLOCK}, median of {RUNS} runs",
        cols[0].len()
    );
    println!(
        "Rust Engine::push         {:8.3} s  {:7.1} M samples/s",
        r,
        samples / r / 1e6
    );
    println!(
        "veer_push_f32_planar      {:8.3} s  {:7.1} M samples/s  ratio {:.3}",
        p,
        samples / p / 1e6,
        p / r
    );
    println!(
        "veer_push_f32 interleaved {:8.3} s  {:7.1} M samples/s  ratio {:.3}",
        i,
        samples / i / 1e6,
        i / r
    );
}
