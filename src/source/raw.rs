//! Headerless sample streams (raw files, standard input, SigMF datasets).

use super::{CaptureInfo, Result, SampleSource, Samples, SourceError};
use num_complex::Complex32;
use std::fs::File;
use std::io::{BufReader, ErrorKind, Read, Seek};

/// Where the bytes come from: any stream, or a file, which can also be skipped in by seeking.
enum Input {
    Stream(Box<dyn Read>),
    File { reader: BufReader<File>, len: u64 },
}

impl Read for Input {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        match self {
            Input::Stream(r) => r.read(buf),
            Input::File { reader, .. } => reader.read(buf),
        }
    }
}

/// Reads interleaved samples of one [`super::Datatype`] in fixed-size blocks.
///
/// Short reads from pipes are normal: bytes of a split sample are carried to the next block.
/// A stream that ends inside a sample is an error, as is a NaN or infinite float.
pub struct RawSource {
    info: CaptureInfo,
    reader: Input,
    bytes: Vec<u8>,
    comps: Vec<f32>,
    iq: Vec<Complex32>,
    block_samples: usize,
    /// Samples delivered so far (absolute index of the next sample).
    position: u64,
    /// Bytes left to read when a limit applies (SigMF datasets with trailing bytes).
    remaining: Option<u64>,
    done: bool,
    /// Bytes handed out by `next_bytes`, dropped from `bytes` at the next call.
    handed: usize,
}

impl RawSource {
    /// Wraps a reader positioned at the first sample.
    pub fn new(info: CaptureInfo, reader: Box<dyn Read>, block_samples: usize) -> RawSource {
        RawSource::with_input(info, Input::Stream(reader), block_samples)
    }

    /// Reads a whole file from its first byte; [`SampleSource::skip_samples`] then seeks
    /// instead of reading what it skips.
    pub fn from_file(info: CaptureInfo, file: File, block_samples: usize) -> Result<RawSource> {
        let len = file.metadata()?.len();
        let reader = BufReader::with_capacity(1 << 16, file);
        Ok(RawSource::with_input(
            info,
            Input::File { reader, len },
            block_samples,
        ))
    }

    fn with_input(info: CaptureInfo, reader: Input, block_samples: usize) -> RawSource {
        let sb = info.datatype.sample_bytes();
        RawSource {
            info,
            reader,
            bytes: Vec::with_capacity(block_samples * sb),
            comps: Vec::with_capacity(block_samples * 2),
            iq: Vec::with_capacity(block_samples),
            block_samples,
            position: 0,
            remaining: None,
            done: false,
            handed: 0,
        }
    }

    /// Reads at most `limit` bytes in all.
    pub fn with_byte_limit(mut self, limit: u64) -> RawSource {
        self.remaining = Some(limit);
        self
    }

    /// Fills the buffer; the number of bytes of whole samples at its front, or `None` at
    /// the end. A stream that ends inside a sample, or holds no sample at all, is an error.
    fn next_whole(&mut self) -> Result<Option<usize>> {
        if self.done && self.bytes.len() == self.handed {
            self.bytes.clear();
            self.handed = 0;
            return Ok(None);
        }
        self.fill()?;
        let dt = self.info.datatype;
        let sb = dt.sample_bytes();
        let whole = self.bytes.len() / sb * sb;
        let trailing = self.bytes.len() - whole;
        if whole == 0 && trailing == 0 {
            if self.position == 0 {
                return Err(SourceError::Empty);
            }
            return Ok(None);
        }
        if self.done && trailing > 0 {
            // The stream ended inside a sample: reporting it after this block's last whole
            // sample would be indistinguishable from silence, so fail now.
            self.bytes.clear();
            return Err(SourceError::PartialSample {
                trailing,
                datatype: dt.to_string(),
                sample_bytes: sb,
            });
        }
        Ok(Some(whole))
    }

