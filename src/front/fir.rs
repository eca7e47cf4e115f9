//! Filter and window design shared by the survey and the channel: Kaiser-window low-pass FIR,
//! CIC impulse response, 4-term Blackman–Harris window. All designs run once, in `f64`.

use std::f64::consts::PI;

/// Modified Bessel function of the first kind, order zero, by its power series
/// (Σ ((x/2)^k / k!)^2; textbook series, common practice). Converges quickly for the
/// β ≤ 20 used by Kaiser windows.
pub(crate) fn bessel_i0(x: f64) -> f64 {
    let half = x / 2.0;
    let mut term = 1.0;
    let mut sum = 1.0;
    for k in 1..200 {
        let f = half / k as f64;
        term *= f * f;
        sum += term;
        if term < sum * 1e-17 {
            break;
        }
    }
    sum
}

/// Kaiser's empirical formulas (J. F. Kaiser, 1974; as given in Oppenheim & Schafer,
/// "Discrete-Time Signal Processing", §7.6 — equation numbers from memory):
/// β from the stopband attenuation `a_db`, and the length for a transition width `dw`
/// (radians/sample). Returns (β, odd number of taps).
pub(crate) fn kaiser_params(a_db: f64, dw: f64) -> (f64, usize) {
    let beta = if a_db > 50.0 {
        0.1102 * (a_db - 8.7)
    } else if a_db >= 21.0 {
        0.5842 * (a_db - 21.0).powf(0.4) + 0.07886 * (a_db - 21.0)
    } else {
        0.0
    };
    let m = ((a_db - 8.0) / (2.285 * dw)).ceil().max(2.0);
    // M is the filter order; taps = M + 1, forced odd so the delay is a whole sample.
    let mut taps = m as usize + 1;
    if taps % 2 == 0 {
        taps += 1;
    }
    (beta, taps)
}

/// Windowed-sinc low-pass: `taps` coefficients, cutoff `fc` as a fraction of the sample rate
/// (0 < fc < 0.5), Kaiser window of parameter `beta`, normalised to unit gain at DC.
pub(crate) fn kaiser_lowpass(taps: usize, fc: f64, beta: f64) -> Vec<f64> {
    let mid = (taps as f64 - 1.0) / 2.0;
    let i0b = bessel_i0(beta);
    let mut h: Vec<f64> = (0..taps)
        .map(|i| {
            let t = i as f64 - mid;
            let sinc = if t == 0.0 {
                2.0 * fc
            } else {
                (2.0 * PI * fc * t).sin() / (PI * t)
            };
            let r = if mid > 0.0 { t / mid } else { 0.0 };
            let w = bessel_i0(beta * (1.0 - r * r).max(0.0).sqrt()) / i0b;
            sinc * w
        })
        .collect();
    let sum: f64 = h.iter().sum();
    if sum != 0.0 {
        for v in &mut h {
            *v /= sum;
        }
    }
    h
}

/// Impulse response of an order-`order` CIC filter of decimation `d` (the `order`-fold
/// convolution of a length-`d` boxcar), normalised to unit gain at DC.
/// Length is `order * (d - 1) + 1`.
pub(crate) fn cic_response(d: usize, order: usize) -> Vec<f64> {
    let mut h = vec![1.0f64];
    for _ in 0..order {
        let mut next = vec![0.0f64; h.len() + d - 1];
        for (i, &v) in h.iter().enumerate() {
            for slot in &mut next[i..i + d] {
                *slot += v;
            }
        }
        h = next;
    }
    let sum: f64 = h.iter().sum();
    for v in &mut h {
        *v /= sum;
    }
    h
}

/// Magnitude response of an order-`order` CIC of decimation `d` at frequency `f`
/// (fraction of the input rate): |sin(π f d) / (d sin(π f))|^order.
pub(crate) fn cic_gain(d: usize, order: usize, f: f64) -> f64 {
    let den = d as f64 * (PI * f).sin();
    if den.abs() < 1e-300 {
        return 1.0;
    }
    ((PI * f * d as f64).sin() / den).abs().powi(order as i32)
}

/// 4-term Blackman–Harris window, periodic form (F. J. Harris, "On the use of windows for
/// harmonic analysis with the discrete Fourier transform", Proc. IEEE 66(1), 1978;
/// coefficients 0.35875, 0.48829, 0.14128, 0.01168 from memory; sidelobes ≈ −92 dB).
pub(crate) fn blackman_harris(n: usize) -> Vec<f64> {
    const A: [f64; 4] = [0.35875, 0.48829, 0.14128, 0.01168];
    (0..n)
        .map(|i| {
            let x = 2.0 * PI * i as f64 / n as f64;
            A[0] - A[1] * x.cos() + A[2] * (2.0 * x).cos() - A[3] * (3.0 * x).cos()
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// |H(f)| of a real FIR at frequency f (fraction of its rate).
    fn gain(h: &[f64], f: f64) -> f64 {
        let (mut re, mut im) = (0.0, 0.0);
        for (k, &c) in h.iter().enumerate() {
            let a = -2.0 * PI * f * k as f64;
            re += c * a.cos();
            im += c * a.sin();
        }
        (re * re + im * im).sqrt()
    }

    #[test]
    fn bessel_i0_matches_tabulated_values() {
        // Abramowitz & Stegun, Table 9.8 (from memory): I0(1) = 1.266065878, I0(5) = 27.23987182.
        assert!((bessel_i0(0.0) - 1.0).abs() < 1e-15);
        assert!((bessel_i0(1.0) - 1.266_065_878).abs() < 1e-8);
        assert!((bessel_i0(5.0) - 27.239_871_82).abs() < 1e-6);
    }

    #[test]
    fn kaiser_lowpass_meets_its_specification() {
        // Pass up to 0.05, stop from 0.1, 60 dB.
        let a_db = 60.0;
        let (beta, taps) = kaiser_params(a_db, 2.0 * PI * 0.05);
        assert_eq!(taps % 2, 1);
        let h = kaiser_lowpass(taps, 0.075, beta);
        assert!((gain(&h, 0.0) - 1.0).abs() < 1e-12);
        for i in 0..=50 {
            let f = 0.05 * i as f64 / 50.0;
            let g = gain(&h, f);
            assert!((g - 1.0).abs() < 0.01, "passband ripple at {f}: {g}");
        }
        for i in 0..=400 {
            let f = 0.1 + 0.4 * i as f64 / 400.0;
            let g_db = 20.0 * gain(&h, f).log10();
            assert!(g_db < -59.0, "stopband at {f}: {g_db} dB");
        }
    }

    #[test]
    fn cic_response_matches_closed_form() {
        for &(d, order) in &[(1usize, 3usize), (5, 1), (8, 2), (13, 3)] {
            let h = cic_response(d, order);
            assert_eq!(h.len(), order * (d - 1) + 1);
            for i in 1..20 {
                let f = 0.49 * i as f64 / 20.0;
                assert!((gain(&h, f) - cic_gain(d, order, f)).abs() < 1e-9);
            }
        }
    }

    #[test]
    fn blackman_harris_is_symmetric_and_peaks_at_one() {
        let w = blackman_harris(64);
        assert!((w[32] - 1.0).abs() < 1e-12);
        assert!(w[0].abs() < 1e-4);
        for i in 1..64 {
            assert!((w[i] - w[64 - i]).abs() < 1e-12);
        }
    }
}
