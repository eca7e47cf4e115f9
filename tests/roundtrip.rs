//! Round trips through the real binary: `ooksift synth` writes a capture and its truth file,
//! `ooksift decode --json` reads it back, and every contract field must match the truth
//! (exact bits, line code, presses and repeats; unit within 2 %; airtime within 2 % or one
//! unit; carrier offset within 1 kHz) — issue 2's acceptance criteria.

mod common;

use common::{assert_report_matches, assert_valid, decode_json, read_json, synth};
use ooksift::rng::Rng;

struct Case {
    line_code: &'static str,
    bits: usize,
    unit_us: f64,
    repeats: usize,
    rate: f64,
    format: &'static str,
    ext: &'static str,
    offset_hz: f64,
    snr_db: f64,
    extra: &'static [&'static str],
}

const CASES: &[Case] = &[
    Case {
        line_code: "pwm",
        bits: 24,
        unit_us: 350.0,
        repeats: 5,
        rate: 250e3,
        format: "cu8",
        ext: "cu8",
        offset_hz: 20e3,
        snr_db: 25.0,
        extra: &[],
    },
    Case {
        line_code: "ppm",
        bits: 32,
        unit_us: 400.0,
        repeats: 3,
        rate: 48e3,
        format: "wav",
        ext: "wav",
        offset_hz: 0.0,
        snr_db: 20.0,
        extra: &[],
    },
    Case {
        line_code: "pwm",
        bits: 8,
        unit_us: 1000.0,
        repeats: 1,
        rate: 48e3,
        format: "wav",
        ext: "wav",
        offset_hz: 0.0,
        snr_db: 20.0,
        extra: &["--wav-bits", "8"],
    },
    Case {
        line_code: "pwm",
        bits: 64,
        unit_us: 100.0,
        repeats: 20,
        rate: 2.4e6,
        format: "cu8",
        ext: "cu8",
        offset_hz: -200e3,
        snr_db: 20.0,
        extra: &[],
    },
    Case {
        line_code: "ppm",
        bits: 12,
        unit_us: 250.0,
        repeats: 10,
        rate: 1e6,
        format: "ci16_le",
        ext: "ci16_le",
        offset_hz: 150e3,
        snr_db: 20.0,
        extra: &[],
    },
    Case {
        line_code: "pwm",
        bits: 16,
        unit_us: 500.0,
        repeats: 4,
        rate: 2.048e6,
        format: "cf32_le",
        ext: "cf32_le",
        offset_hz: 200e3,
        snr_db: 20.0,
        extra: &[],
    },
    Case {
        line_code: "ppm",
        bits: 40,
        unit_us: 150.0,
        repeats: 6,
        rate: 250e3,
        format: "ci8",
        ext: "ci8",
        offset_hz: -75e3,
        snr_db: 20.0,
        extra: &[],
    },
    Case {
        line_code: "pwm",
        bits: 20,
        unit_us: 300.0,
        repeats: 8,
        rate: 100e3,
        format: "ru8",
        ext: "ru8",
        offset_hz: 0.0,
        snr_db: 20.0,
        extra: &[],
    },
    Case {
        line_code: "ppm",
        bits: 24,
        unit_us: 600.0,
        repeats: 5,
        rate: 200e3,
        format: "ri16_le",
        ext: "ri16_le",
        offset_hz: 0.0,
        snr_db: 20.0,
        extra: &[],
    },
    Case {
        line_code: "pwm",
        bits: 48,
        unit_us: 200.0,
        repeats: 3,
        rate: 96e3,
        format: "rf32_le",
        ext: "rf32_le",
        offset_hz: 0.0,
        snr_db: 20.0,
        extra: &[],
    },
    Case {
        line_code: "pwm",
        bits: 24,
        unit_us: 350.0,
        repeats: 6,
        rate: 1e6,
        format: "sigmf",
        ext: "sigmf-meta",
        offset_hz: -120e3,
        snr_db: 20.0,
        extra: &["--center-hz", "433920000"],
    },
    Case {
        line_code: "ppm",
        bits: 16,
        unit_us: 450.0,
        repeats: 4,
        rate: 500e3,
        format: "sigmf",
        ext: "sigmf-meta",
        offset_hz: 60e3,
        snr_db: 20.0,
        extra: &["--datatype", "cf32_le"],
    },
    Case {
        line_code: "pwm",
        bits: 32,
        unit_us: 250.0,
        repeats: 5,
        rate: 250e3,
        format: "wav-iq",
        ext: "wav",
        offset_hz: -40e3,
        snr_db: 20.0,
        extra: &[],
    },
    Case {
        line_code: "ppm",
        bits: 20,
        unit_us: 700.0,
        repeats: 2,
        rate: 48e3,
        format: "wav",
        ext: "wav",
        offset_hz: 0.0,
        snr_db: 20.0,
        extra: &["--wav-bits", "24"],
    },
    Case {
        line_code: "pwm",
        bits: 12,
        unit_us: 800.0,
        repeats: 3,
        rate: 44.1e3,
        format: "wav",
        ext: "wav",
        offset_hz: 0.0,
        snr_db: 20.0,
        extra: &["--wav-bits", "32"],
    },
    Case {
        line_code: "ppm",
        bits: 28,
        unit_us: 300.0,
        repeats: 4,
        rate: 64e3,
        format: "wav",
        ext: "wav",
        offset_hz: 0.0,
        snr_db: 20.0,
        extra: &["--wav-bits", "0"],
    },
    Case {
        line_code: "pwm",
        bits: 36,
        unit_us: 120.0,
        repeats: 12,
        rate: 2.4e6,
        format: "ci16_le",
        ext: "ci16_le",
        offset_hz: 100e3,
        snr_db: 20.0,
        extra: &[],
    },
    Case {
        line_code: "ppm",
        bits: 64,
        unit_us: 100.0,
        repeats: 3,
        rate: 2.4e6,
        format: "cu8",
        ext: "cu8",
        offset_hz: -150e3,
        snr_db: 20.0,
        extra: &[],
    },
];

