//! The decode pipeline: source → envelope → edges → bursts → line codes → frames → report.
//!
//! [`Decoder`] owns one instance of each streaming stage and carries their state between
//! blocks; presses are decoded as their bursts close, so memory holds only marks of the press
//! in progress and the (small) decoded presses.
//!
//! ```no_run
//! use ooksift::decode::{decode_path, DecodeOptions};
//! let report = decode_path("captures/harrowgate-gate.cu8", &DecodeOptions::default()).unwrap();
//! for code in &report.codes {
//!     println!("{} {} {}", code.key_id, code.line_code, code.hex);
//! }
//! ```

use crate::bursts::{Burst, BurstConfig, BurstSplitter};
use crate::coding;
use crate::edges::{EdgeConfig, EdgeDetector, Mark};
use crate::frames::{self, PressDecode};
use crate::front::channel::ChannelPlan;
use crate::front::envelope::{ChannelEnvelope, EnvelopeBlock, Front, WideEnvelope};
use crate::front::spectrum::{SpectrumSurvey, Survey, SurveyConfig};
use crate::report::{CaptureSummary, CodeReport, DecodeReport, CAUTION};
use crate::source::{self, CaptureInfo, OpenOptions, SampleSource, Samples, SourceError};
use num_complex::Complex32;

/// Errors of the decode layer.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum DecodeError {
    /// The capture could not be read.
    #[error(transparent)]
    Source(#[from] SourceError),
    /// The front end could not be set up.
    #[error("front end: {0}")]
    Front(String),
}

/// A progress callback: samples processed so far and the expected total (0 when unknown),
/// counted over every pass the decode makes.
#[derive(Clone)]
pub struct Progress(pub std::sync::Arc<dyn Fn(u64, u64) + Send + Sync>);

impl std::fmt::Debug for Progress {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Progress")
    }
}

/// Options of a decode.
#[derive(Debug, Clone)]
pub struct DecodeOptions {
    /// How to open the capture.
    pub open: OpenOptions,
    /// Highest envelope rate analysed; faster captures are integrated down to it.
    pub max_envelope_rate_hz: f64,
    /// Post-detection smoothing of the envelope, in µs (a moving average; 0 for none).
    pub smooth_us: f64,
    /// Silence that always separates presses (default 80 ms).
    pub press_gap_ms: Option<f64>,
    /// Presses kept at most (a limit reported when hit).
    pub max_presses: usize,
    /// Line-code choices (forced code, Manchester convention).
    pub press: frames::PressOptions,
    /// IQ files: survey the spectrum and decode each carrier in its own channel.
    pub channels: bool,
    /// Channels decoded at most (the strongest carriers first).
    pub max_channels: usize,
    /// Called after every block with the samples processed so far.
    pub progress: Option<Progress>,
}

impl Default for DecodeOptions {
    fn default() -> Self {
        DecodeOptions {
            open: OpenOptions::default(),
            max_envelope_rate_hz: 250_000.0,
            smooth_us: 60.0,
            press_gap_ms: None,
            max_presses: 10_000,
            press: frames::PressOptions::default(),
            channels: true,
            max_channels: 8,
            progress: None,
        }
    }
}

/// The streaming pipeline for one capture.
pub struct Decoder {
    info: CaptureInfo,
    env: Front,
    /// Rate of the lag-1 products (input rate for the whole band, channel rate otherwise).
    lag_rate_hz: f64,
    /// Carrier offset the envelope is centred on (None for envelope captures).
    carrier_base_hz: Option<f64>,
    edges: EdgeDetector,
    bursts: BurstSplitter,
    env_block: EnvelopeBlock,
    marks: Vec<Mark>,
    closed: Vec<Burst>,
    presses: Vec<PressDecode>,
    /// Envelope kept for the second pass: from shortly before the open burst (or the last
    /// `margin` samples when none is open). `hist[0]` is envelope sample `hist_start`.
    hist: History<f32>,
    lag_hist: History<Complex32>,
    /// A channel's complex outputs beside `hist` (empty for the whole band).
    iq_hist: History<Complex32>,
    hist_start: u64,
    /// Capture position of the current segment's first sample: a squelched channel skips
    /// quiet stretches ([`Decoder::skip`]) and starts its stages afresh after each.
    base: u64,
    /// Samples pushed since the segment began.
    segment_samples: u64,
    edge_cfg: EdgeConfig,
    burst_cfg: BurstConfig,
    margin: usize,
    max_hist: usize,
    env_rate: f64,
    samples: u64,
    undecoded: usize,
    max_presses: usize,
    press_opts: frames::PressOptions,
    notes: Vec<String>,
}

impl Decoder {
    /// A whole-band pipeline tuned to the capture `info` describes.
    pub fn new(info: CaptureInfo, opts: &DecodeOptions) -> Decoder {
        let rate = info.rate.hz();
        let decim = WideEnvelope::decimation_for(rate, opts.max_envelope_rate_hz);
        let smooth = (opts.smooth_us * 1e-6 * rate / decim as f64).round() as usize;
        let base = info.is_iq().then_some(0.0);
        let mut wide = WideEnvelope::with_smoothing(decim, smooth);
        if !info.is_iq() {
            wide = wide.restoring(rate);
        }
        Decoder::with_front(info, opts, Front::Wide(wide), rate, base)
    }

    /// A pipeline reading one carrier's channel; `dc` (the receiver's DC offset) is removed
    /// from every sample first.
    pub fn for_channel(
        info: CaptureInfo,
        opts: &DecodeOptions,
        plan: ChannelPlan,
        dc: num_complex::Complex32,
    ) -> Result<Decoder, crate::front::FrontError> {
        let out = plan.out_rate_hz;
        let base = plan.nco_offset_hz;
        let smooth = (opts.smooth_us * 1e-6 * out).round() as usize;
        let front = Front::Channel(Box::new(ChannelEnvelope::new(plan, smooth)?.with_dc(dc)));
        Ok(Decoder::with_front(info, opts, front, out, Some(base)))
    }

    fn with_front(
        info: CaptureInfo,
        opts: &DecodeOptions,
        env: Front,
        lag_rate_hz: f64,
        carrier_base_hz: Option<f64>,
    ) -> Decoder {
        let rate = info.rate.hz();
        let decim = env.decim();
        let env_rate = rate / decim;
        let mut bcfg = BurstConfig::for_rate(rate);
        bcfg.drop_chatter = !info.is_iq();
        if let Some(ms) = opts.press_gap_ms {
            bcfg.min_gap = ms * rate / 1e3;
        }
        Decoder {
            env,
            lag_rate_hz,
            carrier_base_hz,
            edges: EdgeDetector::new(EdgeConfig::for_rate(env_rate)),
            bursts: BurstSplitter::new(bcfg.clone()),
            edge_cfg: EdgeConfig::for_rate(env_rate),
            burst_cfg: bcfg,
            base: 0,
            segment_samples: 0,
            env_block: EnvelopeBlock::default(),
            marks: Vec::new(),
            closed: Vec::new(),
            presses: Vec::new(),
            hist: History::default(),
            lag_hist: History::default(),
            iq_hist: History::default(),
            hist_start: 0,
            margin: (env_rate * 0.025) as usize + 16,
            max_hist: (env_rate * 4.0) as usize + 4096,
            env_rate,
            samples: 0,
            undecoded: 0,
            max_presses: opts.max_presses,
            press_opts: opts.press,
            notes: Vec::new(),
            info,
        }
    }

    /// Feeds one block of samples.
    pub fn push(&mut self, block: Samples<'_>) {
        self.samples += block.len() as u64;
        self.segment_samples += block.len() as u64;
        self.env_block.clear();
        self.env.process(block, &mut self.env_block);
        self.take_envelope();
    }

    /// Runs the envelope block through edges and bursts and decodes closed bursts.
    fn take_envelope(&mut self) {
        self.marks.clear();
        self.edges
            .process(&self.env_block.env, &self.env_block.lag, &mut self.marks);
        self.hist.extend_from_slice(&self.env_block.env);
        self.lag_hist.extend_from_slice(&self.env_block.lag);
        self.iq_hist.extend_from_slice(&self.env_block.iq);
        self.route_marks();
        if !self.edges.in_mark() {
            let now = self.pos_of(self.edges.position() as f64);
            self.bursts.idle_until(now, &mut self.closed);
        }
        self.decode_closed();
        self.trim_history();
    }

    /// Passes over `n` samples the caller knows hold nothing (the squelch of
    /// [`decode_path`]): what the segment so far holds is read as at the end of a capture
    /// (an open mark or burst closes and is decoded), and the next block pushed starts a new
    /// segment at its true capture position, with the front, the edge detector and the
    /// burst splitter started afresh. Presses and notes carry over. Where the skipped samples
    /// held no burst the codes are those of pushing them, but not the report byte for byte:
    /// the restarted filters place edges a few microseconds differently.
    pub fn skip(&mut self, n: u64) {
        if n == 0 {
            return;
        }
        if self.segment_samples > 0 {
            self.flush_front();
            self.close_segment();
            self.env.reset();
            self.edges = EdgeDetector::new(self.edge_cfg.clone());
            self.bursts = BurstSplitter::new(self.burst_cfg.clone());
            self.hist.clear();
            self.lag_hist.clear();
            self.iq_hist.clear();
            self.hist_start = 0;
            self.segment_samples = 0;
        }
        self.samples += n;
        self.base = self.samples;
    }

