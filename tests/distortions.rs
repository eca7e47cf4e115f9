//! Real-receiver distortions (issue 4): each written by `synth` through the library, decoded
//! by the real binary, and the synth truth recovered exactly (bits, key, presses, frames).

mod common;

use common::{assert_valid, decode_json};
use ooksift::synth::{write_capture, ChannelSpec, PressSpec, SynthSpec};
use serde_json::Value;
use std::path::Path;

fn press(code: &str, bits: &str, unit_us: f64, repeats: usize) -> PressSpec {
    PressSpec {
        unit_us,
        repeats,
        ..PressSpec::new(code, bits)
    }
}

fn spec(format: &str, rate: f64, channel: ChannelSpec, presses: Vec<PressSpec>) -> SynthSpec {
    SynthSpec {
        format: format.into(),
        rate_hz: rate,
        channel,
        presses,
        ..SynthSpec::default()
    }
}

/// Writes the capture, decodes it and checks every truth code's bits, key, presses and
/// frames, and that no other code appears. Returns the report.
fn round_trip(dir: &Path, name: &str, s: &SynthSpec) -> Value {
    let out = dir.join(name);
    let truth = write_capture(s, &out, true).expect("synth writes");
    let truth = serde_json::to_value(&truth).expect("truth as JSON");
    let rate = s.rate_hz.to_string();
    let raw = !(s.format == "wav" || s.format == "sigmf" || s.format == "wav-iq");
    let report = if raw {
        decode_json(&out, &["--rate", &rate])
    } else {
        decode_json(&out, &[])
    };
    assert_valid("decode.schema.json", &report);
    let got = report["codes"].as_array().expect("codes");
    let want = truth["codes"].as_array().expect("codes");
    let bits = |v: &Vec<Value>| v.iter().map(|c| c["bits"].clone()).collect::<Vec<_>>();
    assert_eq!(
        got.len(),
        want.len(),
        "{name}: {:?} vs {:?}",
        bits(got),
        bits(want)
    );
    for w in want {
        let g = got
            .iter()
            .find(|g| g["key_id"] == w["key_id"])
            .unwrap_or_else(|| panic!("{name}: {} not decoded; got {:?}", w["bits"], bits(got)));
        for k in ["line_code", "bits", "presses", "frames"] {
            assert_eq!(g[k], w[k], "{name}: {k}");
        }
        let (gu, wu) = (g["unit_us"].as_f64(), w["unit_us"].as_f64());
        let (gu, wu) = (gu.unwrap_or(0.0), wu.unwrap_or(1.0));
        assert!((gu - wu).abs() <= 0.03 * wu, "{name}: unit {gu} vs {wu}");
    }
    report
}

const BITS: &str = "110100101101001011110001";

#[test]
fn an_inverted_wav_envelope_decodes() {
    let dir = tempfile::tempdir().expect("tempdir");
    let ch = ChannelSpec {
        snr_db: Some(22.0),
        invert: true,
        ..ChannelSpec::default()
    };
    let s = spec("wav", 48e3, ch, vec![press("pwm", BITS, 350.0, 5)]);
    let r = round_trip(dir.path(), "inv.wav", &s);
    let notes = r["notes"].to_string();
    assert!(notes.contains("inverted"), "{notes}");
}

#[test]
fn an_inverted_raw_envelope_decodes() {
    let dir = tempfile::tempdir().expect("tempdir");
    let ch = ChannelSpec {
        snr_db: Some(22.0),
        invert: true,
        ..ChannelSpec::default()
    };
    let s = spec("rf32_le", 100e3, ch, vec![press("ppm", BITS, 400.0, 4)]);
    round_trip(dir.path(), "inv.rf32_le", &s);
}

