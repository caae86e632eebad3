//! Bytes eight at a time (a `u64` "word"), for the reader's and the CSV
//! writer's scans of plain ASCII text: the usual line or cell is ruled in
//! or out a word at a time, and only a word that might matter is looked at
//! byte by byte.

/// 0x01 in every byte.
pub const ONES: u64 = 0x0101_0101_0101_0101;
/// The high bit of every byte.
pub const HIGH: u64 = 0x8080_8080_8080_8080;

/// The bytes of `word` equal to `b`, as their high bits. Exact: the
/// addition cannot carry from one byte into the next.
#[inline]
pub fn equal_bytes(word: u64, b: u8) -> u64 {
    let t = word ^ (ONES * u64::from(b));
    !(((t & !HIGH) + !HIGH) | t | !HIGH)
}

/// Non-zero when some byte of `word` is below `b` (`b` ≤ 0x80); it may also
/// be non-zero otherwise (Mycroft's zero-byte test, shifted), so a caller
/// confirms byte by byte.
#[inline]
pub fn maybe_below(word: u64, b: u8) -> u64 {
    word.wrapping_sub(u64::from(b) * ONES) & !word & HIGH
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Both tests against the plain byte-by-byte answer, on words made of
    /// bytes around the ones asked about.
    #[test]
    fn word_tests_agree_with_bytes() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand::rngs::StdRng::seed_from_u64(8);
        let near = [0u8, 1, b'\t', b' ', b'"', b',', 0x2C, 0x2D, 0x2E, 0x7F, 0x80, 0x81, 0xFF];
        for _ in 0..200_000 {
            let bytes: [u8; 8] = std::array::from_fn(|_| match rng.random_bool(0.5) {
                true => near[rng.random_range(0..near.len())],
                false => rng.random(),
            });
            let word = u64::from_le_bytes(bytes);
            let b = near[rng.random_range(0..near.len())];
            let equal = bytes.iter().enumerate().fold(0, |m, (i, &x)| m | (u64::from(x == b) << (8 * i + 7)));
            assert_eq!(equal_bytes(word, b), equal, "{bytes:?} {b}");
            if b <= 0x80 && bytes.iter().any(|&x| x < b) {
                assert_ne!(maybe_below(word, b), 0, "{bytes:?} {b}");
            }
        }
    }
}
