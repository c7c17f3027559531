//! The result structs of the C interface (`#[repr(C)]`, mirrored field for field in `veer.h`), and
//! how a queued result fills them.
//!
//! Numbers a result does not have are NaN (an AF that could not be measured, a margin without an
//! operating range), so a C caller needs no separate "present" flags for them. Lengths are `usize`
//! (`size_t`), codes `i32`, everything else `f64`.

use crate::tracker::Output;
use veer_tracker::engine::{Event, EventKind, Update};
use veer_tracker::lag_deg;
use veer_tracker::margin::{Side, Verdict};
use veer_tracker::states::MachineState;

/// `VEER_RESULT_REVOLUTION`: one revolution's (or block of revolutions') nX vectors.
pub const VEER_RESULT_REVOLUTION: i32 = 1;
/// `VEER_RESULT_STATE`: the machine state changed.
pub const VEER_RESULT_STATE: i32 = 2;
/// `VEER_RESULT_EVENT`: a run-up or coast-down finished, with its critical speeds.
pub const VEER_RESULT_EVENT: i32 = 3;
/// `VEER_RESULT_TACH_LOST`: the tach pulses stopped.
pub const VEER_RESULT_TACH_LOST: i32 = 4;
/// `VEER_RESULT_GAP`: a break in the timestamps; the engine was finished and started again.
pub const VEER_RESULT_GAP: i32 = 5;

/// Critical flag: the response is heavily damped (AF below the configured limit).
pub const VEER_CRITICAL_HEAVILY_DAMPED: u32 = 1;
/// Critical flag: a single-mode fit succeeded (`fit_*` fields are set).
pub const VEER_CRITICAL_FIT: u32 = 2;
/// Critical flag: a margin was assessed (`margin_*` fields are set).
pub const VEER_CRITICAL_MARGIN: u32 = 4;

/// One nX vector of one sensor.
#[repr(C)]
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct VeerVector {
    /// Sensor index, 0-based, in configured order.
    pub channel: u32,
    /// The order (1 for 1X).
    pub order: u32,
    /// Amplitude in the sensor's display unit and detection.
    pub amplitude: f64,
    /// Phase lag, degrees in [0, 360).
    pub phase_deg: f64,
    /// Real part of the phasor (display units).
    pub re: f64,
    /// Imaginary part of the phasor.
    pub im: f64,
}

/// One critical speed found in an event, with its margin.
#[repr(C)]
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct VeerCritical {
    /// Sensor index, 0-based.
    pub channel: u32,
    /// `VEER_CRITICAL_*` flags.
    pub flags: u32,
    /// Critical speed, r/min.
    pub speed_rpm: f64,
    /// 1X amplitude at the peak, display units.
    pub peak_amplitude: f64,
    /// Phase lag at the peak, degrees.
    pub phase_deg: f64,
    /// Amplification factor (half-power method); NaN when it could not be measured.
    pub amplification_factor: f64,
    /// Damping ratio; NaN when it could not be measured.
    pub damping_ratio: f64,
    /// Phase change through the resonance, degrees.
    pub phase_change_deg: f64,
    /// Lower half-power speed, r/min, or NaN.
    pub n1_rpm: f64,
    /// Upper half-power speed, r/min, or NaN.
    pub n2_rpm: f64,
    /// Natural speed of the single-mode fit, r/min, or NaN.
    pub fit_natural_rpm: f64,
    /// Damping ratio of the fit, or NaN.
    pub fit_damping_ratio: f64,
    /// `VEER_SIDE_*`: where the critical lies against the operating range (0 without a margin).
    pub margin_side: i32,
    /// `VEER_VERDICT_*` (0 without a margin).
    pub margin_verdict: i32,
    /// Separation margin required, percent, or NaN.
    pub required_margin_pct: f64,
    /// Separation margin the critical has, percent (negative inside the range), or NaN.
    pub actual_margin_pct: f64,
}

