//! The one ASCII hex-digit table every text decoder here uses (candump logs,
//! slcan messages, line telemetry and NMEA checksums). A table and not
//! `u8::is_ascii_hexdigit` plus arithmetic: the candump and slcan parsers sit
//! on the hot path of a saturated bus, and one load tells both "is it a hex
//! digit" and "what is it worth".

/// Marks a byte that is not a hex digit in [`HEX`].
pub const NOT_HEX: u8 = 0xFF;

/// The value of each byte as a hex digit (`0-9`, `a-f`, `A-F`), or
/// [`NOT_HEX`].
pub const HEX: [u8; 256] = {
    let mut t = [NOT_HEX; 256];
    let mut i = 0;
    while i < 10 {
        t[b'0' as usize + i] = i as u8;
        i += 1;
    }
    let mut i = 0;
    while i < 6 {
        t[b'a' as usize + i] = 10 + i as u8;
        t[b'A' as usize + i] = 10 + i as u8;
        i += 1;
    }
    t
};

/// The value of `b` as a hex digit, or `None`.
#[inline(always)]
pub fn digit(b: u8) -> Option<u8> {
    let v = HEX[usize::from(b)];
    (v != NOT_HEX).then_some(v)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn table_agrees_with_the_standard_library_on_every_byte() {
        for b in 0..=255u8 {
            let expected = (b as char).to_digit(16).map(|d| d as u8);
            assert_eq!(digit(b), expected, "byte {b:#04x}");
        }
        assert_eq!((HEX[b'0' as usize], HEX[b'9' as usize], HEX[b'a' as usize], HEX[b'F' as usize]), (0, 9, 10, 15));
        assert_eq!(HEX[b'g' as usize], NOT_HEX);
        assert_eq!(HEX.iter().filter(|&&v| v != NOT_HEX).count(), 22, "10 digits and 6 letters in two cases");
    }
}
