//! Bursts: marks grouped into presses at long silences.
//!
//! A burst closes when the silence after its last mark exceeds
//! `max(min_gap, gap_factor × longest space inside the burst)`. Repeats of a frame are
//! separated by sync spaces of tens of units; presses by far more, so the default `min_gap`
//! of 80 ms keeps a press whole for units up to about 2.5 ms (31-unit sync spaces) while
//! separating presses a human makes. Bursts with fewer than `min_marks` marks are dropped as
//! noise.
//!
//! Marks weaker than [`WEAK_FRACTION`] of the burst's strong marks do not break that silence,
//! and after a burst closes, marks that weak relative to it open no other until a full
//! silence passes. So false marks in the noise between presses neither chain an endless
//! stream into one burst (which would report nothing until the stream ends, and drop every
//! press past the mark limit) nor make bursts of their own.
//!
//! ```
//! use ooksift::bursts::{BurstConfig, BurstSplitter};
//! use ooksift::edges::Mark;
//! let mk = |r: f64| Mark { rise: r, fall: r + 10.0, level: 1.0, noise: 0.01, lag: Default::default() };
//! let mut split = BurstSplitter::new(BurstConfig { min_gap: 1000.0, gap_factor: 3.0, min_strong_width: 0.0, min_marks: 2, max_marks: 100 });
//! let mut out = Vec::new();
//! for r in [0.0, 30.0, 60.0, 5000.0, 5030.0] { split.push(mk(r), &mut out); }
//! split.finish(&mut out);
//! assert_eq!(out.len(), 2);
//! assert_eq!(out[0].marks.len(), 3);
//! ```

use crate::edges::Mark;

/// One press: marks separated by no silence longer than the burst gap.
#[derive(Debug, Clone, PartialEq)]
pub struct Burst {
    /// The marks, in capture-sample positions.
    pub marks: Vec<Mark>,
    /// Marks were dropped because the burst reached `max_marks`.
    pub capped: bool,
}

impl Burst {
    /// Position of the first rising edge.
    pub fn start(&self) -> f64 {
        self.marks.first().map_or(0.0, |m| m.rise)
    }

    /// Position of the last falling edge.
    pub fn end(&self) -> f64 {
        self.marks.last().map_or(0.0, |m| m.fall)
    }
}

/// Removes glitches relative to the burst's own timing: a space or mark shorter than
/// `fraction` × the burst's width-weighted median element (marks and spaces alike, widths
/// above four times the plain median left out) is noise —
/// a dip inside a mark, or a spike inside a space. Dips are bridged (the two marks become
/// one); spikes are dropped. Returns how many glitches were removed.
///
/// Weighting by width makes the reference a typical element's width (about one to three
/// units) however many glitches there are, since glitches are short.
pub fn merge_glitches(marks: &mut Vec<Mark>, fraction: f64) -> usize {
    if marks.len() < 3 {
        return 0;
    }
    let mut w: Vec<f64> = marks.iter().map(Mark::width).collect();
    w.extend(marks.windows(2).map(|p| p[1].rise - p[0].fall));
    w.sort_by(f64::total_cmp);
    // Sync gaps between repeats are few but long: leave widths far above the plain median
    // out of the weighting, or they would become the reference.
    let plain = w[w.len() / 2];
    w.retain(|&x| x <= 4.0 * plain);
    let total: f64 = w.iter().sum();
    let mut acc = 0.0;
    let mut reference = w[w.len() - 1];
    for &x in &w {
        acc += x;
        if acc >= total / 2.0 {
            reference = x;
            break;
        }
    }
    let limit = fraction * reference;
    let before = marks.len();
    // Bridge dips first, so a long mark broken in pieces is whole before spikes are judged.
    let mut out: Vec<Mark> = Vec::with_capacity(marks.len());
    for m in marks.drain(..) {
        match out.last_mut() {
            Some(prev) if m.rise - prev.fall < limit => {
                let (wa, wb) = (prev.width(), m.width());
                prev.level = ((prev.level as f64 * wa + m.level as f64 * wb) / (wa + wb)) as f32;
                prev.fall = m.fall;
                prev.lag += m.lag;
            }
            _ => out.push(m),
        }
    }
    out.retain(|m| m.width() >= limit);
    *marks = out;
    before - marks.len()
}

/// Marks far weaker than the burst's strong marks are noise (false alarms in the silences
/// between presses, which would otherwise chain presses together): those below
/// [`WEAK_FRACTION`] of the 90th-percentile level are dropped, and what remains is split again
/// at silences longer than `min_gap`.
pub fn refine(marks: Vec<Mark>, min_gap: f64) -> Vec<Vec<Mark>> {
    if marks.len() < 2 {
        return vec![marks];
    }
    let keep = WEAK_FRACTION * reference_level(&marks);
    let mut parts: Vec<Vec<Mark>> = Vec::new();
    let mut cur: Vec<Mark> = Vec::new();
    for m in marks.into_iter().filter(|m| m.level >= keep) {
        if let Some(last) = cur.last() {
            if m.rise - last.fall > min_gap {
                parts.push(std::mem::take(&mut cur));
            }
        }
        cur.push(m);
    }
    parts.push(cur);
    parts
}

