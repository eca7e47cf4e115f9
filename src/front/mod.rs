//! Front end: from samples to an envelope the edge stage can read.
//!
//! [`envelope`] is the whole-band detector (magnitude of every IQ sample, or the recorded
//! envelope of a WAV), integrated and dumped down to an analysis rate; it needs no knowledge
//! of the carrier. For IQ captures the two stages below find the carriers and turn each one
//! into an envelope of its own channel.
//!
//! Two streaming stages, both fed with blocks of [`Complex32`](num_complex::Complex32) of any
//! size (one sample to millions). Each keeps its own state between blocks, so the result does
//! not depend on where the blocks are cut, allocates nothing per sample and keeps a flat memory
//! footprint however long the capture:
//!
//! - [`spectrum::SpectrumSurvey`] — windowed FFT frames over the whole capture, kept as an
//!   average and as a peak-hold; finds the noise floor, the carriers (with a sub-bin centre,
//!   levels, an activity figure that separates continuous from bursty carriers, and the
//!   occupied bandwidth) and flags the receiver's DC offset separately.
//! - [`channel::ChannelPlan`] / [`channel::Channelizer`] — a pure-data plan (mixer offset,
//!   decimation factors, filter taps, group delay), then the running channel: a numerically
//!   controlled mixer fused with a CIC (cascaded boxcar) decimator, a short Kaiser-window FIR
//!   clean-up with a second decimation, and the magnitude.
//!
//! ```
//! use num_complex::Complex32;
//! use ooksift::front::channel::{ChannelPlan, Channelizer};
//! use ooksift::front::spectrum::{SpectrumSurvey, SurveyConfig};
//!
//! let rate_hz = 250_000.0;
//! // A carrier 40 kHz above the centre frequency (phase reduced to one turn in f64 first).
//! let tone: Vec<Complex32> = (0..50_000)
//!     .map(|n| {
//!         let turns = (40e3 * n as f64 / rate_hz).fract();
//!         Complex32::from_polar(0.5, (std::f64::consts::TAU * turns) as f32)
//!     })
//!     .collect();
//!
//! let mut survey = SpectrumSurvey::new(rate_hz, SurveyConfig::for_rate(rate_hz))?;
//! survey.push(&tone);
//! let found = survey.finish();
//! let carrier = &found.carriers[0];
//! assert!((carrier.offset_hz - 40e3).abs() < 1e3);
//!
//! // Shortest mark 400 us, 2 kHz of drift: channel bandwidth and output rate follow from them.
//! let bw_hz = ChannelPlan::bandwidth_for_mark(400e-6, 2e3)?;
//! let min_out_hz = ChannelPlan::out_rate_for_mark(400e-6, 8.0)?;
//! let plan = ChannelPlan::design(rate_hz, carrier.offset_hz, bw_hz, min_out_hz)?;
//! let mut channel = Channelizer::new(&plan)?;
//! let mut envelope = Vec::new();
//! channel.process(&tone, &mut envelope);
//! let settled = envelope[envelope.len() - 1];
//! assert!((settled - 0.5).abs() < 0.01);
//! # Ok::<(), ooksift::front::FrontError>(())
//! ```

pub mod activity;
pub mod baseline;
pub mod channel;
pub mod coherent;
pub mod envelope;
mod fir;
pub mod spectrum;

