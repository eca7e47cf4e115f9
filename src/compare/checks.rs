//! Checksum search over the codes of one layout: simple checks (XOR / sum of nibbles or bytes,
//! parity) and CRCs (see [`super::crc`]) with the trailing bits as check and the rest as message.
//!
//! # When is a candidate meaningful?
//!
//! Codewords are first de-duplicated. Differences of the messages to the first message are
//! reduced over GF(2); their rank `r` counts independent constraints. A check of `w` bits that
//! is a function of the message fits random checks on all codes with probability `2^(−w·r)`
//! (one codeword is spent on the unknown constant — `init`/`xorout` for CRCs, the constant of a
//! simple check). With `H` hypotheses of that kind and width (CRC: `4 · (2^w − 1)`, i.e. every
//! non-zero poly × `refin` × `refout`; simple check: 1), the expected number of false matches is
//! `H · 2^(−w·r)`. A width is searched only when this is at most
//! [`CompareOptions::max_false_match`](super::CompareOptions::max_false_match) (default 1e-3);
//! otherwise its scan says [`ScanStatus::TooFewCodes`]. A set of random codes thus yields a
//! false candidate with probability of about the threshold per searched width and kind, and far
//! less once there are more codes than the minimum. For the non-linear sums the rank is used as
//! an approximation of the number of independent constraints.
//!
//! Simple checks align their `w`-bit groups to the end of the message (the check boundary); a
//! leading partial group is zero-padded, which changes neither XOR nor sum.

use serde::{Deserialize, Serialize};

use super::bits::{value_msb, IsNoneOr};
use super::crc::{search_width, CrcCandidate, Split};

/// Kind of simple check.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum SimpleCheckKind {
    /// Trailing 4 bits = XOR of the message nibbles ^ constant.
    XorNibbles,
    /// Trailing 4 bits = (sum of nibbles + constant) mod 16.
    SumNibbles,
    /// Trailing 4 bits = (constant − sum of nibbles) mod 16 (covers two's and ones' complement).
    NegSumNibbles,
    /// Trailing 8 bits = XOR of the message bytes ^ constant.
    XorBytes,
    /// Trailing 8 bits = (sum of bytes + constant) mod 256.
    SumBytes,
    /// Trailing 8 bits = (constant − sum of bytes) mod 256.
    NegSumBytes,
    /// Last bit = XOR of all message bits ^ constant (0: even parity, 1: odd).
    Parity,
}

impl SimpleCheckKind {
    /// All kinds, in search order.
    pub const ALL: [SimpleCheckKind; 7] = [
        Self::XorNibbles,
        Self::SumNibbles,
        Self::NegSumNibbles,
        Self::XorBytes,
        Self::SumBytes,
        Self::NegSumBytes,
        Self::Parity,
    ];

    /// Check width in bits.
    pub fn width(self) -> u32 {
        match self {
            Self::XorNibbles | Self::SumNibbles | Self::NegSumNibbles => 4,
            Self::XorBytes | Self::SumBytes | Self::NegSumBytes => 8,
            Self::Parity => 1,
        }
    }

    /// Name used in text and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Self::XorNibbles => "xor-nibbles",
            Self::SumNibbles => "sum-nibbles",
            Self::NegSumNibbles => "neg-sum-nibbles",
            Self::XorBytes => "xor-bytes",
            Self::SumBytes => "sum-bytes",
            Self::NegSumBytes => "neg-sum-bytes",
            Self::Parity => "parity",
        }
    }

    /// The constant this codeword implies: equal for all codes when the check holds.
    fn constant(self, message: &[u8], check: u64) -> u64 {
        let w = self.width() as usize;
        let m = (1u64 << w) - 1;
        let groups = || {
            let lead = message.len() % w;
            let first = std::iter::once(&message[..lead]).filter(|g| !g.is_empty());
            first.chain(message[lead..].chunks(w)).map(value_msb)
        };
        match self {
            Self::XorNibbles | Self::XorBytes | Self::Parity => groups().fold(check, |a, g| a ^ g),
            Self::SumNibbles | Self::SumBytes => {
                let sum = groups().fold(0u64, |a, g| a.wrapping_add(g));
                check.wrapping_sub(sum) & m
            }
            Self::NegSumNibbles | Self::NegSumBytes => {
                let sum = groups().fold(0u64, |a, g| a.wrapping_add(g));
                check.wrapping_add(sum) & m
            }
        }
    }
}

/// A simple check that explains every compared codeword.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SimpleCandidate {
    /// Which check.
    pub kind: SimpleCheckKind,
    /// Check width in bits (trailing bits of the code).
    pub width: u32,
    /// Message length in bits.
    pub message_bits: usize,
    /// The constant (see [`SimpleCheckKind`]).
    pub constant: u32,
    /// Distinct codewords checked, all reproduced.
    pub supporting_codes: usize,
    /// Independent message differences (GF(2) rank).
    pub independent_differences: usize,
    /// 2^(−width × independent_differences).
    pub false_match_estimate: f64,
}

/// Outcome of scanning one check width.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ScanStatus {
    /// Searched; candidates (if any) are listed.
    Searched,
    /// Not enough independent codes for a match to mean anything (see module docs).
    TooFewCodes,
    /// Two codes with equal messages have different checks: no function of the message fits.
    Inconsistent,
    /// The code is not longer than the check.
    TooShort,
}

