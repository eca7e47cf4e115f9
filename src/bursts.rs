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
//! let mut split = BurstSplitter::new(BurstConfig { min_gap: 1000.0, gap_factor: 3.0, min_strong_width: 0.0, min_marks: 2, max_marks: 100, drop_chatter: true });
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

/// Marks per window the chatter test judges ([`ChatterFilter`]).
pub const CHATTER_WINDOW: usize = 16;
/// Sorted widths further apart than this ratio fall into different groups.
pub const GROUP_RATIO: f64 = 1.2;
/// A window whose marks and spaces together fall into at most this many width groups is
/// regular (a code); more, and it is chatter.
///
/// A code's window holds two or three mark widths and two to four space widths (data, sync,
/// header); NRZ's runs of one to four units make four of each and still pass. Chatter whose
/// widths spread over a ratio of 50 (the synth's model) makes 8 or fewer groups in fewer than
/// 3 of 10 000 windows of 16 marks (a seeded simulation, `width_groups_of_chatter_are_many`).
pub const MAX_REGULAR_GROUPS: usize = 8;

/// A group spans at most this ratio from its narrowest width: a code's widths of one kind
/// lie within a few per cent of each other (a sample or two of noise at six samples a unit),
/// while chatter's scattered widths, sorted, can chain at steps below [`GROUP_RATIO`] over
/// a far wider range.
pub const GROUP_SPAN: f64 = 1.5;

/// Number of groups the widths fall into: sorted, a new group starts wherever a width
/// exceeds the one before by more than [`GROUP_RATIO`], or the group's narrowest by more than
/// [`GROUP_SPAN`]. Sorts `widths` in place. Widths that are not positive and finite are
/// ignored.
///
/// ```
/// let mut w = [1.0, 3.1, 0.95, 2.9, 1.05, 3.0];
/// assert_eq!(ooksift::bursts::width_groups(&mut w), 2);
/// // Steps below 1.2 each, but a span of 2.3: two groups.
/// let mut chain = [1.0, 1.15, 1.3, 1.5, 1.7, 1.95, 2.3];
/// assert_eq!(ooksift::bursts::width_groups(&mut chain), 2);
/// ```
pub fn width_groups(widths: &mut [f64]) -> usize {
    widths.sort_by(f64::total_cmp);
    let mut groups = 0;
    let mut prev: Option<(f64, f64)> = None;
    for &w in widths.iter().filter(|w| w.is_finite() && **w > 0.0) {
        match prev {
            Some((first, p)) if w <= GROUP_RATIO * p && w <= GROUP_SPAN * first => {
                prev = Some((first, w));
            }
            _ => {
                groups += 1;
                prev = Some((w, w));
            }
        }
    }
    groups
}

/// Whether consecutive marks look like a code rather than chatter: their mark widths and
/// the spaces between them fall into at most [`MAX_REGULAR_GROUPS`] width groups.
pub fn is_regular(marks: &[Mark]) -> bool {
    let mut w: Vec<f64> = marks.iter().map(Mark::width).collect();
    let mut s: Vec<f64> = marks.windows(2).map(|p| p[1].rise - p[0].fall).collect();
    width_groups(&mut w) + width_groups(&mut s) <= MAX_REGULAR_GROUPS
}

/// Marks in a row that no regular window covers, at a duty cycle of at least
/// [`CHATTER_DUTY`], that show a capture holds chatter ([`ChatterFilter`]).
///
/// Chatter at the synth's model (about 1300 marks a second) gives this many in about 50 ms.
/// A press noise has broken is irregular too, but regular again once its glitches are merged
/// (see [`ChatterFilter`]).
pub const CHATTER_EVIDENCE: usize = 64;
/// Share of the time the evidence's marks are on at least: chatter is on about half the time
/// (common practice), the false marks of noise near the floor a few per cent.
pub const CHATTER_DUTY: f64 = 0.2;

