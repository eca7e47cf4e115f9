//! Small bit-string helpers shared by the compare stage: parsing, packing, Hamming distance,
//! hex, and an incremental GF(2) basis used by the checksum search.

/// Parses a string of `'0'`/`'1'` characters into a vector of 0/1 values.
pub(crate) fn parse_bits(s: &str) -> Result<Vec<u8>, String> {
    if s.is_empty() {
        return Err("empty bit string".to_string());
    }
    s.chars()
        .enumerate()
        .map(|(i, c)| match c {
            '0' => Ok(0),
            '1' => Ok(1),
            other => Err(format!("character {other:?} at bit {i} is not 0 or 1")),
        })
        .collect()
}

/// Renders 0/1 values as a string of `'0'`/`'1'`.
pub(crate) fn to_string(bits: &[u8]) -> String {
    bits.iter()
        .map(|&b| if b == 0 { '0' } else { '1' })
        .collect()
}

/// Hex of the bits, MSB first, left-padded with zero bits to whole nibbles (upper case).
pub(crate) fn to_hex(bits: &[u8]) -> String {
    let pad = (4 - bits.len() % 4) % 4;
    let mut out = String::with_capacity(bits.len().div_ceil(4));
    let mut nibble = 0u8;
    let mut filled = pad;
    for &b in bits {
        nibble = (nibble << 1) | (b & 1);
        filled += 1;
        if filled == 4 {
            out.push(
                char::from_digit(u32::from(nibble), 16).map_or('?', |c| c.to_ascii_uppercase()),
            );
            nibble = 0;
            filled = 0;
        }
    }
    out
}

/// Packs 0/1 values into 64-bit words (bit `i` of the string is bit `i % 64` of word `i / 64`).
pub(crate) fn pack(bits: &[u8]) -> Vec<u64> {
    let mut words = vec![0u64; bits.len().div_ceil(64)];
    for (i, &b) in bits.iter().enumerate() {
        if b != 0 {
            words[i / 64] |= 1u64 << (i % 64);
        }
    }
    words
}

/// Number of differing bits of two packed strings of equal length.
pub(crate) fn hamming(a: &[u64], b: &[u64]) -> u32 {
    a.iter().zip(b).map(|(x, y)| (x ^ y).count_ones()).sum()
}

/// Value of up to 64 bits read MSB first.
pub(crate) fn value_msb(bits: &[u8]) -> u64 {
    bits.iter()
        .fold(0u64, |acc, &b| (acc << 1) | u64::from(b & 1))
}

/// Value of up to 64 bits read LSB first (the first bit is the least significant).
pub(crate) fn value_lsb(bits: &[u8]) -> u64 {
    bits.iter()
        .rev()
        .fold(0u64, |acc, &b| (acc << 1) | u64::from(b & 1))
}

/// `Option::is_none_or` for the crate's minimum Rust version (1.80).
pub(crate) trait IsNoneOr<T> {
    /// True for `None`, else `f` of the value.
    fn is_none_or_compat(&self, f: impl FnOnce(&T) -> bool) -> bool;
}

impl<T> IsNoneOr<T> for Option<T> {
    fn is_none_or_compat(&self, f: impl FnOnce(&T) -> bool) -> bool {
        match self {
            None => true,
            Some(v) => f(v),
        }
    }
}

/// Outcome of adding one row to a [`Gf2Basis`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Insert {
    /// The row's left part was independent and joined the basis.
    Independent,
    /// The row's left part was a combination of the basis and so was its right part.
    Dependent,
    /// The row's left part was a combination of the basis but its right part was not: no linear
    /// map from the left parts to the right parts exists.
    Inconsistent,
}

/// Row of an augmented GF(2) system: a packed left part and a right part of up to 64 bits.
#[derive(Debug, Clone)]
pub(crate) struct AugRow {
    pub(crate) left: Vec<u64>,
    pub(crate) right: u64,
}

/// Incremental row-echelon basis over GF(2) of augmented rows `[left | right]`.
///
/// Invariant: no basis row has the pivot bit of an earlier row set, so reducing a new row by the
/// rows in insertion order clears every pivot.
#[derive(Debug, Default, Clone)]
pub(crate) struct Gf2Basis {
    rows: Vec<(usize, AugRow)>,
}

impl Gf2Basis {
    pub(crate) fn new() -> Self {
        Self::default()
    }

    /// Reduces `row` by the basis and adds it when independent.
    pub(crate) fn insert(&mut self, mut row: AugRow) -> Insert {
        for (pivot, b) in &self.rows {
            if row.left[pivot / 64] >> (pivot % 64) & 1 == 1 {
                for (x, y) in row.left.iter_mut().zip(&b.left) {
                    *x ^= y;
                }
                row.right ^= b.right;
            }
        }
        let pivot = row
            .left
            .iter()
            .enumerate()
            .find(|(_, w)| **w != 0)
            .map(|(i, w)| i * 64 + w.trailing_zeros() as usize);
        match pivot {
            Some(p) => {
                self.rows.push((p, row));
                Insert::Independent
            }
            None if row.right == 0 => Insert::Dependent,
            None => Insert::Inconsistent,
        }
    }

    /// Number of independent rows.
    pub(crate) fn rank(&self) -> usize {
        self.rows.len()
    }

    /// The basis rows.
    pub(crate) fn rows(&self) -> impl Iterator<Item = &AugRow> {
        self.rows.iter().map(|(_, r)| r)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parse_and_render_round_trip() {
        let bits = parse_bits("0110100").expect("valid");
        assert_eq!(bits, vec![0, 1, 1, 0, 1, 0, 0]);
        assert_eq!(to_string(&bits), "0110100");
        assert!(parse_bits("").is_err());
        assert!(parse_bits("01x").is_err());
    }

    #[test]
    fn hex_pads_on_the_left() {
        // 0b0110100 = 0x34 after left padding to 8 bits.
        assert_eq!(to_hex(&[0, 1, 1, 0, 1, 0, 0]), "34");
        assert_eq!(to_hex(&[1]), "1");
        assert_eq!(to_hex(&[1, 1, 1, 1, 0, 0, 0, 0, 1]), "1E1");
    }

    #[test]
    fn hamming_over_words() {
        let a: Vec<u8> = (0..150).map(|i| (i % 3 == 0) as u8).collect();
        let b: Vec<u8> = (0..150).map(|i| (i % 5 == 0) as u8).collect();
        let naive = a.iter().zip(&b).filter(|(x, y)| x != y).count() as u32;
        assert_eq!(hamming(&pack(&a), &pack(&b)), naive);
    }

    #[test]
    fn values_in_both_orders() {
        assert_eq!(value_msb(&[1, 0, 1, 1]), 0b1011);
        assert_eq!(value_lsb(&[1, 0, 1, 1]), 0b1101);
    }

    #[test]
    fn basis_finds_rank_and_inconsistency() {
        let row = |l: u64, r: u64| AugRow {
            left: vec![l],
            right: r,
        };
        let mut b = Gf2Basis::new();
        assert_eq!(b.insert(row(0b011, 1)), Insert::Independent);
        assert_eq!(b.insert(row(0b110, 0)), Insert::Independent);
        // 0b101 = 0b011 ^ 0b110, right part 1 ^ 0 = 1: consistent.
        assert_eq!(b.insert(row(0b101, 1)), Insert::Dependent);
        assert_eq!(b.insert(row(0b101, 0)), Insert::Inconsistent);
        assert_eq!(b.rank(), 2);
    }
}
