//! The exported C functions, declared in `include/veer.h`.
//!
//! Each one runs its body inside `catch_unwind`, so a bug in the library becomes `VEER_E_INTERNAL`
//! and never unwinds into the caller's frames. There is no `unsafe` block here: pointers are
//! turned into references only by the `raw` module. The module allows `unsafe_code` for one reason,
//! `#[no_mangle]`, which the lint counts as unsafe (a test checks that no `unsafe` block creeps in).
#![allow(unsafe_code)]

use crate::raw;
use crate::registry;
use crate::status::{self, AbiError, VEER_E_INTERNAL, VEER_OK};
use crate::structs::{fill, VeerResult, VeerStats};
use crate::tracker::Tracker;
use std::ffi::c_char;
use std::panic::{catch_unwind, AssertUnwindSafe};

/// Major version of the interface: bumped by any change that can break a compiled caller.
pub const VEER_ABI_VERSION_MAJOR: u32 = 1;
/// Minor version: bumped by additions that old callers do not see.
pub const VEER_ABI_VERSION_MINOR: u32 = 0;

/// A handle to an open tracker; 0 is never one.
pub type VeerHandle = u64;

fn panic_message(p: &(dyn std::any::Any + Send)) -> String {
    let what = p
        .downcast_ref::<&str>()
        .map(|s| s.to_string())
        .or_else(|| p.downcast_ref::<String>().cloned())
        .unwrap_or_else(|| "a panic".to_string());
    format!("internal error: {what}; reset or destroy the handle")
}

/// Runs a call that needs no handle.
fn free_call(f: impl FnOnce() -> Result<i32, AbiError>) -> i32 {
    match catch_unwind(AssertUnwindSafe(f)) {
        Ok(Ok(code)) => code,
        Ok(Err(e)) => {
            registry::set_thread_error(&e.to_string());
            e.code()
        }
        Err(p) => {
            registry::set_thread_error(&panic_message(p.as_ref()));
            VEER_E_INTERNAL
        }
    }
}

/// Runs a call on the tracker of `h`, recording a failure's message on the handle and the thread.
/// A tracker whose earlier call panicked is refused until reset (`heal`).
fn call(h: VeerHandle, heal: bool, f: impl FnOnce(&mut Tracker) -> Result<i32, AbiError>) -> i32 {
    free_call(|| {
        let t = registry::get(h)?;
        let mut guard = match t.lock() {
            Ok(g) => g,
            Err(p) if heal => {
                t.clear_poison();
                p.into_inner()
            }
            Err(p) => {
                let mut g = p.into_inner();
                let e = AbiError::Internal(
                    "an earlier call failed inside the library; reset or destroy the handle"
                        .to_string(),
                );
                g.last_error = e.to_string();
                return Err(e);
            }
        };
        f(&mut guard).inspect_err(|e| guard.last_error = e.to_string())
    })
}

/// The interface version, `(major << 16) | minor`.
#[no_mangle]
pub extern "C" fn veer_abi_version() -> u32 {
    (VEER_ABI_VERSION_MAJOR << 16) | VEER_ABI_VERSION_MINOR
}

/// A status code's name, as a static NUL-terminated string.
#[no_mangle]
pub extern "C" fn veer_status_name(code: i32) -> *const c_char {
    let name = match status::name(code) {
        "VEER_OK" => c"VEER_OK",
        "VEER_E_HANDLE" => c"VEER_E_HANDLE",
        "VEER_E_NULL" => c"VEER_E_NULL",
        "VEER_E_CONFIG" => c"VEER_E_CONFIG",
        "VEER_E_LENGTH" => c"VEER_E_LENGTH",
        "VEER_E_NONFINITE" => c"VEER_E_NONFINITE",
        "VEER_E_ARGUMENT" => c"VEER_E_ARGUMENT",
        "VEER_E_BUFFER" => c"VEER_E_BUFFER",
        "VEER_E_INTERNAL" => c"VEER_E_INTERNAL",
        _ => c"unknown",
    };
    name.as_ptr()
}

