//! PPM (pulse distance): marks all alike; each bit is the space between two marks; the wider
//! space is 1. The frame's last mark is the stop mark and opens no bit.
//!
//! Score = share of data marks within [0.6, 1.5] × their median × separation of the two space
//! widths. Unit: `T0 = (mark + short space) / 2`; each bit's period (mark + space) counts
//! `round(period / T0)` units, and the unit is the sum of periods over the sum of units, which
//! a receiver's mark stretching does not bias.

use super::{layout_of, separation_score, BurstFrames, Candidate, LineCode, SlicedFrame};
use crate::timing::{median, split_two};

pub(super) fn slice(bf: &BurstFrames<'_>) -> Option<Candidate> {
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
    let mark = median(&marks);
    let alike = marks
        .iter()
        .filter(|&&w| w >= 0.6 * mark && w <= 1.5 * mark)
        .count() as f64
        / marks.len() as f64;
    let (short, long) = split_two(&spaces)?;
    let ratio = long.mean / short.mean.max(1e-9);
    let thr = 0.5 * (short.max + long.min);
    let score = alike * separation_score(ratio);
    let t0 = 0.5 * (mark + short.mean);
    let mut frames = Vec::new();
    let mut closing = Vec::new();
    let (mut sum_p, mut sum_u) = (0.0, 0.0);
    for f in 0..bf.frames.len() {
        let (a, b) = bf.frames[f];
        let s = bf.data_start(f);
        if b <= s {
            continue;
        }
        let mut bits = Vec::with_capacity(b - s);
        for i in s..b {
            let sp = bf.space_after(i);
            bits.push(sp > thr);
            let p = bf.marks[i].width() + sp;
            sum_p += p;
            sum_u += (p / t0).round().max(1.0);
        }
        closing.push(bf.marks[b].width());
        frames.push(SlicedFrame {
            bits,
            first_mark: a,
            last_mark: b,
        });
    }
    if sum_u == 0.0 {
        return None;
    }
    Some(Candidate {
        line_code: LineCode::Ppm,
        score,
        frames,
        unit: sum_p / sum_u,
        layout: layout_of(bf, &closing),
    })
}