fn run_case(i: usize, c: &Case) {
    let dir = tempfile::tempdir().expect("tempdir");
    let out = dir.path().join(format!("case{i}.{}", c.ext));
    let bits = Rng::new(1000 + i as u64).bits(c.bits);
    let press = format!(
        "{}:{},unit_us={},repeats={},offset_hz={}",
        c.line_code, bits, c.unit_us, c.repeats, c.offset_hz
    );
    let rate = c.rate.to_string();
    let snr = c.snr_db.to_string();
    let seed = (7 + i).to_string();
    let mut args = vec![
        "--press", &press, "--format", c.format, "--rate", &rate, "--snr-db", &snr, "--seed", &seed,
    ];
    args.extend_from_slice(c.extra);
    let truth = synth(&out, &args);
    assert_valid("truth.schema.json", &truth);
    let raw = !matches!(c.format, "wav" | "wav-iq" | "sigmf");
    let report = if raw {
        decode_json(&out, &["--rate", &rate])
    } else {
        decode_json(&out, &[])
    };
    assert_valid("decode.schema.json", &report);
    let ctx = format!(
        "case {i}: {} {} bits {} µs ×{} at {} Hz {}",
        c.line_code, c.bits, c.unit_us, c.repeats, c.rate, c.format
    );
    assert_report_matches(&report, &truth, 1000.0, &ctx);
}