    /// Releases what the front still holds and runs it through the stages.
    fn flush_front(&mut self) {
        self.env_block.clear();
        self.env.flush(&mut self.env_block);
        self.take_envelope();
    }

    /// Closes the open mark and burst and decodes every closed burst.
    fn close_segment(&mut self) {
        self.marks.clear();
        self.edges.finish(&mut self.marks);
        self.route_marks();
        self.bursts.finish(&mut self.closed);
        self.decode_closed();
    }

    /// Capture position of envelope sample `k` of the current segment.
    fn pos_of(&self, k: f64) -> f64 {
        self.base as f64 + self.env.position_of(k)
    }

    /// Envelope index of capture position `pos` (inverse of [`Decoder::pos_of`]).
    fn env_index(&self, pos: f64) -> f64 {
        self.env.index_of(pos - self.base as f64)
    }

    fn trim_history(&mut self) {
        let keep_from = match self.bursts.open_start() {
            Some(p) => (self.env_index(p).floor() as i64 - self.margin as i64).max(0) as u64,
            None if self.edges.in_mark() => self.hist_start + self.hist.len() as u64,
            None => (self.hist_start + self.hist.len() as u64).saturating_sub(self.margin as u64),
        };
        let keep_from = keep_from
            .max((self.hist_start + self.hist.len() as u64).saturating_sub(self.max_hist as u64));
        // An open mark's own samples are still needed.
        let keep_from = keep_from.min(self.hist_start + self.hist.len() as u64);
        if keep_from > self.hist_start {
            let n = ((keep_from - self.hist_start) as usize).min(self.hist.len());
            self.hist.drop_front(n);
            let nl = n.min(self.lag_hist.len());
            self.lag_hist.drop_front(nl);
            let ni = n.min(self.iq_hist.len());
            self.iq_hist.drop_front(ni);
            self.hist_start += n as u64;
        }
    }

    /// Second pass over one burst: the envelope re-smoothed to about a third of the burst's
    /// own short element, edges found again, and the press decoded from them. Returns `None`
    /// when the history no longer holds the burst or the smoothing would not change.
    fn reslice(&self, burst: &Burst) -> Option<(Option<PressDecode>, Vec<Mark>)> {
        let mut cleaned = burst.marks.clone();
        crate::bursts::merge_glitches(&mut cleaned, frames::GLITCH_FRACTION);
        let rough = coding::assess(&cleaned).into_iter().next()?;
        let unit_env = rough.unit / self.env.decim();
        let half = ((0.3 * unit_env) / 2.0).floor() as usize;
        let marks = self.smoothed_marks(burst, half, 16.0 * unit_env)?;
        let press = self.read_press(&Burst {
            marks: marks.clone(),
            capped: burst.capped,
        });
        Some((press, marks))
    }

    /// The edge reading of one burst. Once the capture has shown a superregenerative
    /// receiver's chatter, the burst is read with its irregular marks and the misfits at its
    /// ends removed ([`crate::bursts::strip_chatter`]) — a stretch of chatter next to a press
    /// is trimmed — unless a reading of the whole burst with repeats explains every removed
    /// mark (each lies within a mark of one of its full frames, half a unit either way): marks
    /// a line code explains are never lost to the trimming. Of the two readings the one with
    /// more frames then wins, the whole on a tie. Either is first confined to its full frames
    /// ([`Decoder::within_frames`]).
    fn read_press(&self, burst: &Burst) -> Option<PressDecode> {
        let whole = frames::decode_press_with(burst, &self.press_opts);
        if !self.bursts.chatter_seen() {
            return whole;
        }
        let mut marks = burst.marks.clone();
        if crate::bursts::strip_chatter(&mut marks) == 0 {
            return self.within_frames(whole, burst);
        }
        // The removed marks: stripping keeps the order, so one walk finds them.
        let mut kept = marks.iter().peekable();
        let removed: Vec<&Mark> = burst
            .marks
            .iter()
            .filter(|m| {
                if kept.peek() == Some(m) {
                    kept.next();
                    false
                } else {
                    true
                }
            })
            .collect();
        let explained = whole.as_ref().is_some_and(|p| {
            let tol = 0.5 * p.unit;
            let frame_marks: Vec<(f64, f64)> = p
                .frames
                .iter()
                .flat_map(|f| f.marks.iter().copied())
                .collect();
            p.frames.len() >= 2
                && removed.iter().all(|m| {
                    // Frame marks are in order: the last one rising before this mark.
                    let i = frame_marks.partition_point(|&(r, _)| r - tol <= m.rise);
                    i > 0 && frame_marks[i - 1].1 + tol >= m.fall
                })
        });
        let stripped_burst = Burst {
            marks,
            capped: burst.capped,
        };
        let stripped = frames::decode_press_with(&stripped_burst, &self.press_opts);
        let stripped = self.within_frames(stripped, &stripped_burst);
        if explained {
            better(stripped, self.within_frames(whole, burst))
        } else {
            stripped
        }
    }

    /// Amid chatter, marks of a burst before its reading's first full frame or after its last
    /// (half a unit either way) are chatter that fitted the code's widths, not a partial
    /// frame: the burst is read again without them, and that reading kept when it finds the
    /// same bits in as many full frames (the press then starts and ends with its frames).
    fn within_frames(&self, press: Option<PressDecode>, burst: &Burst) -> Option<PressDecode> {
        let p = press?;
        let (Some(first), Some(last)) = (p.frames.first(), p.frames.last()) else {
            return Some(p);
        };
        if p.frames.len() < 2 {
            return Some(p);
        }
        let tol = 0.5 * p.unit;
        let (a, b) = (first.start - tol, last.end + tol);
        let inside: Vec<Mark> = burst
            .marks
            .iter()
            .filter(|m| m.rise >= a && m.fall <= b)
            .copied()
            .collect();
        if inside.len() == burst.marks.len() {
            return Some(p);
        }
        let again = frames::decode_press_with(
            &Burst {
                marks: inside,
                capped: burst.capped,
            },
            &self.press_opts,
        );
        match again {
            Some(q) if q.bits == p.bits && q.frames.len() >= p.frames.len() => Some(q),
            _ => Some(p),
        }
    }

    /// The burst's envelope history (from a margin before it to `after` envelope samples
    /// past it) smoothed by a centred moving average of `2·half + 1` samples, and its marks,
    /// found with a lower threshold than the first pass's and placed by the area method, in
    /// capture positions.
    fn smoothed_marks(&self, burst: &Burst, half: usize, after: f64) -> Option<Vec<Mark>> {
        if half < 1 {
            return None;
        }
        let a = (self.env_index(burst.start()).floor() as i64 - self.margin as i64).max(0) as u64;
        // The first pass may have missed weak marks at either end: look a margin before and
        // some units after the burst.
        let b = self.env_index(burst.end()).ceil() as u64 + after.max(0.0).ceil() as u64;
        if a < self.hist_start {
            return None;
        }
        let lo = (a - self.hist_start) as usize;
        let hi = ((b.saturating_sub(self.hist_start)) as usize).min(self.hist.len());
        if hi <= lo + 2 * half + 8 {
            return None;
        }
        let smoothed = centred_average(&self.hist[lo..hi], half);
        let lag = if self.lag_hist.len() >= hi {
            &self.lag_hist[lo..hi]
        } else {
            &[][..]
        };
        // The burst is known to be there: a lower threshold than the first pass finds its
        // weak marks, and the glitch filter removes what noise adds.
        let mut cfg = EdgeConfig::for_rate(self.env_rate);
        cfg.warmup = (self.margin / 2).max(8);
        cfg.on_sigma = 3.0;
        let mut det = EdgeDetector::new(cfg);
        let mut marks = Vec::new();
        det.process(&smoothed, lag, &mut marks);
        det.finish(&mut marks);
        // The area method needs the mean idle level: take it from the quiet margin before
        // the burst (the detector's floor follows the median).
        let quiet = marks
            .first()
            .map_or(0, |m| (m.rise - (half + 3) as f64).max(0.0) as usize)
            .min(smoothed.len());
        let floor = if quiet >= 8 {
            (smoothed[..quiet].iter().map(|&x| x as f64).sum::<f64>() / quiet as f64) as f32
        } else {
            det.floor_and_noise().0
        };
        crate::edges::refine_edges(&smoothed, floor, &mut marks, half + 3);
        let mut marks: Vec<Mark> = crate::bursts::refine(marks, f64::INFINITY)
            .into_iter()
            .flatten()
            .collect();
        marks.retain(|m| m.width() > 0.0);
        let marks: Vec<Mark> = marks
            .into_iter()
            .map(|m| Mark {
                rise: self.pos_of(m.rise + a as f64),
                fall: self.pos_of(m.fall + a as f64),
                ..m
            })
            .collect();
        Some(marks)
    }

