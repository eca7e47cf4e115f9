//! Streaming spectrum survey: where are the carriers in a wideband IQ capture?
//!
//! Samples are cut into frames of `fft_len` samples (bins of about 1 kHz at the
//! capture rate by default), windowed (4-term Blackman–Harris, sidelobes ≈ −92 dB) and
//! transformed with one planned FFT. Per bin the survey keeps the average power, the mean
//! squared power and a peak-hold. At the end ([`SpectrumSurvey::finish`]):
//!
//! - the **noise floor** is the median of the per-bin average (robust while fewer than half the
//!   bins hold signal);
//! - **carriers** are runs of bins whose peak-hold stands `min_snr_db` above the median
//!   peak-hold (OOK bursts are intermittent, so the average may hide them) or whose average
//!   stands `min_snr_db` above the floor (steady signals: over a long capture the peak-hold
//!   of noise alone rises ≈ 10 dB above its average), and within
//!   `dynamic_range_db` of the strongest bin, with gaps of up to
//!   `merge_gap_bins` bridged; a run holding two well-separated peaks of similar level is split;
//! - in a capture of at least [`HELD_MIN_FRAMES`] frames the **held power** finds more: per
//!   bin, the power smoothed over [`HELD_FRAMES`] frames keeps its highest value, and runs of
//!   bins [`HELD_MARGIN_DB`] above the median of those are carriers too (smoothing shrinks
//!   the spread of noise, so weak presses that the rising peak-hold floor hides stand out) —
//!   unless a run touches a carrier found above (its keying sidebands) or peaked while a
//!   stronger bursty carrier was the loudest bin in the band (its image or intermodulation
//!   product);
//! - the **centre** of a carrier is the power-weighted centroid of its main-lobe bins
//!   (peak-hold above the peak-hold floor), which is sub-bin accurate;
//! - **activity** is the share of time the carrier is on, estimated from the first two moments
//!   of the bin power with the noise's contribution removed (for a carrier of constant level
//!   present in a fraction `d` of the frames it is `d`); carriers with activity of at least
//!   `continuous_min_activity` are flagged `continuous`, the others are bursty;
//! - a peak at 0 Hz (centroid within [`DC_MAX_OFFSET_BINS`]) that is constant in time is the
//!   receiver's **DC offset**: it is reported in [`Survey::dc_spike`], never as a carrier. A
//!   bursty carrier at 0 Hz stays a carrier.
//!
//! Levels are in dB relative to a full-scale complex tone: a tone `A·e^{jωn}` centred on a bin
//! reads `20·log10(A)`; white noise of power σ² per sample reads `σ²·ENBW/fft_len` per bin
//! (ENBW ≈ 2.0 bins for this window).
//!
//! ```
//! use num_complex::Complex32;
//! use ooksift::front::spectrum::{SpectrumSurvey, SurveyConfig};
//!
//! let rate_hz = 1_024_000.0;
//! let mut survey = SpectrumSurvey::new(rate_hz, SurveyConfig::for_rate(rate_hz))?;
//! assert_eq!(survey.config().fft_len, 1024); // 1 kHz bins
//! let block: Vec<Complex32> = (0..100_000)
//!     .map(|n| {
//!         let turns = (-120e3 * n as f64 / rate_hz).fract();
//!         Complex32::from_polar(0.1, (std::f64::consts::TAU * turns) as f32)
//!     })
//!     .collect();
//! survey.push(&block);
//! let s = survey.finish();
//! assert_eq!(s.carriers.len(), 1);
//! assert!((s.carriers[0].offset_hz + 120e3).abs() < 1e3);
//! assert!(s.carriers[0].continuous);
//! # Ok::<(), ooksift::front::FrontError>(())
//! ```

use std::sync::Arc;

use num_complex::Complex32;
use rustfft::{Fft, FftPlanner};
use serde::{Deserialize, Serialize};

use super::activity::{Activity, ActivityLog};
use super::{check_rate, fir, power_db, FrontError, Result, MIN_DB};

/// A steady peak whose centroid lies within this many bins of 0 Hz is the DC offset.
pub const DC_MAX_OFFSET_BINS: f64 = 0.25;

/// Largest FFT length accepted (bins of 2 Hz at 2 MHz).
pub const MAX_FFT_LEN: usize = 1 << 20;

/// Tuning of the survey. Start from [`SurveyConfig::for_rate`] and change fields as needed;
/// [`SpectrumSurvey::new`] validates them.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SurveyConfig {
    /// Frame length and number of bins; a power of two from 16 to [`MAX_FFT_LEN`].
    pub fft_len: usize,
    /// Samples between frame starts, 1..=`fft_len`. Default `fft_len` (no overlap): a press
    /// spans many frames, so the peak-hold catches it. Use `fft_len / 2` to also catch isolated
    /// bursts shorter than a few frames, which could otherwise fall in a window's tails (at
    /// twice the cost).
    pub hop_len: usize,
    /// Only one frame in `frame_stride` (1..=64, default 1: every frame) feeds the average,
    /// the mean squared power and the peak-hold; the others are skipped, except that a skipped
    /// frame whose mean power stands [`SurveyConfig::gate_db`] above the running level of the
    /// analysed ones is transformed too, for the peak-hold only. A press of an OOK remote
    /// spans hundreds of frames, so a stride of a few frames still sees it many times, at a
    /// fraction of the cost; the gate catches short strong bursts falling between analysed
    /// frames. Averages and activity are then estimated from a sample of the frames.
    #[serde(default = "one")]
    pub frame_stride: usize,
    /// Frames analysed in full before `frame_stride` applies (default 0). Short captures
    /// then keep every frame; in long ones the statistics have settled long before the
    /// stride starts.
    #[serde(default)]
    pub stride_after_frames: u64,
    /// Gate of skipped frames, dB above the running mean power of the analysed frames
    /// (default 0.5 dB: about five standard deviations of the mean power of 1024 samples of
    /// white noise). Only used when `frame_stride` > 1.
    #[serde(default = "half_db")]
    pub gate_db: f32,
    /// A bin belongs to a carrier when its peak-hold exceeds the median peak-hold by this
    /// many dB (default 10).
    pub min_snr_db: f32,
    /// Runs of carrier bins separated by at most this many quiet bins are merged (default 1).
    pub merge_gap_bins: usize,
    /// Activity (0..=1) from which a carrier counts as continuous (default 0.8).
    pub continuous_min_activity: f32,
    /// Occupied bandwidth is measured where the peak-hold stays within this many dB of the
    /// carrier's peak (default 20).
    pub occupied_drop_db: f32,
    /// A second peak in one run of bins is a separate carrier only if the peak-hold dips at
    /// least this many dB below it on the way to the stronger one (default 10) ...
    pub split_depth_db: f32,
    /// ... if it is at most this many dB weaker than the strongest peak of the run (default
    /// 10; the first sidelobe of a keyed carrier is about 13 dB down) ...
    pub split_max_below_db: f32,
    /// ... and if it lies at least this far from every stronger accepted peak (default 10 kHz).
    pub min_spacing_hz: f64,
    /// Half-width, in bins, of the zone around 0 Hz given to a DC offset (default 4: the
    /// window's main lobe).
    pub dc_guard_bins: usize,
    /// Bins more than this many dB below the strongest peak-hold bin are never carrier bins
    /// (default 90: the window's sidelobes lie about 92 dB down, so a very clean strong
    /// carrier does not sprout ghosts).
    pub dynamic_range_db: f32,
}

impl SurveyConfig {
    /// Defaults for a capture rate: `fft_len` is the power of two nearest (in ratio) to
    /// `rate_hz / 1000`, so bins are about 1 kHz wide, frames without overlap.
    pub fn for_rate(rate_hz: f64) -> Self {
        let target = if rate_hz.is_finite() && rate_hz > 0.0 {
            rate_hz / 1000.0
        } else {
            1024.0
        };
        let exp = target.log2().round().clamp(4.0, 20.0) as u32;
        let fft_len = 1usize << exp;
        SurveyConfig {
            fft_len,
            hop_len: fft_len,
            frame_stride: 1,
            stride_after_frames: 0,
            gate_db: 0.5,
            min_snr_db: 10.0,
            merge_gap_bins: 1,
            continuous_min_activity: 0.8,
            occupied_drop_db: 20.0,
            split_depth_db: 10.0,
            split_max_below_db: 10.0,
            min_spacing_hz: 10_000.0,
            dc_guard_bins: 4,
            dynamic_range_db: 90.0,
        }
    }

