//! The wideband IQ front end end to end (issue 3): several transmitters at different offsets,
//! apart and overlapping in time; a continuous carrier 20 dB stronger; the receiver's DC
//! spike; a drifting carrier. Each capture must decode to exactly its synth truth codes, with
//! no extra code, carrier offsets within 1 kHz.

mod common;

use common::{assert_report_matches, decode_json, run, synth};

fn check(name: &str, args: &[&str], rate: &str) {
    let d = tempfile::tempdir().expect("tempdir");
    let out = d.path().join(format!("{name}.cu8"));
    let mut a = vec!["--rate", rate, "--seed", "77"];
    a.extend_from_slice(args);
    let truth = synth(&out, &a);
    let report = decode_json(&out, &["--rate", rate]);
    assert_report_matches(&report, &truth, 1000.0, name);
}

#[test]
fn two_transmitters_apart_in_time() {
    check(
        "apart",
        &[
            "--snr-db",
            "20",
            "--press",
            "pwm:0x3c5a96,unit_us=350,repeats=4,offset_hz=60000",
            "--press",
            "ppm:0xa1b2c3d4,unit_us=400,repeats=3,offset_hz=-80000,gap_ms=200",
        ],
        "1024000",
    );
}

#[test]
fn two_transmitters_overlapping_in_time() {
    check(
        "overlap",
        &[
            "--snr-db",
            "20",
            "--press",
            "pwm:0x3c5a96,unit_us=350,repeats=5,offset_hz=120000",
            "--press",
            "pwm:0x9f0e61,unit_us=300,repeats=5,offset_hz=-90000,at_ms=60",
        ],
        "1024000",
    );
}

#[test]
fn a_continuous_carrier_20_db_stronger_neither_hides_the_button_nor_makes_a_code() {
    // Button amplitude 0.05 (A² = 2.5e-3); the tone at 0.5 is 20 dB stronger.
    check(
        "interferer",
        &[
            "--snr-db",
            "20",
            "--amplitude",
            "0.05",
            "--tone",
            "-150000,0.5",
            "--press",
            "pwm:0x5ac3e1,unit_us=350,repeats=4,offset_hz=50000",
        ],
        "1024000",
    );
}

#[test]
fn the_receivers_dc_spike_is_not_a_transmitter() {
    check(
        "dc",
        &[
            "--snr-db",
            "20",
            "--dc",
            "0.08,-0.05",
            "--press",
            "ppm:0x1e2d3c4b,unit_us=300,repeats=3,offset_hz=35000",
        ],
        "1024000",
    );
}

#[test]
fn a_carrier_drifting_3_khz_during_the_press_still_decodes() {
    check(
        "drift",
        &[
            "--snr-db",
            "20",
            "--press",
            "pwm:0x71c5b3,unit_us=350,repeats=8,offset_hz=-40000,drift_hz=3000",
        ],
        "1024000",
    );
}

