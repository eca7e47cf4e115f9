//! Chip-based line codes: Manchester (IEEE 802.3 convention), differential Manchester and NRZ.
//!
//! A frame's marks and spaces are quantised to chips of one unit (mark = 1, space = 0).
//! Manchester and differential Manchester pair chips into bits (every bit has a mid-bit
//! transition); NRZ takes each chip as a bit and splits an alternating preamble and a sync word
//! from the data.
//!
//! Conventions (sourced in `../shared/reference/facts.md` §5):
//! - Manchester, IEEE 802.3: a rising (space→mark) transition at mid-bit is 1, chips `01`; a
//!   falling one is 0, chips `10`. The opposite (G. E. Thomas) convention is the complement and
//!   is applied by the frames stage on request.
//! - Differential Manchester: always a mid-bit transition; 1 = no transition at the bit start
//!   (first chip equals the previous chip), 0 = a transition; the line idles low.
//! - NRZ: one chip per bit, mark = 1.

use super::{layout_of, BurstFrames, Candidate, LineCode, SlicedFrame};
use crate::timing::{clusters, median};

/// Bits of sync word taken after an NRZ preamble when none is given.
pub const DEFAULT_SYNC_BITS: usize = 16;
/// Shortest alternating run that counts as an NRZ preamble.
pub const MIN_PREAMBLE_BITS: usize = 8;

/// Chips of each frame (data part: after a header), the chip unit, and the share of widths
/// that sit within 30 % of a whole number of units (1 to `max_units`).
struct Chipped {
    frames: Vec<(usize, usize, Vec<u8>)>,
    unit: f64,
    fit: f64,
    max_seen: f64,
}

fn chip(bf: &BurstFrames<'_>, max_units: f64) -> Option<Chipped> {
    let mut marks = Vec::new();
    let mut spaces = Vec::new();
    for f in 0..bf.frames.len() {
        let (_, b) = bf.frames[f];
        let s = bf.data_start(f);
        marks.extend(bf.marks[s..=b].iter().map(|m| m.width()));
        spaces.extend((s..b).map(|i| bf.space_after(i)));
    }
    if spaces.is_empty() {
        return None;
    }
    let short_mark = clusters(&marks, 0.3).first()?.mean;
    let short_space = clusters(&spaces, 0.3).first()?.mean;
    let t0 = 0.5 * (short_mark + short_space);
    if t0 <= 0.0 {
        return None;
    }
    let mut frames = Vec::new();
    let (mut good, mut total) = (0usize, 0usize);
    let (mut sum_w, mut sum_u) = (0.0, 0.0);
    let mut max_seen: f64 = 0.0;
    for f in 0..bf.frames.len() {
        let (a, b) = bf.frames[f];
        let s = bf.data_start(f);
        let mut chips = Vec::new();
        for i in s..=b {
            let m = bf.marks[i].width();
            let sp = if i < b { Some(bf.space_after(i)) } else { None };
            for (w, level) in [(Some(m), 1u8), (sp, 0u8)] {
                let Some(w) = w else { continue };
                let u = w / t0;
                let n = u.round().max(1.0);
                total += 1;
                max_seen = max_seen.max(n);
                if (u - n).abs() <= 0.3 && n <= max_units {
                    good += 1;
                }
                chips.extend(std::iter::repeat_n(level, n as usize));
            }
            // Stretch-neutral unit: mark + following space over their unit counts.
            if let Some(sp) = sp {
                let p = m + sp;
                sum_w += p;
                sum_u += (p / t0).round().max(2.0);
            }
        }
        frames.push((a, b, chips));
    }
    Some(Chipped {
        frames,
        unit: if sum_u > 0.0 { sum_w / sum_u } else { t0 },
        fit: good as f64 / total.max(1) as f64,
        max_seen,
    })
}

/// Pairs chips into (first, second) halves, trying both alignments (the frame may open with
/// the second half of a bit whose first half is idle); returns the pairs and the number of
/// pairs without a mid-bit transition.
fn pair(chips: &[u8]) -> (Vec<(u8, u8)>, usize) {
    let mut best: Option<(Vec<(u8, u8)>, usize)> = None;
    for lead in [false, true] {
        let mut c: Vec<u8> = Vec::with_capacity(chips.len() + 2);
        if lead {
            c.push(0);
        }
        c.extend_from_slice(chips);
        if c.len() % 2 == 1 {
            c.push(0);
        }
        let pairs: Vec<(u8, u8)> = c.chunks_exact(2).map(|p| (p[0], p[1])).collect();
        let bad = pairs.iter().filter(|p| p.0 == p.1).count();
        if best.as_ref().is_none_or(|b| bad < b.1) {
            best = Some((pairs, bad));
        }
    }
    best.unwrap_or_default()
}

fn biphase(bf: &BurstFrames<'_>, differential: bool) -> Option<Candidate> {
    let ch = chip(bf, 2.0)?;
    let mut frames = Vec::new();
    let (mut bad, mut pairs_total) = (0usize, 0usize);
    for (a, b, chips) in &ch.frames {
        let (pairs, v) = pair(chips);
        bad += v;
        pairs_total += pairs.len();
        let mut prev = 0u8;
        let bits = pairs
            .iter()
            .map(|&(x, y)| {
                let bit = if differential {
                    x == prev
                } else {
                    x == 0 && y == 1
                };
                prev = y;
                bit
            })
            .collect();
        frames.push(SlicedFrame {
            bits,
            first_mark: *a,
            last_mark: *b,
        });
    }
    let valid = 1.0 - bad as f64 / pairs_total.max(1) as f64;
    // Chip widths beyond two units cannot occur inside a biphase frame.
    let score = ch.fit * valid * if ch.max_seen > 2.0 { 0.5 } else { 1.0 };
    Some(Candidate {
        line_code: if differential {
            LineCode::DiffManchester
        } else {
            LineCode::Manchester
        },
        // Differential Manchester explains exactly the chip streams Manchester does: it is only
        // chosen when asked for, so rank it just below.
        score: if differential { score * 0.98 } else { score },
        frames,
        unit: ch.unit,
        layout: layout_of(bf, &[]),
    })
}

