//! Capture sources: raw IQ or envelope files, WAV, SigMF, and standard input.
//!
//! Every source yields fixed-size blocks of normalised samples through [`SampleSource`], so
//! memory stays flat however long the capture. End of stream is `Ok(None)`.
//!
//! ```no_run
//! use ooksift::source::{open, OpenOptions, Samples};
//! let mut src = open("captures/harrowgate-gate.cu8", &OpenOptions::default()).unwrap();
//! println!("{} Hz", src.info().rate.hz());
//! while let Some(block) = src.next_block().unwrap() {
//!     match block {
//!         Samples::Iq(iq) => println!("{} IQ samples", iq.len()),
//!         Samples::Envelope(env) => println!("{} envelope samples", env.len()),
//!     }
//! }
//! ```

mod datatype;
mod raw;
mod sigmf;
mod wav;

pub use datatype::{Component, Cu8Sums, Datatype, UnknownDatatype};
pub use raw::RawSource;
pub use sigmf::{SigmfMeta, SigmfSource};
pub use wav::WavSource;

use crate::units::Rate;
use num_complex::Complex32;
use std::fs::File;
use std::io::{BufReader, Read};
use std::path::Path;

/// Errors of the source layer. Each names the problem; the CLI adds the file name.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SourceError {
    /// Reading failed.
    #[error("cannot read: {0}")]
    Io(#[from] std::io::Error),
    /// The input holds no bytes at all.
    #[error("file is empty")]
    Empty,
    /// The byte count is not a whole number of samples.
    #[error("ends in the middle of a sample: {trailing} trailing byte(s) (one {datatype} sample is {sample_bytes} bytes)")]
    PartialSample {
        trailing: usize,
        datatype: String,
        sample_bytes: usize,
    },
    /// The dataset format is not one we know.
    #[error("{0}")]
    UnknownDatatype(#[from] UnknownDatatype),
    /// The container could not be told from the name or the content.
    #[error("cannot tell the capture format; give --format (cu8, ci8, ci16_le, cf32_le, ru8, ri16_le, rf32_le, wav or sigmf)")]
    UnknownFormat,
    /// A raw capture with no sample rate.
    #[error("no sample rate: raw captures need --rate HZ")]
    MissingRate,
    /// A sample rate outside [1, 1e12] Hz.
    #[error("absurd sample rate {} Hz (expected 1 Hz to 1 THz)", show_hz(*.0))]
    BadRate(f64),
    /// A float sample that is NaN or infinite, or a 64-bit float beyond the 32-bit range the
    /// pipeline works in (`value` is then the infinity it became).
    #[error(
        "sample {index} is not a finite number within the 32-bit float range (read as {value})"
    )]
    NonFinite { index: u64, value: f32 },
    /// WAV container problems reported by the WAV reader.
    #[error("bad WAV: {0}")]
    Wav(String),
    /// A WAV whose data chunk ends before its header says.
    #[error("WAV data chunk is truncated: the header declares {declared} samples, the file holds {found}")]
    WavTruncated { declared: u64, found: u64 },
    /// A WAV layout we do not read.
    #[error("unsupported WAV: {0}")]
    WavUnsupported(String),
    /// SigMF metadata problems.
    #[error("bad SigMF metadata: {0}")]
    Sigmf(String),
    /// The SigMF dataset file could not be opened.
    #[error("SigMF data file {path} cannot be opened: {source}")]
    SigmfData {
        path: String,
        source: std::io::Error,
    },
}

/// A rate for a message: plain digits for ordinary values, exponent form for absurd ones (so
/// `1e300` does not print as 301 digits).
fn show_hz(hz: f64) -> String {
    if hz == 0.0 || (hz.abs() >= 1e-3 && hz.abs() < 1e15) || !hz.is_finite() {
        format!("{hz}")
    } else {
        format!("{hz:e}")
    }
}

/// A `Result` of the source layer.
pub type Result<T> = std::result::Result<T, SourceError>;

