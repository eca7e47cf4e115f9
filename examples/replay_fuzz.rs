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
        total += t.elapsed();
        inputs += 1;
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
