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
    hist: Vec<f32>,
    lag_hist: Vec<Complex32>,
    hist_start: u64,
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
            bursts: BurstSplitter::new(bcfg),
            env_block: EnvelopeBlock::default(),
            marks: Vec::new(),
            closed: Vec::new(),
            presses: Vec::new(),
            hist: Vec::new(),
            lag_hist: Vec::new(),
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
        self.route_marks();
        if !self.edges.in_mark() {
            let now = self.env.position_of(self.edges.position() as f64);
            self.bursts.idle_until(now, &mut self.closed);
        }
        self.decode_closed();
        self.trim_history();
    }

    /// Envelope index of capture position `pos` (inverse of `WideEnvelope::position_of`).
    fn env_index(&self, pos: f64) -> f64 {
        self.env.index_of(pos)
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
            self.hist.drain(..n);
            let nl = n.min(self.lag_hist.len());
            self.lag_hist.drain(..nl);
            self.hist_start += n as u64;
        }
    }

    /// Second pass over one burst: the envelope re-smoothed to about a third of the burst's
    /// own short element, edges found again, and the press decoded from them. Returns `None`
    /// when the history no longer holds the burst or the smoothing would not change.
    fn reslice(&self, burst: &Burst) -> Option<PressDecode> {
        let mut cleaned = burst.marks.clone();
        crate::bursts::merge_glitches(&mut cleaned, frames::GLITCH_FRACTION);
        let rough = coding::assess(&cleaned).into_iter().next()?;
        let unit_env = rough.unit / self.env.decim();
        let half = ((0.3 * unit_env) / 2.0).floor() as usize;
        if half < 1 {
            return None;
        }
        let a = (self.env_index(burst.start()).floor() as i64 - self.margin as i64).max(0) as u64;
        // The first pass may have missed weak marks at either end: look a margin before and
        // sixteen units after the burst.
        let b = self.env_index(burst.end()).ceil() as u64 + (16.0 * unit_env).ceil() as u64;
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
                rise: self.env.position_of(m.rise + a as f64),
                fall: self.env.position_of(m.fall + a as f64),
                ..m
            })
            .collect();
        frames::decode_press_with(
            &Burst {
                marks,
                capped: burst.capped,
            },
            &self.press_opts,
        )
    }

    fn route_marks(&mut self) {
        for m in self.marks.drain(..) {
            let mapped = Mark {
                rise: self.env.position_of(m.rise),
                fall: self.env.position_of(m.fall),
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
            let first = frames::decode_press_with(&b, &self.press_opts);
            let second = self.reslice(&b);
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
                    "burst {:.4}..{:.4} s, {} marks: first {:?} second {:?}",
                    self.info.rate.to_s(b.start()),
                    self.info.rate.to_s(b.end()),
                    b.marks.len(),
                    d(&first),
                    d(&second)
                );
            }
            match better(first, second) {
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
        self.env_block.clear();
        self.env.flush(&mut self.env_block);
        self.take_envelope();
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
        self.marks.clear();
        self.edges.finish(&mut self.marks);
        self.route_marks();
        self.bursts.finish(&mut self.closed);
        self.decode_closed();
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
    let (survey, mean) = survey_with_mean_progress(src.as_mut(), &tick)?;
    let dc = if survey.dc_spike.is_some() {
        mean
    } else {
        num_complex::Complex32::new(0.0, 0.0)
    };
    let plans = channel_plans(&survey, &info, opts);
    let mut src = source::open(path, &opts.open)?;
    if plans.is_empty() {
        let mut r = decode_source(src.as_mut(), opts)?;
        r.notes.push(
            "the spectrum survey found no bursty carrier; decoded from the whole band".into(),
        );
        return Ok(r);
    }
    let mut decoders: Vec<Decoder> = plans
        .into_iter()
        .filter_map(|p| Decoder::for_channel(info.clone(), opts, p, dc).ok())
        .collect();
    let mut done = info.declared_samples.unwrap_or(0);
    while let Some(block) = src.next_block()? {
        done += block.len() as u64;
        for d in &mut decoders {
            d.push(block);
        }
        tick(done);
    }
    let reports: Vec<DecodeReport> = decoders.into_iter().map(Decoder::finish).collect();
    Ok(merge_reports(reports))
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
    survey_with_mean_progress(src, &|_| {})
}

fn survey_with_mean_progress(
    src: &mut dyn SampleSource,
    tick: &dyn Fn(u64),
) -> Result<(Survey, num_complex::Complex32), DecodeError> {
    let mut sum = num_complex::Complex64::new(0.0, 0.0);
    let mut n = 0u64;
    let rate = src.info().rate.hz();
    // A carrier 6 dB above the noise's peak-hold is worth a channel: a false one costs only
    // decoding time (the channel then yields no code), a missed one costs the code.
    let mut cfg = SurveyConfig::for_rate(rate);
    cfg.min_snr_db = cfg.min_snr_db.min(6.0);
    let mut survey =
        SpectrumSurvey::new(rate, cfg).map_err(|e| DecodeError::Front(e.to_string()))?;
    while let Some(block) = src.next_block()? {
        if let Samples::Iq(iq) = block {
            survey.push(iq);
            for z in iq {
                sum += num_complex::Complex64::new(z.re as f64, z.im as f64);
            }
            n += iq.len() as u64;
            tick(n);
        }
    }
    let mean = if n > 0 { sum / n as f64 } else { sum };
    Ok((
        survey.finish(),
        num_complex::Complex32::new(mean.re as f32, mean.im as f32),
    ))
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
