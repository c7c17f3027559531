//! `veer simulate`: writes a synthetic recording of a demo-plant machine.

use crate::cli::SimulateArgs;
use crate::decode::{CsvWriter, WavFormat, WavWriter};
use crate::plant;
use crate::serial::frames::{FrameEncoder, SampleFormat};
use crate::serial::text::TextEncoder;
use anyhow::{anyhow, bail, Context, Result};
use std::io::Write;
use std::path::Path;
use veer_tracker::sim::{SimChannel, SimConfig, Simulator, SpeedProfile, TachSim, Tone};

/// Parses `A<sep>B` of option `option` into two numbers, naming each part (`names`) in errors.
fn parse_pair(
    option: &str,
    s: &str,
    sep: char,
    form: &str,
    names: [&str; 2],
) -> Result<(f64, f64)> {
    let (a, b) = s
        .split_once(sep)
        .ok_or_else(|| anyhow!("{option}: `{s}` is not {form}"))?;
    let num = |x: &str, name: &str| -> Result<f64> {
        x.trim()
            .parse()
            .with_context(|| format!("{option}: {name} `{x}`"))
    };
    Ok((num(a, names[0])?, num(b, names[1])?))
}

/// Parses `T:RPM,T:RPM,...`.
fn parse_profile(s: &str) -> Result<SpeedProfile> {
    let points = s
        .split(',')
        .map(|part| parse_pair("--profile", part, ':', "TIME:RPM", ["time", "speed"]))
        .collect::<Result<Vec<_>>>()?;
    SpeedProfile::new(points).map_err(|e| anyhow!("--profile: {e}"))
}

/// Parses `DEG@SECONDS` of `--unbalance-turn` into `(seconds, degrees)`, the order of
/// [`veer_tracker::sim::SimMode::heavy_spot_step`].
fn parse_unbalance_turn(s: &str) -> Result<(f64, f64)> {
    let (deg, secs) = parse_pair("--unbalance-turn", s, '@', "DEG@SECONDS", ["angle", "time"])?;
    if !deg.is_finite() {
        bail!("--unbalance-turn: angle `{deg}` must be finite");
    }
    if !(secs.is_finite() && secs >= 0.0) {
        bail!("--unbalance-turn: time `{secs}` must be finite and not negative");
    }
    Ok((secs, deg))
}

/// Applies `--natural-rpm`, `--natural-drift-pct` and `--unbalance-turn` to every channel, in that
/// order, so a drift is a percentage of the natural speed the first option put in place.
fn apply_mode_changes(a: &SimulateArgs, channels: &mut [SimChannel]) -> Result<()> {
    if let Some(rpm) = a.natural_rpm {
        if !(rpm.is_finite() && rpm > 0.0) {
            bail!("--natural-rpm {rpm}: must be a positive speed");
        }
    }
    if let Some(p) = a.natural_drift_pct {
        if !(p.is_finite() && p > -100.0) {
            bail!("--natural-drift-pct {p}: must be above -100 (the natural speed stays positive)");
        }
    }
    let turn = a
        .unbalance_turn
        .as_deref()
        .map(parse_unbalance_turn)
        .transpose()?;
    for c in channels {
        if let (Some(rpm), Some(first)) = (a.natural_rpm, c.modes.first_mut()) {
            first.natural_rpm = rpm;
        }
        for m in &mut c.modes {
            if let Some(p) = a.natural_drift_pct {
                m.natural_rpm_end = Some(m.natural_rpm * (1.0 + p / 100.0));
            }
            if turn.is_some() {
                m.heavy_spot_step = turn;
            }
        }
    }
    Ok(())
}