/// Streaming separation of a code's marks from a superregenerative receiver's idle chatter.
///
/// Such a receiver's data output is never quiet while nothing transmits: it chatters with
/// full-scale pulses of random width, so neither level nor silence tells chatter from a code;
/// only regularity does. A code's marks and spaces take a few widths and repeat; chatter's are
/// scattered (common practice). Every window of [`CHATTER_WINDOW`] consecutive marks is judged
/// by [`is_regular`]; a mark inside at least one regular window is regular.
///
/// Nothing is dropped until the capture shows chatter at all: [`CHATTER_EVIDENCE`] irregular
/// marks in a row, on at least [`CHATTER_DUTY`] of their span, that stay irregular once
/// glitches are merged (the false marks of noise are sparse, and a press noise has broken
/// into irregular marks is regular again once its dips are bridged and spikes dropped).
/// Those marks are dropped and, from then on, so is every irregular mark, so the stretches
/// chatter covered read as silence. Before that, irregular marks are held (at most
/// [`CHATTER_EVIDENCE`]) and released unchanged. A run of marks between silences longer than
/// `max_quiet` that is shorter than a window cannot be judged and is kept whole.
///
/// Marks come out in order, delayed by at most a window and the evidence.
///
/// ```
/// use ooksift::bursts::ChatterFilter;
/// use ooksift::edges::Mark;
/// let mk = |r: f64, w: f64| Mark { rise: r, fall: r + w, level: 1.0, noise: 0.01, lag: Default::default() };
/// let mut f = ChatterFilter::new(1e6);
/// let mut kept = Vec::new();
/// // Scattered widths, then a regular code of 40 marks.
/// let mut t = 0.0;
/// for k in 0..200u32 {
///     let w = 3.0 * 1.9f64.powi((k * 7 % 6) as i32);
///     f.push(mk(t, w), &mut kept);
///     t += w + 3.0 * 1.7f64.powi((k * 5 % 7) as i32);
/// }
/// for k in 0..40 {
///     f.push(mk(t, if k % 3 == 0 { 30.0 } else { 10.0 }), &mut kept);
///     t += 40.0;
/// }
/// f.flush(&mut kept);
/// assert!(f.chatter_seen());
/// assert!(kept.len() >= 40 && kept.len() <= 42, "{}", kept.len());
/// ```
#[derive(Debug, Clone)]
pub struct ChatterFilter {
    /// Marks not yet judged by every window they belong to, each with whether a regular
    /// window covered it.
    queue: std::collections::VecDeque<Mark>,
    regular: std::collections::VecDeque<bool>,
    /// Judged irregular marks held while no chatter has been seen, and their summed width.
    hold: std::collections::VecDeque<Mark>,
    hold_on: f64,
    /// Marks in the current run (since the last silence).
    run: usize,
    /// A silence longer than this ends a run.
    max_quiet: f64,
    /// The capture has shown chatter: irregular marks are dropped.
    seen: bool,
    /// Marks dropped as chatter so far.
    dropped: u64,
}

impl ChatterFilter {
    /// A filter whose runs end at silences longer than `max_quiet` samples.
    pub fn new(max_quiet: f64) -> ChatterFilter {
        ChatterFilter {
            queue: std::collections::VecDeque::with_capacity(CHATTER_WINDOW),
            regular: std::collections::VecDeque::with_capacity(CHATTER_WINDOW),
            hold: std::collections::VecDeque::new(),
            hold_on: 0.0,
            run: 0,
            max_quiet,
            seen: false,
            dropped: 0,
        }
    }

    /// A filter that drops irregular marks from the start, as if chatter had been seen.
    pub fn dropping(max_quiet: f64) -> ChatterFilter {
        ChatterFilter {
            seen: true,
            ..ChatterFilter::new(max_quiet)
        }
    }

    /// Adds the next mark; marks that leave the window are appended to `out` when kept.
    pub fn push(&mut self, m: Mark, out: &mut Vec<Mark>) {
        if matches!(self.queue.back(), Some(b) if m.rise - b.fall > self.max_quiet) {
            self.flush(out);
        }
        self.queue.push_back(m);
        self.regular.push_back(false);
        self.run += 1;
        let n = self.queue.len();
        if n >= CHATTER_WINDOW {
            let window: Vec<Mark> = self.queue.range(n - CHATTER_WINDOW..).copied().collect();
            if is_regular(&window) {
                for r in self.regular.range_mut(n - CHATTER_WINDOW..) {
                    *r = true;
                }
            }
            if n == CHATTER_WINDOW {
                self.release_front(out);
            }
        }
    }

