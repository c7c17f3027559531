//! The streaming simulator: frames of [tach, channels...] generated block by block.

use std::f64::consts::TAU;

use super::changes::Changes;
use super::config::{SimChannel, SimConfig};
use super::profile::Segments;
use super::rng::Rng;
use super::sdof::Sdof;
use super::tach::TachRenderer;
use super::SimError;
use crate::types::{from_amp_lag, Complex64};

/// Frames computed per inner pass (scratch buffers are this long).
const CHUNK: usize = 1024;
/// Phasor recurrences are re-anchored to the exact closed form at every absolute frame index that
/// is a multiple of this power of two, and at every profile breakpoint, so rounding cannot drift
/// and the output does not depend on how the caller cuts the stream into blocks.
const ANCHOR: u64 = 1024;

/// The shaft angle advanced by a chirp recurrence: `z_n = e^{jθ_n}`, `w_n = e^{j(θ_{n+1} − θ_n)}`,
/// and within a segment of constant acceleration `w_{n+1} = w_n · c` with a constant `c`.
#[derive(Clone, Debug)]
struct Shaft {
    n: u64,
    seg: usize,
    z: Complex64,
    w: Complex64,
    c: Complex64,
}

impl Shaft {
    fn new(segs: &Segments, dt: f64) -> Self {
        let mut s = Self {
            n: 0,
            seg: 0,
            z: Complex64::new(1.0, 0.0),
            w: Complex64::new(1.0, 0.0),
            c: Complex64::new(1.0, 0.0),
        };
        s.anchor(segs, dt);
        s
    }

    fn anchor(&mut self, segs: &Segments, dt: f64) {
        let t = self.n as f64 * dt;
        let seg = &segs.segs[self.seg];
        let turns = seg.turns_at(t);
        self.z = Complex64::from_polar(1.0, TAU * (turns - turns.floor()));
        // θ_{n+1} − θ_n = 2π dt (f(t) + a dt/2), and it grows by 2π a dt² per sample.
        let step = dt * (seg.speed_at(t) + 0.5 * seg.a * dt);
        self.w = Complex64::from_polar(1.0, TAU * (step - step.floor()));
        self.c = Complex64::from_polar(1.0, TAU * seg.a * dt * dt);
    }

    /// Current `(cos θ, sin θ, Ω², dΩ/dt)`, Ω in rad/s.
    #[inline]
    fn current(&self, segs: &Segments, dt: f64) -> [f64; 4] {
        let seg = &segs.segs[self.seg];
        let omega = TAU * seg.speed_at(self.n as f64 * dt);
        [self.z.re, self.z.im, omega * omega, TAU * seg.a]
    }

    #[inline]
    fn advance(&mut self, segs: &Segments, dt: f64) {
        self.n += 1;
        let t = self.n as f64 * dt;
        let mut moved = false;
        while self.seg + 1 < segs.segs.len() && t >= segs.segs[self.seg].t1 {
            self.seg += 1;
            moved = true;
        }
        if moved || self.n & (ANCHOR - 1) == 0 {
            self.anchor(segs, dt);
        } else {
            self.z *= self.w;
            self.w *= self.c;
        }
    }
}

/// One mode of one channel: its stepper, the unbalance angle as a unit phasor times ε, and the
/// slow changes still to come.
#[derive(Clone, Debug)]
struct ModeState {
    sdof: Sdof,
    /// ε cos(β + α), ε sin(β + α).
    ec: f64,
    es: f64,
    eccentricity: f64,
    changes: Changes,
}

impl ModeState {
    /// Modal forcing `ε(Ω² cos(θ − β') + Ω̇ sin(θ − β'))`, β' = β + α, from the shaft values.
    #[inline]
    fn forcing(&self, sh: [f64; 4]) -> f64 {
        let [c, s, om2, omd] = sh;
        let cos_psi = c * self.ec + s * self.es;
        let sin_psi = s * self.ec - c * self.es;
        om2 * cos_psi + omd * sin_psi
    }