/// `n` copies of `first` named `ch01`, `ch02`, ... (wider numbers from 100 channels on), their
/// probe angles stepped by 360/n degrees from the first one's.
///
/// A machine with many sensors is what the daemon's load figures are about, and the demo machines
/// have one or two. Each copy keeps the rotor's modes, so every channel sees the same criticals
/// from its own angle; its noise is its own because the simulator draws each channel's noise from
/// a stream of the seed numbered by the channel's position.
pub(crate) fn replicate(first: &SimChannel, n: usize) -> Vec<SimChannel> {
    let width = n.to_string().len().max(2);
    (0..n)
        .map(|i| SimChannel {
            name: format!("ch{:0width$}", i + 1),
            probe_angle_deg: (first.probe_angle_deg + 360.0 * i as f64 / n as f64) % 360.0,
            ..first.clone()
        })
        .collect()
}

/// Builds the simulation a `simulate` command asks for.
pub(crate) fn sim_config(a: &SimulateArgs) -> Result<SimConfig> {
    let m = plant::machine(&a.machine)?;
    let profile = match &a.profile {
        Some(p) => parse_profile(p)?,
        None => plant::profile(&m)?,
    };
    let mut channels = match a.channels {
        Some(n) => {
            let first = m
                .channels
                .first()
                .ok_or_else(|| anyhow!("machine `{}` has no vibration channel", m.id))?;
            replicate(first, usize::from(n))
        }
        None => m.channels.clone(),
    };
    for c in &mut channels {
        if let Some(n) = a.noise {
            c.noise_rms = n;
        }
        if let Some(r) = a.runout {
            c.runout = r;
        }
        if let Some(t) = &a.tone {
            let (f, amp) = t
                .split_once(':')
                .ok_or_else(|| anyhow!("--tone: `{t}` is not HZ:AMPLITUDE"))?;
            c.tones.push(Tone {
                freq_hz: f
                    .trim()
                    .parse()
                    .with_context(|| format!("--tone: frequency `{f}`"))?,
                amplitude: amp
                    .trim()
                    .parse()
                    .with_context(|| format!("--tone: amplitude `{amp}`"))?,
            });
        }
    }
    apply_mode_changes(a, &mut channels)?;
    let ppr = a.ppr.unwrap_or(m.tach.ppr);
    if a.gap_teeth >= ppr {
        bail!(
            "--gap-teeth {} leaves no tooth on a {ppr}-tooth wheel",
            a.gap_teeth
        );
    }
    // A gap wheel leaves out the last teeth before the reference, so the first tooth after the gap
    // is tooth 0.
    let missing = (ppr - a.gap_teeth..ppr).collect();
    let cfg = SimConfig {
        sample_rate: a.rate,
        profile,
        tach: TachSim {
            ppr,
            missing,
            jitter_s: a.jitter_us * 1e-6,
            ..m.tach.clone()
        },
        channels,
        seed: a.seed,
        start_at_rest: false,
    };
    cfg.validate().map_err(|e| anyhow!("{e}"))?;
    Ok(cfg)
}

pub(crate) fn run(a: SimulateArgs) -> Result<()> {
    if a.list {
        let mut text = String::new();
        for m in plant::machines() {
            text.push_str(&format!(
                "{:8} {} (operating {:.0}-{:.0} r/min, {} channel(s), {})\n",
                m.id,
                m.name,
                m.min_operating_rpm,
                m.max_continuous_rpm,
                m.channels.len(),
                m.unit
            ));
        }
        return super::print_out(&text);
    }
    let out = a
        .out
        .clone()
        .ok_or_else(|| anyhow!("--out FILE is needed (or --list)"))?;
    let cfg = sim_config(&a)?;
    let mut sim = Simulator::new(cfg).map_err(|e| anyhow!("{e}"))?;
    let names = sim.channel_names();
    let frames = write(&mut sim, &names, &out, &a)?;
    eprintln!(
        "wrote {} ({} frames, {} channels: {}, {} Hz)",
        out.display(),
        frames,
        names.len(),
        names.join(", "),
        sim.sample_rate()
    );
    Ok(())
}

