//! What a rule's finding contributes to an alert (its message, clear line and figures), built
//! only when a change is due, so the rules format no text on the many evaluations that change
//! nothing.

use super::drift::DriftFinding;
use super::estimate::{ApproachFinding, VectorChangeFinding};
use super::level::LevelFinding;
use super::margin::MarginFinding;
use super::shift::ShiftFinding;
use crate::config::model::Severity;
use serde_json::Value;

/// What a rule's finding tells the engine, built only when a change is due.
pub(super) trait Describe {
    /// The line of a raise or escalation to `severity`.
    fn message(&self, severity: Severity) -> String;
    /// The line of a clear.
    fn cleared(&self) -> String;
    /// The figures.
    fn evidence(&self) -> Value;
}

impl Describe for MarginFinding {
    fn message(&self, severity: Severity) -> String {
        MarginFinding::message(self, severity)
    }
    fn cleared(&self) -> String {
        MarginFinding::cleared(self)
    }
    fn evidence(&self) -> Value {
        MarginFinding::evidence(self)
    }
}

impl Describe for DriftFinding {
    fn message(&self, _: Severity) -> String {
        DriftFinding::message(self)
    }
    fn cleared(&self) -> String {
        DriftFinding::cleared(self)
    }
    fn evidence(&self) -> Value {
        DriftFinding::evidence(self)
    }
}

impl Describe for LevelFinding<'_> {
    fn message(&self, severity: Severity) -> String {
        LevelFinding::message(self, severity)
    }
    fn cleared(&self) -> String {
        LevelFinding::cleared(self)
    }
    fn evidence(&self) -> Value {
        LevelFinding::evidence(self)
    }
}

impl Describe for ShiftFinding {
    fn message(&self, severity: Severity) -> String {
        ShiftFinding::message(self, severity)
    }
    fn cleared(&self) -> String {
        ShiftFinding::cleared(self)
    }
    fn evidence(&self) -> Value {
        ShiftFinding::evidence(self)
    }
}

impl Describe for ApproachFinding {
    fn message(&self, severity: Severity) -> String {
        ApproachFinding::message(self, severity)
    }
    fn cleared(&self) -> String {
        ApproachFinding::cleared(self)
    }
    fn evidence(&self) -> Value {
        ApproachFinding::evidence(self)
    }
}

impl Describe for VectorChangeFinding {
    fn message(&self, _: Severity) -> String {
        VectorChangeFinding::message(self)
    }
    fn cleared(&self) -> String {
        VectorChangeFinding::cleared(self)
    }
    fn evidence(&self) -> Value {
        VectorChangeFinding::evidence(self)
    }
}

/// A fixed text, for changes no rule evaluation stands behind (a critical removed, a channel
/// healthy again).
pub(super) struct Note {
    /// The line of the change.
    pub message: String,
    /// The figures.
    pub evidence: Value,
}

impl Describe for Note {
    fn message(&self, _: Severity) -> String {
        self.message.clone()
    }
    fn cleared(&self) -> String {
        self.message.clone()
    }
    fn evidence(&self) -> Value {
        self.evidence.clone()
    }
}
