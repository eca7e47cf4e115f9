//! Bad input gets one clear line on stderr naming the file and the problem, exit status 1,
//! and never a panic (issue 2). Each case is made in the test.

mod common;

use std::path::Path;

fn expect_error(args: &[&str], file: &Path, needle: &str) {
    let out = common::run(args);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{args:?}: {stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
    let lines: Vec<&str> = stderr.lines().collect();
    assert_eq!(lines.len(), 1, "one line expected: {stderr}");
    let name = file.to_str().expect("utf-8");
    assert!(lines[0].starts_with("ooksift: "), "{stderr}");
    assert!(lines[0].contains(name), "names the file: {stderr}");
    assert!(lines[0].contains(needle), "mentions '{needle}': {stderr}");
    assert!(out.stdout.is_empty(), "nothing on stdout");
}

fn wav_header(data_len: u32, channels: u16, rate: u32, bits: u16) -> Vec<u8> {
    let block = channels * bits / 8;
    let mut h = Vec::new();
    h.extend_from_slice(b"RIFF");
    h.extend_from_slice(&(36 + data_len).to_le_bytes());
    h.extend_from_slice(b"WAVEfmt ");
    h.extend_from_slice(&16u32.to_le_bytes());
    h.extend_from_slice(&1u16.to_le_bytes());
    h.extend_from_slice(&channels.to_le_bytes());
    h.extend_from_slice(&rate.to_le_bytes());
    h.extend_from_slice(&(rate * block as u32).to_le_bytes());
    h.extend_from_slice(&block.to_le_bytes());
    h.extend_from_slice(&bits.to_le_bytes());
    h.extend_from_slice(b"data");
    h.extend_from_slice(&data_len.to_le_bytes());
    h
}

#[test]
fn empty_file() {
    let d = tempfile::tempdir().expect("tempdir");
    let p = d.path().join("empty.cu8");
    std::fs::write(&p, b"").expect("write");
    expect_error(
        &["decode", p.to_str().expect("utf-8"), "--rate", "250000"],
        &p,
        "empty",
    );
}

#[test]
fn odd_byte_count_for_the_format() {
    let d = tempfile::tempdir().expect("tempdir");
    let p = d.path().join("odd.ci16_le");
    std::fs::write(&p, vec![0u8; 4 * 1000 + 3]).expect("write");
    expect_error(
        &["decode", p.to_str().expect("utf-8"), "--rate", "1e6"],
        &p,
        "middle of a sample",
    );
}

#[test]
fn wav_with_a_bogus_chunk_size() {
    let d = tempfile::tempdir().expect("tempdir");
    let p = d.path().join("bogus.wav");
    let mut bytes = wav_header(1_000_000, 1, 48_000, 16);
    bytes.extend(vec![0u8; 2000]);
    std::fs::write(&p, bytes).expect("write");
    expect_error(&["decode", p.to_str().expect("utf-8")], &p, "truncated");
}

#[test]
fn sigmf_with_a_missing_field() {
    let d = tempfile::tempdir().expect("tempdir");
    let meta = d.path().join("rec.sigmf-meta");
    std::fs::write(d.path().join("rec.sigmf-data"), vec![0u8; 4000]).expect("write");
    std::fs::write(&meta, r#"{"global":{"core:version":"1.2.0","core:sample_rate":1e6},"captures":[],"annotations":[]}"#).expect("write");
    expect_error(
        &["decode", meta.to_str().expect("utf-8")],
        &meta,
        "core:datatype",
    );
}

#[test]
fn sigmf_with_an_unknown_datatype() {
    let d = tempfile::tempdir().expect("tempdir");
    let meta = d.path().join("rec.sigmf-meta");
    std::fs::write(d.path().join("rec.sigmf-data"), vec![0u8; 4000]).expect("write");
    std::fs::write(&meta, r#"{"global":{"core:datatype":"cu8_le","core:version":"1.2.0","core:sample_rate":1e6},"captures":[],"annotations":[]}"#).expect("write");
    expect_error(
        &["decode", meta.to_str().expect("utf-8")],
        &meta,
        "unknown datatype 'cu8_le'",
    );
}

#[test]
fn unknown_datatype_on_the_command_line() {
    let d = tempfile::tempdir().expect("tempdir");
    let p = d.path().join("x.bin");
    std::fs::write(&p, vec![0u8; 100]).expect("write");
    expect_error(
        &[
            "decode",
            p.to_str().expect("utf-8"),
            "--format",
            "cu12",
            "--rate",
            "1e6",
        ],
        &p,
        "unknown datatype",
    );
}

#[test]
fn sigmf_with_a_missing_data_file() {
    let d = tempfile::tempdir().expect("tempdir");
    let meta = d.path().join("lonely.sigmf-meta");
    std::fs::write(&meta, r#"{"global":{"core:datatype":"cf32_le","core:version":"1.2.0","core:sample_rate":1e6},"captures":[],"annotations":[]}"#).expect("write");
    expect_error(
        &["decode", meta.to_str().expect("utf-8")],
        &meta,
        "lonely.sigmf-data",
    );
}

#[test]
fn nan_and_infinite_samples() {
    let d = tempfile::tempdir().expect("tempdir");
    for (name, v) in [("nan.cf32_le", f32::NAN), ("inf.cf32_le", f32::INFINITY)] {
        let p = d.path().join(name);
        let mut bytes = Vec::new();
        for i in 0..1000 {
            let x = if i == 777 { v } else { 0.01 };
            bytes.extend_from_slice(&x.to_le_bytes());
            bytes.extend_from_slice(&0.0f32.to_le_bytes());
        }
        std::fs::write(&p, bytes).expect("write");
        expect_error(
            &["decode", p.to_str().expect("utf-8"), "--rate", "1e6"],
            &p,
            "sample 777 is not a finite number",
        );
    }
}

#[test]
fn a_raw_capture_without_a_rate() {
    let d = tempfile::tempdir().expect("tempdir");
    let p = d.path().join("norate.cu8");
    std::fs::write(&p, vec![128u8; 1000]).expect("write");
    expect_error(&["decode", p.to_str().expect("utf-8")], &p, "--rate");
}

#[test]
fn an_absurd_rate_and_a_missing_file() {
    let d = tempfile::tempdir().expect("tempdir");
    let p = d.path().join("x.cu8");
    std::fs::write(&p, vec![128u8; 1000]).expect("write");
    expect_error(
        &["decode", p.to_str().expect("utf-8"), "--rate", "-5"],
        &p,
        "absurd sample rate",
    );
    let missing = d.path().join("nowhere.cu8");
    expect_error(
        &["decode", missing.to_str().expect("utf-8"), "--rate", "1e6"],
        &missing,
        "cannot read",
    );
}

#[test]
fn a_wav_with_three_channels() {
    let d = tempfile::tempdir().expect("tempdir");
    let p = d.path().join("three.wav");
    let mut bytes = wav_header(600, 3, 48_000, 16);
    bytes.extend(vec![0u8; 600]);
    std::fs::write(&p, bytes).expect("write");
    expect_error(&["decode", p.to_str().expect("utf-8")], &p, "3 channels");
}
