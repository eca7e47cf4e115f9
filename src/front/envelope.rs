//! The whole-band envelope: magnitude of every IQ sample (or the real envelope as recorded),
//! integrated and dumped down to an analysis rate.
//!
//! This is the simple front end: it needs no knowledge of the carrier, so it also serves
//! endless streams from the first sample. Beside each envelope sample it keeps the lag-1
//! product `Σ z[n]·conj(z[n-1])` of the IQ samples it integrated, from which the edge stage
//! measures the carrier offset of every mark (phase advance per sample).

use crate::front::baseline::{Restorer, Setting};
use crate::front::channel::{ChannelPlan, Channelizer};
use crate::front::FrontError;
use crate::source::Samples;
use num_complex::{Complex32, Complex64};

/// Envelope at a reduced rate, with the per-sample phase-advance evidence for IQ input.
#[derive(Debug, Default, Clone)]
pub struct EnvelopeBlock {
    /// Envelope samples (magnitude, or the recorded level for envelope captures).
    pub env: Vec<f32>,
    /// Lag-1 products summed over each output sample's inputs (empty for envelope captures).
    pub lag: Vec<Complex32>,
    /// A channel's complex outputs, one per envelope sample before the moving average's delay
    /// (empty for the whole band): [`super::coherent`] integrates them again once a burst's
    /// unit is known.
    pub iq: Vec<Complex32>,
}

impl EnvelopeBlock {
    /// Empties both vectors, keeping their capacity.
    pub fn clear(&mut self) {
        self.env.clear();
        self.lag.clear();
        self.iq.clear();
    }
}

/// A moving average of `len` envelope samples (and of their lag products), delaying the
/// envelope by `(len - 1) / 2` samples.
#[derive(Debug, Clone)]
pub struct Smoother {
    ring: Vec<f32>,
    pos: usize,
    sum: f64,
    lag_ring: Vec<Complex32>,
    lag_sum: Complex64,
}

impl Smoother {
    /// An average over `len` samples (1 = none).
    pub fn new(len: usize) -> Smoother {
        let len = len.max(1);
        Smoother {
            ring: vec![0.0; len],
            pos: 0,
            sum: 0.0,
            lag_ring: vec![Complex32::new(0.0, 0.0); len],
            lag_sum: Complex64::new(0.0, 0.0),
        }
    }

    /// Samples averaged.
    pub fn len(&self) -> usize {
        self.ring.len()
    }

    /// Always false: an average holds at least one sample.
    pub fn is_empty(&self) -> bool {
        false
    }

    /// The delay the average adds, in samples.
    pub fn delay(&self) -> f64 {
        (self.ring.len() as f64 - 1.0) / 2.0
    }

    /// Adds a block of a channel's complex outputs: for each, its magnitude and its lag-1
    /// product with the one before (`prev`, carried between blocks), averaged and appended
    /// to `out`. The same values as [`Smoother::push`] one sample at a time, without the
    /// per-sample calls and vector growth.
    pub fn push_iq(&mut self, zs: &[Complex32], prev: &mut Complex32, out: &mut EnvelopeBlock) {
        out.env.reserve(zs.len());
        out.lag.reserve(zs.len());
        let len = self.ring.len();
        let div = len as f64;
        let (mut sum, mut lag_sum, mut pos, mut p) = (self.sum, self.lag_sum, self.pos, *prev);
        for &z in zs {
            let l = z * p.conj();
            p = z;
            let v = z.norm();
            let (Some(slot), Some(lag_slot)) = (self.ring.get_mut(pos), self.lag_ring.get_mut(pos))
            else {
                break;
            };
            let old = std::mem::replace(slot, v);
            sum += v as f64 - old as f64;
            let old = std::mem::replace(lag_slot, l);
            lag_sum += Complex64::new(l.re as f64 - old.re as f64, l.im as f64 - old.im as f64);
            out.env.push((sum / div) as f32);
            out.lag
                .push(Complex32::new(lag_sum.re as f32, lag_sum.im as f32));
            pos += 1;
            if pos == len {
                pos = 0;
            }
        }
        (self.sum, self.lag_sum, self.pos, *prev) = (sum, lag_sum, pos, p);
    }