/// The level of a burst's strong marks: when the levels split clearly in two (Otsu's cut on
/// their logarithms, the upper class at least twice the lower and at least six marks), the
/// median of the upper class — noise marks may far outnumber a press's; otherwise the 90th
/// percentile of all levels (0 if empty).
fn reference_level(marks: &[Mark]) -> f32 {
    let mut levels: Vec<f32> = marks
        .iter()
        .map(|m| m.level)
        .filter(|l| l.is_finite())
        .collect();
    levels.sort_by(f32::total_cmp);
    let p90 = levels
        .get(((levels.len().max(1) - 1) as f64 * 0.9) as usize)
        .copied()
        .unwrap_or(0.0);
    let positive: Vec<f64> = levels
        .iter()
        .filter(|&&l| l > 0.0)
        .map(|&l| l as f64)
        .collect();
    if let Some((lo, hi)) = crate::timing::split_two(&positive) {
        if hi.count >= 6 && hi.mean >= 2.0 * lo.mean {
            let upper = &positive[positive.len() - hi.count..];
            return upper[upper.len() / 2] as f32;
        }
    }
    p90
}

/// Marks weaker than this fraction of a burst's strong marks are noise.
pub const WEAK_FRACTION: f32 = 0.45;

/// Tuning of [`BurstSplitter`], in capture samples.
#[derive(Debug, Clone)]
pub struct BurstConfig {
    /// Silence that always ends a burst.
    pub min_gap: f64,
    /// Silence, in multiples of the longest space so far, that ends a burst when longer
    /// than `min_gap`.
    pub gap_factor: f64,
    /// Marks shorter than this neither open a burst nor keep one open: near the floor of a
    /// wide channel, noise peaks reach half a button's level but last only a few samples.
    pub min_strong_width: f64,
    /// Bursts with fewer marks are noise.
    pub min_marks: usize,
    /// Marks kept per burst at most (a limit, reported when hit).
    pub max_marks: usize,
}

impl BurstConfig {
    /// Defaults for a capture at `rate_hz`: 80 ms minimum gap.
    pub fn for_rate(rate_hz: f64) -> BurstConfig {
        BurstConfig {
            min_gap: 0.080 * rate_hz,
            gap_factor: 3.0,
            min_strong_width: 40e-6 * rate_hz,
            min_marks: 6,
            max_marks: 20_000,
        }
    }
}

/// Streaming splitter of marks into bursts.
#[derive(Debug, Clone)]
pub struct BurstSplitter {
    cfg: BurstConfig,
    current: Vec<Mark>,
    longest_space: f64,
    capped: bool,
    /// Typical level of the burst's strong marks (a moving average, so one spike barely
    /// moves it).
    level: f32,
    /// Falling edge of the burst's last strong mark: silence is timed from there, so weak
    /// false marks in the silence after a press neither keep the burst open nor join it.
    last_strong_fall: f64,
    /// Strongest level of the bursts closed in this chain of marks: a mark weaker than
    /// [`WEAK_FRACTION`] of it cannot open a burst. A chain is what the burst rule alone makes
    /// of all marks, weak ones included; it ends at a silence longer than its gap.
    chain_level: f32,
    /// Longest space between any two marks of the chain.
    chain_longest: f64,
    /// Falling edge of the chain's last mark, weak or strong; `None` once the chain ended.
    last_fall: Option<f64>,
}

impl BurstSplitter {
    /// An empty splitter.
    pub fn new(cfg: BurstConfig) -> BurstSplitter {
        BurstSplitter {
            cfg,
            current: Vec::new(),
            longest_space: 0.0,
            capped: false,
            level: 0.0,
            last_strong_fall: 0.0,
            chain_level: 0.0,
            chain_longest: 0.0,
            last_fall: None,
        }
    }

    fn chain_gap(&self) -> f64 {
        self.cfg
            .min_gap
            .max(self.cfg.gap_factor * self.chain_longest)
    }

    fn end_chain(&mut self) {
        self.last_fall = None;
        self.chain_level = 0.0;
        self.chain_longest = 0.0;
    }

    fn gap(&self) -> f64 {
        self.cfg
            .min_gap
            .max(self.cfg.gap_factor * self.longest_space)
    }

    fn close(&mut self, out: &mut Vec<Burst>) {
        let marks = std::mem::take(&mut self.current);
        if marks.len() >= self.cfg.min_marks {
            self.chain_level = self.chain_level.max(reference_level(&marks));
        }
        for part in refine(marks, self.cfg.min_gap) {
            if part.len() >= self.cfg.min_marks {
                out.push(Burst {
                    marks: part,
                    capped: self.capped,
                });
            }
        }
        self.longest_space = 0.0;
        self.capped = false;
    }

