//! CRC engine in Ross N. Williams' parametrised model ("A Painless Guide to CRC Error Detection
//! Algorithms", 1993, §15: WIDTH, POLY, INIT, REFIN, REFOUT, XOROUT) working on bit strings, and
//! the parameter search used by [`compare`](super::compare).
//!
//! # Bit-level messages
//!
//! Codes on air are bit strings, not byte strings. With `refin = false` the message bits are fed
//! to the register in the order they were sent. With `refin = true` the message is cut into bytes
//! *aligned to its end* (the boundary with the check): a leading partial byte is padded on the
//! left with zero bits, then every byte is fed least significant bit first (the model's
//! "each byte is reflected"). For whole-byte messages this is exactly the catalogue definition.
//! Leading zero bits only change the register's starting state, so the padding is absorbed by the
//! `(init, xorout)` family reported for a candidate.
//!
//! # Search
//!
//! For a fixed message length the CRC is affine in the message:
//! `crc(m; init, xorout) = crc(m; 0, 0) ^ crc(0…0; init, 0) ^ xorout`. XOR-ing two codewords of
//! the same length cancels `init` and `xorout`, so `(poly, refin, refout)` is searched on the
//! differences of codewords alone. The differences are first reduced to an independent basis over
//! GF(2) (a difference that is a combination of others adds no evidence; a zero message difference
//! with a non-zero check difference rules out every CRC of that width at once). With `init = 0`
//! and `xorout = 0` the register after a message `m` is `m(x)·x^w mod P(x)`, so a difference row
//! fits poly `P` exactly when `P(x)` divides `D(x) = Δm(x)·x^w + Δc(x)` (`Δc` un-reflected for
//! `refout`). The candidate polys of a `(refin, refout)` are therefore the monic degree-`w`
//! divisors of `G = gcd(D₁, …, D_r)` over GF(2)\[x\]: none when `deg G < w`, `G` itself when
//! `deg G = w`, and only when `deg G > w` are the `2^w` polys of the width tried against `G`.
//! For a surviving `(poly, refin, refout)` the constant `crc(0…0; init, 0) ^ xorout` is solved
//! from one codeword and every codeword is re-checked with the plain bit-serial engine
//! ([`crc_bits`]).
//!
//! `init` and `xorout` are not separately identifiable from codewords of one length: every
//! `init` has exactly one `xorout` that explains the same codewords. A candidate therefore
//! reports the family: `xorout` at `init = 0`, at `init = all ones`, the `init` that makes
//! `xorout = 0` (when unique), and [`CrcCandidate::xorout_for_init`] for any other `init`.

use serde::{Deserialize, Serialize};

use super::bits::{AugRow, Gf2Basis, Insert};

/// Parameters of one CRC in the Williams model. `poly` is given without its top bit and never
/// reflected; values are right-aligned in the low `width` bits.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct CrcParams {
    /// Register width in bits, 1..=32.
    pub width: u32,
    /// Generator polynomial without the top (x^width) term.
    pub poly: u64,
    /// Initial register value.
    pub init: u64,
    /// Feed each message byte least significant bit first.
    pub refin: bool,
    /// Reflect the final register before `xorout`.
    pub refout: bool,
    /// Value XOR-ed into the (possibly reflected) final register.
    pub xorout: u64,
}

/// One entry of the small built-in catalogue used to name candidates.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct CatalogueEntry {
    /// Catalogue name.
    pub name: &'static str,
    /// Parameters.
    pub params: CrcParams,
    /// CRC of ASCII "123456789".
    pub check: u64,
}

const fn params(
    width: u32,
    poly: u64,
    init: u64,
    refin: bool,
    refout: bool,
    xorout: u64,
) -> CrcParams {
    CrcParams {
        width,
        poly,
        init,
        refin,
        refout,
        xorout,
    }
}

const fn entry(name: &'static str, params: CrcParams, check: u64) -> CatalogueEntry {
    CatalogueEntry {
        name,
        params,
        check,
    }
}

