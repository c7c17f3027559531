//! Critical speeds tracked between run-ups, from the 1X vector at steady speed.
//!
//! A machine may run for months without a start while a critical speed creeps towards the running
//! speed (a bearing wearing, a foundation softening, a seal stiffening). Near a resonance the lag of
//! the 1X response changes quickly with the ratio of running to natural speed while the amplitude
//! changes slowly, so the lag is the sensitive indicator. This module turns it into a live estimate:
//!
//! - [`CriticalModel`] ([`model`]): the single-mode unbalance response fitted on the last good run-up
//!   or coast-down ([`crate::resonance::fit_mode`]), `v(N) = m·r²/(1 − r² + 2jζr) + b` with
//!   `r = N/Nn` (S. S. Rao, *Mechanical Vibrations*, 5th ed. 2011, §3.7), and the closed forms of its
//!   lag, lag slope and their inversions.
//! - [`Estimator`] ([`estimate`]): per window of whole revolutions, the speed ratio the lag implies,
//!   refined by the amplitude where the two agree, with a standard deviation from the measured
//!   scatter and the model's sensitivity, and a verdict on whether it is informative.
//! - [`SlopeEstimator`] ([`slope`]): the same from the lag's slope against the small wander of the
//!   running speed, with no run-up needed beyond a damping ratio.
//! - [`classify`]: a vector that slides along the model's locus is a natural-speed change, one that
//!   leaves it is an unbalance change (1X vector-change alert, not a critical shift).
//! - [`DriftAlert`] ([`alert`]): the pessimistic, projected critical speed held to the required
//!   separation margin ([`crate::margin`]).
//!
//! Assumptions: one dominant mode near the running speed; unbalance, background and slow-roll
//! vectors steady over a window; a steady speed (wander slow against the mode's settling time).
//! The method, its equations and when not to trust it are set out in `docs/critical-estimate.md`.

pub mod alert;
pub mod classify;
pub mod estimate;
pub mod model;
pub mod slope;

#[cfg(test)]
mod tests;

pub use alert::{Assessment, Bound, DriftAlert, DriftAlertConfig, DriftAlertEvent, Judgement};
pub use classify::{Change, ClassifyConfig};
pub use estimate::{Estimate, Estimator, EstimatorConfig, Method, NotInformative};
pub use model::CriticalModel;
pub use slope::{SlopeConfig, SlopeEstimate, SlopeEstimator};

use thiserror::Error;

/// Errors of the drift estimators: only an invalid model or configuration can be refused.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum DriftError {
    /// A configuration value outside its meaningful range.
    #[error("drift setting {field} = {value} is invalid: {reason}")]
    InvalidConfig {
        /// Name of the field.
        field: &'static str,
        /// The value given.
        value: f64,
        /// What the value must be.
        reason: &'static str,
    },
    /// A model that cannot be inverted.
    #[error("critical model is invalid: {reason}")]
    InvalidModel {
        /// What is wrong with it.
        reason: &'static str,
    },
}
