//! Replays fuzz inputs through a whole-chain target's harness (`fuzz/harness.rs`, the code
//! the libFuzzer targets run) and prints one line per input: its file name and the codes its
//! report holds (as JSON), or the error. Two runs diffed show whether a change to the
//! pipeline altered any reading — the check for a refactor meant to be bit-identical — and
//! the total decode time (on standard error) compares their cost side by side.
//!
//! ```text
//! cargo run --release --example replay_fuzz -- decode_chain fuzz/corpus/decode_chain/* > after.txt
//! ```
//!
//! With `REPLAY_TIMES=1` each input's decode time and size go to standard error too
//! (`seconds bytes name`), to find the inputs that cost the most.
//!
//! Targets: `decode_chain` (the one-pass path of standard input) and `decode_channels` (the
//! per-carrier path of IQ files). The corpora grow under `fuzz/corpus/` while fuzzing
//! (`fuzz/README.md`); `fuzz/seeds/` holds a few committed inputs.

#[path = "../fuzz/harness.rs"]
mod harness;

use std::time::{Duration, Instant};

fn main() {
    let mut args = std::env::args().skip(1);
    let usage = "usage: replay_fuzz decode_chain|decode_channels FILE...";
    let run = match args.next().as_deref() {
        Some("decode_chain") => harness::decode_chain_report,
        Some("decode_channels") => harness::decode_channels_report,
        _ => {
            eprintln!("{usage}");
            std::process::exit(2);
        }
    };
    // REPLAY_TIMES=1: one line per input on standard error, "seconds bytes name", to find
    // the inputs that cost the most.
    let times = std::env::var_os("REPLAY_TIMES").is_some_and(|v| v == "1");
    let mut total = Duration::ZERO;
    let mut inputs = 0usize;
    for path in args {
        let data = match std::fs::read(&path) {
            Ok(d) => d,
            Err(e) => {
                eprintln!("replay_fuzz: {path}: {e}");
                std::process::exit(1);
            }
        };
        let name = std::path::Path::new(&path)
            .file_name()
            .map_or(path.clone(), |n| n.to_string_lossy().into_owned());
        let t = Instant::now();
        let result = run(&data);
        let took = t.elapsed();
        total += took;
        inputs += 1;
        if times {
            eprintln!("{:.6} {} {name}", took.as_secs_f64(), data.len());
        }
        match result {
            Ok(report) => println!(
                "{name} {}",
                serde_json::to_string(&report.codes).expect("codes serialise")
            ),
            Err(e) => println!("{name} error: {e}"),
        }
    }
    eprintln!("{inputs} inputs decoded in {:.3} s", total.as_secs_f64());
}