/// What kind of container a capture came in.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Container {
    /// Headerless samples.
    Raw,
    /// RIFF WAVE.
    Wav,
    /// SigMF recording (`.sigmf-meta` + `.sigmf-data`).
    Sigmf,
}

impl Container {
    /// Lower-case name used in reports.
    pub fn name(self) -> &'static str {
        match self {
            Container::Raw => "raw",
            Container::Wav => "wav",
            Container::Sigmf => "sigmf",
        }
    }
}

/// What a source knows about its capture.
#[derive(Debug, Clone)]
pub struct CaptureInfo {
    /// The path as given (`-` for standard input).
    pub path: String,
    /// The container.
    pub container: Container,
    /// The dataset format of the samples (for WAV: `ri16_le`, `ci16_le`, `rf32_le`, ...).
    pub datatype: Datatype,
    /// Sample rate.
    pub rate: Rate,
    /// Centre frequency of an IQ capture when known.
    pub center_frequency_hz: Option<f64>,
    /// Samples the container declares, when it does (WAV header, file size).
    pub declared_samples: Option<u64>,
}

impl CaptureInfo {
    /// The report's `format` string: the datatype for raw captures, else the container.
    pub fn format_name(&self) -> String {
        match self.container {
            Container::Raw => self.datatype.to_string(),
            c => c.name().to_string(),
        }
    }

    /// True when the samples are complex IQ rather than a real envelope.
    pub fn is_iq(&self) -> bool {
        self.datatype.complex
    }
}

/// One block of samples, borrowed from the source's reusable buffer.
#[derive(Debug, Clone, Copy)]
pub enum Samples<'a> {
    /// Complex baseband.
    Iq(&'a [Complex32]),
    /// A real demodulated envelope (a receiver's data output).
    Envelope(&'a [f32]),
}

impl Samples<'_> {
    /// Number of samples in the block.
    pub fn len(&self) -> usize {
        match self {
            Samples::Iq(s) => s.len(),
            Samples::Envelope(s) => s.len(),
        }
    }

    /// True for an empty block.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// A stream of sample blocks.
pub trait SampleSource {
    /// What is known about the capture.
    fn info(&self) -> &CaptureInfo;

    /// The next block, or `Ok(None)` at the end of the stream.
    ///
    /// Errors are final: a source that returned one yields nothing more.
    fn next_block(&mut self) -> Result<Option<Samples<'_>>>;

    /// Passes over the next `n` samples without converting them, where the source can do so
    /// cheaply: returns how many it passed (fewer only at the end of the stream), or `None`
    /// when it cannot (the caller then reads the blocks and drops what it does not need).
    /// Skipped samples are not checked (a NaN among them goes unnoticed).
    fn skip_samples(&mut self, n: u64) -> Result<Option<u64>> {
        let _ = n;
        Ok(None)
    }

    /// The datatype of [`SampleSource::next_bytes`]'s blocks, when this source offers its
    /// bytes unconverted (`None` by default).
    fn bytes_datatype(&self) -> Option<Datatype> {
        None
    }

    /// The next block as the capture's own bytes, whole samples only, unconverted and
    /// unchecked; `Ok(None)` at the end (and always, unless
    /// [`SampleSource::bytes_datatype`] is `Some`). Do not mix with `next_block` on one
    /// stream unless the caller tracks positions itself.
    fn next_bytes(&mut self) -> Result<Option<&[u8]>> {
        Ok(None)
    }
}

/// How to open a capture.
#[derive(Debug, Clone)]
pub struct OpenOptions {
    /// `--format`: a datatype name, `wav` or `sigmf`; guessed from the name or content if absent.
    pub format: Option<String>,
    /// `--rate`: sample rate in Hz; overrides metadata.
    pub rate_hz: Option<f64>,
    /// Centre frequency in Hz; overrides metadata.
    pub center_hz: Option<f64>,
    /// Samples per block.
    pub block_samples: usize,
}

impl Default for OpenOptions {
    fn default() -> Self {
        OpenOptions {
            format: None,
            rate_hz: None,
            center_hz: None,
            block_samples: 1 << 16,
        }
    }
}

/// The format chosen for an input.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Chosen {
    Raw(Datatype),
    Wav,
    Sigmf,
}