    /// Adds the next mark; a burst it ends is appended to `out`.
    pub fn push(&mut self, m: Mark, out: &mut Vec<Burst>) {
        if let Some(last_fall) = self.last_fall {
            let space = m.rise - last_fall;
            if space > self.chain_gap() {
                // A full silence: the chain ends, and its level is forgotten.
                self.close(out);
                self.end_chain();
            } else {
                self.chain_longest = self.chain_longest.max(space);
                if !self.current.is_empty() && m.rise - self.last_strong_fall > self.gap() {
                    // Only weak marks since the press ended.
                    self.close(out);
                }
            }
        }
        self.last_fall = Some(m.fall);
        if self.current.is_empty() {
            // NaN levels compare false: such a mark opens nothing.
            let opens = m.level >= WEAK_FRACTION * self.chain_level
                && m.width() >= self.cfg.min_strong_width;
            if !opens {
                return;
            }
            self.level = m.level;
            self.last_strong_fall = m.fall;
        } else if m.level >= WEAK_FRACTION * self.level && m.width() >= self.cfg.min_strong_width {
            self.longest_space = self.longest_space.max(m.rise - self.last_strong_fall);
            // Fast attack, slow release: a press that follows noise marks in one burst
            // raises the level at once, so the noise after it reads weak.
            if m.level > self.level {
                self.level = m.level;
            } else {
                self.level += 0.1 * (m.level - self.level);
            }
            self.last_strong_fall = m.fall;
        }
        if self.current.len() < self.cfg.max_marks {
            self.current.push(m);
        } else {
            self.capped = true;
        }
    }

    /// Tells the splitter that nothing happened up to `pos`; closes a burst whose silence
    /// has grown past the gap (lets streams report presses as they end).
    pub fn idle_until(&mut self, pos: f64, out: &mut Vec<Burst>) {
        if !self.current.is_empty() && pos - self.last_strong_fall > self.gap() {
            self.close(out);
        }
        if matches!(self.last_fall, Some(f) if pos - f > self.chain_gap()) {
            self.end_chain();
        }
    }

    /// Rising edge of the first mark of the burst in progress, if one is open.
    pub fn open_start(&self) -> Option<f64> {
        self.current.first().map(|m| m.rise)
    }

    /// Closes the last burst at the end of the capture.
    pub fn finish(&mut self, out: &mut Vec<Burst>) {
        self.close(out);
        self.end_chain();
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn mark(rise: f64, level: f32) -> Mark {
        Mark {
            rise,
            fall: rise + 10.0,
            level,
            noise: 0.01,
            lag: Default::default(),
        }
    }

    #[test]
    fn weak_noise_marks_in_the_silence_do_not_chain_presses() {
        // Regression: a stream whose silences held a weak false mark every 500 samples
        // (below the 1000-sample gap) never closed its burst, so a live stream reported no
        // press until it ended, and lost every press after the mark limit.
        let cfg = BurstConfig {
            min_gap: 1000.0,
            gap_factor: 3.0,
            min_strong_width: 0.0,
            min_marks: 3,
            max_marks: 100_000,
        };
        let mut split = BurstSplitter::new(cfg);
        let mut out = Vec::new();
        let mut t = 0.0;
        let mut closed_during_stream = Vec::new();
        for press in 0..50 {
            for k in 0..10 {
                split.push(mark(t + 30.0 * k as f64, 1.0), &mut out);
            }
            t += 300.0;
            // 20 000 samples of silence with a weak noise mark every 500.
            for _ in 0..40 {
                t += 500.0;
                split.push(mark(t, 0.2), &mut out);
                split.idle_until(t + 10.0, &mut out);
            }
            t += 500.0;
            closed_during_stream.push((press, out.len()));
        }
        // Each press closed within the silence after it, not at the end of the stream.
        for (press, closed) in closed_during_stream {
            assert_eq!(closed, press + 1, "press {press}");
        }
        split.finish(&mut out);
        assert_eq!(out.len(), 50);
        for b in &out {
            assert_eq!(b.marks.len(), 10);
            assert!(!b.capped);
        }
    }

    #[test]
    fn a_press_after_weak_noise_is_kept_whole() {
        let cfg = BurstConfig {
            min_gap: 1000.0,
            gap_factor: 3.0,
            min_strong_width: 0.0,
            min_marks: 3,
            max_marks: 1000,
        };
        let mut split = BurstSplitter::new(cfg);
        let mut out = Vec::new();
        // Weak noise marks chain into the start of a strong press.
        for k in 0..5 {
            split.push(mark(500.0 * k as f64, 0.2), &mut out);
        }
        for k in 0..10 {
            split.push(mark(2600.0 + 30.0 * k as f64, 1.0), &mut out);
        }
        split.finish(&mut out);
        let strong: usize = out
            .iter()
            .map(|b| b.marks.iter().filter(|m| m.level >= 1.0).count())
            .sum();
        assert_eq!(strong, 10);
        assert!(out.iter().any(|b| b.marks.len() == 10));
    }
}
