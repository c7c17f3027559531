//! Rotor-response simulator: synthetic recordings of a tachometer and vibration channels, for the
//! demo and as the oracle of the tracker's tests.
//!
//! # Model
//!
//! - **Speed and angle.** The speed is piecewise linear in time ([`SpeedProfile`]), so the shaft
//!   angle `θ(t) = 2π ∫ rpm/60 dt` is a quadratic per segment, known exactly at every sample and
//!   invertible in closed form. The reference mark passes the tach pickup at every whole turn.
//! - **Tach.** A wheel of `ppr` teeth: tooth `k` of turn `m` rises at `θ = 2π(m + k/ppr)`, falls
//!   `duty` of a tooth pitch later (plus Gaussian jitter on each edge); missing teeth never rise.
//!   Edges are linear ramps two samples wide centred on the edge time, so the mid-level crossing
//!   interpolated linearly between the two samples around it is the edge time.
//! - **Modes.** Each mode of each channel is the modal equation driven by rotating unbalance
//!   `q'' + 2ζω_n q' + ω_n² q = ε(Ω² cos(θ − β') + Ω̇ sin(θ − β'))`, with β' the heavy-spot angle
//!   plus the probe angle (a circular orbit of an isotropic rotor: a probe α further round in the
//!   direction of rotation sees the same whirl α later), and the Ω̇ term the tangential force of an
//!   accelerating unbalance. At constant speed its steady state is `ε·H(r)·e^{−jβ'}` in veer's phasor
//!   convention (see [`crate::types`]), `H` = [`unbalance_response`]: lag β' at slow roll, β' + 90°
//!   at `r = 1`, β' + 180° far above. Every mode starts in the exact steady state of its stepped
//!   equation at the initial speed (no start-up transient) unless [`SimConfig::start_at_rest`].
//! - **Channel.** The sum of its modes, a constant 1X runout vector, a constant 2X vector, stray
//!   tones, white Gaussian noise and an offset. Frames are `[tach, ch0, ch1, ...]` as f32.
//!
//! # Integration and its error
//!
//! Each mode is stepped with the exact discrete-time transition of its linear equation ([`Sdof`]):
//! the free response is exact to rounding (a few ulps per step, damped thereafter), and the forcing
//! enters through a first-order hold, exact when the forcing is linear across a sample interval
//! `h`. The forcing itself is computed exactly at every sample; the only approximation is its
//! linear interpolation between samples:
//!
//! - At constant speed the sampled 1X forcing, linearly interpolated, has its fundamental scaled by
//!   `sinc²(Ωh/2)` with no phase error, so the 1X response amplitude is low by `(Ωh)²/12` relative
//!   (6·10⁻⁵ at 100 Hz and 25.6 kHz), its phase exact. The hold's images near multiples of the
//!   sample rate add a further relative error of order `(Ωh)²(Ω² + ω_n²)h²/(16π⁴)`, negligible.
//! - In general the interpolation error of the forcing is at most `h² max|f''|/8`, so the response
//!   error is at most that times the impulse response's L1 norm, `≤ 1/(ζ ω_n ω_d)`; for unbalance
//!   near the critical this is a relative `(Ωh)²/4` at worst. A breakpoint of the profile (a jump
//!   of Ω̇) adds once an impulse of at most `ε|ΔΩ̇|h/2`, a response error below `ε|ΔΩ̇|h/(2ω_d)`.
//! - The angle is advanced by a phasor recurrence re-anchored to the closed form every 1024 frames
//!   and at every breakpoint (at fixed frame indices, so blocks of any size give identical output):
//!   angle error below 1e-12 rad. Output is rounded to f32 (relative 6·10⁻⁸ of each sample).

mod changes;
mod config;
mod profile;
mod rng;
mod rotor;
mod sdof;
mod simulator;
mod tach;

#[cfg(test)]
mod tests;

pub use config::{SimChannel, SimConfig, SimMode, TachSim, Tone};
pub use profile::SpeedProfile;
pub use rotor::{jeffcott_stiffness, natural_rpm, unbalance_response};
pub use sdof::Sdof;
pub use simulator::Simulator;

/// A setting of the simulator that cannot be used, with the field that holds it.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SimError {
    /// The field (a path such as `channels[1].modes[0].damping_ratio`) has a value that cannot be
    /// simulated; `reason` says what is expected.
    #[error("simulator setting `{field}` is invalid: {reason}")]
    Invalid {
        /// Path of the bad field in the configuration.
        field: String,
        /// What the field must satisfy.
        reason: String,
    },
}

impl SimError {
    pub(crate) fn invalid(field: impl Into<String>, reason: impl Into<String>) -> Self {
        Self::Invalid {
            field: field.into(),
            reason: reason.into(),
        }
    }

    /// Path of the bad field, e.g. `tach.duty`.
    pub fn field(&self) -> &str {
        match self {
            Self::Invalid { field, .. } => field,
        }
    }

    /// What the field must satisfy.
    pub fn reason(&self) -> &str {
        match self {
            Self::Invalid { reason, .. } => reason,
        }
    }
}
