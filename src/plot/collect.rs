//! One streaming pass: the decoder, plus the envelope reduced per column and the marks.

use super::{EnvelopeColumn, PlotData, PlotError, PlotOptions};
use crate::decode::Decoder;
use crate::edges::{EdgeConfig, EdgeDetector, Mark};
use crate::front::channel::ChannelPlan;
use crate::front::envelope::{ChannelEnvelope, EnvelopeBlock, WideEnvelope};
use crate::source::{CaptureInfo, Samples};
use crate::units::Rate;
use num_complex::Complex32;

/// Envelope samples fed to the edge detector between two readings of its floor.
const LEVEL_STEP: usize = 64;
/// Marks kept at most (after merging those closer than a column).
const MAX_MARK_SPANS: usize = 1 << 20;

/// Running min/max of one column, with the summed floor and detection line.
#[derive(Debug, Clone, Copy)]
struct Acc {
    min: f32,
    max: f32,
    floor: f64,
    threshold: f64,
    levels: u32,
}

impl Acc {
    fn new(x: f32) -> Acc {
        Acc {
            min: x,
            max: x,
            floor: 0.0,
            threshold: 0.0,
            levels: 0,
        }
    }

    fn merge(&mut self, o: &Acc) {
        self.min = self.min.min(o.min);
        self.max = self.max.max(o.max);
        self.floor += o.floor;
        self.threshold += o.threshold;
        self.levels += o.levels;
    }
}

/// Columns over envelope-sample indices `[start, start + width·len)`.
#[derive(Debug, Clone)]
struct Trace {
    start: u64,
    end: Option<u64>,
    width: u64,
    target: usize,
    cols: Vec<Acc>,
}

impl Trace {
    /// Columns of a window `[start, end)`; an unknown end makes the width adapt.
    fn new(start: u64, end: Option<u64>, target: usize) -> Trace {
        let target = target.max(2);
        let width = match end {
            Some(e) => (e.saturating_sub(start)).div_ceil(target as u64).max(1),
            None => 1,
        };
        Trace {
            start,
            end,
            width,
            target,
            cols: Vec::new(),
        }
    }

    fn column_of(&self, k: u64) -> Option<usize> {
        if k < self.start || self.end.is_some_and(|e| k >= e) {
            return None;
        }
        Some(((k - self.start) / self.width) as usize)
    }

    fn add(&mut self, k: u64, x: f32) {
        let Some(i) = self.column_of(k) else { return };
        if i < self.cols.len() {
            let c = &mut self.cols[i];
            c.min = c.min.min(x);
            c.max = c.max.max(x);
        } else {
            // Samples come in order, so a new column is always the next one.
            self.cols.push(Acc::new(x));
            if self.end.is_none() && self.cols.len() > 2 * self.target {
                self.halve();
            }
        }
    }

    /// Adds consecutive samples starting at index `k0`.
    fn add_slice(&mut self, k0: u64, xs: &[f32]) {
        let mut k = k0;
        let mut rest = xs;
        while !rest.is_empty() {
            let Some(i) = self.column_of(k) else {
                // Before the window: skip to its start; past its end: done.
                if k < self.start {
                    let skip = ((self.start - k) as usize).min(rest.len());
                    rest = &rest[skip..];
                    k += skip as u64;
                    continue;
                }
                return;
            };
            // The samples that fall in column `i`.
            let col_end = self.start + (i as u64 + 1) * self.width;
            let take = ((col_end - k) as usize).min(rest.len());
            let (run, tail) = rest.split_at(take);
            let (lo, hi) = run
                .iter()
                .fold((f32::INFINITY, f32::NEG_INFINITY), |(a, b), &x| {
                    (a.min(x), b.max(x))
                });
            self.add(k, lo);
            self.add(k, hi);
            k += take as u64;
            rest = tail;
        }
    }

    fn add_level(&mut self, k: u64, floor: f32, threshold: f32) {
        if let Some(c) = self.column_of(k).and_then(|i| self.cols.get_mut(i)) {
            c.floor += floor as f64;
            c.threshold += threshold as f64;
            c.levels += 1;
        }
    }

    /// Merges columns in pairs and doubles the width.
    fn halve(&mut self) {
        let old = std::mem::take(&mut self.cols);
        for pair in old.chunks(2) {
            let mut a = pair[0];
            if let Some(b) = pair.get(1) {
                a.merge(b);
            }
            self.cols.push(a);
        }
        self.width *= 2;
    }
}

