//! CRC-16 of the text format's lines.
//!
//! The parameters are those the CRC catalogues call CRC-16/IBM-3740 (also known as
//! CRC-16/CCITT-FALSE): polynomial 0x1021, initial value 0xFFFF, no reflection, no final XOR. A
//! 16-bit CRC detects every error burst of up to 16 bits, so any one damaged character of a line is
//! caught, which the low half of a CRC-32 does not promise.

/// The polynomial, x^16 + x^12 + x^5 + 1.
const POLY: u16 = 0x1021;

/// Byte-at-a-time table, built at compile time.
const TABLE: [u16; 256] = build_table();

const fn build_table() -> [u16; 256] {
    let mut table = [0u16; 256];
    let mut i = 0;
    while i < 256 {
        let mut crc = (i as u16) << 8;
        let mut bit = 0;
        while bit < 8 {
            crc = if crc & 0x8000 != 0 {
                (crc << 1) ^ POLY
            } else {
                crc << 1
            };
            bit += 1;
        }
        table[i] = crc;
        i += 1;
    }
    table
}

/// The CRC-16 of `bytes`.
pub(crate) fn crc16(bytes: &[u8]) -> u16 {
    let mut crc: u16 = 0xFFFF;
    for &b in bytes {
        crc = (crc << 8) ^ TABLE[usize::from((crc >> 8) as u8 ^ b)];
    }
    crc
}
