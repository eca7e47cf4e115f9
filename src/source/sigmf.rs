//! SigMF recordings: a `.sigmf-meta` JSON file beside a `.sigmf-data` dataset.
//!
//! Read from the metadata (facts.md §3): `global.core:datatype` and `global.core:version`
//! (both required by the SigMF schema), `global.core:sample_rate`, `global.core:num_channels`
//! (only 1 is read), and from the first capture segment `core:frequency` (centre frequency) and
//! `core:header_bytes` (skipped before the samples).

use super::{CaptureInfo, Container, Datatype, OpenOptions, RawSource, Result, SampleSource};
use super::{Samples, SourceError};
use crate::units::Rate;
use serde_json::Value;
use std::fs::File;
use std::io::{BufReader, Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};

/// Metadata larger than this is refused rather than read into memory.
const MAX_META_BYTES: u64 = 64 << 20;

/// The meta and data paths of a recording named by either file (or by their common base).
pub fn recording_paths(path: &str) -> (PathBuf, PathBuf) {
    let base = path
        .strip_suffix(".sigmf-meta")
        .or_else(|| path.strip_suffix(".sigmf-data"))
        .unwrap_or(path);
    (
        PathBuf::from(format!("{base}.sigmf-meta")),
        PathBuf::from(format!("{base}.sigmf-data")),
    )
}

/// A SigMF recording read through [`RawSource`].
pub struct SigmfSource {
    inner: RawSource,
}

fn bad(msg: impl Into<String>) -> SourceError {
    SourceError::Sigmf(msg.into())
}

/// The fields of a `.sigmf-meta` document that the reader uses.
///
/// ```
/// use ooksift::source::SigmfMeta;
/// let meta = SigmfMeta::parse(br#"{"global": {"core:datatype": "cu8", "core:version": "1.2.0",
///     "core:sample_rate": 1e6}, "captures": [{"core:frequency": 433.92e6}]}"#).unwrap();
/// assert_eq!(meta.datatype.to_string(), "cu8");
/// assert_eq!(meta.sample_rate_hz, Some(1e6));
/// assert!(SigmfMeta::parse(br#"{"global": {"core:datatype": "cu8_le"}}"#).is_err());
/// ```
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub struct SigmfMeta {
    /// `global.core:datatype`.
    pub datatype: Datatype,
    /// `global.core:sample_rate`, when given.
    pub sample_rate_hz: Option<f64>,
    /// `captures[0].core:frequency`, when given.
    pub center_frequency_hz: Option<f64>,
    /// `captures[0].core:header_bytes`: bytes skipped before the samples.
    pub header_bytes: u64,
    /// `captures[0].core:sample_start`.
    pub sample_start: u64,
}

impl SigmfMeta {
    /// Parses and checks the metadata text.
    pub fn parse(text: &[u8]) -> Result<SigmfMeta> {
        let text = std::str::from_utf8(text)
            .map_err(|e| bad(format!("metadata is not UTF-8 text: {e}")))?;
        let meta: Value =
            serde_json::from_str(text).map_err(|e| bad(format!("not valid JSON: {e}")))?;
        SigmfMeta::from_value(&meta)
    }

