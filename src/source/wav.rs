//! WAV captures through `hound`: mono is a receiver's envelope, stereo is I and Q.

use super::{CaptureInfo, Container, Datatype, Result, SampleSource, Samples, SourceError};
use crate::units::Rate;
use hound::{SampleFormat, WavReader};
use num_complex::Complex32;
use std::io::Read;

/// Streams a WAV file in blocks. 8/16/24/32-bit integer and 32-bit float samples are read.
pub struct WavSource {
    info: CaptureInfo,
    reader: WavReader<Box<dyn Read>>,
    float: bool,
    scale: f32,
    channels: usize,
    block_samples: usize,
    comps: Vec<f32>,
    iq: Vec<Complex32>,
    read_values: u64,
    declared_values: u64,
}

fn wav_error(e: hound::Error) -> SourceError {
    match e {
        hound::Error::IoError(io) => SourceError::Io(io),
        hound::Error::FormatError(m) => SourceError::Wav(m.to_string()),
        hound::Error::Unsupported => {
            SourceError::WavUnsupported("sample layout not supported by the WAV reader".into())
        }
        other => SourceError::Wav(other.to_string()),
    }
}

/// The WAV reader reports a stream that ends early as an `Other` I/O error ("Failed to read
/// enough bytes."), not as `UnexpectedEof`; both mean the same here.
fn short_read(e: &std::io::Error) -> bool {
    matches!(
        e.kind(),
        std::io::ErrorKind::UnexpectedEof | std::io::ErrorKind::Other
    )
}

/// Header errors: a short read means the file ends inside the header.
fn header_error(e: hound::Error) -> SourceError {
    match e {
        hound::Error::IoError(io) if short_read(&io) => SourceError::Wav(
            "the header ends before the first sample (truncated file, or a chunk size past the end)"
                .into(),
        ),
        other => wav_error(other),
    }
}

impl WavSource {
    /// Reads the header from `reader`; `file_len` (when known) lets an impossible data-chunk
    /// size be refused before any sample is read.
    pub fn new(
        path: &str,
        reader: Box<dyn Read>,
        file_len: Option<u64>,
        rate_override: Option<f64>,
        block_samples: usize,
    ) -> Result<WavSource> {
        let reader = WavReader::new(reader).map_err(header_error)?;
        let spec = reader.spec();
        let channels = spec.channels as usize;
        if channels != 1 && channels != 2 {
            return Err(SourceError::WavUnsupported(format!(
                "{channels} channels (expected 1 for an envelope or 2 for I/Q)"
            )));
        }
        let float = spec.sample_format == SampleFormat::Float;
        let bits = spec.bits_per_sample;
        let (component, scale) = match (float, bits) {
            (true, 32) => ("f32", 1.0),
            (false, 8) => ("i8", 1.0 / 128.0),
            (false, 16) => ("i16", 1.0 / 32768.0),
            (false, 24) => ("i32", 1.0 / 8_388_608.0),
            (false, 32) => ("i32", 1.0 / 2_147_483_648.0),
            (true, b) => {
                return Err(SourceError::WavUnsupported(format!(
                    "{b}-bit float samples (32-bit float is read)"
                )))
            }
            (false, b) => {
                return Err(SourceError::WavUnsupported(format!(
                    "{b}-bit integer samples (8, 16, 24 and 32 bits are read)"
                )))
            }
        };
        let kind = if channels == 2 { 'c' } else { 'r' };
        let suffix = if component.ends_with('8') { "" } else { "_le" };
        let datatype: Datatype = format!("{kind}{component}{suffix}").parse()?;
        let hz = rate_override.unwrap_or(spec.sample_rate as f64);
        let rate = Rate::new(hz).ok_or(SourceError::BadRate(hz))?;
        let declared_values = reader.len() as u64;
        if let Some(len) = file_len {
            let data_bytes = declared_values * (bits as u64).div_ceil(8);
            if data_bytes > len {
                return Err(SourceError::WavTruncated {
                    declared: declared_values / channels as u64,
                    found: len.saturating_sub(44) / ((bits as u64).div_ceil(8) * channels as u64),
                });
            }
        }
        if declared_values == 0 {
            return Err(SourceError::Wav("the data chunk holds no samples".into()));
        }
        let info = CaptureInfo {
            path: path.to_string(),
            container: Container::Wav,
            datatype,
            rate,
            center_frequency_hz: None,
            declared_samples: Some(declared_values / channels as u64),
        };
        Ok(WavSource {
            info,
            reader,
            float,
            scale,
            channels,
            block_samples,
            comps: Vec::with_capacity(block_samples * channels),
            iq: Vec::with_capacity(block_samples),
            read_values: 0,
            declared_values,
        })
    }
}

