//! Benchmark: peak memory of `ooksift decode -` on a capture streamed through standard input,
//! small against huge. Memory should stay flat however long the stream (DESIGN.md
//! "Streaming"); this measures it, it does not assert it.
//!
//! ```text
//! cargo build --release
//! cargo run --release --example stream_memory               # 40 MiB vs 4 GiB
//! cargo run --release --example stream_memory -- 40M 400M   # any sizes (K, M, G = KiB, MiB, GiB)
//! ```
//!
//! The capture is written once with `ooksift synth` (cu8 at 1 MHz, about 39 MiB: 5 s idle, a
//! PWM press of the "gate" button, 5 s idle, a PPM press of the "chime", 10 s idle), then
//! repeated end to end into the decoder's stdin up to each size. Peak resident memory comes from
//! GNU time (`/usr/bin/time -f %M`; `apt-get install time` where missing), which reads the
//! kernel's maximum RSS of the child. Run it on an otherwise quiet machine; it takes about a
//! minute per GiB on one core.
//!
//! Measured (2 shared cores, Linux 6.18, release build of commit "bursts: weak false marks
//! between presses no longer chain a stream into one burst"):
//!
//! ```text
//!          bytes   peak RSS    time s       MB/s  codes  presses
//!       41943040   18508 KiB       0.5       85.3      2        2
//!     4294967296   19128 KiB      48.6       88.3      2      210
//! peak RSS ratio, largest / smallest stream: 1.033
//! ```
//!
//! (Before that fix the 4 GiB stream kept one endless burst: 87 of its 210 presses came out,
//! all at the end, and the ratio was 1.063.)

use std::io::{Read, Write};
use std::path::PathBuf;
use std::process::{Command, Stdio};
use std::time::Instant;

fn parse_size(s: &str) -> Result<u64, String> {
    let (num, mult) = match s.chars().last() {
        Some('K') => (&s[..s.len() - 1], 1u64 << 10),
        Some('M') => (&s[..s.len() - 1], 1 << 20),
        Some('G') => (&s[..s.len() - 1], 1 << 30),
        _ => (s, 1),
    };
    num.parse::<u64>()
        .map(|n| n * mult)
        .map_err(|e| format!("size '{s}': {e}"))
}

struct Measure {
    bytes: u64,
    max_rss_kib: u64,
    seconds: f64,
    codes: usize,
    presses: u64,
}

fn measure(bin: &PathBuf, capture: &[u8], bytes: u64) -> Result<Measure, String> {
    let mut child = Command::new("/usr/bin/time")
        .arg("-f")
        .arg("ooksift-max-rss-kib %M")
        .arg(bin)
        .args([
            "decode", "-", "--format", "cu8", "--rate", "1000000", "--json",
        ])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .map_err(|e| format!("/usr/bin/time: {e} (apt-get install time)"))?;
    let mut stdin = child.stdin.take().ok_or("no stdin")?;
    let mut stdout = child.stdout.take().ok_or("no stdout")?;
    let mut stderr = child.stderr.take().ok_or("no stderr")?;
    let reader = std::thread::spawn(move || {
        let mut s = String::new();
        let _ = stdout.read_to_string(&mut s);
        s
    });
    let err_reader = std::thread::spawn(move || {
        let mut s = String::new();
        let _ = stderr.read_to_string(&mut s);
        s
    });
    let start = Instant::now();
    let mut left = bytes;
    while left > 0 {
        for chunk in capture.chunks(1 << 20) {
            let n = (chunk.len() as u64).min(left) as usize;
            stdin
                .write_all(&chunk[..n])
                .map_err(|e| format!("feeding the decoder: {e}"))?;
            left -= n as u64;
            if left == 0 {
                break;
            }
        }
    }
    drop(stdin);
    let status = child.wait().map_err(|e| e.to_string())?;
    let seconds = start.elapsed().as_secs_f64();
    let out = reader.join().map_err(|_| "stdout reader")?;
    let err = err_reader.join().map_err(|_| "stderr reader")?;
    if !status.success() {
        return Err(format!("decode failed ({status}): {err}"));
    }
    let max_rss_kib = err
        .lines()
        .find_map(|l| l.strip_prefix("ooksift-max-rss-kib "))
        .and_then(|v| v.trim().parse().ok())
        .ok_or_else(|| format!("no RSS figure from /usr/bin/time in {err:?}"))?;
    let report: serde_json::Value =
        serde_json::from_str(&out).map_err(|e| format!("report: {e}"))?;
    let codes = report["codes"].as_array().map_or(0, Vec::len);
    let presses = report["codes"]
        .as_array()
        .map_or(0, |c| c.iter().filter_map(|c| c["presses"].as_u64()).sum());
    Ok(Measure {
        bytes,
        max_rss_kib,
        seconds,
        codes,
        presses,
    })
}

fn main() -> Result<(), String> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let sizes: Vec<u64> = if args.is_empty() {
        vec![40 << 20, 4 << 30]
    } else {
        args.iter()
            .map(|s| parse_size(s))
            .collect::<Result<_, _>>()?
    };
    // target/release/examples/stream_memory → target/release/ooksift
    let exe = std::env::current_exe().map_err(|e| e.to_string())?;
    let bin = exe
        .parent()
        .and_then(|p| p.parent())
        .map(|p| p.join("ooksift"))
        .filter(|p| p.exists())
        .ok_or("build the binary first: cargo build --release")?;
    let dir = tempfile::tempdir().map_err(|e| e.to_string())?;
    let cap = dir.path().join("harrowgate-stream.cu8");
    let status = Command::new(&bin)
        .args(["synth", "--out"])
        .arg(&cap)
        .args([
            "--rate",
            "1000000",
            "--lead-ms",
            "5000",
            "--tail-ms",
            "10000",
        ])
        .args([
            "--press",
            "pwm:0x5a5a5a",
            "--press",
            "ppm:0x3c3c3c,gap_ms=5000",
        ])
        .stderr(Stdio::null())
        .status()
        .map_err(|e| e.to_string())?;
    if !status.success() {
        return Err("synth failed".into());
    }
    let capture = std::fs::read(&cap).map_err(|e| e.to_string())?;
    println!(
        "capture: cu8 at 1 MHz, {} bytes ({:.1} s), 2 presses, repeated to each size",
        capture.len(),
        capture.len() as f64 / 2e6
    );
    println!(
        "{:>14} {:>10} {:>9} {:>10} {:>6} {:>8}",
        "bytes", "peak RSS", "time s", "MB/s", "codes", "presses"
    );
    let mut results = Vec::new();
    for &size in &sizes {
        let m = measure(&bin, &capture, size)?;
        println!(
            "{:>14} {:>7} KiB {:>9.1} {:>10.1} {:>6} {:>8}",
            m.bytes,
            m.max_rss_kib,
            m.seconds,
            m.bytes as f64 / 1e6 / m.seconds,
            m.codes,
            m.presses
        );
        results.push(m);
    }
    if let (Some(first), Some(last)) = (results.first(), results.last()) {
        println!(
            "peak RSS ratio, largest / smallest stream: {:.3}",
            last.max_rss_kib as f64 / first.max_rss_kib as f64
        );
    }
    Ok(())
}