#[test]
fn an_ac_coupled_envelope_decodes() {
    let dir = tempfile::tempdir().expect("tempdir");
    for (i, tau) in [3.0, 10.0, 50.0].into_iter().enumerate() {
        let ch = ChannelSpec {
            snr_db: Some(22.0),
            ac_tau_ms: Some(tau),
            ..ChannelSpec::default()
        };
        let s = spec(
            "wav",
            48e3,
            ch,
            vec![
                press("pwm", BITS, 350.0, 5),
                press("ppm", "1011001110001011", 500.0, 4),
            ],
        );
        let r = round_trip(dir.path(), &format!("ac{i}.wav"), &s);
        let notes = r["notes"].to_string();
        assert!(notes.contains("AC-coupled"), "τ {tau} ms: {notes}");
    }
}

#[test]
fn an_ac_coupled_inverted_envelope_decodes() {
    let dir = tempfile::tempdir().expect("tempdir");
    let ch = ChannelSpec {
        snr_db: Some(22.0),
        ac_tau_ms: Some(5.0),
        invert: true,
        ..ChannelSpec::default()
    };
    let s = spec("wav", 44.1e3, ch, vec![press("pwm", BITS, 300.0, 6)]);
    round_trip(dir.path(), "acinv.wav", &s);
}

#[test]
fn a_clipped_envelope_decodes() {
    let dir = tempfile::tempdir().expect("tempdir");
    // A strong press saturates the sound card: marks at 0.95 of full scale clipped to 0.5.
    let ch = ChannelSpec {
        snr_db: Some(30.0),
        amplitude: 0.9,
        clip: Some(0.5),
        ..ChannelSpec::default()
    };
    let s = spec("wav", 48e3, ch, vec![press("pwm", BITS, 350.0, 5)]);
    round_trip(dir.path(), "clip.wav", &s);
}

#[test]
fn six_samples_per_unit_decode() {
    let dir = tempfile::tempdir().expect("tempdir");
    let ch = ChannelSpec {
        snr_db: Some(22.0),
        ..ChannelSpec::default()
    };
    // 125 µs at 48 kHz = 6 samples per unit.
    let s = spec(
        "wav",
        48e3,
        ch.clone(),
        vec![
            press("pwm", BITS, 125.0, 5),
            press("ppm", "1011001110001011", 125.0, 4),
        ],
    );
    round_trip(dir.path(), "six.wav", &s);
}

#[test]
fn unit_off_nominal_and_drifting_decodes() {
    let dir = tempfile::tempdir().expect("tempdir");
    let ch = ChannelSpec {
        snr_db: Some(22.0),
        ..ChannelSpec::default()
    };
    let mut presses = Vec::new();
    for (i, (err, drift)) in [(0.15, 0.03), (-0.15, -0.03), (0.15, -0.03), (-0.15, 0.03)]
        .into_iter()
        .enumerate()
    {
        let code = if i % 2 == 0 { "pwm" } else { "ppm" };
        let bits = format!("{BITS}{}", if i < 2 { "01" } else { "10" });
        presses.push(PressSpec {
            clock_error: err,
            drift,
            ..press(code, &bits, 350.0, 6)
        });
    }
    let s = spec("cu8", 250e3, ch, presses);
    round_trip(dir.path(), "clock.cu8", &s);
}

#[test]
fn jittered_edges_decode() {
    let dir = tempfile::tempdir().expect("tempdir");
    let ch = ChannelSpec {
        snr_db: Some(22.0),
        jitter_us: 25.0,
        ..ChannelSpec::default()
    };
    let s = spec(
        "ci16_le",
        250e3,
        ch,
        vec![
            press("pwm", BITS, 350.0, 5),
            press("ppm", "1011001110001011", 400.0, 4),
        ],
    );
    round_trip(dir.path(), "jitter.ci16_le", &s);
}

#[test]
fn stretched_marks_decode_in_an_envelope() {
    let dir = tempfile::tempdir().expect("tempdir");
    let ch = ChannelSpec {
        snr_db: Some(22.0),
        stretch_us: 90.0,
        ..ChannelSpec::default()
    };
    let s = spec("ri16_le", 100e3, ch, vec![press("pwm", BITS, 350.0, 5)]);
    round_trip(dir.path(), "stretch.ri16_le", &s);
}
