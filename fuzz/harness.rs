//! What each fuzz target does with its input bytes, shared by the libFuzzer targets
//! (`fuzz/fuzz_targets/*.rs`) and the replay test (`tests/fuzz_crashes.rs`), so a kept crash
//! input means the same thing in both.
//!
//! Every function must return for any input: errors are fine, panics are bugs. Beyond "no
//! panic" each checks what the library promises: samples are finite, the sample count matches
//! the bytes, and a report's time figures are numbers (JSON has no infinity; serde writes it
//! as `null`).

#![allow(dead_code)]

use ooksift::decode::{
    channel_plans, decode_source, merge_reports, survey_with_mean, DecodeOptions, Decoder,
};
use ooksift::report::render_text;
use ooksift::report::DecodeReport;
use ooksift::source::{self, Datatype, OpenOptions, SampleSource, Samples, SigmfMeta, SigmfSource};
use std::io::{self, Read};

/// Hands out at most `step` bytes per read, as a pipe does.
struct Trickle {
    data: Vec<u8>,
    pos: usize,
    step: usize,
}

impl Read for Trickle {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        let n = buf.len().min(self.step).min(self.data.len() - self.pos);
        buf[..n].copy_from_slice(&self.data[self.pos..self.pos + n]);
        self.pos += n;
        Ok(n)
    }
}

fn trickle(data: &[u8], step: usize) -> Box<dyn Read> {
    Box::new(Trickle {
        data: data.to_vec(),
        pos: 0,
        step: step.max(1),
    })
}

/// Reads every block; checks that samples are finite. Returns the samples read, or the error.
fn drain(src: &mut dyn SampleSource) -> Result<u64, String> {
    let mut n = 0u64;
    loop {
        match src.next_block() {
            Ok(Some(Samples::Iq(iq))) => {
                assert!(iq.iter().all(|z| z.re.is_finite() && z.im.is_finite()));
                n += iq.len() as u64;
            }
            Ok(Some(Samples::Envelope(env))) => {
                assert!(env.iter().all(|v| v.is_finite()));
                n += env.len() as u64;
            }
            Ok(None) => return Ok(n),
            Err(e) => return Err(e.to_string()),
        }
    }
}

/// Raw samples of any of the 28 datatypes. Byte 0 picks the datatype, byte 1 the block size
/// (1–64 samples) and the read size (1, 6, 11 or 16 bytes per read); the rest is the stream.
pub fn raw(data: &[u8]) -> Result<u64, String> {
    if data.len() < 2 {
        return Err("too short".into());
    }
    let all = Datatype::all();
    let dt = all[data[0] as usize % all.len()];
    let block = 1 + (data[1] & 0x3f) as usize;
    let step = 1 + (data[1] >> 6) as usize * 5;
    let payload = &data[2..];
    let opts = OpenOptions {
        format: Some(dt.to_string()),
        rate_hz: Some(1e6),
        block_samples: block,
        ..OpenOptions::default()
    };
    let mut src =
        source::from_reader("fuzz", trickle(payload, step), &opts).map_err(|e| e.to_string())?;
    let n = drain(src.as_mut())?;
    // A clean end means every byte was a whole sample.
    assert_eq!(n * dt.sample_bytes() as u64, payload.len() as u64);
    Ok(n)
}

/// A WAV stream (no file length known, as from standard input), 257-sample blocks.
pub fn wav(data: &[u8]) -> Result<u64, String> {
    let opts = OpenOptions {
        format: Some("wav".into()),
        block_samples: 257,
        ..OpenOptions::default()
    };
    let mut src =
        source::from_reader("fuzz", trickle(data, 4096), &opts).map_err(|e| e.to_string())?;
    let declared = src.info().declared_samples;
    let n = drain(src.as_mut())?;
    assert_eq!(Some(n), declared);
    Ok(n)
}

/// SigMF metadata text; the dataset is the bytes after the first NUL, or a fixed 4 KiB
/// pattern when there is none.
pub fn sigmf_meta(data: &[u8]) -> Result<u64, String> {
    let (meta_text, dataset) = match data.iter().position(|&b| b == 0) {
        Some(i) => (&data[..i], data[i + 1..].to_vec()),
        None => (data, (0..4096u32).map(|i| (i * 37 % 251) as u8).collect()),
    };
    let meta = SigmfMeta::parse(meta_text).map_err(|e| e.to_string())?;
    let len = dataset.len() as u64;
    let opts = OpenOptions {
        block_samples: 100,
        ..OpenOptions::default()
    };
    let mut src = SigmfSource::from_reader("fuzz", &meta, &opts, trickle(&dataset, 1000), len)
        .map_err(|e| e.to_string())?;
    let n = drain(&mut src)?;
    let sb = meta.datatype.sample_bytes() as u64;
    assert_eq!(n, (len - meta.header_bytes) / sb);
    Ok(n)
}