    /// Third reading of one burst: the most likely symbol sequence under one of the burst's
    /// timing plans ([`crate::trellis`]), laid on the envelope history. Plans come from every
    /// PWM/PPM hypothesis of the second pass's marks, the first pass's and a smoothing
    /// ladder; all share one window and one pair of levels, the likeliest few are searched
    /// with free and then exact frame lengths, and the likeliest reading that fits wins.
    fn trellis_reading(
        &self,
        burst: &Burst,
        second: Option<&[Mark]>,
        known_bits: Option<usize>,
    ) -> Option<PressDecode> {
        // Marks to read a plan from: the second pass's, the first pass's, and the envelope
        // smoothed over a ladder of fixed widths (near the noise floor the first two may not
        // show the timing at all).
        let mut bases: Vec<Vec<Mark>> = Vec::new();
        if let Some(m) = second {
            bases.push(m.to_vec());
        }
        bases.push(burst.marks.clone());
        for us in LADDER_US {
            let half = (us * 1e-6 * self.env_rate / 2.0).floor() as usize;
            if let Some(m) = self.smoothed_marks(burst, half, us * 1e-6 * self.env_rate * 8.0) {
                bases.push(m);
            }
        }
        let mut plans: Vec<crate::trellis::PlanReading> = Vec::new();
        for m in &bases {
            for p in crate::trellis::plans_of(m) {
                if !plans.iter().any(|q| same_plan(&q.plan, &p.plan)) {
                    plans.push(p);
                }
            }
        }
        // One window and one set of levels for every plan, so their likelihoods compare.
        let decim = self.env.decim();
        let first_unit = plans.first()?.plan.unit / decim;
        let a = (self.env_index(burst.start()).floor() as i64 - self.margin as i64).max(0) as u64;
        // Sixteen units past the burst for marks the first pass missed at its end — in the
        // units of the most trusted plan, never more than the burst is long (a plan read from
        // noise may have an absurd unit).
        let span = self.env_index(burst.end()) - self.env_index(burst.start());
        let after = (16.0 * first_unit).min(span.max(0.0));
        let b = self.env_index(burst.end()).ceil() as u64 + after.ceil() as u64;
        if a < self.hist_start {
            return None;
        }
        let lo = (a - self.hist_start) as usize;
        let hi = ((b.saturating_sub(self.hist_start)) as usize).min(self.hist.len());
        if hi <= lo + 16 {
            return None;
        }
        let env = &self.hist[lo..hi];
        let level_half = (first_unit / 2.0).floor() as usize;
        let (idle, carrier, spread) = two_levels(env, level_half)?;
        // The search reads the burst integrated coherently over half a unit when the
        // channel's samples are at hand (a narrower look than the channel's own envelope,
        // module `front::coherent`), else the envelope itself.
        let coherent = self.coherent_look(lo, hi, first_unit);
        let look = coherent.as_ref().map(|c| &c.look[..]);
        let (look_idle, look_carrier) = match &look {
            Some(m) => {
                let (i, c, _) = two_levels(m, level_half)?;
                (i, c)
            }
            None => (idle, carrier),
        };
        let mid = (look_idle + 0.5 * (look_carrier - look_idle)) as f32;
        let llr: Vec<f32> = look.unwrap_or(env).iter().map(|&x| x - mid).collect();
        if std::env::var_os("OOKSIFT_DEBUG").is_some() {
            eprintln!(
                "  trellis levels idle {idle:.4} carrier {carrier:.4} spread {spread:.4}; searched {} idle {look_idle:.4} carrier {look_carrier:.4}",
                if look.is_some() { "coherent" } else { "envelope" }
            );
        }
        let half = 0.5 * (look_carrier - look_idle);
        // The searches read whole marks coherently when the channel's samples are at hand:
        // the carrier turned to zero frequency, its amplitude and the noise of a sum of
        // samples from the look's levels (the idle level of a boxcar mean of `len` samples is
        // Rayleigh: √(π·σ²/(4·len))). The look's per-sample ratios stay for the fits. Every
        // search of the burst shares the whole-mark scores it computes.
        let marks = coherent
            .as_ref()
            .map(|c| crate::trellis::MarkCache::new(&c.centred));
        let ev = match &coherent {
            Some(c) if std::env::var_os("OOKSIFT_NO_WHOLE_MARKS").is_none() => {
                // Power of the noise in a boxcar mean, and the carrier's amplitude under it:
                // a Rician magnitude's mean is about √(A² + σ²/2) when A ≫ σ.
                let boxcar_noise = 4.0 * look_idle * look_idle / std::f64::consts::PI;
                let amplitude = (look_carrier * look_carrier - boxcar_noise / 2.0)
                    .max(look_carrier * look_carrier / 4.0)
                    .sqrt();
                crate::trellis::Evidence::Coherent {
                    iq: &c.centred,
                    amplitude,
                    noise_power: c.len as f64 * boxcar_noise,
                    shared: marks.as_ref(),
                }
            }
            _ => crate::trellis::Evidence::Llr(&llr),
        };
        let win = TrellisWindow {
            a,
            lo,
            hi,
            env,
            llr: &llr,
            ev,
            half,
            idle,
            spread,
        };
        // Every plan scored once by its free search; the likeliest few get their unit fitted
        // and the exact-length searches (the costly part).
        let mut ranked: Vec<(f64, crate::trellis::Plan, &crate::trellis::PlanReading, bool)> = plans
            .iter()
            .filter_map(|reading| {
                let unit = reading.plan.unit / decim;
                (unit >= 2.0).then(|| {
                    let plan = crate::trellis::Plan {
                        unit,
                        ..reading.plan.clone()
                    };
                    let free = crate::trellis::segment_coarse(&llr, &plan);
                    let fit = free.fit(&llr, half);
                    if std::env::var_os("OOKSIFT_DEBUG").is_some() {
                        eprintln!(
                            "  trellis plan {} ({:.2}) unit {:.1}: score {:.1}, {} frames, fit {fit:.2}",
                            reading.line_code,
                            reading.score,
                            plan.unit,
                            free.score,
                            free.frames.len(),
                        );
                    }
                    // A plan whose coarse reading holds no repeat, or lies far off the
                    // envelope, is not worth fitting (five to seven fine searches).
                    let promising = free.frames.len() >= 2 && fit >= MIN_COARSE_FIT;
                    (free.score, plan, reading, promising)
                })
            })
            .collect();
        ranked.sort_by(|x, y| y.0.total_cmp(&x.0));
        ranked.truncate(TRELLIS_EXACT_PLANS);
        let ranked = ranked
            .into_iter()
            .filter(|r| r.3 || std::env::var_os("OOKSIFT_NO_GATE").is_some())
            .map(|r| (r.0, r.1, r.2));
        // What a plan is searched on: whole marks for codes whose symbols differ in their
        // marks, else the look's llr (see `whole_marks_for`).
        let ev_for = |plan: &crate::trellis::Plan| {
            if whole_marks_for(plan) {
                ev
            } else {
                crate::trellis::Evidence::Llr(&llr)
            }
        };
        // Each fitted plan with its free reading at the fitted unit.
        let mut fitted: Vec<Fitted> = ranked
            .into_iter()
            .map(|(_, plan, reading)| {
                let (plan, free) = crate::trellis::fit_unit(ev_for(&plan), &plan, 0.15, 0.025);
                (plan, free, reading)
            })
            .collect();
        // The plan whose free reading lies best on the look, when it is PWM, on its fitted
        // bit period with the other common duty ratios (a weak burst's period is read well,
        // its duty not), their units fitted closely. (Not when a PPM plan fits best: PWM
        // variants then read a PPM burst as a wrong PWM code now and then.)
        let duty = variants_of(&fitted, &llr, half, crate::trellis::duty_variants, |v| {
            crate::trellis::fit_unit(ev_for(&v), &v, 0.05, 0.025)
        });
        fitted.extend(duty);
        // The best-fitting plan with a header, also with the header's space a unit or two
        // longer or shorter, at its fitted unit (`trellis::header_variants`).
        let headers = variants_of(&fitted, &llr, half, crate::trellis::header_variants, |v| {
            let free = crate::trellis::segment(ev_for(&v), &v);
            (v, free)
        });
        fitted.extend(headers);
        // Plans compete by the likelihood of their best readings.
        let mut best: Option<(f64, PressDecode)> = None;
        for (plan, free, reading) in fitted {
            let shape = std::env::var_os("OOKSIFT_DEBUG")
                .is_some()
                .then(|| plan.to_string());
            let r = self
                .trellis_with(burst, &win, plan, free, reading.line_code, known_bits)
                .map(|(score, mut p)| {
                    // The line-code evidence is the widths the plan was read from; the
                    // trellis's own widths fit the plan by construction.
                    p.score = reading.score;
                    p.runner_up = reading.runner_up;
                    (score, p)
                });
            if std::env::var_os("OOKSIFT_DEBUG").is_some() {
                if let Some((sc, p)) = &r {
                    eprintln!(
                        "  trellis reading score {sc:.1}: {} {} x{} ({})",
                        p.line_code,
                        frames::bit_string(&p.bits),
                        p.frames.len(),
                        shape.unwrap_or_default()
                    );
                }
            }
            best = match (best, r) {
                (Some(b), Some(r)) if r.0 > b.0 => Some(r),
                (b, r) => b.or(r),
            };
        }
        best.map(|b| b.1)
    }

