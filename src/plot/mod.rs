//! Pictures of a capture: an SVG of our own layout, readable in any browser.
//!
//! Three views, one above the other:
//!
//! 1. **Envelope over time**: the envelope reduced to a min/max band per pixel column, the
//!    edge stage's idle floor and its `floor + 4σ` detection line, every detected mark shaded,
//!    a box around each decoded frame with its key above it and its bits written under it.
//! 2. **Spectrum** (when a [`SpectrumView`] is given): average and peak-hold level across the
//!    capture's band, carriers marked.
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
//! use ooksift::plot::{collect_path, write_svg, PlotOptions};
//! let data = collect_path("captures/harrowgate-gate.cu8", &PlotOptions::default()).unwrap();
//! write_svg(&data, "gate.svg".as_ref(), false).unwrap();
//! ```
//!
//! [`Decoder`]: crate::decode::Decoder

mod axis;
mod collect;
mod svg;

pub use collect::PlotCollector;
pub use svg::{render_svg, SVG_WIDTH_PX};

use crate::decode::DecodeOptions;
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
    /// area, [`svg::PLOT_WIDTH_PX`]).
    pub columns: usize,
}

impl Default for PlotOptions {
    fn default() -> Self {
        PlotOptions {
            decode: DecodeOptions::default(),
            from_s: None,
            to_s: None,
            columns: svg::PLOT_WIDTH_PX as usize,
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
}

/// Collects the plot data of an open capture.
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
pub fn collect_path(path: &str, opts: &PlotOptions) -> Result<PlotData, PlotError> {
    let mut src = source::open(path, &opts.decode.open)?;
    collect_source(src.as_mut(), opts)
}

/// Renders `data` and writes it to `out` atomically; an existing `out` is kept unless `force`.
pub fn write_svg(data: &PlotData, out: &Path, force: bool) -> Result<(), PlotError> {
    let text = render_svg(data);
    crate::output::write_atomic(out, text.as_bytes(), force)?;
    Ok(())
}
