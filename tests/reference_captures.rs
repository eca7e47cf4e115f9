//! Decodes the captures written by the independent numpy/scipy generator
//! (tests/reference/make_reference_captures.py, pinned numpy 2.4.6 / scipy 1.17.1) and checks
//! them against the truth files that script computed from its own parameters. `.ci/run`
//! regenerates the captures and checks they still match the committed bytes.

mod common;

use common::{assert_report_matches, assert_valid, decode_json, read_json};
use std::path::PathBuf;

fn dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/reference/captures")
}

#[test]
fn raw_cu8_pwm_gate_matches_its_numpy_truth() {
    let r = decode_json(&dir().join("ref-gate-pwm.cu8"), &["--rate", "250000"]);
    let t = read_json(&dir().join("ref-gate-pwm.truth.json"));
    assert_valid("decode.schema.json", &r);
    assert_report_matches(&r, &t, 1000.0, "ref-gate-pwm.cu8");
}

#[test]
fn wav_envelope_ppm_chime_matches_its_numpy_truth() {
    let r = decode_json(&dir().join("ref-chime-ppm.wav"), &[]);
    let t = read_json(&dir().join("ref-chime-ppm.truth.json"));
    assert_valid("decode.schema.json", &r);
    assert_report_matches(&r, &t, 1000.0, "ref-chime-ppm.wav");
}

#[test]
fn sigmf_pwm_lamp_matches_its_numpy_truth() {
    let r = decode_json(&dir().join("ref-lamp-pwm.sigmf-meta"), &[]);
    let t = read_json(&dir().join("ref-lamp-pwm.truth.json"));
    assert_valid("decode.schema.json", &r);
    assert_eq!(
        r["capture"]["center_frequency_hz"].as_f64(),
        t["capture"]["center_frequency_hz"].as_f64()
    );
    assert_eq!(
        r["capture"]["sample_rate_hz"].as_f64(),
        t["capture"]["sample_rate_hz"].as_f64()
    );
    assert_report_matches(&r, &t, 1000.0, "ref-lamp-pwm.sigmf");
}
