//! `ooksift budget` end to end (issue 6): a synth press with known frame timing gives frame
//! and press airtime within one sample period of truth, and the energy budget names the last
//! complete repeat a hand calculation names.

mod common;

use common::{run, synth};

#[test]
fn airtime_within_one_sample_and_the_last_repeat_matches_a_hand_calculation() {
    let d = tempfile::tempdir().expect("tempdir");
    let out = d.path().join("button.rf32_le");
    // facts.md §5.4 frame (common practice): 24-bit 1:3 PWM, T = 350 µs, 1 T + 31 T sync;
    // data 0xAAAAAA, 8 repeats. Envelope at 250 kHz: one sample is 4 µs.
    let truth = synth(
        &out,
        &[
            "--rate",
            "250000",
            "--noiseless",
            "--press",
            "pwm:0xaaaaaa,unit_us=350,repeats=8",
        ],
    );
    let t = &truth["codes"][0];
    let path = out.to_str().expect("utf-8");
    let r = run(&[
        "budget",
        path,
        "--rate",
        "250000",
        "--json",
        "--supply-v",
        "3",
        "--mark-ma",
        "10",
        "--space-ma",
        "1",
        "--store-uf",
        "100",
        "--start-v",
        "6",
        "--cutoff-v",
        "2.5",
    ]);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    let b: serde_json::Value = serde_json::from_slice(&r.stdout).expect("JSON");
    common::assert_valid("budget.schema.json", &b);
    let air = &b["codes"][0]["airtime"];
    let sample_ms = 1e3 / 250_000.0;
    for (got, want) in [
        ("frame_airtime_ms", "frame_airtime_ms"),
        ("press_airtime_ms", "press_airtime_ms"),
    ] {
        let g = air[got].as_f64().expect("number");
        let w = t[want].as_f64().expect("number");
        assert!((g - w).abs() <= sample_ms, "{got}: {g} vs truth {w}");
    }
    // Hand calculation (facts.md §7 style, E = V·I·t): 3 V, 10 mA with the carrier on, 1 mA
    // otherwise; frame on-time 17.15 ms (49 T, facts.md §7), airtime 33.95 ms (97 T), period
    // 44.8 ms (128 T). Energy from the press start to the end of frame k:
    //   E_k = 3 V · (10 mA · k·17.15 ms + 1 mA · ((k−1)·44.8 + 33.95 − k·17.15) ms)
    //   E_1 = 564.90 µJ, E_2 = 1162.35 µJ, E_3 = 1759.80 µJ.
    // Store: ½·100 µF·(6² − 2.5²) V² = 1487.5 µJ (facts.md §7 formula) → repeats 1 and 2
    // complete, repeat 3 does not.
    let e = |k: f64| 3.0 * (10.0 * k * 17.15 + ((k - 1.0) * 44.8 + 33.95 - k * 17.15));
    let usable = 0.5 * 100.0 * (36.0 - 6.25);
    assert!(e(2.0) < usable && usable < e(3.0));
    let store = &b["codes"][0]["energy"]["presses"][0]["store"];
    assert_eq!(store["last_complete_repeat"], 2, "{store}");
    let u = b["codes"][0]["energy"]["usable_energy_uj"]
        .as_f64()
        .expect("number");
    assert!((u - usable).abs() < 0.5, "usable {u} vs {usable}");
}

#[test]
fn a_saved_report_budgets_like_its_capture() {
    let d = tempfile::tempdir().expect("tempdir");
    let out = d.path().join("gate.cu8");
    synth(
        &out,
        &[
            "--rate",
            "250000",
            "--snr-db",
            "25",
            "--press",
            "pwm:0x6b2d41,repeats=6",
        ],
    );
    let path = out.to_str().expect("utf-8");
    let dec = run(&["decode", "--json", "--rate", "250000", path]);
    let rep = d.path().join("gate.json");
    std::fs::write(&rep, &dec.stdout).expect("write");
    let a = run(&["budget", "--json", "--rate", "250000", path]);
    let b = run(&["budget", "--json", rep.to_str().expect("utf-8")]);
    assert!(a.status.success() && b.status.success());
    let va: serde_json::Value = serde_json::from_slice(&a.stdout).expect("JSON");
    let vb: serde_json::Value = serde_json::from_slice(&b.stdout).expect("JSON");
    assert_eq!(va["codes"], vb["codes"]);
}