impl SampleSource for WavSource {
    fn info(&self) -> &CaptureInfo {
        &self.info
    }

    fn next_block(&mut self) -> Result<Option<Samples<'_>>> {
        let want = self.block_samples * self.channels;
        self.comps.clear();
        let truncated = |read: u64, declared: u64, channels: usize| SourceError::WavTruncated {
            declared: declared / channels as u64,
            found: read / channels as u64,
        };
        if self.float {
            for v in self.reader.samples::<f32>().take(want) {
                match v {
                    Ok(x) if x.is_finite() => self.comps.push(x),
                    Ok(x) => {
                        return Err(SourceError::NonFinite {
                            index: (self.read_values + self.comps.len() as u64)
                                / self.channels as u64,
                            value: x,
                        })
                    }
                    Err(hound::Error::IoError(e)) if short_read(&e) => {
                        return Err(truncated(
                            self.read_values + self.comps.len() as u64,
                            self.declared_values,
                            self.channels,
                        ))
                    }
                    Err(e) => return Err(wav_error(e)),
                }
            }
        } else {
            let scale = self.scale;
            for v in self.reader.samples::<i32>().take(want) {
                match v {
                    Ok(x) => self.comps.push(x as f32 * scale),
                    Err(hound::Error::IoError(e)) if short_read(&e) => {
                        return Err(truncated(
                            self.read_values + self.comps.len() as u64,
                            self.declared_values,
                            self.channels,
                        ))
                    }
                    Err(e) => return Err(wav_error(e)),
                }
            }
        }
        self.read_values += self.comps.len() as u64;
        if self.comps.is_empty() {
            return Ok(None);
        }
        if self.channels == 2 {
            self.iq.clear();
            self.iq.extend(
                self.comps
                    .chunks_exact(2)
                    .map(|c| Complex32::new(c[0], c[1])),
            );
            Ok(Some(Samples::Iq(&self.iq)))
        } else {
            Ok(Some(Samples::Envelope(&self.comps)))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Cursor;

    fn wav_bytes(samples: &[i16], declared_bytes: Option<u32>) -> Vec<u8> {
        // Canonical 44-byte PCM header (common practice), mono 16-bit at 48 kHz.
        let data_len = declared_bytes.unwrap_or(samples.len() as u32 * 2);
        let mut v = Vec::new();
        v.extend_from_slice(b"RIFF");
        v.extend_from_slice(&(36 + data_len).to_le_bytes());
        v.extend_from_slice(b"WAVEfmt ");
        v.extend_from_slice(&16u32.to_le_bytes());
        for x in [1u16, 1] {
            v.extend_from_slice(&x.to_le_bytes());
        }
        v.extend_from_slice(&48_000u32.to_le_bytes());
        v.extend_from_slice(&96_000u32.to_le_bytes());
        for x in [2u16, 16] {
            v.extend_from_slice(&x.to_le_bytes());
        }
        v.extend_from_slice(b"data");
        v.extend_from_slice(&data_len.to_le_bytes());
        for s in samples {
            v.extend_from_slice(&s.to_le_bytes());
        }
        v
    }

    fn read_all(bytes: Vec<u8>) -> Result<u64> {
        let mut src = WavSource::new("t", Box::new(Cursor::new(bytes)), None, None, 64)?;
        let mut n = 0;
        while let Some(b) = src.next_block()? {
            n += b.len() as u64;
        }
        Ok(n)
    }

    #[test]
    fn whole_stream_reads() {
        assert_eq!(read_all(wav_bytes(&[0; 1000], None)).expect("reads"), 1000);
    }

    #[test]
    fn a_stream_ending_inside_the_data_chunk_is_called_truncated() {
        // Regression: the reader reports the short read as an `Other` error, which was
        // printed as "cannot read: Failed to read enough bytes.".
        let err = read_all(wav_bytes(&[0; 1000], Some(4000))).expect_err("truncated");
        assert!(
            matches!(
                err,
                SourceError::WavTruncated {
                    declared: 2000,
                    found: 1000
                }
            ),
            "{err}"
        );
    }

    #[test]
    fn a_stream_ending_inside_the_header_says_so() {
        let bytes = wav_bytes(&[0; 10], None);
        for cut in [4, 12, 30, 43] {
            let err = read_all(bytes[..cut].to_vec()).expect_err("short header");
            assert!(err.to_string().contains("the header ends"), "{cut}: {err}");
        }
    }

    #[test]
    fn an_empty_data_chunk_is_not_called_an_empty_file() {
        let err = read_all(wav_bytes(&[], None)).expect_err("no samples");
        assert!(
            err.to_string().contains("data chunk holds no samples"),
            "{err}"
        );
    }
}
