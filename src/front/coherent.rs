//! Coherent re-detection of one burst: a narrower look at a weak burst once its timing is known.
//!
//! A carrier's channel ([`super::channel`]) has to be designed before any burst is read, so it
//! is several times wider than one unit of the code needs (it leaves room for the shortest
//! marks and for a few kilohertz of drift), and its envelope sums magnitudes of samples whose
//! noise was never averaged out: the loss of detecting before integrating (post-detection
//! integration) grows as the per-sample signal-to-noise ratio falls. Once a burst's unit is
//! known, the same channel samples can be integrated *before* taking the magnitude: a boxcar
//! of `len` samples (about a unit) is the matched filter of a rectangular mark, and its noise
//! bandwidth is `rate / len`.
//!
//! Coherent integration needs the carrier at zero frequency; the channel's carrier is
//! anywhere in its passband, and may drift. So the burst is cut into segments, and each
//! segment is integrated at the candidate offset (a grid a quarter of the boxcar's main lobe
//! apart, across the channel's passband) whose output holds the most energy — a per-segment
//! peak search of the boxcar's spectrum, the maximum-likelihood estimate of a tone's frequency
//! on that grid. A quarter-lobe grid loses at most sinc(1/8) ≈ 0.975 of the amplitude.
//!
//! [`centred_carrier`] goes one step further for the trellis's whole-mark scores: it returns
//! the samples themselves with the carrier turned to zero frequency (a finer offset per
//! segment, pooled with its neighbours, phase continuous), so a mark of any length can be
//! summed coherently as a whole.
//!
//! ```
//! use num_complex::Complex32;
//! use ooksift::front::coherent::coherent_envelope;
//! // 80 kHz channel, a carrier 1.5 kHz off zero keyed on for samples 100..300.
//! let rate = 80e3;
//! let iq: Vec<Complex32> = (0..400)
//!     .map(|n| {
//!         let on = (100..300).contains(&n);
//!         let ph = std::f64::consts::TAU * 1.5e3 * n as f64 / rate;
//!         if on { Complex32::from_polar(1.0, ph as f32) } else { Complex32::new(0.0, 0.0) }
//!     })
//!     .collect();
//! let env = coherent_envelope(&iq, rate, 20, 8e3, 200, 0.0);
//! assert!(env[200] > 0.95 && env[200] <= 1.0 + 1e-6); // mid-mark: the full amplitude
//! assert!(env[50] < 1e-6 && env[350] < 1e-6); // idle
//! ```

use num_complex::{Complex32, Complex64};

/// The magnitude of `iq` integrated coherently over `len` samples, per sample of `iq`.
///
/// Output `k` is the mean of the `len` samples centred on `k − shift` (`shift` aligns the
/// result with an envelope that lags its samples, e.g. by a moving average's delay), each
/// turned back by the best offset of its segment: offsets step `rate_hz / (4·len)` across
/// `±span_hz / 2`, and every `segment` samples keep the one whose outputs hold the most energy.
/// A carrier that stays on at amplitude `a` gives `a` at every offset within the passband.
pub fn coherent_envelope(
    iq: &[Complex32],
    rate_hz: f64,
    len: usize,
    span_hz: f64,
    segment: usize,
    shift: f64,
) -> Vec<f32> {
    let n = iq.len();
    let len = len.clamp(1, n.max(1));
    let segment = segment.max(1);
    let mut out = vec![0.0f32; n];
    if n == 0 || !(rate_hz.is_finite() && rate_hz > 0.0) {
        return out;
    }
    let step = rate_hz / (4.0 * len as f64);
    let half = if span_hz.is_finite() && span_hz > 0.0 {
        ((span_hz / 2.0 / step).ceil() as usize).min(64)
    } else {
        0
    };
    // Window of output k: samples [k − shift − (len−1)/2, … + len), clamped to the burst.
    let back = shift + (len as f64 - 1.0) / 2.0;
    let window = |k: usize| -> (usize, usize) {
        let a = (k as f64 - back).round();
        let a = a.clamp(0.0, n as f64) as usize;
        (a, (a + len).min(n))
    };
    let mut prefix: Vec<Complex64> = Vec::with_capacity(n + 1);
    let mut mags: Vec<f32> = Vec::with_capacity(segment);
    let mut best: Vec<f32> = Vec::with_capacity(segment);
    let mut s = 0;
    while s < n {
        let e = (s + segment).min(n);
        // Samples the segment's windows reach.
        let (lo, _) = window(s);
        let (_, hi) = window(e - 1);
        let (lo, hi) = (lo.min(hi), hi);
        let mut best_energy = -1.0f64;
        best.clear();
        for j in -(half as i64)..=half as i64 {
            // (The phase at `lo` is arbitrary: a window's magnitude does not depend on it.)
            rotated_prefix(iq, lo, hi, j as f64 * step, rate_hz, &mut prefix);
            mags.clear();
            let mut energy = 0.0f64;
            for k in s..e {
                let (a, b) = window(k);
                let (a, b) = (a.max(lo), b.min(hi).max(a.max(lo)));
                let m = if b > a {
                    // √(re² + im²), not `norm()`: libm's hypot guards against overflow
                    // these sums of channel samples cannot reach, at several times the cost.
                    ((prefix[b - lo] - prefix[a - lo]).norm_sqr().sqrt() / len as f64) as f32
                } else {
                    0.0
                };
                energy += (m as f64) * (m as f64);
                mags.push(m);
            }
            if energy > best_energy {
                best_energy = energy;
                std::mem::swap(&mut best, &mut mags);
            }
        }
        out[s..e].copy_from_slice(&best);
        s = e;
    }
    out
}

