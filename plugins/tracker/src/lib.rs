//! veer-tracker: the order-tracking engine of veer.
//!
//! Pure computation, no I/O: it is fed blocks of samples (a tachometer channel and vibration channels)
//! and returns results. The stages, in the order samples flow through them:
//!
//! - [`tach`]: reference pulses from the tachometer signal, with hysteresis, sub-sample timing, N pulses
//!   per turn and repair of missing or extra pulses; [`angle`] turns them into revolutions with a
//!   shaft-angle model and instantaneous speed.
//! - [`vectors`]: nX amplitude and phase per revolution (or per block of whole revolutions).
//! - [`spectrum`]: order spectra by computed order tracking, the rows of the order map.
//! - [`states`]: machine states and run detection (run-ups and coast-downs).
//! - [`resonance`]: critical speeds from an event's 1X response, with amplification factor, damping and
//!   a single-mode fit; [`margin`]: the separation margin each critical requires and has.
//! - [`drift`]: critical speeds tracked between run-ups from the 1X phase at steady speed, with the
//!   alert when one closes in on the operating range.
//! - [`engine`]: the streaming engine that ties them together; [`sim`] simulates a rotor for demos and
//!   tests.
//!
//! Memory stays bounded whatever the recording's length: samples are kept only for the revolution in
//! progress, and event responses are kept in speed bins.

pub mod angle;
pub mod config;
pub mod drift;
pub mod engine;
pub mod margin;
pub mod resonance;
pub mod sim;
pub mod spectrum;
pub mod states;
pub mod tach;
pub mod types;
pub mod units;
pub mod vectors;

pub use types::{from_amp_lag, lag_deg, Complex64, ResponsePoint, Revolution};