    /// Sets the unbalance angle (heavy spot plus probe angle), radians.
    fn set_angle(&mut self, rad: f64) {
        self.ec = self.eccentricity * rad.cos();
        self.es = self.eccentricity * rad.sin();
    }

    /// Applies the changes due before the step that starts at frame `n`, whose shaft values are
    /// `sh`: a rebuilt integrator takes over the displacement and velocity, and the forcing of
    /// frame `n` (recomputed exactly as it was when frame `n` was reached, with the angle in force
    /// then); a turn of the heavy spot applies to the forcing of the frames after `n`.
    fn apply_changes(&mut self, n: u64, sh: [f64; 4]) {
        let due = self.changes.due(n);
        if let Some(mut sdof) = due.rebuild {
            sdof.set_state(
                self.sdof.displacement(),
                self.sdof.velocity(),
                self.forcing(sh),
            );
            self.sdof = sdof;
        }
        if let Some(rad) = due.turn_rad {
            self.set_angle(rad);
        }
    }

    /// Adds this mode's displacement at each frame of `acc` and steps on; `shaft` holds the shaft
    /// values of those frames plus the one after. The per-sample loop of the simulator.
    #[inline]
    fn render(&mut self, acc: &mut [f64], shaft: &[[f64; 4]]) {
        for (i, a) in acc.iter_mut().enumerate() {
            *a += self.sdof.displacement();
            let f_next = self.forcing(shaft[i + 1]);
            self.sdof.step(f_next);
        }
    }
}

#[derive(Clone, Debug)]
struct ToneState {
    freq_hz: f64,
    amplitude: f64,
    z: Complex64,
    w: Complex64,
}

impl ToneState {
    fn anchor(&mut self, n: u64, dt: f64) {
        let cycles = self.freq_hz * (n as f64 * dt);
        self.z = Complex64::from_polar(1.0, TAU * (cycles - cycles.floor()));
        let step = self.freq_hz * dt;
        self.w = Complex64::from_polar(1.0, TAU * (step - step.floor()));
    }
}

#[derive(Clone, Debug)]
struct ChannelState {
    modes: Vec<ModeState>,
    runout: Complex64,
    second: Complex64,
    tones: Vec<ToneState>,
    noise_rms: f64,
    offset: f64,
    rng: Rng,
}

/// A rotor-response simulator that streams a recording of any length in bounded memory.
///
/// Each call to [`Simulator::next_block`] appends the next frames; the samples do not depend on
/// the block sizes asked for, so a test may read a recording in any pieces.
#[derive(Clone)]
pub struct Simulator {
    cfg: SimConfig,
    dt: f64,
    total: u64,
    done: u64,
    segs: Segments,
    shaft: Shaft,
    tach: TachRenderer,
    channels: Vec<ChannelState>,
    /// Shaft values for the frames of one pass plus one frame of look-ahead.
    shaft_buf: Vec<[f64; 4]>,
    tach_buf: Vec<f32>,
    /// Channel sums, `CHUNK` per channel.
    acc: Vec<f64>,
}

impl std::fmt::Debug for Simulator {
    /// The configuration and the position in the recording; the scratch buffers are left out.
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Simulator")
            .field("cfg", &self.cfg)
            .field("total_frames", &self.total)
            .field("frames_done", &self.done)
            .finish_non_exhaustive()
    }
}

impl Simulator {
    /// A simulator for `cfg`, validated first.
    pub fn new(cfg: SimConfig) -> Result<Self, SimError> {
        cfg.validate()?;
        let dt = 1.0 / cfg.sample_rate;
        let total = (cfg.profile.duration_s() * cfg.sample_rate).round() as u64;
        let segs = Segments::new(&cfg.profile);
        let shaft = Shaft::new(&segs, dt);
        let sh0 = shaft.current(&segs, dt);
        let tach = TachRenderer::new(&cfg.tach, dt, &segs, Rng::new(cfg.seed, 0));
        let mut channels = Vec::with_capacity(cfg.channels.len());
        for (i, ch) in cfg.channels.iter().enumerate() {
            channels.push(channel_state(ch, i, &cfg, total, sh0)?);
        }
        let nch = channels.len();
        Ok(Self {
            cfg,
            dt,
            total,
            done: 0,
            segs,
            shaft,
            tach,
            channels,
            shaft_buf: vec![[0.0; 4]; CHUNK + 1],
            tach_buf: vec![0.0; CHUNK],
            acc: vec![0.0; CHUNK * nch],
        })
    }

