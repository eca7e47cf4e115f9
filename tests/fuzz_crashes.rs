//! Replays every input the fuzzers ever crashed on (`tests/fuzz-crashes/TARGET/`: two so far —
//! a 131-byte capture at a 10¹² Hz rate that made a 960 MB averaging ring in the envelope
//! restorer, libFuzzer's out-of-memory report, bound unit-tested in `front::baseline`; and
//! overlapping marks whose negative space overflowed a count in `bursts::trim_misfits`,
//! unit-tested there), the malformed-capture corpus and the fuzz seeds (`fuzz/seeds/TARGET/`) through the
//! same harness the libFuzzer targets use (`fuzz/harness.rs`), in an ordinary `cargo test`.
//! An input that panics fails here. (`cargo test --release` has no overflow checks; the
//! fuzz builds do, so replay an overflow crash with plain `cargo test` too.)

#[path = "../fuzz/harness.rs"]
mod harness;

use std::path::{Path, PathBuf};

type Target = (&'static str, fn(&[u8]) -> Result<u64, String>);

fn chain(data: &[u8]) -> Result<u64, String> {
    harness::decode_chain(data).map(|n| n as u64)
}

fn channels(data: &[u8]) -> Result<u64, String> {
    harness::decode_channels(data).map(|n| n as u64)
}

const TARGETS: [Target; 5] = [
    ("raw", harness::raw),
    ("wav", harness::wav),
    ("sigmf_meta", harness::sigmf_meta),
    ("decode_chain", chain),
    ("decode_channels", channels),
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
fn kept_crash_inputs_and_the_malformed_corpus_do_not_panic_the_harness() {
    // Crash inputs are malformed by construction: any outcome but a panic is a pass. The
    // malformed-capture corpus goes through every target too, as extra hostile inputs.
    let corpus = files(&root().join("tests/malformed"));
    let mut replayed = 0;
    for (name, f) in TARGETS {
        let kept = files(&root().join("tests/fuzz-crashes").join(name));
        for p in kept.iter().chain(&corpus) {
            let data = std::fs::read(p).expect("read input");
            let _ = f(&data);
            replayed += 1;
        }
    }
    assert!(
        replayed >= TARGETS.len() * 100,
        "only {replayed} inputs replayed"
    );
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
                "decode_channels" => {
                    let want = if p.to_string_lossy().contains("two-") {
                        2
                    } else {
                        1
                    };
                    assert_eq!(got, Ok(want), "{}", p.display())
                }
                _ => assert!(matches!(got, Ok(n) if n > 0), "{}: {got:?}", p.display()),
            }
        }
    }
}