    fn validate(&self) -> Result<()> {
        let bad = |field, reason| Err(FrontError::BadConfig { field, reason });
        if !self.fft_len.is_power_of_two() || self.fft_len < 16 || self.fft_len > MAX_FFT_LEN {
            return bad("fft_len", "must be a power of two from 16 to 2^20");
        }
        if self.hop_len == 0 || self.hop_len > self.fft_len {
            return bad("hop_len", "must be from 1 to fft_len");
        }
        if !(1..=64).contains(&self.frame_stride) {
            return bad("frame_stride", "must be from 1 to 64");
        }
        if !(self.gate_db.is_finite() && self.gate_db >= 0.0) {
            return bad("gate_db", "must be finite and >= 0");
        }
        if !(self.min_snr_db.is_finite() && self.min_snr_db >= 0.0) {
            return bad("min_snr_db", "must be finite and >= 0");
        }
        if !(0.0..=1.0).contains(&self.continuous_min_activity) {
            return bad("continuous_min_activity", "must be within 0..=1");
        }
        if !(self.occupied_drop_db.is_finite() && self.occupied_drop_db > 0.0) {
            return bad("occupied_drop_db", "must be finite and > 0");
        }
        if !(self.split_depth_db.is_finite() && self.split_depth_db >= 0.0) {
            return bad("split_depth_db", "must be finite and >= 0");
        }
        if !(self.split_max_below_db.is_finite() && self.split_max_below_db >= 0.0) {
            return bad("split_max_below_db", "must be finite and >= 0");
        }
        if !(self.min_spacing_hz.is_finite() && self.min_spacing_hz >= 0.0) {
            return bad("min_spacing_hz", "must be finite and >= 0");
        }
        if !(self.dynamic_range_db.is_finite() && self.dynamic_range_db > 0.0) {
            return bad("dynamic_range_db", "must be finite and > 0");
        }
        if self.merge_gap_bins >= self.fft_len || self.dc_guard_bins >= self.fft_len / 2 {
            return bad(
                "merge_gap_bins/dc_guard_bins",
                "must be smaller than the spectrum",
            );
        }
        Ok(())
    }
}

/// One carrier found by the survey.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Carrier {
    /// Centre relative to the capture's centre frequency (power-weighted centroid).
    pub offset_hz: f64,
    /// Peak-hold level of the strongest bin, dB re full-scale tone.
    pub peak_db: f32,
    /// Average level of that bin, dB re full-scale tone.
    pub avg_db: f32,
    /// `peak_db` minus the survey's `floor_db`.
    pub snr_db: f32,
    /// Width where the peak-hold stays within `occupied_drop_db` of `peak_db` (limited by the
    /// window to about 4 bins for a pure tone).
    pub occupied_bw_hz: f64,
    /// Estimated share of time the carrier is on, 0..=1 (see the module docs).
    pub activity: f32,
    /// `activity >= continuous_min_activity`: a steady carrier, not an OOK transmitter; a
    /// decoder may skip it.
    pub continuous: bool,
    /// Lowest bin offset attributed to this carrier.
    pub low_hz: f64,
    /// Highest bin offset attributed to this carrier.
    pub high_hz: f64,
}

/// The receiver's DC offset: a peak at 0 Hz, constant in time.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DcSpike {
    /// Average level of the 0 Hz bin, dB re full-scale tone.
    pub avg_db: f32,
    /// Peak-hold level of the 0 Hz bin.
    pub peak_db: f32,
    /// `avg_db` minus the survey's `floor_db`.
    pub snr_db: f32,
    /// Activity of the 0 Hz bin (near 1 for a constant offset).
    pub activity: f32,
}

/// Result of a survey. Spectra run from −rate/2 (index 0) up to +rate/2 − `bin_hz`; index `i`
/// is at `(i - fft_len/2) * bin_hz` (see [`Survey::bin_offset_hz`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Survey {
    /// Capture rate.
    pub rate_hz: f64,
    /// Number of bins.
    pub fft_len: usize,
    /// Bin spacing, `rate_hz / fft_len`.
    pub bin_hz: f64,
    /// Samples pushed.
    pub samples: u64,
    /// Frames analysed (a trailing partial frame is not analysed).
    pub frames: u64,
    /// Average level per bin, dB re full-scale tone ([`MIN_DB`] if no frame).
    pub avg_db: Vec<f32>,
    /// Peak-hold level per bin.
    pub peak_db: Vec<f32>,
    /// Noise floor: median of `avg_db`.
    pub floor_db: f32,
    /// Median of `peak_db`, the reference of carrier detection.
    pub peak_floor_db: f32,
    /// Carriers, by increasing offset.
    pub carriers: Vec<Carrier>,
    /// The DC offset, when one stands above the floor.
    pub dc_spike: Option<DcSpike>,
}

impl Survey {
    /// Offset of spectrum index `i` from the centre frequency.
    pub fn bin_offset_hz(&self, i: usize) -> f64 {
        (i as f64 - (self.fft_len / 2) as f64) * self.bin_hz
    }
}

/// The streaming survey. Holds one planned FFT, its scratch and the per-bin accumulators; memory
/// is a few times `fft_len` whatever the capture length.
pub struct SpectrumSurvey {
    rate_hz: f64,
    cfg: SurveyConfig,
    fft: Arc<dyn Fft<f32>>,
    scratch: Vec<Complex32>,
    work: Vec<Complex32>,
    window: Vec<f32>,
    /// 1 / (Σw)²: makes a bin-centred full-scale tone read 1.
    norm: f32,
    /// Power of the current frame, per FFT bin.
    power: Vec<f32>,
    pending: Vec<Complex32>,
    sum_p: Vec<f64>,
    sum_p2: Vec<f64>,
    batch_p: Vec<f32>,
    batch_p2: Vec<f32>,
    peak: Vec<f32>,
    /// Per bin: the power of the analysed frames smoothed over about [`HELD_FRAMES`] of them
    /// (a one-pole average), and the highest it reached.
    smooth: Vec<f32>,
    held: Vec<f32>,
    /// Per bin: the loudest bin of the smoothed power (FFT order) when `held` last rose —
    /// what else was on the air then (as of a few frames before, see [`LOUDEST_EVERY`]);
    /// `u32`, as the powers are `f32`, so the update stays one vector wide.
    held_with: Vec<u32>,
    /// The loudest bin of the smoothed power, as of the last search ([`LOUDEST_EVERY`]).
    loudest: u32,
    frames: u64,
    samples: u64,
    /// Frames cut so far, analysed or skipped (the stride counts them).
    slots: u64,
    /// Running mean power per sample of the analysed frames (0 before the first), and the
    /// gate's factor over it.
    level: f32,
    gate: f32,
    /// The squelch map, when asked for ([`SpectrumSurvey::with_activity`]).
    activity: Option<ActivityLog>,
    /// `cu8` bytes of a partial frame ([`SpectrumSurvey::push_cu8`]), and the scratch its
    /// frames are converted into.
    pending_bytes: Vec<u8>,
    converted: Vec<Complex32>,
}

impl std::fmt::Debug for SpectrumSurvey {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("SpectrumSurvey")
            .field("rate_hz", &self.rate_hz)
            .field("cfg", &self.cfg)
            .field("frames", &self.frames)
            .field("samples", &self.samples)
            .finish_non_exhaustive()
    }
}

impl SpectrumSurvey {
    /// Plans the FFT and allocates every buffer once.
    pub fn new(rate_hz: f64, cfg: SurveyConfig) -> Result<Self> {
        check_rate(rate_hz)?;
        cfg.validate()?;
        let n = cfg.fft_len;
        let fft = FftPlanner::<f32>::new().plan_fft_forward(n);
        let scratch = vec![Complex32::new(0.0, 0.0); fft.get_inplace_scratch_len()];
        let w = fir::blackman_harris(n);
        let sum_w: f64 = w.iter().sum();
        Ok(SpectrumSurvey {
            rate_hz,
            fft,
            scratch,
            work: vec![Complex32::new(0.0, 0.0); n],
            window: w.iter().map(|&v| v as f32).collect(),
            norm: (1.0 / (sum_w * sum_w)) as f32,
            power: vec![0.0; n],
            pending: Vec::with_capacity(n),
            sum_p: vec![0.0; n],
            sum_p2: vec![0.0; n],
            batch_p: vec![0.0; n],
            batch_p2: vec![0.0; n],
            peak: vec![0.0; n],
            smooth: vec![0.0; n],
            held: vec![0.0; n],
            held_with: vec![0u32; n],
            loudest: 0,
            frames: 0,
            samples: 0,
            slots: 0,
            level: 0.0,
            gate: 10f32.powf(cfg.gate_db / 10.0),
            cfg,
            activity: None,
            pending_bytes: Vec::new(),
            converted: Vec::with_capacity(n),
        })
    }

    /// Also logs when each part of the band was busy ([`super::activity`]), from the analysed
    /// frames; read it with [`SpectrumSurvey::activity`].
    pub fn with_activity(mut self) -> Self {
        self.activity = Some(ActivityLog::new(
            self.cfg.fft_len,
            self.rate_hz / self.cfg.fft_len as f64,
            self.rate_hz,
        ));
        self
    }

    /// The busy spans logged so far (None unless [`SpectrumSurvey::with_activity`]).
    pub fn activity(&self) -> Option<Activity> {
        self.activity.as_ref().map(ActivityLog::finish)
    }

    /// The configuration in force.
    pub fn config(&self) -> &SurveyConfig {
        &self.cfg
    }

