//! Frames: repeats of one press voted into one code, and presses grouped into codes.
//!
//! Within a press the most common frame length wins; frames of another length are partial (a
//! capture that starts or ends inside a frame, or a frame noise has broken) and never become a
//! code of their own.
//!
//! **Voting.** The frames of the modal length are voted bit by bit (a tie keeps the earliest
//! frame's bit). A frame agrees with the vote when it differs from it in at most
//! [`hamming_limit`] = `max(1, bits / 8)` bits; frames that do not agree are set aside as
//! damaged (counted with the partial frames) and the agreeing frames are voted again. The bits
//! the vote changed in the agreeing frames are reported as corrected.
//!
//! **Acceptance.** A press yields a code when its best line-code score is at least
//! [`MIN_SCORE`], it holds at least [`MIN_BITS`] bits, and one of:
//! - at least two frames read exactly the voted code;
//! - at least three frames agree with the vote (a true majority exists to correct them) and
//!   at least one of them reads it exactly;
//! - the press has a single full-length frame and it is clean by a clear margin: its
//!   line-code score is at least [`SINGLE_FRAME_SCORE`] and it holds at least
//!   [`SINGLE_FRAME_BITS`] bits (noise readily forms one short, plausible frame).
//!
//! Two frames that differ cannot be settled by a vote, so they are never enough. Finally the
//! widths must look like a code: the median mark at least [`MIN_MARK_UNITS`] and the median
//! space inside frames at most [`MAX_SPACE_UNITS`] units (sparse noise spikes fail both).
//!
//! A press the trellis read (`decode`) lays perfect widths by construction, so its repeats
//! are its only evidence: their agreement must be one noise would show by chance at most
//! [`MAX_CHANCE_AGREEMENT`] of the time ([`chance_agreement`]). Read by the trellis alone, a
//! code of 13 bits or fewer needs three frames that read it exactly (more when the press
//! holds other frames too).

use crate::bursts::Burst;
use crate::coding::{self, Layout, LineCode};
use crate::timing::median;
use num_complex::Complex64;

/// Marks and spaces shorter than this fraction of the burst's typical element are glitches.
pub const GLITCH_FRACTION: f64 = 0.2;
/// Lowest line-code score accepted.
pub const MIN_SCORE: f64 = 0.5;
/// Fewest data bits a code may have.
pub const MIN_BITS: usize = 4;
/// Median mark width, in units, below which a press is noise (spikes), not a code.
pub const MIN_MARK_UNITS: f64 = 0.5;
/// Median space inside frames, in units, above which a press is noise, not a code.
pub const MAX_SPACE_UNITS: f64 = 6.0;
/// Score a press with a single frame needs.
pub const SINGLE_FRAME_SCORE: f64 = 0.9;
/// Bits a press with a single frame needs.
pub const SINGLE_FRAME_BITS: usize = 8;
/// Largest [`chance_agreement`] a press read by the trellis may have.
pub const MAX_CHANCE_AGREEMENT: f64 = 1e-4;

/// One frame of a press, in capture samples.
#[derive(Debug, Clone, PartialEq)]
pub struct FrameRecord {
    /// The frame's own bits (before voting).
    pub bits: Vec<bool>,
    /// First rising edge (header included).
    pub start: f64,
    /// Last falling edge (closing/stop mark included).
    pub end: f64,
    /// Total mark time.
    pub on_time: f64,
    /// Its marks as (rise, fall).
    pub marks: Vec<(f64, f64)>,
}

/// A decoded press.
#[derive(Debug, Clone)]
pub struct PressDecode {
    /// Chosen line code.
    pub line_code: LineCode,
    /// Voted data bits.
    pub bits: Vec<bool>,
    /// Score of the chosen line code.
    pub score: f64,
    /// The runner-up hypothesis and its score.
    pub runner_up: Option<(LineCode, f64)>,
    /// Full-length frames (voted).
    pub frames: Vec<FrameRecord>,
    /// Frames of another length (cut by the capture's ends or damaged).
    pub partial_frames: usize,
    /// Bits changed by the vote.
    pub corrected_bits: usize,
    /// Base unit in capture samples.
    pub unit: f64,
    /// Header, closing mark and gap in capture samples.
    pub layout: Layout,
    /// First rising edge of the press.
    pub start: f64,
    /// Last falling edge of the press.
    pub end: f64,
    /// Total mark time of the press.
    pub on_time: f64,
    /// Median mark level above the floor.
    pub level: f64,
    /// Median idle noise standard deviation.
    pub noise: f64,
    /// Sum of lag-1 IQ products over the press's marks (zero for envelopes).
    pub lag: Complex64,
}