/// CRCs with their check values, copied from facts.md §6.2 (CRC RevEng "Catalogue of
/// parametrised CRC algorithms", G. Cook; each check recomputed bit-serially there). Used to name
/// search candidates and, in the tests, to validate [`crc_bits`].
pub const CRC_CATALOGUE: &[CatalogueEntry] = &[
    entry(
        "CRC-8/SMBUS",
        params(8, 0x07, 0x00, false, false, 0x00),
        0xF4,
    ),
    entry(
        "CRC-8/I-432-1",
        params(8, 0x07, 0x00, false, false, 0x55),
        0xA1,
    ),
    entry("CRC-8/ROHC", params(8, 0x07, 0xFF, true, true, 0x00), 0xD0),
    entry(
        "CRC-8/SAE-J1850",
        params(8, 0x1D, 0xFF, false, false, 0xFF),
        0x4B,
    ),
    entry(
        "CRC-8/AUTOSAR",
        params(8, 0x2F, 0xFF, false, false, 0xFF),
        0xDF,
    ),
    entry(
        "CRC-16/ARC",
        params(16, 0x8005, 0x0000, true, true, 0x0000),
        0xBB3D,
    ),
    entry(
        "CRC-16/IBM-3740",
        params(16, 0x1021, 0xFFFF, false, false, 0x0000),
        0x29B1,
    ),
    entry(
        "CRC-16/KERMIT",
        params(16, 0x1021, 0x0000, true, true, 0x0000),
        0x2189,
    ),
    entry(
        "CRC-16/XMODEM",
        params(16, 0x1021, 0x0000, false, false, 0x0000),
        0x31C3,
    ),
    entry(
        "CRC-16/MODBUS",
        params(16, 0x8005, 0xFFFF, true, true, 0x0000),
        0x4B37,
    ),
    entry(
        "CRC-16/IBM-SDLC",
        params(16, 0x1021, 0xFFFF, true, true, 0xFFFF),
        0x906E,
    ),
    entry(
        "CRC-32/ISO-HDLC",
        params(32, 0x04C1_1DB7, 0xFFFF_FFFF, true, true, 0xFFFF_FFFF),
        0xCBF4_3926,
    ),
];

fn mask(width: u32) -> u64 {
    if width >= 64 {
        u64::MAX
    } else {
        (1u64 << width) - 1
    }
}

/// Reverses the low `width` bits of `v`.
pub(crate) fn reflect(v: u64, width: u32) -> u64 {
    let mut out = 0u64;
    for i in 0..width {
        if v >> i & 1 == 1 {
            out |= 1 << (width - 1 - i);
        }
    }
    out
}

/// Message bits in the order the register consumes them (see the module docs for `refin`).
pub(crate) fn fed_order(bits: &[u8], refin: bool) -> Vec<u8> {
    if !refin {
        return bits.to_vec();
    }
    let pad = (8 - bits.len() % 8) % 8;
    let mut padded = vec![0u8; pad];
    padded.extend_from_slice(bits);
    let mut fed = Vec::with_capacity(padded.len());
    for byte in padded.chunks(8) {
        fed.extend(byte.iter().rev());
    }
    fed
}

/// Shifts already-ordered bits through the register (no reflection, no xorout).
fn register(width: u32, poly: u64, init: u64, fed: &[u8]) -> u64 {
    let m = mask(width);
    let top = 1u64 << (width - 1);
    let mut reg = init & m;
    for &b in fed {
        let feedback = (reg & top != 0) ^ (b != 0);
        reg = (reg << 1) & m;
        if feedback {
            reg ^= poly & m;
        }
    }
    reg
}

/// CRC of a bit string (MSB-first as sent), bit-serial, in the Williams model.
///
/// Widths outside 1..=32 are clamped into that range.
///
/// ```
/// use ooksift::compare::{crc_bytes, CRC_CATALOGUE};
/// let arc = CRC_CATALOGUE.iter().find(|e| e.name == "CRC-16/ARC").expect("listed");
/// assert_eq!(crc_bytes(&arc.params, b"123456789"), 0xBB3D);
/// ```
pub fn crc_bits(params: &CrcParams, bits: &[u8]) -> u64 {
    let width = params.width.clamp(1, 32);
    let fed = fed_order(bits, params.refin);
    let mut reg = register(width, params.poly, params.init, &fed);
    if params.refout {
        reg = reflect(reg, width);
    }
    (reg ^ params.xorout) & mask(width)
}

/// CRC of a byte string: the bytes' bits, most significant first, through [`crc_bits`].
pub fn crc_bytes(params: &CrcParams, bytes: &[u8]) -> u64 {
    let bits: Vec<u8> = bytes
        .iter()
        .flat_map(|&byte| (0..8).rev().map(move |i| byte >> i & 1))
        .collect();
    crc_bits(params, &bits)
}