    /// The channel's samples `lo..hi` of the history, aligned with the envelope, as the
    /// trellis reads them ([`CoherentLook`]); `None` for the whole band, or when the history
    /// holds no channel samples there.
    fn coherent_look(&self, lo: usize, hi: usize, unit: f64) -> Option<CoherentLook> {
        let Front::Channel(ch) = &self.env else {
            return None;
        };
        if std::env::var_os("OOKSIFT_NO_COHERENT").is_some()
            || self.iq_hist.len() < hi
            || unit.is_nan()
            || unit < 2.0
        {
            return None;
        }
        let len = (COHERENT_UNITS * unit).round().max(1.0) as usize;
        let segment = (COHERENT_SEGMENT_UNITS * unit).round() as usize;
        let (iq, rate, span) = (
            &self.iq_hist[lo..hi],
            ch.plan().out_rate_hz,
            ch.plan().bandwidth_hz,
        );
        use crate::front::coherent::{centred_carrier, coherent_envelope};
        Some(CoherentLook {
            look: coherent_envelope(iq, rate, len, span, segment, ch.smoothing_delay()),
            centred: centred_carrier(iq, rate, len, span, segment, ch.smoothing_delay()),
            len,
        })
    }

    /// One trellis search of `burst` under `plan` (capture samples) in the window `win`,
    /// from the free search at the plan's fitted unit (`free`, by [`crate::trellis::fit_unit`]).
    fn trellis_with(
        &self,
        burst: &Burst,
        win: &TrellisWindow<'_>,
        env_plan: crate::trellis::Plan,
        free: crate::trellis::Reading,
        line_code: coding::LineCode,
        known_bits: Option<usize>,
    ) -> Option<(f64, PressDecode)> {
        let TrellisWindow {
            a,
            lo,
            hi,
            env,
            llr,
            idle,
            spread,
            ..
        } = *win;
        let mean = |v: &[f32]| v.iter().map(|&x| x as f64).sum::<f64>() / v.len() as f64;
        let lag = &self.lag_hist;
        let build = |spans: &[(f64, f64)]| -> Option<PressDecode> {
            if spans.is_empty() {
                return None;
            }
            let marks: Vec<Mark> = spans
                .iter()
                .map(|&(r, f)| {
                    let (ri, fi) = (r as usize, (f as usize).min(env.len()));
                    let level = if fi > ri {
                        mean(&env[ri..fi]) - idle
                    } else {
                        0.0
                    };
                    let lag_sum = if lag.len() >= hi {
                        lag[lo + ri..lo + fi]
                            .iter()
                            .map(|z| num_complex::Complex64::new(z.re as f64, z.im as f64))
                            .sum()
                    } else {
                        num_complex::Complex64::default()
                    };
                    Mark {
                        rise: self.pos_of(r + a as f64),
                        fall: self.pos_of(f + a as f64),
                        level: level as f32,
                        noise: spread as f32,
                        lag: lag_sum,
                    }
                })
                .collect();
            // The marks are read as the code the plan belongs to (a forced code must match).
            if self.press_opts.line_code.is_some_and(|lc| lc != line_code) {
                return None;
            }
            let opts = frames::PressOptions {
                line_code: Some(line_code),
                ..self.press_opts
            };
            frames::decode_press_with(
                &Burst {
                    marks,
                    capped: burst.capped,
                },
                &opts,
            )
        };
        // The free search at the fitted unit: its fit gates the exact searches, its modal
        // length is one of theirs.
        // Whole marks for codes whose symbols differ in their marks; the look's llr for the
        // rest (see `whole_marks_for`).
        let win = &TrellisWindow {
            ev: if whole_marks_for(&env_plan) {
                win.ev
            } else {
                crate::trellis::Evidence::Llr(llr)
            },
            ..*win
        };
        // Whole-mark scores rest on the carrier's amplitude, which the look's levels
        // underestimate for short marks (its boxcar ramps over half a unit at each edge): the
        // searches from here on assume the amplitude measured inside the free reading's
        // marks, within half and twice the look's. The fits hold the marks to the amplitude
        // under the free reading's whole marks (what a right reading's marks hold), but count
        // dead marks and lit spaces against at least the look's: a reading whose marks hold
        // less has laid some on noise, and measured from them, the amplitude would pass them.
        let (ev, ev_search, own, free) = match win.ev {
            crate::trellis::Evidence::Coherent { amplitude, .. } => {
                match (
                    free.mark_amplitude(win.ev, 0.0),
                    free.mark_amplitude(win.ev, MARK_TRIM),
                ) {
                    (Some(whole), Some(inner)) => {
                        let ev_search = win
                            .ev
                            .with_amplitude(inner.clamp(amplitude / 2.0, amplitude * 2.0));
                        let free = crate::trellis::segment(ev_search, &env_plan);
                        let own = whole.clamp(amplitude / 2.0, amplitude * 2.0);
                        (
                            win.ev.with_amplitude(own.max(amplitude)),
                            ev_search,
                            Some(own),
                            free,
                        )
                    }
                    _ => (win.ev, win.ev, None, free),
                }
            }
            _ => (win.ev, win.ev, None, free),
        };
        let free_fit = free.fit_to(ev, win.half, own);
        if std::env::var_os("OOKSIFT_DEBUG").is_some() {
            eprintln!(
                "  trellis free {line_code} unit {:.1}: {} frames, fit {free_fit:.2}",
                env_plan.unit,
                free.frames.len()
            );
        }
        // The exact-length searches cost the most (their table grows with the frame length);
        // a plan whose free reading lies far off the envelope or holds no repeat will not
        // pass the final checks.
        if free.frames.len() < 2 || free_fit < MIN_FREE_FIT {
            return None;
        }
        // Frame lengths to search: the edge readings' and the free search's modal length.
        let mut lengths: Vec<usize> = known_bits.into_iter().collect();
        for n in free.modal_lengths() {
            if !lengths.contains(&n) {
                lengths.push(n);
            }
        }
        // The reading whose code most frames repeat wins, then the likeliest: a mark laid on
        // the noise just before or after each frame raises the likelihood of a reading one
        // bit longer, but where it lies differs from frame to frame. A trellis lays perfect
        // widths by construction, so a single clean-looking frame proves nothing: its
        // readings need repeats that agree.
        let mut best: Option<(f64, PressDecode)> = None;
        let rank = |score: f64, p: &PressDecode| (p.frames.len(), score);
        let mut best_llr = 0.0;
        for n in lengths {
            let r = crate::trellis::segment_frames(ev_search, &env_plan, Some(n));
            if std::env::var_os("OOKSIFT_DEBUG").is_some() {
                eprintln!(
                    "  trellis {line_code} {:?} gap {:.1} unit {:.1}: {n} bits, score {:.1}, {} frames",
                    env_plan.symbols.iter().map(|s| (s.mark, s.space)).collect::<Vec<_>>(),
                    env_plan.gap_min,
                    env_plan.unit,
                    r.score,
                    r.frames.len()
                );
            }
            let fit = r.fit_to(ev, win.half, own);
            if std::env::var_os("OOKSIFT_DEBUG").is_some() {
                eprintln!("    fit {fit:.2} (on the look {:.2})", r.fit(llr, win.half));
                for f in &r.frames {
                    eprintln!("    frame {}", frames::bit_string(&f.bits));
                }
            }
            // A whole-mark reading must also lie on the look, loosely: marks laid on noise
            // peaks as often as on the carrier (a PPM code read as a train of short symbols)
            // fit the whole-mark amplitudes they set themselves.
            if fit < MIN_TRELLIS_FIT || (own.is_some() && r.fit(llr, win.half) < MIN_LOOK_FIT) {
                continue;
            }
            // The marks are read again as a code (the frame layout, voting). Coming back with
            // another frame length, a mark the search laid as framing was read as a bit or
            // the reverse (a closing mark laid two units long reads as a long mark): kept
            // only when the edge readings' full frames had that length too.
            let framed =
                |p: &PressDecode| p.bits.len() == n || known_bits.is_none_or(|k| p.bits.len() == k);
            // Its repeats are the only evidence it is not noise: they must agree more than
            // noise read as frames of that length would by chance.
            let beyond_chance = |p: &PressDecode| {
                let exact = p.frames.iter().filter(|f| f.bits == p.bits).count();
                let read = p.frames.len() + p.partial_frames;
                frames::chance_agreement(p.bits.len(), read, exact) <= frames::MAX_CHANCE_AGREEMENT
            };
            if let Some(p) =
                build(&r.marks).filter(|p| p.frames.len() >= 2 && framed(p) && beyond_chance(p))
            {
                if best
                    .as_ref()
                    .is_none_or(|b| rank(r.score, &p) > rank(b.0, &b.1))
                {
                    best = Some((r.score, p));
                    best_llr = llr_score(llr, &r);
                }
            }
        }
        // Plans compete on the look's likelihood, whatever their searches read.
        best.map(|b| (best_llr, b.1))
    }

