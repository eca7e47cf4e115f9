//! `synth`: the inverse of decoding. Codes and a channel model in; a capture file and its
//! truth sidecar (`NAME.truth.json`, the same code fields as a decode report) out.
//!
//! The capture is rendered in blocks straight to disk, so multi-gigabyte benchmark captures
//! cost no memory. Marks are box-filtered (linear ramps of `edge_us`, at least one sample), so
//! every edge crosses half height exactly at its nominal time, between samples if need be.
//!
//! Channel model (all optional): SNR as Eu/N0 = A²·T_unit/N0 in dB, N0 being the complex
//! noise power per hertz (σ² = N0·fs per complex sample, half per component; envelope
//! outputs carry one component's worth); carrier offset and phase per press; complex DC
//! offset; mark stretching (envelope outputs: the receiver's decay lengthens marks); encoder
//! clock error per press; inverted envelope polarity.
//!
//! ```no_run
//! use ooksift::synth::{SynthSpec, PressSpec, write_capture};
//! let mut spec = SynthSpec::default();
//! spec.format = "cu8".into();
//! spec.presses.push(PressSpec::new("pwm", "0xcf2b12"));
//! write_capture(&spec, "gate.cu8".as_ref(), false).unwrap();
//! ```

mod spec;
mod write;

pub use spec::{parse_press, ChannelSpec, PressSpec, SynthSpec, CHATTER_GUARD_MS};
pub use write::{truth_path, write_capture, TruthCapture, TruthCode, TruthFile};

/// Errors of the synth layer.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SynthError {
    /// The specification is not usable.
    #[error("bad synth specification: {0}")]
    Spec(String),
    /// Writing failed.
    #[error("cannot write {path}: {source}")]
    Io {
        /// The file.
        path: String,
        /// The cause.
        source: std::io::Error,
    },
    /// The output exists and `--force` was not given.
    #[error("{0} exists; add --force to replace it")]
    Exists(String),
}
