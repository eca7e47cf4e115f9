//! The squelch of long IQ captures (`decode::Squelch`, `front::activity`): a channel reads only
//! the stretches where the survey saw its bands busy. It must find the same codes as reading
//! everything — checked against the synth truth file and against a run with the squelch off
//! (`OOKSIFT_NO_SQUELCH=1`) — while reading a small share of a sparse capture.

mod common;

use common::{assert_report_matches, bin, synth};
use serde_json::Value;
use std::path::Path;

/// Decodes `path` (250 kHz cu8) with the debug lines on; returns the report and stderr.
fn decode(path: &Path, squelch: bool) -> (Value, String) {
    let mut cmd = bin();
    cmd.args(["decode", "--json", "--rate", "250000"])
        .arg(path)
        .env("OOKSIFT_DEBUG", "1");
    if !squelch {
        cmd.env("OOKSIFT_NO_SQUELCH", "1");
    }
    let out = cmd.output().expect("runs");
    let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
    assert!(out.status.success(), "{stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
    (serde_json::from_slice(&out.stdout).expect("JSON"), stderr)
}

/// Seconds read and seconds in all, from each `squelch of channel …` debug line.
fn read_shares(stderr: &str) -> Vec<(f64, f64)> {
    stderr
        .lines()
        .filter(|l| l.starts_with("squelch of channel"))
        .filter_map(|l| {
            let (_, tail) = l.split_once("spans, ")?;
            let mut w = tail.split_whitespace();
            let read: f64 = w.next()?.parse().ok()?;
            let total: f64 = w.nth(2)?.parse().ok()?;
            Some((read, total))
        })
        .collect()
}

/// Writes a 40 s, 250 kHz cu8 capture at Eu/N0 `snr_db`: four presses by two buttons at
/// +40 kHz and −60 kHz, about 10 s apart; returns its truth file.
fn sparse(out: &Path, snr_db: &str) -> Value {
    synth(
        out,
        &[
            "--rate",
            "250000",
            "--amplitude",
            "0.1",
            "--snr-db",
            snr_db,
            "--seed",
            "3",
            "--lead-ms",
            "2000",
            "--duration-ms",
            "40000",
            "--press",
            "pwm:0xb2e169,unit_us=350,repeats=6,offset_hz=40000",
            "--press",
            "ppm:0x5a17c3e9,unit_us=400,repeats=6,offset_hz=-60000,gap_ms=9600",
            "--press",
            "pwm:0xb2e169,unit_us=350,repeats=6,offset_hz=40000,gap_ms=9700",
            "--press",
            "ppm:0x5a17c3e9,unit_us=400,repeats=6,offset_hz=-60000,gap_ms=9600",
        ],
    )
}

#[test]
fn a_sparse_capture_decodes_the_same_while_reading_a_fraction() {
    // Eu/N0 = 20 dB, where reading everything finds the truth too. Truth: the synth truth
    // file.
    let d = tempfile::tempdir().expect("tempdir");
    let cap = d.path().join("sparse.cu8");
    let truth = sparse(&cap, "20");
    let (on, on_err) = decode(&cap, true);
    let (off, off_err) = decode(&cap, false);
    assert_report_matches(&on, &truth, 1000.0, "squelch on");
    assert_report_matches(&off, &truth, 1000.0, "squelch off");
    assert_eq!(codes(&on), codes(&off));
    // Press starts agree to a few microseconds (the channel restarts, so sub-sample edge
    // placements move a little).
    for (a, b) in on["codes"]
        .as_array()
        .expect("codes")
        .iter()
        .zip(off["codes"].as_array().expect("codes"))
    {
        let (ta, tb) = (
            a["first_start_s"].as_f64().expect("start"),
            b["first_start_s"].as_f64().expect("start"),
        );
        assert!((ta - tb).abs() < 20e-6, "{ta} vs {tb}");
    }
    // Each channel read well under a quarter of the capture with the squelch, all of it
    // without.
    let shares = read_shares(&on_err);
    assert_eq!(shares.len(), 2, "{on_err}");
    for (read, total) in shares {
        assert!(total > 39.0 && read < 0.25 * total, "{read} of {total} s");
    }
    assert!(read_shares(&off_err).is_empty(), "{off_err}");
    assert!(off_err.contains("reads the whole capture"), "{off_err}");
}

#[test]
fn weak_presses_in_a_long_capture_are_found_with_the_squelch() {
    // Eu/N0 = 17 dB. Reading the whole 40 s, noise marks between the presses kept bursts
    // open for seconds and no code came out (measured when the squelch was added); read
    // only around the busy spans, each press is a burst of its own. Truth: the synth file.
    let d = tempfile::tempdir().expect("tempdir");
    let cap = d.path().join("weak.cu8");
    let truth = sparse(&cap, "17");
    let (on, _) = decode(&cap, true);
    // The codes, press and frame counts exactly; at this level a noise mark next to a press
    // may lengthen its measured airtime, so the timing fields are not compared here.
    assert_eq!(codes(&on), codes(&truth), "17 dB, squelch on");
}

/// (bits, presses, frames) of every code, sorted.
fn codes(r: &Value) -> Vec<(String, u64, u64)> {
    let mut v: Vec<(String, u64, u64)> = r["codes"]
        .as_array()
        .expect("codes")
        .iter()
        .map(|c| {
            (
                c["bits"].as_str().unwrap_or("").to_string(),
                c["presses"].as_u64().unwrap_or(0),
                c["frames"].as_u64().unwrap_or(0),
            )
        })
        .collect();
    v.sort();
    v
}

#[test]
fn short_and_busy_captures_are_read_whole() {
    // 6 s: below the squelch's minimum length, every channel reads everything.
    let d = tempfile::tempdir().expect("tempdir");
    let cap = d.path().join("short.cu8");
    let truth = synth(
        &cap,
        &[
            "--rate",
            "250000",
            "--amplitude",
            "0.1",
            "--snr-db",
            "20",
            "--seed",
            "4",
            "--lead-ms",
            "3000",
            "--duration-ms",
            "6000",
            "--press",
            "pwm:0xb2e169,unit_us=350,repeats=6,offset_hz=40000",
        ],
    );
    let (on, err) = decode(&cap, true);
    assert_report_matches(&on, &truth, 1000.0, "short");
    assert!(read_shares(&err).is_empty(), "{err}");
    assert!(err.contains("reads the whole capture"), "{err}");
}

#[test]
fn interferer_dc_spike_and_drift_in_a_long_capture() {
    // 30 s at 250 kHz: a continuous tone 20 dB above the buttons at −90 kHz, the receiver's
    // DC offset, a PWM button drifting 3 kHz during each press at +40 kHz and a PPM button at
    // −40 kHz, presses 7 s apart (issue 3's hazards, now with the squelch acting). Truth: the
    // synth truth file; the tone and the DC spike yield no code and no channel reads them.
    let d = tempfile::tempdir().expect("tempdir");
    let cap = d.path().join("hazards.cu8");
    let truth = synth(
        &cap,
        &[
            "--rate",
            "250000",
            "--amplitude",
            "0.05",
            "--snr-db",
            "20",
            "--seed",
            "9",
            "--tone",
            "-90000,0.5",
            "--dc",
            "0.08,-0.05",
            "--lead-ms",
            "3000",
            "--duration-ms",
            "30000",
            "--press",
            "pwm:0x71c5b3,unit_us=350,repeats=6,offset_hz=40000,drift_hz=3000",
            "--press",
            "ppm:0x1e2d3c4b,unit_us=300,repeats=4,offset_hz=-40000,gap_ms=6700",
            "--press",
            "pwm:0x71c5b3,unit_us=350,repeats=6,offset_hz=40000,drift_hz=3000,gap_ms=6700",
            "--press",
            "ppm:0x1e2d3c4b,unit_us=300,repeats=4,offset_hz=-40000,gap_ms=6700",
        ],
    );
    let (on, err) = decode(&cap, true);
    assert_report_matches(&on, &truth, 1000.0, "hazards");
    let shares = read_shares(&err);
    assert_eq!(shares.len(), 2, "one squelched channel per button: {err}");
    assert!(!err.contains("reads the whole capture"), "{err}");
    for (read, total) in shares {
        assert!(total > 29.0 && read < 0.25 * total, "{read} of {total} s");
    }
}

#[test]
fn near_the_floor_a_long_capture_yields_no_wrong_code() {
    // Eu/N0 = 12, 13 and 14 dB: presses may be lost, but every code reported is one of the
    // truth's, and the PWM button (the easier code) comes out with both presses. Measured
    // when added: PWM 2 presses at each level, PPM 0, 1 and 2 presses.
    let d = tempfile::tempdir().expect("tempdir");
    for snr in ["12", "13", "14"] {
        let cap = d.path().join(format!("floor{snr}.cu8"));
        let truth = sparse(&cap, snr);
        let (on, _) = decode(&cap, true);
        let want = codes(&truth);
        let got = codes(&on);
        for (bits, presses, frames) in &got {
            let t = want.iter().find(|(b, _, _)| b == bits);
            assert!(
                t.is_some(),
                "{snr} dB: wrong code {bits} ({presses} presses)"
            );
            let (_, tp, tf) = t.expect("found");
            assert!(
                presses <= tp && frames <= tf,
                "{snr} dB: {got:?} vs {want:?}"
            );
        }
        let pwm = &want.iter().find(|(b, _, _)| b.len() == 24).expect("pwm").0;
        assert!(
            got.iter().any(|(b, p, _)| b == pwm && *p == 2),
            "{snr} dB: {got:?}"
        );
    }
}