fn choose_by_name(format: &str) -> Result<Chosen> {
    match format {
        "wav" => Ok(Chosen::Wav),
        "sigmf" => Ok(Chosen::Sigmf),
        other => Ok(Chosen::Raw(other.parse()?)),
    }
}

fn choose_by_path(path: &str) -> Option<Chosen> {
    let name = Path::new(path).file_name()?.to_str()?;
    if name.ends_with(".sigmf-meta") || name.ends_with(".sigmf-data") {
        return Some(Chosen::Sigmf);
    }
    let ext = Path::new(name).extension()?.to_str()?.to_ascii_lowercase();
    if ext == "wav" {
        return Some(Chosen::Wav);
    }
    ext.parse().ok().map(Chosen::Raw)
}

fn validated_rate(hz: Option<f64>) -> Result<Rate> {
    let hz = hz.ok_or(SourceError::MissingRate)?;
    Rate::new(hz).ok_or(SourceError::BadRate(hz))
}

/// Reads the first bytes of a stream without losing them.
/// What is known of a headerless capture: the datatype and the options' rate and centre.
fn raw_info(
    path: &str,
    datatype: Datatype,
    file_len: Option<u64>,
    opts: &OpenOptions,
) -> Result<CaptureInfo> {
    Ok(CaptureInfo {
        path: path.to_string(),
        container: Container::Raw,
        datatype,
        rate: validated_rate(opts.rate_hz)?,
        center_frequency_hz: opts.center_hz,
        declared_samples: file_len.map(|n| n / datatype.sample_bytes() as u64),
    })
}

fn sniff(mut r: Box<dyn Read>) -> Result<(Vec<u8>, Box<dyn Read>)> {
    let mut head = Vec::with_capacity(12);
    r.by_ref().take(12).read_to_end(&mut head)?;
    let chained: Box<dyn Read> = Box::new(std::io::Cursor::new(head.clone()).chain(r));
    Ok((head, chained))
}

/// Opens a capture file, or standard input for `-`.
///
/// The format comes from `--format`, else from the file name (`.wav`, `.sigmf-meta`,
/// `.sigmf-data`, or an extension equal to a datatype such as `.cu8` or `.cf32_le`), else from
/// the content (a RIFF header means WAV).
pub fn open(path: &str, opts: &OpenOptions) -> Result<Box<dyn SampleSource>> {
    let chosen = match &opts.format {
        Some(f) => Some(choose_by_name(f)?),
        None if path == "-" => None,
        None => choose_by_path(path),
    };
    if chosen == Some(Chosen::Sigmf) {
        if path == "-" {
            return Err(SourceError::Sigmf(
                "SigMF needs its .sigmf-meta file; it cannot come from standard input".into(),
            ));
        }
        return Ok(Box::new(SigmfSource::open(path, opts)?));
    }
    if let (Some(Chosen::Raw(datatype)), false) = (chosen, path == "-") {
        // A raw file needs no sniffing, and stays seekable (skips seek instead of reading).
        let f = File::open(path)?;
        let len = f.metadata()?.len();
        if len == 0 {
            return Err(SourceError::Empty);
        }
        let info = raw_info(path, datatype, Some(len), opts)?;
        return Ok(Box::new(RawSource::from_file(
            info,
            f,
            opts.block_samples.max(1),
        )?));
    }
    let (reader, file_len): (Box<dyn Read>, Option<u64>) = if path == "-" {
        (Box::new(std::io::stdin().lock()), None)
    } else {
        let f = File::open(path)?;
        let len = f.metadata()?.len();
        (Box::new(BufReader::with_capacity(1 << 16, f)), Some(len))
    };
    if file_len == Some(0) {
        return Err(SourceError::Empty);
    }
    open_reader(path, reader, file_len, chosen, opts)
}

