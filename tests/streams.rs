//! Streams: standard input decodes like a file (in whatever pieces the pipe delivers), and a
//! reader that stops early (`| head -c 10`) ends the program quietly.

mod spawn;

use spawn::{panicked, run, run_with, BIN, DEADLINE};
use std::io::{Read, Write};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

fn synth(dir: &Path, out: &str, press: &str, rate: &str) -> PathBuf {
    let path = dir.join(out);
    let r = run(&[
        "synth",
        "--out",
        path.to_str().expect("utf-8"),
        "--press",
        press,
        "--rate",
        rate,
    ]);
    assert_eq!(r.status, Some(0), "{}", r.stderr);
    path
}

/// `(key_id, bits, presses, frames)` of each code in a JSON report.
fn codes(json: &str) -> Vec<(String, String, u64, u64)> {
    let v: serde_json::Value = serde_json::from_str(json).expect("JSON report");
    v["codes"]
        .as_array()
        .expect("codes")
        .iter()
        .map(|c| {
            (
                c["key_id"].as_str().expect("key_id").to_string(),
                c["bits"].as_str().expect("bits").to_string(),
                c["presses"].as_u64().expect("presses"),
                c["frames"].as_u64().expect("frames"),
            )
        })
        .collect()
}

/// Waits for `child` with the deadline of the other tests.
fn wait(child: &mut std::process::Child) -> std::process::ExitStatus {
    let start = Instant::now();
    loop {
        if let Some(st) = child.try_wait().expect("wait") {
            return st;
        }
        if start.elapsed() > DEADLINE {
            let _ = child.kill();
            panic!("ooksift still running after {DEADLINE:?}");
        }
        std::thread::sleep(Duration::from_millis(5));
    }
}

#[test]
fn stdin_decodes_like_the_file() {
    let dir = tempfile::tempdir().expect("tempdir");
    let cap = synth(dir.path(), "gate.cu8", "pwm:0x5a5a5a", "1000000");
    let c = cap.to_str().expect("utf-8");
    let from_file = run(&["decode", c, "--rate", "1000000", "--json"]);
    assert_eq!(from_file.status, Some(0), "{}", from_file.stderr);
    let want = codes(&from_file.stdout);
    // Truth of the synth: the one code 0x5a5a5a as 24 bits.
    assert_eq!(want.len(), 1);
    assert_eq!(want[0].1, "010110100101101001011010");

    let bytes = std::fs::read(&cap).expect("capture");
    let args = [
        "decode", "-", "--format", "cu8", "--rate", "1000000", "--json",
    ];
    let r = run_with(&args, Some(bytes.clone()), DEADLINE);
    assert_eq!(r.status, Some(0), "{}", r.stderr);
    assert_eq!(codes(&r.stdout), want);
    let v: serde_json::Value = serde_json::from_str(&r.stdout).expect("JSON");
    assert_eq!(v["capture"]["path"], "-");
    assert_eq!(
        v["capture"]["samples"].as_u64(),
        Some(bytes.len() as u64 / 2)
    );

    // The same bytes in odd-sized pieces with pauses, as a slow pipe delivers them.
    let mut child = Command::new(BIN)
        .args(args)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn");
    let mut stdin = child.stdin.take().expect("stdin");
    let feeder = std::thread::spawn(move || {
        for (i, piece) in bytes.chunks(65_537).enumerate() {
            // Split each piece unevenly, so samples straddle reads.
            let (a, b) = piece.split_at(piece.len().min(1 + i * 7 % 13));
            stdin.write_all(a).expect("feed");
            stdin.flush().expect("flush");
            std::thread::sleep(Duration::from_millis(2));
            stdin.write_all(b).expect("feed");
        }
    });
    let mut out = String::new();
    child
        .stdout
        .take()
        .expect("stdout")
        .read_to_string(&mut out)
        .expect("read");
    feeder.join().expect("feeder");
    let st = wait(&mut child);
    assert_eq!(st.code(), Some(0));
    assert_eq!(codes(&out), want);
}