/// Creates a tracker from a configuration string; writes its handle to `out` (0 on failure).
#[no_mangle]
pub extern "C" fn veer_create(config: *const c_char, out: *mut VeerHandle) -> i32 {
    free_call(|| {
        raw::put(out, 0)?;
        if out.is_null() {
            return Err(AbiError::Null("out"));
        }
        let text = raw::text(config, "config")?;
        let t = Tracker::from_config_str(text)?;
        raw::put(out, registry::insert(t))?;
        Ok(VEER_OK)
    })
}

/// Closes a handle and frees its tracker.
#[no_mangle]
pub extern "C" fn veer_destroy(h: VeerHandle) -> i32 {
    free_call(|| registry::remove(h).map(|()| VEER_OK))
}

/// Forgets the data and results of a tracker, keeping its configuration.
#[no_mangle]
pub extern "C" fn veer_reset(h: VeerHandle) -> i32 {
    call(h, true, |t| {
        t.reset();
        Ok(VEER_OK)
    })
}

/// Ends the data: closes an open sweep, so that its event can be polled.
#[no_mangle]
pub extern "C" fn veer_finish(h: VeerHandle) -> i32 {
    call(h, false, |t| {
        t.finish();
        Ok(VEER_OK)
    })
}

/// Turns per-revolution results on (1, the default) or off (0).
#[no_mangle]
pub extern "C" fn veer_set_revolutions(h: VeerHandle, on: i32) -> i32 {
    call(h, false, |t| match on {
        0 | 1 => {
            t.set_revolutions(on == 1);
            Ok(VEER_OK)
        }
        _ => Err(AbiError::Argument(format!("on = {on}: must be 0 or 1"))),
    })
}

/// Writes the number of channels a block must have (the tach plus the sensors) to `out`.
#[no_mangle]
pub extern "C" fn veer_channel_count(h: VeerHandle, out: *mut usize) -> i32 {
    call(h, false, |t| {
        if out.is_null() {
            return Err(AbiError::Null("out"));
        }
        raw::put(out, t.channel_count())?;
        Ok(VEER_OK)
    })
}

/// The interleaved push of either sample type.
fn push_interleaved<S: crate::tracker::Sample>(
    h: VeerHandle,
    samples: *const S,
    n_frames: usize,
    n_channels: usize,
    sample_rate: f64,
    t0: f64,
) -> i32 {
    call(h, false, |t| {
        let n = n_frames
            .checked_mul(n_channels)
            .ok_or_else(|| AbiError::Length("n_frames × n_channels overflows".to_string()))?;
        let s = raw::slice(samples, n, "samples")?;
        t.push_interleaved(s, n_channels, sample_rate, t0)?;
        Ok(VEER_OK)
    })
}

/// Pushes `n_frames` interleaved f32 frames of `n_channels` samples (tach first).
#[no_mangle]
pub extern "C" fn veer_push_f32(
    h: VeerHandle,
    samples: *const f32,
    n_frames: usize,
    n_channels: usize,
    sample_rate: f64,
    t0: f64,
) -> i32 {
    push_interleaved(h, samples, n_frames, n_channels, sample_rate, t0)
}

/// Pushes `n_frames` interleaved f64 frames of `n_channels` samples (tach first).
#[no_mangle]
pub extern "C" fn veer_push_f64(
    h: VeerHandle,
    samples: *const f64,
    n_frames: usize,
    n_channels: usize,
    sample_rate: f64,
    t0: f64,
) -> i32 {
    push_interleaved(h, samples, n_frames, n_channels, sample_rate, t0)
}

/// Pushes one f32 buffer per channel (`channels[0]` the tach), each of `n_frames` samples.
#[no_mangle]
pub extern "C" fn veer_push_f32_planar(
    h: VeerHandle,
    channels: *const *const f32,
    n_channels: usize,
    n_frames: usize,
    sample_rate: f64,
    t0: f64,
) -> i32 {
    call(h, false, |t| {
        let chans = raw::planar(channels, n_channels, n_frames)?;
        t.push_planar_f32(&chans, sample_rate, t0)?;
        Ok(VEER_OK)
    })
}

/// Pushes one f64 buffer per channel (`channels[0]` the tach), each of `n_frames` samples.
#[no_mangle]
pub extern "C" fn veer_push_f64_planar(
    h: VeerHandle,
    channels: *const *const f64,
    n_channels: usize,
    n_frames: usize,
    sample_rate: f64,
    t0: f64,
) -> i32 {
    call(h, false, |t| {
        let chans = raw::planar(channels, n_channels, n_frames)?;
        t.push_planar(&chans, sample_rate, t0)?;
        Ok(VEER_OK)
    })
}