/// A `(width, poly, refin, refout)` that explains every compared codeword, with its
/// `(init, xorout)` family.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CrcCandidate {
    /// Check width in bits: the trailing `width` bits of each code.
    pub width: u32,
    /// Generator polynomial without its top bit (Williams notation).
    pub poly: u32,
    /// Message bytes fed least significant bit first.
    pub refin: bool,
    /// Register reflected before `xorout`.
    pub refout: bool,
    /// Message length in bits (the code length minus `width`).
    pub message_bits: usize,
    /// `xorout` of the family member with `init = 0` (the canonical member).
    pub xorout_at_init_zero: u32,
    /// `xorout` of the family member with `init` = all ones.
    pub xorout_at_init_ones: u32,
    /// `init` of the family member with `xorout = 0`, when exactly one exists.
    pub init_at_xorout_zero: Option<u32>,
    /// Distinct codewords checked, all of which this candidate reproduces.
    pub supporting_codes: usize,
    /// Independent codeword differences (GF(2) rank) the candidate had to satisfy.
    pub independent_differences: usize,
    /// Expected number of `(poly, refin, refout)` hypotheses of this width that would fit codes
    /// with random checks: hypotheses × 2^(−width × independent_differences).
    pub false_match_estimate: f64,
    /// Catalogue names (facts.md §6.2 list) whose parameters lie in this family.
    pub catalogue_names: Vec<String>,
    /// Remark, e.g. that poly 1 is the XOR of width-bit groups.
    pub note: Option<String>,
}

impl CrcCandidate {
    /// The `xorout` that, together with `init`, explains the same codewords.
    ///
    /// `xorout(init) = xorout_at_init_zero ^ crc(0…0 of message_bits; init, xorout = 0)`.
    pub fn xorout_for_init(&self, init: u32) -> u32 {
        let zeros = vec![0u8; self.message_bits];
        let params = CrcParams {
            width: self.width,
            poly: u64::from(self.poly),
            init: u64::from(init),
            refin: self.refin,
            refout: self.refout,
            xorout: 0,
        };
        // Width ≤ 32, so the value fits.
        (crc_bits(&params, &zeros) as u32) ^ self.xorout_at_init_zero
    }

    /// Full parameters of the family member with the given `init`.
    pub fn params_for_init(&self, init: u32) -> CrcParams {
        CrcParams {
            width: self.width,
            poly: u64::from(self.poly),
            init: u64::from(init),
            refin: self.refin,
            refout: self.refout,
            xorout: u64::from(self.xorout_for_init(init)),
        }
    }
}

/// Codewords of one layout split at a check width: messages and check values.
pub(crate) struct Split<'a> {
    pub(crate) messages: Vec<&'a [u8]>,
    pub(crate) checks: Vec<u64>,
}

impl<'a> Split<'a> {
    /// Splits distinct codewords of equal length into `(message, trailing width-bit check)`.
    pub(crate) fn new(codes: &[&'a [u8]], width: usize) -> Self {
        let mut messages = Vec::with_capacity(codes.len());
        let mut checks = Vec::with_capacity(codes.len());
        for code in codes {
            let cut = code.len().saturating_sub(width);
            messages.push(&code[..cut]);
            checks.push(super::bits::value_msb(&code[cut..]));
        }
        Self { messages, checks }
    }

    /// GF(2) basis of the differences to the first codeword, messages in fed order.
    pub(crate) fn difference_basis(&self, refin: bool) -> (Gf2Basis, bool) {
        let mut basis = Gf2Basis::new();
        let mut consistent = true;
        let Some(first) = self.messages.first() else {
            return (basis, consistent);
        };
        let fed0 = fed_order(first, refin);
        for (m, &c) in self.messages.iter().zip(&self.checks).skip(1) {
            let fed = fed_order(m, refin);
            let diff: Vec<u8> = fed.iter().zip(&fed0).map(|(a, b)| a ^ b).collect();
            let row = AugRow {
                left: super::bits::pack(&diff),
                right: c ^ self.checks[0],
            };
            if basis.insert(row) == Insert::Inconsistent {
                consistent = false;
                break;
            }
        }
        (basis, consistent)
    }
}

/// Polynomial over GF(2): bit `i % 64` of word `i / 64` is the coefficient of `x^i`.
#[derive(Debug, Clone, PartialEq, Eq)]
struct Gf2Poly(Vec<u64>);

impl Gf2Poly {
    /// `Δm(x)·x^width + Δc(x)`, the first fed bit being the highest power of `Δm`.
    fn difference(fed: &[u8], check: u64, width: u32) -> Self {
        let w = width as usize;
        let total = fed.len() + w;
        let mut words = vec![0u64; total.div_ceil(64).max(1)];
        for (j, &b) in fed.iter().enumerate() {
            if b != 0 {
                let e = w + fed.len() - 1 - j;
                words[e / 64] |= 1 << (e % 64);
            }
        }
        words[0] ^= check & mask(width);
        Self(words)
    }

