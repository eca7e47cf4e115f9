//! When each part of the band was busy: a squelch map kept beside the spectrum survey.
//!
//! A long capture of push buttons is mostly silence: a press every few seconds or minutes,
//! a few hundred milliseconds each. The survey already transforms the frames that find the
//! carriers; [`ActivityLog`] reads the same power spectra in half-overlapping bands of
//! [`BAND_BINS`] bins, sums each band over the last [`WINDOW_FRAMES`] analysed frames, and
//! notes the spans during which a band's sum stood clearly above its own quiet level. The
//! decoder then runs a carrier's channel only over the spans of the bands it covers (plus
//! margins) and skips the rest of the file: the channel is the costly stage, and a skipped
//! stretch held nothing its detector could have found.
//!
//! The rule fails open. Every doubt counts as activity: the quiet level of a band follows only
//! frames near it and rises slowly (a noise floor that steps up keeps the band active rather
//! than deaf), the threshold sits [`THRESHOLD_SIGMAS`] standard deviations above it, and past
//! [`MAX_SPANS`] spans the log gives up and the decoder reads everything. The threshold (about
//! 40 % above a band's quiet 32-frame sum, for the spread of real spectra) sits below what
//! the survey needs to list a carrier at all: measured on 25 s captures at 2.048 MHz with
//! three presses of 350–400 µs units, the survey found the carrier from Eu/N0 = 13 dB (not
//! at 11 dB: the peak-hold of a long stretch of noise rises), and there each press opened a
//! span of its own.
//!
//! ```
//! use ooksift::front::activity::ActivityLog;
//!
//! // 64-bin spectra, 1 kHz bins: quiet frames, then 40 frames with a carrier in bin 10.
//! let mut log = ActivityLog::new(64, 1000.0, 64_000.0);
//! for f in 0..400u64 {
//!     let mut power = vec![1.0f32; 64];
//!     power[(f * 7 % 64) as usize] = 1.5; // some wobble
//!     if (200..240).contains(&f) {
//!         power[10] += 40.0;
//!     }
//!     log.push(&power, f * 64, 64);
//! }
//! let busy = log.finish().spans_between(5_000.0, 15_000.0).expect("spans kept");
//! assert_eq!(busy.len(), 1);
//! let (start, end) = busy[0];
//! assert!(start <= 200 * 64 && end >= 240 * 64 && end < 300 * 64);
//! ```

/// Bins per band; bands start every `BAND_BINS / 2` bins, so a carrier narrower than half a
/// band always lies wholly inside one band.
pub const BAND_BINS: usize = 16;
/// Analysed frames per band sum.
pub const WINDOW_FRAMES: usize = 32;
/// The threshold, in standard deviations of a quiet band's sum above its mean.
pub const THRESHOLD_SIGMAS: f64 = 6.0;
/// Spans kept in all before the log gives up (the decoder then reads the whole capture).
pub const MAX_SPANS: usize = 1 << 14;

/// Weight of one quiet frame in the running mean and variance of a band's frame power (256
/// frames: the variance is then known to about 9 %; estimated from overlapping window sums
/// instead, it rested on two independent windows per time constant and the threshold
/// wandered low often enough to open false spans).
const QUIET_ALPHA: f64 = 1.0 / 256.0;
/// Relative deviation of one frame's band power assumed until it is learnt.
const INITIAL_REL_SIGMA: f64 = 0.35;
/// The standard deviation is never taken below this fraction of the mean (digital silence).
const MIN_REL_SIGMA: f64 = 0.03;
/// A frame updates the quiet statistics only while its window's sum stays below mean + this
/// many deviations.
const QUIET_SIGMAS: f64 = 3.0;

/// The streaming log, fed one power spectrum (natural FFT order, bin 0 = DC) per analysed
/// survey frame. Memory: `WINDOW_FRAMES` spectra's band powers and the spans.
#[derive(Debug, Clone)]
pub struct ActivityLog {
    fft_len: usize,
    bin_hz: f64,
    rate_hz: f64,
    bands: usize,
    /// Band powers of the last `WINDOW_FRAMES` frames, frame-major.
    ring: Vec<f64>,
    /// Start sample of the frame in each ring slot.
    ring_start: Vec<u64>,
    slot: usize,
    frames: u64,
    sums: Vec<f64>,
    /// Power of each half band (`BAND_BINS / 2` bins) of the current frame.
    halves: Vec<f64>,
    /// Per band: running mean and variance of one quiet frame's power.
    mean: Vec<f64>,
    var: Vec<f64>,
    /// Per band: the open span's start, if the band is active.
    open: Vec<Option<u64>>,
    spans: Vec<Vec<(u64, u64)>>,
    total_spans: usize,
    overflowed: bool,
    samples: u64,
}