/// Takes the next result into `out`: 1 if one was written, 0 if none is waiting.
#[no_mangle]
pub extern "C" fn veer_poll(h: VeerHandle, out: *mut VeerResult) -> i32 {
    call(h, false, |t| {
        let place = raw::place(out, "out")?;
        let Some(o) = t.peek() else {
            return Ok(0);
        };
        let f = fill(o, t.orders());
        let (vectors, vcap, crits, ccap) = (
            place.vectors,
            place.vectors_cap,
            place.criticals,
            place.criticals_cap,
        );
        *place = VeerResult {
            vectors,
            vectors_cap: vcap,
            n_vectors: f.vectors.len(),
            criticals: crits,
            criticals_cap: ccap,
            n_criticals: f.criticals.len(),
            ..f.head
        };
        raw::copy_out(vectors, vcap, &f.vectors, "vectors")?;
        raw::copy_out(crits, ccap, &f.criticals, "criticals")?;
        t.pop();
        Ok(1)
    })
}

/// Takes the next result as one NUL-terminated JSON line: 1 if written, 0 if none is waiting.
/// `len` (may be null) receives the line's length without the NUL, also when `cap` is too small.
#[no_mangle]
pub extern "C" fn veer_poll_json(
    h: VeerHandle,
    buf: *mut c_char,
    cap: usize,
    len: *mut usize,
) -> i32 {
    call(h, false, |t| {
        raw::put(len, 0)?;
        let Some(line) = t.peek_json() else {
            return Ok(0);
        };
        raw::put(len, line.len())?;
        if buf.is_null() && cap > 0 {
            return Err(AbiError::Null("buf"));
        }
        if line.len() >= cap {
            return Err(AbiError::Buffer(format!(
                "the JSON line needs {} bytes with its NUL, `cap` is {cap}",
                line.len() + 1
            )));
        }
        raw::copy_text(buf, cap, &line);
        t.pop();
        Ok(1)
    })
}

/// Writes the tracker's counters to `out`.
#[no_mangle]
pub extern "C" fn veer_get_stats(h: VeerHandle, out: *mut VeerStats) -> i32 {
    call(h, false, |t| {
        if out.is_null() {
            return Err(AbiError::Null("out"));
        }
        raw::put(out, VeerStats::from_counters(&t.counters(), t.pending()))?;
        Ok(VEER_OK)
    })
}

/// Copies the message of the last failed call on `h` (or, for `h` = 0 or a handle that is not
/// open, on this thread) into `buf`; returns the message's full length without the NUL.
#[no_mangle]
pub extern "C" fn veer_last_error(h: VeerHandle, buf: *mut c_char, cap: usize) -> usize {
    let r = catch_unwind(AssertUnwindSafe(|| {
        let msg = match registry::get(h) {
            Ok(t) => match t.lock() {
                Ok(g) => g.last_error.clone(),
                Err(p) => p.into_inner().last_error.clone(),
            },
            Err(_) => registry::thread_error(),
        };
        raw::copy_text(buf, cap, &msg);
        msg.len()
    }));
    r.unwrap_or(0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_panic_becomes_an_error_code_and_the_handle_waits_for_a_reset() {
        assert_eq!(free_call(|| panic!("boom")), VEER_E_INTERNAL);
        assert!(registry::thread_error().contains("boom"));
        let cfg = "min_operating_rpm = 600\nmax_continuous_rpm = 1000\n\
                   tach = { channel = \"t\" }\nsensors = [ { channel = \"v\", units = \"mm/s\" } ]\n";
        let h = registry::insert(Tracker::from_config_str(cfg).expect("valid"));
        assert_eq!(call(h, false, |_| panic!("inside")), VEER_E_INTERNAL);
        // The tracker's lock was poisoned: refused until reset, then usable again.
        assert_eq!(veer_finish(h), VEER_E_INTERNAL);
        assert_eq!(veer_reset(h), VEER_OK);
        assert_eq!(veer_finish(h), VEER_OK);
        assert_eq!(veer_destroy(h), VEER_OK);
    }
}
