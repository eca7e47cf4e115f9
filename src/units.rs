//! The time axis and its units.
//!
//! Stages speak *sample positions*: `f64` counts of samples from the start of the capture, with a
//! fractional part where an edge falls between two samples. Only reports convert them to
//! seconds, milliseconds or microseconds, and they do it here, through one [`Rate`], so the
//! `_s`/`_ms`/`_us` suffixes of report fields always mean what they say.
//!
//! ```
//! use ooksift::units::Rate;
//! let rate = Rate::new(250_000.0).unwrap();
//! assert_eq!(rate.to_us(87.5), 350.0);
//! assert_eq!(rate.samples_from_us(350.0), 87.5);
//! ```

/// A sample rate in hertz: finite and strictly positive by construction.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Rate(f64);

impl Rate {
    /// Highest rate accepted (1 THz): anything above is an absurd header, not a capture.
    pub const MAX_HZ: f64 = 1e12;

    /// Lowest rate accepted (1 Hz): below it a capture's duration can overflow to infinity
    /// (`u64` samples at 1e-300 Hz), and no OOK signal fits anyway.
    pub const MIN_HZ: f64 = 1.0;

    /// Wraps a rate; `None` unless `1 <= hz <= 1e12` (so also finite).
    pub fn new(hz: f64) -> Option<Rate> {
        (Self::MIN_HZ..=Self::MAX_HZ)
            .contains(&hz)
            .then_some(Rate(hz))
    }

    /// The rate in hertz.
    pub fn hz(self) -> f64 {
        self.0
    }

    /// Seconds spanned by `samples` samples.
    pub fn to_s(self, samples: f64) -> f64 {
        samples / self.0
    }

    /// Milliseconds spanned by `samples` samples.
    pub fn to_ms(self, samples: f64) -> f64 {
        samples * 1e3 / self.0
    }

    /// Microseconds spanned by `samples` samples.
    pub fn to_us(self, samples: f64) -> f64 {
        samples * 1e6 / self.0
    }

    /// Samples spanned by `s` seconds.
    pub fn samples_from_s(self, s: f64) -> f64 {
        s * self.0
    }

    /// Samples spanned by `ms` milliseconds.
    pub fn samples_from_ms(self, ms: f64) -> f64 {
        ms * self.0 / 1e3
    }

    /// Samples spanned by `us` microseconds.
    pub fn samples_from_us(self, us: f64) -> f64 {
        us * self.0 / 1e6
    }
}

/// Rounds a figure for a report to `digits` decimals, so JSON stays readable and stable.
pub fn round_to(x: f64, digits: i32) -> f64 {
    let p = 10f64.powi(digits);
    (x * p).round() / p
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rejects_absurd_rates() {
        assert!(Rate::new(0.0).is_none());
        assert!(Rate::new(-48_000.0).is_none());
        assert!(Rate::new(f64::NAN).is_none());
        assert!(Rate::new(f64::INFINITY).is_none());
        assert!(Rate::new(2e12).is_none());
        assert!(Rate::new(48_000.0).is_some());
        // A tiny rate made the duration of a capture infinite (JSON null): refused.
        assert!(Rate::new(1e-300).is_none());
        assert!(Rate::new(0.5).is_none());
        assert!(Rate::new(1.0).is_some());
        assert!(Rate::new(1e12).is_some());
    }

    #[test]
    fn conversions_round_trip() {
        let r = Rate::new(2_048_000.0).expect("valid rate");
        for s in [0.0, 1.0, 717.3, 2_048_000.0] {
            assert!((r.samples_from_us(r.to_us(s)) - s).abs() < 1e-9);
            assert!((r.samples_from_ms(r.to_ms(s)) - s).abs() < 1e-9);
            assert!((r.samples_from_s(r.to_s(s)) - s).abs() < 1e-9);
        }
        assert_eq!(round_to(1.23456, 2), 1.23);
    }
}