/// One result. The caller sets `vectors`/`vectors_cap` and `criticals`/`criticals_cap` (or leaves
/// them null and 0); the library writes the rest.
#[repr(C)]
#[derive(Debug)]
pub struct VeerResult {
    /// `VEER_RESULT_*`.
    pub kind: i32,
    /// Revolution: the state after it; state change: the new state; else -1. `VEER_STATE_*`.
    pub state: i32,
    /// State change: the state left; else -1.
    pub from_state: i32,
    /// Event: `VEER_EVENT_RUN_UP` or `VEER_EVENT_COAST_DOWN`; else 0.
    pub event_kind: i32,
    /// Revolution: mid-time; state change: when it began; event: end; tach lost: when; gap: the
    /// new block's timestamp. Seconds.
    pub time_s: f64,
    /// Revolution: mean speed; state change: speed at the change; event: speed at the end. r/min.
    pub speed_rpm: f64,
    /// Event: start time; gap: where the data would have continued. Seconds, else NaN.
    pub start_s: f64,
    /// Event: speed at the start, r/min, else NaN.
    pub speed_start_rpm: f64,
    /// Event: mean sweep rate, r/min per second, else NaN.
    pub sweep_rate_rpm_s: f64,
    /// Caller's array for a revolution's vectors.
    pub vectors: *mut VeerVector,
    /// Its capacity, in elements.
    pub vectors_cap: usize,
    /// Vectors in this result (channels × orders); more than `vectors_cap` means the call returned
    /// `VEER_E_BUFFER` and the result is still queued.
    pub n_vectors: usize,
    /// Caller's array for an event's criticals.
    pub criticals: *mut VeerCritical,
    /// Its capacity, in elements.
    pub criticals_cap: usize,
    /// Criticals in this result, all sensors; see `n_vectors` for the too-small case.
    pub n_criticals: usize,
}

/// Machine states as C codes (`VEER_STATE_*`).
pub fn state_code(s: MachineState) -> i32 {
    match s {
        MachineState::Stopped => 0,
        MachineState::SlowRoll => 1,
        MachineState::SpeedingUp => 2,
        MachineState::Steady => 3,
        MachineState::SlowingDown => 4,
    }
}

fn side_code(s: Side) -> i32 {
    match s {
        Side::Below => 1,
        Side::Inside => 2,
        Side::Above => 3,
    }
}

fn verdict_code(v: Verdict) -> i32 {
    match v {
        Verdict::NotRequired => 1,
        Verdict::Clear => 2,
        Verdict::Warning => 3,
        Verdict::Breach => 4,
    }
}

/// The header fields of a result, and the vectors and criticals it carries.
pub struct Filled {
    /// `kind` to `sweep_rate_rpm_s`, with null buffers and zero counts.
    pub head: VeerResult,
    /// The vectors of a revolution.
    pub vectors: Vec<VeerVector>,
    /// The criticals of an event.
    pub criticals: Vec<VeerCritical>,
}

fn blank(kind: i32) -> VeerResult {
    VeerResult {
        kind,
        state: -1,
        from_state: -1,
        event_kind: 0,
        time_s: f64::NAN,
        speed_rpm: f64::NAN,
        start_s: f64::NAN,
        speed_start_rpm: f64::NAN,
        sweep_rate_rpm_s: f64::NAN,
        vectors: std::ptr::null_mut(),
        vectors_cap: 0,
        n_vectors: 0,
        criticals: std::ptr::null_mut(),
        criticals_cap: 0,
        n_criticals: 0,
    }
}

/// The criticals of an event, all sensors in order.
pub fn criticals(e: &Event) -> Vec<VeerCritical> {
    let mut out = Vec::new();
    for (ch, c) in e.channels.iter().enumerate() {
        for k in &c.criticals {
            let r = &k.resonance;
            let mut flags = 0;
            if r.heavily_damped {
                flags |= VEER_CRITICAL_HEAVILY_DAMPED;
            }
            if r.fit.is_some() {
                flags |= VEER_CRITICAL_FIT;
            }
            if k.margin.is_some() {
                flags |= VEER_CRITICAL_MARGIN;
            }
            out.push(VeerCritical {
                channel: ch as u32,
                flags,
                speed_rpm: r.speed_rpm,
                peak_amplitude: r.peak_amplitude,
                phase_deg: r.phase_deg,
                amplification_factor: r.amplification_factor.unwrap_or(f64::NAN),
                damping_ratio: r.damping_ratio.unwrap_or(f64::NAN),
                phase_change_deg: r.phase_change_deg,
                n1_rpm: r.n1_rpm.unwrap_or(f64::NAN),
                n2_rpm: r.n2_rpm.unwrap_or(f64::NAN),
                fit_natural_rpm: r.fit.as_ref().map_or(f64::NAN, |f| f.natural_rpm),
                fit_damping_ratio: r.fit.as_ref().map_or(f64::NAN, |f| f.damping_ratio),
                margin_side: k.margin.map_or(0, |m| side_code(m.side)),
                margin_verdict: k.margin.map_or(0, |m| verdict_code(m.verdict)),
                required_margin_pct: k.margin.map_or(f64::NAN, |m| m.required_pct),
                actual_margin_pct: k.margin.map_or(f64::NAN, |m| m.actual_pct),
            });
        }
    }
    out
}

