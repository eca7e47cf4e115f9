//! Timing: clusters of mark and space widths, frame boundaries, and the base unit.
//!
//! Everything here is plain data computed from widths (capture samples), so it can be asserted
//! directly in tests and printed as evidence.
//!
//! ```
//! use ooksift::timing::{clusters, split_two};
//! let widths = [10.0, 10.5, 9.8, 30.2, 29.9, 10.1, 31.0];
//! let c = clusters(&widths, 0.25);
//! assert_eq!(c.len(), 2);
//! assert_eq!(c[0].count, 4);
//! let (lo, hi) = split_two(&widths).unwrap();
//! assert!(lo.mean < 11.0 && hi.mean > 29.0);
//! ```

use serde::{Deserialize, Serialize};

/// A group of similar widths.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Cluster {
    /// Mean width.
    pub mean: f64,
    /// Narrowest member.
    pub min: f64,
    /// Widest member.
    pub max: f64,
    /// Members.
    pub count: usize,
}

impl Cluster {
    fn of(sorted: &[f64]) -> Cluster {
        Cluster {
            mean: sorted.iter().sum::<f64>() / sorted.len().max(1) as f64,
            min: sorted.first().copied().unwrap_or(0.0),
            max: sorted.last().copied().unwrap_or(0.0),
            count: sorted.len(),
        }
    }
}

fn sorted(widths: &[f64]) -> Vec<f64> {
    let mut w: Vec<f64> = widths.iter().copied().filter(|x| x.is_finite()).collect();
    w.sort_by(f64::total_cmp);
    w
}

/// Clusters widths by gaps: sorted widths stay in one cluster while each is within
/// `rel_gap` (relative) of the one before it. Clusters come out narrowest first.
pub fn clusters(widths: &[f64], rel_gap: f64) -> Vec<Cluster> {
    let w = sorted(widths);
    let mut out = Vec::new();
    let mut start = 0;
    for i in 1..=w.len() {
        if i == w.len() || w[i] > w[i - 1] * (1.0 + rel_gap) + 1e-9 {
            if i > start {
                out.push(Cluster::of(&w[start..i]));
            }
            start = i;
        }
    }
    out
}

/// Splits widths in two groups at the cut that maximises the between-group variance of their
/// logarithms (Otsu's method), so the split is scale-free. `None` for fewer than two widths.
pub fn split_two(widths: &[f64]) -> Option<(Cluster, Cluster)> {
    let w = sorted(widths);
    let w: Vec<f64> = w.into_iter().filter(|&x| x > 0.0).collect();
    if w.len() < 2 {
        return None;
    }
    let logs: Vec<f64> = w.iter().map(|x| x.ln()).collect();
    let total: f64 = logs.iter().sum();
    let n = logs.len() as f64;
    let mut best = (f64::MIN, 1);
    let mut acc = 0.0;
    for k in 1..logs.len() {
        acc += logs[k - 1];
        let n0 = k as f64;
        let m0 = acc / n0;
        let m1 = (total - acc) / (n - n0);
        let between = n0 * (n - n0) * (m0 - m1).powi(2);
        if between > best.0 {
            best = (between, k);
        }
    }
    Some((Cluster::of(&w[..best.1]), Cluster::of(&w[best.1..])))
}

/// The median of `v` (0 for an empty slice).
pub fn median(v: &[f64]) -> f64 {
    let w = sorted(v);
    match w.len() {
        0 => 0.0,
        n if n % 2 == 1 => w[n / 2],
        n => 0.5 * (w[n / 2 - 1] + w[n / 2]),
    }
}

/// The space width above which a space separates frames (repeats), if the burst has repeats.
///
/// Rule: cluster the spaces (25 % gaps); among the boundaries between consecutive clusters
/// take the one with the largest ratio `upper.min / lower.max`. It separates frames when the
/// ratio is at least 2.5 and the spaces above it are rare (at most a quarter as many as those
/// below, and at least one): sync spaces come once per frame, data spaces once per bit. The
/// threshold is the geometric mean of the two bounding widths.
pub fn frame_gap_threshold(spaces: &[f64]) -> Option<f64> {
    let c = clusters(spaces, 0.25);
    let mut best: Option<(f64, usize)> = None;
    for i in 0..c.len().saturating_sub(1) {
        let ratio = c[i + 1].min / c[i].max.max(1e-9);
        if best.is_none_or(|(r, _)| ratio > r) {
            best = Some((ratio, i));
        }
    }
    let (ratio, i) = best?;
    let below: usize = c[..=i].iter().map(|x| x.count).sum();
    let above: usize = c[i + 1..].iter().map(|x| x.count).sum();
    (ratio >= 2.5 && above >= 1 && above * 4 <= below).then(|| (c[i].max * c[i + 1].min).sqrt())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clusters_of_a_pwm_burst() {
        // 1:3 PWM at a unit of 100 samples with jitter, plus two sync spaces of 31 units.
        let mut spaces = vec![];
        for i in 0..48 {
            let j = (i % 5) as f64 - 2.0;
            spaces.push(if i % 2 == 0 { 100.0 + j } else { 300.0 + j });
        }
        spaces.extend([3100.0, 3095.0]);
        let c = clusters(&spaces, 0.25);
        assert_eq!(c.len(), 3);
        assert_eq!(
            c.iter().map(|x| x.count).collect::<Vec<_>>(),
            vec![24, 24, 2]
        );
        let thr = frame_gap_threshold(&spaces).expect("has repeats");
        assert!(thr > 302.0 && thr < 3095.0, "{thr}");
    }

    #[test]
    fn a_single_frame_has_no_gap() {
        let spaces: Vec<f64> = (0..40)
            .map(|i| if i % 3 == 0 { 300.0 } else { 100.0 })
            .collect();
        assert_eq!(frame_gap_threshold(&spaces), None);
    }

    #[test]
    fn otsu_split_and_median() {
        let (lo, hi) = split_two(&[1.0, 1.1, 0.9, 3.0, 3.3, 2.9, 1.0]).expect("two groups");
        assert_eq!((lo.count, hi.count), (4, 3));
        assert_eq!(median(&[3.0, 1.0, 2.0]), 2.0);
        assert_eq!(median(&[4.0, 1.0, 2.0, 3.0]), 2.5);
        assert_eq!(median(&[]), 0.0);
    }
}