    /// Frames analysed so far.
    pub fn frames(&self) -> u64 {
        self.frames
    }

    /// Feeds a block of any length. Non-finite samples count as zero.
    pub fn push(&mut self, block: &[Complex32]) {
        self.samples += block.len() as u64;
        let mut pending = std::mem::take(&mut self.pending);
        let (n, hop) = (self.cfg.fft_len, self.cfg.hop_len);
        cut_frames(&mut pending, block, n, hop, |frame| self.frame(frame));
        self.pending = pending;
    }

    /// Feeds a block of `cu8` bytes (interleaved I/Q codes, a trailing odd byte ignored):
    /// the same survey as [`SpectrumSurvey::push`] of the converted samples, but only the
    /// frames that are transformed get converted; the gate of skipped frames reads their
    /// power from exact integer sums of the codes (so its decisions may differ from
    /// `push`'s f32 sums where a frame's power falls within rounding of the gate).
    pub fn push_cu8(&mut self, bytes: &[u8]) {
        let bytes = &bytes[..bytes.len() / 2 * 2];
        self.samples += (bytes.len() / 2) as u64;
        let mut pending = std::mem::take(&mut self.pending_bytes);
        let (n, hop) = (2 * self.cfg.fft_len, 2 * self.cfg.hop_len);
        cut_frames(&mut pending, bytes, n, hop, |frame| self.frame_cu8(frame));
        self.pending_bytes = pending;
    }

    /// [`SpectrumSurvey::frame`] of one frame of `cu8` bytes.
    fn frame_cu8(&mut self, bytes: &[u8]) {
        let stride = self.cfg.frame_stride as u64;
        let slot = self.slots;
        self.slots += 1;
        let start = slot * self.cfg.hop_len as u64;
        let after = self.cfg.stride_after_frames;
        let analysed = stride == 1 || slot < after || (slot - after) % stride == 0;
        let p = if stride == 1 {
            0.0
        } else {
            crate::source::Cu8Sums::of(bytes).mean_power() as f32
        };
        let full = if analysed {
            if stride > 1 {
                self.follow_level(p);
            }
            true
        } else if p > self.level * self.gate {
            false
        } else {
            return;
        };
        let mut conv = std::mem::take(&mut self.converted);
        conv.clear();
        let cu8 = crate::source::Datatype {
            complex: true,
            component: crate::source::Component::U8,
            big_endian: false,
        };
        cu8.decode_iq_fast(bytes, &mut conv);
        self.analyse(&conv, full, start);
        self.converted = conv;
    }

    /// The running level of the analysed frames: follows their power `p`, but a burst
    /// raises it only by the gate's factor per frame (non-finite powers leave it alone).
    fn follow_level(&mut self, p: f32) {
        if self.level == 0.0 {
            self.level = if p.is_finite() { p } else { 0.0 };
        } else if p.is_finite() {
            self.level += (p.min(self.level * self.gate) - self.level) / 16.0;
        }
    }

    /// One frame: analysed in full, skipped, or (past the gate) transformed for the
    /// peak-hold only.
    fn frame(&mut self, frame: &[Complex32]) {
        let stride = self.cfg.frame_stride as u64;
        let slot = self.slots;
        self.slots += 1;
        let start = slot * self.cfg.hop_len as u64;
        if stride == 1 {
            self.analyse(frame, true, start);
            return;
        }
        let p = mean_power(frame);
        let after = self.cfg.stride_after_frames;
        if slot < after || (slot - after) % stride == 0 {
            self.follow_level(p);
            self.analyse(frame, true, start);
        } else if p > self.level * self.gate {
            self.analyse(frame, false, start);
        }
    }

    /// Transforms a frame (first sample `start`); `full` adds it to the sums, the frame count
    /// and the activity log, otherwise it only updates the peak-hold.
    fn analyse(&mut self, frame: &[Complex32], full: bool, start: u64) {
        for ((dst, &s), &w) in self.work.iter_mut().zip(frame).zip(&self.window) {
            *dst = s * w;
        }
        self.fft
            .process_with_scratch(&mut self.work, &mut self.scratch);
        let norm = self.norm;
        for (p, x) in self.power.iter_mut().zip(&self.work) {
            *p = (x.re * x.re + x.im * x.im) * norm;
        }
        // Lane sums keep this loop vectorised; the total only serves to spot non-finite powers.
        let mut lanes = [0f32; 8];
        for pc in self.power.chunks_exact(8) {
            for l in 0..8 {
                lanes[l] += pc[l];
            }
        }
        if !lanes.iter().sum::<f32>().is_finite() {
            // Rare path: non-finite samples count as zero, overflowing powers saturate.
            for ((dst, &s), &w) in self.work.iter_mut().zip(frame).zip(&self.window) {
                *dst = if s.re.is_finite() && s.im.is_finite() {
                    s * w
                } else {
                    Complex32::new(0.0, 0.0)
                };
            }
            self.fft
                .process_with_scratch(&mut self.work, &mut self.scratch);
            for (p, x) in self.power.iter_mut().zip(&self.work) {
                let v = (x.re * x.re + x.im * x.im) * norm;
                *p = if v.is_finite() {
                    v.min(SATURATED_POWER)
                } else {
                    SATURATED_POWER
                };
            }
        }
        for (pk, &p) in self.peak.iter_mut().zip(&self.power) {
            *pk = if p > *pk { p } else { *pk };
        }
        if !full {
            return;
        }
        if let Some(log) = self.activity.as_mut() {
            log.push(&self.power, start, self.cfg.fft_len as u64);
        }
        let alpha = 1.0 / HELD_FRAMES as f32;
        // The loudest smoothed bin moves slowly (the smoothing spans HELD_FRAMES frames):
        // found afresh every LOUDEST_EVERY frames, it costs a fraction of the update.
        if self.frames % LOUDEST_EVERY == 0 {
            self.loudest = loudest_bin(&self.smooth);
        }
        smooth_and_hold(
            &mut self.smooth,
            &self.power,
            &mut self.held,
            &mut self.held_with,
            alpha,
            self.loudest,
        );
        // Sums run in f32 over batches of `BATCH_FRAMES` frames (a schedule fixed by the frame
        // count), then move into f64, so long captures keep their precision.
        for ((b1, b2), &p) in self
            .batch_p
            .iter_mut()
            .zip(self.batch_p2.iter_mut())
            .zip(&self.power)
        {
            *b1 += p;
            *b2 += p * p;
        }
        self.frames += 1;
        if self.frames % BATCH_FRAMES == 0 {
            for (s, b) in self.sum_p.iter_mut().zip(self.batch_p.iter_mut()) {
                *s += *b as f64;
                *b = 0.0;
            }
            for (s, b) in self.sum_p2.iter_mut().zip(self.batch_p2.iter_mut()) {
                *s += *b as f64;
                *b = 0.0;
            }
        }
    }

    /// Forgets everything pushed; the next capture starts afresh (identical results to a new
    /// survey).
    pub fn reset(&mut self) {
        self.pending.clear();
        self.pending_bytes.clear();
        self.sum_p.iter_mut().for_each(|v| *v = 0.0);
        self.sum_p2.iter_mut().for_each(|v| *v = 0.0);
        self.batch_p.iter_mut().for_each(|v| *v = 0.0);
        self.batch_p2.iter_mut().for_each(|v| *v = 0.0);
        self.peak.iter_mut().for_each(|v| *v = 0.0);
        self.smooth.iter_mut().for_each(|v| *v = 0.0);
        self.held.iter_mut().for_each(|v| *v = 0.0);
        self.held_with.iter_mut().for_each(|v| *v = 0);
        self.loudest = 0;
        self.frames = 0;
        self.samples = 0;
        self.slots = 0;
        self.level = 0.0;
        if self.activity.is_some() {
            self.activity = Some(ActivityLog::new(
                self.cfg.fft_len,
                self.rate_hz / self.cfg.fft_len as f64,
                self.rate_hz,
            ));
        }
    }