    fn route_marks(&mut self) {
        let base = self.base as f64;
        for m in self.marks.drain(..) {
            let mapped = Mark {
                rise: base + self.env.position_of(m.rise),
                fall: base + self.env.position_of(m.fall),
                ..m
            };
            self.bursts.push(mapped, &mut self.closed);
        }
    }

    fn decode_closed(&mut self) {
        let closed = std::mem::take(&mut self.closed);
        for b in closed {
            if b.capped {
                self.notes.push(format!(
                    "a burst at {:.3} s reached the mark limit; its later marks were ignored",
                    self.info.rate.to_s(b.start())
                ));
            }
            if std::env::var_os("OOKSIFT_DEBUG_MARKS").is_some() {
                for m in b.marks.iter().take(40) {
                    eprintln!(
                        "  mark {:.5} s width {:.1} µs level {:.4} noise {:.4}",
                        self.info.rate.to_s(m.rise),
                        self.info.rate.to_s(m.width()) * 1e6,
                        m.level,
                        m.noise
                    );
                }
            }
            let first = self.read_press(&b);
            let (second, second_marks) = match self.reslice(&b) {
                Some((p, m)) => (p, Some(m)),
                None => (None, None),
            };
            let known = [&first, &second]
                .into_iter()
                .flatten()
                .filter(|p| p.frames.len() >= 2)
                .map(|p| p.bits.len())
                .next();
            // A clean edge reading (every frame full and exact) leaves the trellis nothing to
            // win: it replaces a reading only with more full frames or fewer corrections.
            let clean = [&first, &second]
                .into_iter()
                .flatten()
                .any(|p| p.frames.len() >= 2 && p.corrected_bits == 0 && p.partial_frames == 0);
            // Nor a burst the edges read as another line code with repeats: the trellis knows
            // PWM and PPM only (a neighbour's keying sidebands often read as Manchester).
            let other_code = [&first, &second].into_iter().flatten().any(|p| {
                p.frames.len() >= 2
                    && !matches!(p.line_code, coding::LineCode::Pwm | coding::LineCode::Ppm)
            });
            let third = if clean || other_code || std::env::var_os("OOKSIFT_NO_TRELLIS").is_some() {
                None
            } else {
                self.trellis_reading(&b, second_marks.as_deref(), known)
            };
            if std::env::var_os("OOKSIFT_DEBUG").is_some() {
                let d = |p: &Option<PressDecode>| {
                    p.as_ref().map(|p| {
                        (
                            p.frames.len(),
                            p.partial_frames,
                            frames::bit_string(&p.bits),
                        )
                    })
                };
                eprintln!(
                    "burst {:.4}..{:.4} s, {} marks: first {:?} second {:?} trellis {:?}",
                    self.info.rate.to_s(b.start()),
                    self.info.rate.to_s(b.end()),
                    b.marks.len(),
                    d(&first),
                    d(&second),
                    d(&third)
                );
            }
            let chosen =
                prefer_trellis(better(first, second), third).filter(|p| explains_its_burst(p, &b));
            match chosen {
                Some(p) if self.presses.len() < self.max_presses => self.presses.push(p),
                Some(_) => {
                    if !self.notes.iter().any(|n| n.starts_with("press limit")) {
                        self.notes.push(format!(
                            "press limit of {} reached; later presses were not kept",
                            self.max_presses
                        ));
                    }
                }
                None => self.undecoded += 1,
            }
        }
    }

    /// Presses decoded so far (streams print them as they come).
    pub fn presses(&self) -> &[PressDecode] {
        &self.presses
    }

    /// Flushes the stages at the end of the capture and builds the report.
    pub fn finish(mut self) -> DecodeReport {
        self.flush_front();
        if let Front::Wide(w) = &self.env {
            if let Some(s) = w.restoration() {
                if s.inverted {
                    self.notes
                        .push("the envelope was inverted; marks read as the low level".into());
                }
                if let Some(t) = s.tau_s {
                    self.notes.push(format!(
                        "the envelope was AC-coupled; a high-pass of τ ≈ {:.2} ms was undone",
                        t * 1e3
                    ));
                }
            }
        }
        self.close_segment();
        let rate = self.info.rate;
        let (base, lag_rate) = (self.carrier_base_hz, self.lag_rate_hz);
        let mut codes: Vec<CodeReport> = frames::group(std::mem::take(&mut self.presses))
            .iter()
            .map(|g| CodeReport::from_group(g, rate, base, lag_rate))
            .collect();
        if let Front::Channel(c) = &self.env {
            // A code whose carrier lies outside this channel's passband leaked in from a
            // stronger neighbour (keying sidebands look like carriers of their own): it belongs
            // to the neighbour's channel, not this one.
            let (centre, half) = (c.plan().nco_offset_hz, c.plan().bandwidth_hz / 2.0);
            let before = codes.len();
            codes.retain(|k| {
                k.carrier_offset_hz
                    .is_none_or(|f| (f - centre).abs() <= half)
            });
            self.undecoded += before - codes.len();
        }
        DecodeReport {
            generator: format!("ooksift {}", env!("CARGO_PKG_VERSION")),
            capture: CaptureSummary::new(&self.info, self.samples),
            codes,
            undecoded_bursts: self.undecoded,
            notes: self.notes,
            caution: CAUTION.to_string(),
        }
    }
}

/// A sample history that drops from the front in amortised constant time, in no more than
/// twice the memory of its live samples: dropped samples are only skipped, and the live ones
/// move to the front of the buffer when a new block would not fit (dropping with
/// `Vec::drain` moved the whole live history on every block); only then does the buffer
/// grow, to twice what it must hold. (Compacting only once half the buffer was skipped let
/// `Vec` double a full buffer first: up to four times the live size, 46.8 MiB peak on a 600 s
/// capture against 36.0 now. Growing by an eighth saved 3 MiB more but cost 40 % more CPU in
/// moves.) Reads see the live samples as a slice.
#[derive(Debug, Clone)]
struct History<T> {
    buf: Vec<T>,
    /// Samples at the front of `buf` already dropped.
    skip: usize,
}

impl<T> Default for History<T> {
    fn default() -> Self {
        History {
            buf: Vec::new(),
            skip: 0,
        }
    }
}

impl<T: Copy> History<T> {
    fn extend_from_slice(&mut self, v: &[T]) {
        if self.buf.len() + v.len() > self.buf.capacity() {
            if self.skip > 0 {
                self.buf.drain(..self.skip);
                self.skip = 0;
            }
            let need = self.buf.len() + v.len();
            if need > self.buf.capacity() {
                let grow = need.max(4096);
                self.buf.reserve_exact(grow);
            }
        }
        self.buf.extend_from_slice(v);
    }

    /// Drops the `n` oldest live samples (all of them when fewer are held).
    fn clear(&mut self) {
        self.buf.clear();
        self.skip = 0;
    }

    fn drop_front(&mut self, n: usize) {
        self.skip = self.skip.saturating_add(n).min(self.buf.len());
        if self.skip == self.buf.len() {
            self.buf.clear();
            self.skip = 0;
        }
    }

    /// Bytes the buffer holds (live, skipped and spare).
    #[cfg(test)]
    fn capacity_bytes(&self) -> usize {
        self.buf.capacity() * std::mem::size_of::<T>()
    }
}

impl<T> std::ops::Deref for History<T> {
    type Target = [T];
    fn deref(&self) -> &[T] {
        self.buf.get(self.skip..).unwrap_or(&[])
    }
}

/// A centred moving average of `2·half + 1` samples (shorter at the ends).
fn centred_average(x: &[f32], half: usize) -> Vec<f32> {
    let n = x.len();
    let mut prefix = Vec::with_capacity(n + 1);
    prefix.push(0.0f64);
    for &v in x {
        let last = prefix[prefix.len() - 1];
        prefix.push(last + v as f64);
    }
    (0..n)
        .map(|k| {
            let lo = k.saturating_sub(half);
            let hi = (k + half + 1).min(n);
            ((prefix[hi] - prefix[lo]) / (hi - lo) as f64) as f32
        })
        .collect()
}

/// The better of two readings of one press: more full frames, then fewer corrected bits,
/// then the higher score.
fn better(a: Option<PressDecode>, b: Option<PressDecode>) -> Option<PressDecode> {
    match (a, b) {
        (Some(a), Some(b)) => {
            let key = |p: &PressDecode| {
                (
                    p.frames.len(),
                    std::cmp::Reverse(p.corrected_bits),
                    (p.score * 1000.0) as i64,
                )
            };
            Some(if key(&b) >= key(&a) { b } else { a })
        }
        (a, b) => a.or(b),
    }
}