#[test]
fn a_wav_on_stdin_is_recognised_by_its_header() {
    let dir = tempfile::tempdir().expect("tempdir");
    let cap = synth(dir.path(), "chime.wav", "pwm:0xa5a5", "48000");
    let bytes = std::fs::read(&cap).expect("capture");
    let r = run_with(&["decode", "-", "--json"], Some(bytes), DEADLINE);
    assert_eq!(r.status, Some(0), "{}", r.stderr);
    let got = codes(&r.stdout);
    assert_eq!(got.len(), 1, "{}", r.stdout);
    assert_eq!(got[0].1, "1010010110100101");
}

#[test]
fn stdin_errors_are_one_line() {
    for (args, input, text) in [
        (
            &["decode", "-", "--format", "cu8"][..],
            vec![128u8; 1000],
            "no sample rate",
        ),
        (
            &["decode", "-", "--format", "cu8", "--rate", "1e6"][..],
            vec![],
            "file is empty",
        ),
        (
            &["decode", "-", "--format", "ci16_le", "--rate", "1e6"][..],
            vec![0u8; 4003],
            "3 trailing byte(s)",
        ),
        (
            &["decode", "-", "--rate", "1e6"][..],
            vec![128u8; 1000],
            "cannot tell the capture format",
        ),
        (
            &["decode", "-", "--format", "sigmf"][..],
            vec![b'{'; 10],
            "cannot come from standard input",
        ),
    ] {
        let r = run_with(args, Some(input), DEADLINE);
        assert_eq!(r.status, Some(1), "{args:?}: {}", r.stderr);
        assert_eq!(r.stderr.lines().count(), 1, "{args:?}: {}", r.stderr);
        assert!(
            r.stderr.starts_with("ooksift: -: ") && r.stderr.contains(text),
            "{args:?}: {}",
            r.stderr
        );
    }
}

/// Several reports of one capture: far more than a pipe buffer (64 KiB on Linux), so the
/// writer is still writing when the reader goes away.
fn many_reports(cap: &str) -> Vec<String> {
    let mut args = vec!["decode".to_string()];
    args.extend((0..30).map(|_| cap.to_string()));
    args.extend(["--rate", "1000000", "--json"].map(String::from));
    args
}

#[test]
fn a_reader_that_stops_early_ends_the_program_quietly() {
    let dir = tempfile::tempdir().expect("tempdir");
    let cap = synth(dir.path(), "gate.cu8", "pwm:0x5a5a5a", "1000000");
    let args = many_reports(cap.to_str().expect("utf-8"));

    // `| head -c 10`: read ten bytes, then close the pipe.
    let mut child = Command::new(BIN)
        .args(&args)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn");
    let mut stdout = child.stdout.take().expect("stdout");
    let mut first = [0u8; 10];
    stdout.read_exact(&mut first).expect("ten bytes");
    assert_eq!(&first[..1], b"{");
    drop(stdout);
    let st = wait(&mut child);
    let mut err = String::new();
    child
        .stderr
        .take()
        .expect("stderr")
        .read_to_string(&mut err)
        .expect("stderr");
    assert!(!panicked(&err), "{err}");
    assert_eq!(err, "", "a closed stdout is not an error to report");
    assert_eq!(st.code(), Some(0), "{err}");

    // A pipe closed before the first byte.
    let mut child = Command::new(BIN)
        .args(&args)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn");
    drop(child.stdout.take());
    let st = wait(&mut child);
    let mut err = String::new();
    child
        .stderr
        .take()
        .expect("stderr")
        .read_to_string(&mut err)
        .expect("stderr");
    assert!(!panicked(&err), "{err}");
    assert_eq!(st.code(), Some(0), "{err}");
}