impl ActivityLog {
    /// A log for spectra of `fft_len` bins of `bin_hz` each, from a capture at `rate_hz`.
    pub fn new(fft_len: usize, bin_hz: f64, rate_hz: f64) -> ActivityLog {
        let bands = (fft_len / (BAND_BINS / 2)).max(1);
        ActivityLog {
            fft_len,
            bin_hz,
            rate_hz,
            bands,
            ring: vec![0.0; bands * WINDOW_FRAMES],
            ring_start: vec![0; WINDOW_FRAMES],
            slot: 0,
            frames: 0,
            sums: vec![0.0; bands],
            halves: Vec::with_capacity(bands),
            mean: vec![0.0; bands],
            var: vec![0.0; bands],
            open: vec![None; bands],
            spans: vec![Vec::new(); bands],
            total_spans: 0,
            overflowed: false,
            samples: 0,
        }
    }

    /// One analysed frame: its power per bin, its first sample and its length.
    pub fn push(&mut self, power: &[f32], start: u64, len: u64) {
        let n = self.fft_len;
        if power.len() != n || n < BAND_BINS {
            return;
        }
        self.samples = self.samples.max(start + len);
        let hop = BAND_BINS / 2;
        let row = self.slot * self.bands;
        // Half-band sums first (each bin once, in f32 lanes), then each band as two halves.
        self.halves.clear();
        self.halves.extend(power.chunks_exact(hop).map(|c| {
            let v: f32 = c.iter().sum();
            if v.is_finite() {
                v as f64
            } else {
                0.0
            }
        }));
        let halves = &self.halves;
        let nh = halves.len();
        for (b, (slot, sum)) in self.ring[row..row + self.bands]
            .iter_mut()
            .zip(self.sums.iter_mut())
            .enumerate()
        {
            let e = halves[b] + halves[if b + 1 == nh { 0 } else { b + 1 }];
            *sum += e - *slot;
            *slot = e;
        }
        self.ring_start[self.slot] = start;
        self.slot = (self.slot + 1) % WINDOW_FRAMES;
        if self.slot == 0 {
            // Sums afresh once per window, so a huge frame leaves no rounding behind.
            self.sums.iter_mut().for_each(|v| *v = 0.0);
            for row in self.ring.chunks_exact(self.bands) {
                for (s, &e) in self.sums.iter_mut().zip(row) {
                    *s += e;
                }
            }
        }
        self.frames += 1;
        let full = self.frames >= WINDOW_FRAMES as u64;
        if !full {
            return;
        }
        // The oldest frame in the window starts where the next slot's frame started.
        let window_start = self.ring_start[self.slot];
        let window_end = start + len;
        let w = WINDOW_FRAMES as f64;
        for b in 0..self.bands {
            let s = self.sums[b].max(0.0);
            // This frame's power in the band (frames do not overlap, so their powers are
            // independent samples, unlike consecutive window sums).
            let e = self.ring[row + b];
            if self.frames == WINDOW_FRAMES as u64 {
                self.mean[b] = s / w;
                self.var[b] = (INITIAL_REL_SIGMA * s / w).powi(2);
            }
            // The window sum of a quiet band: mean W·μ, variance W·σ² (μ, σ² of one frame).
            // Compared in squares (no square root per band and frame): d > k·σ ⇔ d > 0 and
            // d² > k²·σ².
            let mean = w * self.mean[b];
            let var = (w * self.var[b]).max((MIN_REL_SIGMA * mean).powi(2));
            let d = s - mean;
            let active = d > 0.0 && d * d > THRESHOLD_SIGMAS * THRESHOLD_SIGMAS * var;
            if d < 0.0 || d * d < QUIET_SIGMAS * QUIET_SIGMAS * var {
                let de = e - self.mean[b];
                self.mean[b] += QUIET_ALPHA * de;
                self.var[b] += QUIET_ALPHA * (de * de - self.var[b]);
            } else {
                // Slow rise, so a floor that stepped up is learnt again in time.
                self.mean[b] *= 1.0 + QUIET_ALPHA / 16.0;
            }
            match (active, self.open[b]) {
                (true, None) => self.open[b] = Some(window_start),
                (false, Some(from)) => {
                    self.open[b] = None;
                    self.close(b, from, window_end);
                }
                _ => {}
            }
        }
    }