/// A channel's burst as the trellis reads it.
struct CoherentLook {
    /// Magnitudes integrated coherently over [`COHERENT_UNITS`] of a unit (`len` samples):
    /// plans are ranked on it and fits checked against it.
    look: Vec<f32>,
    /// The samples with the carrier turned to zero frequency: whole-mark searches read them.
    centred: Vec<num_complex::Complex32>,
    len: usize,
}

/// The envelope window of one burst the trellis searches, with its levels.
#[derive(Clone, Copy)]
struct TrellisWindow<'a> {
    /// Envelope index of `env[0]`.
    a: u64,
    /// `env` as a range of the history.
    lo: usize,
    hi: usize,
    env: &'a [f32],
    llr: &'a [f32],
    /// What the searches read: `llr`, or the burst's samples for whole-mark scores.
    ev: crate::trellis::Evidence<'a>,
    /// Half the step between the carrier and idle levels of what `llr` was made from.
    half: f64,
    /// Idle level and spread of `env`.
    idle: f64,
    spread: f64,
}

/// Idle and carrier levels of a burst's envelope and the idle spread: the envelope averaged
/// over about a unit (`2·half + 1` samples) splits into two classes at the cut that maximises
/// the between-class variance (Otsu's method); the class means of the raw samples on either
/// side are the levels. `None` when the envelope shows no two levels.
fn two_levels(env: &[f32], half: usize) -> Option<(f64, f64, f64)> {
    if env.len() < 16 {
        return None;
    }
    let smooth = centred_average(env, half.max(1));
    let mut sorted = smooth.clone();
    sorted.sort_by(f32::total_cmp);
    let n = sorted.len() as f64;
    let total: f64 = sorted.iter().map(|&x| x as f64).sum();
    let (mut acc, mut best) = (0.0f64, (f64::MIN, sorted[0]));
    for k in 1..sorted.len() {
        acc += sorted[k - 1] as f64;
        let n0 = k as f64;
        let m0 = acc / n0;
        let m1 = (total - acc) / (n - n0);
        let between = n0 * (n - n0) * (m1 - m0).powi(2);
        if between > best.0 {
            best = (between, sorted[k]);
        }
    }
    let cut = best.1;
    let (mut s0, mut q0, mut c0, mut s1, mut c1) = (0.0f64, 0.0f64, 0usize, 0.0f64, 0usize);
    for (&x, &m) in env.iter().zip(&smooth) {
        if m < cut {
            s0 += x as f64;
            q0 += (x as f64).powi(2);
            c0 += 1;
        } else {
            s1 += x as f64;
            c1 += 1;
        }
    }
    if c0 < 8 || c1 < 8 {
        return None;
    }
    let (idle, carrier) = (s0 / c0 as f64, s1 / c1 as f64);
    let spread = (q0 / c0 as f64 - idle * idle).max(0.0).sqrt();
    (carrier > idle).then_some((idle, carrier, spread))
}

/// One survey frame in this many feeds the statistics of `decode_path`'s survey ...
pub const SURVEY_FRAME_STRIDE: usize = 4;
/// ... after the first this many seconds of the capture, which are analysed in full.
pub const SURVEY_FULL_SECONDS: f64 = 4.0;

/// Plans (the likeliest by their free search) that get the exact-length searches.
const TRELLIS_EXACT_PLANS: usize = 3;
/// Length of the coherent integration the trellis reads a channel's burst through, in units.
const COHERENT_UNITS: f64 = 0.5;
/// Segments of a burst that each pick their own carrier offset for it, in units.
const COHERENT_SEGMENT_UNITS: f64 = 24.0;

/// Share of a mark's length left out at either end where the amplitude whole-mark searches
/// assume is measured ([`crate::trellis::Reading::mark_amplitude`]). Measured on the
/// sensitivity benchmark's PPM code at 12 and 13 dB (100 trials): the amplitude under whole
/// marks gave frame success 0.33 and 0.74; scaled by 1.1 and 1.2, 0.42/0.78 and 0.42/0.80;
/// trimmed by an eighth, 0.41/0.77 (whole-mark scores off: 0.38/0.78).
const MARK_TRIM: f64 = 0.125;

/// Whether the trellis reads `plan` on whole marks ([`crate::trellis::Evidence::Coherent`])
/// when a channel's samples are at hand: when its symbols differ in their marks (PWM). Where
/// they differ only in their spaces (PPM), whole marks read as many frames in the sensitivity
/// sweep (12/13 dB: 0.385/0.829 against 0.378/0.816) but made twice the wrong codes (32
/// against 14 of 200 presses at 12 dB, most a short symbol inserted before each frame's
/// first), so PPM keeps the look's per-sample llr.
fn whole_marks_for(plan: &crate::trellis::Plan) -> bool {
    let marks = plan.symbols.iter().map(|s| s.mark);
    let (lo, hi) = marks.fold((f64::MAX, f64::MIN), |(lo, hi), m| (lo.min(m), hi.max(m)));
    hi - lo >= 0.5
}

/// The look's log-likelihood ratio of a reading: the sum of `llr` under its marks.
fn llr_score(llr: &[f32], r: &crate::trellis::Reading) -> f64 {
    r.marks
        .iter()
        .map(|&(a, b)| {
            let (a, b) = ((a as usize).min(llr.len()), (b as usize).min(llr.len()));
            llr[a..b.max(a)].iter().map(|&v| v as f64).sum::<f64>()
        })
        .sum()
}

/// Lowest fit on the look ([`crate::trellis::Reading::fit`]) of a whole-mark reading (whose own
/// fit is [`crate::trellis::Reading::fit_to`]). Measured on seeded captures near the floor (PWM
/// 10 dB, PPM 11 and 12 dB): right readings 0.77–1.0, trains of short symbols laid over PPM
/// codes 0.54–0.67; any bound from 0.6 to 0.75 kept every right code and removed those.
const MIN_LOOK_FIT: f64 = 0.7;

/// Lowest fit of a trellis reading: the mean log-likelihood ratio under its marks, and minus
/// that under the spaces inside its frames, as a fraction of half the level difference (1 for
/// a reading that lays every mark and space where they are).
const MIN_TRELLIS_FIT: f64 = 0.9;
/// Lowest fit of a plan's free reading for its exact-length searches to run. Free and exact
/// fits of one plan differed by at most 0.11 on 24 captures at 10 and 12 dB; right plans'
/// free fits were 0.91–1.02.
const MIN_FREE_FIT: f64 = 0.8;
/// Lowest fit of a plan's coarse free reading (at its unread unit, on the quarter-unit grid)
/// for the plan to have its unit fitted: below it, the fitted reading would not reach
/// [`MIN_FREE_FIT`] either (measured: the sweep's counts unchanged at 0.5).
const MIN_COARSE_FIT: f64 = 0.5;

/// Smoothing widths (µs) the trellis stage reads timing plans from, besides the first and
/// second passes' marks.
const LADDER_US: [f64; 3] = [120.0, 250.0, 500.0];

/// A fitted plan with its free reading and the marks' reading it came from.
type Fitted<'r> = (
    crate::trellis::Plan,
    crate::trellis::Reading,
    &'r crate::trellis::PlanReading,
);

/// The fitted plan whose free reading lies best on the look `llr` ([`crate::trellis::Reading::fit`]).
fn best_fitting<'f, 'r>(
    fitted: &'f [Fitted<'r>],
    llr: &[f32],
    half: f64,
) -> Option<&'f Fitted<'r>> {
    fitted
        .iter()
        .map(|f| (f, f.1.fit(llr, half)))
        .max_by(|a, b| a.1.total_cmp(&b.1))
        .map(|(f, _)| f)
}

/// The plans `make` derives from the best-fitting fitted plan ([`best_fitting`]), those not
/// fitted already, each with the free reading `search` gives it, credited to the same
/// marks' reading.
fn variants_of<'r>(
    fitted: &[Fitted<'r>],
    llr: &[f32],
    half: f64,
    make: impl Fn(&crate::trellis::Plan) -> Vec<crate::trellis::Plan>,
    search: impl Fn(crate::trellis::Plan) -> (crate::trellis::Plan, crate::trellis::Reading),
) -> Vec<Fitted<'r>> {
    let Some(&(ref plan, _, reading)) = best_fitting(fitted, llr, half) else {
        return Vec::new();
    };
    make(plan)
        .into_iter()
        .filter(|v| !fitted.iter().any(|f| same_plan(&f.0, v)))
        .map(|v| {
            let (v, free) = search(v);
            (v, free, reading)
        })
        .collect()
}

/// Plans alike enough to give the same search.
fn same_plan(a: &crate::trellis::Plan, b: &crate::trellis::Plan) -> bool {
    (a.unit - b.unit).abs() <= 0.03 * a.unit
        && a.symbols == b.symbols
        && a.header == b.header
        && a.closing == b.closing
}