    /// Spectra, floor, carriers and DC offset of everything pushed so far. May be called
    /// several times; pushing may continue afterwards.
    pub fn finish(&self) -> Survey {
        let n = self.cfg.fft_len;
        let half = n / 2;
        let bin_hz = self.rate_hz / n as f64;
        let mut survey = Survey {
            rate_hz: self.rate_hz,
            fft_len: n,
            bin_hz,
            samples: self.samples,
            frames: self.frames,
            avg_db: vec![MIN_DB; n],
            peak_db: vec![MIN_DB; n],
            floor_db: MIN_DB,
            peak_floor_db: MIN_DB,
            carriers: Vec::new(),
            dc_spike: None,
        };
        if self.frames == 0 {
            return survey;
        }
        let f = self.frames as f64;
        // Shifted order: index i holds FFT bin (i + n/2) mod n.
        let bin = |i: usize| (i + half) % n;
        let avg: Vec<f64> = (0..n)
            .map(|i| (self.sum_p[bin(i)] + self.batch_p[bin(i)] as f64) / f)
            .collect();
        let m2: Vec<f64> = (0..n)
            .map(|i| (self.sum_p2[bin(i)] + self.batch_p2[bin(i)] as f64) / f)
            .collect();
        let peak: Vec<f64> = (0..n).map(|i| self.peak[bin(i)] as f64).collect();
        let held: Vec<f64> = (0..n).map(|i| self.held[bin(i)] as f64).collect();
        let floor = median(&avg);
        let peak_floor = median(&peak);
        let held_floor = median(&held);
        survey.avg_db = avg.iter().map(|&p| power_db(p)).collect();
        survey.peak_db = peak.iter().map(|&p| power_db(p)).collect();
        survey.floor_db = power_db(floor);
        survey.peak_floor_db = power_db(peak_floor);

        // A bin belongs to a carrier when its peak-hold stands out from the peak-hold floor
        // (bursts) or its average from the average floor (steady signals, which the rising
        // peak-hold floor of a long capture would hide), within the window's dynamic range.
        let strongest = peak.iter().fold(0.0f64, |m, &p| m.max(p));
        let margin = db_to_ratio(self.cfg.min_snr_db);
        let (peak_thr, avg_thr) = (peak_floor * margin, floor * margin);
        let range_thr = strongest * db_to_ratio(-self.cfg.dynamic_range_db);
        let mut mask: Vec<bool> = peak
            .iter()
            .zip(&avg)
            .map(|(&p, &a)| p > range_thr && (p > peak_thr || a > avg_thr))
            .collect();
        let activity = |i: usize| activity(avg[i], m2[i], floor);

        // DC offset: the 0 Hz bin above threshold, the centroid of the guard zone within
        // `DC_MAX_OFFSET_BINS` of it, and steady in time.
        let g = self.cfg.dc_guard_bins;
        let (lo, hi) = (half - g, half + g);
        if mask[half] {
            let (mut sw, mut swf) = (0.0f64, 0.0f64);
            for (i, &p) in peak.iter().enumerate().take(hi + 1).skip(lo) {
                let w = (p - peak_floor).max(0.0);
                sw += w;
                swf += w * (i as f64 - half as f64);
            }
            let centred = sw > 0.0 && (swf / sw).abs() <= DC_MAX_OFFSET_BINS;
            let act = activity(half);
            if centred && act >= self.cfg.continuous_min_activity as f64 {
                survey.dc_spike = Some(DcSpike {
                    avg_db: survey.avg_db[half],
                    peak_db: survey.peak_db[half],
                    snr_db: survey.avg_db[half] - survey.floor_db,
                    activity: act as f32,
                });
                mask[lo..=hi].iter_mut().for_each(|m| *m = false);
            }
        }

        // In a long capture the held power finds weak presses that the peak-hold floor hides
        // as it rises with the number of frames: on their own when neither peak-hold nor
        // average finds a carrier, else in runs of bins apart from the carriers those find.
        // A strong carrier leaves its own marks in held power: keying sidebands beside its
        // run, and, in 8-bit captures, images and intermodulation products elsewhere, all
        // at their highest while it is on. So a run from held power that touches a carrier's
        // run, or whose held power peaked while a stronger bursty carrier was the loudest
        // thing in the band, is taken for that carrier's. Not in short captures: there the
        // held power finds presses too weak to decode reliably, see HELD_MIN_FRAMES.
        let held_db: Vec<f32> = held.iter().map(|&h| power_db(h)).collect();
        let held_thr = held_floor * db_to_ratio(HELD_MARGIN_DB);
        // Runs of bins with the spectrum they are measured on (`true`: held power).
        let mut found: Vec<(usize, usize, bool)> = runs(&mask, self.cfg.merge_gap_bins)
            .into_iter()
            .map(|(a, b)| (a, b, false))
            .collect();
        if held_floor > 0.0 && self.frames >= HELD_MIN_FRAMES {
            // The DC offset's zone stays out, as above.
            let guard = survey.dc_spike.is_some().then_some(lo..=hi);
            let held_mask: Vec<bool> = (0..n)
                .map(|i| {
                    let dc = guard.as_ref().is_some_and(|g| g.contains(&i));
                    peak[i] > range_thr && held[i] > held_thr && !dc
                })
                .collect();
            // Strongest held bin of a run: its held power, and the loudest bin (shifted
            // order) when it peaked.
            let top = |a: usize, b: usize| {
                (a..=b)
                    .map(|i| (held[i], (self.held_with[bin(i)] as usize + half) % n))
                    .fold((0.0f64, 0usize), |m, x| if x.0 > m.0 { x } else { m })
            };
            // Each carrier's run, its held power, and whether it is bursty (a continuous
            // carrier is the loudest bin whenever a weak press peaks; its own products are
            // steady too, and the average finds them).
            let carriers: Vec<((usize, usize), f64, bool)> = found
                .iter()
                .map(|&(a, b, _)| {
                    let bursty =
                        (a..=b).any(|i| activity(i) < self.cfg.continuous_min_activity as f64);
                    ((a, b), top(a, b).0, bursty)
                })
                .collect();
            let gap = self.cfg.merge_gap_bins + 1;
            let owned = |&(a, b): &(usize, usize)| {
                let (h, loudest) = top(a, b);
                carriers.iter().any(|&((fa, fb), fh, bursty)| {
                    let touches = a <= fb + gap && fa <= b + gap;
                    let during = bursty && fh > h && (fa..=fb).contains(&loudest);
                    touches || during
                })
            };
            let extra: Vec<(usize, usize, bool)> = runs(&held_mask, self.cfg.merge_gap_bins)
                .into_iter()
                .filter(|r| !owned(r))
                .map(|(a, b)| (a, b, true))
                .collect();
            found.extend(extra);
            found.sort_unstable();
        }
        if std::env::var_os("OOKSIFT_DEBUG").is_some() {
            let top = held.iter().fold(0.0f64, |m, &h| m.max(h));
            eprintln!(
                "survey: held power tops its median by {:.2} dB ({} frames); {} run(s) from held power",
                power_db(top) - power_db(held_floor),
                self.frames,
                found.iter().filter(|r| r.2).count(),
            );
        }
        let pdb = &survey.peak_db;
        for (start, end, by_held) in found {
            let split_db = if by_held { &held_db } else { pdb };
            for (ps, pe, top) in split_run(split_db, start, end, &self.cfg, bin_hz) {
                let offset = |i: f64| (i - half as f64) * bin_hz;
                // Main lobe: contiguous bins within 10 dB of the top, weighted by their
                // excess over the floor: peak-hold over the peak-hold floor, or, for a carrier
                // that only the average shows, average over the average floor (held power
                // over its floor for carriers from held power).
                let by_avg = peak[top] <= peak_thr;
                let (spec, spec_db, base) = if by_held {
                    (&held, &held_db, held_floor)
                } else if by_avg {
                    (&avg, &survey.avg_db, floor)
                } else {
                    (&peak, pdb, peak_floor)
                };
                let lobe_level = spec_db[top] - 10.0;
                let mut a = top;
                while a > ps && spec_db[a - 1] >= lobe_level {
                    a -= 1;
                }
                let mut b = top;
                while b < pe && spec_db[b + 1] >= lobe_level {
                    b += 1;
                }
                let (mut sw, mut swf) = (0.0f64, 0.0f64);
                for (i, &p) in spec.iter().enumerate().take(b + 1).skip(a) {
                    let w = (p - base).max(0.0);
                    sw += w;
                    swf += w * i as f64;
                }
                let centre = if sw > 0.0 { swf / sw } else { top as f64 };
                let (el, er) = occupied_edges(pdb, ps, pe, top, self.cfg.occupied_drop_db);
                let act = activity(top);
                survey.carriers.push(Carrier {
                    offset_hz: offset(centre),
                    peak_db: pdb[top],
                    avg_db: survey.avg_db[top],
                    snr_db: pdb[top] - survey.floor_db,
                    occupied_bw_hz: (er - el) * bin_hz,
                    activity: act as f32,
                    continuous: act >= self.cfg.continuous_min_activity as f64,
                    low_hz: offset(ps as f64),
                    high_hz: offset(pe as f64),
                });
            }
        }
        survey
    }
}

/// One analysed frame's `power` into the smoothed power (one-pole, `alpha`) and its
/// running maximum `held`; where that rises, `with` notes `loudest`. Eight bins at a time as
/// arrays, out of line, so that it compiles to vector instructions (inlined, the compiler
/// could not tell the slices apart).
#[inline(never)]
fn smooth_and_hold(
    smooth: &mut [f32],
    power: &[f32],
    held: &mut [f32],
    with: &mut [u32],
    alpha: f32,
    loudest: u32,
) {
    let n = smooth
        .len()
        .min(power.len())
        .min(held.len())
        .min(with.len());
    let (smooth, power, held, with) = (
        &mut smooth[..n],
        &power[..n],
        &mut held[..n],
        &mut with[..n],
    );
    let chunks = smooth
        .chunks_exact_mut(8)
        .zip(power.chunks_exact(8))
        .zip(held.chunks_exact_mut(8).zip(with.chunks_exact_mut(8)));
    for ((sm, p), (h, w)) in chunks {
        if let (Ok(sm), Ok(p), Ok(h), Ok(w)) =
            (sm.try_into(), p.try_into(), h.try_into(), w.try_into())
        {
            hold8(sm, p, h, w, alpha, loudest);
        }
    }
    let tail = n / 8 * 8;
    for i in tail..n {
        smooth[i] += (power[i] - smooth[i]) * alpha;
        if smooth[i] > held[i] {
            held[i] = smooth[i];
            with[i] = loudest;
        }
    }
}