    fn from_williams(width: u32, poly: u64) -> Self {
        let w = width as usize;
        let mut words = vec![0u64; (w + 1).div_ceil(64)];
        words[0] = poly & mask(width);
        words[w / 64] |= 1 << (w % 64);
        Self(words)
    }

    fn degree(&self) -> Option<usize> {
        self.0
            .iter()
            .enumerate()
            .rev()
            .find(|(_, w)| **w != 0)
            .map(|(i, w)| i * 64 + 63 - w.leading_zeros() as usize)
    }

    fn bit(&self, i: usize) -> bool {
        self.0.get(i / 64).is_some_and(|w| w >> (i % 64) & 1 == 1)
    }

    /// `self mod m` (`m` non-zero).
    fn rem(&self, m: &Self) -> Self {
        let mut r = self.clone();
        let Some(dm) = m.degree() else {
            return r;
        };
        while let Some(dr) = r.degree() {
            if dr < dm {
                break;
            }
            let shift = dr - dm;
            for i in 0..=dm {
                if m.bit(i) {
                    let e = i + shift;
                    r.0[e / 64] ^= 1 << (e % 64);
                }
            }
        }
        r
    }

    fn gcd(mut a: Self, mut b: Self) -> Self {
        while b.degree().is_some() {
            let r = a.rem(&b);
            a = b;
            b = r;
        }
        a
    }

