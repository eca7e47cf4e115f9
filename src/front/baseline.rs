//! Baseline restoration of recorded envelopes (WAV or raw real captures): polarity and
//! AC coupling.
//!
//! A sound card records a receiver's envelope through a coupling capacitor — a single-pole
//! high-pass of some time constant τ, so long marks droop and the idle undershoots after them —
//! and may record it upside down. [`Restorer`] undoes both, window by window:
//!
//! 1. **AC coupling.** The high-pass `y[n] = α·(y[n-1] + x[n] - x[n-1])`, `α = τ/(τ + dt)`, has
//!    the exact inverse `x[n] = x[n-1] + y[n]/α - y[n-1]`. τ is unknown, so each candidate
//!    (none, and 0.3 ms to 3 s in steps of 20 %) restores the window and the one whose result
//!    is most nearly two flat levels wins: the smallest within-class variance of a two-class
//!    (Otsu) split. A wrong τ leaves droop or adds a ramp, and a τ far too short integrates the
//!    noise into a random walk, so both directions lose. A finite τ must beat "none" by 20 %
//!    of the within-class variance, so DC-coupled captures pass through untouched.
//! 2. **Polarity.** The idle level is where the signal spends most of its time, and marks are
//!    the rarer excursions from it: of the two Otsu classes of the restored window, the one
//!    with fewer samples holds the marks. Marks above the idle class: normal polarity; below:
//!    inverted.
//!
//! Both are judged on a 60 µs moving average of the window. A window decides only when the two
//! classes' means lie at least [`DECISIVE_SEPARATION`] within-class standard deviations apart
//! and the mark class holds at most 45 % of the samples (Gaussian noise split in two gives
//! about 2.7 deviations and halves of about equal size).
//! The first decisive window fixes τ and polarity for the rest of the capture; windows before it
//! pass through unchanged. Each window is analysed before it is released, so the first press is
//! restored with its own estimate; the price is one window of latency ([`WINDOW_S`]).
//!
//! ```
//! use ooksift::front::baseline::Restorer;
//! let rate = 48_000.0;
//! // An inverted envelope: idle at -0.05, marks of 2 ms at -0.55 every 10 ms.
//! let x: Vec<f32> = (0..48_000)
//!     .map(|n| if n % 480 < 96 { -0.55 } else { -0.05 })
//!     .collect();
//! let mut r = Restorer::new(rate);
//! let mut out = Vec::new();
//! r.push(&x, &mut out);
//! r.flush(&mut out);
//! assert_eq!(out.len(), x.len());
//! assert_eq!(r.setting().map(|s| s.inverted), Some(true));
//! assert!(out[10] > out[200]); // marks now go up
//! ```

/// Seconds of envelope analysed (and held back) at a time.
pub const WINDOW_S: f64 = 0.5;
/// Separation of the two classes' means, in within-class standard deviations, a window needs
/// to decide polarity and coupling (Gaussian noise split in two gives about 2.7).
pub const DECISIVE_SEPARATION: f64 = 4.0;

/// What a decisive window found.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Setting {
    /// The envelope was recorded upside down.
    pub inverted: bool,
    /// Time constant of the AC coupling undone, seconds (`None`: DC-coupled).
    pub tau_s: Option<f64>,
}

/// Streaming polarity and AC-coupling restorer (see the module docs).
#[derive(Debug, Clone)]
pub struct Restorer {
    rate_hz: f64,
    window: usize,
    pending: Vec<f32>,
    setting: Option<Setting>,
    /// Last input and last restored output (the inverse filter's state).
    state: Option<(f64, f64)>,
    scratch: Vec<f32>,
}

/// Samples in one analysis window at most (0.5 s at 2 MHz).
pub const MAX_WINDOW: usize = 1 << 20;

impl Restorer {
    /// A restorer for an envelope sampled at `rate_hz`.
    pub fn new(rate_hz: f64) -> Restorer {
        // Bounded: an absurd rate in a header must not become an absurd allocation.
        let window = ((rate_hz * WINDOW_S) as usize).clamp(4096, MAX_WINDOW);
        Restorer {
            rate_hz,
            window,
            pending: Vec::with_capacity(window),
            setting: None,
            state: None,
            scratch: Vec::new(),
        }
    }

