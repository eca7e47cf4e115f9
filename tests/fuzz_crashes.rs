//! Replays every input the fuzzers ever crashed on (`tests/fuzz-crashes/TARGET/`) and the
//! fuzz seeds (`fuzz/seeds/TARGET/`) through the same harness the libFuzzer targets use
//! (`fuzz/harness.rs`), in an ordinary `cargo test`. A crash input that panics again fails here.

#[path = "../fuzz/harness.rs"]
mod harness;

use std::path::{Path, PathBuf};

type Target = (&'static str, fn(&[u8]) -> Result<u64, String>);

fn chain(data: &[u8]) -> Result<u64, String> {
    harness::decode_chain(data).map(|n| n as u64)
}

const TARGETS: [Target; 4] = [
    ("raw", harness::raw),
    ("wav", harness::wav),
    ("sigmf_meta", harness::sigmf_meta),
    ("decode_chain", chain),
];

fn files(dir: &Path) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = match std::fs::read_dir(dir) {
        Ok(rd) => rd.map(|e| e.expect("entry").path()).collect(),
        Err(_) => Vec::new(),
    };
    v.sort();
    v
}

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

#[test]
fn kept_crash_inputs_no_longer_crash() {
    let mut replayed = 0;
    for (name, f) in TARGETS {
        for p in files(&root().join("tests/fuzz-crashes").join(name)) {
            let data = std::fs::read(&p).expect("read crash input");
            // Any outcome but a panic is a pass: the input is malformed by construction.
            let outcome = f(&data);
            eprintln!("{name} {}: {outcome:?}", p.display());
            replayed += 1;
        }
    }
    eprintln!("{replayed} crash input(s) replayed");
}

#[test]
fn seeds_read_whole_and_decode_to_their_code() {
    for (name, f) in TARGETS {
        let seeds = files(&root().join("fuzz/seeds").join(name));
        assert!(!seeds.is_empty(), "no seeds for {name}");
        for p in seeds {
            let data = std::fs::read(&p).expect("read seed");
            let got = f(&data);
            // Seeds are whole synth captures: readers read them to the end, and the chain
            // finds exactly the one code each holds.
            match name {
                "decode_chain" => assert_eq!(got, Ok(1), "{}", p.display()),
                _ => assert!(matches!(got, Ok(n) if n > 0), "{}: {got:?}", p.display()),
            }
        }
    }
}
