//! The only code that touches raw pointers: turning the C caller's pointers into slices, strings
//! and output places, after checking what can be checked (null, alignment, overflow).
//!
//! What cannot be checked (that a pointer really points at as many elements as its length says,
//! and that nobody writes them during the call) is the caller's promise, written in `veer.h`; each
//! `unsafe` block below rests on it and on the checks before it.
#![allow(unsafe_code)]

use crate::status::AbiError;
use std::ffi::{c_char, CStr};

fn checked<T>(p: *const T, len: usize, what: &'static str) -> Result<(), AbiError> {
    if p.is_null() {
        return Err(AbiError::Null(what));
    }
    if !p.is_aligned() {
        return Err(AbiError::Argument(format!(
            "`{what}` is not aligned for its element type"
        )));
    }
    match len.checked_mul(std::mem::size_of::<T>()) {
        Some(bytes) if bytes <= isize::MAX as usize => Ok(()),
        _ => Err(AbiError::Length(format!(
            "`{what}`: {len} elements is more than memory can hold"
        ))),
    }
}

/// The caller's `len` elements at `p`; empty (and `p` unread, may be null) when `len` is 0.
pub(crate) fn slice<'a, T>(
    p: *const T,
    len: usize,
    what: &'static str,
) -> Result<&'a [T], AbiError> {
    if len == 0 {
        return Ok(&[]);
    }
    checked(p, len, what)?;
    // SAFETY: `p` is non-null, aligned and `len` elements fit in isize (checked above); the header
    // requires it to point at `len` initialised elements that stay unchanged during the call, and
    // the slice does not outlive the call (the library keeps no pointer).
    Ok(unsafe { std::slice::from_raw_parts(p, len) })
}

/// One slice per channel from an array of `n_channels` pointers, each to `n_frames` elements.
pub(crate) fn planar<'a, T>(
    pp: *const *const T,
    n_channels: usize,
    n_frames: usize,
) -> Result<Vec<&'a [T]>, AbiError> {
    let ptrs = slice(pp, n_channels, "channels")?;
    if n_channels > 0 && ptrs.iter().any(|p| p.is_null()) && n_frames > 0 {
        return Err(AbiError::Null("channels[i]"));
    }
    ptrs.iter()
        .map(|&p| slice(p, n_frames, "channels[i]"))
        .collect()
}

/// A NUL-terminated UTF-8 string.
pub(crate) fn text<'a>(p: *const c_char, what: &'static str) -> Result<&'a str, AbiError> {
    if p.is_null() {
        return Err(AbiError::Null(what));
    }
    // SAFETY: non-null (checked); the header requires a NUL-terminated string that stays unchanged
    // during the call; the borrow does not outlive the call.
    let s = unsafe { CStr::from_ptr(p) };
    s.to_str()
        .map_err(|e| AbiError::Argument(format!("`{what}` is not UTF-8: {e}")))
}

/// The caller's initialised object at `p`, to read and write during the call.
pub(crate) fn place<'a, T>(p: *mut T, what: &'static str) -> Result<&'a mut T, AbiError> {
    checked(p.cast_const(), 1, what)?;
    // SAFETY: non-null and aligned (checked); the header requires an initialised object that no one
    // else touches during the call; the reference does not outlive the call.
    Ok(unsafe { &mut *p })
}

/// Writes `value` to `p` unless `p` is null (an optional output).
pub(crate) fn put<T>(p: *mut T, value: T) -> Result<(), AbiError> {
    if p.is_null() {
        return Ok(());
    }
    checked(p.cast_const(), 1, "output")?;
    // SAFETY: non-null and aligned (checked); the header requires room for one element. `write`
    // does not read or drop the old value, so the place may be uninitialised.
    unsafe { p.write(value) };
    Ok(())
}

/// Copies `items` to the caller's array at `dst`, which has room for `cap` (`items.len() <= cap`
/// is the caller's, i.e. this crate's, check).
pub(crate) fn copy_out<T: Copy>(
    dst: *mut T,
    cap: usize,
    items: &[T],
    what: &'static str,
) -> Result<(), AbiError> {
    if items.is_empty() {
        return Ok(());
    }
    if items.len() > cap {
        return Err(AbiError::Buffer(format!(
            "`{what}` holds {cap}, {} needed",
            items.len()
        )));
    }
    checked(dst.cast_const(), cap, what)?;
    // SAFETY: `dst` is non-null, aligned and has room for `cap >= items.len()` elements (checked,
    // and required by the header); the source is our own slice, which cannot overlap the caller's
    // array; `copy_nonoverlapping` does not read the destination, so it may be uninitialised.
    unsafe { std::ptr::copy_nonoverlapping(items.as_ptr(), dst, items.len()) };
    Ok(())
}

/// Copies `s` and a NUL into the caller's `cap` bytes at `buf`, cut at a character boundary when
/// it does not fit (nothing is written when `cap` is 0 or `buf` null).
pub(crate) fn copy_text(buf: *mut c_char, cap: usize, s: &str) {
    if buf.is_null() || cap == 0 {
        return;
    }
    let mut n = s.len().min(cap - 1);
    while !s.is_char_boundary(n) {
        n -= 1;
    }
    // SAFETY: `buf` is non-null and, by the header, has room for `cap` bytes; `n + 1 <= cap`
    // bytes are written; `s` is our own string and cannot overlap the caller's buffer.
    unsafe {
        std::ptr::copy_nonoverlapping(s.as_ptr().cast::<c_char>(), buf, n);
        buf.add(n).write(0);
    }
}