    fn from_value(meta: &Value) -> Result<SigmfMeta> {
        let global = meta
            .get("global")
            .and_then(Value::as_object)
            .ok_or_else(|| bad("no \"global\" object"))?;
        let datatype_str = global
            .get("core:datatype")
            .ok_or_else(|| bad("missing required field global.core:datatype"))?
            .as_str()
            .ok_or_else(|| bad("global.core:datatype is not a string"))?;
        let datatype: Datatype = datatype_str.parse()?;
        match global.get("core:version") {
            Some(Value::String(_)) => {}
            Some(_) => return Err(bad("global.core:version is not a string")),
            None => return Err(bad("missing required field global.core:version")),
        }
        if let Some(n) = global.get("core:num_channels") {
            if n.as_u64() != Some(1) {
                return Err(bad(format!(
                    "core:num_channels is {n}; only single-channel recordings are read"
                )));
            }
        }
        let sample_rate_hz = match global.get("core:sample_rate") {
            None => None,
            Some(v) => Some(
                v.as_f64()
                    .ok_or_else(|| bad("global.core:sample_rate is not a number"))?,
            ),
        };
        let first = meta
            .get("captures")
            .and_then(Value::as_array)
            .and_then(|c| c.first());
        let mut center_frequency_hz = None;
        let mut header_bytes = 0u64;
        let mut sample_start = 0u64;
        if let Some(cap) = first {
            if let Some(f) = cap.get("core:frequency") {
                center_frequency_hz = Some(
                    f.as_f64()
                        .filter(|f| f.is_finite())
                        .ok_or_else(|| bad("captures[0].core:frequency is not a number"))?,
                );
            }
            if let Some(h) = cap.get("core:header_bytes") {
                header_bytes = h
                    .as_u64()
                    .ok_or_else(|| bad("captures[0].core:header_bytes is not a whole number"))?;
            }
            if let Some(s) = cap.get("core:sample_start") {
                sample_start = s
                    .as_u64()
                    .ok_or_else(|| bad("captures[0].core:sample_start is not a whole number"))?;
            }
        }
        Ok(SigmfMeta {
            datatype,
            sample_rate_hz,
            center_frequency_hz,
            header_bytes,
            sample_start,
        })
    }

    /// Bytes of samples in a dataset of `len` bytes, checked against the metadata.
    fn payload(&self, len: u64, data_name: &str) -> Result<u64> {
        let header_bytes = self.header_bytes;
        let payload = len.checked_sub(header_bytes).ok_or_else(|| {
            bad(format!(
                "core:header_bytes {header_bytes} is past the end of {data_name} ({len} bytes)"
            ))
        })?;
        let sb = self.datatype.sample_bytes() as u64;
        if payload == 0 {
            return Err(bad(format!("data file {data_name} holds no samples")));
        }
        if payload % sb != 0 {
            return Err(SourceError::PartialSample {
                trailing: (payload % sb) as usize,
                datatype: self.datatype.to_string(),
                sample_bytes: sb as usize,
            });
        }
        let samples = payload / sb;
        let sample_start = self.sample_start;
        if sample_start > 0 && sample_start >= samples {
            return Err(bad(format!(
                "captures[0].core:sample_start {sample_start} is past the end of the data ({samples} samples)"
            )));
        }
        Ok(payload)
    }
}

impl SigmfSource {
    /// Opens the recording named by `path` (`.sigmf-meta`, `.sigmf-data` or the base name).
    pub fn open(path: &str, opts: &OpenOptions) -> Result<SigmfSource> {
        let (meta_path, data_path) = recording_paths(path);
        let meta = SigmfMeta::from_value(&read_meta(&meta_path)?)?;
        // The rate is checked before the dataset is looked at.
        rate_of(&meta, opts)?;
        let data_name = data_path.display().to_string();
        let mut file = File::open(&data_path).map_err(|source| SourceError::SigmfData {
            path: data_name.clone(),
            source,
        })?;
        let len = file.metadata()?.len();
        meta.payload(len, &data_name)?;
        file.seek(SeekFrom::Start(meta.header_bytes))?;
        let reader: Box<dyn Read> = Box::new(BufReader::with_capacity(1 << 16, file));
        SigmfSource::with_dataset(path, &meta, opts, reader, len, &data_name)
    }

    /// A recording whose dataset of `len` bytes comes from `reader` (positioned at byte 0 of
    /// the dataset, before any `core:header_bytes`); `label` names it in reports and errors.
    pub fn from_reader(
        label: &str,
        meta: &SigmfMeta,
        opts: &OpenOptions,
        mut reader: Box<dyn Read>,
        len: u64,
    ) -> Result<SigmfSource> {
        rate_of(meta, opts)?;
        meta.payload(len, label)?;
        std::io::copy(
            &mut reader.by_ref().take(meta.header_bytes),
            &mut std::io::sink(),
        )?;
        SigmfSource::with_dataset(label, meta, opts, reader, len, label)
    }