/// How likely `exact` of `frames` frames of `bits` fair random bits are to read one same
/// code by chance, bounded above by the sum over every set of `exact` frames:
/// C(frames, exact) · 2^(−bits·(exact − 1)); 1 for fewer than two. It is what agreeing
/// repeats prove when nothing else does: a trellis reading lays perfect widths by
/// construction, and noise read as a short code of many frames holds two or three that
/// agree (six frames of 8 bits: 15/256 for two). A press read by the trellis needs at most
/// [`MAX_CHANCE_AGREEMENT`]: a 24-bit code two of four frames read exactly passes (3.6·10⁻⁷),
/// an 8-bit one three of six does not (3.1·10⁻⁴).
///
/// ```
/// use ooksift::frames::chance_agreement;
///
/// assert_eq!(chance_agreement(8, 6, 2), 15.0 / 256.0);
/// assert!((chance_agreement(24, 4, 2) - 6.0 / 16_777_216.0).abs() < 1e-15);
/// assert_eq!(chance_agreement(24, 4, 1), 1.0);
/// ```
pub fn chance_agreement(bits: usize, frames: usize, exact: usize) -> f64 {
    if exact < 2 || exact > frames {
        return 1.0;
    }
    // C(frames, exact) as a running product, exact in f64 for any count a press holds.
    let choose = (0..exact).fold(1.0f64, |c, i| c * (frames - i) as f64 / (i + 1) as f64);
    (choose * 0.5f64.powi((bits * (exact - 1)).min(i32::MAX as usize) as i32)).min(1.0)
}

/// Bits in which two frames differ (frames of one length).
pub fn hamming(a: &[bool], b: &[bool]) -> usize {
    a.iter().zip(b).filter(|(x, y)| x != y).count()
}

/// Bit errors a frame of `bits` bits may hold and still count as a repeat of the voted code:
/// `max(1, bits / 8)`.
pub fn hamming_limit(bits: usize) -> usize {
    (bits / 8).max(1)
}

/// Bits as a '0'/'1' string.
pub fn bit_string(bits: &[bool]) -> String {
    bits.iter().map(|&b| if b { '1' } else { '0' }).collect()
}

/// Bits as lower-case hex, MSB first, left-padded with zeros to whole nibbles.
///
/// ```
/// assert_eq!(ooksift::frames::hex_of("110011110010101100010010"), "cf2b12");
/// assert_eq!(ooksift::frames::hex_of("10101"), "15");
/// ```
pub fn hex_of(bits: &str) -> String {
    let pad = (4 - bits.len() % 4) % 4;
    let padded: String = "0".repeat(pad) + bits;
    padded
        .as_bytes()
        .chunks(4)
        .map(|c| {
            let v = c.iter().fold(0u32, |a, &b| (a << 1) | u32::from(b == b'1'));
            char::from_digit(v, 16).unwrap_or('0')
        })
        .collect()
}

/// The stable identifier of a code: `{line_code}{bit_count}-{h}`, `h` being the 64-bit
/// FNV-1a hash of `"{line_code}:{bits}"` folded to 32 bits (high XOR low), in 8 hex digits.
///
/// ```
/// // Cross-checked with the independent numpy reference script (tests/reference).
/// assert_eq!(ooksift::frames::key_id("pwm", "0101"), "pwm4-75c351c7");
/// ```
pub fn key_id(line_code: &str, bits: &str) -> String {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in format!("{line_code}:{bits}").bytes() {
        h ^= b as u64;
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    let folded = (h >> 32) ^ (h & 0xffff_ffff);
    format!("{line_code}{}-{folded:08x}", bits.len())
}

/// Choices that change how a press is read.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct PressOptions {
    /// Read every burst with this line code only.
    pub line_code: Option<LineCode>,
    /// Manchester in the G. E. Thomas convention (a falling mid-bit transition is 1) instead
    /// of IEEE 802.3's.
    pub manchester_thomas: bool,
}

/// Decodes one burst into a press, or `None` when no line code explains it well enough.
pub fn decode_press(burst: &Burst) -> Option<PressDecode> {
    decode_press_with(burst, &PressOptions::default())
}

