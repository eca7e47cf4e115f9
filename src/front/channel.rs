//! One carrier → one envelope: mix to 0 Hz, filter, decimate, take the magnitude.
//!
//! Design first, then build: [`ChannelPlan::design`] turns (input rate, carrier offset,
//! bandwidth, minimum output rate) into a pure-data plan; [`Channelizer::new`] builds the
//! running filter from it.
//!
//! The chain, at a cost of a few operations per input sample:
//!
//! 1. **Mixer + CIC decimator (fused).** The numerically controlled oscillator is a 64-bit
//!    phase accumulator (one turn = 2⁶⁴), so its phase is exact at every sample however long
//!    the capture, with nothing to renormalise. It is folded into an order-`N` CIC
//!    (cascaded boxcar) decimator by `D1` in polyphase form: each input frame of `D1` samples
//!    is dotted with `N` tables that hold the CIC weights already multiplied by the oscillator's
//!    within-frame phase, and the frame's starting phase is applied once per frame at the low
//!    rate. The arithmetic is exactly "multiply by e^{−jωn}, then CIC", written non-recursively
//!    so floating-point integrators cannot drift. `D1` is the largest decimation whose images
//!    land at least `alias_rejection_db` down on the passband and transition band (after the
//!    clean-up FIR).
//! 2. **FIR clean-up + second decimation by `D2`.** A Kaiser-window low-pass (pass edge
//!    `bandwidth/2`, stop edge `stop_edge_factor · bandwidth/2`, `stopband_db` down) evaluated
//!    only at the output instants.
//! 3. **Magnitude** `|z|` at `out_rate_hz = in_rate_hz / (D1·D2)`.
//!
//! Every stage is a finite impulse response: a burst of NaNs or garbage leaves the output after
//! at most the filter length. Output sample `q` (counting from 0 after construction or
//! [`Channelizer::reset`]) is produced once input sample `(q+1)·D1·D2 − 1` has arrived and
//! represents the signal at [`ChannelPlan::output_pos`]`(q)` (input samples, group delay
//! removed); the first outputs cover filter warm-up.
//!
//! ```
//! use num_complex::Complex32;
//! use ooksift::front::channel::{ChannelPlan, Channelizer};
//!
//! let plan = ChannelPlan::design(2_048_000.0, -150e3, 12e3, 25e3)?;
//! assert!(plan.out_rate_hz >= 25e3);
//! let mut ch = Channelizer::new(&plan)?;
//! let mut env = Vec::new();
//! ch.process(&vec![Complex32::new(0.0, 0.0); 100_000], &mut env);
//! assert_eq!(env.len(), 100_000 / plan.decim);
//! # Ok::<(), ooksift::front::FrontError>(())
//! ```

use num_complex::Complex32;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

use super::{check_rate, fir, FrontError, Result};

/// Largest first-stage (CIC) decimation.
pub const MAX_CIC_DECIM: usize = 8192;
/// Highest CIC order.
pub const MAX_CIC_ORDER: usize = 6;
/// Largest number of clean-up FIR taps a plan may hold.
pub const MAX_FIR_TAPS: usize = 1 << 16;

/// Design knobs of [`ChannelPlan::design_with`]; [`Default`] gives the values used by
/// [`ChannelPlan::design`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ChannelOptions {
    /// Order `N` of the CIC stage, 1..=6 (default 3).
    pub cic_order: usize,
    /// How far down the CIC's images must fall inside the passband (default 60 dB).
    pub alias_rejection_db: f64,
    /// Stopband attenuation of the clean-up FIR (default 60 dB).
    pub stopband_db: f64,
    /// Stop edge as a multiple of the pass edge `bandwidth/2`, > 1 (default 2: the stopband
    /// starts one full bandwidth from the carrier).
    pub stop_edge_factor: f64,
    /// Largest clean-up FIR accepted (default 2047 taps); a design needing more is an error.
    pub max_taps: usize,
}

impl Default for ChannelOptions {
    fn default() -> Self {
        ChannelOptions {
            cic_order: 3,
            alias_rejection_db: 60.0,
            stopband_db: 60.0,
            stop_edge_factor: 2.0,
            max_taps: 2047,
        }
    }
}

/// A designed channel: plain data, serialisable for a verbose report.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ChannelPlan {
    /// Input sample rate.
    pub in_rate_hz: f64,
    /// Requested carrier offset from the centre frequency.
    pub offset_hz: f64,
    /// Offset actually mixed to 0 Hz (quantised to `in_rate_hz / 2⁶⁴`).
    pub nco_offset_hz: f64,
    /// Oscillator phase step per input sample; 2⁶⁴ is one turn.
    pub nco_step: u64,
    /// Full two-sided passband width: the channel passes `offset ± bandwidth/2`.
    pub bandwidth_hz: f64,
    /// Pass edge from the carrier (`bandwidth/2`).
    pub pass_edge_hz: f64,
    /// Stop edge from the carrier.
    pub stop_edge_hz: f64,
    /// CIC order `N`.
    pub cic_order: usize,
    /// CIC decimation `D1`.
    pub cic_decim: usize,
    /// Clean-up FIR decimation `D2`.
    pub fir_decim: usize,
    /// Clean-up FIR taps (unit gain at 0 Hz), applied at `in_rate_hz / D1`.
    pub fir_taps: Vec<f32>,
    /// Total decimation `D1·D2`.
    pub decim: usize,
    /// Envelope rate `in_rate_hz / decim`.
    pub out_rate_hz: f64,
    /// Group delay of the whole chain in input samples.
    pub delay_samples: f64,
    /// Group delay in seconds: subtract it from an output's production time to get the time it
    /// represents.
    pub delay_s: f64,
    /// Designed gain at the pass edge (CIC droop included), dB.
    pub pass_edge_gain_db: f64,
    /// Worst CIC image folding onto the passband or transition band, after the clean-up
    /// FIR, in dB below the carrier (infinite when `cic_decim` is 1).
    pub image_rejection_db: f64,
}

impl ChannelPlan {
    /// Channel bandwidth for a code whose shortest mark lasts `shortest_mark_s`, with
    /// `drift_hz` of expected carrier wander (peak to peak): `3 / shortest_mark + drift`,
    /// inside the 2–4 / shortest-mark range that keeps a mark's main lobe and first sidelobes
    /// (DESIGN.md, "Channel filtering cheaply").
    pub fn bandwidth_for_mark(shortest_mark_s: f64, drift_hz: f64) -> Result<f64> {
        check_duration("shortest mark", shortest_mark_s)?;
        if !(drift_hz.is_finite() && drift_hz >= 0.0) {
            return Err(FrontError::BadConfig {
                field: "drift_hz",
                reason: "must be finite and >= 0",
            });
        }
        Ok(3.0 / shortest_mark_s + drift_hz)
    }

