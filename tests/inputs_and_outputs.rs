//! Inputs untouched, outputs whole (DESIGN.md "Conventions"): commands never modify what they
//! read; outputs appear under their name only when complete; existing outputs stay unless
//! `--force`.
//!
//! A process killed with SIGKILL cannot clean up, so its hidden temporary file
//! (`.NAME.ooksift-tmp-PID`, beside the target) may remain; the target itself is never partial.

mod spawn;

use spawn::{panicked, run, BIN};
use std::fs;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant, SystemTime};

/// Bytes and modification time of a file.
fn snapshot(p: &Path) -> (Vec<u8>, SystemTime) {
    let bytes = fs::read(p).unwrap_or_else(|e| panic!("{}: {e}", p.display()));
    let mtime = fs::metadata(p).and_then(|m| m.modified()).expect("mtime");
    (bytes, mtime)
}

fn synth(dir: &Path, out: &str, press: &str, extra: &[&str]) -> PathBuf {
    let path = dir.join(out);
    let mut args = vec![
        "synth",
        "--out",
        path.to_str().expect("utf-8"),
        "--press",
        press,
    ];
    args.extend_from_slice(extra);
    let r = run(&args);
    assert_eq!(r.status, Some(0), "synth {out}: {}", r.stderr);
    path
}

#[test]
fn every_command_leaves_its_inputs_byte_identical() {
    let dir = tempfile::tempdir().expect("tempdir");
    let d = dir.path();
    let raw = synth(d, "gate.cu8", "pwm:0x5a5a5a", &["--rate", "1000000"]);
    let wav = synth(d, "chime.wav", "ppm:0x3c3c", &["--rate", "48000"]);
    let meta = synth(d, "lamp.sigmf-meta", "pwm:0xa5a", &["--rate", "250000"]);
    let data = d.join("lamp.sigmf-data");
    // The `spec` of a truth file is a synth input too.
    let truth: serde_json::Value =
        serde_json::from_slice(&fs::read(d.join("gate.truth.json")).expect("truth")).expect("json");
    let spec = d.join("spec.json");
    fs::write(
        &spec,
        serde_json::to_vec_pretty(&truth["spec"]).expect("spec"),
    )
    .expect("write");

    // A saved report is a budget input.
    let r = run(&[
        "decode",
        raw.to_str().expect("utf-8"),
        "--rate",
        "1000000",
        "--json",
    ]);
    assert_eq!(r.status, Some(0), "{}", r.stderr);
    let report = d.join("gate.report.json");
    fs::write(&report, &r.stdout).expect("write report");

    let inputs = [&raw, &wav, &meta, &data, &spec, &report];
    let before: Vec<_> = inputs.iter().map(|p| snapshot(p)).collect();
    // A write during the runs would move the mtime past this pause.
    std::thread::sleep(Duration::from_millis(50));

    for capture in [&raw, &wav, &meta] {
        let c = capture.to_str().expect("utf-8");
        let mut args = vec!["decode", c];
        if capture == &raw {
            args.extend(["--rate", "1000000"]);
        }
        for json in [false, true] {
            let mut a = args.clone();
            if json {
                a.push("--json");
            }
            let r = run(&a);
            assert_eq!(r.status, Some(0), "{a:?}: {}", r.stderr);
            assert!(
                r.stdout.contains("5a5a5a")
                    || r.stdout.contains("3c3c")
                    || r.stdout.contains("a5a")
            );
        }
        // The commands that write files beside or from a capture.
        let csv = d.join("frames.csv");
        let svg = d.join("plot.svg");
        let (csv_s, svg_s) = (csv.to_str().expect("utf-8"), svg.to_str().expect("utf-8"));
        let rate: &[&str] = if capture == &raw {
            &["--rate", "1000000"]
        } else {
            &[]
        };
        for cmd in [
            vec!["decode", c, "--csv", csv_s, "--sigmf-annotate", "--force"],
            vec!["plot", c, "--out", svg_s, "--force"],
            vec!["budget", c],
        ] {
            let mut a = cmd.clone();
            a.extend_from_slice(rate);
            let r = run(&a);
            assert_eq!(r.status, Some(0), "{a:?}: {}", r.stderr);
            assert!(!panicked(&r.stderr), "{a:?}: {}", r.stderr);
        }
        assert!(csv.exists() && svg.exists());
    }
    let r = run(&["budget", report.to_str().expect("utf-8"), "--json"]);
    assert_eq!(r.status, Some(0), "budget REPORT: {}", r.stderr);
    let out = d.join("again.cu8");
    let r = run(&[
        "synth",
        "--spec",
        spec.to_str().expect("utf-8"),
        "--out",
        out.to_str().expect("utf-8"),
    ]);
    assert_eq!(r.status, Some(0), "synth --spec: {}", r.stderr);
    // The copy made from the spec is the same capture (same seed), a check that it was read.
    assert_eq!(fs::read(&out).expect("again"), before[0].0);

    for (p, (bytes, mtime)) in inputs.iter().zip(&before) {
        let (now_bytes, now_mtime) = snapshot(p);
        assert!(now_bytes == *bytes, "{} changed", p.display());
        assert_eq!(now_mtime, *mtime, "{} was rewritten", p.display());
    }
}

