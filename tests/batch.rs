//! Batch decoding (issue 7): a folder of captures decoded in parallel yields, in order, the
//! same reports as one-by-one runs; `--jsonl` prints one document per capture per line.

mod common;

use common::{decode_json, run, synth};

#[test]
fn a_folder_decodes_like_one_by_one_runs() {
    let d = tempfile::tempdir().expect("tempdir");
    let mut files = Vec::new();
    for i in 0..6u32 {
        let p = d.path().join(format!("press-{i}.cu8"));
        let bits = format!("0x{:06x}", 0x5a3c00 + i * 0x1111);
        let press = format!("pwm:{bits},repeats=4");
        let seed = i.to_string();
        synth(
            &p,
            &[
                "--rate", "250000", "--snr-db", "25", "--seed", &seed, "--press", &press,
            ],
        );
        files.push(p);
    }
    // A file that is not a capture is skipped, not decoded.
    std::fs::write(d.path().join("notes.txt"), b"not a capture").expect("write");
    let out = run(&[
        "decode",
        "--jsonl",
        "--rate",
        "250000",
        d.path().to_str().expect("utf-8"),
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let stdout = String::from_utf8(out.stdout).expect("utf-8");
    let lines: Vec<&str> = stdout.lines().collect();
    assert_eq!(lines.len(), 6);
    assert!(String::from_utf8_lossy(&out.stderr).contains("6 capture(s) decoded"));
    for (line, f) in lines.iter().zip(&files) {
        let batch: serde_json::Value = serde_json::from_str(line).expect("one JSON per line");
        let single = decode_json(f, &["--rate", "250000"]);
        assert_eq!(batch["capture"]["path"].as_str(), f.to_str());
        assert_eq!(batch["codes"], single["codes"], "{}", f.display());
    }
}

#[test]
fn completions_and_the_manual_come_from_the_cli_definition() {
    let c = run(&["completions", "bash"]);
    assert!(c.status.success());
    let text = String::from_utf8_lossy(&c.stdout);
    for sub in ["decode", "spectrum", "compare", "budget", "plot", "synth"] {
        assert!(text.contains(sub), "completions lack {sub}");
    }
    let m = run(&["manual"]);
    assert!(m.status.success());
    let page = String::from_utf8_lossy(&m.stdout);
    assert!(
        page.starts_with(".ie") || page.contains(".TH ooksift"),
        "{page}"
    );
}