    fn close(&mut self, band: usize, from: u64, to: u64) {
        if self.overflowed {
            return;
        }
        let spans = &mut self.spans[band];
        if let Some(last) = spans.last_mut() {
            if from <= last.1 {
                last.1 = last.1.max(to);
                return;
            }
        }
        if self.total_spans >= MAX_SPANS {
            self.overflowed = true;
            return;
        }
        spans.push((from, to));
        self.total_spans += 1;
    }

    /// The spans, with every open one closed at the end of the capture.
    pub fn finish(&self) -> Activity {
        let mut log = self.clone();
        let end = log.samples;
        for b in 0..log.bands {
            if let Some(from) = log.open[b].take() {
                log.close(b, from, end);
            }
        }
        Activity {
            fft_len: log.fft_len,
            bin_hz: log.bin_hz,
            rate_hz: log.rate_hz,
            samples: end,
            spans: if log.overflowed {
                None
            } else {
                Some(log.spans)
            },
        }
    }
}

/// The finished map: per band, the spans `[start, end)` (capture samples) it was active.
#[derive(Debug, Clone, PartialEq)]
pub struct Activity {
    fft_len: usize,
    bin_hz: f64,
    rate_hz: f64,
    /// Samples the survey saw.
    pub samples: u64,
    /// None when the log overflowed [`MAX_SPANS`].
    spans: Option<Vec<Vec<(u64, u64)>>>,
}

impl Activity {
    /// Busy spans, merged and sorted, of every band that overlaps `lo_hz..=hi_hz` (offsets
    /// from the centre frequency); None when the log gave up (treat everything as busy).
    pub fn spans_between(&self, lo_hz: f64, hi_hz: f64) -> Option<Vec<(u64, u64)>> {
        let spans = self.spans.as_ref()?;
        let n = self.fft_len as i64;
        if !(lo_hz.is_finite() && hi_hz.is_finite()) || n < BAND_BINS as i64 {
            return None;
        }
        let hop = (BAND_BINS / 2) as i64;
        let lo = (lo_hz / self.bin_hz).floor() as i64;
        let hi = (hi_hz / self.bin_hz).ceil() as i64;
        if hi - lo >= n {
            return None;
        }
        let mut all: Vec<(u64, u64)> = Vec::new();
        for (b, band) in spans.iter().enumerate() {
            // Band b covers bins b·hop .. b·hop + BAND_BINS − 1 (mod n); does it meet lo..=hi?
            let first = b as i64 * hop;
            let meets = (-1..=1).any(|wrap| {
                let (s, e) = (first + wrap * n, first + wrap * n + BAND_BINS as i64 - 1);
                s <= hi && e >= lo
            });
            if meets {
                all.extend_from_slice(band);
            }
        }
        Some(merge(all, 0))
    }

    /// Sample rate of the capture.
    pub fn rate_hz(&self) -> f64 {
        self.rate_hz
    }
}

/// Sorts spans and joins those closer than `gap` samples.
pub fn merge(mut spans: Vec<(u64, u64)>, gap: u64) -> Vec<(u64, u64)> {
    spans.sort_unstable();
    let mut out: Vec<(u64, u64)> = Vec::with_capacity(spans.len());
    for (s, e) in spans {
        match out.last_mut() {
            Some(last) if s <= last.1.saturating_add(gap) => last.1 = last.1.max(e),
            _ => out.push((s, e)),
        }
    }
    out
}