    /// Lowest output rate giving `samples_per_mark` (≥ 1; 4–8 advised) envelope samples in the
    /// shortest mark.
    pub fn out_rate_for_mark(shortest_mark_s: f64, samples_per_mark: f64) -> Result<f64> {
        check_duration("shortest mark", shortest_mark_s)?;
        if !(samples_per_mark.is_finite() && samples_per_mark >= 1.0) {
            return Err(FrontError::BadConfig {
                field: "samples_per_mark",
                reason: "must be finite and >= 1",
            });
        }
        Ok(samples_per_mark / shortest_mark_s)
    }

    /// Designs a channel with [`ChannelOptions::default`].
    ///
    /// `offset_hz` within ±`in_rate_hz/2`; `bandwidth_hz` (full width) in
    /// `(0, in_rate_hz/2]`; `min_out_rate_hz` in `(0, in_rate_hz]`. The output rate is the
    /// lowest `in_rate_hz / (D1·D2)` not below `min_out_rate_hz`, nor below pass edge + stop
    /// edge (so nothing aliases into the passband).
    pub fn design(
        in_rate_hz: f64,
        offset_hz: f64,
        bandwidth_hz: f64,
        min_out_rate_hz: f64,
    ) -> Result<ChannelPlan> {
        Self::design_with(
            in_rate_hz,
            offset_hz,
            bandwidth_hz,
            min_out_rate_hz,
            &ChannelOptions::default(),
        )
    }

    /// Designs a channel with explicit options.
    pub fn design_with(
        in_rate_hz: f64,
        offset_hz: f64,
        bandwidth_hz: f64,
        min_out_rate_hz: f64,
        opts: &ChannelOptions,
    ) -> Result<ChannelPlan> {
        check_rate(in_rate_hz)?;
        let nyquist_hz = in_rate_hz / 2.0;
        if !(offset_hz.is_finite() && offset_hz.abs() <= nyquist_hz) {
            return Err(FrontError::OffsetBeyondNyquist {
                offset_hz,
                nyquist_hz,
            });
        }
        if !(bandwidth_hz.is_finite() && bandwidth_hz > 0.0 && bandwidth_hz <= nyquist_hz) {
            return Err(FrontError::BadBandwidth {
                bandwidth_hz,
                max_hz: nyquist_hz,
            });
        }
        if !(min_out_rate_hz.is_finite() && min_out_rate_hz > 0.0 && min_out_rate_hz <= in_rate_hz)
        {
            return Err(FrontError::BadOutputRate {
                out_rate_hz: min_out_rate_hz,
                in_rate_hz,
            });
        }
        validate_options(opts)?;

        let n = opts.cic_order;
        let pass = bandwidth_hz / 2.0;
        let stop = (pass * opts.stop_edge_factor).min(nyquist_hz);
        let out_target = min_out_rate_hz.max(pass + stop).min(in_rate_hz);
        let d_max = ((in_rate_hz / out_target).floor() as usize).clamp(1, MAX_CIC_DECIM);

        // Largest D1 whose images stay `alias_rejection_db` down: CIC alone over the
        // passband (images at k·fs/D1 ± pass), then CIC × clean-up FIR over everything that
        // folds onto the transition band, checked on the designed filters.
        let cic_alias_db = |d: usize| -> f64 {
            if d == 1 {
                return f64::INFINITY;
            }
            let f = 1.0 / d as f64 - pass / in_rate_hz;
            if f <= pass / in_rate_hz {
                return 0.0;
            }
            -20.0 * fir::cic_gain(d, n, f).max(1e-300).log10()
        };
        let mut d1 = (1..=d_max)
            .rev()
            .find(|&d| cic_alias_db(d) >= opts.alias_rejection_db)
            .unwrap_or(1);
        let (h2, stop1, image_db) = loop {
            let fs1 = in_rate_hz / d1 as f64;
            let stop1 = stop.min(fs1 / 2.0);
            if stop1 <= pass {
                return Err(FrontError::BadBandwidth {
                    bandwidth_hz,
                    max_hz: nyquist_hz,
                });
            }
            let dw = 2.0 * PI * (stop1 - pass) / fs1;
            let (beta, taps) = fir::kaiser_params(opts.stopband_db, dw);
            if taps > opts.max_taps {
                return Err(FrontError::Limit {
                    what: "clean-up FIR taps",
                    needed: taps,
                    limit: opts.max_taps,
                });
            }
            let h2 = fir::kaiser_lowpass(taps, (pass + stop1) / 2.0 / fs1, beta);
            let image_db = image_rejection_db(in_rate_hz, d1, n, &h2, stop1);
            if d1 == 1 || image_db >= opts.alias_rejection_db {
                break (h2, stop1, image_db);
            }
            d1 -= 1;
        };
        let taps = h2.len();
        let fs1 = in_rate_hz / d1 as f64;
        let d2 = ((fs1 / out_target).floor() as usize).max(1);
        let edge_gain = fir::cic_gain(d1, n, pass / in_rate_hz) * fir_gain(&h2, pass / fs1);

        let decim = d1 * d2;
        let delay_samples = (n * (d1 - 1)) as f64 / 2.0 + (taps - 1) as f64 / 2.0 * d1 as f64;
        let nco_step = nco_step_for(offset_hz, in_rate_hz);
        Ok(ChannelPlan {
            in_rate_hz,
            offset_hz,
            nco_offset_hz: (nco_step as i64) as f64 / 2f64.powi(64) * in_rate_hz,
            nco_step,
            bandwidth_hz,
            pass_edge_hz: pass,
            stop_edge_hz: stop1,
            cic_order: n,
            cic_decim: d1,
            fir_decim: d2,
            fir_taps: h2.iter().map(|&v| v as f32).collect(),
            decim,
            out_rate_hz: in_rate_hz / decim as f64,
            delay_samples,
            delay_s: delay_samples / in_rate_hz,
            pass_edge_gain_db: 20.0 * edge_gain.max(1e-300).log10(),
            image_rejection_db: image_db,
        })
    }

    /// Position, in input samples from the first sample, that output `q` represents:
    /// `(q+1)·decim − 1 − delay_samples` (negative during warm-up).
    pub fn output_pos(&self, q: u64) -> f64 {
        (q as f64 + 1.0) * self.decim as f64 - 1.0 - self.delay_samples
    }

    /// [`ChannelPlan::output_pos`] in seconds.
    pub fn output_time_s(&self, q: u64) -> f64 {
        self.output_pos(q) / self.in_rate_hz
    }
}

fn check_duration(what: &'static str, seconds: f64) -> Result<()> {
    if seconds.is_finite() && seconds > 0.0 {
        Ok(())
    } else {
        Err(FrontError::BadDuration { what, seconds })
    }
}

