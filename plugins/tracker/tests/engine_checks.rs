//! Integration checks of the order-tracking engine against outside references: textbook unbalance
//! response and Jeffcott rotor, phase regimes, multi-mode coast-downs, toothed wheels, runout
//! compensation, false-alarm resistance, bounded event size, sweep reporting and separation margins.
//!
//! Every recording is synthesised by the crate's simulator (an exact-discretisation oracle) and fed
//! to the engine block by block, as the daemon does; the expected values are recomputed here from the
//! published formulas each check names.

#[path = "engine_checks/support.rs"]
mod support;

#[path = "engine_checks/drift.rs"]
mod drift;
#[path = "engine_checks/jeffcott.rs"]
mod jeffcott;
#[path = "engine_checks/margins.rs"]
mod margins;
#[path = "engine_checks/memory.rs"]
mod memory;
#[path = "engine_checks/phase.rs"]
mod phase;
#[path = "engine_checks/quiet.rs"]
mod quiet;
#[path = "engine_checks/runout.rs"]
mod runout;
#[path = "engine_checks/sweep.rs"]
mod sweep;
#[path = "engine_checks/sweep_bias.rs"]
mod sweep_bias;
#[path = "engine_checks/tach_wheels.rs"]
mod tach_wheels;
#[path = "engine_checks/two_modes.rs"]
mod two_modes;
#[path = "engine_checks/unbalance.rs"]
mod unbalance;