    /// The envelope rate it was made for.
    pub fn rate_hz(&self) -> f64 {
        self.rate_hz
    }

    /// The setting fixed by the first decisive window, if one came yet.
    pub fn setting(&self) -> Option<Setting> {
        self.setting
    }

    /// Feeds samples; restored samples of every completed window are appended to `out`.
    pub fn push(&mut self, x: &[f32], out: &mut Vec<f32>) {
        let mut rest = x;
        while !rest.is_empty() {
            let take = (self.window - self.pending.len()).min(rest.len());
            self.pending.extend_from_slice(&rest[..take]);
            rest = &rest[take..];
            if self.pending.len() == self.window {
                self.release(out);
            }
        }
    }

    /// Releases the samples still held (end of the capture).
    pub fn flush(&mut self, out: &mut Vec<f32>) {
        if !self.pending.is_empty() {
            self.release(out);
        }
    }

    fn alpha(&self, tau_s: f64) -> f64 {
        tau_s / (tau_s + 1.0 / self.rate_hz)
    }

    /// Inverse high-pass of `y` from `state` with coefficient `alpha` (`None`: identity).
    fn restore(state: Option<(f64, f64)>, y: &[f32], alpha: Option<f64>, out: &mut Vec<f32>) {
        out.clear();
        let (mut yp, mut xp) = state.unwrap_or((
            y.first().copied().unwrap_or(0.0) as f64,
            y.first().copied().unwrap_or(0.0) as f64,
        ));
        for &v in y {
            let v = v as f64;
            let x = match alpha {
                Some(a) => xp + v / a - yp,
                None => v,
            };
            out.push(x as f32);
            yp = v;
            xp = x;
        }
    }

    fn release(&mut self, out: &mut Vec<f32>) {
        let y = std::mem::take(&mut self.pending);
        if self.setting.is_none() {
            self.setting = self.analyse(&y);
        }
        let (alpha, sign) = match self.setting {
            Some(s) => (
                s.tau_s.map(|t| self.alpha(t)),
                if s.inverted { -1.0 } else { 1.0 },
            ),
            None => (None, 1.0),
        };
        let mut restored = std::mem::take(&mut self.scratch);
        Restorer::restore(self.state, &y, alpha, &mut restored);
        if let (Some(&yl), Some(&xl)) = (y.last(), restored.last()) {
            self.state = Some((yl as f64, xl as f64));
        }
        out.extend(restored.iter().map(|&v| sign * v));
        self.scratch = restored;
        self.pending = y;
        self.pending.clear();
    }

    /// Finds τ and polarity from one window, or `None` when the window is not decisive.
    fn analyse(&mut self, y: &[f32]) -> Option<Setting> {
        if y.len() < 64 {
            return None;
        }
        // The split is judged on a 60 µs moving average (the decoder's own smoothing), so
        // per-sample noise does not hide the two levels.
        let k = ((self.rate_hz * 60e-6).round() as usize).max(1);
        let mut taus = Vec::new();
        let mut tau = 0.3e-3;
        while tau <= 3.0 {
            taus.push(tau);
            tau *= 1.2;
        }
        // Every candidate restored and split: "none" first, then each τ in turn. Candidates
        // run GROUP at a time through one pass over the window (independent recursions the
        // CPU overlaps); each gets the same arithmetic as on its own.
        let alphas: Vec<Option<f64>> = std::iter::once(None)
            .chain(taus.iter().map(|&t| Some(self.alpha(t))))
            .collect();
        let mut bufs: [Vec<f32>; GROUP] = Default::default();
        let mut ring = Vec::new();
        let mut splits: Vec<Option<Split>> = Vec::with_capacity(alphas.len());
        for chunk in alphas.chunks(GROUP) {
            let mut group = [None; GROUP];
            group[..chunk.len()].copy_from_slice(chunk);
            let ranges = restore_smoothed(self.state, y, group, k, &mut ring, &mut bufs);
            splits.extend(
                bufs.iter()
                    .zip(ranges)
                    .take(chunk.len())
                    .map(|(b, range)| split(b, range)),
            );
        }
        let none = splits.first().copied().flatten()?;
        let mut best: (Split, Option<f64>) = (none, None);
        for (&tau, sp) in taus.iter().zip(splits.iter().skip(1)) {
            if let Some(sp) = sp {
                if sp.within < best.0.within {
                    best = (*sp, Some(tau));
                }
            }
        }
        let (sp, tau_s) = if best.0.within < 0.8 * none.within {
            best
        } else {
            (none, None)
        };
        if std::env::var_os("OOKSIFT_DEBUG").is_some() {
            eprintln!("restorer: {sp:?} tau {tau_s:?} (none: {none:?})");
        }
        let d = (sp.high_mean - sp.low_mean) / sp.within.max(1e-30).sqrt();
        let minority =
            sp.low_count.min(sp.high_count) as f64 / (sp.low_count + sp.high_count) as f64;
        (d >= DECISIVE_SEPARATION && minority <= 0.45).then_some(Setting {
            // Marks are the minority class.
            inverted: sp.low_count < sp.high_count,
            tau_s,
        })
    }
}

