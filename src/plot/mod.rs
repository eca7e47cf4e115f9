//! Pictures of a capture: an SVG of our own layout, readable in any browser.
//!
//! Three views, one above the other:
//!
//! 1. **Envelope over time**: the envelope reduced to a min/max band per pixel column, the
//!    edge stage's idle floor and its `floor + 4σ` detection line, every detected mark shaded,
//!    a box around each decoded frame with its key above it and its bits written under it.
//!    For an IQ capture this is either the whole band (the default) or one carrier's channel
//!    ([`ChannelChoice`]): mixed to 0 Hz, low-passed and decimated exactly as the per-carrier
//!    decode does it, with the frames and bits of that channel's own decoder.
//! 2. **Spectrum** (when a [`SpectrumView`] is given, and always when a channel was chosen):
//!    average and peak-hold level across the capture's band, carriers marked, the chosen
//!    channel's passband shaded.
//! 3. **Width histograms**: mark and space widths of the decoded frames on a logarithmic
//!    µs axis, with their clusters and each code's inferred unit.
//!
//! Collecting streams the capture once ([`PlotCollector`] drives a [`Decoder`] and, beside it,
//! its own envelope and edge detector); only per-column minima and maxima, the (coalesced)
//! marks and the decode report are kept, so a capture of any length plots in bounded memory.
//! When the capture's length is unknown in advance (standard input), columns start one
//! envelope sample wide and are merged in pairs whenever there are twice too many.
//!
//! ```no_run
//! use ooksift::plot::{collect_path, write_svg, ChannelChoice, PlotOptions};
//! let data = collect_path("captures/harrowgate-gate.cu8", &PlotOptions::default()).unwrap();
//! write_svg(&data, "gate.svg".as_ref(), false).unwrap();
//!
//! // Only the transmitter near +25 kHz: its channel's envelope and its decode.
//! let opts = PlotOptions {
//!     channel: ChannelChoice::Nearest(25e3),
//!     ..PlotOptions::default()
//! };
//! let data = collect_path("captures/harrowgate-gate.cu8", &opts).unwrap();
//! write_svg(&data, "gate-channel.svg".as_ref(), false).unwrap();
//! ```
//!
//! A chosen channel costs one more pass over the file (the spectrum survey that finds the
//! carriers, as `decode` does for IQ files), so it needs a file, not standard input.
//!
//! [`Decoder`]: crate::decode::Decoder

mod axis;
mod channel;
mod collect;
mod svg;

pub use channel::{pick_carrier, spectrum_of};
pub use collect::PlotCollector;
pub use svg::{render_svg, view_source, SVG_WIDTH_PX};

use crate::decode::{DecodeError, DecodeOptions};
use crate::front::FrontError;
use crate::output::OutputError;
use crate::report::DecodeReport;
use crate::source::{self, SampleSource, SourceError};
use std::path::Path;

