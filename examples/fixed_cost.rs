//! Fixed cost of decoding one capture: a tiny capture (4 KiB of seeded noise) decoded many
//! times through `decode_source`, as the `decode_chain` fuzz target does per input, for an IQ
//! and an envelope format at a few sample rates.
//!
//! ```text
//! cargo run --release --example fixed_cost [-- --runs 2000]
//! ```
//!
//! Prints the CPU time (user + system, from `/proc/self/stat`; wall time elsewhere) per
//! capture. Compare builds before and after a change in the same session: the machine is
//! shared, so figures are rough.

use std::io::Cursor;
use std::time::Instant;

use ooksift::decode::{decode_source, DecodeOptions};
use ooksift::source::{self, OpenOptions};

/// 4 KiB of xorshift noise (constants from memory), the same every run.
fn noise(len: usize) -> Vec<u8> {
    let mut x = 0x9E37_79B9_7F4A_7C15u64;
    (0..len)
        .map(|_| {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            (x >> 56) as u8
        })
        .collect()
}

/// CPU seconds this process used so far (Linux), or `None`.
fn cpu_s() -> Option<f64> {
    let stat = std::fs::read_to_string("/proc/self/stat").ok()?;
    // Fields after the command name, which is in parentheses and may hold spaces.
    let rest = stat.get(stat.rfind(')')? + 2..)?;
    let f: Vec<&str> = rest.split(' ').collect();
    // utime and stime are fields 14 and 15 of the whole line, in clock ticks (100 per second
    // on Linux, from memory: sysconf(_SC_CLK_TCK) is 100 on the usual builds).
    let ticks = f.get(11)?.parse::<f64>().ok()? + f.get(12)?.parse::<f64>().ok()?;
    Some(ticks / 100.0)
}

fn main() {
    let mut runs = 2000usize;
    let args: Vec<String> = std::env::args().collect();
    if let Some(i) = args.iter().position(|a| a == "--runs") {
        runs = args.get(i + 1).and_then(|v| v.parse().ok()).unwrap_or(runs);
    }
    let data = noise(4096);
    println!("{runs} decodes of a 4 KiB capture each");
    for (format, rate) in [
        ("cu8", 2.048e6),
        ("cu8", 250e3),
        ("ru8", 250e3),
        ("ru8", 48e3),
        ("ri16_le", 1e6),
    ] {
        let opts = DecodeOptions {
            open: OpenOptions {
                format: Some(format.into()),
                rate_hz: Some(rate),
                block_samples: 4096,
                ..OpenOptions::default()
            },
            ..DecodeOptions::default()
        };
        let t = Instant::now();
        let c0 = cpu_s();
        let mut codes = 0usize;
        for _ in 0..runs {
            let reader = Box::new(Cursor::new(data.clone()));
            let Ok(mut src) = source::from_reader("bench", reader, &opts.open) else {
                eprintln!("{format}: cannot open");
                return;
            };
            match decode_source(src.as_mut(), &opts) {
                Ok(r) => codes += r.codes.len(),
                Err(e) => {
                    eprintln!("{format}: {e}");
                    return;
                }
            }
        }
        let spent = match (c0, cpu_s()) {
            (Some(a), Some(b)) => b - a,
            _ => t.elapsed().as_secs_f64(),
        };
        let per = spent / runs as f64;
        println!(
            "{format:>8} at {:>9.0} Hz: {:>8.1} µs per capture ({:.0} captures/s), {codes} codes",
            rate,
            per * 1e6,
            1.0 / per
        );
    }
}