macro_rules! cases {
    ($($name:ident = $i:expr;)*) => { $( #[test] fn $name() { run_case($i, &CASES[$i]); } )* };
}

cases! {
    pwm24_cu8_250k_offset_20k = 0;
    ppm32_wav16_48k = 1;
    pwm8_wav8_48k_single_frame = 2;
    pwm64_cu8_2400k_offset_minus_200k_20_repeats = 3;
    ppm12_ci16_1m_offset_150k = 4;
    pwm16_cf32_2048k_offset_200k = 5;
    ppm40_ci8_250k = 6;
    pwm20_ru8_envelope_100k = 7;
    ppm24_ri16_envelope_200k = 8;
    pwm48_rf32_envelope_96k = 9;
    pwm24_sigmf_ci16_1m = 10;
    ppm16_sigmf_cf32_500k = 11;
    pwm32_wav_iq_250k = 12;
    ppm20_wav24_48k = 13;
    pwm12_wav32_44k1 = 14;
    ppm28_wav_float_64k = 15;
    pwm36_ci16_2400k_unit_120 = 16;
    ppm64_cu8_2400k_unit_100 = 17;
}

#[test]
fn several_keys_are_separate_codes_and_a_repeated_key_counts_presses() {
    let dir = tempfile::tempdir().expect("tempdir");
    let out = dir.path().join("keys.cu8");
    let truth = synth(
        &out,
        &[
            "--press",
            "pwm:0x5a3c91,repeats=4",
            "--press",
            "pwm:0x5a3c92,repeats=4",
            "--press",
            "ppm:0xbeef01,unit_us=400,repeats=3",
            "--press",
            "pwm:0x5a3c91,repeats=5",
            "--rate",
            "250000",
            "--snr-db",
            "25",
        ],
    );
    assert_eq!(truth["codes"].as_array().map(Vec::len), Some(3));
    let report = decode_json(&out, &["--rate", "250000"]);
    assert_report_matches(&report, &truth, 1000.0, "several keys");
    let first = &report["codes"][0];
    assert_eq!(first["presses"], 2);
    let ids: Vec<&str> = report["codes"]
        .as_array()
        .expect("codes")
        .iter()
        .map(|c| c["key_id"].as_str().unwrap_or(""))
        .collect();
    assert_eq!(ids.len(), 3);
    assert!(ids[0] != ids[1] && ids[1] != ids[2] && ids[0] != ids[2]);
}

#[test]
fn pure_noise_yields_no_code() {
    let dir = tempfile::tempdir().expect("tempdir");
    for (fmt, ext, rate) in [
        ("cu8", "cu8", "2400000"),
        ("wav", "wav", "48000"),
        ("rf32_le", "rf32_le", "250000"),
    ] {
        let out = dir.path().join(format!("noise-{fmt}.{ext}"));
        synth(
            &out,
            &[
                "--duration-ms",
                "3000",
                "--format",
                fmt,
                "--rate",
                rate,
                "--seed",
                "99",
            ],
        );
        let args: &[&str] = if fmt == "wav" { &[] } else { &["--rate", rate] };
        let r = decode_json(&out, args);
        assert_eq!(r["codes"].as_array().map(Vec::len), Some(0), "{fmt}: {r}");
    }
}

#[test]
fn truth_and_synth_agree_with_the_common_practice_frame() {
    // facts.md §5.4 (common practice): a 24-bit 1:3 PWM frame with a 1 T + 31 T sync is
    // 128 T long; at T = 350 µs the period is 44.8 ms. The truth file must say so.
    let dir = tempfile::tempdir().expect("tempdir");
    let out = dir.path().join("facts.cu8");
    let t = synth(
        &out,
        &[
            "--press",
            "pwm:0xaaaaaa,unit_us=350,repeats=8",
            "--noiseless",
        ],
    );
    let c = &t["codes"][0];
    assert_eq!(c["frame_period_ms"].as_f64(), Some(44.8));
    // facts.md §7: marks of one 0xAAAAAA frame last 49 T = 17.15 ms.
    assert_eq!(c["frame_on_time_ms"].as_f64(), Some(17.15));
    let _ = read_json(&ooksift::synth::truth_path(&out));
}