#[test]
fn existing_outputs_are_kept_unless_force() {
    let dir = tempfile::tempdir().expect("tempdir");
    let d = dir.path();
    let out = synth(d, "gate.cu8", "pwm:0x5a5a5a", &["--rate", "250000"]);
    let truth = d.join("gate.truth.json");
    let (cap0, cap_t0) = snapshot(&out);
    let (truth0, truth_t0) = snapshot(&truth);
    std::thread::sleep(Duration::from_millis(50));

    let o = out.to_str().expect("utf-8");
    let r = run(&[
        "synth",
        "--out",
        o,
        "--press",
        "ppm:0x1234",
        "--rate",
        "250000",
    ]);
    assert_eq!(r.status, Some(1), "{}", r.stderr);
    assert_eq!(r.stderr.lines().count(), 1, "{}", r.stderr);
    assert!(
        r.stderr.starts_with(&format!("ooksift: {o}: ")),
        "{}",
        r.stderr
    );
    assert!(
        r.stderr.contains("exists; add --force to replace it"),
        "{}",
        r.stderr
    );
    assert_eq!(snapshot(&out), (cap0.clone(), cap_t0));
    assert_eq!(snapshot(&truth), (truth0.clone(), truth_t0));

    // Only the sidecar left: still refused, and the capture is not written either.
    fs::remove_file(&out).expect("remove");
    let r = run(&[
        "synth",
        "--out",
        o,
        "--press",
        "ppm:0x1234",
        "--rate",
        "250000",
    ]);
    assert_eq!(r.status, Some(1), "{}", r.stderr);
    assert!(r.stderr.contains("gate.truth.json exists"), "{}", r.stderr);
    assert!(
        !out.exists(),
        "the capture was written although the sidecar was refused"
    );
    assert_eq!(snapshot(&truth), (truth0.clone(), truth_t0));

    // --force replaces both.
    let r = run(&[
        "synth",
        "--out",
        o,
        "--press",
        "ppm:0x1234",
        "--rate",
        "250000",
        "--force",
    ]);
    assert_eq!(r.status, Some(0), "{}", r.stderr);
    assert_ne!(fs::read(&out).expect("capture"), cap0);
    assert_ne!(fs::read(&truth).expect("truth"), truth0);
    // Nothing but the outputs in the folder: no temporary file left by a finished run.
    let mut names: Vec<String> = fs::read_dir(d)
        .expect("list")
        .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(names, ["gate.cu8", "gate.truth.json"]);
}

/// Starts a ~200 MB cf32_le synth into `out`, kills it with SIGKILL once its temporary file
/// holds `at_bytes`, and returns the names of the temporary files left behind.
fn kill_mid_write(out: &Path, force: bool, at_bytes: u64) -> Vec<String> {
    let dir = out.parent().expect("parent");
    let name = out
        .file_name()
        .expect("name")
        .to_string_lossy()
        .into_owned();
    let mut cmd = Command::new(BIN);
    cmd.args(["synth", "--out", out.to_str().expect("utf-8")])
        // 12.5 s at 2 MHz, 8 bytes a sample: about 204 MB.
        .args([
            "--press",
            "pwm:0x5a5a5a",
            "--rate",
            "2000000",
            "--tail-ms",
            "12500",
        ])
        .stdout(Stdio::null())
        .stderr(Stdio::null());
    if force {
        cmd.arg("--force");
    }
    let mut child = cmd.spawn().expect("spawn synth");
    let tmp_prefix = format!(".{name}.ooksift-tmp-");
    let start = Instant::now();
    loop {
        let growing = fs::read_dir(dir).expect("list").any(|e| {
            let e = e.expect("entry");
            e.file_name().to_string_lossy().starts_with(&tmp_prefix)
                && e.metadata().map(|m| m.len() >= at_bytes).unwrap_or(false)
        });
        if growing {
            break;
        }
        if let Some(st) = child.try_wait().expect("wait") {
            panic!("synth ended ({st}) before its output reached {at_bytes} bytes; cannot test the kill");
        }
        assert!(
            start.elapsed() < Duration::from_secs(60),
            "synth output never grew"
        );
        std::thread::sleep(Duration::from_millis(1));
    }
    child.kill().expect("kill");
    let st = child.wait().expect("wait");
    assert_eq!(
        st.code(),
        None,
        "synth finished before the kill landed; the test proves nothing"
    );
    fs::read_dir(dir)
        .expect("list")
        .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with(&tmp_prefix))
        .collect()
}

#[test]
fn a_synth_killed_mid_write_leaves_no_partial_output() {
    let dir = tempfile::tempdir().expect("tempdir");
    let out = dir.path().join("big.cf32_le");

    // No previous file: none afterwards.
    let stray = kill_mid_write(&out, false, 16 << 20);
    assert!(!out.exists(), "a partial {} appeared", out.display());
    assert!(!dir.path().join("big.truth.json").exists());
    assert_eq!(stray.len(), 1, "the killed run's temporary file: {stray:?}");
    for s in stray {
        fs::remove_file(dir.path().join(s)).expect("remove stray temp");
    }

    // A previous complete file: still that file, whole, afterwards.
    let r = run(&[
        "synth",
        "--out",
        out.to_str().expect("utf-8"),
        "--press",
        "pwm:0xa5a5",
        "--rate",
        "250000",
    ]);
    assert_eq!(r.status, Some(0), "{}", r.stderr);
    let before = fs::read(&out).expect("previous");
    let truth_before = fs::read(dir.path().join("big.truth.json")).expect("previous truth");
    kill_mid_write(&out, true, 16 << 20);
    assert!(
        fs::read(&out).expect("still there") == before,
        "the previous output was damaged"
    );
    assert_eq!(
        fs::read(dir.path().join("big.truth.json")).expect("truth"),
        truth_before
    );
    // And it still decodes to its code.
    let r = run(&["decode", out.to_str().expect("utf-8"), "--rate", "250000"]);
    assert_eq!(r.status, Some(0), "{}", r.stderr);
    assert!(
        r.stdout.contains(" a5a5 ") && !panicked(&r.stderr),
        "{}",
        r.stdout
    );
}