fn validate_options(o: &ChannelOptions) -> Result<()> {
    let bad = |field, reason| Err(FrontError::BadConfig { field, reason });
    if !(1..=MAX_CIC_ORDER).contains(&o.cic_order) {
        return bad("cic_order", "must be from 1 to 6");
    }
    if !(o.alias_rejection_db.is_finite() && o.alias_rejection_db >= 0.0) {
        return bad("alias_rejection_db", "must be finite and >= 0");
    }
    if !(o.stopband_db.is_finite() && (21.0..=150.0).contains(&o.stopband_db)) {
        return bad("stopband_db", "must be from 21 to 150");
    }
    if !(o.stop_edge_factor.is_finite() && o.stop_edge_factor > 1.0) {
        return bad("stop_edge_factor", "must be finite and > 1");
    }
    if o.max_taps == 0 || o.max_taps > MAX_FIR_TAPS {
        return bad("max_taps", "must be from 1 to 65536");
    }
    Ok(())
}

/// Phase step for mixing `offset_hz` down to 0 Hz: offset / rate turns, in units of 2⁻⁶⁴.
fn nco_step_for(offset_hz: f64, rate_hz: f64) -> u64 {
    let turns = (offset_hz / rate_hz).rem_euclid(1.0);
    // Saturating float → int cast; `turns` < 1 so at worst u64::MAX (one LSB short of a turn).
    (turns * 2f64.powi(64)) as u64
}

/// e^{−j·phase} for a phase in units of 2⁻⁶⁴ turn (computed in f64).
fn nco_conj(phase: u64) -> (f64, f64) {
    let a = (phase as i64) as f64 * (2.0 * PI / 2f64.powi(64));
    (a.cos(), -a.sin())
}

/// Smallest attenuation (dB) of what the CIC folds onto baseband frequencies within
/// ±`stop_hz` at its output rate: input frequencies k·fs1 + fb for k = 1, 2 and
/// |fb| ≤ `stop_hz`, attenuated by the CIC at the input and by the FIR `h2` at fb.
fn image_rejection_db(rate_hz: f64, d1: usize, order: usize, h2: &[f64], stop_hz: f64) -> f64 {
    if d1 == 1 {
        return f64::INFINITY;
    }
    let fs1 = rate_hz / d1 as f64;
    let mut worst = 0.0f64;
    const STEPS: usize = 64;
    for i in 0..=STEPS {
        let fb = stop_hz * (2.0 * i as f64 / STEPS as f64 - 1.0);
        let g_fir = fir_gain(h2, fb / fs1);
        for k in 1..=2usize.min(d1 - 1) {
            let f_in = k as f64 * fs1 + fb;
            worst = worst.max(fir::cic_gain(d1, order, f_in / rate_hz) * g_fir);
        }
    }
    -20.0 * worst.max(1e-300).log10()
}

fn fir_gain(h: &[f64], f: f64) -> f64 {
    let (mut re, mut im) = (0.0, 0.0);
    for (k, &c) in h.iter().enumerate() {
        let a = -2.0 * PI * f * k as f64;
        re += c * a.cos();
        im += c * a.sin();
    }
    (re * re + im * im).sqrt()
}

/// The running channel. Allocates only in [`Channelizer::new`]; `process` appends to the
/// caller's vector (reserve it once to stay allocation-free).
#[derive(Debug, Clone)]
pub struct Channelizer {
    plan: ChannelPlan,
    order: usize,
    d1: usize,
    d2: usize,
    /// Length of one flat frame: 2·D1 floats rounded up to a multiple of [`LANES`].
    flat_len: usize,
    /// CIC weights × oscillator phase within a frame, laid out for the flat frame: for each
    /// `j`, `A_j` then `B_j` (`flat_len` each), with Re P_j = A_j·frame and Im P_j = B_j·frame.
    coef: Vec<f32>,
    frame_step: u64,
    frame_phase: u64,
    /// e^{−j·frame_phase} carried by the rotator, and its per-frame step.
    rot: (f64, f64),
    frame_rot_step: (f64, f64),
    /// Frames completed since construction or reset.
    frames: u64,
    /// The frame being filled, interleaved re/im, zero-padded to `flat_len`.
    flat: Vec<f32>,
    fill: usize,
    /// Partial CIC outputs, a ring of `order` slots; `acc_pos` is the next to complete.
    acc: Vec<Complex32>,
    acc_pos: usize,
    /// FIR taps in time order (oldest sample first).
    taps: Vec<f32>,
    /// Mirrored history rings of the real and imaginary parts (kept apart so the FIR runs
    /// on contiguous floats): sample k is stored at k and k + taps.len().
    hist_re: Vec<f32>,
    hist_im: Vec<f32>,
    hist_pos: usize,
    d2_count: usize,
    produced: u64,
    /// The CPU has AVX2 (checked once): the same loops then run on 256-bit vectors.
    wide: bool,
    /// Subtracted from every input sample as it enters the frame (the receiver's DC offset).
    dc: Complex32,
}

impl Channelizer {
    /// Builds the running channel from a plan (checked for consistency).
    pub fn new(plan: &ChannelPlan) -> Result<Self> {
        check_rate(plan.in_rate_hz)?;
        let bad = |reason| Err(FrontError::BadPlan { reason });
        let (n, d1, d2) = (plan.cic_order, plan.cic_decim, plan.fir_decim);
        if !(1..=MAX_CIC_ORDER).contains(&n) {
            return bad("cic_order out of range");
        }
        if !(1..=MAX_CIC_DECIM).contains(&d1) || d2 == 0 {
            return bad("decimation out of range");
        }
        if d1.checked_mul(d2) != Some(plan.decim) {
            return bad("decim is not cic_decim * fir_decim");
        }
        let l2 = plan.fir_taps.len();
        if l2 == 0 || l2 > MAX_FIR_TAPS || plan.fir_taps.iter().any(|v| !v.is_finite()) {
            return bad("fir_taps empty, too long or not finite");
        }
        // Order-N CIC weights, zero-padded to N·D1 for the polyphase split.
        let mut h1 = fir::cic_response(d1, n);
        h1.resize(n * d1, 0.0);
        let flat_len = (2 * d1).div_ceil(LANES) * LANES;
        let mut coef = vec![0f32; 2 * n * flat_len];
        for j in 0..n {
            let (a, b) = coef[2 * j * flat_len..2 * (j + 1) * flat_len].split_at_mut(flat_len);
            for r in 0..d1 {
                let (c, s) = nco_conj(plan.nco_step.wrapping_mul(r as u64));
                let h = h1[j * d1 + d1 - 1 - r];
                let (cr, ci) = ((h * c) as f32, (h * s) as f32);
                // (cr + j·ci)(x + j·y) = (cr·x − ci·y) + j(ci·x + cr·y)
                a[2 * r] = cr;
                a[2 * r + 1] = -ci;
                b[2 * r] = ci;
                b[2 * r + 1] = cr;
            }
        }
        Ok(Channelizer {
            order: n,
            d1,
            d2,
            flat_len,
            coef,
            frame_step: plan.nco_step.wrapping_mul(d1 as u64),
            frame_phase: 0,
            rot: (1.0, 0.0),
            frame_rot_step: nco_conj(plan.nco_step.wrapping_mul(d1 as u64)),
            frames: 0,
            flat: vec![0.0; flat_len],
            fill: 0,
            acc: vec![Complex32::new(0.0, 0.0); n],
            acc_pos: 0,
            taps: plan.fir_taps.iter().rev().copied().collect(),
            hist_re: vec![0.0; 2 * l2],
            hist_im: vec![0.0; 2 * l2],
            hist_pos: 0,
            d2_count: 0,
            produced: 0,
            wide: has_avx2(),
            dc: Complex32::new(0.0, 0.0),
            plan: plan.clone(),
        })
    }

