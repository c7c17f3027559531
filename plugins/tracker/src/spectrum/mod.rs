//! Order spectra by computed order tracking: the rows of the order map.
//!
//! A vibration channel is sampled at a constant rate, but the forces that drive a rotor are tied to
//! the shaft angle. Computed order tracking (R. Potter & M. Gribler, SAE 891131, 1989; K. R. Fyfe &
//! E. D. S. Munck, "Analysis of computed order tracking", MSSP 11(2):187–205, 1997) resamples the
//! signal at equal angle increments, using the shaft-angle model of each [`Revolution`], so that an
//! nX component becomes a fixed frequency in the angle domain and stays in one bin of the spectrum
//! through run-ups and coast-downs, where a time-domain FFT would smear it across many.
//!
//! The chain, per channel ([`OrderTracker`]):
//!
//! 1. **Tracking anti-alias low-pass** on the raw samples ([`filter`]): an eighth-order Butterworth
//!    (four biquads; four poles would leave order 50 only 23 dB down) whose cutoff is retuned once
//!    per revolution to 0.8 × the angle-domain Nyquist (`samples_per_rev / 2` orders) at that
//!    revolution's speed, so orders above the angle Nyquist cannot fold into the map
//!    at any speed. It is bypassed once the cutoff would exceed 0.45·fs: the angle sampling rate is
//!    then above the raw one and the acquisition's own anti-alias filter already band-limits the
//!    signal below the angle Nyquist.
//!
//!    At low speed, where the cutoff is a small fraction of the raw rate, the samples are first
//!    decimated by an integer factor with a third-order CIC filter and a droop compensator
//!    ([`decimate`]), so that the Butterworth runs at between 12 and about 19 times its cutoff
//!    instead of up to several hundred times. The factor is chosen per row of the order map, when
//!    the filter is primed (for the engine, at the settling revolution after a skip), for the highest
//!    speed expected in the row; should the speed outgrow it, the stream restarts with a smaller
//!    factor one revolution back, so the block goes on. The delay of the CIC is accounted for in
//!    the time mapping, and at high speed (factor 1) the chain is the Butterworth alone.
//! 2. **Angle resampling** ([`resample`]): `samples_per_rev` points per revolution at the times
//!    `rev.time_at(j / samples_per_rev)`, by 4-point (cubic) Lagrange interpolation between filtered
//!    (and possibly decimated) samples.
//! 3. **Block spectrum** ([`tracker`]): `revs_per_block` consecutive revolutions, windowed
//!    ([`window`]), one complex FFT planned once, scaled to peak amplitudes with the window's
//!    coherent gain.
//!
//! Amplitudes are what the order map uses. The low-pass delays the signal by about 0.032 revolution
//! (11° at 1X, n times that at nX, more near the cutoff, none while bypassed), so **phases of the
//! order map are not used for the nX vectors**: those come from a separate per-revolution DFT
//! ([`crate::vectors`]).
//!
//! Memory is bounded: a channel keeps only the raw samples from the start of the earliest revolution
//! not yet resampled (while decimating, from the start of the last revolution used), capped at about
//! `2 × max_rev_s × fs` plus the last block of samples pushed (the buffer's allocation may round
//! that up), and the few filtered samples the next revolution's interpolation reaches back to.

pub mod decimate;
pub mod filter;
pub mod resample;
mod stream;
pub mod tracker;
pub mod window;

#[cfg(test)]
mod tests;

pub use tracker::{OrderSpectrum, OrderTracker};
pub use window::Window;

#[cfg(doc)]
use crate::types::Revolution;

/// Why an order-map configuration or tracker could not be built.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SpectrumError {
    /// A field of [`OrderMapConfig`] is out of range; `field` is the field's name.
    #[error("order map setting `{field}` = {value}: {reason}")]
    InvalidConfig {
        /// Name of the offending field.
        field: &'static str,
        /// The value given, as text.
        value: String,
        /// What the value must satisfy.
        reason: &'static str,
    },
    /// An argument of [`OrderTracker::new`] is out of range; `name` is the argument's name.
    #[error("order tracker argument `{name}` = {value}: {reason}")]
    InvalidArgument {
        /// Name of the offending argument.
        name: &'static str,
        /// The value given, as text.
        value: String,
        /// What the value must satisfy.
        reason: &'static str,
    },
}

/// Settings of the order map, shared by every channel of a machine.
///
/// A plain struct so it can be read from a configuration file, printed and checked with
/// [`OrderMapConfig::validate`] before any tracker is built.
#[derive(Clone, Debug, PartialEq)]
pub struct OrderMapConfig {
    /// Angle samples per revolution; a power of two so the block FFT stays a fast radix-2 size.
    /// The angle-domain Nyquist is `samples_per_rev / 2` orders. Default 64.
    pub samples_per_rev: usize,
    /// Revolutions per spectrum; the order resolution is `1 / revs_per_block`. Default 16, fine
    /// enough to separate 0.5X whirl and fractional orders, short enough to follow a run-up.
    pub revs_per_block: usize,
    /// Highest order kept in each spectrum. At most `0.4 × samples_per_rev`, which leaves the band
    /// between 0.8 × and 1 × the angle Nyquist for the anti-alias filter's roll-off. Default 20.
    pub max_order: f64,
    /// Window applied to each block before the FFT. Default Hann.
    pub window: Window,
}

impl Default for OrderMapConfig {
    fn default() -> Self {
        Self {
            samples_per_rev: 64,
            revs_per_block: 16,
            max_order: 20.0,
            window: Window::Hann,
        }
    }
}

/// Largest angle-domain block accepted, samples: keeps a mistyped setting from asking for a
/// gigabyte-sized FFT.
const MAX_BLOCK_LEN: usize = 1 << 22;

impl OrderMapConfig {
    /// Checks every field, naming the first one out of range.
    pub fn validate(&self) -> Result<(), SpectrumError> {
        let spr = self.samples_per_rev;
        if spr < 8 || !spr.is_power_of_two() {
            return Err(SpectrumError::InvalidConfig {
                field: "samples_per_rev",
                value: spr.to_string(),
                reason: "must be a power of two, at least 8",
            });
        }
        if self.revs_per_block == 0 {
            return Err(SpectrumError::InvalidConfig {
                field: "revs_per_block",
                value: self.revs_per_block.to_string(),
                reason: "must be at least 1",
            });
        }
        let too_long = match spr.checked_mul(self.revs_per_block) {
            Some(n) => n > MAX_BLOCK_LEN,
            None => true,
        };
        if too_long {
            return Err(SpectrumError::InvalidConfig {
                field: "revs_per_block",
                value: self.revs_per_block.to_string(),
                reason: "samples_per_rev × revs_per_block must not exceed 4194304",
            });
        }
        let limit = 0.4 * spr as f64;
        if !self.max_order.is_finite() || self.max_order <= 0.0 || self.max_order > limit {
            return Err(SpectrumError::InvalidConfig {
                field: "max_order",
                value: self.max_order.to_string(),
                reason: "must be above 0 and at most 0.4 × samples_per_rev",
            });
        }
        Ok(())
    }

    /// Order resolution of the spectra, orders per bin.
    pub fn order_step(&self) -> f64 {
        1.0 / self.revs_per_block as f64
    }

    /// Number of bins kept in each spectrum: orders `0, step, 2·step, …` up to `max_order`.
    pub fn bin_count(&self) -> usize {
        // A small tolerance so that max_order = 7.25 with step 1/16 keeps the bin at 7.25 exactly.
        (self.max_order * self.revs_per_block as f64 + 1e-9).floor() as usize + 1
    }
}