/// What a queued result puts into the C structs.
pub fn fill(o: &Output, orders: &[u32]) -> Filled {
    let mut vectors = Vec::new();
    let mut crits = Vec::new();
    let head = match o {
        Output::Update(Update::Revolution(u)) => {
            let n = orders.len().max(1);
            vectors = u
                .vectors
                .iter()
                .enumerate()
                .map(|(i, v)| VeerVector {
                    channel: (i / n) as u32,
                    order: orders.get(i % n).copied().unwrap_or(0),
                    amplitude: v.norm(),
                    phase_deg: lag_deg(*v),
                    re: v.re,
                    im: v.im,
                })
                .collect();
            VeerResult {
                state: state_code(u.state),
                time_s: u.time_s,
                speed_rpm: u.speed_rpm,
                ..blank(VEER_RESULT_REVOLUTION)
            }
        }
        Output::Update(Update::State(c)) => VeerResult {
            state: state_code(c.to),
            from_state: state_code(c.from),
            time_s: c.time_s,
            speed_rpm: c.speed_rpm,
            ..blank(VEER_RESULT_STATE)
        },
        Output::Update(Update::Event(e)) => {
            crits = criticals(e);
            VeerResult {
                event_kind: match e.kind {
                    EventKind::RunUp => 1,
                    EventKind::CoastDown => 2,
                },
                time_s: e.end_s,
                speed_rpm: e.speed_end_rpm,
                start_s: e.start_s,
                speed_start_rpm: e.speed_start_rpm,
                sweep_rate_rpm_s: e.sweep_rate_rpm_s,
                ..blank(VEER_RESULT_EVENT)
            }
        }
        Output::Update(Update::TachLost(t)) => VeerResult {
            time_s: *t,
            ..blank(VEER_RESULT_TACH_LOST)
        },
        Output::Update(_) => blank(0),
        Output::Gap { time_s, expected_s } => VeerResult {
            time_s: *time_s,
            start_s: *expected_s,
            ..blank(VEER_RESULT_GAP)
        },
    };
    Filled {
        head,
        vectors,
        criticals: crits,
    }
}

/// Counters of a tracker, for a host program's health display.
#[repr(C)]
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct VeerStats {
    /// Frames accepted since creation or reset.
    pub frames: u64,
    /// Revolutions completed since the last break in the data.
    pub revolutions: u64,
    /// Vectors computed since the last break.
    pub vectors: u64,
    /// Tach pulses accepted since the last break.
    pub pulses: u64,
    /// Missing tach pulses filled in since the last break.
    pub pulses_inserted: u64,
    /// Extra tach pulses dropped since the last break.
    pub pulses_dropped: u64,
    /// Times the tach was lost since the last break.
    pub tach_losses: u64,
    /// Breaks in the data (timestamp jumps or rate changes) since creation or reset.
    pub gaps: u64,
    /// Revolution results dropped because nobody polled (queue full).
    pub results_dropped: u64,
    /// Results waiting to be polled.
    pub pending: u64,
}

impl VeerStats {
    /// From a tracker's counters and its queue length.
    pub fn from_counters(c: &crate::tracker::Counters, pending: usize) -> Self {
        let p = c.engine.pulses;
        Self {
            frames: c.frames,
            revolutions: c.engine.revolutions,
            vectors: c.engine.vectors,
            pulses: p.pulses,
            pulses_inserted: p.inserted,
            pulses_dropped: p.dropped,
            tach_losses: p.losses,
            gaps: c.gaps,
            results_dropped: c.dropped,
            pending: pending as u64,
        }
    }
}