    /// Subtracts `dc` from every input sample from now on (0 by default; [`Channelizer::reset`]
    /// keeps it). Done as the samples are copied into the filter, so it costs no pass of
    /// its own.
    pub fn set_dc(&mut self, dc: Complex32) {
        self.dc = dc;
    }

    /// The plan this channel runs.
    pub fn plan(&self) -> &ChannelPlan {
        &self.plan
    }

    /// Outputs produced since construction or the last reset (the index of the next one).
    pub fn produced(&self) -> u64 {
        self.produced
    }

    /// Back to the state right after construction (all history zero, phase zero).
    pub fn reset(&mut self) {
        self.frame_phase = 0;
        self.rot = (1.0, 0.0);
        self.flat.iter_mut().for_each(|v| *v = 0.0);
        self.frames = 0;
        self.fill = 0;
        self.acc
            .iter_mut()
            .for_each(|v| *v = Complex32::new(0.0, 0.0));
        self.acc_pos = 0;
        self.hist_re.iter_mut().for_each(|v| *v = 0.0);
        self.hist_im.iter_mut().for_each(|v| *v = 0.0);
        self.hist_pos = 0;
        self.d2_count = 0;
        self.produced = 0;
    }

    /// Feeds a block of any length; appends the envelope `|z|` at `out_rate_hz`.
    pub fn process(&mut self, input: &[Complex32], out: &mut Vec<f32>) {
        self.run(input, |z| out.push((z.re * z.re + z.im * z.im).sqrt()));
    }

    /// Feeds a block; appends the complex baseband (carrier at 0 Hz) at `out_rate_hz`
    /// instead of its magnitude. Shares state with [`Channelizer::process`]: use one or the
    /// other on a stream.
    pub fn process_iq(&mut self, input: &[Complex32], out: &mut Vec<Complex32>) {
        self.run(input, |z| out.push(z));
    }

    fn run<F: FnMut(Complex32)>(&mut self, input: &[Complex32], emit: F) {
        #[cfg(target_arch = "x86_64")]
        if self.wide {
            // SAFETY: `wide` is set only when the CPU reports AVX2 (`has_avx2`).
            unsafe { self.run_avx2(input, emit) };
            return;
        }
        self.run_plain(input, emit);
    }

    /// [`Channelizer::run_plain`] compiled for AVX2. The arithmetic is the same sequence of
    /// IEEE operations in the same lanes (no FMA: Rust never fuses a multiply and an add on its own),
    /// so the output is bit-identical to the plain build; only the vector width changes.
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2")]
    unsafe fn run_avx2<F: FnMut(Complex32)>(&mut self, input: &[Complex32], emit: F) {
        self.run_plain(input, emit);
    }

    #[inline(always)]
    fn run_plain<F: FnMut(Complex32)>(&mut self, input: &[Complex32], mut emit: F) {
        let d1 = self.d1;
        let mut rest = input;
        while !rest.is_empty() {
            let take = (d1 - self.fill).min(rest.len());
            let (head, tail) = rest.split_at(take);
            if let Some(dst) = self.flat.get_mut(2 * self.fill..2 * (self.fill + take)) {
                let dc = self.dc;
                for (d, s) in dst.chunks_exact_mut(2).zip(head) {
                    d[0] = s.re - dc.re;
                    d[1] = s.im - dc.im;
                }
            }
            self.fill += take;
            rest = tail;
            if self.fill == d1 {
                self.fill = 0;
                self.frame_done(&mut emit);
            }
        }
    }

    #[inline(always)]
    fn frame_done<F: FnMut(Complex32)>(&mut self, emit: &mut F) {
        // Frame-rate oscillator: a rotator in f64, re-seeded from the exact 64-bit phase every
        // `RESEED_FRAMES` frames (a schedule fixed by the frame count, so block boundaries do
        // not matter); between re-seeds the f64 rounding stays near 1e-14.
        if self.frames % RESEED_FRAMES == 0 {
            self.rot = nco_conj(self.frame_phase);
        }
        let rot = Complex32::new(self.rot.0 as f32, self.rot.1 as f32);
        let (c, s) = self.rot;
        let (sc, ss) = self.frame_rot_step;
        self.rot = (c * sc - s * ss, c * ss + s * sc);
        self.frame_phase = self.frame_phase.wrapping_add(self.frame_step);
        self.frames += 1;
        let n = self.order;
        for (j, ab) in self.coef.chunks_exact(2 * self.flat_len).enumerate() {
            let (a, b) = ab.split_at(self.flat_len);
            let (re, im) = if self.wide {
                // SAFETY: `wide` is private and set only from `has_avx2()`.
                unsafe { dot2_wide(a, b, &self.flat) }
            } else {
                dot2(a, b, &self.flat)
            };
            let slot = wrap(self.acc_pos + j, n);
            if let Some(acc) = self.acc.get_mut(slot) {
                *acc += rot * Complex32::new(re, im);
            }
        }
        let y1 = match self.acc.get_mut(self.acc_pos) {
            Some(a) => std::mem::replace(a, Complex32::new(0.0, 0.0)),
            None => Complex32::new(0.0, 0.0),
        };
        self.acc_pos = wrap(self.acc_pos + 1, n);

        // FIR history and clean-up at the output instants.
        let l2 = self.taps.len();
        for (ring, v) in [(&mut self.hist_re, y1.re), (&mut self.hist_im, y1.im)] {
            if let Some(d) = ring.get_mut(self.hist_pos) {
                *d = v;
            }
            if let Some(d) = ring.get_mut(self.hist_pos + l2) {
                *d = v;
            }
        }
        self.hist_pos = wrap(self.hist_pos + 1, l2);
        self.d2_count += 1;
        if self.d2_count == self.d2 {
            self.d2_count = 0;
            let span = self.hist_pos..self.hist_pos + l2;
            let re = self.hist_re.get(span.clone()).unwrap_or(&[]);
            let im = self.hist_im.get(span).unwrap_or(&[]);
            let (re, im) = if self.wide {
                // SAFETY: `wide` is private and set only from `has_avx2()`.
                unsafe { fir2_wide(&self.taps, re, im) }
            } else {
                (dot_ragged(&self.taps, re), dot_ragged(&self.taps, im))
            };
            emit(Complex32::new(re, im));
            self.produced += 1;
        }
    }
}