/// [`smooth_and_hold`] on eight bins, branch-free (selects as integer masks: written as
/// `if`, they compile to branches, taken at random on noise).
#[inline(always)]
fn hold8(
    sm: &mut [f32; 8],
    p: &[f32; 8],
    h: &mut [f32; 8],
    w: &mut [u32; 8],
    alpha: f32,
    loudest: u32,
) {
    for l in 0..8 {
        let v = sm[l] + (p[l] - sm[l]) * alpha;
        sm[l] = v;
        let rise = ((v > h[l]) as u32).wrapping_neg();
        h[l] = f32::from_bits((v.to_bits() & rise) | (h[l].to_bits() & !rise));
        w[l] = (loudest & rise) | (w[l] & !rise);
    }
}

/// The first bin holding the highest of `v` (0 when empty or all NaN).
fn loudest_bin(v: &[f32]) -> u32 {
    // Eight lanes keep the maximum vectorised; then the first bin holding it.
    let mut lanes = [f32::NEG_INFINITY; 8];
    for c in v.chunks_exact(8) {
        for l in 0..8 {
            lanes[l] = if c[l] > lanes[l] { c[l] } else { lanes[l] };
        }
    }
    let top = v[v.len() / 8 * 8..]
        .iter()
        .chain(&lanes)
        .fold(f32::NEG_INFINITY, |m, &x| if x > m { x } else { m });
    v.iter().position(|&x| x == top).map_or(0, |i| i as u32)
}

/// Analysed frames between two searches for the loudest smoothed bin (a quarter of
/// [`HELD_FRAMES`]).
const LOUDEST_EVERY: u64 = 4;

/// Frames summed in `f32` before the sums move into `f64`.
const BATCH_FRAMES: u64 = 32;

/// Analysed frames the held power averages over (its one-pole constant).
pub const HELD_FRAMES: usize = 16;

/// In a long capture ([`HELD_MIN_FRAMES`]) a bin the peak-hold and average leave out belongs
/// to a carrier when its held power (the highest its power smoothed over [`HELD_FRAMES`] analysed frames reached)
/// tops the median held power by this many dB. Measured on pure-noise captures at
/// 2.048 MHz and 250 kHz (cu8, 1 kHz bins): the strongest bin topped the median by 1.1–1.9 dB
/// in 25 s and 2 s captures and by up to 2.6 dB in 0.25 s ones (43 captures); a PWM press at
/// Eu/N0 = 9 dB in a 25 s capture by 5.6 dB.
pub const HELD_MARGIN_DB: f32 = 4.0;

/// Fewest analysed frames for the held power to find carriers (about 2 s at the default
/// 1 kHz bins). In the sensitivity sweep's 0.25 s captures (200 presses a point) it found PWM
/// carriers the peak-hold missed at 8 and 9 dB: presses decoded 11 → 31 and 68 → 106, but wrong
/// codes 0 → 14 and 16 → 21. In a 25 s capture the peak-hold finds three PWM presses from
/// 13 dB, the held power from 7 dB (they decode from 9 dB); beside a steady carrier 28 dB
/// over the floor, from 13 and 11 dB.
pub const HELD_MIN_FRAMES: u64 = 2000;

fn one() -> usize {
    1
}

fn half_db() -> f32 {
    0.5
}

/// Mean of |z|² over a frame, in eight lanes (vectorised); NaN or infinite when a sample is.
fn mean_power(frame: &[Complex32]) -> f32 {
    let mut lanes = [0f32; 8];
    let mut quads = frame.chunks_exact(4);
    for q in &mut quads {
        for (l, z) in q.iter().enumerate() {
            lanes[2 * l] += z.re * z.re;
            lanes[2 * l + 1] += z.im * z.im;
        }
    }
    let tail: f32 = quads.remainder().iter().map(|z| z.norm_sqr()).sum();
    (lanes.iter().sum::<f32>() + tail) / frame.len().max(1) as f32
}

/// Power given to bins that overflow (its square still fits an `f32`).
const SATURATED_POWER: f32 = 1e15;

/// Cuts a stream into frames of `n` elements starting every `hop`: whole frames straight
/// from `rest` where they lie in it, others assembled in `pending` (a partial frame carried
/// between blocks). The frames are the same whatever the block boundaries.
fn cut_frames<T: Copy>(
    pending: &mut Vec<T>,
    mut rest: &[T],
    n: usize,
    hop: usize,
    mut frame: impl FnMut(&[T]),
) {
    while !rest.is_empty() {
        if pending.is_empty() {
            while rest.len() >= n {
                frame(&rest[..n]);
                rest = &rest[hop..];
            }
            pending.extend_from_slice(rest);
            return;
        }
        let take = (n - pending.len()).min(rest.len());
        pending.extend_from_slice(&rest[..take]);
        rest = &rest[take..];
        if pending.len() == n {
            frame(pending);
            pending.drain(..hop);
        }
    }
}

fn db_to_ratio(db: f32) -> f64 {
    10f64.powf(db as f64 / 10.0)
}

/// Median of a non-empty slice (mean of the two middle values for even lengths).
fn median(v: &[f64]) -> f64 {
    let mut s = v.to_vec();
    s.sort_by(|a, b| a.total_cmp(b));
    let n = s.len();
    match n {
        0 => 0.0,
        _ if n % 2 == 1 => s[n / 2],
        _ => 0.5 * (s[n / 2 - 1] + s[n / 2]),
    }
}

/// Share of time on, from the bin's mean power `p1`, mean squared power `p2` and noise power
/// `mu`. For a signal of power |a|² in a bin with complex Gaussian noise of power μ:
/// E[P] = E|a|² + μ and E[P²] = E|a|⁴ + 4μE|a|² + 2μ² (moments of a non-central χ² with two
/// degrees of freedom, common practice); activity = (E|a|²)² / E|a|⁴, which is `d` for a
/// constant carrier present in a fraction `d` of the frames.
fn activity(p1: f64, p2: f64, mu: f64) -> f64 {
    let a2 = p1 - mu;
    let a4 = p2 - 4.0 * mu * a2 - 2.0 * mu * mu;
    if a2 <= 0.0 || a4 <= 0.0 || !a2.is_finite() || !a4.is_finite() {
        return 0.0;
    }
    (a2 * a2 / a4).min(1.0)
}

/// Runs of `true` (inclusive bounds), bridging gaps of up to `gap` `false` entries.
fn runs(mask: &[bool], gap: usize) -> Vec<(usize, usize)> {
    let mut out: Vec<(usize, usize)> = Vec::new();
    for i in (0..mask.len()).filter(|&i| mask[i]) {
        match out.last_mut() {
            Some((_, end)) if i - *end <= gap + 1 => *end = i,
            _ => out.push((i, i)),
        }
    }
    out
}

/// Splits a run `start..=end` into carriers: (first bin, last bin, strongest bin) each.
fn split_run(
    pdb: &[f32],
    start: usize,
    end: usize,
    cfg: &SurveyConfig,
    bin_hz: f64,
) -> Vec<(usize, usize, usize)> {
    let mut cands: Vec<usize> = (start..=end)
        .filter(|&i| (i == start || pdb[i] >= pdb[i - 1]) && (i == end || pdb[i] > pdb[i + 1]))
        .collect();
    cands.sort_by(|&a, &b| pdb[b].total_cmp(&pdb[a]).then(a.cmp(&b)));
    let Some(&strongest) = cands.first() else {
        return vec![(start, end, start)];
    };
    let mut accepted = vec![strongest];
    for &c in &cands[1..] {
        if pdb[c] < pdb[strongest] - cfg.split_max_below_db {
            break; // sorted: all further candidates are weaker still
        }
        if accepted
            .iter()
            .any(|&a| (a.abs_diff(c) as f64) * bin_hz < cfg.min_spacing_hz)
        {
            continue;
        }
        let nearest = accepted
            .iter()
            .copied()
            .min_by_key(|&a| a.abs_diff(c))
            .unwrap_or(strongest);
        let (l, r) = (nearest.min(c), nearest.max(c));
        let valley = pdb[l..=r].iter().fold(f32::INFINITY, |m, &v| m.min(v));
        if valley <= pdb[c] - cfg.split_depth_db {
            accepted.push(c);
        }
    }
    accepted.sort_unstable();
    let mut parts = Vec::with_capacity(accepted.len());
    let mut from = start;
    for (k, &top) in accepted.iter().enumerate() {
        let to = match accepted.get(k + 1) {
            Some(&next) => {
                // Cut at the deepest bin between the two peaks (kept on the left side).
                let v = (top..next).fold(top, |m, i| if pdb[i] < pdb[m] { i } else { m });
                v.max(top).min(next - 1)
            }
            None => end,
        };
        parts.push((from, to, top));
        from = to + 1;
    }
    parts
}