    /// Adds one sample (and its lag product, for IQ) and appends the averages to `out`.
    pub fn push(&mut self, v: f32, lag: Option<Complex32>, out: &mut EnvelopeBlock) {
        let old = std::mem::replace(&mut self.ring[self.pos], v);
        self.sum += v as f64 - old as f64;
        out.env.push((self.sum / self.ring.len() as f64) as f32);
        if let Some(l) = lag {
            let old = std::mem::replace(&mut self.lag_ring[self.pos], l);
            self.lag_sum +=
                Complex64::new(l.re as f64 - old.re as f64, l.im as f64 - old.im as f64);
            out.lag.push(Complex32::new(
                self.lag_sum.re as f32,
                self.lag_sum.im as f32,
            ));
        }
        self.pos += 1;
        if self.pos == self.ring.len() {
            self.pos = 0;
        }
    }
}

/// One carrier's channel as an envelope: the channelizer's complex output, its magnitude and
/// lag-1 products (for the residual carrier offset), then the same moving average as the
/// whole-band path.
pub struct ChannelEnvelope {
    ch: Channelizer,
    plan: ChannelPlan,
    iq: Vec<Complex32>,
    prev: Complex32,
    smoother: Smoother,
}

impl ChannelEnvelope {
    /// Removes a constant `dc` (the receiver's DC offset) from every input sample.
    pub fn with_dc(mut self, dc: Complex32) -> ChannelEnvelope {
        self.ch.set_dc(dc);
        self
    }

    /// A channel built from `plan`, averaging `smooth` output samples.
    pub fn new(plan: ChannelPlan, smooth: usize) -> Result<ChannelEnvelope, FrontError> {
        Ok(ChannelEnvelope {
            ch: Channelizer::new(&plan)?,
            plan,
            iq: Vec::new(),
            prev: Complex32::new(0.0, 0.0),
            smoother: Smoother::new(smooth),
        })
    }

    /// The channel's design.
    pub fn plan(&self) -> &ChannelPlan {
        &self.plan
    }

    /// Capture position (input samples) of envelope sample `k`.
    pub fn position_of(&self, k: f64) -> f64 {
        let q = k - self.smoother.delay();
        (q + 1.0) * self.plan.decim as f64 - 1.0 - self.plan.delay_samples
    }

    /// Envelope index at capture position `pos` (inverse of [`ChannelEnvelope::position_of`]).
    pub fn index_of(&self, pos: f64) -> f64 {
        (pos + 1.0 + self.plan.delay_samples) / self.plan.decim as f64 - 1.0 + self.smoother.delay()
    }

    /// Appends the envelope of an IQ block to `out`.
    pub fn process(&mut self, block: &[Complex32], out: &mut EnvelopeBlock) {
        self.iq.clear();
        self.ch.process_iq(block, &mut self.iq);
        self.smoother.push_iq(&self.iq, &mut self.prev, out);
        out.iq.extend_from_slice(&self.iq);
    }

    /// Delay of the envelope behind the channel's outputs, in samples.
    pub fn smoothing_delay(&self) -> f64 {
        self.smoother.delay()
    }

    /// Forgets all state but the plan and the DC offset, as at the start of a capture.
    pub fn reset(&mut self) {
        self.ch.reset();
        self.iq.clear();
        self.prev = Complex32::new(0.0, 0.0);
        self.smoother = Smoother::new(self.smoother.len());
    }
}

/// The envelope stage of one decoding chain.
pub enum Front {
    /// The whole band (or a recorded envelope).
    Wide(WideEnvelope),
    /// One carrier's channel.
    Channel(Box<ChannelEnvelope>),
}

impl Front {
    /// Appends the envelope of `block` to `out` (a channel ignores envelope input).
    pub fn process(&mut self, block: Samples<'_>, out: &mut EnvelopeBlock) {
        match (self, block) {
            (Front::Wide(w), b) => w.process(b, out),
            (Front::Channel(c), Samples::Iq(iq)) => c.process(iq, out),
            (Front::Channel(_), Samples::Envelope(_)) => {}
        }
    }

    /// Capture position of envelope sample `k`.
    pub fn position_of(&self, k: f64) -> f64 {
        match self {
            Front::Wide(w) => w.position_of(k),
            Front::Channel(c) => c.position_of(k),
        }
    }

    /// Envelope index at capture position `pos`.
    pub fn index_of(&self, pos: f64) -> f64 {
        match self {
            Front::Wide(w) => w.index_of(pos),
            Front::Channel(c) => c.index_of(pos),
        }
    }