    /// The configuration this simulator runs.
    pub fn config(&self) -> &SimConfig {
        &self.cfg
    }

    /// Sample rate, Hz.
    pub fn sample_rate(&self) -> f64 {
        self.cfg.sample_rate
    }

    /// Output channel names in frame order: `tach` first, then the vibration channels.
    pub fn channel_names(&self) -> Vec<String> {
        std::iter::once("tach".to_string())
            .chain(self.cfg.channels.iter().map(|c| c.name.clone()))
            .collect()
    }

    /// Frames in the whole recording: the profile's duration times the sample rate, rounded.
    pub fn total_frames(&self) -> u64 {
        self.total
    }

    /// Frames produced so far.
    pub fn frames_done(&self) -> u64 {
        self.done
    }

    /// Shaft turns since t = 0 at time `t`, exact (closed form of the speed profile's integral).
    /// The reference pulse is at every whole turn.
    pub fn shaft_angle_at(&self, t: f64) -> f64 {
        self.segs.turns_at(t)
    }

    /// Appends up to `max_frames` interleaved frames `[tach, ch0, ch1, ...]` to `out` and returns
    /// how many were written; 0 once the recording is complete.
    pub fn next_block(&mut self, max_frames: usize, out: &mut Vec<f32>) -> usize {
        let remaining = self.total - self.done;
        let want = (max_frames as u64).min(remaining) as usize;
        out.reserve(want * (1 + self.channels.len()));
        let mut written = 0;
        while written < want {
            let len = (want - written).min(CHUNK);
            self.render_chunk(len, out);
            written += len;
        }
        written
    }

    fn render_chunk(&mut self, len: usize, out: &mut Vec<f32>) {
        let (segs, dt) = (&self.segs, self.dt);
        let n0 = self.done;
        // Shaft values for frames n0..=n0+len; the last one is the look-ahead the first-order hold
        // needs, and stays the current value for the next pass.
        for i in 0..=len {
            self.shaft_buf[i] = self.shaft.current(segs, dt);
            if i < len {
                self.shaft.advance(segs, dt);
            }
        }
        for i in 0..len {
            let t = (n0 + i as u64) as f64 * dt;
            self.tach_buf[i] = self.tach.sample(t, segs);
        }
        let shaft = &self.shaft_buf[..=len];
        for (ch, acc) in self
            .channels
            .iter_mut()
            .zip(self.acc.chunks_exact_mut(CHUNK))
        {
            render_channel(ch, shaft, n0, dt, &mut acc[..len]);
        }
        let nch = self.channels.len();
        for i in 0..len {
            out.push(self.tach_buf[i]);
            for c in 0..nch {
                out.push(self.acc[c * CHUNK + i] as f32);
            }
        }
        self.done += len as u64;
    }
}