/// Spans widened by `before` and `after` samples, joined when closer than `gap`, clipped to
/// `0..end`.
pub fn widen(spans: &[(u64, u64)], before: u64, after: u64, gap: u64, end: u64) -> Vec<(u64, u64)> {
    let wide = spans
        .iter()
        .map(|&(s, e)| (s.saturating_sub(before), e.saturating_add(after).min(end)))
        .filter(|(s, e)| s < e)
        .collect();
    merge(wide, gap)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rng::Rng;

    /// Exponential bin powers (complex Gaussian noise) of mean 1, plus `extra` in `bins`.
    fn frame(rng: &mut Rng, n: usize, extra: f32, bins: std::ops::Range<usize>) -> Vec<f32> {
        (0..n)
            .map(|k| {
                let (a, b) = (rng.gauss(), rng.gauss());
                let p = ((a * a + b * b) / 2.0) as f32;
                if bins.contains(&k) {
                    p + extra
                } else {
                    p
                }
            })
            .collect()
    }

    #[test]
    fn noise_alone_stays_quiet_and_a_weak_burst_is_seen_in_its_bands_only() {
        let n = 256;
        let mut rng = Rng::new(11);
        let mut log = ActivityLog::new(n, 1000.0, 256_000.0);
        // 3000 frames of noise, a burst of 60 frames in bins 40..48 at the noise's power per
        // bin (half the noise of a 16-bin band: −3 dB in the band, above the threshold of
        // ≈ 6 × 4.4 % once summed over 32 frames), then noise again.
        for f in 0..6000u64 {
            let extra = if (3000..3060).contains(&f) { 1.0 } else { 0.0 };
            let p = frame(&mut rng, n, extra, 40..48);
            log.push(&p, f * n as u64, n as u64);
        }
        let act = log.finish();
        let busy = act.spans_between(40e3, 48e3).expect("spans kept");
        assert_eq!(busy.len(), 1, "{busy:?}");
        let (s, e) = busy[0];
        let (b0, b1) = (3000 * n as u64, 3060 * n as u64);
        assert!(s <= b0 && e >= b1, "{busy:?} vs {b0}..{b1}");
        assert!(e - s < 3 * (b1 - b0), "{busy:?}");
        // Far away from the burst: quiet all along.
        assert_eq!(
            act.spans_between(-100e3, -80e3).expect("spans kept"),
            vec![]
        );
        assert_eq!(act.spans_between(100e3, 120e3).expect("spans kept"), vec![]);
    }

    #[test]
    fn long_noise_opens_no_span_anywhere() {
        // 20 000 frames (80 s of a 2.048 MHz capture at one frame in four) of noise in 64
        // bands: no span. (Independent exponential bins are kind; on the 600 s benchmark
        // capture the earlier estimator, from overlapping window sums, opened 3 false spans
        // and this one none — docs/benchmarks.md.)
        let n = 256;
        let mut rng = Rng::new(23);
        let mut log = ActivityLog::new(n, 1000.0, 256_000.0);
        for f in 0..20_000u64 {
            let p = frame(&mut rng, n, 0.0, 0..0);
            log.push(&p, f * n as u64, n as u64);
        }
        let act = log.finish();
        for (lo, hi) in [(-128e3, -1e3), (0.0, 127e3)] {
            assert_eq!(act.spans_between(lo, hi).expect("spans kept"), vec![]);
        }
    }

    #[test]
    fn a_floor_that_steps_up_keeps_the_band_busy_rather_than_deaf() {
        let n = 64;
        let mut rng = Rng::new(5);
        let mut log = ActivityLog::new(n, 1000.0, 64_000.0);
        for f in 0..4000u64 {
            let mut p = frame(&mut rng, n, 0.0, 0..0);
            if f >= 1000 {
                p.iter_mut().for_each(|v| *v *= 4.0);
            }
            log.push(&p, f * n as u64, n as u64);
        }
        let busy = log.finish().spans_between(0.0, 10e3).expect("spans kept");
        // Busy from the step on for a while (then the slow rise learns the new floor).
        assert!(
            busy.iter().any(|&(s, e)| s <= 1000 * 64 && e > 1100 * 64),
            "{busy:?}"
        );
    }

    #[test]
    fn too_many_spans_give_up_and_say_so() {
        let n = 16;
        let mut log = ActivityLog::new(n, 1000.0, 16_000.0);
        // Alternate quiet and loud stretches, each longer than the window, more times than
        // the log keeps spans.
        let mut f = 0u64;
        for k in 0..(2 * MAX_SPANS as u64 + 10) {
            for _ in 0..80 {
                let v = if k % 2 == 0 {
                    1.0 + (f % 5) as f32 * 0.01
                } else {
                    1000.0
                };
                log.push(&vec![v; n], f * 16, 16);
                f += 1;
            }
        }
        assert_eq!(log.finish().spans_between(0.0, 1000.0), None);
    }

    #[test]
    fn merge_and_widen() {
        assert_eq!(merge(vec![(5, 7), (1, 3), (3, 4)], 0), vec![(1, 4), (5, 7)]);
        assert_eq!(merge(vec![(5, 7), (1, 3)], 2), vec![(1, 7)]);
        assert_eq!(widen(&[(10, 20), (40, 50)], 5, 5, 10, 52), vec![(5, 52)]);
        assert_eq!(
            widen(&[(10, 20), (40, 50)], 5, 5, 0, 100),
            vec![(5, 25), (35, 55)]
        );
        assert_eq!(widen(&[(2, 4)], 5, 5, 0, 3), vec![(0, 3)]);
    }
}
