//! PWM: one mark and the space after it per bit; the wider mark is 1.
//!
//! Score = separation of the two mark widths × the share of bits whose period (mark + space)
//! is within 20 % of the median period. When most frames end with a short mark before the gap,
//! every frame's last mark is the closing (sync) mark and not a bit; otherwise it is the last
//! data bit.
//!
//! Unit: `T0 = (short mark + short space) / 2` cancels a receiver's mark stretching; the bit
//! period is `round(P / T0)` units, and the unit is `P` divided by that count.

use super::{layout_of, separation_score, BurstFrames, Candidate, LineCode, SlicedFrame};
use crate::timing::{median, split_two};

pub(super) fn slice(bf: &BurstFrames<'_>) -> Option<Candidate> {
    let mut widths = Vec::new();
    for f in 0..bf.frames.len() {
        let (_, b) = bf.frames[f];
        widths.extend(bf.marks[bf.data_start(f)..=b].iter().map(|m| m.width()));
    }
    let (short, long) = split_two(&widths)?;
    let ratio = long.mean / short.mean.max(1e-9);
    let thr = 0.5 * (short.max + long.min);
    // Whether frames end with a closing mark is a property of the code, not of one frame:
    // decide it by majority, so a noisy closing mark that reads long does not become a bit.
    let short_last = bf
        .frames
        .iter()
        .filter(|&&(_, b)| bf.marks[b].width() <= thr)
        .count();
    let closing_mark = short_last * 2 > bf.frames.len();
    let mut frames = Vec::new();
    let mut periods = Vec::new();
    let mut spaces = Vec::new();
    let mut closing = Vec::new();
    for f in 0..bf.frames.len() {
        let (a, b) = bf.frames[f];
        let s = bf.data_start(f);
        if b <= s {
            continue;
        }
        let mut bits = Vec::with_capacity(b - s + 1);
        for i in s..b {
            bits.push(bf.marks[i].width() > thr);
            let sp = bf.space_after(i);
            periods.push(bf.marks[i].width() + sp);
            spaces.push(sp);
        }
        let last = bf.marks[b].width();
        if closing_mark {
            closing.push(last);
        } else {
            bits.push(last > thr);
        }
        frames.push(SlicedFrame {
            bits,
            first_mark: a,
            last_mark: b,
        });
    }
    if periods.is_empty() {
        return None;
    }
    let p = median(&periods);
    let consistent = periods
        .iter()
        .filter(|&&x| (x - p).abs() <= 0.12 * p)
        .count() as f64
        / periods.len() as f64;
    let score = separation_score(ratio) * consistent;
    let short_space = match split_two(&spaces) {
        Some((lo, hi)) if hi.mean / lo.mean.max(1e-9) >= 1.5 => Some(lo.mean),
        _ => None,
    };
    let t0 = match short_space {
        Some(ss) => 0.5 * (short.mean + ss),
        None => short.mean,
    };
    let units_per_bit = (p / t0).round().max(2.0);
    Some(Candidate {
        line_code: LineCode::Pwm,
        score,
        frames,
        unit: p / units_per_bit,
        layout: layout_of(bf, &closing),
    })
}