    /// Releases the oldest queued mark, whose windows have all been judged.
    fn release_front(&mut self, out: &mut Vec<Mark>) {
        let (Some(m), Some(regular)) = (self.queue.pop_front(), self.regular.pop_front()) else {
            return;
        };
        if regular || self.run < CHATTER_WINDOW {
            self.release_hold(out);
            out.push(m);
        } else if self.seen {
            self.dropped += 1;
        } else {
            self.hold_on += m.width();
            self.hold.push_back(m);
            if self.hold.len() >= CHATTER_EVIDENCE {
                self.judge_hold(out);
            }
        }
    }

    /// A full hold is chatter when its marks are on long enough: all are dropped and the
    /// filter drops irregular marks from then on. Otherwise the oldest is released.
    fn judge_hold(&mut self, out: &mut Vec<Mark>) {
        let span = match (self.hold.front(), self.hold.back()) {
            (Some(a), Some(b)) => b.fall - a.rise,
            _ => return,
        };
        if span > 0.0 && self.hold_on >= CHATTER_DUTY * span && !self.hold_is_broken_code() {
            self.seen = true;
            self.dropped += self.hold.len() as u64;
            self.hold.clear();
            self.hold_on = 0.0;
        } else if let Some(m) = self.hold.pop_front() {
            self.hold_on -= m.width();
            out.push(m);
        }
    }

    /// Whether the held marks are a code broken by noise rather than chatter: once glitches
    /// are merged as a press's reading merges them ([`merge_glitches`] at
    /// [`crate::frames::GLITCH_FRACTION`]), at least half their windows are regular.
    fn hold_is_broken_code(&self) -> bool {
        let mut m: Vec<Mark> = self.hold.iter().copied().collect();
        merge_glitches(&mut m, crate::frames::GLITCH_FRACTION);
        let windows = m.len().saturating_sub(CHATTER_WINDOW - 1);
        let regular = m.windows(CHATTER_WINDOW).filter(|w| is_regular(w)).count();
        windows > 0 && 2 * regular >= windows
    }

    /// Releases every held mark unchanged.
    fn release_hold(&mut self, out: &mut Vec<Mark>) {
        out.extend(self.hold.drain(..));
        self.hold_on = 0.0;
    }

    /// Nothing happened up to `pos`: ends the run when the silence has grown past
    /// `max_quiet`, releasing its last marks.
    pub fn idle_until(&mut self, pos: f64, out: &mut Vec<Mark>) {
        let last = self.queue.back().or(self.hold.back());
        if matches!(last, Some(b) if pos - b.fall > self.max_quiet) {
            self.flush(out);
        }
    }

    /// Ends the run: releases every mark still held.
    pub fn flush(&mut self, out: &mut Vec<Mark>) {
        while !self.queue.is_empty() {
            self.release_front(out);
        }
        self.release_hold(out);
        self.run = 0;
    }

    /// Rising edge of the earliest mark still held.
    pub fn first_pending(&self) -> Option<f64> {
        self.hold.front().or(self.queue.front()).map(|m| m.rise)
    }

    /// Whether the capture has shown chatter (irregular marks are being dropped).
    pub fn chatter_seen(&self) -> bool {
        self.seen
    }

    /// Marks dropped as chatter so far.
    pub fn dropped(&self) -> u64 {
        self.dropped
    }
}

/// Removes chatter from one burst's marks: a [`ChatterFilter`] over them (the whole burst one
/// run), then [`trim_misfits`]. Returns how many marks were removed.
pub fn strip_chatter(marks: &mut Vec<Mark>) -> usize {
    let before = marks.len();
    let mut f = ChatterFilter::dropping(f64::INFINITY);
    let mut out = Vec::with_capacity(marks.len());
    for m in marks.drain(..) {
        f.push(m, &mut out);
    }
    f.flush(&mut out);
    *marks = out;
    trim_misfits(marks);
    before - marks.len()
}