/// True when the CPU runs AVX2 code (always false off x86-64).
pub(crate) fn has_avx2() -> bool {
    #[cfg(target_arch = "x86_64")]
    {
        std::arch::is_x86_feature_detected!("avx2")
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        false
    }
}

const LANES: usize = 8;
/// Frames between exact re-seeds of the frame-rate rotator.
const RESEED_FRAMES: u64 = 1024;

/// (a·x, b·x) over flat f32 slices whose common length is a multiple of [`LANES`]. Fixed lane
/// order, so the result depends only on the values; plain vertical arithmetic that compilers
/// vectorise.
#[inline(always)]
fn dot2(a: &[f32], b: &[f32], x: &[f32]) -> (f32, f32) {
    (dot(a, x), dot(b, x))
}

/// [`dot2`] on 256-bit vectors: the same products and sums in the same lanes and order (no
/// FMA), so bit-identical. Left to itself the compiler splits one of the two sums into
/// 2-lane pieces, at half the speed of the whole channel. Call only when [`has_avx2`].
///
/// # Safety
/// The CPU must support AVX2 ([`has_avx2`]).
#[inline(always)]
unsafe fn dot2_wide(a: &[f32], b: &[f32], x: &[f32]) -> (f32, f32) {
    #[cfg(target_arch = "x86_64")]
    {
        // SAFETY: this function's own precondition.
        unsafe { dot2_avx2(a, b, x) }
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        dot2(a, b, x)
    }
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn dot2_avx2(a: &[f32], b: &[f32], x: &[f32]) -> (f32, f32) {
    let (sa, sb, _) = dot2_lanes(a, b, x);
    (reduce_avx2(sa), reduce_avx2(sb))
}

/// (a·x, b·x) over the longest whole number of vectors all three slices hold, kept in
/// [`LANES`] lanes, and that length: the loop both kernels above share.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn dot2_lanes(
    a: &[f32],
    b: &[f32],
    x: &[f32],
) -> (std::arch::x86_64::__m256, std::arch::x86_64::__m256, usize) {
    use std::arch::x86_64::*;
    let n = x.len().min(a.len()).min(b.len()) / LANES * LANES;
    let (mut sa, mut sb) = (_mm256_setzero_ps(), _mm256_setzero_ps());
    let mut i = 0;
    while i < n {
        // SAFETY: i + LANES <= n, and n is at most each slice's length.
        let (xv, av, bv) = unsafe {
            (
                _mm256_loadu_ps(x.as_ptr().add(i)),
                _mm256_loadu_ps(a.as_ptr().add(i)),
                _mm256_loadu_ps(b.as_ptr().add(i)),
            )
        };
        sa = _mm256_add_ps(sa, _mm256_mul_ps(av, xv));
        sb = _mm256_add_ps(sb, _mm256_mul_ps(bv, xv));
        i += LANES;
    }
    (sa, sb, n)
}

/// ([`dot_ragged`]`(h, re)`, [`dot_ragged`]`(h, im)`) on 256-bit vectors, bit-identical (same
/// lanes, same order, the ragged tail added to the first lanes). Call only when [`has_avx2`].
///
/// # Safety
/// The CPU must support AVX2 ([`has_avx2`]).
#[inline(always)]
unsafe fn fir2_wide(h: &[f32], re: &[f32], im: &[f32]) -> (f32, f32) {
    #[cfg(target_arch = "x86_64")]
    {
        // SAFETY: this function's own precondition.
        unsafe { fir2_avx2(h, re, im) }
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        (dot_ragged(h, re), dot_ragged(h, im))
    }
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn fir2_avx2(h: &[f32], re: &[f32], im: &[f32]) -> (f32, f32) {
    use std::arch::x86_64::*;
    let len = h.len().min(re.len()).min(im.len());
    // Products commute exactly, so re·h lane by lane is h·re bit for bit.
    let (sr, si, full) = dot2_lanes(re, im, h);
    let (mut ar, mut ai) = ([0f32; LANES], [0f32; LANES]);
    // SAFETY: each array holds exactly one vector of LANES f32.
    unsafe {
        _mm256_storeu_ps(ar.as_mut_ptr(), sr);
        _mm256_storeu_ps(ai.as_mut_ptr(), si);
    }
    let tail = h[full..len]
        .iter()
        .zip(re[full..len].iter().zip(&im[full..len]));
    for (l, (&hv, (&rv, &iv))) in tail.enumerate() {
        ar[l] += hv * rv;
        ai[l] += hv * iv;
    }
    (reduce(&ar), reduce(&ai))
}

/// [`reduce`] of one vector, same order: ((l0+l4)+(l2+l6)) + ((l1+l5)+(l3+l7)).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn reduce_avx2(v: std::arch::x86_64::__m256) -> f32 {
    use std::arch::x86_64::*;
    let t = _mm_add_ps(_mm256_castps256_ps128(v), _mm256_extractf128_ps(v, 1));
    let u = _mm_add_ps(t, _mm_movehl_ps(t, t));
    _mm_cvtss_f32(_mm_add_ss(u, _mm_shuffle_ps(u, u, 1)))
}

/// a·x in [`LANES`] fixed lanes (lengths a multiple of `LANES`; a ragged tail is ignored).
#[inline(always)]
fn dot(a: &[f32], x: &[f32]) -> f32 {
    let mut s = [0f32; LANES];
    for (xs, as_) in x.chunks_exact(LANES).zip(a.chunks_exact(LANES)) {
        for l in 0..LANES {
            s[l] += as_[l] * xs[l];
        }
    }
    reduce(&s)
}

/// Σ h[k]·x[k] in [`LANES`] fixed lanes, any length (the ragged tail goes to the first lanes).
#[inline(always)]
fn dot_ragged(h: &[f32], x: &[f32]) -> f32 {
    let len = x.len().min(h.len());
    let full = len - len % LANES;
    let (x, h) = (&x[..len], &h[..len]);
    let mut acc = [0f32; LANES];
    for (xs, hs) in x[..full]
        .chunks_exact(LANES)
        .zip(h[..full].chunks_exact(LANES))
    {
        for l in 0..LANES {
            acc[l] += hs[l] * xs[l];
        }
    }
    for (l, (&xv, &hv)) in x[full..].iter().zip(&h[full..]).enumerate() {
        acc[l] += hv * xv;
    }
    reduce(&acc)
}

/// `i mod n` for `i < 2n` without a division.
#[inline]
fn wrap(i: usize, n: usize) -> usize {
    if i >= n {
        i - n
    } else {
        i
    }
}

