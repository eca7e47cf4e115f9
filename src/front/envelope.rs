//! The whole-band envelope: magnitude of every IQ sample (or the real envelope as recorded),
//! integrated and dumped down to an analysis rate.
//!
//! This is the simple front end: it needs no knowledge of the carrier, so it also serves
//! endless streams from the first sample. Beside each envelope sample it keeps the lag-1
//! product `Σ z[n]·conj(z[n-1])` of the IQ samples it integrated, from which the edge stage
//! measures the carrier offset of every mark (phase advance per sample).

use crate::source::Samples;
use num_complex::{Complex32, Complex64};

/// Envelope at a reduced rate, with the per-sample phase-advance evidence for IQ input.
#[derive(Debug, Default, Clone)]
pub struct EnvelopeBlock {
    /// Envelope samples (magnitude, or the recorded level for envelope captures).
    pub env: Vec<f32>,
    /// Lag-1 products summed over each output sample's inputs (empty for envelope captures).
    pub lag: Vec<Complex32>,
}

impl EnvelopeBlock {
    /// Empties both vectors, keeping their capacity.
    pub fn clear(&mut self) {
        self.env.clear();
        self.lag.clear();
    }
}

/// Integrate-and-dump envelope detector: `decim` input samples per output sample.
///
/// Output sample `k` covers input samples `[k·decim, (k+1)·decim)`, so its centre sits at input
/// position `k·decim + (decim-1)/2` ([`WideEnvelope::position_of`]).
#[derive(Debug, Clone)]
pub struct WideEnvelope {
    decim: usize,
    /// Post-detection moving average: length and ring of recent dumps.
    smooth: usize,
    ring: Vec<f32>,
    ring_pos: usize,
    ring_sum: f64,
    lag_ring: Vec<Complex32>,
    lag_sum: Complex64,
    acc: f64,
    acc_lag: Complex64,
    n: usize,
    prev: Complex32,
}

impl WideEnvelope {
    /// The decimation that brings `rate_hz` down to at most `max_out_hz` (at least 1).
    pub fn decimation_for(rate_hz: f64, max_out_hz: f64) -> usize {
        ((rate_hz / max_out_hz).floor() as usize).max(1)
    }

    /// A detector dumping every `decim` input samples, without further smoothing.
    pub fn new(decim: usize) -> WideEnvelope {
        WideEnvelope::with_smoothing(decim, 1)
    }

    /// A detector dumping every `decim` input samples, then averaging `smooth` dumps.
    pub fn with_smoothing(decim: usize, smooth: usize) -> WideEnvelope {
        let smooth = smooth.max(1);
        WideEnvelope {
            decim: decim.max(1),
            smooth,
            ring: vec![0.0; smooth],
            ring_pos: 0,
            ring_sum: 0.0,
            lag_ring: vec![Complex32::new(0.0, 0.0); smooth],
            lag_sum: Complex64::new(0.0, 0.0),
            acc: 0.0,
            acc_lag: Complex64::new(0.0, 0.0),
            n: 0,
            prev: Complex32::new(0.0, 0.0),
        }
    }

    /// Input samples per output sample.
    pub fn decim(&self) -> usize {
        self.decim
    }

    /// Capture position (in input samples) of output sample `k`.
    pub fn position_of(&self, k: f64) -> f64 {
        let centre = k - (self.smooth as f64 - 1.0) / 2.0;
        centre * self.decim as f64 + (self.decim as f64 - 1.0) / 2.0
    }

    /// Output-sample index at capture position `pos` (inverse of [`WideEnvelope::position_of`]).
    pub fn index_of(&self, pos: f64) -> f64 {
        (pos - (self.decim as f64 - 1.0) / 2.0) / self.decim as f64
            + (self.smooth as f64 - 1.0) / 2.0
    }

    /// Forgets all state, as at the start of a capture.
    pub fn reset(&mut self) {
        *self = WideEnvelope::with_smoothing(self.decim, self.smooth);
    }

    fn emit(&mut self, v: f32, l: Complex32, out: &mut EnvelopeBlock, iq: bool) {
        let old = std::mem::replace(&mut self.ring[self.ring_pos], v);
        self.ring_sum += v as f64 - old as f64;
        let inv = 1.0 / self.smooth as f64;
        out.env.push((self.ring_sum * inv) as f32);
        if iq {
            let old = std::mem::replace(&mut self.lag_ring[self.ring_pos], l);
            self.lag_sum +=
                Complex64::new(l.re as f64 - old.re as f64, l.im as f64 - old.im as f64);
            out.lag.push(Complex32::new(
                self.lag_sum.re as f32,
                self.lag_sum.im as f32,
            ));
        }
        self.ring_pos = (self.ring_pos + 1) % self.smooth;
    }

    /// Appends the envelope of `block` to `out`.
    pub fn process(&mut self, block: Samples<'_>, out: &mut EnvelopeBlock) {
        let d = self.decim;
        let scale = 1.0 / d as f64;
        match block {
            Samples::Iq(iq) => {
                for &z in iq {
                    self.acc += z.norm() as f64;
                    let l = z * self.prev.conj();
                    self.acc_lag += Complex64::new(l.re as f64, l.im as f64);
                    self.prev = z;
                    self.n += 1;
                    if self.n == d {
                        let l = Complex32::new(self.acc_lag.re as f32, self.acc_lag.im as f32);
                        self.emit((self.acc * scale) as f32, l, out, true);
                        self.acc = 0.0;
                        self.acc_lag = Complex64::new(0.0, 0.0);
                        self.n = 0;
                    }
                }
            }
            Samples::Envelope(env) => {
                for &x in env {
                    self.acc += x as f64;
                    self.n += 1;
                    if self.n == d {
                        self.emit(
                            (self.acc * scale) as f32,
                            Complex32::new(0.0, 0.0),
                            out,
                            false,
                        );
                        self.acc = 0.0;
                        self.n = 0;
                    }
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn integrate_and_dump_averages_the_magnitude() {
        let iq: Vec<Complex32> = (0..12)
            .map(|i| Complex32::from_polar(if i < 6 { 1.0 } else { 0.5 }, i as f32))
            .collect();
        let mut e = WideEnvelope::new(3);
        let mut out = EnvelopeBlock::default();
        e.process(Samples::Iq(&iq), &mut out);
        assert_eq!(out.env.len(), 4);
        for (k, want) in [1.0, 1.0, 0.5, 0.5].iter().enumerate() {
            assert!((out.env[k] - want).abs() < 1e-6);
        }
        // A phase step of 1 rad per sample shows in the lag products.
        assert!((out.lag[1].arg() - 1.0).abs() < 1e-5);
        assert_eq!(e.position_of(2.0), 7.0);
    }

    #[test]
    fn block_boundaries_do_not_matter() {
        let iq: Vec<Complex32> = (0..1000)
            .map(|i| Complex32::from_polar((i % 17) as f32 * 0.1, i as f32 * 0.3))
            .collect();
        let mut whole = EnvelopeBlock::default();
        WideEnvelope::new(7).process(Samples::Iq(&iq), &mut whole);
        for step in [1, 7, 64] {
            let mut e = WideEnvelope::new(7);
            let mut out = EnvelopeBlock::default();
            for c in iq.chunks(step) {
                e.process(Samples::Iq(c), &mut out);
            }
            assert_eq!(out.env, whole.env);
        }
    }
}