/// Consecutive fitting marks (and the spaces between them) that anchor a burst's ends in
/// [`trim_misfits`].
pub const FIT_RUN: usize = 3;

/// Drops marks at either end of a burst that fit none of its widths: a window that judged
/// a code regular may still reach a chatter mark or two beyond the code's ends.
///
/// A mark fits when at least two other marks of the burst lie within [`GROUP_RATIO`] of its
/// width, a space likewise among the spaces (a code repeats its widths; chatter does not).
/// The burst starts at the first mark that opens [`FIT_RUN`] fitting marks joined by fitting
/// spaces, and ends at the last that closes such a run; a burst with no such run is left
/// whole. Returns how many marks were dropped.
pub fn trim_misfits(marks: &mut Vec<Mark>) -> usize {
    let n = marks.len();
    if n < 2 * FIT_RUN {
        return 0;
    }
    let sorted = |mut v: Vec<f64>| {
        v.sort_by(f64::total_cmp);
        v
    };
    let mw = sorted(marks.iter().map(Mark::width).collect());
    let sw = sorted(marks.windows(2).map(|p| p[1].rise - p[0].fall).collect());
    let near = count_near;
    let fit_mark = |i: usize| near(&mw, marks[i].width()) >= 3;
    let fit_space = |i: usize| near(&sw, marks[i + 1].rise - marks[i].fall) >= 3;
    // Marks i..i+FIT_RUN all fit, as do the spaces between them.
    let run_at = |i: usize| (i..i + FIT_RUN).all(fit_mark) && (i..i + FIT_RUN - 1).all(fit_space);
    let Some(first) = (0..=n - FIT_RUN).find(|&i| run_at(i)) else {
        return 0;
    };
    let last = (0..=n - FIT_RUN)
        .rev()
        .find(|&i| run_at(i))
        .map_or(n - 1, |i| i + FIT_RUN - 1);
    marks.truncate(last + 1);
    marks.drain(..first);
    n - marks.len()
}

/// Elements of `sorted` within [`GROUP_RATIO`] of `x`, itself included. A negative width
/// (overlapping marks) has its bounds the wrong way round and counts none.
fn count_near(sorted: &[f64], x: f64) -> usize {
    let lo = sorted.partition_point(|&y| y < x / GROUP_RATIO);
    let hi = sorted.partition_point(|&y| y <= x * GROUP_RATIO);
    hi.saturating_sub(lo)
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
    /// Drop a superregenerative receiver's chatter ([`ChatterFilter`]) before the burst rule
    /// (envelope captures; IQ captures hold no such chatter, and their weak false marks are
    /// handled by level).
    pub drop_chatter: bool,
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
            drop_chatter: true,
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
    /// Drops chatter before the marks reach the burst rule.
    chatter: ChatterFilter,
    /// Marks the chatter filter released, waiting for the burst rule.
    kept: Vec<Mark>,
}