/// Evidence of the scan of one CRC width.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct WidthScan {
    /// Check width.
    pub width: u32,
    /// Message length in bits.
    pub message_bits: usize,
    /// Independent message differences (GF(2) rank).
    pub independent_differences: usize,
    /// Hypotheses of this width: 4 · (2^width − 1).
    pub hypotheses: u64,
    /// hypotheses × 2^(−width × independent_differences).
    pub false_match_estimate: f64,
    /// What happened.
    pub status: ScanStatus,
    /// CRC candidates found at this width.
    pub candidates: usize,
}

/// Result of the checksum search over one layout.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ChecksumSearch {
    /// Distinct codewords used.
    pub distinct_codes: usize,
    /// Threshold on the expected false matches of a width or kind.
    pub max_false_match: f64,
    /// Scan of every CRC width in the configured range.
    pub widths: Vec<WidthScan>,
    /// Simple checks that explain all codes.
    pub simple: Vec<SimpleCandidate>,
    /// CRCs that explain all codes.
    pub crc: Vec<CrcCandidate>,
}

impl ChecksumSearch {
    /// Widest check any candidate explains, with a short description of the first such
    /// candidate (CRC preferred).
    pub fn widest(&self) -> Option<(u32, String)> {
        let crc = self.crc.iter().map(|c| {
            (
                c.width,
                format!(
                    "crc width {} poly 0x{:X} refin {} refout {}",
                    c.width, c.poly, c.refin, c.refout
                ),
            )
        });
        let simple = self
            .simple
            .iter()
            .map(|s| (s.width, s.kind.name().to_string()));
        let mut best: Option<(u32, String)> = None;
        for (w, d) in crc.chain(simple) {
            if best.is_none_or_compat(|(bw, _)| w > *bw) {
                best = Some((w, d));
            }
        }
        best
    }
}

/// Rank of the message differences and consistency (equal messages ⇒ equal checks).
fn rank_of(split: &Split<'_>) -> (usize, bool) {
    let (basis, consistent) = split.difference_basis(false);
    (basis.rank(), consistent)
}

/// Runs the whole search over distinct equal-length codewords.
pub(crate) fn search(
    codes: &[&[u8]],
    width_min: u32,
    width_max: u32,
    max_false_match: f64,
) -> ChecksumSearch {
    let len = codes.first().map_or(0, |c| c.len());
    let mut out = ChecksumSearch {
        distinct_codes: codes.len(),
        max_false_match,
        widths: Vec::new(),
        simple: Vec::new(),
        crc: Vec::new(),
    };
    for kind in SimpleCheckKind::ALL {
        let w = kind.width() as usize;
        if len <= w || codes.len() < 2 {
            continue;
        }
        let split = Split::new(codes, w);
        let (rank, consistent) = rank_of(&split);
        let estimate = 2f64.powf(-(w as f64) * rank as f64);
        if !consistent || rank == 0 || estimate > max_false_match {
            continue;
        }
        let c0 = kind.constant(split.messages[0], split.checks[0]);
        if split
            .messages
            .iter()
            .zip(&split.checks)
            .all(|(m, &c)| kind.constant(m, c) == c0)
        {
            out.simple.push(SimpleCandidate {
                kind,
                width: kind.width(),
                message_bits: len - w,
                constant: c0 as u32,
                supporting_codes: codes.len(),
                independent_differences: rank,
                false_match_estimate: estimate,
            });
        }
    }
    for width in width_min..=width_max {
        let w = width as usize;
        let hypotheses = 4 * ((1u64 << width) - 1);
        let mut scan = WidthScan {
            width,
            message_bits: len.saturating_sub(w),
            independent_differences: 0,
            hypotheses,
            false_match_estimate: hypotheses as f64,
            status: ScanStatus::TooShort,
            candidates: 0,
        };
        if len > w {
            let split = Split::new(codes, w);
            let (rank, consistent) = rank_of(&split);
            scan.independent_differences = rank;
            scan.false_match_estimate = hypotheses as f64 * 2f64.powf(-(w as f64) * rank as f64);
            scan.status = if !consistent {
                ScanStatus::Inconsistent
            } else if rank == 0 || scan.false_match_estimate > max_false_match {
                ScanStatus::TooFewCodes
            } else {
                ScanStatus::Searched
            };
            if scan.status == ScanStatus::Searched {
                let found = search_width(&split, width, scan.false_match_estimate);
                scan.candidates = found.len();
                out.crc.extend(found);
            }
        }
        out.widths.push(scan);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn constants_of_simple_checks() {
        // Message 0x3 0xA 0x5 (12 bits), nibble XOR = 3^A^5 = 0xC, nibble sum = 0x12 → 2.
        let msg = [0, 0, 1, 1, 1, 0, 1, 0, 0, 1, 0, 1];
        assert_eq!(SimpleCheckKind::XorNibbles.constant(&msg, 0xC), 0);
        assert_eq!(SimpleCheckKind::SumNibbles.constant(&msg, 0x2), 0);
        assert_eq!(SimpleCheckKind::NegSumNibbles.constant(&msg, 0xE), 0); // 0xE + 0x12 = 0x20
                                                                           // Odd parity: message has 6 ones, check bit 1 → constant 1.
        assert_eq!(SimpleCheckKind::Parity.constant(&msg, 1), 1);
        // Leading partial group: 6 bits 10 1111 → groups 0x2, 0xF.
        assert_eq!(
            SimpleCheckKind::XorNibbles.constant(&[1, 0, 1, 1, 1, 1], 0xD),
            0
        );
    }
}