/// What every report must satisfy: it renders, and its time figures are numbers.
fn check_report(report: &DecodeReport) -> Result<(), String> {
    let text = render_text(report);
    assert!(!text.is_empty());
    let json = serde_json::to_value(report).map_err(|e| e.to_string())?;
    assert!(
        json["capture"]["duration_s"].is_number(),
        "{}",
        json["capture"]
    );
    for code in json["codes"].as_array().into_iter().flatten() {
        for key in [
            "unit_us",
            "frames_per_press",
            "frame_airtime_ms",
            "frame_on_time_ms",
            "press_airtime_ms",
            "press_on_time_ms",
            "first_start_s",
            "snr_db",
        ] {
            assert!(code[key].is_number(), "{key} is {} in {code}", code[key]);
        }
    }
    Ok(())
}

/// Sample rates the whole-chain target picks from (byte 1).
pub const CHAIN_RATES: [f64; 8] = [
    1.0, 1_000.0, 8_000.0, 48_000.0, 250_000.0, 1e6, 2.048e6, 1e12,
];

/// Bytes → codes. Byte 0 picks the format (the 28 datatypes, or WAV), byte 1 the rate, byte 2
/// the press gap; the rest is the capture, streamed in short reads. Returns the codes found.
pub fn decode_chain(data: &[u8]) -> Result<usize, String> {
    decode_chain_report(data).map(|r| r.codes.len())
}

/// [`decode_chain`]'s report (checked).
pub fn decode_chain_report(data: &[u8]) -> Result<DecodeReport, String> {
    if data.len() < 3 {
        return Err("too short".into());
    }
    let all = Datatype::all();
    let pick = data[0] as usize % (all.len() + 1);
    let format = if pick == all.len() {
        "wav".to_string()
    } else {
        all[pick].to_string()
    };
    let press_gap_ms = match data[2] {
        0..=127 => None,
        g => Some(f64::from(g - 128) * 2.0),
    };
    let opts = DecodeOptions {
        open: OpenOptions {
            format: Some(format),
            rate_hz: Some(CHAIN_RATES[data[1] as usize % CHAIN_RATES.len()]),
            block_samples: 4096,
            ..OpenOptions::default()
        },
        press_gap_ms,
        ..DecodeOptions::default()
    };
    let mut src = source::from_reader("fuzz", trickle(&data[3..], 3000), &opts.open)
        .map_err(|e| e.to_string())?;
    let report = decode_source(src.as_mut(), &opts).map_err(|e| e.to_string())?;
    check_report(&report)?;
    Ok(report)
}

/// Bytes → codes through the per-carrier path `decode_path` takes for IQ files, step by step
/// with the same public functions (survey, channel plans, one decoder per channel, merged
/// reports), reading the bytes twice as it reads a file twice. Byte 0 picks one of the 14
/// complex datatypes; bytes 1 and 2 and the rest as in [`decode_chain`].
pub fn decode_channels(data: &[u8]) -> Result<usize, String> {
    decode_channels_report(data).map(|r| r.codes.len())
}

/// [`decode_channels`]'s report (checked).
pub fn decode_channels_report(data: &[u8]) -> Result<DecodeReport, String> {
    if data.len() < 3 {
        return Err("too short".into());
    }
    let complex: Vec<Datatype> = Datatype::all().into_iter().filter(|d| d.complex).collect();
    let dt = complex[data[0] as usize % complex.len()];
    let opts = DecodeOptions {
        open: OpenOptions {
            format: Some(dt.to_string()),
            rate_hz: Some(CHAIN_RATES[data[1] as usize % CHAIN_RATES.len()]),
            block_samples: 4096,
            ..OpenOptions::default()
        },
        press_gap_ms: match data[2] {
            0..=127 => None,
            g => Some(f64::from(g - 128) * 2.0),
        },
        ..DecodeOptions::default()
    };
    let payload = &data[3..];
    let open = || {
        source::from_reader("fuzz", trickle(payload, 3000), &opts.open).map_err(|e| e.to_string())
    };
    let mut src = open()?;
    let info = src.info().clone();
    let (survey, mean) = survey_with_mean(src.as_mut()).map_err(|e| e.to_string())?;
    let dc = if survey.dc_spike.is_some() {
        mean
    } else {
        num_complex::Complex32::new(0.0, 0.0)
    };
    let plans = channel_plans(&survey, &info, &opts);
    let mut src = open()?;
    let report = if plans.is_empty() {
        decode_source(src.as_mut(), &opts).map_err(|e| e.to_string())?
    } else {
        let mut decoders: Vec<Decoder> = plans
            .into_iter()
            .filter_map(|p| Decoder::for_channel(info.clone(), &opts, p, dc).ok())
            .collect();
        while let Some(block) = src.next_block().map_err(|e| e.to_string())? {
            for d in &mut decoders {
                d.push(block);
            }
        }
        merge_reports(decoders.into_iter().map(Decoder::finish).collect())
    };
    check_report(&report)?;
    Ok(report)
}