/// The decoder's whole-band envelope without the carrier evidence it also keeps: the mean
/// magnitude of every `decim` input samples, then a moving average of `smooth` of those.
/// Sample `k` lines up with sample `k` of [`WideEnvelope`] with the same settings (whose
/// `position_of` maps it to capture time); values agree to float rounding.
#[derive(Debug, Clone)]
struct LightEnvelope {
    decim: usize,
    ring: Vec<f32>,
    pos: usize,
    sum: f64,
    acc: f32,
    n: usize,
}

impl LightEnvelope {
    fn new(decim: usize, smooth: usize) -> LightEnvelope {
        LightEnvelope {
            decim: decim.max(1),
            ring: vec![0.0; smooth.max(1)],
            pos: 0,
            sum: 0.0,
            acc: 0.0,
            n: 0,
        }
    }

    fn dump(&mut self, out: &mut Vec<f32>) {
        let v = self.acc / self.decim as f32;
        let old = std::mem::replace(&mut self.ring[self.pos], v);
        self.sum += v as f64 - old as f64;
        out.push((self.sum / self.ring.len() as f64) as f32);
        self.pos = (self.pos + 1) % self.ring.len();
        self.acc = 0.0;
        self.n = 0;
    }

    fn process(&mut self, block: Samples<'_>, out: &mut Vec<f32>) {
        match block {
            Samples::Iq(iq) => {
                for z in iq {
                    self.acc += (z.re * z.re + z.im * z.im).sqrt();
                    self.n += 1;
                    if self.n == self.decim {
                        self.dump(out);
                    }
                }
            }
            Samples::Envelope(env) => {
                for &x in env {
                    self.acc += x;
                    self.n += 1;
                    if self.n == self.decim {
                        self.dump(out);
                    }
                }
            }
        }
    }
}

/// The envelope the view draws: the whole band (or recorded envelope), or one carrier's
/// channel, each built with the same settings as the decoder beside it.
enum PlotFront {
    Wide {
        /// Time base only (`position_of`, `index_of`, `decim`).
        base: WideEnvelope,
        light: LightEnvelope,
    },
    Channel {
        ch: Box<ChannelEnvelope>,
        out: EnvelopeBlock,
    },
}

impl PlotFront {
    fn position_of(&self, k: f64) -> f64 {
        match self {
            PlotFront::Wide { base, .. } => base.position_of(k),
            PlotFront::Channel { ch, .. } => ch.position_of(k),
        }
    }

    fn index_of(&self, pos: f64) -> f64 {
        match self {
            PlotFront::Wide { base, .. } => base.index_of(pos),
            PlotFront::Channel { ch, .. } => ch.index_of(pos),
        }
    }

    /// Capture samples per envelope sample.
    fn decim(&self) -> f64 {
        match self {
            PlotFront::Wide { base, .. } => base.decim() as f64,
            PlotFront::Channel { ch, .. } => ch.plan().decim as f64,
        }
    }

    fn process(&mut self, block: Samples<'_>, env: &mut Vec<f32>) {
        match self {
            PlotFront::Wide { light, .. } => light.process(block, env),
            PlotFront::Channel { ch, out } => {
                if let Samples::Iq(iq) = block {
                    out.clear();
                    ch.process(iq, out);
                    env.extend_from_slice(&out.env);
                }
            }
        }
    }
}

/// Checks the window of `opts`; returns its start (seconds).
pub(crate) fn check_window(opts: &PlotOptions) -> Result<f64, PlotError> {
    let from_s = opts.from_s.unwrap_or(0.0);
    if !from_s.is_finite() || from_s < 0.0 {
        return Err(PlotError::Window(format!(
            "--from {from_s} must be ≥ 0 seconds"
        )));
    }
    if let Some(t) = opts.to_s {
        if !t.is_finite() || t <= from_s {
            return Err(PlotError::Window(format!(
                "--to {t} must be later than --from {from_s}"
            )));
        }
    }
    Ok(from_s)
}

/// Streams a capture into a [`Decoder`] and, beside it, gathers what the envelope view needs.
///
/// The envelope and edge stages are run a second time with the decoder's own settings
/// (the decoder keeps its internals private), so the band (or channel), floor and marks drawn
/// are what the first pass of the decoder saw.
pub struct PlotCollector {
    decoder: Decoder,
    front: PlotFront,
    edges: EdgeDetector,
    on_sigma: f32,
    block: Vec<f32>,
    found: Vec<Mark>,
    trace: Trace,
    spans: Vec<(f64, f64)>,
    rate: Rate,
    next_env: u64,
    from_s: f64,
    to_s: Option<f64>,
    samples: u64,
}

