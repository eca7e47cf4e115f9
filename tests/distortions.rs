//! Real-receiver distortions (issue 4): each written by `synth` through the library, decoded
//! by the real binary, and the synth truth recovered exactly (bits, key, presses, frames).

mod common;

use common::{assert_report_matches, assert_valid, decode_json, read_json};
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

#[test]
fn a_capture_cut_inside_a_press_flags_partial_frames() {
    let dir = tempfile::tempdir().expect("tempdir");
    let ch = ChannelSpec {
        snr_db: Some(25.0),
        ..ChannelSpec::default()
    };
    // Frames of 44.8 ms from 40 ms on; the capture is cut 15 ms into the first frame and
    // 16 ms into the sixth (cu8: two bytes per sample at 250 kHz).
    let s = spec("cu8", 250e3, ch, vec![press("pwm", BITS, 350.0, 6)]);
    let out = dir.path().join("cut.cu8");
    write_capture(&s, &out, true).expect("synth writes");
    let bytes = std::fs::read(&out).expect("readable");
    let at = |ms: f64| (ms * 1e-3 * 250e3) as usize * 2;
    let cut = dir.path().join("cut-inside.cu8");
    std::fs::write(&cut, &bytes[at(55.0)..at(280.0)]).expect("writable");
    let r = decode_json(&cut, &["--rate", "250000"]);
    assert_valid("decode.schema.json", &r);
    let codes = r["codes"].as_array().expect("codes");
    assert_eq!(codes.len(), 1, "{r}");
    assert_eq!(codes[0]["bits"], BITS);
    assert_eq!(codes[0]["frames"], 4);
    assert!(codes[0]["partial_frames"].as_u64() >= Some(1), "{r}");
}

#[test]
fn tristate_view_and_width_clusters_are_reported() {
    let dir = tempfile::tempdir().expect("tempdir");
    let ch = ChannelSpec {
        snr_db: Some(25.0),
        ..ChannelSpec::default()
    };
    // Pairs 00 11 01 00 11 11 01 01 00 11 01 00 → 01F011FF01F0.
    let bits = "001101001111010100110100";
    let s = spec("cu8", 250e3, ch, vec![press("pwm", bits, 350.0, 4)]);
    let r = round_trip(dir.path(), "tri.cu8", &s);
    let c = &r["codes"][0];
    assert_eq!(c["tristate"], "01F011FF01F0");
    // 1:3 PWM with a 1-unit closing mark: marks of 1 and 3 units, spaces of 1 and 3 units.
    for k in ["marks", "spaces"] {
        let cl = c["clusters"][k].as_array().expect("clusters");
        assert_eq!(cl.len(), 2, "{k}: {cl:?}");
        let u: Vec<f64> = cl.iter().filter_map(|x| x["units"].as_f64()).collect();
        assert!(
            (u[0] - 1.0).abs() < 0.15 && (u[1] - 3.0).abs() < 0.15,
            "{k}: {u:?}"
        );
    }
    let marks: u64 = c["clusters"]["marks"]
        .as_array()
        .expect("marks")
        .iter()
        .filter_map(|x| x["count"].as_u64())
        .sum();
    assert_eq!(marks, 4 * 25);
    // A code with a 10 pair has no tri-state view.
    let s = spec(
        "cu8",
        250e3,
        s.channel.clone(),
        vec![press("pwm", BITS, 350.0, 4)],
    );
    let r = round_trip(dir.path(), "notri.cu8", &s);
    assert!(r["codes"][0]["tristate"].is_null());
    // The text view shows the clusters and the tri-state symbols.
    let text = common::run(&[
        "decode",
        dir.path().join("tri.cu8").to_str().expect("utf-8"),
        "--rate",
        "250000",
    ]);
    let text = String::from_utf8_lossy(&text.stdout);
    assert!(text.contains("tristate  01F011FF01F0"), "{text}");
    assert!(text.contains("widths    marks 1."), "{text}");
}

/// 60 s of noise and nothing else, in every input format, at 48 kHz to stay quick.
#[test]
fn sixty_seconds_of_noise_give_no_code_in_any_format() {
    let dir = tempfile::tempdir().expect("tempdir");
    for (i, fmt) in [
        "cu8", "ci8", "ci16_le", "cf32_le", "ru8", "ri16_le", "rf32_le", "wav", "wav-iq", "sigmf",
    ]
    .into_iter()
    .enumerate()
    {
        let s = SynthSpec {
            format: fmt.into(),
            rate_hz: 48e3,
            seed: 300 + i as u64,
            min_duration_ms: 60_000.0,
            ..SynthSpec::default()
        };
        let ext = match fmt {
            "wav" | "wav-iq" => "wav",
            "sigmf" => "sigmf-meta",
            f => f,
        };
        let out = dir.path().join(format!("noise{i}.{ext}"));
        write_capture(&s, &out, true).expect("synth writes");
        let r = if matches!(fmt, "wav" | "wav-iq" | "sigmf") {
            decode_json(&out, &[])
        } else {
            decode_json(&out, &["--rate", "48000"])
        };
        assert_eq!(r["codes"].as_array().map(Vec::len), Some(0), "{fmt}: {r}");
    }
}