/// Fractional bin positions where the peak-hold falls `drop_db` below the top bin, searching
/// outwards within `ps..=pe` (linear interpolation in dB; a side that never drops ends at the
/// outer edge of the last bin).
fn occupied_edges(pdb: &[f32], ps: usize, pe: usize, top: usize, drop_db: f32) -> (f64, f64) {
    let level = pdb[top] - drop_db;
    let frac = |inside: f32, outside: f32| -> f64 {
        let d = inside - outside;
        if d > 0.0 {
            ((inside - level) / d).clamp(0.0, 1.0) as f64
        } else {
            0.5
        }
    };
    let mut l = top;
    let left = loop {
        if l == ps {
            break l as f64 - 0.5;
        }
        if pdb[l - 1] < level {
            break l as f64 - frac(pdb[l], pdb[l - 1]);
        }
        l -= 1;
    };
    let mut r = top;
    let right = loop {
        if r == pe {
            break r as f64 + 0.5;
        }
        if pdb[r + 1] < level {
            break r as f64 + frac(pdb[r], pdb[r + 1]);
        }
        r += 1;
    };
    (left, right)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::front::testsig::{tone, Rng};

    const RATE: f64 = 2_048_000.0;

    fn survey_of(rate: f64, samples: &[Complex32]) -> Survey {
        let mut s = SpectrumSurvey::new(rate, SurveyConfig::for_rate(rate)).expect("valid config");
        s.push(samples);
        s.finish()
    }

    /// Noise of power `noise` plus a steady tone.
    fn noisy_tone(seed: u64, len: usize, amp: f64, f_hz: f64, noise: f64) -> Vec<Complex32> {
        let mut rng = Rng::new(seed);
        (0..len)
            .map(|n| tone(amp, f_hz, RATE, n, 0.3) + rng.cnoise(noise))
            .collect()
    }

    /// OOK-like bursts: marks of `mark` samples every `period` samples during the first
    /// `burst_len` samples of every `press_period`.
    fn ook(
        n: usize,
        amp: f64,
        f_hz: f64,
        mark: usize,
        period: usize,
        burst_len: usize,
        press_period: usize,
    ) -> Complex32 {
        let in_press = n % press_period;
        if in_press < burst_len && in_press % period < mark {
            tone(amp, f_hz, RATE, n, 1.1)
        } else {
            Complex32::new(0.0, 0.0)
        }
    }

    #[test]
    fn default_bins_are_about_one_khz() {
        for &(rate, len) in &[
            (2_048_000.0, 2048usize),
            (1_024_000.0, 1024),
            (250_000.0, 256),
            (3_200_000.0, 4096),
            (48_000.0, 64),
        ] {
            let cfg = SurveyConfig::for_rate(rate);
            assert_eq!(cfg.fft_len, len, "rate {rate}");
            let bin = rate / cfg.fft_len as f64;
            assert!((0.7e3..1.5e3).contains(&bin), "bin {bin} Hz");
        }
    }

    #[test]
    fn clean_tones_found_within_one_khz_at_positive_and_negative_offsets() {
        for &f in &[-731_234.5, -12_345.6, -2_250.0, 600.0, 48_765.4, 612_001.0] {
            let x: Vec<Complex32> = (0..200_000).map(|n| tone(0.3, f, RATE, n, 0.0)).collect();
            let s = survey_of(RATE, &x);
            assert_eq!(s.carriers.len(), 1, "tone at {f}: {:?}", s.carriers);
            let c = &s.carriers[0];
            // Truth: the tone frequency we synthesised.
            assert!(
                (c.offset_hz - f).abs() < 1e3,
                "tone at {f} found at {}",
                c.offset_hz
            );
            assert!(c.continuous, "steady tone flagged bursty: {c:?}");
        }
    }

    #[test]
    fn noisy_tones_found_within_one_khz() {
        // Per-sample SNR −10 dB (tone power 0.001, noise 0.01); per bin ≈ +20 dB.
        for (k, &f) in [-401_003.0, -77_777.7, 33_333.3, 905_500.0]
            .iter()
            .enumerate()
        {
            let x = noisy_tone(17 + k as u64, 400_000, 0.0316, f, 0.01);
            let s = survey_of(RATE, &x);
            assert_eq!(s.carriers.len(), 1, "tone at {f}: {:?}", s.carriers);
            let c = &s.carriers[0];
            assert!(
                (c.offset_hz - f).abs() < 1e3,
                "tone at {f} found at {}",
                c.offset_hz
            );
            assert!((c.snr_db - 20.0).abs() < 3.0, "snr {}", c.snr_db);
        }
    }

    #[test]
    fn noise_floor_and_tone_level_match_theory() {
        // White noise of power σ² reads σ²·Σw²/(Σw)² per bin (Parseval; common practice).
        let w = fir::blackman_harris(2048);
        let (s1, s2): (f64, f64) = (w.iter().sum(), w.iter().map(|v| v * v).sum());
        let sigma2 = 0.02;
        let expect_floor = 10.0 * (sigma2 * s2 / (s1 * s1)).log10();
        // A bin-centred tone of amplitude A reads 20·log10(A).
        let f = 100.0 * RATE / 2048.0;
        let x = noisy_tone(5, 600_000, 0.25, f, sigma2);
        let s = survey_of(RATE, &x);
        // Median of the average is slightly below the mean (the average is a sum of many
        // exponentials, so its median is close to its mean); allow 0.3 dB.
        assert!(
            (s.floor_db as f64 - expect_floor).abs() < 0.3,
            "floor {} vs {}",
            s.floor_db,
            expect_floor
        );
        let c = &s.carriers[0];
        assert!(
            (c.avg_db as f64 - 20.0 * 0.25f64.log10()).abs() < 0.1,
            "{c:?}"
        );
    }

    #[test]
    fn dc_offset_is_flagged_not_reported_as_carrier() {
        // 8-bit receivers add a constant offset; with it, a bursty carrier at +150 kHz.
        let mut rng = Rng::new(99);
        let dc = Complex32::new(0.08, -0.03);
        let x: Vec<Complex32> = (0..400_000)
            .map(|n| dc + rng.cnoise(0.01) + ook(n, 0.2, 150e3, 800, 2000, 60_000, 150_000))
            .collect();
        let s = survey_of(RATE, &x);
        let dc_spike = s.dc_spike.as_ref().expect("DC offset flagged");
        assert!(dc_spike.activity > 0.9, "{dc_spike:?}");
        assert!(
            s.carriers.iter().all(|c| c.offset_hz.abs() > 5e3),
            "DC reported as a carrier: {:?}",
            s.carriers
        );
        assert_eq!(s.carriers.len(), 1, "{:?}", s.carriers);
        assert!((s.carriers[0].offset_hz - 150e3).abs() < 1e3);
        assert!(!s.carriers[0].continuous);
    }

    #[test]
    fn bursty_carrier_at_zero_hz_is_a_carrier() {
        let mut rng = Rng::new(3);
        let x: Vec<Complex32> = (0..400_000)
            .map(|n| rng.cnoise(0.01) + ook(n, 0.2, 0.0, 600, 1500, 50_000, 200_000))
            .collect();
        let s = survey_of(RATE, &x);
        assert!(s.dc_spike.is_none(), "{:?}", s.dc_spike);
        assert_eq!(s.carriers.len(), 1, "{:?}", s.carriers);
        assert!(s.carriers[0].offset_hz.abs() < 1e3);
        assert!(!s.carriers[0].continuous);
    }

    #[test]
    fn continuous_and_bursty_carriers_are_told_apart() {
        let mut rng = Rng::new(11);
        let x: Vec<Complex32> = (0..600_000)
            .map(|n| {
                rng.cnoise(0.01)
                    + tone(0.05, 300e3, RATE, n, 0.0)
                    + ook(n, 0.1, -180_500.0, 700, 1800, 90_000, 250_000)
            })
            .collect();
        let s = survey_of(RATE, &x);
        assert_eq!(s.carriers.len(), 2, "{:?}", s.carriers);
        let (b, c) = (&s.carriers[0], &s.carriers[1]);
        assert!((b.offset_hz + 180_500.0).abs() < 1e3, "{b:?}");
        assert!((c.offset_hz - 300e3).abs() < 1e3, "{c:?}");
        assert!(c.continuous && c.activity > 0.9, "{c:?}");
        assert!(!b.continuous && b.activity < 0.5, "{b:?}");
        // Keyed carrier: wider than the window's main lobe of a steady tone.
        assert!(b.occupied_bw_hz > c.occupied_bw_hz, "{b:?} vs {c:?}");
    }

    #[test]
    fn two_transmitters_are_two_carriers() {
        let mut rng = Rng::new(21);
        let x: Vec<Complex32> = (0..600_000)
            .map(|n| {
                rng.cnoise(0.01)
                    + ook(n, 0.1, -60e3, 700, 1800, 90_000, 300_000)
                    + ook(n + 100_000, 0.05, -25e3, 500, 1500, 90_000, 300_000)
            })
            .collect();
        let s = survey_of(RATE, &x);
        let offs: Vec<f64> = s.carriers.iter().map(|c| c.offset_hz).collect();
        assert_eq!(offs.len(), 2, "{:?}", s.carriers);
        assert!(
            (offs[0] + 60e3).abs() < 1e3 && (offs[1] + 25e3).abs() < 1e3,
            "{offs:?}"
        );
    }

    #[test]
    fn pure_noise_has_no_carrier() {
        let mut rng = Rng::new(8);
        let x: Vec<Complex32> = (0..300_000).map(|_| rng.cnoise(0.01)).collect();
        let s = survey_of(RATE, &x);
        assert!(s.carriers.is_empty(), "{:?}", s.carriers);
        assert!(s.dc_spike.is_none());
    }

    fn mixed_signal(len: usize) -> Vec<Complex32> {
        let mut rng = Rng::new(77);
        (0..len)
            .map(|n| {
                Complex32::new(0.02, 0.01)
                    + rng.cnoise(0.01)
                    + tone(0.03, 410e3, RATE, n, 0.0)
                    + ook(n, 0.1, -95e3, 300, 900, 20_000, 50_000)
            })
            .collect()
    }

    /// The survey of `cu8` bytes is the survey of the converted samples: bit for bit when
    /// every frame is analysed, and the same carriers with a stride (the gate then reads
    /// exact integer powers instead of f32 sums). The activity log sees the same frames.
    #[test]
    fn cu8_bytes_survey_like_their_samples() {
        let x = mixed_signal(300_001);
        let bytes: Vec<u8> = x
            .iter()
            .flat_map(|z| [z.re, z.im])
            .map(|v| (v * 127.5 + 127.5).round().clamp(0.0, 255.0) as u8)
            .collect();
        let cu8: crate::source::Datatype = "cu8".parse().expect("valid");
        let mut samples = Vec::new();
        assert!(cu8.decode_iq_fast(&bytes, &mut samples));
        for stride in [1, 4] {
            let cfg = SurveyConfig {
                frame_stride: stride,
                stride_after_frames: 20,
                ..SurveyConfig::for_rate(RATE)
            };
            let mut a = SpectrumSurvey::new(RATE, cfg.clone())
                .expect("valid")
                .with_activity();
            let mut b = SpectrumSurvey::new(RATE, cfg)
                .expect("valid")
                .with_activity();
            a.push(&samples);
            for chunk in bytes.chunks(3002) {
                b.push_cu8(chunk);
            }
            let (sa, sb) = (a.finish(), b.finish());
            if stride == 1 {
                assert_eq!(sa, sb);
            }
            let offsets = |s: &Survey| s.carriers.iter().map(|c| c.offset_hz).collect::<Vec<_>>();
            assert_eq!(offsets(&sa), offsets(&sb), "stride {stride}");
            assert!(!sa.carriers.is_empty());
            assert_eq!(a.activity(), b.activity(), "stride {stride}");
        }
    }

    #[test]
    fn result_does_not_depend_on_block_size() {
        let x = mixed_signal(120_001);
        for hop in [2048, 1024, 700] {
            let cfg = SurveyConfig {
                hop_len: hop,
                ..SurveyConfig::for_rate(RATE)
            };
            let mut s = SpectrumSurvey::new(RATE, cfg.clone()).expect("cfg");
            s.push(&x);
            let whole = s.finish();
            assert_eq!(whole.frames, ((120_001 - 2048) / hop + 1) as u64);
            assert_eq!(whole.carriers.len(), 2, "{:?}", whole.carriers);
            assert!(whole.dc_spike.is_some());
            for &bs in &[1usize, 7, 4096, 1024, 2048] {
                let mut s = SpectrumSurvey::new(RATE, cfg.clone()).expect("cfg");
                for chunk in x.chunks(bs) {
                    s.push(chunk);
                }
                assert_eq!(s.finish(), whole, "block size {bs}, hop {hop}");
            }
        }
    }

    #[test]
    fn finish_midway_then_continue_matches_one_pass() {
        let x = mixed_signal(100_000);
        let whole = survey_of(RATE, &x);
        let mut s = SpectrumSurvey::new(RATE, SurveyConfig::for_rate(RATE)).expect("cfg");
        s.push(&x[..33_333]);
        let early = s.finish();
        assert_eq!(early.frames, 33_333 / 2048);
        s.push(&x[33_333..]);
        assert_eq!(s.finish(), whole);
    }

    #[test]
    fn weak_presses_in_a_long_capture_are_found_through_the_held_power() {
        // 6 000 frames (6 s): two presses of 0.3 s, marks of 0.34 ms every 0.68 ms, the
        // carrier 12 dB above the average floor per bin while on. The peak-hold floor of
        // 6 000 frames of noise rises ≈ 10 dB above the average floor, and the keyed carrier
        // reads lower than a steady one in a frame holding marks and spaces: no peak-hold
        // find. Smoothed over 16 frames, it tops the median held power by more than
        // HELD_MARGIN_DB; the same noise alone does not.
        let len = 6_000 * 2048;
        let w = fir::blackman_harris(2048);
        let (s1, s2): (f64, f64) = (w.iter().sum(), w.iter().map(|v| v * v).sum());
        let floor = 0.01 * s2 / (s1 * s1);
        let amp = (floor * 16.0).sqrt();
        let f = 170_300.0;
        let mut rng = Rng::new(77);
        let noise: Vec<Complex32> = (0..len).map(|_| rng.cnoise(0.01)).collect();
        let quiet = survey_of(RATE, &noise);
        assert!(quiet.carriers.is_empty(), "{:?}", quiet.carriers);
        let x: Vec<Complex32> = noise
            .iter()
            .enumerate()
            .map(|(n, &z)| z + ook(n, amp, f, 700, 1400, 614_400, 4_096_000))
            .collect();
        let s = survey_of(RATE, &x);
        assert_eq!(s.carriers.len(), 1, "{:?}", s.carriers);
        let c = &s.carriers[0];
        assert!((c.offset_hz - f).abs() < 1e3, "{c:?}");
        assert!(!c.continuous, "{c:?}");
        assert!(
            c.peak_db < s.peak_floor_db + 10.0,
            "a peak-hold find: {c:?}"
        );
        // The first 1 000 frames hold the first press, but are too few for the held power
        // to decide (HELD_MIN_FRAMES).
        let short = survey_of(RATE, &x[..1000 * 2048]);
        assert!(short.carriers.is_empty(), "{:?}", short.carriers);
    }

    /// The weak presses of [`weak_presses_in_a_long_capture_are_found_through_the_held_power`]
    /// (6 000 frames of noise, presses 12 dB over the floor per bin while on, at `f` every
    /// 2 s from sample `shift`) plus `extra`.
    fn weak_presses_with(f: f64, shift: usize, extra: impl Fn(usize) -> Complex32) -> Survey {
        let len = 6_000 * 2048;
        let w = fir::blackman_harris(2048);
        let (s1, s2): (f64, f64) = (w.iter().sum(), w.iter().map(|v| v * v).sum());
        let floor = 0.01 * s2 / (s1 * s1);
        let amp = (floor * 16.0).sqrt();
        let mut rng = Rng::new(77);
        let x: Vec<Complex32> = (0..len)
            .map(|n| {
                rng.cnoise(0.01) + ook(n + shift, amp, f, 700, 1400, 614_400, 4_096_000) + extra(n)
            })
            .collect();
        survey_of(RATE, &x)
    }

    #[test]
    fn weak_presses_beside_a_steady_carrier_are_found_through_the_held_power() {
        // A steady carrier 40 dB over the floor found by peak-hold and average no longer
        // keeps the held power from finding weak presses elsewhere in the band.
        let f = 170_300.0;
        let s = weak_presses_with(f, 0, |n| tone(0.1, -400_250.0, RATE, n, 0.7));
        assert_eq!(s.carriers.len(), 2, "{:?}", s.carriers);
        let steady = &s.carriers[0];
        assert!(
            (steady.offset_hz + 400_250.0).abs() < 1e3 && steady.continuous,
            "{steady:?}"
        );
        let weak = &s.carriers[1];
        assert!(
            (weak.offset_hz - f).abs() < 1e3 && !weak.continuous,
            "{weak:?}"
        );
        assert!(
            weak.peak_db < s.peak_floor_db + 10.0,
            "a peak-hold find: {weak:?}"
        );
    }

    #[test]
    fn a_strong_press_s_products_are_not_carriers_of_their_own() {
        // A strong keyed carrier at −300 kHz (42 dB over the floor per bin) and a copy of
        // it 30 dB weaker at +250 kHz (as an image or intermodulation product is), keyed
        // with it, plus independent weak presses as strong as the copy at +170 kHz one
        // second later: the copy peaks in held power while the
        // strong carrier is the loudest bin and is taken for its product; the weak presses
        // stay carriers.
        let f = 170_300.0;
        let (strong, copy) = (-300_250.0, 250_250.0);
        let w = fir::blackman_harris(2048);
        let (s1, s2): (f64, f64) = (w.iter().sum(), w.iter().map(|v| v * v).sum());
        let amp = (0.01 * s2 / (s1 * s1) * 16.0).sqrt();
        let s = weak_presses_with(f, 2_048_000, |n| {
            ook(n, 31.6 * amp, strong, 700, 1400, 614_400, 4_096_000)
                + ook(n, amp, copy, 700, 1400, 614_400, 4_096_000)
        });
        let offsets: Vec<f64> = s.carriers.iter().map(|c| c.offset_hz).collect();
        assert_eq!(s.carriers.len(), 2, "{:?}", s.carriers);
        assert!((offsets[0] - strong).abs() < 1e3, "{offsets:?}");
        assert!((offsets[1] - f).abs() < 1e3, "{offsets:?}");
    }

    #[test]
    fn weak_steady_carrier_is_found_through_the_average() {
        // 13 dB above the average floor per bin: under the ≈ 10 dB that the peak-hold floor
        // of 300 frames rises by, so only the average shows it.
        let mut rng = Rng::new(31);
        let w = fir::blackman_harris(2048);
        let (s1, s2): (f64, f64) = (w.iter().sum(), w.iter().map(|v| v * v).sum());
        let floor = 0.01 * s2 / (s1 * s1);
        let amp = (floor * 20.0).sqrt(); // 13 dB
        let x: Vec<Complex32> = (0..600_000)
            .map(|n| rng.cnoise(0.01) + tone(amp, -250_250.0, RATE, n, 0.0))
            .collect();
        let s = survey_of(RATE, &x);
        assert_eq!(s.carriers.len(), 1, "{:?}", s.carriers);
        assert!(
            (s.carriers[0].offset_hz + 250_250.0).abs() < 1e3,
            "{:?}",
            s.carriers
        );
        assert!(
            s.carriers[0].peak_db < s.peak_floor_db + 10.0,
            "not a peak-hold find"
        );
    }

    #[test]
    fn reset_with_dirty_buffers_gives_identical_results() {
        let x = mixed_signal(90_000);
        let mut s = SpectrumSurvey::new(RATE, SurveyConfig::for_rate(RATE)).expect("cfg");
        s.push(&x);
        let first = s.finish();
        // Dirty every buffer with other data, including a partial frame.
        let mut rng = Rng::new(1234);
        let junk: Vec<Complex32> = (0..10_001).map(|_| rng.cnoise(5.0)).collect();
        s.reset();
        s.push(&junk);
        s.reset();
        s.push(&x);
        assert_eq!(s.finish(), first);
    }

    #[test]
    fn short_empty_and_nonfinite_input_do_not_panic() {
        let mut s = SpectrumSurvey::new(RATE, SurveyConfig::for_rate(RATE)).expect("cfg");
        s.push(&[]);
        let r = s.finish();
        assert_eq!(r.frames, 0);
        assert!(r.carriers.is_empty());
        assert_eq!(r.avg_db.len(), 2048);
        s.push(&vec![Complex32::new(f32::NAN, f32::INFINITY); 5000]);
        s.push(&vec![Complex32::new(f32::MAX, -f32::MAX); 5000]);
        let r = s.finish();
        assert!(r.frames > 0);
        assert!(r.avg_db.iter().chain(&r.peak_db).all(|v| v.is_finite()));
        assert!(serde_json::to_string(&r).is_ok());
        // All-zero input: no power, no carrier.
        s.reset();
        s.push(&vec![Complex32::new(0.0, 0.0); 10_000]);
        let r = s.finish();
        assert!(r.carriers.is_empty() && r.dc_spike.is_none());
        assert_eq!(r.floor_db, MIN_DB);
    }

    #[test]
    fn bad_configurations_are_errors() {
        let base = SurveyConfig::for_rate(RATE);
        assert!(matches!(
            SpectrumSurvey::new(0.0, base.clone()),
            Err(FrontError::BadRate { .. })
        ));
        assert!(SpectrumSurvey::new(f64::NAN, base.clone()).is_err());
        for cfg in [
            SurveyConfig {
                fft_len: 1000,
                ..base.clone()
            },
            SurveyConfig {
                hop_len: 0,
                ..base.clone()
            },
            SurveyConfig {
                hop_len: 4096,
                ..base.clone()
            },
            SurveyConfig {
                min_snr_db: f32::NAN,
                ..base.clone()
            },
            SurveyConfig {
                continuous_min_activity: 1.5,
                ..base.clone()
            },
            SurveyConfig {
                dc_guard_bins: 5000,
                ..base.clone()
            },
            SurveyConfig {
                frame_stride: 0,
                ..base.clone()
            },
            SurveyConfig {
                frame_stride: 65,
                ..base.clone()
            },
            SurveyConfig {
                gate_db: -1.0,
                ..base.clone()
            },
        ] {
            assert!(
                matches!(
                    SpectrumSurvey::new(RATE, cfg.clone()),
                    Err(FrontError::BadConfig { .. })
                ),
                "{cfg:?}"
            );
        }
    }

    #[test]
    fn survey_round_trips_through_json() {
        let s = survey_of(RATE, &mixed_signal(60_000));
        let text = serde_json::to_string(&s).expect("serialise");
        let back: Survey = serde_json::from_str(&text).expect("deserialise");
        assert_eq!(back, s);
    }

    #[test]
    fn helpers_behave() {
        assert_eq!(
            runs(&[true, false, true, false, false, true], 1),
            vec![(0, 2), (5, 5)]
        );
        assert_eq!(runs(&[false, false], 1), vec![]);
        assert!((median(&[3.0, 1.0, 2.0]) - 2.0).abs() < 1e-12);
        assert!((median(&[4.0, 1.0, 2.0, 3.0]) - 2.5).abs() < 1e-12);
        // Activity: steady carrier of power 4 in noise 1 → 1; on half the time → 0.5.
        let (s, mu) = (4.0, 1.0);
        let steady = activity(s + mu, s * s + 4.0 * mu * s + 2.0 * mu * mu, mu);
        assert!((steady - 1.0).abs() < 1e-12);
        let half_p2 = 0.5 * (s * s + 4.0 * mu * s + 2.0 * mu * mu) + 0.5 * 2.0 * mu * mu;
        let half = activity(0.5 * s + mu, half_p2, mu);
        assert!((half - 0.5).abs() < 1e-12, "{half}");
    }

    /// A short strong burst lying wholly in a skipped frame: the gate catches it for the
    /// peak-hold; without the gate the strided survey misses it (so the test can fail), and
    /// analysing every frame sees it too. Truth: the synthesised tone's frequency.
    #[test]
    fn strided_survey_gate_catches_a_burst_between_analysed_frames() {
        let n = 2048; // fft_len at RATE
        let frames = 6000;
        let mut rng = Rng::new(31);
        // One 1.5 ms burst (fully inside frame 4001 of the stride-4 phase that starts after
        // 4000 full frames: 4001 % 4 != 0 counted from there), 0.1 amplitude, -120 kHz.
        let (b0, b1) = (4001 * n + 300, 4001 * n + 1800);
        let x: Vec<Complex32> = (0..frames * n)
            .map(|i| {
                let z = rng.cnoise(1e-4);
                if (b0..b1).contains(&i) {
                    z + tone(0.1, -120e3, RATE, i, 0.0)
                } else {
                    z
                }
            })
            .collect();
        let run = |stride: usize, gate_db: f32| {
            let cfg = SurveyConfig {
                frame_stride: stride,
                stride_after_frames: 4000,
                gate_db,
                ..SurveyConfig::for_rate(RATE)
            };
            let mut s = SpectrumSurvey::new(RATE, cfg).expect("valid");
            for b in x.chunks(65536) {
                s.push(b);
            }
            s.finish()
        };
        let found = |r: &Survey| r.carriers.iter().any(|c| (c.offset_hz + 120e3).abs() < 2e3);
        let all = run(1, 0.5);
        let gated = run(4, 0.5);
        let blind = run(4, 100.0);
        assert_eq!(all.frames, frames as u64);
        assert_eq!(gated.frames, 4000 + 2000 / 4);
        assert!(found(&all), "{:?}", all.carriers);
        assert!(found(&gated), "{:?}", gated.carriers);
        assert!(!found(&blind), "{:?}", blind.carriers);
        // The floor comes from a sample of the frames: the same white noise level.
        assert!((gated.floor_db - all.floor_db).abs() < 0.2);
    }
}
