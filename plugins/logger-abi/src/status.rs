//! Status codes returned across the C interface, and the error that carries each one with its
//! message.
//!
//! Codes are part of the ABI: a code keeps its number for as long as the major version lasts, and
//! new codes are only added (a minor version step). Zero and positive values are success.

use thiserror::Error;

/// Success.
pub const VEER_OK: i32 = 0;
/// The handle is 0, was never created, or was destroyed.
pub const VEER_E_HANDLE: i32 = -1;
/// A pointer that must not be null was null.
pub const VEER_E_NULL: i32 = -2;
/// The configuration string was refused.
pub const VEER_E_CONFIG: i32 = -3;
/// Channel count or block length does not fit the configuration.
pub const VEER_E_LENGTH: i32 = -4;
/// A sample was NaN or infinite; the block was refused whole.
pub const VEER_E_NONFINITE: i32 = -5;
/// A scalar argument (sample rate, timestamp, flag) is out of range.
pub const VEER_E_ARGUMENT: i32 = -6;
/// A caller's buffer is too small; the sizes needed were written and nothing was consumed.
pub const VEER_E_BUFFER: i32 = -7;
/// A fault inside the library (a bug, caught at the boundary); reset or destroy the handle.
pub const VEER_E_INTERNAL: i32 = -8;

/// The name of a status code, for logs (`"VEER_E_LENGTH"`), or `"unknown"`.
pub fn name(code: i32) -> &'static str {
    match code {
        VEER_OK => "VEER_OK",
        VEER_E_HANDLE => "VEER_E_HANDLE",
        VEER_E_NULL => "VEER_E_NULL",
        VEER_E_CONFIG => "VEER_E_CONFIG",
        VEER_E_LENGTH => "VEER_E_LENGTH",
        VEER_E_NONFINITE => "VEER_E_NONFINITE",
        VEER_E_ARGUMENT => "VEER_E_ARGUMENT",
        VEER_E_BUFFER => "VEER_E_BUFFER",
        VEER_E_INTERNAL => "VEER_E_INTERNAL",
        c if c > 0 => "VEER_OK",
        _ => "unknown",
    }
}

/// Why a call failed: the code it returns and the message kept for `veer_last_error`.
#[derive(Debug, Error, Clone, PartialEq)]
#[non_exhaustive]
pub enum AbiError {
    /// See [`VEER_E_HANDLE`].
    #[error("{0}")]
    Handle(String),
    /// See [`VEER_E_NULL`]; names the argument.
    #[error("argument `{0}` is a null pointer")]
    Null(&'static str),
    /// See [`VEER_E_CONFIG`].
    #[error(transparent)]
    Config(#[from] crate::config::ConfigError),
    /// See [`VEER_E_LENGTH`].
    #[error("{0}")]
    Length(String),
    /// See [`VEER_E_NONFINITE`].
    #[error("{0}")]
    NonFinite(String),
    /// See [`VEER_E_ARGUMENT`].
    #[error("{0}")]
    Argument(String),
    /// See [`VEER_E_BUFFER`].
    #[error("{0}")]
    Buffer(String),
    /// See [`VEER_E_INTERNAL`].
    #[error("internal error: {0}")]
    Internal(String),
}

impl AbiError {
    /// The status code the C caller sees.
    pub fn code(&self) -> i32 {
        match self {
            AbiError::Handle(_) => VEER_E_HANDLE,
            AbiError::Null(_) => VEER_E_NULL,
            AbiError::Config(_) => VEER_E_CONFIG,
            AbiError::Length(_) => VEER_E_LENGTH,
            AbiError::NonFinite(_) => VEER_E_NONFINITE,
            AbiError::Argument(_) => VEER_E_ARGUMENT,
            AbiError::Buffer(_) => VEER_E_BUFFER,
            AbiError::Internal(_) => VEER_E_INTERNAL,
        }
    }
}