    /// Releases samples a stage still holds (end of the capture).
    pub fn flush(&mut self, out: &mut EnvelopeBlock) {
        if let Front::Wide(w) = self {
            w.flush(out);
        }
    }

    /// Forgets all state, as at the start of a capture (the channel keeps its plan and DC
    /// offset, a recorded envelope its restoration settings).
    pub fn reset(&mut self) {
        match self {
            Front::Wide(w) => w.reset(),
            Front::Channel(c) => c.reset(),
        }
    }

    /// Capture samples per envelope sample.
    pub fn decim(&self) -> f64 {
        match self {
            Front::Wide(w) => w.decim() as f64,
            Front::Channel(c) => c.plan().decim as f64,
        }
    }
}

/// Integrate-and-dump envelope detector: `decim` input samples per output sample.
///
/// Output sample `k` covers input samples `[k·decim, (k+1)·decim)`, so its centre sits at input
/// position `k·decim + (decim-1)/2` ([`WideEnvelope::position_of`]).
#[derive(Debug, Clone)]
pub struct WideEnvelope {
    decim: usize,
    /// Polarity and AC-coupling restoration of recorded envelopes (see [`Restorer`]).
    restorer: Option<Box<Restorer>>,
    restored: Vec<f32>,
    smoother: Smoother,
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
        WideEnvelope {
            decim: decim.max(1),
            restorer: None,
            restored: Vec::new(),
            smoother: Smoother::new(smooth),
            acc: 0.0,
            acc_lag: Complex64::new(0.0, 0.0),
            n: 0,
            prev: Complex32::new(0.0, 0.0),
        }
    }

    /// Restores polarity and AC coupling of envelope input at `rate_hz` (module
    /// [`baseline`](crate::front::baseline)); IQ input is not affected.
    pub fn restoring(mut self, rate_hz: f64) -> WideEnvelope {
        self.restorer = Some(Box::new(Restorer::new(rate_hz)));
        self
    }

    /// The restorer's finding, when restoring and a window was decisive.
    pub fn restoration(&self) -> Option<Setting> {
        self.restorer.as_ref().and_then(|r| r.setting())
    }

    /// Releases envelope samples the restorer still holds (end of the capture).
    pub fn flush(&mut self, out: &mut EnvelopeBlock) {
        if let Some(r) = &mut self.restorer {
            let mut held = std::mem::take(&mut self.restored);
            held.clear();
            r.flush(&mut held);
            self.integrate(&held, out);
            self.restored = held;
        }
    }

    fn integrate(&mut self, env: &[f32], out: &mut EnvelopeBlock) {
        let d = self.decim;
        let scale = 1.0 / d as f64;
        for &x in env {
            self.acc += x as f64;
            self.n += 1;
            if self.n == d {
                self.smoother.push((self.acc * scale) as f32, None, out);
                self.acc = 0.0;
                self.n = 0;
            }
        }
    }

    /// Input samples per output sample.
    pub fn decim(&self) -> usize {
        self.decim
    }

    /// Capture position (in input samples) of output sample `k`.
    pub fn position_of(&self, k: f64) -> f64 {
        let centre = k - self.smoother.delay();
        centre * self.decim as f64 + (self.decim as f64 - 1.0) / 2.0
    }

    /// Output-sample index at capture position `pos` (inverse of [`WideEnvelope::position_of`]).
    pub fn index_of(&self, pos: f64) -> f64 {
        (pos - (self.decim as f64 - 1.0) / 2.0) / self.decim as f64 + self.smoother.delay()
    }

    /// Forgets all state, as at the start of a capture.
    pub fn reset(&mut self) {
        let restorer = self
            .restorer
            .as_ref()
            .map(|r| Box::new(Restorer::new(r.rate_hz())));
        *self = WideEnvelope::with_smoothing(self.decim, self.smoother.len());
        self.restorer = restorer;
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
                        self.smoother.push((self.acc * scale) as f32, Some(l), out);
                        self.acc = 0.0;
                        self.acc_lag = Complex64::new(0.0, 0.0);
                        self.n = 0;
                    }
                }
            }
            Samples::Envelope(env) => match &mut self.restorer {
                Some(r) => {
                    let mut held = std::mem::take(&mut self.restored);
                    held.clear();
                    r.push(env, &mut held);
                    self.integrate(&held, out);
                    self.restored = held;
                }
                None => self.integrate(env, out),
            },
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