    fn fill(&mut self) -> Result<()> {
        if self.handed > 0 {
            self.bytes.drain(..self.handed);
            self.handed = 0;
        }
        let sb = self.info.datatype.sample_bytes();
        let want = self.block_samples * sb;
        let mut have = self.bytes.len();
        self.bytes.resize(want, 0);
        while have < want {
            let cap = match self.remaining {
                Some(r) => (want - have).min(r as usize),
                None => want - have,
            };
            if cap == 0 {
                self.done = true;
                break;
            }
            match self.reader.read(&mut self.bytes[have..have + cap]) {
                Ok(0) => {
                    self.done = true;
                    break;
                }
                Ok(n) => {
                    have += n;
                    if let Some(r) = self.remaining.as_mut() {
                        *r -= n as u64;
                    }
                }
                Err(e) if e.kind() == ErrorKind::Interrupted => continue,
                Err(e) => return Err(e.into()),
            }
        }
        self.bytes.truncate(have);
        Ok(())
    }
}

impl SampleSource for RawSource {
    fn info(&self) -> &CaptureInfo {
        &self.info
    }

    fn next_block(&mut self) -> Result<Option<Samples<'_>>> {
        let Some(whole) = self.next_whole()? else {
            return Ok(None);
        };
        let dt = self.info.datatype;
        let sb = dt.sample_bytes();
        self.comps.clear();
        self.iq.clear();
        let direct = dt.decode_iq_fast(&self.bytes[..whole], &mut self.iq);
        if !direct {
            dt.decode_components(&self.bytes[..whole], &mut self.comps);
        }
        self.bytes.drain(..whole);
        if dt.is_float() {
            let per = if dt.complex { 2 } else { 1 };
            if let Some(i) = self.comps.iter().position(|v| !v.is_finite()) {
                return Err(SourceError::NonFinite {
                    index: self.position + (i / per) as u64,
                    value: self.comps[i],
                });
            }
        }
        let n = whole / sb;
        self.position += n as u64;
        if direct {
            Ok(Some(Samples::Iq(&self.iq)))
        } else if dt.complex {
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

    /// Reads the bytes of `n` samples into the block buffer and drops them, a block at a
    /// time: no conversion. A sample split by the end of the stream stays buffered, so the
    /// next [`SampleSource::next_block`] reports it.
    fn skip_samples(&mut self, n: u64) -> Result<Option<u64>> {
        let sb = self.info.datatype.sample_bytes();
        let mut want = n.saturating_mul(sb as u64);
        let mut passed = 0u64;
        if self.handed > 0 {
            self.bytes.drain(..self.handed);
            self.handed = 0;
        }
        // What the buffer holds, then (from a file, with no split sample carried) a seek
        // over whole samples up to the end of the file; a stream reads the rest below.
        let buffered = (self.bytes.len() / sb * sb) as u64;
        let take = buffered.min(want) as usize;
        self.bytes.drain(..take);
        want -= take as u64;
        passed += (take / sb) as u64;
        if let Input::File { reader, len } = &mut self.reader {
            if want > 0 && self.bytes.is_empty() && !self.done {
                let left = len.saturating_sub(reader.stream_position()?);
                let left = self.remaining.map_or(left, |r| r.min(left));
                let k = want.min(left / sb as u64 * sb as u64);
                reader.seek_relative(k as i64)?;
                if let Some(r) = self.remaining.as_mut() {
                    *r -= k;
                }
                want -= k;
                passed += k / sb as u64;
            }
        }
        while want > 0 {
            // `fill` tops the buffer up to one block (after a carried partial sample).
            self.fill()?;
            let whole = (self.bytes.len() / sb * sb) as u64;
            let take = whole.min(want) as usize;
            if take == 0 {
                break;
            }
            self.bytes.drain(..take);
            want -= take as u64;
            passed += (take / sb) as u64;
        }
        self.position += passed;
        Ok(Some(passed))
    }

    fn bytes_datatype(&self) -> Option<super::Datatype> {
        Some(self.info.datatype)
    }

    /// Whole samples' bytes straight from the buffer (dropped at the next call); the same
    /// end-of-stream checks as [`SampleSource::next_block`], but floats are not checked.
    fn next_bytes(&mut self) -> Result<Option<&[u8]>> {
        let Some(whole) = self.next_whole()? else {
            return Ok(None);
        };
        self.handed = whole;
        self.position += (whole / self.info.datatype.sample_bytes()) as u64;
        Ok(Some(&self.bytes[..whole]))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::source::Container;
    use crate::units::Rate;

    fn info(dt: &str) -> CaptureInfo {
        CaptureInfo {
            path: "mem".into(),
            container: Container::Raw,
            datatype: dt.parse().expect("valid"),
            rate: Rate::new(1000.0).expect("valid"),
            center_frequency_hz: None,
            declared_samples: None,
        }
    }

    #[test]
    fn skipping_lands_on_the_same_samples_as_reading() {
        // 1000 cu8 samples whose I byte counts up; skip 123 through a trickling reader, read
        // the rest, and compare with reading everything.
        let bytes: Vec<u8> = (0..2000u32).map(|i| (i / 2 % 251) as u8).collect();
        let read_all = |skip: u64| {
            let mut src = RawSource::new(info("cu8"), Box::new(Trickle(bytes.clone(), 0, 7)), 50);
            let passed = src.skip_samples(skip).expect("skips");
            let mut got = Vec::new();
            while let Some(Samples::Iq(b)) = src.next_block().expect("reads") {
                got.extend_from_slice(b);
            }
            (passed, got)
        };
        let (_, all) = read_all(0);
        assert_eq!(all.len(), 1000);
        let (passed, rest) = read_all(123);
        assert_eq!(passed, Some(123));
        assert_eq!(rest[..], all[123..]);
        // Past the end: only what is there.
        let (passed, rest) = read_all(5000);
        assert_eq!((passed, rest.len()), (Some(1000), 0));
    }

    #[test]
    fn bytes_come_out_whole_and_unchanged() {
        let bytes: Vec<u8> = (0..999u32).map(|i| (i % 256) as u8).collect();
        let mut src = RawSource::new(info("cu8"), Box::new(Trickle(bytes.clone(), 0, 5)), 64);
        assert_eq!(src.bytes_datatype(), Some("cu8".parse().expect("valid")));
        let mut got = Vec::new();
        let err = loop {
            match src.next_bytes() {
                Ok(Some(b)) => {
                    assert_eq!(b.len() % 2, 0);
                    got.extend_from_slice(b);
                }
                Ok(None) => break None,
                Err(e) => break Some(e),
            }
        };
        // 999 bytes: 499 whole samples, then the split one is an error, as for next_block.
        assert_eq!(got[..], bytes[..got.len()]);
        assert!(
            matches!(err, Some(SourceError::PartialSample { trailing: 1, .. })),
            "{err:?}"
        );
        let mut whole = RawSource::new(
            info("cu8"),
            Box::new(Trickle(bytes[..998].to_vec(), 0, 5)),
            64,
        );
        let mut n = 0;
        while let Some(b) = whole.next_bytes().expect("reads") {
            n += b.len();
        }
        assert_eq!(n, 998);
    }

    #[test]
    fn a_file_is_skipped_by_seeking_to_the_same_samples() {
        // 1001 bytes of cu8: 500 samples and a split one. Skips of every kind land where
        // reading would, and the split sample at the end is still reported.
        let bytes: Vec<u8> = (0..1001u32).map(|i| (i * 37 % 256) as u8).collect();
        let dir = tempfile::tempdir().expect("tempdir");
        let path = dir.path().join("x.cu8");
        std::fs::write(&path, &bytes).expect("writes");
        let open = || RawSource::from_file(info("cu8"), File::open(&path).expect("opens"), 16);
        let mut all = Vec::new();
        let cu8: super::super::Datatype = "cu8".parse().expect("valid");
        assert!(cu8.decode_iq_fast(&bytes[..1000], &mut all));
        for (read_first, skip) in [(0, 100), (5, 100), (20, 3), (0, 499), (0, 5000)] {
            let mut src = open().expect("opens");
            let mut got = Vec::new();
            while got.len() < read_first {
                match src.next_block().expect("reads") {
                    Some(Samples::Iq(b)) => got.extend_from_slice(b),
                    _ => break,
                }
            }
            let passed = src.skip_samples(skip).expect("skips").expect("skippable");
            assert_eq!(
                passed,
                skip.min(500 - got.len() as u64),
                "{read_first} {skip}"
            );
            let from = got.len() + passed as usize;
            let mut rest = Vec::new();
            let end = loop {
                match src.next_block() {
                    Ok(Some(Samples::Iq(b))) => rest.extend_from_slice(b),
                    Ok(_) => break None,
                    Err(e) => break Some(e),
                }
            };
            assert!(
                matches!(end, Some(SourceError::PartialSample { trailing: 1, .. })),
                "{end:?}"
            );
            // The block that meets the split sample is lost with the error, as when reading.
            assert!(from + rest.len() <= 500 && from + rest.len() + 16 >= 500);
            assert_eq!(rest[..], all[from..from + rest.len()]);
        }
    }

    #[test]
    fn a_split_sample_after_a_skip_is_still_an_error() {
        let mut src = RawSource::new(info("cu8"), Box::new(Trickle(vec![128; 21], 0, 4)), 8);
        assert_eq!(src.skip_samples(100).expect("skips"), Some(10));
        assert!(matches!(
            src.next_block(),
            Err(SourceError::PartialSample { trailing: 1, .. })
        ));
    }

    /// A reader that returns at most `step` bytes per call, like a pipe.
    struct Trickle(Vec<u8>, usize, usize);
    impl Read for Trickle {
        fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
            let n = self.2.min(buf.len()).min(self.0.len() - self.1);
            buf[..n].copy_from_slice(&self.0[self.1..self.1 + n]);
            self.1 += n;
            Ok(n)
        }
    }

    fn collect(dt: &str, bytes: Vec<u8>, block: usize, step: usize) -> Result<Vec<f32>> {
        let mut src = RawSource::new(info(dt), Box::new(Trickle(bytes, 0, step)), block);
        let mut out = Vec::new();
        while let Some(b) = src.next_block()? {
            match b {
                Samples::Iq(s) => out.extend(s.iter().flat_map(|c| [c.re, c.im])),
                Samples::Envelope(s) => out.extend_from_slice(s),
            }
        }
        Ok(out)
    }

    #[test]
    fn block_and_read_sizes_do_not_change_the_samples() {
        let bytes: Vec<u8> = (0..=255u8).cycle().take(4000).collect();
        let whole = collect("ci16_le", bytes.clone(), 1 << 20, usize::MAX).expect("reads");
        for (block, step) in [(1, 1), (7, 3), (4096, 5), (3, 4096)] {
            assert_eq!(
                collect("ci16_le", bytes.clone(), block, step).expect("reads"),
                whole
            );
        }
    }

    #[test]
    fn a_split_last_sample_is_an_error() {
        let err = collect("cf32_le", vec![0u8; 8 * 3 + 5], 2, 7).expect_err("partial");
        assert!(
            matches!(err, SourceError::PartialSample { trailing: 5, .. }),
            "{err}"
        );
    }

    #[test]
    fn nan_samples_are_refused_with_their_index() {
        let mut bytes = Vec::new();
        for v in [0.0f32, 0.5, f32::NAN, 1.0] {
            bytes.extend_from_slice(&v.to_le_bytes());
        }
        let err = collect("rf32_le", bytes, 16, 16).expect_err("NaN");
        assert!(
            matches!(err, SourceError::NonFinite { index: 2, .. }),
            "{err}"
        );
    }

    #[test]
    fn f64_beyond_the_f32_range_is_refused_without_calling_it_infinite() {
        let mut bytes = Vec::new();
        for v in [0.0f64, 1e300, 0.0, 0.0] {
            bytes.extend_from_slice(&v.to_le_bytes());
        }
        let err = collect("cf64_le", bytes, 16, 16).expect_err("out of range");
        assert!(
            matches!(err, SourceError::NonFinite { index: 0, .. }),
            "{err}"
        );
        assert!(
            err.to_string()
                .contains("not a finite number within the 32-bit float range"),
            "{err}"
        );
    }
}