/// The trellis reading replaces the edge-based one only when it holds more full frames, or as
/// many with fewer corrected bits: on clean bursts the edge-based reading keeps its
/// sub-sample edges.
/// A reading of one frame only must hold at least half its burst's marks, once the burst's
/// glitches are merged: a burst that is mostly noise marks (a wide channel near the floor
/// makes hundreds a second) can be sliced into one long frame of nearly any code — measured:
/// 280-bit PPM "codes" of one frame inside 0.9 s bursts of 1 000 noise marks at Eu/N0 =
/// 14 dB. (Raw marks rejected a clean 8-bit frame whose marks the first pass had split; the
/// frame's share of the burst's duration kept the noise codes.) Repeated frames must agree,
/// so they need no such check.
fn explains_its_burst(p: &PressDecode, burst: &Burst) -> bool {
    match p.frames.as_slice() {
        [only] => {
            let mut marks = burst.marks.clone();
            crate::bursts::merge_glitches(&mut marks, frames::GLITCH_FRACTION);
            2 * only.marks.len() >= marks.len()
        }
        _ => true,
    }
}

fn prefer_trellis(edges: Option<PressDecode>, trellis: Option<PressDecode>) -> Option<PressDecode> {
    match (edges, trellis) {
        (Some(e), Some(t)) => {
            let wins = t.frames.len() > e.frames.len()
                || (t.frames.len() == e.frames.len() && t.corrected_bits < e.corrected_bits);
            Some(if wins { t } else { e })
        }
        (e, t) => e.or(t),
    }
}

/// Decodes every block of `src`.
pub fn decode_source(
    src: &mut dyn SampleSource,
    opts: &DecodeOptions,
) -> Result<DecodeReport, DecodeError> {
    let mut dec = Decoder::new(src.info().clone(), opts);
    let total = src.info().declared_samples.unwrap_or(0);
    let mut done = 0u64;
    while let Some(block) = src.next_block()? {
        done += block.len() as u64;
        dec.push(block);
        if let Some(p) = &opts.progress {
            (p.0)(done, total);
        }
    }
    Ok(dec.finish())
}

/// Opens and decodes the capture at `path` (`-` for standard input).
///
/// IQ files are read twice: a spectrum survey finds the bursty carriers, then every carrier is
/// decoded in a channel of its own, all from one more pass over the file. Standard input, and
/// IQ files in which the survey finds no carrier, are decoded from the whole band in one pass.
pub fn decode_path(path: &str, opts: &DecodeOptions) -> Result<DecodeReport, DecodeError> {
    let mut src = source::open(path, &opts.open)?;
    if !(src.info().is_iq() && path != "-" && opts.channels) {
        return decode_source(src.as_mut(), opts);
    }
    let info = src.info().clone();
    let total = info.declared_samples.unwrap_or(0) * 2;
    let tick = |done: u64| {
        if let Some(p) = &opts.progress {
            (p.0)(done, total);
        }
    };
    let (survey, mean, activity) = survey_with_mean_progress(src.as_mut(), &tick)?;
    let dc = if survey.dc_spike.is_some() {
        mean
    } else {
        num_complex::Complex32::new(0.0, 0.0)
    };
    let plans = channel_plans(&survey, &info, opts);
    if std::env::var_os("OOKSIFT_DEBUG").is_some() {
        for p in &plans {
            eprintln!(
                "channel {:.0} Hz: bandwidth {:.0} Hz, CIC {}x order {}, FIR {} taps /{}, out {:.0} Hz",
                p.offset_hz,
                p.bandwidth_hz,
                p.cic_decim,
                p.cic_order,
                p.fir_taps.len(),
                p.fir_decim,
                p.out_rate_hz
            );
        }
    }
    let mut src = source::open(path, &opts.open)?;
    if plans.is_empty() {
        let mut r = decode_source(src.as_mut(), opts)?;
        r.notes.push(
            "the spectrum survey found no bursty carrier; decoded from the whole band".into(),
        );
        return Ok(r);
    }
    let squelch = std::env::var_os("OOKSIFT_NO_SQUELCH").is_none();
    let mut chains: Vec<(Decoder, Squelch)> = plans
        .into_iter()
        .filter_map(|p| {
            let gate = match (&activity, squelch) {
                (Some(a), true) => Squelch::for_channel(a, &p),
                _ => Squelch::open(),
            };
            Decoder::for_channel(info.clone(), opts, p, dc)
                .ok()
                .map(|d| (d, gate))
        })
        .collect();
    if std::env::var_os("OOKSIFT_DEBUG").is_some() {
        for (d, g) in &chains {
            eprintln!(
                "squelch of channel {:?} Hz: {}",
                d.carrier_base_hz,
                g.describe(info.rate.hz(), survey.samples)
            );
        }
    }
    let mut done = info.declared_samples.unwrap_or(0);
    let mut pos = 0u64;
    loop {
        // No channel busy here: pass over the file up to the next busy span without
        // converting it, where the source can.
        let next = chains
            .iter()
            .map(|(_, g)| g.next_busy(pos))
            .min()
            .unwrap_or(pos);
        if next > pos {
            let want = next.min(survey.samples.max(pos + 1)) - pos;
            if let Some(n) = src.skip_samples(want)? {
                for (d, _) in &mut chains {
                    d.skip(n);
                }
                pos += n;
                done += n;
                tick(done);
                if n < want {
                    break;
                }
                continue;
            }
        }
        let Some(block) = src.next_block()? else {
            break;
        };
        let len = block.len() as u64;
        for (d, g) in &mut chains {
            g.feed(d, block, pos);
        }
        pos += len;
        done += len;
        tick(done);
    }
    let reports: Vec<DecodeReport> = chains.into_iter().map(|(d, _)| d.finish()).collect();
    Ok(merge_reports(reports))
}

/// Captures shorter than this are read whole by every channel: the squelch saves little
/// there, and short captures keep one code path.
pub const SQUELCH_MIN_SECONDS: f64 = 20.0;
/// A channel reads this long before each busy span of its bands. A span already starts a
/// window (32 analysed frames, up to 128 ms) before the frame that found it busy; the margin
/// covers the edge detector's first look at the noise (20 ms) and the 25 ms the decoder keeps
/// before a burst.
pub const SQUELCH_BEFORE_S: f64 = 0.1;
/// ... and this long after (a span likewise ends a window after its last busy frame, and the
/// skip closes any burst still open). Every extra second of margin is read as noise marks
/// that a wide channel near the floor turns into one long burst around the press: with 0.25 s
/// before and 1 s after, a 600 s capture peaked at 27.3 MiB against 12.9 MiB at 60 s, and at
/// Eu/N0 = 14 dB 6 of 20 PPM presses decoded; with 0.1 s and 0.15 s, 11.4 against 10.5 MiB,
/// and 14 of 20.
pub const SQUELCH_AFTER_S: f64 = 0.15;
/// Busy spans closer than this are read as one (more than any gap inside a press).
pub const SQUELCH_JOIN_S: f64 = 1.0;
/// A channel whose busy spans cover more than this share of the capture reads it whole.
pub const SQUELCH_MAX_BUSY: f64 = 0.5;

/// Which stretches of the capture one channel reads: the busy spans of the survey's
/// activity log in the bands the channel covers, widened and joined ([`front::activity`]).
/// Everything else is skipped (`Decoder::skip`); `None` reads everything.
///
/// [`front::activity`]: crate::front::activity
#[derive(Debug, Clone)]
struct Squelch {
    spans: Option<Vec<(u64, u64)>>,
    /// First span that may still matter (spans end after the position last asked about).
    next: usize,
}

impl Squelch {
    fn open() -> Squelch {
        Squelch {
            spans: None,
            next: 0,
        }
    }

    fn for_channel(activity: &crate::front::activity::Activity, plan: &ChannelPlan) -> Squelch {
        let rate = plan.in_rate_hz;
        let total = activity.samples;
        if (total as f64) < SQUELCH_MIN_SECONDS * rate {
            return Squelch::open();
        }
        let half = plan.bandwidth_hz / 2.0;
        let Some(busy) = activity.spans_between(plan.offset_hz - half, plan.offset_hz + half)
        else {
            return Squelch::open();
        };
        let s = |secs: f64| (secs * rate) as u64;
        let spans = crate::front::activity::widen(
            &busy,
            s(SQUELCH_BEFORE_S),
            s(SQUELCH_AFTER_S),
            s(SQUELCH_JOIN_S),
            total,
        );
        let covered: u64 = spans.iter().map(|(a, b)| b - a).sum();
        if covered as f64 > SQUELCH_MAX_BUSY * total as f64 {
            return Squelch::open();
        }
        Squelch {
            spans: Some(spans),
            next: 0,
        }
    }

    /// `pos` when the channel reads sample `pos`, else the start of its next busy span
    /// (`u64::MAX` when none is left).
    fn next_busy(&self, pos: u64) -> u64 {
        let Some(spans) = &self.spans else {
            return pos;
        };
        match spans[self.next..].iter().find(|&&(_, e)| e > pos) {
            Some(&(s, _)) => s.max(pos),
            None => u64::MAX,
        }
    }

