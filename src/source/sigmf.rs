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

impl SigmfSource {
    /// Opens the recording named by `path` (`.sigmf-meta`, `.sigmf-data` or the base name).
    pub fn open(path: &str, opts: &OpenOptions) -> Result<SigmfSource> {
        let (meta_path, data_path) = recording_paths(path);
        let meta = read_meta(&meta_path)?;
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
        let meta_rate = match global.get("core:sample_rate") {
            None => None,
            Some(v) => Some(
                v.as_f64()
                    .ok_or_else(|| bad("global.core:sample_rate is not a number"))?,
            ),
        };
        let hz = opts.rate_hz.or(meta_rate).ok_or(SourceError::MissingRate)?;
        let rate = Rate::new(hz).ok_or(SourceError::BadRate(hz))?;
        let first = meta
            .get("captures")
            .and_then(Value::as_array)
            .and_then(|c| c.first());
        let mut center = None;
        let mut header_bytes = 0u64;
        let mut sample_start = 0u64;
        if let Some(cap) = first {
            if let Some(f) = cap.get("core:frequency") {
                center = Some(
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
        let data_name = data_path.display().to_string();
        let mut file = File::open(&data_path).map_err(|source| SourceError::SigmfData {
            path: data_name.clone(),
            source,
        })?;
        let len = file.metadata()?.len();
        let payload = len.checked_sub(header_bytes).ok_or_else(|| {
            bad(format!(
                "core:header_bytes {header_bytes} is past the end of {data_name} ({len} bytes)"
            ))
        })?;
        let sb = datatype.sample_bytes() as u64;
        if payload == 0 {
            return Err(bad(format!("data file {data_name} holds no samples")));
        }
        if payload % sb != 0 {
            return Err(SourceError::PartialSample {
                trailing: (payload % sb) as usize,
                datatype: datatype.to_string(),
                sample_bytes: sb as usize,
            });
        }
        let samples = payload / sb;
        if sample_start > 0 && sample_start >= samples {
            return Err(bad(format!(
                "captures[0].core:sample_start {sample_start} is past the end of the data ({samples} samples)"
            )));
        }
        file.seek(SeekFrom::Start(header_bytes))?;
        let info = CaptureInfo {
            path: path.to_string(),
            container: Container::Sigmf,
            datatype,
            rate,
            center_frequency_hz: opts.center_hz.or(center),
            declared_samples: Some(samples),
        };
        let reader: Box<dyn Read> = Box::new(BufReader::with_capacity(1 << 16, file));
        Ok(SigmfSource {
            inner: RawSource::new(info, reader, opts.block_samples.max(1)).with_byte_limit(payload),
        })
    }
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
}