#[inline]
fn reduce(a: &[f32; LANES]) -> f32 {
    ((a[0] + a[4]) + (a[2] + a[6])) + ((a[1] + a[5]) + (a[3] + a[7]))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    #[cfg(target_arch = "x86_64")]
    fn the_avx2_kernels_match_the_portable_ones_bit_for_bit() {
        // Reference: the portable lane-by-lane sums (`dot`, `dot_ragged`) the AVX2 kernels
        // promise to reproduce exactly. Needs a CPU with AVX2 (this project's machines have it).
        assert!(has_avx2(), "this test needs AVX2");
        let mut rng = crate::rng::Rng::new(11);
        for len in 0..60 {
            let v = |rng: &mut crate::rng::Rng| -> Vec<f32> {
                (0..len).map(|_| rng.gauss() as f32).collect()
            };
            let (a, b, x) = (v(&mut rng), v(&mut rng), v(&mut rng));
            // SAFETY: AVX2 checked above.
            let (p, q) = unsafe { dot2_avx2(&a, &b, &x) };
            let whole = len / LANES * LANES;
            assert_eq!(
                p.to_bits(),
                dot(&a[..whole], &x[..whole]).to_bits(),
                "len {len}"
            );
            assert_eq!(
                q.to_bits(),
                dot(&b[..whole], &x[..whole]).to_bits(),
                "len {len}"
            );
            // SAFETY: as above.
            let (r, i) = unsafe { fir2_avx2(&x, &a, &b) };
            assert_eq!(r.to_bits(), dot_ragged(&x, &a).to_bits(), "len {len}");
            assert_eq!(i.to_bits(), dot_ragged(&x, &b).to_bits(), "len {len}");
        }
    }
    use crate::front::testsig::{tone, Rng};

    const RATE: f64 = 2_048_000.0;

    fn run(plan: &ChannelPlan, x: &[Complex32]) -> Vec<f32> {
        let mut ch = Channelizer::new(plan).expect("plan builds");
        let mut out = Vec::new();
        ch.process(x, &mut out);
        out
    }

    /// RMS of the envelope after the filters have settled.
    fn settled_rms(plan: &ChannelPlan, env: &[f32]) -> f64 {
        let skip = (plan.delay_samples * 2.0 / plan.decim as f64).ceil() as usize + 4;
        let tail = &env[skip.min(env.len())..];
        (tail.iter().map(|&v| (v as f64).powi(2)).sum::<f64>() / tail.len().max(1) as f64).sqrt()
    }

    fn tone_vec(amp: f64, f: f64, len: usize) -> Vec<Complex32> {
        (0..len).map(|n| tone(amp, f, RATE, n, 0.7)).collect()
    }

    /// The obviously-right reference: mix with e^{−jωn} in f64 at every sample, convolve with
    /// the equivalent full-rate FIR (CIC ∗ FIR upsampled by D1) in direct form, keep every
    /// decim-th output. Output q is the full-rate output at n = (q+1)·decim − 1.
    fn naive(plan: &ChannelPlan, x: &[Complex32]) -> Vec<(f64, f64)> {
        let d1 = plan.cic_decim;
        let h1 = fir::cic_response(d1, plan.cic_order);
        let mut h = vec![0.0f64; h1.len() + (plan.fir_taps.len() - 1) * d1];
        for (i, &b) in plan.fir_taps.iter().enumerate() {
            for (k, &a) in h1.iter().enumerate() {
                h[i * d1 + k] += b as f64 * a;
            }
        }
        let w = plan.nco_offset_hz / plan.in_rate_hz;
        let v: Vec<(f64, f64)> = x
            .iter()
            .enumerate()
            .map(|(n, s)| {
                let a = -2.0 * PI * (w * n as f64).rem_euclid(1.0);
                let (c, sn) = (a.cos(), a.sin());
                let (re, im) = (s.re as f64, s.im as f64);
                (re * c - im * sn, re * sn + im * c)
            })
            .collect();
        let mut out = Vec::new();
        let mut n = plan.decim - 1;
        while n < x.len() {
            let (mut re, mut im) = (0.0, 0.0);
            for (k, &c) in h.iter().enumerate().take(n + 1) {
                re += c * v[n - k].0;
                im += c * v[n - k].1;
            }
            out.push((re, im));
            n += plan.decim;
        }
        out
    }

    #[test]
    fn plan_meets_its_requests() {
        let bw = ChannelPlan::bandwidth_for_mark(300e-6, 2e3).expect("bw");
        assert!((bw - 12e3).abs() < 1e-6);
        let min_out = ChannelPlan::out_rate_for_mark(300e-6, 8.0).expect("rate");
        let p = ChannelPlan::design(RATE, 123_456.0, bw, min_out).expect("plan");
        assert!(p.out_rate_hz >= min_out, "{p:?}");
        assert!(p.out_rate_hz < 2.0 * min_out, "needlessly fast: {p:?}");
        assert_eq!(p.decim, p.cic_decim * p.fir_decim);
        assert!(p.cic_decim > 8, "CIC does the heavy lifting: {p:?}");
        assert!(p.fir_taps.len() < 200, "{}", p.fir_taps.len());
        assert!(p.image_rejection_db >= 60.0, "{p:?}");
        assert!(
            p.pass_edge_gain_db > -1.0 && p.pass_edge_gain_db < 0.1,
            "{p:?}"
        );
        assert!((p.nco_offset_hz - 123_456.0).abs() < 1e-6);
        // Cost per input sample: CIC order × 8 flops + FIR taps × 4 flops / decimation.
        let flops = 8.0 * p.cic_order as f64 + 4.0 * p.fir_taps.len() as f64 / p.decim as f64;
        assert!(flops < 40.0, "{flops} flops/sample");
        let json = serde_json::to_string(&p).expect("serialise");
        let back: ChannelPlan = serde_json::from_str(&json).expect("deserialise");
        // serde_json's default float parsing may differ in the last bit of an f64.
        assert_eq!(
            (back.decim, &back.fir_taps, back.nco_step),
            (p.decim, &p.fir_taps, p.nco_step)
        );
        assert!((back.delay_s - p.delay_s).abs() < 1e-15);
    }

    #[test]
    fn bad_requests_are_errors() {
        let e = |r: Result<ChannelPlan>| r.err();
        assert!(matches!(
            e(ChannelPlan::design(0.0, 0.0, 1e3, 1e3)),
            Some(FrontError::BadRate { .. })
        ));
        assert!(matches!(
            e(ChannelPlan::design(RATE, 1.1e6, 1e4, 1e4)),
            Some(FrontError::OffsetBeyondNyquist { .. })
        ));
        assert!(matches!(
            e(ChannelPlan::design(RATE, f64::NAN, 1e4, 1e4)),
            Some(FrontError::OffsetBeyondNyquist { .. })
        ));
        assert!(matches!(
            e(ChannelPlan::design(RATE, 0.0, 0.0, 1e4)),
            Some(FrontError::BadBandwidth { .. })
        ));
        assert!(matches!(
            e(ChannelPlan::design(RATE, 0.0, 2e6, 1e4)),
            Some(FrontError::BadBandwidth { .. })
        ));
        assert!(matches!(
            e(ChannelPlan::design(RATE, 0.0, 1e4, 0.0)),
            Some(FrontError::BadOutputRate { .. })
        ));
        assert!(matches!(
            e(ChannelPlan::design(RATE, 0.0, 1e4, 3e6)),
            Some(FrontError::BadOutputRate { .. })
        ));
        assert!(matches!(
            ChannelPlan::bandwidth_for_mark(0.0, 0.0),
            Err(FrontError::BadDuration { .. })
        ));
        assert!(ChannelPlan::bandwidth_for_mark(1e-3, -1.0).is_err());
        assert!(ChannelPlan::out_rate_for_mark(1e-3, 0.5).is_err());
        // A very wide, very fast channel needs a long FIR: a typed error, not a huge design.
        let opts = ChannelOptions {
            max_taps: 31,
            ..ChannelOptions::default()
        };
        assert!(matches!(
            e(ChannelPlan::design_with(RATE, 0.0, 2e3, 1e6, &opts)),
            Some(FrontError::Limit { .. })
        ));
        let opts = ChannelOptions {
            cic_order: 0,
            ..ChannelOptions::default()
        };
        assert!(matches!(
            e(ChannelPlan::design_with(RATE, 0.0, 2e3, 1e4, &opts)),
            Some(FrontError::BadConfig { .. })
        ));
        // Hand-edited plans are checked.
        let mut p = ChannelPlan::design(RATE, 0.0, 1e4, 2e4).expect("plan");
        p.decim += 1;
        assert!(matches!(
            Channelizer::new(&p),
            Err(FrontError::BadPlan { .. })
        ));
        p.decim -= 1;
        p.fir_taps.clear();
        assert!(matches!(
            Channelizer::new(&p),
            Err(FrontError::BadPlan { .. })
        ));
    }

    #[test]
    fn edge_cases_of_the_design_still_work() {
        // Offset exactly at Nyquist, very low input rate, bandwidth at its maximum.
        for &(rate, off, bw, out) in &[
            (RATE, RATE / 2.0, 1e4, 2e4),
            (RATE, -RATE / 2.0, 1e4, 2e4),
            (48_000.0, 5e3, 8e3, 8e3),
            (250_000.0, 0.0, 125_000.0, 1e3),
            (RATE, 0.0, 100.0, 10.0),
        ] {
            let p = ChannelPlan::design(rate, off, bw, out).expect("plan");
            let mut ch = Channelizer::new(&p).expect("builds");
            let x = (0..20_000)
                .map(|n| tone(0.5, off, rate, n, 0.0))
                .collect::<Vec<_>>();
            let mut env = Vec::new();
            ch.process(&x, &mut env);
            assert_eq!(env.len(), 20_000 / p.decim, "{p:?}");
            assert!(env.iter().all(|v| v.is_finite()));
        }
    }

    #[test]
    fn passband_gain_is_one_and_stopband_is_deep() {
        let bw = 12e3;
        for &off in &[-333_333.3, 0.0, 87_654.3] {
            let p = ChannelPlan::design(RATE, off, bw, 30e3).expect("plan");
            // At the carrier: unit gain (tone amplitude 0.5 → envelope 0.5).
            let env = run(&p, &tone_vec(0.5, off, 200_000));
            let g = settled_rms(&p, &env) / 0.5;
            assert!((g - 1.0).abs() < 1e-3, "gain {g} at {off}");
            // Inside the passband: within 1 dB.
            for &df in &[-0.45 * bw, 0.25 * bw, 0.45 * bw] {
                let env = run(&p, &tone_vec(0.5, off + df, 200_000));
                let g_db = 20.0 * (settled_rms(&p, &env) / 0.5).log10();
                assert!(g_db.abs() < 1.0, "{g_db} dB at {df} Hz from {off}");
            }
            // Stopband: ≥ 40 dB at 3× bandwidth (the brief), and ≥ 55 dB from the stop edge
            // out, including frequencies that land on CIC images.
            let mut probes = vec![3.0 * bw, -3.0 * bw, 1.05 * bw, -1.5 * bw, 200e3, -450e3];
            let fs1 = RATE / p.cic_decim as f64;
            probes.extend([fs1 - 0.3 * bw, -2.0 * fs1 + 0.2 * bw, fs1 + 0.4 * bw]);
            for &df in &probes {
                let f = off + df;
                let f = (f + RATE / 2.0).rem_euclid(RATE) - RATE / 2.0;
                let env = run(&p, &tone_vec(0.5, f, 300_000));
                let att_db = -20.0 * (settled_rms(&p, &env) / 0.5).log10();
                let need = if (df.abs() - 3.0 * bw).abs() < 1.0 {
                    40.0
                } else {
                    55.0
                };
                assert!(
                    att_db >= need,
                    "{att_db} dB at {df} Hz from {off} (plan {p:?})"
                );
            }
        }
    }

    /// OOK pattern: `mark` samples on, `space` off, repeated; silent outside `on_span`.
    fn ook_env(n: usize, mark: usize, space: usize, on_span: std::ops::Range<usize>) -> bool {
        on_span.contains(&n) && (n - on_span.start) % (mark + space) < mark
    }

    /// Keying envelope of a transmitter with raised-cosine edges of `ramp` samples (a real
    /// transmitter's rise time; hard-keyed edges would splatter into every channel).
    fn smooth_key(
        n: usize,
        mark: usize,
        space: usize,
        ramp: usize,
        span: std::ops::Range<usize>,
    ) -> f64 {
        if !span.contains(&n) {
            return 0.0;
        }
        let t = (n - span.start) % (mark + space);
        let rc = |k: usize| 0.5 - 0.5 * (PI * k as f64 / ramp as f64).cos();
        if t < ramp {
            rc(t)
        } else if t < mark {
            1.0
        } else if t < mark + ramp {
            1.0 - rc(t - mark)
        } else {
            0.0
        }
    }

    #[test]
    fn stronger_neighbour_is_suppressed_in_the_envelope() {
        let (off, other) = (-210e3, -160e3);
        let mark = 600; // 293 µs
        let bw = ChannelPlan::bandwidth_for_mark(mark as f64 / RATE, 2e3).expect("bw");
        let p = ChannelPlan::design(RATE, off, bw, 8.0 * RATE / mark as f64).expect("plan");
        let len = 400_000;
        let wanted: Vec<Complex32> = (0..len)
            .map(|n| {
                if ook_env(n, mark, 1200, 50_000..350_000) {
                    tone(0.05, off, RATE, n, 0.2)
                } else {
                    Complex32::new(0.0, 0.0)
                }
            })
            .collect();
        let clean = run(&p, &wanted);
        // Mark level: median of the samples above half level (edges ring a little: hard
        // keying through a sharp filter overshoots by a few percent).
        let mut marks: Vec<f32> = clean.iter().copied().filter(|&v| v > 0.025).collect();
        marks.sort_by(f32::total_cmp);
        let level = marks[marks.len() / 2];
        assert!((level - 0.05).abs() < 0.0015, "mark level {level}");
        // Neighbours 20 dB stronger (amplitude ×10), 50 kHz away: steady, then keyed with
        // 60 µs edges on a different pattern.
        let interferers: [&dyn Fn(usize) -> f64; 2] = [
            &|_| 1.0,
            &|n| smooth_key(n, 900, 700, 123, 0..299_200), // ends after a space
        ];
        for (k, key) in interferers.iter().enumerate() {
            let mut rng = Rng::new(42);
            let mixed: Vec<Complex32> = (0..len)
                .map(|n| wanted[n] + tone(0.5 * key(n), other, RATE, n, 1.3) + rng.cnoise(1e-8))
                .collect();
            let dirty = run(&p, &mixed);
            // Skip the warm-up: the neighbour is switched on hard at the first sample.
            let skip = (2.0 * p.delay_samples / p.decim as f64).ceil() as usize + 2;
            let worst = clean[skip..]
                .iter()
                .zip(&dirty[skip..])
                .map(|(a, b)| (a - b).abs())
                .fold(0f32, f32::max);
            // ≥ 60 dB stopband → the neighbour leaks at ≤ 10·10⁻³ = 1 % of the wanted mark.
            assert!(
                worst < 0.02 * 0.05,
                "interferer {k}: worst difference {worst}"
            );
        }
    }

    #[test]
    fn fast_path_matches_naive_reference() {
        let mut rng = Rng::new(2024);
        let x: Vec<Complex32> = (0..30_000)
            .map(|n| rng.cnoise(0.1) + tone(0.3, 41_000.0, RATE, n, 0.0))
            .collect();
        let cases = [
            (ChannelOptions::default(), 41_000.0, 12e3, 30e3),
            (ChannelOptions::default(), -700_321.0, 40e3, 100e3),
            (
                ChannelOptions {
                    cic_order: 1,
                    alias_rejection_db: 30.0,
                    ..ChannelOptions::default()
                },
                5_000.0,
                20e3,
                40e3,
            ),
            (
                ChannelOptions {
                    cic_order: 2,
                    ..ChannelOptions::default()
                },
                -12_345.0,
                8e3,
                20e3,
            ),
            (ChannelOptions::default(), 1e3, 500e3, 1e6), // D1 = 1 path
        ];
        for (opts, off, bw, out) in cases {
            let p = ChannelPlan::design_with(RATE, off, bw, out, &opts).expect("plan");
            let mut ch = Channelizer::new(&p).expect("builds");
            let mut fast = Vec::new();
            ch.process_iq(&x, &mut fast);
            let slow = naive(&p, &x);
            assert_eq!(fast.len(), slow.len(), "{p:?}");
            assert!(!fast.is_empty());
            let scale = slow
                .iter()
                .map(|&(r, i)| (r * r + i * i).sqrt())
                .fold(0.0f64, f64::max);
            let worst = fast
                .iter()
                .zip(&slow)
                .map(|(f, &(r, i))| ((f.re as f64 - r).powi(2) + (f.im as f64 - i).powi(2)).sqrt())
                .fold(0.0f64, f64::max);
            assert!(
                worst <= 2e-5 * scale.max(1e-3),
                "worst {worst} scale {scale} plan {p:?}"
            );
        }
    }

    #[test]
    fn output_does_not_depend_on_block_size() {
        let mut rng = Rng::new(7);
        let x: Vec<Complex32> = (0..150_001)
            .map(|n| rng.cnoise(0.01) + tone(0.2, -99_000.0, RATE, n, 0.0))
            .collect();
        let p = ChannelPlan::design(RATE, -99_000.0, 10e3, 25e3).expect("plan");
        let whole = run(&p, &x);
        assert_eq!(whole.len(), 150_001 / p.decim);
        for &bs in &[1usize, 7, 4096, p.cic_decim, p.decim + 1] {
            let mut ch = Channelizer::new(&p).expect("builds");
            let mut out = Vec::new();
            for chunk in x.chunks(bs) {
                ch.process(chunk, &mut out);
            }
            assert_eq!(out, whole, "block size {bs}");
            assert_eq!(ch.produced(), whole.len() as u64);
        }
    }

    #[test]
    fn reset_with_dirty_state_gives_identical_runs() {
        let mut rng = Rng::new(8);
        let x: Vec<Complex32> = (0..60_000).map(|_| rng.cnoise(0.05)).collect();
        let junk: Vec<Complex32> = (0..12_345).map(|_| rng.cnoise(9.0)).collect();
        let p = ChannelPlan::design(RATE, 300e3, 15e3, 30e3).expect("plan");
        let mut ch = Channelizer::new(&p).expect("builds");
        let mut first = Vec::new();
        ch.process(&x, &mut first);
        ch.reset();
        let mut sink = Vec::new();
        ch.process(&junk, &mut sink);
        ch.reset();
        let mut again = Vec::new();
        ch.process(&x, &mut again);
        assert_eq!(first, again);
    }

    #[test]
    fn nonfinite_input_washes_out() {
        let p = ChannelPlan::design(RATE, 0.0, 10e3, 25e3).expect("plan");
        let mut ch = Channelizer::new(&p).expect("builds");
        let mut env = Vec::new();
        ch.process(
            &vec![Complex32::new(f32::NAN, f32::INFINITY); 1000],
            &mut env,
        );
        let settle = p.delay_samples as usize * 2 + 2 * p.decim;
        ch.process(&tone_vec(0.25, 0.0, settle + 20_000), &mut env);
        let last = env[env.len() - 1];
        assert!((last - 0.25).abs() < 1e-3, "{last}");
    }

    #[test]
    fn delay_figure_places_a_step_at_its_true_time() {
        // Carrier switched on at a known sample (truth: the synthesised step).
        let off = 250e3;
        let p = ChannelPlan::design(RATE, off, 12e3, 60e3).expect("plan");
        for &on_at in &[40_000usize, 40_017, 40_333] {
            let x: Vec<Complex32> = (0..80_000)
                .map(|n| {
                    if n >= on_at {
                        tone(1.0, off, RATE, n, 0.0)
                    } else {
                        Complex32::new(0.0, 0.0)
                    }
                })
                .collect();
            let env = run(&p, &x);
            // Linear-phase filters cross half amplitude at the step (symmetric step response).
            let q = env.iter().position(|&v| v >= 0.5).expect("step seen");
            let (a, b) = (env[q - 1] as f64, env[q] as f64);
            let pos = p.output_pos(q as u64 - 1) + (0.5 - a) / (b - a) * p.decim as f64;
            let err = (pos - on_at as f64).abs();
            assert!(err < 0.1 * p.decim as f64, "step at {on_at} found at {pos}");
            assert!(
                (p.output_time_s(q as u64) - p.output_pos(q as u64) / RATE).abs() < 1e-12,
                "seconds and samples agree"
            );
        }
    }
}