    /// Pushes the parts of `block` (first sample at `pos`) the channel reads; skips the rest.
    fn feed(&mut self, dec: &mut Decoder, block: Samples<'_>, pos: u64) {
        let (Some(spans), Samples::Iq(iq)) = (&self.spans, block) else {
            dec.push(block);
            return;
        };
        let end = pos + iq.len() as u64;
        let mut at = pos;
        while at < end {
            while spans.get(self.next).is_some_and(|&(_, e)| e <= at) {
                self.next += 1;
            }
            match spans.get(self.next) {
                Some(&(s, e)) if s <= at => {
                    let stop = e.min(end);
                    dec.push(Samples::Iq(&iq[(at - pos) as usize..(stop - pos) as usize]));
                    at = stop;
                }
                other => {
                    let stop = other.map_or(end, |&(s, _)| s.min(end));
                    dec.skip(stop - at);
                    at = stop;
                }
            }
        }
    }

    fn describe(&self, rate_hz: f64, total: u64) -> String {
        match &self.spans {
            None => "reads the whole capture".into(),
            Some(s) => {
                let covered: u64 = s.iter().map(|(a, b)| b - a).sum();
                format!(
                    "reads {} spans, {:.1} s of {:.1} s",
                    s.len(),
                    covered as f64 / rate_hz,
                    total as f64 / rate_hz
                )
            }
        }
    }
}

/// Runs the spectrum survey over every block of an IQ source.
pub fn survey_source(src: &mut dyn SampleSource) -> Result<Survey, DecodeError> {
    survey_with_mean(src).map(|(s, _)| s)
}

/// The survey and the mean of all samples (the receiver's DC offset, when the survey sees one:
/// carriers away from 0 Hz average out over a capture).
pub fn survey_with_mean(
    src: &mut dyn SampleSource,
) -> Result<(Survey, num_complex::Complex32), DecodeError> {
    survey_with_mean_progress(src, &|_| {}).map(|(s, m, _)| (s, m))
}

/// The survey, the mean, and the activity log of the survey's analysed frames.
fn survey_with_mean_progress(
    src: &mut dyn SampleSource,
    tick: &dyn Fn(u64),
) -> Result<
    (
        Survey,
        num_complex::Complex32,
        Option<crate::front::activity::Activity>,
    ),
    DecodeError,
> {
    let mut sum = num_complex::Complex64::new(0.0, 0.0);
    let mut n = 0u64;
    let rate = src.info().rate.hz();
    // A carrier 6 dB above the noise's peak-hold is worth a channel: a false one costs only
    // decoding time (the channel then yields no code), a missed one costs the code.
    let mut cfg = SurveyConfig::for_rate(rate);
    cfg.min_snr_db = cfg.min_snr_db.min(6.0);
    // After the first few seconds, one frame in four for the statistics (a press spans
    // hundreds), with the gate for short bursts in between: the survey pass cost a quarter of
    // the decode of a long capture.
    cfg.frame_stride = SURVEY_FRAME_STRIDE;
    cfg.stride_after_frames = (SURVEY_FULL_SECONDS * rate / cfg.fft_len as f64) as u64;
    let mut survey = SpectrumSurvey::new(rate, cfg)
        .map_err(|e| DecodeError::Front(e.to_string()))?
        .with_activity();
    let cu8 = src
        .bytes_datatype()
        .is_some_and(|d| d.complex && d.component == source::Component::U8);
    if cu8 {
        // The file's own bytes: the survey converts only the frames it transforms, the DC
        // offset comes from exact integer sums.
        let mut sums = source::Cu8Sums::default();
        while let Some(bytes) = src.next_bytes()? {
            survey.push_cu8(bytes);
            sums.add(source::Cu8Sums::of(bytes));
            tick(sums.n);
        }
        n = sums.n;
        sum = sums.mean() * n as f64;
    } else {
        while let Some(block) = src.next_block()? {
            if let Samples::Iq(iq) = block {
                survey.push(iq);
                sum += sum_iq(iq);
                n += iq.len() as u64;
                tick(n);
            }
        }
    }
    let mean = if n > 0 { sum / n as f64 } else { sum };
    Ok((
        survey.finish(),
        num_complex::Complex32::new(mean.re as f32, mean.im as f32),
        survey.activity(),
    ))
}

/// Σ z over a block in f64, in four interleaved partial sums (independent additions the CPU
/// overlaps; one running sum waited on every addition). Used for the DC estimate, which is
/// then rounded to f32: the different summation order moves it by ~1e-16 relative.
fn sum_iq(iq: &[Complex32]) -> num_complex::Complex64 {
    let mut re = [0f64; 4];
    let mut im = [0f64; 4];
    let mut quads = iq.chunks_exact(4);
    for q in &mut quads {
        for l in 0..4 {
            re[l] += q[l].re as f64;
            im[l] += q[l].im as f64;
        }
    }
    for (l, z) in quads.remainder().iter().enumerate() {
        re[l] += z.re as f64;
        im[l] += z.im as f64;
    }
    num_complex::Complex64::new(
        (re[0] + re[1]) + (re[2] + re[3]),
        (im[0] + im[1]) + (im[2] + im[3]),
    )
}

/// One channel per bursty carrier, strongest first: bandwidth twice the carrier's occupied
/// bandwidth plus 4 kHz for drift, between 8 kHz and what a 60 µs mark needs; output rate at
/// least eight samples per 100 µs mark.
pub fn channel_plans(
    survey: &Survey,
    info: &CaptureInfo,
    opts: &DecodeOptions,
) -> Vec<ChannelPlan> {
    let rate = info.rate.hz();
    let widest = ChannelPlan::bandwidth_for_mark(60e-6, 5e3).unwrap_or(55e3);
    let narrowest = 8e3;
    let mut bursty: Vec<_> = survey.carriers.iter().filter(|c| !c.continuous).collect();
    bursty.sort_by(|a, b| b.peak_db.total_cmp(&a.peak_db));
    bursty
        .into_iter()
        .take(opts.max_channels)
        .filter_map(|c| {
            let bw = (2.0 * c.occupied_bw_hz + 4e3)
                .clamp(narrowest, widest)
                .min(rate / 2.0);
            let out = (8.0 / 100e-6_f64).max(2.0 * bw).min(rate);
            ChannelPlan::design(rate, c.offset_hz, bw, out).ok()
        })
        .collect()
}

/// Merges the reports of several channels of one capture: codes ordered by first appearance;
/// a code heard in two channels (a carrier's sideband taken for a carrier) is kept once, from
/// the channel with more frames.
pub fn merge_reports(mut reports: Vec<DecodeReport>) -> DecodeReport {
    let mut out = reports.remove(0);
    for r in reports {
        out.undecoded_bursts += r.undecoded_bursts;
        for n in r.notes {
            if !out.notes.contains(&n) {
                out.notes.push(n);
            }
        }
        for c in r.codes {
            match out.codes.iter_mut().find(|k| k.key_id == c.key_id) {
                Some(k) if c.frames > k.frames => *k = c,
                Some(_) => {}
                None => out.codes.push(c),
            }
        }
    }
    // A weak code heard at the same time as a code 10 dB stronger in another channel is that
    // code's splatter, unless it was heard on its own too.
    let overlaps = |a: &CodeReport, b: &CodeReport| {
        a.timeline.iter().all(|p| {
            b.timeline
                .iter()
                .any(|q| p.start_s < q.end_s && q.start_s < p.end_s)
        })
    };
    let all = out.codes.clone();
    out.codes.retain(|c| {
        !all.iter().any(|k| {
            k.key_id != c.key_id
                && k.snr_db >= c.snr_db + 10.0
                && k.carrier_offset_hz != c.carrier_offset_hz
                && overlaps(c, k)
        })
    });
    out.codes
        .sort_by(|a, b| a.first_start_s.total_cmp(&b.first_start_s));
    out
}

#[cfg(test)]
mod history_tests {
    use super::History;

    #[test]
    fn a_history_at_its_cap_stays_within_twice_its_live_samples() {
        // Blocks of 1 000 samples, the oldest dropped beyond 100 000 live ones, for 2 000
        // blocks: every live sample reads back, and the buffer stays within twice the live
        // size plus a block (compacting at half skipped let it reach four times).
        let mut h: History<u64> = History::default();
        let (mut start, mut next) = (0u64, 0u64);
        for _ in 0..2_000 {
            let block: Vec<u64> = (next..next + 1_000).collect();
            next += 1_000;
            h.extend_from_slice(&block);
            let live = (next - start) as usize;
            if live > 100_000 {
                h.drop_front(live - 100_000);
                start = next - 100_000;
            }
            assert_eq!(h.len(), (next - start) as usize);
            assert_eq!(h[0], start);
            assert_eq!(h[h.len() - 1], next - 1);
        }
        assert!(
            h.capacity_bytes() <= 202_000 * 8,
            "capacity {} bytes for 100 000 live samples",
            h.capacity_bytes()
        );
        h.drop_front(usize::MAX);
        assert_eq!(h.len(), 0);
    }
}