#[test]
fn a_closed_stderr_does_not_turn_a_message_into_a_crash() {
    // Regression: eprintln! panicked on a closed stderr pipe (`2>&1 | head`), so a failed
    // file exited 101 instead of 1, and a successful synth 101 instead of 0.
    let dir = tempfile::tempdir().expect("tempdir");
    // A capture to decode first, so the error line comes well after the pipe is closed.
    let slow = dir.path().join("slow.cu8");
    let r = run(&[
        "synth",
        "--out",
        slow.to_str().expect("utf-8"),
        "--press",
        "pwm:0xa5a5",
        "--rate",
        "1000000",
        "--tail-ms",
        "3000",
    ]);
    assert_eq!(r.status, Some(0), "{}", r.stderr);
    let missing = dir.path().join("missing.cu8");
    let out = dir.path().join("gate.cu8");
    for (args, want) in [
        (
            vec![
                "decode",
                slow.to_str().expect("utf-8"),
                missing.to_str().expect("utf-8"),
                "--rate",
                "1e6",
            ],
            1,
        ),
        (
            vec![
                "synth",
                "--out",
                out.to_str().expect("utf-8"),
                "--press",
                "pwm:0xa5a5",
            ],
            0,
        ),
    ] {
        let mut child = Command::new(BIN)
            .args(&args)
            .stdout(Stdio::null())
            .stderr(Stdio::piped())
            .spawn()
            .expect("spawn");
        drop(child.stderr.take());
        let st = wait(&mut child);
        assert_eq!(st.code(), Some(want), "{args:?}");
    }
    assert!(out.exists());
}

#[test]
fn a_long_noisy_stream_reports_each_press_as_it_ends() {
    // Regression: false marks in the noise between presses chained the whole stream into one
    // burst, so nothing was reported before the stream ended, and past the burst's mark limit
    // (20 000 marks, about 90 presses) every later press was dropped.
    use ooksift::decode::{DecodeOptions, Decoder};
    use ooksift::source::{from_reader, OpenOptions};

    let dir = tempfile::tempdir().expect("tempdir");
    let cap = dir.path().join("gate-then-chime.cu8");
    let r = run(&[
        "synth",
        "--out",
        cap.to_str().expect("utf-8"),
        "--rate",
        "250000",
        "--lead-ms",
        "2000",
        "--tail-ms",
        "3000",
        "--press",
        "pwm:0x5a5a5a",
        "--press",
        "ppm:0x3c3c3c,gap_ms=2000",
    ]);
    assert_eq!(r.status, Some(0), "{}", r.stderr);
    let one = std::fs::read(&cap).expect("capture");
    let copies = 4;
    let stream: Vec<u8> = one
        .iter()
        .copied()
        .cycle()
        .take(one.len() * copies)
        .collect();
    let opts = DecodeOptions {
        open: OpenOptions {
            format: Some("cu8".into()),
            rate_hz: Some(250_000.0),
            ..OpenOptions::default()
        },
        ..DecodeOptions::default()
    };
    let mut src =
        from_reader("-", Box::new(std::io::Cursor::new(stream)), &opts.open).expect("opens");
    let mut dec = Decoder::new(src.info().clone(), &opts);
    let mut read = 0usize;
    let mut seen_at = Vec::new();
    while let Some(block) = src.next_block().expect("reads") {
        read += block.len();
        dec.push(block);
        while seen_at.len() < dec.presses().len() {
            seen_at.push(read);
        }
    }
    // Both presses of every copy were out before the copy after it began.
    let per_copy = one.len() / 2;
    assert_eq!(
        seen_at.len(),
        2 * copies,
        "presses reported while streaming: {seen_at:?}"
    );
    for (k, at) in seen_at.iter().enumerate() {
        assert!(
            *at <= (k / 2 + 1) * per_copy,
            "press {k} reported at sample {at}"
        );
    }
    let report = dec.finish();
    let codes: Vec<(&str, usize)> = report
        .codes
        .iter()
        .map(|c| (c.hex.as_str(), c.presses))
        .collect();
    assert_eq!(
        codes,
        [("5a5a5a", copies), ("3c3c3c", copies)],
        "{:?}",
        report.notes
    );
}