/// Splits interleaved frames into one column per channel.
fn deinterleave(inter: &[f32], cols: &mut [Vec<f32>]) {
    for c in cols.iter_mut() {
        c.clear();
    }
    let n = cols.len();
    for frame in inter.chunks_exact(n) {
        for (c, &x) in cols.iter_mut().zip(frame) {
            c.push(x);
        }
    }
}

/// Streams the simulation into the file, CSV or WAV by extension.
fn write(sim: &mut Simulator, names: &[String], out: &Path, a: &SimulateArgs) -> Result<u64> {
    let ext = out
        .extension()
        .and_then(|e| e.to_str())
        .map(|e| e.to_ascii_lowercase())
        .unwrap_or_default();
    let refs: Vec<&str> = names.iter().map(String::as_str).collect();
    let mut inter = Vec::with_capacity(65_536 * names.len());
    let mut cols: Vec<Vec<f32>> = vec![Vec::with_capacity(65_536); names.len()];
    let mut next = |sim: &mut Simulator, cols: &mut [Vec<f32>]| {
        inter.clear();
        let n = sim.next_block(65_536, &mut inter);
        deinterleave(&inter, cols);
        n
    };
    let mut frames = 0u64;
    if let Some(kind) = &a.serial {
        return write_serial(kind, sim, &refs, out, &mut next);
    }
    match ext.as_str() {
        "csv" => {
            let mut w = CsvWriter::create(out, &refs, sim.sample_rate(), 0.0)?;
            loop {
                let n = next(sim, &mut cols);
                if n == 0 {
                    break;
                }
                let views: Vec<&[f32]> = cols.iter().map(|c| c.as_slice()).collect();
                w.write_frames(&views)?;
                frames += n as u64;
            }
            w.finish()?;
        }
        "wav" => {
            let format = match a.wav_format.as_str() {
                "f32" | "float" | "float32" => WavFormat::Float32,
                "pcm16" | "16" => WavFormat::Pcm16 {
                    full_scale: a.full_scale,
                },
                other => bail!("--wav-format `{other}`: use f32 or pcm16"),
            };
            let channels = u16::try_from(names.len()).context("too many channels for WAV")?;
            let rate = sim.sample_rate();
            if rate.fract() != 0.0 || rate > f64::from(u32::MAX) {
                bail!("--rate {rate}: a WAV file needs a whole number of samples per second");
            }
            let mut w = WavWriter::create(out, channels, rate as u32, format)?;
            loop {
                let n = next(sim, &mut cols);
                if n == 0 {
                    break;
                }
                let views: Vec<&[f32]> = cols.iter().map(|c| c.as_slice()).collect();
                w.write_frames(&views)?;
                frames += n as u64;
            }
            if w.clipped() > 0 {
                eprintln!(
                    "warning: {} samples clipped at --full-scale {}",
                    w.clipped(),
                    a.full_scale
                );
            }
            w.finish()?;
        }
        _ => bail!("{}: the extension must be .csv or .wav", out.display()),
    }
    Ok(frames)
}