fn channel_state(
    ch: &SimChannel,
    index: usize,
    cfg: &SimConfig,
    total: u64,
    sh0: [f64; 4],
) -> Result<ChannelState, SimError> {
    let dt = 1.0 / cfg.sample_rate;
    let omega0 = sh0[2].sqrt();
    let mut modes = Vec::with_capacity(ch.modes.len());
    for (j, m) in ch.modes.iter().enumerate() {
        let field = format!("channels[{index}].modes[{j}].natural_rpm");
        let (changes, drifting, angle) = Changes::new(
            m,
            ch.probe_angle_deg,
            cfg.profile.duration_s(),
            cfg.sample_rate,
            total,
        );
        // A drifting mode starts with its first interval's natural speed (see `changes`).
        let mut sdof = match drifting {
            Some(s) => s,
            None => Sdof::new(m.natural_rpm * TAU / 60.0, m.damping_ratio, dt)
                .map_err(|e| SimError::invalid(field.clone(), e.reason()))?,
        };
        let state = ModeState {
            sdof: sdof.clone(),
            ec: m.eccentricity * angle.cos(),
            es: m.eccentricity * angle.sin(),
            eccentricity: m.eccentricity,
            changes,
        };
        let f0 = state.forcing(sh0);
        if cfg.start_at_rest {
            sdof.set_state(0.0, 0.0, f0);
        } else {
            // Forcing Re(ε(Ω² − jΩ̇) e^{j(θ − β')}) with θ(0) = 0, as a phasor at the initial speed.
            let forcing = Complex64::new(sh0[2], -sh0[3]) * Complex64::new(state.ec, -state.es);
            let (q, v) = sdof.periodic_response(forcing, omega0).ok_or_else(|| {
                SimError::invalid(
                    format!("channels[{index}].modes[{j}].damping_ratio"),
                    "an undamped mode at its natural speed has no steady state; start at rest instead",
                )
            })?;
            sdof.set_state(q.re, v.re, f0);
        }
        modes.push(ModeState { sdof, ..state });
    }
    let mut tones: Vec<ToneState> = ch
        .tones
        .iter()
        .map(|t| ToneState {
            freq_hz: t.freq_hz,
            amplitude: t.amplitude,
            z: Complex64::new(1.0, 0.0),
            w: Complex64::new(1.0, 0.0),
        })
        .collect();
    for t in &mut tones {
        t.anchor(0, dt);
    }
    Ok(ChannelState {
        modes,
        runout: from_amp_lag(ch.runout, ch.runout_lag_deg),
        second: from_amp_lag(ch.second_order, ch.second_order_lag_deg),
        tones,
        noise_rms: ch.noise_rms,
        offset: ch.offset,
        rng: Rng::new(cfg.seed, index as u64 + 1),
    })
}

/// Writes one channel's samples for the frames of `shaft` (all but the look-ahead) into `acc`.
fn render_channel(ch: &mut ChannelState, shaft: &[[f64; 4]], n0: u64, dt: f64, acc: &mut [f64]) {
    acc.fill(ch.offset);
    let len = acc.len();
    for m in &mut ch.modes {
        // Runs of frames between scheduled changes (absolute frame indices, so the cuts between
        // blocks do not matter), each rendered by the tight per-sample loop.
        let mut i = 0;
        while i < len {
            let n = n0 + i as u64;
            if n == m.changes.next() {
                m.apply_changes(n, shaft[i]);
            }
            // At least one frame, so a change can never stall the loop.
            let stop = m
                .changes
                .next()
                .saturating_sub(n0)
                .clamp(i as u64 + 1, len as u64) as usize;
            m.render(&mut acc[i..stop], &shaft[i..=stop]);
            i = stop;
        }
    }
    let (r, s2) = (ch.runout, ch.second);
    if r != Complex64::new(0.0, 0.0) || s2 != Complex64::new(0.0, 0.0) {
        for (a, sh) in acc.iter_mut().zip(shaft) {
            let (c, s) = (sh[0], sh[1]);
            // Re(v e^{jθ}) and Re(v₂ e^{j2θ}).
            *a += r.re * c - r.im * s + s2.re * (c * c - s * s) - s2.im * (2.0 * c * s);
        }
    }
    for tone in &mut ch.tones {
        for (i, a) in acc.iter_mut().enumerate() {
            let n = n0 + i as u64;
            if n & (ANCHOR - 1) == 0 {
                tone.anchor(n, dt);
            }
            *a += tone.amplitude * tone.z.re;
            tone.z *= tone.w;
        }
    }
    if ch.noise_rms > 0.0 {
        for a in acc.iter_mut() {
            *a += ch.noise_rms * ch.rng.gaussian();
        }
    }
}