    /// `reader` is positioned at the first sample.
    fn with_dataset(
        path: &str,
        meta: &SigmfMeta,
        opts: &OpenOptions,
        reader: Box<dyn Read>,
        len: u64,
        data_name: &str,
    ) -> Result<SigmfSource> {
        let rate = rate_of(meta, opts)?;
        let payload = meta.payload(len, data_name)?;
        let info = CaptureInfo {
            path: path.to_string(),
            container: Container::Sigmf,
            datatype: meta.datatype,
            rate,
            center_frequency_hz: opts.center_hz.or(meta.center_frequency_hz),
            declared_samples: Some(payload / meta.datatype.sample_bytes() as u64),
        };
        Ok(SigmfSource {
            inner: RawSource::new(info, reader, opts.block_samples.max(1)).with_byte_limit(payload),
        })
    }
}

/// The sample rate: `--rate` over the metadata's.
fn rate_of(meta: &SigmfMeta, opts: &OpenOptions) -> Result<Rate> {
    let hz = opts
        .rate_hz
        .or(meta.sample_rate_hz)
        .ok_or_else(|| bad("no global.core:sample_rate; give --rate HZ"))?;
    Rate::new(hz).ok_or(SourceError::BadRate(hz))
}

fn read_meta(meta_path: &Path) -> Result<Value> {
    let name = meta_path.display();
    let file = File::open(meta_path)
        .map_err(|e| bad(format!("metadata file {name} cannot be opened: {e}")))?;
    let len = file.metadata()?.len();
    if len == 0 {
        return Err(bad(format!("metadata file {name} is empty")));
    }
    if len > MAX_META_BYTES {
        return Err(bad(format!(
            "metadata file {name} is {len} bytes; more than {MAX_META_BYTES} is refused"
        )));
    }
    let mut text = String::new();
    BufReader::new(file)
        .read_to_string(&mut text)
        .map_err(|e| bad(format!("metadata file {name} is not UTF-8 text: {e}")))?;
    serde_json::from_str(&text).map_err(|e| bad(format!("{name} is not valid JSON: {e}")))
}

impl SampleSource for SigmfSource {
    fn info(&self) -> &CaptureInfo {
        self.inner.info()
    }

    fn next_block(&mut self) -> Result<Option<Samples<'_>>> {
        self.inner.next_block()
    }

    fn skip_samples(&mut self, n: u64) -> Result<Option<u64>> {
        self.inner.skip_samples(n)
    }

    fn bytes_datatype(&self) -> Option<super::Datatype> {
        self.inner.bytes_datatype()
    }

    fn next_bytes(&mut self) -> Result<Option<&[u8]>> {
        self.inner.next_bytes()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Cursor;

    fn meta(text: &str) -> SigmfMeta {
        SigmfMeta::parse(text.as_bytes()).expect("valid metadata")
    }

    fn source(m: &SigmfMeta, rate_hz: Option<f64>, data: Vec<u8>) -> Result<SigmfSource> {
        let opts = OpenOptions {
            rate_hz,
            ..OpenOptions::default()
        };
        let len = data.len() as u64;
        SigmfSource::from_reader("rec", m, &opts, Box::new(Cursor::new(data)), len)
    }

    #[test]
    fn a_missing_sample_rate_names_the_metadata_field() {
        // Regression: the message spoke of raw captures.
        let m = meta(r#"{"global": {"core:datatype": "cu8", "core:version": "1.2.0"}}"#);
        let err = source(&m, None, vec![128; 100]).err().expect("no rate");
        assert!(err.to_string().contains("global.core:sample_rate"), "{err}");
        assert!(source(&m, Some(1e6), vec![128; 100]).is_ok());
    }

    #[test]
    fn header_bytes_are_skipped_and_the_rest_is_read() {
        let m = meta(
            r#"{"global": {"core:datatype": "ri16_le", "core:version": "1.2.0",
                "core:sample_rate": 1000}, "captures": [{"core:header_bytes": 3}]}"#,
        );
        let mut data = vec![9, 9, 9];
        data.extend_from_slice(&16384i16.to_le_bytes());
        data.extend_from_slice(&(-16384i16).to_le_bytes());
        let mut src = source(&m, None, data).expect("opens");
        let mut got = Vec::new();
        while let Some(b) = src.next_block().expect("reads") {
            if let Samples::Envelope(e) = b {
                got.extend_from_slice(e);
            }
        }
        assert_eq!(got, vec![0.5, -0.5]);
    }
}