/// 60 s of noise the trellis once read as a code (seed 513, found among 24 noise captures):
/// six 8-bit frames that all differ, three of which agreed within a bit and were voted into
/// a code. Agreement that chance gives noise this often is no evidence
/// (`frames::chance_agreement`).
#[test]
fn noise_read_as_short_frames_that_agree_by_chance_is_no_code() {
    let dir = tempfile::tempdir().expect("tempdir");
    let s = SynthSpec {
        format: "ci16_le".into(),
        rate_hz: 48e3,
        seed: 513,
        min_duration_ms: 60_000.0,
        ..SynthSpec::default()
    };
    let out = dir.path().join("noise.ci16_le");
    write_capture(&s, &out, true).expect("synth writes");
    let r = decode_json(&out, &["--rate", "48000"]);
    assert_eq!(r["codes"].as_array().map(Vec::len), Some(0), "{r}");
    // The bursts were read and set aside, not skipped.
    assert!(
        r["undecoded_bursts"].as_u64().is_some_and(|n| n > 10),
        "{r}"
    );
}

/// Issue 4: 60 s of a superregenerative receiver's idle chatter and nothing else (the synth's
/// chatter model, common practice: full-level pulses of random width, on about half the
/// time) give no code, in WAV and in every raw envelope format.
#[test]
fn sixty_seconds_of_superregenerative_chatter_give_no_code() {
    let dir = tempfile::tempdir().expect("tempdir");
    for (i, fmt) in ["wav", "ru8", "ri16_le", "rf32_le"].into_iter().enumerate() {
        let ch = ChannelSpec {
            snr_db: Some(25.0),
            chatter: true,
            ..ChannelSpec::default()
        };
        let s = SynthSpec {
            seed: 40 + i as u64,
            min_duration_ms: 60_000.0,
            ..spec(fmt, 48e3, ch, vec![])
        };
        let out = dir.path().join(format!("chatter{i}.{fmt}"));
        let truth = write_capture(&s, &out, true).expect("synth writes");
        assert!(truth.codes.is_empty());
        let r = if fmt == "wav" {
            decode_json(&out, &[])
        } else {
            decode_json(&out, &["--rate", "48000"])
        };
        assert_eq!(r["codes"].as_array().map(Vec::len), Some(0), "{fmt}: {r}");
        // The chatter was there to be seen (the capture is a minute long), and it read as
        // silence: kept, its marks would chain into bursts that reach the mark limit.
        assert!(
            r["capture"]["duration_s"].as_f64() >= Some(60.0),
            "{fmt}: {r}"
        );
        let notes = r["notes"].to_string();
        assert!(!notes.contains("mark limit"), "{fmt}: {notes}");
    }
}

/// Issue 4: presses amid a superregenerative receiver's idle chatter (full-scale random
/// pulses right up to a few ms before and after each press, and between presses). WAV at
/// 48 and 44.1 kHz and raw envelopes at 100 and 250 kHz; PWM, PPM and Manchester. Every
/// press's truth is recovered (the synth truth file: bits, line code, key, presses, frames
/// per press exactly; unit, airtimes, period and first start within issue 2's tolerances)
/// and no other code appears.
#[test]
fn presses_amid_superregenerative_chatter_decode_exactly() {
    chatter_cases(&[
        ("ru8", 100e3, "c100.ru8", 3),
        ("ri16_le", 250e3, "c250.ri16_le", 4),
        // Once known failures: at 48 kHz the warm-up fell inside a chatter mark and the edge
        // detector stayed blind until after the first PWM frame; at 44.1 kHz chatter after
        // the PWM press counted as regular and ran its six frames into one.
        ("wav", 48e3, "c48.wav", 1),
        ("wav", 44.1e3, "c44.wav", 2),
    ]);
}

fn chatter_cases(cases: &[(&str, f64, &str, u64)]) {
    let dir = tempfile::tempdir().expect("tempdir");
    for &(fmt, rate, name, seed) in cases {
        let ch = ChannelSpec {
            snr_db: Some(25.0),
            chatter: true,
            ..ChannelSpec::default()
        };
        let s = SynthSpec {
            seed,
            lead_ms: 300.0,
            tail_ms: 300.0,
            ..spec(
                fmt,
                rate,
                ch,
                vec![
                    press("pwm", BITS, 350.0, 6),
                    press("ppm", "10110011100010110110100111000101", 400.0, 5),
                    press("manchester", "1100001110100101", 300.0, 6),
                ],
            )
        };
        let r = round_trip(dir.path(), name, &s);
        let truth = read_json(&ooksift::synth::truth_path(&dir.path().join(name)));
        assert_report_matches(&r, &truth, 1000.0, name);
        for c in r["codes"].as_array().expect("codes") {
            assert_eq!(c["presses"], 1, "{name}: {c}");
            let want = if c["line_code"] == "ppm" { 5.0 } else { 6.0 };
            assert_eq!(c["frames_per_press"].as_f64(), Some(want), "{name}: {c}");
        }
    }
}

/// Issue 4: 20 s of chatter before the first press and 5 s between presses (past the
/// splitter's mark limit, had the chatter been kept): both presses decode, nothing else,
/// every field of the synth truth file within issue 2's tolerances.
#[test]
fn presses_after_long_chatter_decode_exactly() {
    let dir = tempfile::tempdir().expect("tempdir");
    let ch = ChannelSpec {
        snr_db: Some(25.0),
        chatter: true,
        ..ChannelSpec::default()
    };
    let mut second = press("manchester", "1011001110001011", 350.0, 5);
    second.gap_before_ms = Some(5_000.0);
    let s = SynthSpec {
        seed: 9,
        lead_ms: 20_000.0,
        tail_ms: 1_000.0,
        ..spec("wav", 48e3, ch, vec![press("pwm", BITS, 350.0, 6), second])
    };
    let r = round_trip(dir.path(), "long.wav", &s);
    let truth = read_json(&ooksift::synth::truth_path(&dir.path().join("long.wav")));
    assert_report_matches(&r, &truth, 1000.0, "long.wav");
}
