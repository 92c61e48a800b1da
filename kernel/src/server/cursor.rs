//! Cursor positions: Jupyter counts Unicode code points, the language counts UTF-8 bytes.

/// The byte offset of code point `cp` in `s` (the end of `s` when `cp` is past it).
pub(crate) fn byte_of(s: &str, cp: usize) -> usize {
    s.char_indices().nth(cp).map_or(s.len(), |(b, _)| b)
}

/// The code point index of byte offset `b` in `s`, rounding down inside a character.
pub(crate) fn code_point_of(s: &str, b: usize) -> usize {
    let mut b = b.min(s.len());
    while !s.is_char_boundary(b) {
        b -= 1;
    }
    s[..b].chars().count()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn greek_and_degree_signs_take_two_bytes_but_one_position() {
        // "θ" is U+03B8 (2 bytes in UTF-8), "°" U+00B0 (2 bytes), "≤" U+2264 (3 bytes).
        let s = "θ ≤ 5 °C";
        assert_eq!(s.len(), 12);
        assert_eq!(byte_of(s, 0), 0);
        assert_eq!(byte_of(s, 1), 2);
        assert_eq!(byte_of(s, 3), 6);
        assert_eq!(byte_of(s, 8), 12);
        assert_eq!(byte_of(s, 99), 12);
        assert_eq!(code_point_of(s, 6), 3);
        assert_eq!(code_point_of(s, 12), 8);
        // Byte 1 is inside "θ": round down to its start.
        assert_eq!(code_point_of(s, 1), 0);
        assert_eq!(code_point_of(s, 99), 8);
    }
}