    /// Williams notation (top bit dropped) of a degree-`width` polynomial.
    fn to_williams(&self, width: u32) -> u64 {
        self.0.first().copied().unwrap_or(0) & mask(width)
    }
}

/// Finds every `(poly, refin, refout)` of `width` that explains the codeword differences (see the
/// module docs) and returns the verified candidates.
pub(crate) fn search_width(split: &Split<'_>, width: u32, false_match: f64) -> Vec<CrcCandidate> {
    let mut found = Vec::new();
    let w = width as usize;
    for refin in [false, true] {
        let (basis, consistent) = split.difference_basis(refin);
        if !consistent || basis.rank() == 0 {
            continue;
        }
        let fed_len = split
            .messages
            .first()
            .map_or(0, |m| fed_order(m, refin).len());
        for refout in [false, true] {
            let mut g: Option<Gf2Poly> = None;
            for row in basis.rows() {
                let fed: Vec<u8> = (0..fed_len)
                    .map(|i| (row.left[i / 64] >> (i % 64) & 1) as u8)
                    .collect();
                let dc = if refout {
                    reflect(row.right, width)
                } else {
                    row.right
                };
                let d = Gf2Poly::difference(&fed, dc, width);
                g = Some(match g {
                    None => d,
                    Some(prev) => Gf2Poly::gcd(prev, d),
                });
            }
            let Some(g) = g else { continue };
            let Some(deg) = g.degree() else { continue };
            let polys: Vec<u64> = if deg < w {
                Vec::new()
            } else if deg == w {
                vec![g.to_williams(width)]
            } else {
                (0..1u64 << width)
                    .filter(|&p| g.rem(&Gf2Poly::from_williams(width, p)).degree().is_none())
                    .collect()
            };
            for poly in polys.into_iter().filter(|&p| p != 0) {
                if let Some(c) =
                    finish_candidate(split, width, poly, refin, refout, basis.rank(), false_match)
                {
                    found.push(c);
                }
            }
        }
    }
    found.sort_by_key(|c| (c.poly, c.refin, c.refout));
    found
}

/// Brute-force reference for [`search_width`]: every non-zero poly against every basis row with
/// the bit-serial register. Kept for the tests.
#[cfg(test)]
fn search_width_naive(split: &Split<'_>, width: u32) -> Vec<(u64, bool, bool)> {
    let mut found = Vec::new();
    for refin in [false, true] {
        let (basis, consistent) = split.difference_basis(refin);
        if !consistent || basis.rank() == 0 {
            continue;
        }
        let fed_len = split
            .messages
            .first()
            .map_or(0, |m| fed_order(m, refin).len());
        let rows: Vec<(Vec<u8>, u64)> = basis
            .rows()
            .map(|r| {
                (
                    (0..fed_len)
                        .map(|i| (r.left[i / 64] >> (i % 64) & 1) as u8)
                        .collect(),
                    r.right,
                )
            })
            .collect();
        for poly in 1..1u64 << width {
            for refout in [false, true] {
                let ok = rows.iter().all(|(fed, dc)| {
                    let reg = register(width, poly, 0, fed);
                    (if refout { reflect(reg, width) } else { reg }) == *dc
                });
                if ok {
                    found.push((poly, refin, refout));
                }
            }
        }
    }
    found.sort_unstable();
    found
}

/// Solves the affine constant, re-verifies every codeword with the bit-serial engine and fills
/// in the family and catalogue names. Returns `None` if any codeword fails.
fn finish_candidate(
    split: &Split<'_>,
    width: u32,
    poly: u64,
    refin: bool,
    refout: bool,
    rank: usize,
    false_match: f64,
) -> Option<CrcCandidate> {
    let message_bits = split.messages.first()?.len();
    let base = CrcParams {
        width,
        poly,
        init: 0,
        refin,
        refout,
        xorout: 0,
    };
    let k = split.checks[0] ^ crc_bits(&base, split.messages[0]);
    let canonical = CrcParams { xorout: k, ..base };
    let all_ok = split
        .messages
        .iter()
        .zip(&split.checks)
        .all(|(m, &c)| crc_bits(&canonical, m) == c);
    if !all_ok {
        return None;
    }
    let mut cand = CrcCandidate {
        width,
        poly: poly as u32,
        refin,
        refout,
        message_bits,
        xorout_at_init_zero: k as u32,
        xorout_at_init_ones: 0,
        init_at_xorout_zero: None,
        supporting_codes: split.messages.len(),
        independent_differences: rank,
        false_match_estimate: false_match,
        catalogue_names: Vec::new(),
        note: None,
    };
    cand.xorout_at_init_ones = cand.xorout_for_init(mask(width) as u32);
    cand.init_at_xorout_zero = init_for_zero_xorout(&cand);
    cand.catalogue_names = CRC_CATALOGUE
        .iter()
        .filter(|e| {
            let p = e.params;
            p.width == width
                && p.poly == poly
                && p.refin == refin
                && p.refout == refout
                && u64::from(cand.xorout_for_init(p.init as u32)) == p.xorout
        })
        .map(|e| e.name.to_string())
        .collect();
    if poly == 1 {
        cand.note = Some(format!(
            "poly 0x1 divides by x^{width}+1: the CRC is the XOR of the message's {width}-bit groups \
             (aligned to the check){}",
            if refin || refout { ", up to bit reflection" } else { "" }
        ));
    }
    Some(cand)
}

/// Solves `crc(0…0; init, 0) = xorout_at_init_zero` for `init` (linear in `init`); returns the
/// solution when it is unique.
fn init_for_zero_xorout(c: &CrcCandidate) -> Option<u32> {
    let w = c.width as usize;
    // Column j of the linear map: the zero-message CRC with init = e_j.
    let zeros = vec![0u8; c.message_bits];
    let col = |j: usize| {
        let p = CrcParams {
            width: c.width,
            poly: u64::from(c.poly),
            init: 1u64 << j,
            refin: c.refin,
            refout: c.refout,
            xorout: 0,
        };
        crc_bits(&p, &zeros)
    };
    let target = u64::from(c.xorout_at_init_zero);
    // Rows of the augmented system: row i = (bit i of each column | bit i of the target).
    let mut rows: Vec<(u64, u64)> = (0..w)
        .map(|i| {
            let mut coeffs = 0u64;
            for j in 0..w {
                coeffs |= (col(j) >> i & 1) << j;
            }
            (coeffs, target >> i & 1)
        })
        .collect();
    // Gauss–Jordan elimination.
    let mut pivot_row = 0;
    let mut pivots = Vec::new();
    for j in 0..w {
        let Some(r) = (pivot_row..w).find(|&r| rows[r].0 >> j & 1 == 1) else {
            continue;
        };
        rows.swap(pivot_row, r);
        let (pc, pt) = rows[pivot_row];
        for (r, row) in rows.iter_mut().enumerate() {
            if r != pivot_row && row.0 >> j & 1 == 1 {
                row.0 ^= pc;
                row.1 ^= pt;
            }
        }
        pivots.push(j);
        pivot_row += 1;
    }
    if pivots.len() < w {
        return None; // singular: none or several solutions
    }
    let mut init = 0u64;
    for (r, &j) in pivots.iter().enumerate() {
        init |= rows[r].1 << j;
    }
    Some(init as u32)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cat(name: &str) -> CatalogueEntry {
        *CRC_CATALOGUE
            .iter()
            .find(|e| e.name == name)
            .expect("catalogue entry")
    }

    // Each expected value: facts.md §6.2, CRC RevEng catalogue, CRC of ASCII "123456789".
    // (CRC-8/SMBUS 0xF4, CRC-8/I-432-1 0xA1, CRC-8/ROHC 0xD0, CRC-8/SAE-J1850 0x4B,
    //  CRC-8/AUTOSAR 0xDF, CRC-16/ARC 0xBB3D, CRC-16/IBM-3740 0x29B1, CRC-16/KERMIT 0x2189,
    //  CRC-16/XMODEM 0x31C3, CRC-16/MODBUS 0x4B37, CRC-16/IBM-SDLC 0x906E,
    //  CRC-32/ISO-HDLC 0xCBF43926.)
    #[test]
    fn catalogue_check_values() {
        let expected: &[(&str, u64)] = &[
            ("CRC-8/SMBUS", 0xF4),
            ("CRC-8/I-432-1", 0xA1),
            ("CRC-8/ROHC", 0xD0),
            ("CRC-8/SAE-J1850", 0x4B),
            ("CRC-8/AUTOSAR", 0xDF),
            ("CRC-16/ARC", 0xBB3D),
            ("CRC-16/IBM-3740", 0x29B1),
            ("CRC-16/KERMIT", 0x2189),
            ("CRC-16/XMODEM", 0x31C3),
            ("CRC-16/MODBUS", 0x4B37),
            ("CRC-16/IBM-SDLC", 0x906E),
            ("CRC-32/ISO-HDLC", 0xCBF4_3926),
        ];
        assert_eq!(expected.len(), CRC_CATALOGUE.len());
        for &(name, check) in expected {
            let e = cat(name);
            assert_eq!(e.check, check, "table copy of {name}");
            assert_eq!(crc_bytes(&e.params, b"123456789"), check, "{name}");
        }
    }

    // facts.md §6.2 extra vectors [D]: IBM-3740("") = 0xFFFF, ("\x00") = 0xE1F0,
    // ("A") = 0xB915; ARC("A") = 0x30C0; KERMIT("A") = 0x538D; SMBUS("A") = 0xC0; SMBUS("") = 0x00.
    #[test]
    fn extra_vectors() {
        let ibm = cat("CRC-16/IBM-3740").params;
        assert_eq!(crc_bytes(&ibm, b""), 0xFFFF);
        assert_eq!(crc_bytes(&ibm, b"\x00"), 0xE1F0);
        assert_eq!(crc_bytes(&ibm, b"A"), 0xB915);
        assert_eq!(crc_bytes(&cat("CRC-16/ARC").params, b"A"), 0x30C0);
        assert_eq!(crc_bytes(&cat("CRC-16/KERMIT").params, b"A"), 0x538D);
        let smbus = cat("CRC-8/SMBUS").params;
        assert_eq!(crc_bytes(&smbus, b"A"), 0xC0);
        assert_eq!(crc_bytes(&smbus, b""), 0x00);
    }

    // facts.md §6.2 residue column: the register after a valid codeword (message then its check,
    // sent so that the register sees it in order), before xorout. For refout = false and
    // non-reflected input the check is appended MSB first.
    #[test]
    fn residue_of_codeword_without_reflection() {
        // CRC-16/XMODEM residue 0x0000, CRC-8/SAE-J1850 residue 0xC4 (facts.md §6.2).
        for (name, residue) in [("CRC-16/XMODEM", 0x0000u64), ("CRC-8/SAE-J1850", 0xC4)] {
            let p = cat(name).params;
            let crc = crc_bytes(&p, b"123456789");
            let mut bits: Vec<u8> = b"123456789"
                .iter()
                .flat_map(|&b| (0..8).rev().map(move |i| b >> i & 1))
                .collect();
            bits.extend((0..p.width).rev().map(|i| (crc >> i & 1) as u8));
            let raw = crc_bits(&CrcParams { xorout: 0, ..p }, &bits);
            assert_eq!(raw, residue, "{name}");
        }
    }

    #[test]
    fn affine_decomposition_holds() {
        // crc(m; init, x) = crc(m; 0, 0) ^ crc(0; init, 0) ^ x, for a bit-level message.
        let msg = [1u8, 0, 1, 1, 0, 0, 1, 0, 1, 1, 1, 0, 1];
        for e in CRC_CATALOGUE {
            let p = e.params;
            let zero = vec![0u8; msg.len()];
            let lhs = crc_bits(&p, &msg);
            let rhs = crc_bits(
                &CrcParams {
                    init: 0,
                    xorout: 0,
                    ..p
                },
                &msg,
            ) ^ crc_bits(&CrcParams { xorout: 0, ..p }, &zero)
                ^ p.xorout;
            assert_eq!(lhs, rhs, "{}", e.name);
        }
    }

    /// Tiny xorshift64 (Marsaglia 2003) for seeded test data.
    fn xorshift(state: &mut u64) -> u64 {
        *state ^= *state << 13;
        *state ^= *state >> 7;
        *state ^= *state << 17;
        *state
    }

    #[test]
    fn gcd_search_matches_brute_force() {
        // Fast (gcd of difference polynomials) and naive (every poly) searches agree on true CRC
        // codewords, on factor polys of reducible CRCs, on too few codes and on random codes.
        let mut state = 0x9E37_79B9_7F4A_7C15u64;
        for round in 0..60 {
            let width = 4 + (xorshift(&mut state) % 7) as u32; // 4..=10 keeps the naive side quick
            let msg_bits = 9 + (xorshift(&mut state) % 20) as usize;
            let count = 2 + (xorshift(&mut state) % 6) as usize;
            let random_checks = round % 4 == 3;
            let p = CrcParams {
                width,
                poly: xorshift(&mut state) & mask(width),
                init: xorshift(&mut state) & mask(width),
                refin: xorshift(&mut state) & 1 == 1,
                refout: xorshift(&mut state) & 1 == 1,
                xorout: xorshift(&mut state) & mask(width),
            };
            let codes: Vec<Vec<u8>> = (0..count)
                .map(|_| {
                    let mut bits: Vec<u8> = (0..msg_bits)
                        .map(|_| (xorshift(&mut state) >> 40 & 1) as u8)
                        .collect();
                    let check = if random_checks {
                        xorshift(&mut state) & mask(width)
                    } else {
                        crc_bits(&p, &bits)
                    };
                    bits.extend((0..width).rev().map(|i| (check >> i & 1) as u8));
                    bits
                })
                .collect();
            let refs: Vec<&[u8]> = codes.iter().map(Vec::as_slice).collect();
            let split = Split::new(&refs, width as usize);
            let fast: Vec<(u64, bool, bool)> = {
                let mut v: Vec<_> = search_width(&split, width, 0.0)
                    .iter()
                    .map(|c| (u64::from(c.poly), c.refin, c.refout))
                    .collect();
                v.sort_unstable();
                v
            };
            assert_eq!(
                fast,
                search_width_naive(&split, width),
                "round {round}: {p:?}"
            );
            if !random_checks && p.poly != 0 && split.difference_basis(p.refin).1 {
                let rank = split.difference_basis(p.refin).0.rank();
                if rank > 0 {
                    assert!(
                        fast.contains(&(p.poly, p.refin, p.refout)),
                        "round {round}: {p:?} not in {fast:?}"
                    );
                }
            }
        }
    }

    #[test]
    fn refin_pads_partial_byte_on_the_left() {
        assert_eq!(fed_order(&[1, 0, 1], true), vec![1, 0, 1, 0, 0, 0, 0, 0]);
        assert_eq!(
            fed_order(&[1, 1, 0, 0, 0, 0, 0, 0, 1], true)[..8],
            [1, 0, 0, 0, 0, 0, 0, 0]
        );
    }
}