/// `iq` with its carrier turned to zero frequency (offsets searched across `±span_hz / 2`, at
/// most 64 grid steps either side), for the whole-mark scores of
/// [`crate::trellis::Evidence::Coherent`]; sample `k` of the result is `iq[k − shift]` (0
/// outside `iq`), so it lines up with an envelope lagging its samples by `shift`.
///
/// Every `segment` of samples measures the energy of its boxcar sums of `2·len` samples at
/// offsets an eighth of that boxcar's main lobe apart across `±span_hz / 2`; each segment
/// then takes the peak of those energies summed over itself and [`NEIGHBOURS`] segments either
/// side (a segment of gap or of one short mark alone would pick an offset from its noise),
/// refined by the vertex of a parabola through the peak and its two neighbours. The phase
/// runs on continuously across segments, so a mark straddling two keeps its own.
pub fn centred_carrier(
    iq: &[Complex32],
    rate_hz: f64,
    len: usize,
    span_hz: f64,
    segment: usize,
    shift: f64,
) -> Vec<Complex32> {
    let n = iq.len();
    let mut out = vec![Complex32::new(0.0, 0.0); n];
    if n == 0 || !(rate_hz.is_finite() && rate_hz > 0.0) {
        return out;
    }
    let long = (2 * len.max(1)).min(n);
    let segment = segment.max(1);
    let step = rate_hz / (8.0 * long as f64);
    let half = if span_hz.is_finite() && span_hz > 0.0 {
        ((span_hz / 2.0 / step).ceil() as usize).min(64)
    } else {
        0
    };
    let offsets: Vec<f64> = (-(half as i64)..=half as i64)
        .map(|j| j as f64 * step)
        .collect();
    let lag = shift.round().max(0.0) as usize;
    let mut prefix: Vec<Complex64> = Vec::with_capacity(n + 1);
    // Energy per segment and offset.
    let starts: Vec<usize> = (0..n).step_by(segment).collect();
    let energy: Vec<Vec<f64>> = starts
        .iter()
        .map(|&s| {
            let e = (s + segment).min(n);
            let (lo, hi) = (s.saturating_sub(lag), e.saturating_sub(lag));
            let (a, b) = (lo.saturating_sub(long / 2), (hi + long / 2).min(n));
            offsets
                .iter()
                .map(|&hz| {
                    if b < a + long {
                        return 0.0;
                    }
                    rotated_prefix(iq, a, b, hz, rate_hz, &mut prefix);
                    (0..=b - a - long)
                        .map(|k| (prefix[k + long] - prefix[k]).norm_sqr())
                        .sum()
                })
                .collect()
        })
        .collect();
    let mut phase = 0.0f64;
    for (si, &s) in starts.iter().enumerate() {
        let e = (s + segment).min(n);
        let near = si.saturating_sub(NEIGHBOURS)..(si + NEIGHBOURS + 1).min(starts.len());
        let pooled: Vec<f64> = (0..offsets.len())
            .map(|j| energy[near.clone()].iter().map(|en| en[j]).sum())
            .collect();
        let (bi, &e0) = pooled
            .iter()
            .enumerate()
            .max_by(|x, y| x.1.total_cmp(y.1))
            .expect("at least one offset");
        let mut hz = offsets[bi];
        if bi > 0 && bi + 1 < pooled.len() {
            let (em, ep) = (pooled[bi - 1], pooled[bi + 1]);
            let curve = em - 2.0 * e0 + ep;
            if curve < 0.0 {
                hz += (0.5 * (em - ep) / curve).clamp(-0.5, 0.5) * step;
            }
        }
        let w = -std::f64::consts::TAU * hz / rate_hz;
        for (k, o) in out.iter_mut().enumerate().take(e).skip(s) {
            if k >= lag {
                let z = iq[k - lag];
                let v =
                    Complex64::new(z.re as f64, z.im as f64) * Complex64::from_polar(1.0, phase);
                *o = Complex32::new(v.re as f32, v.im as f32);
            }
            phase = (phase + w) % std::f64::consts::TAU;
        }
    }
    out
}