/// Candidates restored together in one pass by [`restore_smoothed`].
const GROUP: usize = 4;

/// For each of `GROUP` coefficients, [`Restorer::restore`] from `state` followed by a
/// trailing moving average of `k` samples, into `outs` (the same arithmetic, in the same
/// order, as the two passes one after the other for each candidate alone). `ring` is scratch
/// space for the averages. Returns each output's range, the least and greatest of its finite
/// values, taken in the same pass (`(∞, −∞)` when there are none).
fn restore_smoothed(
    state: Option<(f64, f64)>,
    y: &[f32],
    alphas: [Option<f64>; GROUP],
    k: usize,
    ring: &mut Vec<f32>,
    outs: &mut [Vec<f32>; GROUP],
) -> [(f32, f32); GROUP] {
    // An average longer than the block never wraps, so a longer `k` (an absurd rate in a
    // header makes one of 10⁸) computes the same with a block-long ring.
    let k = k.clamp(1, y.len().max(1));
    for o in outs.iter_mut() {
        o.clear();
        o.reserve(y.len());
    }
    ring.clear();
    ring.resize(k * GROUP, 0.0);
    let first = y.first().copied().unwrap_or(0.0) as f64;
    let (mut yp, xp0) = state.unwrap_or((first, first));
    let mut xp = [xp0; GROUP];
    let mut acc = [0f64; GROUP];
    let mut ranges = [(f32::INFINITY, f32::NEG_INFINITY); GROUP];
    // Lanes without a coefficient compute with 1 and take the input instead.
    let a4 = alphas.map(|a| a.unwrap_or(1.0));
    let pos_cut = k * GROUP;
    let mut pos = 0usize;
    for (i, &v) in y.iter().enumerate() {
        let v = v as f64;
        let n = (i + 1).min(k) as f64;
        let mut xf = [0f32; GROUP];
        for g in 0..GROUP {
            let x = if alphas[g].is_some() {
                xp[g] + v / a4[g] - yp
            } else {
                v
            };
            xp[g] = x;
            xf[g] = x as f32;
        }
        yp = v;
        let mut q = xf;
        if k > 1 {
            let mut old = [0f32; GROUP];
            if let Some(slots) = ring.get_mut(pos..pos + GROUP) {
                old.copy_from_slice(slots);
                slots.copy_from_slice(&xf);
            }
            for g in 0..GROUP {
                acc[g] += xf[g] as f64 - old[g] as f64;
                q[g] = (acc[g] / n) as f32;
            }
        }
        for ((o, &val), (lo, hi)) in outs.iter_mut().zip(&q).zip(ranges.iter_mut()) {
            o.push(val);
            if val.is_finite() {
                *lo = if val < *lo { val } else { *lo };
                *hi = if val > *hi { val } else { *hi };
            }
        }
        pos += GROUP;
        if pos == pos_cut {
            pos = 0;
        }
    }
    ranges
}

/// The best two-class split of a window (Otsu's method on a 256-bin histogram).
#[derive(Debug, Clone, Copy)]
struct Split {
    /// Within-class variance.
    within: f64,
    low_count: u64,
    high_count: u64,
    low_mean: f64,
    high_mean: f64,
}