impl BurstSplitter {
    /// An empty splitter.
    pub fn new(cfg: BurstConfig) -> BurstSplitter {
        let cfg_gap = cfg.min_gap;
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
            chatter: ChatterFilter::new(cfg_gap),
            kept: Vec::new(),
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
    ///
    /// Marks pass a [`ChatterFilter`] first: chatter is dropped and reads as silence.
    pub fn push(&mut self, m: Mark, out: &mut Vec<Burst>) {
        if !self.cfg.drop_chatter {
            self.accept(m, out);
            return;
        }
        let mut kept = std::mem::take(&mut self.kept);
        self.chatter.push(m, &mut kept);
        self.accept_all(&mut kept, out);
        self.kept = kept;
    }

    /// Runs released marks through the burst rule, then lets the silence before the first
    /// mark still held close what it can (no later mark can come before it).
    fn accept_all(&mut self, kept: &mut Vec<Mark>, out: &mut Vec<Burst>) {
        for k in kept.drain(..) {
            self.accept(k, out);
        }
        if let Some(p) = self.chatter.first_pending() {
            self.idle_to(p, out);
        }
    }

    /// The burst rule for one mark that is not chatter.
    fn accept(&mut self, m: Mark, out: &mut Vec<Burst>) {
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
        let mut kept = std::mem::take(&mut self.kept);
        self.chatter.idle_until(pos, &mut kept);
        self.accept_all(&mut kept, out);
        self.kept = kept;
        let pos = self.chatter.first_pending().map_or(pos, |p| p.min(pos));
        self.idle_to(pos, out);
    }

    fn idle_to(&mut self, pos: f64, out: &mut Vec<Burst>) {
        if !self.current.is_empty() && pos - self.last_strong_fall > self.gap() {
            self.close(out);
        }
        if matches!(self.last_fall, Some(f) if pos - f > self.chain_gap()) {
            self.end_chain();
        }
    }

    /// Rising edge of the first mark of the burst in progress, or of the first mark the chatter
    /// filter still holds, if any.
    pub fn open_start(&self) -> Option<f64> {
        match (self.current.first(), self.chatter.first_pending()) {
            (Some(m), Some(p)) => Some(m.rise.min(p)),
            (Some(m), None) => Some(m.rise),
            (None, p) => p,
        }
    }

    /// Marks dropped as chatter so far.
    pub fn chatter_dropped(&self) -> u64 {
        self.chatter.dropped()
    }

    /// Whether the capture has shown a superregenerative receiver's chatter
    /// ([`ChatterFilter`]).
    pub fn chatter_seen(&self) -> bool {
        self.chatter.chatter_seen()
    }

    /// Closes the last burst at the end of the capture.
    pub fn finish(&mut self, out: &mut Vec<Burst>) {
        let mut kept = std::mem::take(&mut self.kept);
        self.chatter.flush(&mut kept);
        for k in kept.drain(..) {
            self.accept(k, out);
        }
        self.kept = kept;
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

    /// Chatter marks from `t` until `until`: widths and spaces log-uniform over 3–150
    /// samples (the synth's 30 µs–1.5 ms at 100 kHz), full level.
    fn chatter(rng: &mut crate::rng::Rng, mut t: f64, until: f64) -> Vec<Mark> {
        let w = |rng: &mut crate::rng::Rng| 3.0 * 50f64.powf(rng.uniform());
        let mut out = Vec::new();
        loop {
            let m = w(rng);
            if t + m > until {
                return out;
            }
            out.push(Mark {
                rise: t,
                fall: t + m,
                level: 1.0,
                noise: 0.01,
                lag: Default::default(),
            });
            t += m + w(rng);
        }
    }

    /// `marks` moved to start at `t`.
    fn shifted(marks: &[Mark], t: f64) -> Vec<Mark> {
        let d = t - marks[0].rise;
        marks
            .iter()
            .map(|m| Mark {
                rise: m.rise + d,
                fall: m.fall + d,
                ..*m
            })
            .collect()
    }

    #[test]
    fn width_groups_of_chatter_are_many() {
        // Seeded simulation behind MAX_REGULAR_GROUPS's documented false-regular rate.
        let mut rng = crate::rng::Rng::new(4);
        let trials = 10_000;
        let regular = (0..trials)
            .filter(|_| {
                // 16 marks of mean period about 75 samples need far less than 5000.
                let c = chatter(&mut rng, 0.0, 5000.0);
                c.len() >= CHATTER_WINDOW && is_regular(&c[..CHATTER_WINDOW])
            })
            .count();
        assert!(regular < 3, "{regular} of {trials} chatter windows regular");
        // A code's windows are regular: PWM, PPM with its header, both with sync gaps.
        for code in [
            crate::coding::test_marks::pwm("1100101011110000", 35.0, 3),
            crate::coding::test_marks::ppm("1100101011110000", 35.0, 3),
        ] {
            for w in code.windows(CHATTER_WINDOW) {
                assert!(is_regular(w));
            }
        }
    }

    #[test]
    fn a_code_amid_chatter_is_kept_exactly() {
        let mut rng = crate::rng::Rng::new(7);
        for (k, code) in [
            crate::coding::test_marks::pwm("110100101101001011110001", 35.0, 5),
            crate::coding::test_marks::ppm("1011001110001011", 40.0, 4),
        ]
        .into_iter()
        .enumerate()
        {
            for trial in 0..20 {
                // Chatter up to 500 samples (5 ms at 100 kHz) before and after the code.
                let start = 20_000.0 + 137.0 * trial as f64;
                let code = shifted(&code, start);
                let end = code[code.len() - 1].fall;
                let mut marks = chatter(&mut rng, 0.0, start - 500.0);
                marks.extend(code.iter().cloned());
                marks.extend(chatter(&mut rng, end + 500.0, end + 20_000.0));
                let total = marks.len();
                let dropped = strip_chatter(&mut marks);
                // Every code mark kept, in one unbroken run; of the chatter, at most a
                // window or two that happened to look regular (in the decoder the splitter
                // cuts such a stretch off at the silence around it).
                let at = marks.iter().position(|m| m == &code[0]);
                let at = at.unwrap_or_else(|| panic!("code {k} trial {trial}: start lost"));
                assert_eq!(
                    marks.get(at..at + code.len()),
                    Some(&code[..]),
                    "code {k} trial {trial}"
                );
                let chatter_kept = marks.len() - code.len();
                assert!(chatter_kept <= 2 * CHATTER_WINDOW, "{chatter_kept} kept");
                assert_eq!(dropped + marks.len(), total);
                assert!(dropped > 200, "{dropped}");
            }
        }
    }

    #[test]
    fn presses_amid_endless_chatter_split_into_bursts() {
        // 200 000 samples of chatter (about 1300 marks per 100 000) around and between two
        // presses: each press is a burst of its own marks, and the chatter never reaches
        // the mark limit (which would drop the second press).
        let mut rng = crate::rng::Rng::new(11);
        let a = shifted(
            &crate::coding::test_marks::pwm("1100101011110000", 35.0, 4),
            60_000.0,
        );
        let b = shifted(
            &crate::coding::test_marks::ppm("1011001110001011", 40.0, 4),
            140_000.0,
        );
        let mut marks = chatter(&mut rng, 0.0, a[0].rise - 500.0);
        marks.extend(a.iter().cloned());
        let a_end = a[a.len() - 1].fall;
        marks.extend(chatter(&mut rng, a_end + 500.0, b[0].rise - 500.0));
        marks.extend(b.iter().cloned());
        let b_end = b[b.len() - 1].fall;
        marks.extend(chatter(&mut rng, b_end + 500.0, 200_000.0));
        let mut split = BurstSplitter::new(BurstConfig {
            min_gap: 8000.0,
            gap_factor: 3.0,
            min_strong_width: 0.0,
            min_marks: 6,
            max_marks: 1000,
            drop_chatter: true,
        });
        let mut out = Vec::new();
        for m in marks {
            split.push(m, &mut out);
        }
        // The first press closes while the chatter goes on.
        assert!(!out.is_empty());
        split.finish(&mut out);
        assert!(
            split.chatter_dropped() > 2000,
            "{}",
            split.chatter_dropped()
        );
        let long: Vec<&Burst> = out.iter().filter(|b| b.marks.len() > 40).collect();
        assert_eq!(
            long.len(),
            2,
            "{:?}",
            out.iter().map(|b| b.marks.len()).collect::<Vec<_>>()
        );
        for (burst, code) in long.iter().zip([&a, &b]) {
            let mut m = burst.marks.clone();
            trim_misfits(&mut m);
            assert_eq!(&m, code);
            assert!(!burst.capped);
        }
    }

    /// A PWM press whose marks noise has broken (every third mark split by a dip, a spike
    /// in some spaces): its windows are irregular, yet with no chatter in the capture it
    /// must reach the burst rule whole.
    fn broken_press(t: f64) -> Vec<Mark> {
        let code = shifted(
            &crate::coding::test_marks::pwm("110100101101001011110001", 35.0, 3),
            t,
        );
        let mut out = Vec::new();
        for (k, m) in code.iter().enumerate() {
            if k % 3 == 0 {
                let cut = m.rise + 0.37 * m.width();
                out.push(Mark { fall: cut, ..*m });
                out.push(Mark {
                    rise: cut + 2.0 + (k % 5) as f64,
                    ..*m
                });
            } else {
                out.push(*m);
            }
            if k % 4 == 1 {
                let r = m.fall + 9.0 + (k % 7) as f64;
                out.push(Mark {
                    rise: r,
                    fall: r + 1.5 + (k % 3) as f64,
                    ..*m
                });
            }
        }
        out
    }

    #[test]
    fn nothing_is_dropped_until_chatter_is_seen() {
        // Sparse weak-noise marks (short, far apart: a low duty) and a broken press: no
        // chatter is seen and every mark comes out, in order.
        let mut marks: Vec<Mark> = (0..300)
            .map(|k| Mark {
                rise: 400.0 * k as f64 + (k * 37 % 101) as f64,
                fall: 400.0 * k as f64 + (k * 37 % 101) as f64 + 1.0 + (k % 4) as f64,
                level: 0.2,
                noise: 0.01,
                lag: Default::default(),
            })
            .collect();
        let press = broken_press(125_000.0);
        assert!(press.windows(CHATTER_WINDOW).any(|w| !is_regular(w)));
        marks.extend(press.iter().copied());
        let mut f = ChatterFilter::new(f64::INFINITY);
        let mut out = Vec::new();
        for m in &marks {
            f.push(*m, &mut out);
        }
        f.flush(&mut out);
        assert!(!f.chatter_seen());
        assert_eq!(f.dropped(), 0);
        assert_eq!(out, marks);
        // The same press after chatter: the chatter is seen and dropped.
        let mut rng = crate::rng::Rng::new(3);
        let mut marks = chatter(&mut rng, 0.0, 20_000.0);
        let n = marks.len();
        marks.extend(broken_press(25_000.0));
        let mut f = ChatterFilter::new(f64::INFINITY);
        let mut out = Vec::new();
        for m in &marks {
            f.push(*m, &mut out);
        }
        f.flush(&mut out);
        assert!(f.chatter_seen());
        assert!(f.dropped() as usize > n * 9 / 10, "{} of {n}", f.dropped());
    }

    #[test]
    fn misfits_are_trimmed_only_at_the_ends() {
        let code = crate::coding::test_marks::pwm("1100101011110000", 35.0, 3);
        let mut marks = code.clone();
        // A header-like single mark inside is kept; stray marks at the ends are dropped.
        let mut stray = code[0];
        stray.rise -= 900.0;
        stray.fall = stray.rise + 61.0;
        let mut after = code[code.len() - 1];
        after.rise += 700.0;
        after.fall = after.rise + 9.0;
        marks.insert(0, stray);
        marks.push(after);
        assert_eq!(trim_misfits(&mut marks), 2);
        assert_eq!(marks, code);
        // Too short to judge: untouched.
        let mut few = code[..4].to_vec();
        assert_eq!(trim_misfits(&mut few), 0);
    }

    /// Fuzz regression (decode_chain, kept in tests/fuzz-crashes): overlapping marks make
    /// negative spaces, whose neighbourhood bounds come out reversed — an overflow panic.
    #[test]
    fn overlapping_marks_do_not_panic_the_trim() {
        // The fuzz build panicked; a release build wrapped to a count near usize::MAX.
        assert_eq!(count_near(&[-2.0, 1.0], -2.0), 0);
        assert_eq!(count_near(&[1.0, 2.0, 2.1, 9.0], 2.0), 2);
        let mut marks: Vec<Mark> = (0..8).map(|i| mark(i as f64 * 15.0, 1.0)).collect();
        marks[3].fall = marks[5].rise + 20.0;
        marks[6].rise = marks[5].fall - 30.0;
        let n = marks.len();
        let dropped = trim_misfits(&mut marks);
        assert_eq!(dropped + marks.len(), n);
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
            drop_chatter: true,
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
            drop_chatter: true,
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
