//! Helpers of the integration tests that run the real `ooksift` binary.

#![allow(dead_code)]

use std::io::{Read, Write};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// The binary under test.
pub const BIN: &str = env!("CARGO_BIN_EXE_ooksift");

/// A bound against hangs (not a speed target): a run still going after this fails its test.
pub const DEADLINE: Duration = Duration::from_secs(10);

/// What a finished run left.
pub struct Run {
    /// Exit status; `None` when a signal ended it.
    pub status: Option<i32>,
    pub stdout: String,
    pub stderr: String,
}

/// Runs `ooksift ARGS` with `stdin` fed from a thread (or closed), waiting at most `deadline`;
/// a hang kills the child and panics.
pub fn run_with(args: &[&str], stdin: Option<Vec<u8>>, deadline: Duration) -> Run {
    let mut child = Command::new(BIN)
        .args(args)
        .stdin(if stdin.is_some() {
            Stdio::piped()
        } else {
            Stdio::null()
        })
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn ooksift");
    let feeder = stdin.map(|bytes| {
        let mut pipe = child.stdin.take().expect("stdin");
        std::thread::spawn(move || {
            // The child may stop reading early (an error); a broken pipe is then expected.
            let _ = pipe.write_all(&bytes);
        })
    });
    let mut out = child.stdout.take().expect("stdout");
    let mut err = child.stderr.take().expect("stderr");
    let t_out = std::thread::spawn(move || {
        let mut s = Vec::new();
        let _ = out.read_to_end(&mut s);
        s
    });
    let t_err = std::thread::spawn(move || {
        let mut s = Vec::new();
        let _ = err.read_to_end(&mut s);
        s
    });
    let start = Instant::now();
    let status = loop {
        if let Some(st) = child.try_wait().expect("wait") {
            break st;
        }
        if start.elapsed() > deadline {
            let _ = child.kill();
            let _ = child.wait();
            panic!("ooksift {args:?} still running after {deadline:?}");
        }
        std::thread::sleep(Duration::from_millis(5));
    };
    if let Some(f) = feeder {
        let _ = f.join();
    }
    Run {
        status: status.code(),
        stdout: String::from_utf8_lossy(&t_out.join().expect("stdout reader")).into_owned(),
        stderr: String::from_utf8_lossy(&t_err.join().expect("stderr reader")).into_owned(),
    }
}

/// [`run_with`] without input and with the default deadline.
pub fn run(args: &[&str]) -> Run {
    run_with(args, None, DEADLINE)
}

/// True when stderr shows a panic.
pub fn panicked(stderr: &str) -> bool {
    stderr.contains("panicked") || stderr.contains("RUST_BACKTRACE")
}
