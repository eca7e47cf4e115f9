//! Benchmark: time to plot a capture against time to decode it (issue 7: plotting a
//! 10-minute capture takes at most 2× the decode).
//!
//! ```text
//! cargo run --release --example plot_vs_decode -- CAPTURE [--rate HZ] [--runs N]
//! cargo run --release --example plot_vs_decode -- --synth-minutes 10 [--rate HZ] [--runs N]
//! ```
//!
//! `--synth-minutes M` first writes an M-minute noiseless cu8 capture (default 1 MS/s) of the
//! Harrowgate Lane "gate" and "chime" buttons, one press every 6 s, in a temporary folder.
//! Each run decodes the capture (`decode_path`) and plots it (`collect_path` + `render_svg`);
//! the best of `--runs` (default 3) is reported for each, as wall time and as the process's
//! CPU time over the run (from /proc/self/stat where available), since a shared machine
//! stretches wall times.

use ooksift::decode::{decode_path, DecodeOptions};
use ooksift::plot::{collect_path, render_svg, PlotOptions};
use ooksift::source::OpenOptions;
use ooksift::synth::{write_capture, PressSpec, SynthSpec};
use std::time::Instant;

/// User + system CPU seconds of this process so far (Linux), if readable.
fn cpu_s() -> Option<f64> {
    let stat = std::fs::read_to_string("/proc/self/stat").ok()?;
    let rest = stat.rsplit_once(')')?.1;
    let f: Vec<&str> = rest.split_whitespace().collect();
    // Fields 14 and 15 of stat (utime, stime) are 12 and 13 after the command name.
    let ticks: f64 = f.get(11)?.parse::<f64>().ok()? + f.get(12)?.parse::<f64>().ok()?;
    Some(ticks / 100.0) // USER_HZ is 100 on Linux (common practice)
}

fn best<F: FnMut() -> Result<(), Box<dyn std::error::Error>>>(
    runs: usize,
    mut f: F,
) -> Result<(f64, Option<f64>), Box<dyn std::error::Error>> {
    let mut wall = f64::INFINITY;
    let mut cpu: Option<f64> = None;
    for _ in 0..runs.max(1) {
        let c0 = cpu_s();
        let t0 = Instant::now();
        f()?;
        wall = wall.min(t0.elapsed().as_secs_f64());
        if let (Some(a), Some(b)) = (c0, cpu_s()) {
            cpu = Some(cpu.map_or(b - a, |c: f64| c.min(b - a)));
        }
    }
    Ok((wall, cpu))
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let value = |name: &str| {
        args.iter()
            .position(|a| a == name)
            .and_then(|i| args.get(i + 1))
            .cloned()
    };
    let runs: usize = value("--runs").map_or(Ok(3), |v| v.parse())?;
    let mut rate: Option<f64> = value("--rate").map(|v| v.parse()).transpose()?;
    let synth_dir;
    let path = match value("--synth-minutes") {
        Some(m) => {
            let minutes: f64 = m.parse()?;
            let hz = *rate.get_or_insert(1_000_000.0);
            let dir = tempfile_dir()?;
            let p = dir.join("harrowgate-long.cu8");
            let mut spec = SynthSpec {
                format: "cu8".into(),
                rate_hz: hz,
                ..SynthSpec::default()
            };
            spec.channel.snr_db = None;
            let presses = (minutes * 10.0).floor().max(1.0) as usize;
            for i in 0..presses {
                let mut p = if i % 2 == 0 {
                    PressSpec::new("pwm", "0xcf2b12")
                } else {
                    let mut c = PressSpec::new("ppm", "0x5a3c");
                    c.unit_us = 500.0;
                    c
                };
                p.repeats = 4;
                p.gap_before_ms = Some(5900.0);
                spec.presses.push(p);
            }
            eprintln!("writing {} ({} presses)...", p.display(), presses);
            write_capture(&spec, &p, true)?;
            synth_dir = Some(dir);
            p.display().to_string()
        }
        None => {
            synth_dir = None;
            args.iter()
                .find(|a| !a.starts_with("--") && value_is_not_flag_arg(&args, a))
                .cloned()
                .ok_or("usage: plot_vs_decode CAPTURE [--rate HZ] [--runs N] | --synth-minutes M")?
        }
    };
    let open = OpenOptions {
        rate_hz: rate,
        ..OpenOptions::default()
    };
    let dopts = DecodeOptions {
        open,
        ..DecodeOptions::default()
    };
    let popts = PlotOptions {
        decode: dopts.clone(),
        ..PlotOptions::default()
    };
    let mut codes = 0;
    let (dw, dc) = best(runs, || {
        codes = decode_path(&path, &dopts)?.codes.len();
        Ok(())
    })?;
    let mut bytes = 0;
    let (pw, pc) = best(runs, || {
        bytes = render_svg(&collect_path(&path, &popts)?).len();
        Ok(())
    })?;
    println!("capture  {path}");
    println!(
        "decode   {dw:8.3} s wall  {} CPU  ({codes} code(s))",
        fmt(dc)
    );
    println!(
        "plot     {pw:8.3} s wall  {} CPU  ({bytes} bytes of SVG)",
        fmt(pc)
    );
    println!(
        "ratio    {:8.2} wall      {}",
        pw / dw,
        match (pc, dc) {
            (Some(p), Some(d)) if d > 0.0 => format!("{:.2} CPU", p / d),
            _ => "-".into(),
        }
    );
    if let Some(d) = synth_dir {
        std::fs::remove_dir_all(d)?;
    }
    Ok(())
}

fn fmt(x: Option<f64>) -> String {
    x.map_or_else(|| "    -   ".into(), |v| format!("{v:8.3} s"))
}

/// True unless `a` is the value of a `--flag VALUE` pair.
fn value_is_not_flag_arg(args: &[String], a: &String) -> bool {
    match args.iter().position(|x| x == a) {
        Some(0) => true,
        Some(i) => !matches!(
            args[i - 1].as_str(),
            "--rate" | "--runs" | "--synth-minutes"
        ),
        None => true,
    }
}

fn tempfile_dir() -> std::io::Result<std::path::PathBuf> {
    let d = std::env::temp_dir().join(format!("ooksift-plot-bench-{}", std::process::id()));
    std::fs::create_dir_all(&d)?;
    Ok(d)
}