/// `range` is the least and greatest finite values of `v`.
fn split(v: &[f32], (lo, hi): (f32, f32)) -> Option<Split> {
    if hi.partial_cmp(&lo) != Some(std::cmp::Ordering::Greater) {
        return None;
    }
    const BINS: usize = 256;
    let scale = BINS as f64 / (hi - lo) as f64;
    // Four histograms taken in turn, then added: smoothed neighbours mostly fall in one bin,
    // and a single histogram would wait on its own last increment every sample.
    let mut part = [[0u64; BINS]; 4];
    for quad in v.chunks(4) {
        for (h, &x) in part.iter_mut().zip(quad) {
            if x.is_finite() {
                let b = (((x - lo) as f64) * scale) as usize;
                if let Some(c) = h.get_mut(b.min(BINS - 1)) {
                    *c += 1;
                }
            }
        }
    }
    let mut hist = [0u64; BINS];
    for (b, c) in hist.iter_mut().enumerate() {
        *c = part.iter().map(|h| h[b]).sum();
    }
    let centre = |b: usize| lo as f64 + (b as f64 + 0.5) / scale;
    let n: u64 = hist.iter().sum();
    let nf = n as f64;
    let (mut s1, mut s2) = (0.0f64, 0.0f64);
    for (b, &c) in hist.iter().enumerate() {
        s1 += c as f64 * centre(b);
        s2 += c as f64 * centre(b) * centre(b);
    }
    let mean = s1 / nf;
    let total = s2 / nf - mean * mean;
    let (mut w0, mut a0) = (0u64, 0.0f64);
    let mut best: Option<Split> = None;
    for (b, &c) in hist.iter().enumerate().take(BINS - 1) {
        w0 += c;
        a0 += c as f64 * centre(b);
        let w1 = n - w0;
        if w0 == 0 || w1 == 0 {
            continue;
        }
        let m0 = a0 / w0 as f64;
        let m1 = (s1 - a0) / w1 as f64;
        let between = w0 as f64 * w1 as f64 / (nf * nf) * (m0 - m1).powi(2);
        let within = (total - between).max(0.0);
        if best.is_none_or(|s| within < s.within) {
            best = Some(Split {
                within,
                low_count: w0,
                high_count: w1,
                low_mean: m0,
                high_mean: m1,
            });
        }
    }
    best
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rng::Rng;

    /// The least and greatest finite values of `v` (`(∞, −∞)` when there are none), in a
    /// pass of its own.
    fn finite_range(v: &[f32]) -> (f32, f32) {
        v.iter()
            .filter(|x| x.is_finite())
            .fold((f32::INFINITY, f32::NEG_INFINITY), |(lo, hi), &x| {
                (if x < lo { x } else { lo }, if x > hi { x } else { hi })
            })
    }

    /// Marks of 1 ms every 7 ms (0.6 level over 0.05 idle), optionally AC-coupled and inverted.
    fn signal(rate: f64, secs: f64, tau_s: Option<f64>, invert: bool, noise: f64) -> Vec<f32> {
        let mut rng = Rng::new(3);
        let n = (rate * secs) as usize;
        let dt = 1.0 / rate;
        let mut hp = (0.05f64, 0.0f64);
        (0..n)
            .map(|i| {
                let t = i as f64 * dt;
                let on = t > 0.05 && (t * 1e3) % 7.0 < 1.0;
                let mut x = if on { 0.6 } else { 0.05 } + noise * rng.gauss();
                if invert {
                    x = -x;
                }
                if let Some(tau) = tau_s {
                    let a = tau / (tau + dt);
                    let o = a * (hp.1 + x - hp.0);
                    hp = (x, o);
                    x = o;
                }
                x as f32
            })
            .collect()
    }

    fn run(x: &[f32], rate: f64) -> (Vec<f32>, Option<Setting>) {
        let mut r = Restorer::new(rate);
        let mut out = Vec::new();
        for c in x.chunks(1000) {
            r.push(c, &mut out);
        }
        r.flush(&mut out);
        (out, r.setting())
    }

    /// The grouped one-pass restore + average gives, bit for bit, what the two passes give
    /// one after the other for each candidate alone (the plain definition written out here).
    #[test]
    fn grouped_restore_matches_two_passes() {
        let rate = 48_000.0;
        let y = signal(rate, 0.3, Some(2e-3), true, 0.02);
        let r = Restorer::new(rate);
        let state = Some((0.01, -0.02));
        for k in [1usize, 3, 7] {
            let alphas = [
                None,
                Some(r.alpha(0.4e-3)),
                Some(r.alpha(0.05)),
                Some(r.alpha(2.5)),
            ];
            let mut ring = Vec::new();
            let mut outs: [Vec<f32>; GROUP] = Default::default();
            let ranges = restore_smoothed(state, &y, alphas, k, &mut ring, &mut outs);
            for (g, alpha) in alphas.into_iter().enumerate() {
                assert_eq!(
                    ranges[g],
                    finite_range(&outs[g]),
                    "candidate {g}, k {k}: range"
                );
                let mut want = Vec::new();
                Restorer::restore(state, &y, alpha, &mut want);
                if k > 1 {
                    let mut acc = 0.0f64;
                    let mut win = vec![0.0f32; k];
                    for (i, x) in want.iter_mut().enumerate() {
                        let old = std::mem::replace(&mut win[i % k], *x);
                        acc += *x as f64 - old as f64;
                        *x = (acc / (i + 1).min(k) as f64) as f32;
                    }
                }
                assert_eq!(outs[g].len(), y.len());
                let same = outs[g]
                    .iter()
                    .zip(&want)
                    .all(|(a, b)| a.to_bits() == b.to_bits());
                assert!(same, "candidate {g}, k {k}: grouped pass differs");
            }
        }
    }

    /// An absurd header rate (10¹² Hz: a 60 µs average of 6·10⁷ samples) once made a 960 MB
    /// ring for a 131-byte capture (fuzz input kept in tests/fuzz-crashes/decode_chain). An
    /// average longer than the block gives the same output from a block-long ring.
    #[test]
    fn averages_longer_than_the_block_stay_block_sized() {
        let y = signal(48e3, 0.05, Some(2e-3), true, 0.02);
        let r = Restorer::new(48e3);
        let alphas = [None, Some(r.alpha(0.4e-3)), Some(r.alpha(0.05)), None];
        let run_k = |k: usize| {
            let mut ring = Vec::new();
            let mut outs: [Vec<f32>; GROUP] = Default::default();
            restore_smoothed(None, &y, alphas, k, &mut ring, &mut outs);
            (ring.len(), outs)
        };
        let (ring_len, huge) = run_k(60_000_000);
        assert!(ring_len <= GROUP * y.len(), "ring of {ring_len}");
        let (_, just_longer) = run_k(y.len() + 5);
        for g in 0..GROUP {
            assert_eq!(huge[g].len(), y.len());
            let same = huge[g]
                .iter()
                .zip(&just_longer[g])
                .all(|(a, b)| a.to_bits() == b.to_bits());
            assert!(same, "candidate {g} differs");
        }
    }

    #[test]
    fn dc_coupled_normal_envelopes_pass_through() {
        let x = signal(48e3, 1.2, None, false, 0.02);
        let (out, s) = run(&x, 48e3);
        assert_eq!(
            s,
            Some(Setting {
                inverted: false,
                tau_s: None
            })
        );
        assert_eq!(out, x);
    }

    #[test]
    fn ac_coupling_is_undone_and_polarity_found() {
        let x = signal(48e3, 1.2, Some(3e-3), true, 0.01);
        let (out, s) = run(&x, 48e3);
        let s = s.expect("decisive");
        assert!(s.inverted);
        let tau = s.tau_s.expect("AC coupling found");
        assert!((tau / 3e-3 - 1.0).abs() < 0.25, "tau {tau}");
        // Restored marks are flat: early and late samples of one mark agree within 10 %.
        let rate = 48e3;
        let k = |t_ms: f64| out[(t_ms * 1e-3 * rate) as usize] as f64;
        let idle = k(354.0);
        let early = k(350.05) - idle;
        let late = k(350.95) - idle;
        assert!(
            early > 0.4 && (late / early - 1.0).abs() < 0.1,
            "{early} {late}"
        );
    }

    #[test]
    fn pure_noise_decides_nothing() {
        let mut rng = Rng::new(5);
        let x: Vec<f32> = (0..200_000).map(|_| 0.1 * rng.gauss() as f32).collect();
        let (out, s) = run(&x, 48e3);
        assert_eq!(s, None);
        assert_eq!(out, x);
    }
}