/// Writes the simulation as the serial byte stream of `kind` (`text` or `frames`): what a logger
/// would send, for replaying into a pseudo-terminal.
fn write_serial(
    kind: &str,
    sim: &mut Simulator,
    names: &[&str],
    out: &Path,
    next: &mut impl FnMut(&mut Simulator, &mut [Vec<f32>]) -> usize,
) -> Result<u64> {
    enum Enc {
        Text(TextEncoder),
        Frames(FrameEncoder),
    }
    let rate = sim.sample_rate();
    let mut enc = match kind {
        "text" => Enc::Text(TextEncoder::new(names, rate)?),
        "frames" => Enc::Frames(FrameEncoder::new(names.len(), rate, SampleFormat::F32)?),
        other => bail!("--serial `{other}`: use text or frames"),
    };
    let file = std::fs::File::create(out).with_context(|| format!("{}", out.display()))?;
    let mut w = std::io::BufWriter::new(file);
    let mut cols: Vec<Vec<f32>> = vec![Vec::with_capacity(65_536); names.len()];
    let mut bytes = Vec::new();
    let mut frames = 0u64;
    loop {
        let n = next(sim, &mut cols);
        if n == 0 {
            break;
        }
        let views: Vec<&[f32]> = cols.iter().map(|c| c.as_slice()).collect();
        bytes.clear();
        match &mut enc {
            Enc::Text(e) => e.encode(&views, &mut bytes)?,
            Enc::Frames(e) => e.encode(&views, &mut bytes)?,
        }
        w.write_all(&bytes)
            .with_context(|| format!("{}", out.display()))?;
        frames += n as u64;
    }
    w.flush().with_context(|| format!("{}", out.display()))?;
    Ok(frames)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cli::{Cli, Command};
    use clap::Parser;

    fn args(extra: &[&str]) -> SimulateArgs {
        let mut argv = vec!["veer", "simulate", "--out", "unused.wav"];
        argv.extend_from_slice(extra);
        match Cli::try_parse_from(argv).expect("arguments parse").command {
            Command::Simulate(a) => a,
            other => panic!("parsed as {other:?}"),
        }
    }

    #[test]
    fn channels_are_named_and_spread_round_the_shaft() {
        let cfg = sim_config(&args(&["--machine", "comp-3", "--channels", "16"])).expect("config");
        assert_eq!(cfg.channels.len(), 16);
        let names: Vec<&str> = cfg.channels.iter().map(|c| c.name.as_str()).collect();
        assert_eq!(names[0], "ch01");
        assert_eq!(names[15], "ch16");
        let first = &plant::machine("comp-3").expect("comp-3").channels[0];
        for (i, c) in cfg.channels.iter().enumerate() {
            let want = (first.probe_angle_deg + 22.5 * i as f64) % 360.0;
            assert!(
                (c.probe_angle_deg - want).abs() < 1e-9,
                "{}: {}",
                c.name,
                c.probe_angle_deg
            );
            assert_eq!(c.modes.len(), first.modes.len());
        }
        // Overrides reach every copy.
        let cfg = sim_config(&args(&["--channels", "3", "--noise", "0.25"])).expect("config");
        assert!(cfg.channels.iter().all(|c| c.noise_rms == 0.25));
    }

    #[test]
    fn mode_changes_reach_every_mode_of_every_channel() {
        // tg-1: two channels of two modes each.
        let cfg = sim_config(&args(&[
            "--machine",
            "tg-1",
            "--natural-rpm",
            "1885",
            "--natural-drift-pct",
            "-19.3",
            "--unbalance-turn",
            "30@120",
        ]))
        .expect("config");
        let plant_modes = &plant::machine("tg-1").expect("tg-1").channels[0].modes;
        assert_eq!(cfg.channels.len(), 2);
        for c in &cfg.channels {
            assert_eq!(c.modes.len(), 2);
            assert_eq!(c.modes[0].natural_rpm, 1885.0);
            // Only the first mode's natural speed is replaced.
            assert_eq!(c.modes[1].natural_rpm, plant_modes[1].natural_rpm);
            for m in &c.modes {
                let end = m.natural_rpm_end.expect("drift set");
                // natural_rpm × (1 + P/100), the option's definition.
                assert!((end - m.natural_rpm * 0.807).abs() < 1e-9 * end, "{end}");
                assert_eq!(m.heavy_spot_step, Some((120.0, 30.0)));
            }
        }
        assert!((cfg.channels[0].modes[0].natural_rpm_end.expect("set") - 1521.195).abs() < 1e-9);
        // The `=` form and a negative turn.
        let cfg = sim_config(&args(&[
            "--machine",
            "fan-2",
            "--natural-drift-pct=5",
            "--unbalance-turn",
            "-45@2.5",
        ]))
        .expect("config");
        let m = &cfg.channels[0].modes[0];
        assert!((m.natural_rpm_end.expect("set") - 1210.0 * 1.05).abs() < 1e-9);
        assert_eq!(m.heavy_spot_step, Some((2.5, -45.0)));
        // Without the options nothing changes.
        let cfg = sim_config(&args(&["--machine", "fan-2"])).expect("config");
        assert_eq!(cfg.channels[0].modes[0].natural_rpm_end, None);
        assert_eq!(cfg.channels[0].modes[0].heavy_spot_step, None);
    }

    #[test]
    fn bad_mode_change_options_name_the_option() {
        let err = |extra: &[&str]| {
            let e = sim_config(&args(extra)).expect_err("rejected");
            format!("{e:#}")
        };
        for (extra, want) in [
            (
                &["--unbalance-turn", "30"][..],
                "--unbalance-turn: `30` is not DEG@SECONDS",
            ),
            (
                &["--unbalance-turn", "x@3"][..],
                "--unbalance-turn: angle `x`",
            ),
            (
                &["--unbalance-turn", "30@soon"][..],
                "--unbalance-turn: time `soon`",
            ),
            (
                &["--unbalance-turn", "30@-1"][..],
                "--unbalance-turn: time `-1`",
            ),
            (
                &["--natural-drift-pct", "-100"][..],
                "--natural-drift-pct -100",
            ),
            (&["--natural-rpm", "0"][..], "--natural-rpm 0"),
        ] {
            let msg = err(extra);
            assert!(msg.starts_with(want), "{extra:?}: {msg}");
            assert!(!msg.contains('\n'), "{msg}");
        }
        assert!(Cli::try_parse_from([
            "veer",
            "simulate",
            "--out",
            "a.wav",
            "--natural-rpm",
            "fast"
        ])
        .is_err());
    }

    #[test]
    fn wide_counts_keep_names_sortable() {
        let chans = replicate(&SimChannel::new("x"), 120);
        assert_eq!(chans[0].name, "ch001");
        assert_eq!(chans[119].name, "ch120");
    }

    #[test]
    fn channel_count_is_bounded() {
        let bad = |n: &str| {
            Cli::try_parse_from(["veer", "simulate", "--out", "a.wav", "--channels", n]).is_err()
        };
        assert!(bad("0"));
        assert!(bad("256"));
        assert!(!bad("255"));
    }

    #[test]
    fn copies_have_their_own_noise() {
        // Two copies are 180 degrees apart, so their 1X responses are opposite and their sum
        // holds only the noise once runout, offset and 2X are taken out. Independent noises of
        // r.m.s. 1 sum to r.m.s. sqrt(2); one noise shared by both would sum to 2.
        let mut a = args(&[
            "--channels",
            "2",
            "--noise",
            "1",
            "--runout",
            "0",
            "--profile",
            "0:600,2:600",
            "--rate",
            "2000",
        ]);
        a.seed = 5;
        let mut cfg = sim_config(&a).expect("config");
        for c in &mut cfg.channels {
            c.offset = 0.0;
            c.second_order = 0.0;
        }
        let mut sim = Simulator::new(cfg).expect("simulator");
        let mut inter = Vec::new();
        let n = sim.next_block(4000, &mut inter);
        assert_eq!(n, 4000);
        let mut sum2 = 0.0f64;
        for f in inter.chunks_exact(3) {
            let (x, y) = (f64::from(f[1]), f64::from(f[2]));
            sum2 += (x + y) * (x + y);
        }
        let rms_sum = (sum2 / n as f64).sqrt();
        // Within about 10 %: the r.m.s. of 4000 samples scatters by about 1 %.
        assert!(
            (rms_sum - std::f64::consts::SQRT_2).abs() < 0.15,
            "r.m.s. of the sum {rms_sum}"
        );
    }
}