impl PlotCollector {
    /// A whole-band collector for the capture `info` describes; checks the window.
    pub fn new(info: CaptureInfo, opts: &PlotOptions) -> Result<PlotCollector, PlotError> {
        let hz = info.rate.hz();
        // The decoder's own envelope settings (decode.rs, `Decoder::new`).
        let decim = WideEnvelope::decimation_for(hz, opts.decode.max_envelope_rate_hz);
        let smooth = (opts.decode.smooth_us * 1e-6 * hz / decim as f64).round() as usize;
        let front = PlotFront::Wide {
            base: WideEnvelope::with_smoothing(decim, smooth),
            light: LightEnvelope::new(decim, smooth),
        };
        let decoder = Decoder::new(info.clone(), &opts.decode);
        PlotCollector::with_front(info, opts, front, decoder)
    }

    /// A collector for one carrier's channel of an IQ capture: the envelope view and the
    /// decode both read the channel `plan` describes, with the receiver's DC offset `dc`
    /// removed first (as [`Decoder::for_channel`] does). Checks the window.
    pub fn for_channel(
        info: CaptureInfo,
        opts: &PlotOptions,
        plan: ChannelPlan,
        dc: Complex32,
    ) -> Result<PlotCollector, PlotError> {
        // The decoder's own channel settings (decode.rs, `Decoder::for_channel`).
        let smooth = (opts.decode.smooth_us * 1e-6 * plan.out_rate_hz).round() as usize;
        let front = PlotFront::Channel {
            ch: Box::new(ChannelEnvelope::new(plan.clone(), smooth)?.with_dc(dc)),
            out: EnvelopeBlock::default(),
        };
        let decoder = Decoder::for_channel(info.clone(), &opts.decode, plan, dc)?;
        PlotCollector::with_front(info, opts, front, decoder)
    }

    fn with_front(
        info: CaptureInfo,
        opts: &PlotOptions,
        front: PlotFront,
        decoder: Decoder,
    ) -> Result<PlotCollector, PlotError> {
        let from_s = check_window(opts)?;
        let rate = info.rate;
        let cfg = EdgeConfig::for_rate(rate.hz() / front.decim());
        let on_sigma = cfg.on_sigma;
        let env_index = |s: f64| front.index_of(rate.samples_from_s(s));
        let start = env_index(from_s).ceil().max(0.0) as u64;
        let known_end_s = match (opts.to_s, info.declared_samples) {
            (Some(t), Some(n)) => Some(t.min(rate.to_s(n as f64))),
            (Some(t), None) => Some(t),
            (None, Some(n)) => Some(rate.to_s(n as f64)),
            (None, None) => None,
        };
        let end = known_end_s.map(|t| (env_index(t).floor().max(0.0) as u64 + 1).max(start + 1));
        Ok(PlotCollector {
            decoder,
            front,
            edges: EdgeDetector::new(cfg),
            on_sigma,
            block: Vec::new(),
            found: Vec::new(),
            trace: Trace::new(start, end, opts.columns),
            spans: Vec::new(),
            rate,
            next_env: 0,
            from_s,
            to_s: opts.to_s,
            samples: 0,
        })
    }

    fn seconds(&self, env_pos: f64) -> f64 {
        self.rate.to_s(self.front.position_of(env_pos))
    }

    /// Feeds one block of samples.
    pub fn push(&mut self, block: Samples<'_>) {
        self.samples += block.len() as u64;
        self.decoder.push(block);
        let mut env = std::mem::take(&mut self.block);
        env.clear();
        self.front.process(block, &mut env);
        for chunk in env.chunks(LEVEL_STEP) {
            self.edges.process(chunk, &[], &mut self.found);
            let (floor, sigma) = self.edges.floor_and_noise();
            self.trace.add_slice(self.next_env, chunk);
            self.next_env += chunk.len() as u64;
            self.trace
                .add_level(self.next_env - 1, floor, floor + self.on_sigma * sigma);
            self.take_marks();
        }
        self.block = env;
    }

    /// Moves completed marks into the shaded spans, merging those closer than a column.
    fn take_marks(&mut self) {
        if self.found.is_empty() {
            return;
        }
        let tol = self.rate.to_s(self.trace.width as f64 * self.front.decim());
        let to = self.to_s.unwrap_or(f64::INFINITY);
        let found = std::mem::take(&mut self.found);
        for m in &found {
            let (r, f) = (self.seconds(m.rise), self.seconds(m.fall));
            if f < self.from_s || r > to {
                continue;
            }
            let full = self.spans.len() >= MAX_MARK_SPANS;
            match self.spans.last_mut() {
                Some(last) if r - last.1 < tol => last.1 = last.1.max(f),
                _ if !full => self.spans.push((r, f)),
                _ => {}
            }
        }
        self.found = found;
        self.found.clear();
    }