/// Segments either side whose energies [`centred_carrier`] pools with a segment's own.
pub const NEIGHBOURS: usize = 2;

/// Prefix sums of `iq[a..b]` turned by `−hz` (phase 0 at sample `a`), into `prefix`.
fn rotated_prefix(
    iq: &[Complex32],
    a: usize,
    b: usize,
    hz: f64,
    rate_hz: f64,
    prefix: &mut Vec<Complex64>,
) {
    let rot = Complex64::from_polar(1.0, -std::f64::consts::TAU * hz / rate_hz);
    let mut ph = Complex64::new(1.0, 0.0);
    prefix.clear();
    prefix.push(Complex64::new(0.0, 0.0));
    let mut acc = Complex64::new(0.0, 0.0);
    for (i, z) in iq[a..b].iter().enumerate() {
        acc += Complex64::new(z.re as f64, z.im as f64) * ph;
        prefix.push(acc);
        ph *= rot;
        if i % 1024 == 1023 {
            ph /= ph.norm();
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rng::Rng;

    fn tone(
        n: usize,
        rate: f64,
        f: impl Fn(usize) -> f64,
        on: impl Fn(usize) -> bool,
    ) -> Vec<Complex32> {
        let mut ph = 0.0f64;
        (0..n)
            .map(|k| {
                ph += std::f64::consts::TAU * f(k) / rate;
                if on(k) {
                    Complex32::from_polar(1.0, ph as f32)
                } else {
                    Complex32::new(0.0, 0.0)
                }
            })
            .collect()
    }

    #[test]
    fn a_steady_carrier_anywhere_in_the_span_keeps_its_amplitude() {
        for f in [-3.9e3, -1.2e3, 0.0, 0.7e3, 3.3e3] {
            let iq = tone(2000, 80e3, |_| f, |_| true);
            let env = coherent_envelope(&iq, 80e3, 28, 8e3, 400, 0.0);
            for (k, &v) in env.iter().enumerate().skip(20).take(1960) {
                // Worst case half a grid step off: sinc(1/8) of the amplitude.
                assert!(v > 0.97 && v < 1.0 + 1e-5, "offset {f} Hz, sample {k}: {v}");
            }
        }
    }

    #[test]
    fn a_carrier_drifting_across_the_span_is_followed_segment_by_segment() {
        // 6 kHz of drift over 16 000 samples (0.2 s at 80 kHz), far more than one offset covers.
        let iq = tone(16_000, 80e3, |k| -3e3 + 6e3 * k as f64 / 16_000.0, |_| true);
        let env = coherent_envelope(&iq, 80e3, 28, 8e3, 600, 0.0);
        let worst = env[20..15_980].iter().copied().fold(f32::MAX, f32::min);
        assert!(worst > 0.9, "worst {worst}");
        // One fixed offset would not do: the boxcar's response 3 kHz off is near its null.
        let fixed = coherent_envelope(&iq, 80e3, 28, 0.0, 600, 0.0);
        assert!(fixed[15_900] < 0.3, "fixed offset keeps {}", fixed[15_900]);
    }

    #[test]
    fn the_window_is_centred_and_shifted_as_asked() {
        let iq = tone(400, 80e3, |_| 0.0, |k| (100..200).contains(&k));
        let env = coherent_envelope(&iq, 80e3, 21, 0.0, 400, 0.0);
        // Centred: half on at the mark's edges, full inside, ramps of a window's length.
        assert!((env[100] - 11.0 / 21.0).abs() < 1e-6, "{}", env[100]);
        assert!((env[150] - 1.0).abs() < 1e-6);
        assert!(env[89] < 1e-6 && env[211] < 1e-6);
        let late = coherent_envelope(&iq, 80e3, 21, 0.0, 400, 5.0);
        assert!((late[105] - env[100]).abs() < 1e-6);
    }

    #[test]
    fn coherent_integration_lowers_the_noise_of_an_idle_channel() {
        // Complex white noise of unit power: the boxcar mean of 28 samples has power 1/28, so
        // its magnitude is about sqrt(pi/4/28) ≈ 0.17 — against 0.89 for one sample — picking
        // the best of 9 offsets per segment raises it a little.
        let mut rng = Rng::new(7);
        let iq: Vec<Complex32> = (0..20_000)
            .map(|_| {
                let (a, b) = (rng.gauss(), rng.gauss());
                Complex32::new((a / 2f64.sqrt()) as f32, (b / 2f64.sqrt()) as f32)
            })
            .collect();
        let env = coherent_envelope(&iq, 80e3, 28, 8e3, 600, 0.0);
        let mean = env.iter().map(|&v| v as f64).sum::<f64>() / env.len() as f64;
        assert!(mean > 0.15 && mean < 0.25, "mean {mean}");
    }

    #[test]
    fn a_keyed_carrier_is_centred_so_every_mark_sums_coherently() {
        // 3-unit marks and 1-unit spaces at 1.3 kHz off zero (80 kHz, 28 samples per unit),
        // two presses 80 units apart with noise everywhere: the idle segments between them take
        // their neighbours' offset, and every mark, once centred, sums to nearly its length.
        let (rate, unit) = (80e3, 28usize);
        let keyed = |k: usize| {
            let u = k / unit;
            let in_press = (10..70).contains(&u) || (150..210).contains(&u);
            in_press && (u - 10) % 4 < 3
        };
        let n = 230 * unit;
        let mut rng = Rng::new(11);
        let iq: Vec<Complex32> = tone(n, rate, |_| 1.3e3, keyed)
            .into_iter()
            .map(|z| {
                let (a, b) = (rng.gauss() * 0.03, rng.gauss() * 0.03);
                z + Complex32::new(a as f32, b as f32)
            })
            .collect();
        let out = centred_carrier(&iq, rate, unit / 2, 8e3, 24 * unit, 0.0);
        let (mut k, mut marks) = (0, 0);
        while k < n {
            if keyed(k) {
                let start = k;
                while k < n && keyed(k) {
                    k += 1;
                }
                let s: Complex64 = out[start..k]
                    .iter()
                    .map(|z| Complex64::new(z.re as f64, z.im as f64))
                    .sum();
                let r = s.norm() / (k - start) as f64;
                assert!(r > 0.97, "mark at {start}: {r}");
                marks += 1;
            }
            k += 1;
        }
        assert_eq!(marks, 30);
        // Shifted: sample k of the output is input sample k − 5, centred alike.
        let late = centred_carrier(&iq, rate, unit / 2, 8e3, 24 * unit, 5.0);
        assert_eq!(late[..5], [Complex32::new(0.0, 0.0); 5]);
        assert!((late[1000].norm() - iq[995].norm()).abs() < 1e-5);
    }
}