/// [`decode_press`] with options.
pub fn decode_press_with(burst: &Burst, opts: &PressOptions) -> Option<PressDecode> {
    let mut cleaned = burst.marks.clone();
    crate::bursts::merge_glitches(&mut cleaned, GLITCH_FRACTION);
    let burst = &Burst {
        marks: cleaned,
        capped: burst.capped,
    };
    let mut candidates = coding::assess(&burst.marks);
    if let Some(lc) = opts.line_code {
        // Keep the forced code first and the best other one as the runner-up.
        candidates.sort_by_key(|c| c.line_code != lc);
        if candidates.first().map(|c| c.line_code) != Some(lc) {
            return None;
        }
    }
    if opts.manchester_thomas {
        for c in &mut candidates {
            if c.line_code == LineCode::Manchester {
                for f in &mut c.frames {
                    f.bits.iter_mut().for_each(|b| *b = !*b);
                }
            }
        }
    }
    let best = candidates.first()?;
    if best.score < MIN_SCORE {
        return None;
    }
    let runner_up = candidates.get(1).map(|c| (c.line_code, c.score));
    // The most common length (ties: the longer).
    let mut lengths: Vec<usize> = best.frames.iter().map(|f| f.bits.len()).collect();
    lengths.sort_unstable();
    let mut mode = (0usize, 0usize);
    let mut i = 0;
    while i < lengths.len() {
        let j = lengths[i..]
            .iter()
            .take_while(|&&l| l == lengths[i])
            .count();
        if j >= mode.1 {
            mode = (lengths[i], j);
        }
        i += j;
    }
    let len = mode.0;
    if len < MIN_BITS {
        return None;
    }
    if std::env::var_os("OOKSIFT_DEBUG").is_some() {
        for c in &candidates {
            eprintln!(
                "  candidate {} score {:.3} unit {:.1}",
                c.line_code, c.score, c.unit
            );
        }
        for f in &best.frames {
            eprintln!(
                "  frame {} marks {}..{}",
                bit_string(&f.bits),
                f.first_mark,
                f.last_mark
            );
        }
    }
    let full: Vec<_> = best.frames.iter().filter(|f| f.bits.len() == len).collect();
    let vote = |fs: &[&coding::SlicedFrame]| -> Vec<bool> {
        (0..len)
            .map(|k| {
                let ones = fs.iter().filter(|f| f.bits[k]).count();
                let zeros = fs.len() - ones;
                if ones == zeros {
                    fs[0].bits[k]
                } else {
                    ones > zeros
                }
            })
            .collect()
    };
    // Vote over every full-length frame, keep the frames within the Hamming limit of that
    // vote, and vote again over those alone, so a badly damaged frame cannot sway a bit.
    let limit = hamming_limit(len);
    let first = vote(&full);
    let close: Vec<_> = full
        .iter()
        .copied()
        .filter(|f| hamming(&f.bits, &first) <= limit)
        .collect();
    let (bits, full) = if close.is_empty() {
        (first, full)
    } else {
        let v = vote(&close);
        let again: Vec<_> = close
            .into_iter()
            .filter(|f| hamming(&f.bits, &v) <= limit)
            .collect();
        (v, again)
    };
    let partial_frames = best.frames.len() - full.len();
    let corrected_bits: usize = full.iter().map(|f| hamming(&f.bits, &bits)).sum();
    let exact = full.iter().filter(|f| f.bits == bits).count();
    let single_clean =
        full.len() == 1 && best.score >= SINGLE_FRAME_SCORE && len >= SINGLE_FRAME_BITS;
    let accepted = exact >= 2 || (full.len() >= 3 && exact >= 1) || single_clean;
    if !accepted {
        return None;
    }
    // Structure check: a code's marks are about a unit or more and its spaces inside a frame
    // a few units; sparse noise spikes read as one long "frame" are neither.
    let (mut mw, mut sw) = (Vec::new(), Vec::new());
    for f in &full {
        let ms = &burst.marks[f.first_mark..=f.last_mark];
        mw.extend(ms.iter().map(|m| m.width()));
        sw.extend(ms.windows(2).map(|w| w[1].rise - w[0].fall));
    }
    let unit = best.unit.max(1e-12);
    if median(&mw) < MIN_MARK_UNITS * unit || median(&sw) > MAX_SPACE_UNITS * unit {
        return None;
    }
    let marks = &burst.marks;
    let frames = full
        .iter()
        .map(|f| {
            let ms = &marks[f.first_mark..=f.last_mark];
            FrameRecord {
                bits: f.bits.clone(),
                start: ms[0].rise,
                end: ms[ms.len() - 1].fall,
                on_time: ms.iter().map(|m| m.width()).sum(),
                marks: ms.iter().map(|m| (m.rise, m.fall)).collect(),
            }
        })
        .collect();
    let levels: Vec<f64> = marks.iter().map(|m| m.level as f64).collect();
    let noises: Vec<f64> = marks.iter().map(|m| m.noise as f64).collect();
    Some(PressDecode {
        line_code: best.line_code,
        bits,
        score: best.score,
        runner_up,
        frames,
        partial_frames,
        corrected_bits,
        unit: best.unit,
        layout: best.layout.clone(),
        start: burst.start(),
        end: burst.end(),
        on_time: marks.iter().map(|m| m.width()).sum(),
        level: median(&levels),
        noise: median(&noises),
        lag: marks.iter().map(|m| m.lag).sum(),
    })
}