    /// Flushes the stages and returns the data.
    pub fn finish(mut self) -> Result<PlotData, PlotError> {
        self.edges.finish(&mut self.found);
        self.take_marks();
        let end_s = self.rate.to_s(self.samples as f64);
        if self.from_s >= end_s {
            return Err(PlotError::Window(format!(
                "--from {} s is not before the capture's end ({end_s:.6} s)",
                self.from_s
            )));
        }
        let to_s = self.to_s.map_or(end_s, |t| t.min(end_s));
        let w = self.trace.width as f64;
        let start = self.trace.start as f64;
        let columns = self
            .trace
            .cols
            .iter()
            .enumerate()
            .map(|(i, c)| {
                let k0 = start + i as f64 * w;
                let t0 = self.rate.to_s(self.front.position_of(k0 - 0.5));
                let t1 = self.rate.to_s(self.front.position_of(k0 + w - 0.5));
                let n = c.levels.max(1) as f64;
                EnvelopeColumn {
                    t0_s: t0.max(0.0),
                    t1_s: t1,
                    min: c.min,
                    max: c.max,
                    floor: if c.levels > 0 {
                        (c.floor / n) as f32
                    } else {
                        f32::NAN
                    },
                    threshold: if c.levels > 0 {
                        (c.threshold / n) as f32
                    } else {
                        f32::NAN
                    },
                }
            })
            .filter(|c| c.t1_s > self.from_s && c.t0_s < to_s)
            .collect();
        let report = self.decoder.finish();
        Ok(PlotData {
            report,
            from_s: self.from_s,
            to_s,
            columns,
            marks_s: self.spans,
            on_sigma: self.on_sigma,
            spectrum: None,
            channel: None,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::front::envelope::EnvelopeBlock;
    use num_complex::Complex32;

    #[test]
    fn light_envelope_matches_the_decoder_envelope() {
        let iq: Vec<Complex32> = (0..10_000)
            .map(|i| Complex32::from_polar(((i / 300) % 3) as f32 * 0.4 + 0.01, i as f32 * 0.7))
            .collect();
        let mut wide = WideEnvelope::with_smoothing(4, 5);
        let mut want = EnvelopeBlock::default();
        wide.process(Samples::Iq(&iq), &mut want);
        let mut light = LightEnvelope::new(4, 5);
        let mut got = Vec::new();
        for c in iq.chunks(777) {
            light.process(Samples::Iq(c), &mut got);
        }
        assert_eq!(got.len(), want.env.len());
        for (a, b) in got.iter().zip(&want.env) {
            assert!((a - b).abs() < 1e-5, "{a} vs {b}");
        }
    }

    #[test]
    fn known_end_gives_at_most_the_target_columns() {
        let mut t = Trace::new(10, Some(10_010), 100);
        for k in 0..20_000u64 {
            t.add(k, (k % 7) as f32);
        }
        assert_eq!(t.width, 100);
        assert_eq!(t.cols.len(), 100);
        assert!(t.cols.iter().all(|c| c.min == 0.0 && c.max == 6.0));
    }

    #[test]
    fn slices_equal_single_samples() {
        let xs: Vec<f32> = (0..5000u32).map(|k| ((k * 7919) % 1013) as f32).collect();
        for end in [Some(4000u64), None] {
            let mut one = Trace::new(123, end, 37);
            let mut many = Trace::new(123, end, 37);
            for (k, &x) in xs.iter().enumerate() {
                one.add(k as u64, x);
            }
            let mut k = 0;
            for c in xs.chunks(61) {
                many.add_slice(k, c);
                k += c.len() as u64;
            }
            assert_eq!(one.width, many.width);
            let mm = |t: &Trace| t.cols.iter().map(|c| (c.min, c.max)).collect::<Vec<_>>();
            assert_eq!(mm(&one), mm(&many));
        }
    }

    #[test]
    fn unknown_end_halves_and_keeps_extremes() {
        let mut t = Trace::new(0, None, 50);
        let n = 10_000u64;
        for k in 0..n {
            // One spike per 1000 samples must survive every merge.
            t.add(k, if k % 1000 == 999 { 5.0 } else { 1.0 });
        }
        assert!(
            t.cols.len() >= 50 && t.cols.len() <= 100,
            "{}",
            t.cols.len()
        );
        assert!(t.width * t.cols.len() as u64 >= n);
        let spikes = t.cols.iter().filter(|c| c.max == 5.0).count();
        assert_eq!(spikes, 10);
        // A merged column is the union of its parts, so nothing else is lifted.
        assert!(t.cols.iter().all(|c| c.min == 1.0));
    }
}