/// Builds a source over any byte stream (a pipe, a socket, bytes in memory): the same
/// readers as [`open`], without a file behind them. `label` names the input in the
/// [`CaptureInfo`]. The format comes from `opts.format` (a datatype name or `wav`), else from
/// the content (a RIFF header means WAV); SigMF needs its metadata file and is refused.
///
/// ```
/// use ooksift::source::{from_reader, OpenOptions};
/// let bytes: Vec<u8> = vec![128; 4000]; // 2000 idle cu8 samples
/// let opts = OpenOptions { format: Some("cu8".into()), rate_hz: Some(1e6), ..OpenOptions::default() };
/// let mut src = from_reader("memory", Box::new(std::io::Cursor::new(bytes)), &opts).unwrap();
/// assert_eq!(src.info().rate.hz(), 1e6);
/// let mut n = 0;
/// while let Some(block) = src.next_block().unwrap() {
///     n += block.len();
/// }
/// assert_eq!(n, 2000);
/// ```
pub fn from_reader(
    label: &str,
    reader: Box<dyn Read>,
    opts: &OpenOptions,
) -> Result<Box<dyn SampleSource>> {
    let chosen = match &opts.format {
        Some(f) => Some(choose_by_name(f)?),
        None => None,
    };
    if chosen == Some(Chosen::Sigmf) {
        return Err(SourceError::Sigmf(
            "SigMF needs its .sigmf-meta file; it cannot come from a stream".into(),
        ));
    }
    open_reader(label, reader, None, chosen, opts)
}

/// The readers behind [`open`] and [`from_reader`]; `file_len` is the size when known.
fn open_reader(
    path: &str,
    reader: Box<dyn Read>,
    file_len: Option<u64>,
    chosen: Option<Chosen>,
    opts: &OpenOptions,
) -> Result<Box<dyn SampleSource>> {
    let block = opts.block_samples.max(1);
    let (head, reader) = sniff(reader)?;
    if head.is_empty() {
        return Err(SourceError::Empty);
    }
    let chosen = match chosen {
        Some(c) => c,
        None if head.starts_with(b"RIFF") => Chosen::Wav,
        None => return Err(SourceError::UnknownFormat),
    };
    match chosen {
        Chosen::Wav => Ok(Box::new(WavSource::new(
            path,
            reader,
            file_len,
            opts.rate_hz,
            block,
        )?)),
        Chosen::Raw(datatype) => {
            let info = raw_info(path, datatype, file_len, opts)?;
            Ok(Box::new(RawSource::new(info, reader, block)))
        }
        Chosen::Sigmf => Err(SourceError::UnknownFormat),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_and_extensions_choose_formats() {
        assert_eq!(
            choose_by_path("a/b.cu8"),
            Some(Chosen::Raw("cu8".parse().expect("ok")))
        );
        assert_eq!(
            choose_by_path("x.cf32_le"),
            Some(Chosen::Raw("cf32_le".parse().expect("ok")))
        );
        assert_eq!(choose_by_path("x.WAV"), Some(Chosen::Wav));
        assert_eq!(choose_by_path("rec.sigmf-meta"), Some(Chosen::Sigmf));
        assert_eq!(choose_by_path("rec.sigmf-data"), Some(Chosen::Sigmf));
        assert_eq!(choose_by_path("x.bin"), None);
        assert!(choose_by_name("cu8_le").is_err());
    }

    #[test]
    fn absurd_rates_print_briefly() {
        let msg = |hz: f64| SourceError::BadRate(hz).to_string();
        assert_eq!(
            msg(1e300),
            "absurd sample rate 1e300 Hz (expected 1 Hz to 1 THz)"
        );
        assert_eq!(
            msg(-1e-300),
            "absurd sample rate -1e-300 Hz (expected 1 Hz to 1 THz)"
        );
        assert_eq!(
            msg(0.5),
            "absurd sample rate 0.5 Hz (expected 1 Hz to 1 THz)"
        );
        assert_eq!(msg(0.0), "absurd sample rate 0 Hz (expected 1 Hz to 1 THz)");
        assert_eq!(
            msg(f64::NAN),
            "absurd sample rate NaN Hz (expected 1 Hz to 1 THz)"
        );
    }
}