/// Errors of the front-end layer. Every constructor validates its input and returns one of
/// these instead of panicking.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum FrontError {
    /// The sample rate is zero, negative or not finite.
    #[error("front: sample rate {rate_hz} Hz is not a positive finite number")]
    BadRate {
        /// The rejected rate.
        rate_hz: f64,
    },
    /// The carrier offset lies outside −rate/2 ..= +rate/2 (or is not finite).
    #[error("front: carrier offset {offset_hz} Hz is beyond Nyquist (±{nyquist_hz} Hz)")]
    OffsetBeyondNyquist {
        /// The rejected offset.
        offset_hz: f64,
        /// Half the sample rate.
        nyquist_hz: f64,
    },
    /// The channel bandwidth is zero, negative, not finite or wider than half the sample rate.
    #[error(
        "front: channel bandwidth {bandwidth_hz} Hz is unusable (must be > 0 and <= {max_hz} Hz)"
    )]
    BadBandwidth {
        /// The rejected bandwidth.
        bandwidth_hz: f64,
        /// The widest bandwidth accepted at this sample rate.
        max_hz: f64,
    },
    /// The requested output rate is zero, negative, not finite or above the input rate.
    #[error(
        "front: output rate {out_rate_hz} Hz is unusable (must be > 0 and <= {in_rate_hz} Hz)"
    )]
    BadOutputRate {
        /// The rejected output rate.
        out_rate_hz: f64,
        /// The input rate.
        in_rate_hz: f64,
    },
    /// A duration (for example the shortest mark) is zero, negative or not finite.
    #[error("front: {what} of {seconds} s is not a positive finite duration")]
    BadDuration {
        /// What the duration describes.
        what: &'static str,
        /// The rejected value.
        seconds: f64,
    },
    /// A configuration field is out of range.
    #[error("front: configuration field `{field}` {reason}")]
    BadConfig {
        /// The field name.
        field: &'static str,
        /// What is wrong with it.
        reason: &'static str,
    },
    /// A design would need more resources than the front end allows.
    #[error("front: {what} would need {needed}, limit is {limit}")]
    Limit {
        /// What hit the limit.
        what: &'static str,
        /// The amount the design asked for.
        needed: usize,
        /// The largest amount allowed.
        limit: usize,
    },
    /// A channel plan whose fields contradict each other (e.g. edited by hand).
    #[error("front: inconsistent channel plan: {reason}")]
    BadPlan {
        /// What is inconsistent.
        reason: &'static str,
    },
}

/// Result alias of the front-end layer.
pub type Result<T> = std::result::Result<T, FrontError>;

/// Lowest level reported in dB; stands for "no power" so that no field is ever `-inf`
/// (JSON has no infinities).
pub const MIN_DB: f32 = -300.0;

/// Power ratio → dB, clamped at [`MIN_DB`]; NaN maps to [`MIN_DB`] too.
pub(crate) fn power_db(p: f64) -> f32 {
    if p.is_nan() || p <= 1e-30 {
        MIN_DB
    } else {
        (10.0 * p.log10()) as f32
    }
}

/// Checks that a sample rate is positive and finite.
pub(crate) fn check_rate(rate_hz: f64) -> Result<()> {
    if rate_hz.is_finite() && rate_hz > 0.0 {
        Ok(())
    } else {
        Err(FrontError::BadRate { rate_hz })
    }
}

/// Deterministic test signals: a xorshift generator with Box–Muller Gaussian noise, so tests
/// need no extra crates and every run sees the same samples.
#[cfg(test)]
pub(crate) mod testsig {
    use num_complex::Complex32;
    use std::f64::consts::PI;

    /// xorshift64* (Vigna 2016, "An experimental exploration of Marsaglia's xorshift
    /// generators, scrambled"; shifts 12/25/27 and multiplier from memory).
    pub struct Rng(u64);

    impl Rng {
        pub fn new(seed: u64) -> Self {
            Rng(seed.max(1))
        }
        pub fn next_u64(&mut self) -> u64 {
            let mut x = self.0;
            x ^= x >> 12;
            x ^= x << 25;
            x ^= x >> 27;
            self.0 = x;
            x.wrapping_mul(0x2545_F491_4F6C_DD1D)
        }
        /// Uniform in (0, 1].
        pub fn uniform(&mut self) -> f64 {
            ((self.next_u64() >> 11) as f64 + 1.0) / (1u64 << 53) as f64
        }
        /// Complex Gaussian with E|n|^2 = power (Box–Muller).
        pub fn cnoise(&mut self, power: f64) -> Complex32 {
            let r = (-2.0 * self.uniform().ln()).sqrt();
            let th = 2.0 * PI * self.uniform();
            let s = (power / 2.0).sqrt();
            Complex32::new((s * r * th.cos()) as f32, (s * r * th.sin()) as f32)
        }
    }

    /// Complex tone: amplitude `amp`, frequency `f_hz`, phase `ph` at sample 0.
    pub fn tone(amp: f64, f_hz: f64, rate: f64, n: usize, ph: f64) -> Complex32 {
        // Reduce the phase in f64 before the cast so long signals stay exact.
        let cycles = (f_hz * n as f64 / rate).rem_euclid(1.0);
        let a = 2.0 * PI * cycles + ph;
        Complex32::new((amp * a.cos()) as f32, (amp * a.sin()) as f32)
    }
}