#[test]
fn offsets_are_within_1_khz_at_15_db() {
    // At 15 dB the survey (`ooksift spectrum`) places the carrier within 1 kHz; from 18 dB the
    // decoded code carries its offset within 1 kHz too. (Below about 18 dB this slicer starts
    // losing frames of a 400 µs PWM code at 2.048 MHz: see docs/benchmarks.md.)
    let d = tempfile::tempdir().expect("tempdir");
    for (i, off) in [-200000.0f64, -61250.0, 0.0, 33330.0, 187500.0]
        .iter()
        .enumerate()
    {
        let press = format!("pwm:0xc3a596,unit_us=400,repeats=8,offset_hz={off}");
        let seed = (300 + i).to_string();
        for snr in ["15", "18"] {
            let out = d.path().join(format!("off{i}-{snr}.cu8"));
            let truth = synth(
                &out,
                &[
                    "--rate", "2048000", "--snr-db", snr, "--seed", &seed, "--press", &press,
                ],
            );
            let path = out.to_str().expect("utf-8");
            let r = run(&["spectrum", "--json", "--rate", "2048000", path]);
            let v: serde_json::Value = serde_json::from_slice(&r.stdout).expect("JSON");
            let best = v["carriers"]
                .as_array()
                .expect("carriers")
                .iter()
                .max_by(|a, b| {
                    a["peak_db"]
                        .as_f64()
                        .unwrap_or(-1e9)
                        .total_cmp(&b["peak_db"].as_f64().unwrap_or(-1e9))
                })
                .unwrap_or_else(|| panic!("{off} at {snr} dB: no carrier"));
            let f = best["offset_hz"].as_f64().unwrap_or(f64::NAN);
            assert!((f - off).abs() <= 1000.0, "spectrum {off} at {snr} dB: {f}");
            if snr == "18" {
                let report = decode_json(&out, &["--rate", "2048000"]);
                let want = &truth["codes"][0];
                let got = report["codes"]
                    .as_array()
                    .expect("codes")
                    .iter()
                    .find(|c| c["key_id"] == want["key_id"])
                    .unwrap_or_else(|| panic!("offset {off}: code not found"));
                let g = got["carrier_offset_hz"].as_f64().unwrap_or(f64::NAN);
                assert!((g - off).abs() <= 1000.0, "decode {off}: reported {g}");
            }
        }
    }
}

#[test]
fn spectrum_lists_the_carriers_and_flags_the_tone_continuous() {
    let d = tempfile::tempdir().expect("tempdir");
    let out = d.path().join("spec.cu8");
    synth(
        &out,
        &[
            "--rate",
            "1024000",
            "--snr-db",
            "20",
            "--amplitude",
            "0.1",
            "--tone",
            "-150000,0.3",
            "--press",
            "pwm:0x5ac3e1,unit_us=350,repeats=6,offset_hz=50000",
        ],
    );
    let r = run(&[
        "spectrum",
        "--json",
        "--rate",
        "1024000",
        out.to_str().expect("utf-8"),
    ]);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    let v: serde_json::Value = serde_json::from_slice(&r.stdout).expect("JSON");
    common::assert_valid("spectrum.schema.json", &v);
    let carriers = v["carriers"].as_array().expect("carriers");
    let near = |f: f64| {
        carriers
            .iter()
            .find(|c| (c["offset_hz"].as_f64().unwrap_or(1e9) - f).abs() < 1000.0)
    };
    assert_eq!(
        near(-150000.0).map(|c| c["kind"].clone()),
        Some("continuous".into())
    );
    assert_eq!(
        near(50000.0).map(|c| c["kind"].clone()),
        Some("bursty".into())
    );
}

#[test]
fn presses_seconds_apart_in_a_long_noisy_capture_stay_apart() {
    // Regression: noise marks in a wide channel (about 4σ, a fifth of the button's level,
    // hundreds a second) opened a burst long before a press and kept it open past the next
    // press; with far more noise marks than press marks the burst's reference level was a
    // noise level, so nothing was dropped as weak and the presses 14.5 s apart ran together
    // (seen on the 66 s throughput capture of docs/benchmarks.md §2). Before the fix this
    // capture decoded one press of two.
    let d = tempfile::tempdir().expect("tempdir");
    let out = d.path().join("apart.cu8");
    let press = "pwm:0xb2e169,unit_us=350,repeats=8,offset_hz=100000";
    let first = format!("{press},gap_ms=14500");
    let truth = synth(
        &out,
        &[
            "--rate",
            "1024000",
            "--amplitude",
            "0.05",
            "--snr-db",
            "22",
            "--seed",
            "7",
            "--lead-ms",
            "500",
            "--duration-ms",
            "16000",
            "--press",
            &first,
            "--press",
            press,
        ],
    );
    let report = decode_json(&out, &["--rate", "1024000"]);
    assert_report_matches(&report, &truth, 1000.0, "seconds apart");
    assert_eq!(report["codes"][0]["presses"], 2, "{report}");
}