/// Errors of the plot layer.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum PlotError {
    /// The capture could not be read.
    #[error(transparent)]
    Source(#[from] SourceError),
    /// The requested time window is empty or outside the capture.
    #[error("bad time window: {0}")]
    Window(String),
    /// The SVG could not be written.
    #[error(transparent)]
    Output(#[from] OutputError),
    /// The spectrum survey failed.
    #[error(transparent)]
    Decode(#[from] DecodeError),
    /// The chosen carrier's channel could not be built.
    #[error("channel: {0}")]
    Front(#[from] FrontError),
    /// No carrier fits the choice, or the capture has none to choose from.
    #[error("{0}")]
    Carrier(String),
}

/// Which part of the band the envelope view shows.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[non_exhaustive]
pub enum ChannelChoice {
    /// The whole band, in one pass (as recorded, for envelope captures). IQ captures show every
    /// transmitter at once and are decoded from the whole band.
    #[default]
    WholeBand,
    /// The bursty carrier nearest this offset from the centre frequency, Hz. The offset must
    /// fall inside that carrier's channel passband, or within [`NEAREST_TOLERANCE_HZ`] of the
    /// carrier when the passband is narrower.
    Nearest(f64),
    /// The bursty carrier with the highest peak level in the survey.
    Strongest,
}

/// Least distance accepted between a requested offset and the carrier it picks.
pub const NEAREST_TOLERANCE_HZ: f64 = 5e3;

/// The carrier channel a plot shows.
#[derive(Debug, Clone, PartialEq)]
pub struct ShownChannel {
    /// Offset the survey measured for the carrier, Hz from the centre.
    pub carrier_offset_hz: f64,
    /// The carrier's peak level in the survey, dB.
    pub peak_db: f32,
    /// Passband width of the channel (the decode's own plan), Hz.
    pub bandwidth_hz: f64,
    /// Envelope rate of the channel before smoothing, Hz.
    pub out_rate_hz: f64,
    /// What was asked for: the offset given, or `None` for the strongest carrier.
    pub requested_hz: Option<f64>,
}

/// What to plot.
#[derive(Debug, Clone)]
pub struct PlotOptions {
    /// How to open and decode the capture.
    pub decode: DecodeOptions,
    /// Start of the time window, seconds from capture start (default 0).
    pub from_s: Option<f64>,
    /// End of the time window, seconds from capture start (default: the end).
    pub to_s: Option<f64>,
    /// Envelope columns kept across the window (default: one per pixel of the SVG's plot
    /// area, 1 290).
    pub columns: usize,
    /// Whole band, or one carrier's channel (IQ files only).
    pub channel: ChannelChoice,
}

impl Default for PlotOptions {
    fn default() -> Self {
        PlotOptions {
            decode: DecodeOptions::default(),
            from_s: None,
            to_s: None,
            columns: svg::PLOT_WIDTH_PX as usize,
            channel: ChannelChoice::WholeBand,
        }
    }
}

/// A spectrum to draw: the lead's carrier survey (or any caller) fills it.
///
/// `average_db` and `peak_db` hold one value per frequency bin in FFT-shifted order: bin `k`
/// of `n` sits at `−rate_hz/2 + k·rate_hz/n` relative to the centre, so the bins run from
/// `−rate/2` up to just below `+rate/2` and bin `n/2` is 0 Hz. Both vectors must have the same
/// length (a longer one is cut to the shorter).
#[derive(Debug, Clone, PartialEq)]
pub struct SpectrumView {
    /// Sample rate of the capture the spectrum was taken from.
    pub rate_hz: f64,
    /// Centre frequency, when known (the frequency axis is then absolute).
    pub center_hz: Option<f64>,
    /// Average power per bin, dB (any reference; dBFS is usual).
    pub average_db: Vec<f32>,
    /// Peak-hold power per bin, dB, on the same reference.
    pub peak_db: Vec<f32>,
    /// Carriers to mark.
    pub carriers: Vec<CarrierMarker>,
}

impl SpectrumView {
    /// Offset from the centre of bin `k` of `n` (FFT-shifted order).
    pub fn bin_offset_hz(&self, k: usize, n: usize) -> f64 {
        -self.rate_hz / 2.0 + k as f64 * self.rate_hz / n.max(1) as f64
    }
}

/// One carrier marked on the spectrum.
#[derive(Debug, Clone, PartialEq)]
pub struct CarrierMarker {
    /// Offset from the centre frequency.
    pub offset_hz: f64,
    /// Its peak level, dB (drawn as a dot when given).
    pub level_db: Option<f64>,
    /// A short label (a key, or the offset).
    pub label: String,
}

/// The envelope over one pixel column.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EnvelopeColumn {
    /// Start of the column, seconds from capture start.
    pub t0_s: f64,
    /// End of the column.
    pub t1_s: f64,
    /// Lowest envelope sample in the column.
    pub min: f32,
    /// Highest envelope sample in the column.
    pub max: f32,
    /// Mean idle floor the edge stage tracked over the column.
    pub floor: f32,
    /// Mean detection line (floor + `on_sigma`·σ) over the column.
    pub threshold: f32,
}

/// Everything a plot shows, gathered in one pass over the capture.
#[derive(Debug, Clone)]
pub struct PlotData {
    /// The decode of the whole capture.
    pub report: DecodeReport,
    /// Start of the window shown, seconds.
    pub from_s: f64,
    /// End of the window shown, seconds (at most the capture's end).
    pub to_s: f64,
    /// The envelope, one entry per column, in time order.
    pub columns: Vec<EnvelopeColumn>,
    /// Detected marks overlapping the window as (rise, fall) seconds; marks closer than a
    /// column are merged into one span.
    pub marks_s: Vec<(f64, f64)>,
    /// Detection line in noise standard deviations above the floor.
    pub on_sigma: f32,
    /// Spectrum to draw (none for envelope captures, or until a survey provides it).
    pub spectrum: Option<SpectrumView>,
    /// The carrier channel shown (`None`: the whole band, or a recorded envelope).
    pub channel: Option<ShownChannel>,
}

/// Collects the plot data of an open capture, from the whole band (a chosen channel needs
/// [`collect_path`], which reads the file twice).
pub fn collect_source(
    src: &mut dyn SampleSource,
    opts: &PlotOptions,
) -> Result<PlotData, PlotError> {
    let mut c = PlotCollector::new(src.info().clone(), opts)?;
    while let Some(block) = src.next_block()? {
        c.push(block);
    }
    c.finish()
}

/// Opens the capture at `path` (`-` for standard input) and collects its plot data.
///
/// With a carrier chosen in `opts.channel`, an IQ file is read twice: the spectrum survey of
/// `decode` finds the bursty carriers, [`pick_carrier`] takes one, and the second pass runs
/// that carrier's channel (the plan `decode` would give it) into the envelope view and into a
/// channel decoder. Envelope captures and standard input then give [`PlotError::Carrier`].
pub fn collect_path(path: &str, opts: &PlotOptions) -> Result<PlotData, PlotError> {
    let mut src = source::open(path, &opts.decode.open)?;
    if opts.channel == ChannelChoice::WholeBand {
        return collect_source(src.as_mut(), opts);
    }
    channel::collect_channel(path, src, opts)
}

/// Renders `data` and writes it to `out` atomically; an existing `out` is kept unless `force`.
pub fn write_svg(data: &PlotData, out: &Path, force: bool) -> Result<(), PlotError> {
    let text = render_svg(data);
    crate::output::write_atomic(out, text.as_bytes(), force)?;
    Ok(())
}