/// Presses carrying one code.
#[derive(Debug, Clone)]
pub struct CodeGroup {
    /// Line code.
    pub line_code: LineCode,
    /// Data bits.
    pub bits: Vec<bool>,
    /// The presses, in capture order.
    pub presses: Vec<PressDecode>,
}

/// Groups presses by (line code, bits), in order of first appearance.
pub fn group(presses: Vec<PressDecode>) -> Vec<CodeGroup> {
    let mut groups: Vec<CodeGroup> = Vec::new();
    for p in presses {
        match groups
            .iter_mut()
            .find(|g| g.line_code == p.line_code && g.bits == p.bits)
        {
            Some(g) => g.presses.push(p),
            None => groups.push(CodeGroup {
                line_code: p.line_code,
                bits: p.bits.clone(),
                presses: vec![p],
            }),
        }
    }
    groups
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::coding::test_marks;

    #[test]
    fn key_ids_match_the_reference_generator() {
        // Values computed by tests/reference/make_reference_captures.py (numpy script, its
        // own FNV-1a implementation) and stored in its truth files.
        assert_eq!(key_id("pwm", "110011110010101100010010"), "pwm24-5c9f4e1f");
        assert_eq!(
            key_id("ppm", "11101101011101011100001011101011"),
            "ppm32-527c0c84"
        );
        assert_eq!(key_id("pwm", "0001111001010011"), "pwm16-64a9fc8f");
    }

    #[test]
    fn a_damaged_frame_is_outvoted() {
        let mut marks = test_marks::pwm("1100101011110000", 100.0, 5);
        // Widen the third mark of the second frame (17 marks per frame): a 0 read as 1.
        let i = 17 + 2;
        marks[i].fall += 200.0;
        let burst = Burst {
            marks,
            capped: false,
        };
        let p = decode_press(&burst).expect("decodes");
        assert_eq!(bit_string(&p.bits), "1100101011110000");
        assert_eq!(p.corrected_bits, 1);
        assert_eq!(p.frames.len(), 5);
    }

    #[test]
    fn a_cut_first_frame_is_partial_not_a_code() {
        let marks = test_marks::pwm("1100101011110000", 100.0, 4);
        let burst = Burst {
            marks: marks[6..].to_vec(),
            capped: false,
        };
        let p = decode_press(&burst).expect("decodes");
        assert_eq!(bit_string(&p.bits), "1100101011110000");
        assert_eq!(p.partial_frames, 1);
        assert_eq!(p.frames.len(), 3);
    }

    #[test]
    fn frames_within_the_hamming_limit_are_voted_and_corrected() {
        // 16 bits: limit 2. Frame 2 has two errors, frame 4 one; all agree with the vote.
        let bits = "1100101011110000";
        let mut marks = test_marks::pwm(bits, 100.0, 5);
        for i in [17 + 2, 17 + 9, 3 * 17 + 5] {
            if marks[i].width() < 150.0 {
                marks[i].fall += 200.0;
            } else {
                marks[i].fall -= 200.0;
            }
        }
        let p = decode_press(&Burst {
            marks,
            capped: false,
        })
        .expect("decodes");
        assert_eq!(bit_string(&p.bits), bits);
        assert_eq!(p.corrected_bits, 3);
        assert_eq!(p.frames.len(), 5);
        assert_eq!(hamming_limit(16), 2);
        assert_eq!(hamming_limit(4), 1);
    }

    #[test]
    fn two_frames_that_differ_are_not_a_code() {
        let bits = "1100101011110000";
        let mut marks = test_marks::pwm(bits, 100.0, 2);
        marks[17 + 2].fall += 200.0;
        let p = decode_press(&Burst {
            marks,
            capped: false,
        });
        assert!(p.is_none());
    }
}