pub(super) fn slice_manchester(bf: &BurstFrames<'_>) -> Option<Candidate> {
    biphase(bf, false)
}

pub(super) fn slice_diff_manchester(bf: &BurstFrames<'_>) -> Option<Candidate> {
    biphase(bf, true)
}

/// Splits NRZ bits into preamble (the alternating run that opens the frame, if at least
/// [`MIN_PREAMBLE_BITS`] long), sync word ([`DEFAULT_SYNC_BITS`] bits after it) and data.
pub fn split_nrz(bits: &[bool]) -> (usize, usize) {
    let mut run = 1;
    while run < bits.len() && bits[run] != bits[run - 1] {
        run += 1;
    }
    if run < MIN_PREAMBLE_BITS || bits.len() < run + DEFAULT_SYNC_BITS + 1 {
        return (0, 0);
    }
    (run, DEFAULT_SYNC_BITS)
}

pub(super) fn slice_nrz(bf: &BurstFrames<'_>) -> Option<Candidate> {
    let ch = chip(bf, 64.0)?;
    let mut frames = Vec::new();
    let mut pre = Vec::new();
    let mut sync = Vec::new();
    let mut with_preamble = 0usize;
    for (a, b, chips) in &ch.frames {
        let all: Vec<bool> = chips.iter().map(|&c| c == 1).collect();
        let (p, s) = split_nrz(&all);
        if p > 0 {
            with_preamble += 1;
            pre.push(all[..p].to_vec());
            sync.push(all[p..p + s].to_vec());
        }
        frames.push(SlicedFrame {
            bits: all[p + s..].to_vec(),
            first_mark: *a,
            last_mark: *b,
        });
    }
    let preamble_share = with_preamble as f64 / ch.frames.len().max(1) as f64;
    // NRZ explains any sequence of whole units, so it must win by its fit alone: it is
    // discounted against the more constrained codes, and more without a preamble.
    let score = ch.fit * (0.75 + 0.15 * preamble_share);
    let mut layout = layout_of(bf, &[]);
    let most = |v: &[Vec<bool>]| -> Option<Vec<bool>> {
        let mut best: Option<(&Vec<bool>, usize)> = None;
        for x in v {
            let n = v.iter().filter(|y| *y == x).count();
            if best.is_none_or(|b| n > b.1) {
                best = Some((x, n));
            }
        }
        best.map(|b| b.0.clone())
    };
    layout.preamble = most(&pre);
    layout.sync_word = most(&sync);
    let _ = median(&[]);
    Some(Candidate {
        line_code: LineCode::Nrz,
        score,
        frames,
        unit: ch.unit,
        layout,
    })
}

/// Chips of bits in a biphase code, for synth and tests: IEEE Manchester (`01` = 1) or
/// differential Manchester (idle low before the first bit).
pub fn biphase_chips(bits: &[bool], differential: bool) -> Vec<u8> {
    let mut out = Vec::with_capacity(bits.len() * 2);
    let mut prev = 0u8;
    for &b in bits {
        let first = if differential {
            if b {
                prev
            } else {
                1 - prev
            }
        } else if b {
            0
        } else {
            1
        };
        out.push(first);
        out.push(1 - first);
        prev = 1 - first;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn bits(s: &str) -> Vec<bool> {
        s.chars()
            .filter(|c| !c.is_whitespace())
            .map(|c| c == '1')
            .collect()
    }

    fn chips(s: &str) -> Vec<u8> {
        s.chars()
            .filter(|c| !c.is_whitespace())
            .map(|c| u8::from(c == '1'))
            .collect()
    }

    #[test]
    fn manchester_chips_follow_ieee_802_3() {
        // facts.md §5.2 [D] test vector: 0xA5 → IEEE chips 01 10 01 10 10 01 10 01 (the
        // IEEE 802.3 convention of §5.1: a low→high mid-bit transition is 1).
        assert_eq!(
            biphase_chips(&bits("10100101"), false),
            chips("01 10 01 10 10 01 10 01")
        );
    }

    #[test]
    fn differential_manchester_vector() {
        // facts.md §5.3 [D] (convention from memory, IEEE 802.5 practice): bits 1 0 1 1 0 with
        // the line low before → chips 01 01 10 01 01.
        assert_eq!(biphase_chips(&bits("10110"), true), chips("01 01 10 01 01"));
    }

    #[test]
    fn pairing_finds_the_alignment() {
        // A frame opening with a 1 bit (01) starts at its second chip: the leading 0 is idle.
        let c = &biphase_chips(&bits("1101"), false)[1..];
        let (pairs, bad) = pair(c);
        assert_eq!(bad, 0);
        let decoded: Vec<bool> = pairs.iter().map(|&(x, y)| x == 0 && y == 1).collect();
        assert_eq!(decoded, bits("1101"));
    }

    #[test]
    fn nrz_preamble_and_sync_are_split_off() {
        let mut b = bits("1010101010101010");
        b.extend(bits("0011101110010001"));
        b.extend(bits("110100111"));
        assert_eq!(split_nrz(&b), (16, 16));
        assert_eq!(split_nrz(&bits("110100111")), (0, 0));
    }
}
