//! Command-line definitions and dispatch.

use clap::{Args, Parser, Subcommand};
use ooksift::decode::{decode_path, DecodeOptions};
use ooksift::report::{render_text, DecodeReport};
use ooksift::source::OpenOptions;
use ooksift::synth::{self, SynthSpec};
use std::io::Write;
use std::path::PathBuf;

/// Sift on-off-keyed bursts out of 433 MHz captures: codes, timing, comparison, airtime.
#[derive(Parser, Debug)]
#[command(name = "ooksift", version, about, long_about = None)]
pub struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Decode the codes in a capture: bits, line code, unit, framing, repeats, airtime.
    Decode(DecodeArgs),
    /// Write a synthetic capture and its truth file from codes and a channel model.
    Synth(SynthArgs),
    /// Draw a capture as SVG: envelope with marks, frames and bits; width histograms.
    Plot(PlotArgs),
}

/// How to read a capture (shared by every command that takes one).
#[derive(Args, Debug, Clone)]
pub struct InputArgs {
    /// Sample format: cu8, ci8, ci16_le, cf32_le, ru8, ri16_le, rf32_le (any SigMF
    /// datatype), wav or sigmf. Default: from the file name or content.
    #[arg(long, value_name = "F")]
    format: Option<String>,
    /// Sample rate in Hz (required for raw captures; overrides metadata).
    #[arg(long, value_name = "HZ")]
    rate: Option<f64>,
    /// Centre frequency in Hz (overrides metadata).
    #[arg(long, value_name = "HZ")]
    center_hz: Option<f64>,
}

impl InputArgs {
    fn open_options(&self) -> OpenOptions {
        OpenOptions {
            format: self.format.clone(),
            rate_hz: self.rate,
            center_hz: self.center_hz,
            ..OpenOptions::default()
        }
    }
}

#[derive(Args, Debug)]
struct DecodeArgs {
    /// Capture file, or - for standard input.
    #[arg(value_name = "CAPTURE", required = true)]
    captures: Vec<String>,
    #[command(flatten)]
    input: InputArgs,
    /// Print the JSON report (schemas/decode.schema.json) instead of text.
    #[arg(long)]
    json: bool,
    /// Silence in ms that always separates two presses (default 80).
    #[arg(long, value_name = "MS")]
    press_gap_ms: Option<f64>,
    /// Also write one CSV row per decoded frame to FILE (header in docs/interchange.md).
    #[arg(long, value_name = "FILE")]
    csv: Option<PathBuf>,
    /// Also write SigMF annotations (one per frame) in a .sigmf-meta beside each capture;
    /// the capture itself is never written (docs/interchange.md).
    #[arg(long)]
    sigmf_annotate: bool,
    /// Replace existing --csv and --sigmf-annotate outputs.
    #[arg(long)]
    force: bool,
}

#[derive(Args, Debug)]
struct SynthArgs {
    /// Output capture (for SigMF, the .sigmf-meta; the .sigmf-data goes beside it).
    #[arg(long, value_name = "FILE")]
    out: PathBuf,
    /// Start from a JSON specification (the `spec` object of a truth file).
    #[arg(long, value_name = "FILE")]
    spec: Option<PathBuf>,
    /// A press: LINECODE:BITS[,unit_us=U][,repeats=N][,gap_ms=MS][,offset_hz=HZ][,phase=RAD]
    /// [,clock_error=E][,zero=M/S][,one=M/S][,header=M/S][,closing=U][,gap_units=U].
    /// BITS are 0/1 characters or 0x-prefixed hex. Repeat for several presses.
    #[arg(long = "press", value_name = "SPEC")]
    presses: Vec<String>,
    /// Output format: a SigMF datatype (cu8, ci16_le, cf32_le, ru8, ...), wav (envelope),
    /// wav-iq (stereo I/Q) or sigmf. Default: from the output's extension.
    #[arg(long, value_name = "F")]
    format: Option<String>,
    /// Dataset format inside a SigMF output (default ci16_le).
    #[arg(long, value_name = "D")]
    datatype: Option<String>,
    /// WAV sample size: 8, 16, 24, 32, or 0 for 32-bit float.
    #[arg(long, value_name = "BITS")]
    wav_bits: Option<u16>,
    /// Sample rate in Hz.
    #[arg(long, value_name = "HZ")]
    rate: Option<f64>,
    /// Centre frequency in Hz recorded in SigMF metadata.
    #[arg(long, value_name = "HZ")]
    center_hz: Option<f64>,
    /// Eu/N0 in dB (A²·T_unit/N0).
    #[arg(long, value_name = "DB")]
    snr_db: Option<f64>,
    /// Write no noise at all.
    #[arg(long, conflicts_with = "snr_db")]
    noiseless: bool,
    /// Carrier or mark amplitude (full scale 1).
    #[arg(long, value_name = "A")]
    amplitude: Option<f64>,
    /// Edge ramp in µs.
    #[arg(long, value_name = "US")]
    edge_us: Option<f64>,
    /// Envelope outputs: lengthen every mark by this many µs.
    #[arg(long, value_name = "US")]
    stretch_us: Option<f64>,
    /// IQ outputs: DC offset as I,Q (full scale 1).
    #[arg(long, value_name = "I,Q", value_delimiter = ',', num_args = 2)]
    dc: Option<Vec<f64>>,
    /// Envelope outputs: write the envelope upside down.
    #[arg(long)]
    invert: bool,
    /// Silence before the first press, ms.
    #[arg(long, value_name = "MS")]
    lead_ms: Option<f64>,
    /// Silence after the last press, ms.
    #[arg(long, value_name = "MS")]
    tail_ms: Option<f64>,
    /// Seed of noise and phases.
    #[arg(long, value_name = "N")]
    seed: Option<u64>,
    /// Replace existing outputs.
    #[arg(long)]
    force: bool,
}

/// Prints to stdout; a closed pipe ends the program quietly.
fn emit(text: &str) {
    let mut out = std::io::stdout().lock();
    if out.write_all(text.as_bytes()).and_then(|_| out.flush()).is_err() {
        std::process::exit(0);
    }
}

fn fail(subject: &str, msg: impl std::fmt::Display) -> i32 {
    eprintln!("ooksift: {subject}: {msg}");
    1
}

fn decode(args: DecodeArgs) -> i32 {
    if let Some(code) = refuse_existing_outputs(&args) {
        return code;
    }
    let opts = DecodeOptions {
        open: args.input.open_options(),
        press_gap_ms: args.press_gap_ms,
        ..DecodeOptions::default()
    };
    let mut status = 0;
    let mut reports: Vec<DecodeReport> = Vec::new();
    for path in &args.captures {
        match decode_path(path, &opts) {
            Ok(r) => reports.push(r),
            Err(e) => status = fail(path, e),
        }
    }
    for r in &reports {
        if args.json {
            match serde_json::to_string_pretty(r) {
                Ok(s) => emit(&(s + "\n")),
                Err(e) => status = fail(&r.capture.path, e),
            }
        } else {
            emit(&render_text(r));
        }
    }
    write_interchange(&args, &reports).max(status)
}

fn synth_cmd(a: SynthArgs) -> i32 {
    let out_name = a.out.display().to_string();
    let mut spec = match &a.spec {
        Some(p) => match std::fs::read_to_string(p)
            .map_err(|e| e.to_string())
            .and_then(|t| serde_json::from_str::<SynthSpec>(&t).map_err(|e| e.to_string()))
        {
            Ok(s) => s,
            Err(e) => return fail(&p.display().to_string(), e),
        },
        None => SynthSpec::default(),
    };
    for p in &a.presses {
        match synth::parse_press(p) {
            Ok(ps) => spec.presses.push(ps),
            Err(e) => return fail(&out_name, e),
        }
    }
    if let Some(f) = &a.format {
        spec.format = f.clone();
    } else if a.spec.is_none() {
        let s = out_name.as_str();
        spec.format = if s.ends_with(".sigmf-meta") || s.ends_with(".sigmf-data") {
            "sigmf".into()
        } else if s.to_ascii_lowercase().ends_with(".wav") {
            "wav".into()
        } else {
            match a.out.extension().and_then(|e| e.to_str()) {
                Some(e) if e.parse::<ooksift::source::Datatype>().is_ok() => e.to_string(),
                _ => {
                    return fail(
                        &out_name,
                        "cannot tell the output format from the name; give --format",
                    )
                }
            }
        };
    }
    if a.datatype.is_some() {
        spec.datatype = a.datatype.clone();
    }
    if let Some(b) = a.wav_bits {
        spec.wav_bits = b;
    }
    if let Some(r) = a.rate {
        spec.rate_hz = r;
    }
    if a.center_hz.is_some() {
        spec.center_hz = a.center_hz;
    }
    if a.noiseless {
        spec.channel.snr_db = None;
    } else if a.snr_db.is_some() {
        spec.channel.snr_db = a.snr_db;
    }
    if let Some(v) = a.amplitude {
        spec.channel.amplitude = v;
    }
    if let Some(v) = a.edge_us {
        spec.channel.edge_us = v;
    }
    if let Some(v) = a.stretch_us {
        spec.channel.stretch_us = v;
    }
    if let Some(dc) = &a.dc {
        spec.channel.dc = [dc[0], dc[1]];
    }
    if a.invert {
        spec.channel.invert = true;
    }
    if let Some(v) = a.lead_ms {
        spec.lead_ms = v;
    }
    if let Some(v) = a.tail_ms {
        spec.tail_ms = v;
    }
    if let Some(v) = a.seed {
        spec.seed = v;
    }
    match synth::write_capture(&spec, &a.out, a.force) {
        Ok(truth) => {
            eprintln!(
                "ooksift: wrote {} ({} samples, {} code(s)) and {}",
                out_name,
                truth.capture.samples,
                truth.codes.len(),
                synth::truth_path(&a.out).display()
            );
            0
        }
        Err(e) => fail(&out_name, e),
    }
}

/// Parses the command line and runs it; returns the exit status.
pub fn run() -> i32 {
    let cli = Cli::parse();
    match cli.command {
        Command::Decode(a) => decode(a),
        Command::Synth(a) => synth_cmd(a),
        Command::Plot(a) => plot_cmd(a),
    }
}

#[derive(Args, Debug)]
struct PlotArgs {
    /// Capture file, or - for standard input.
    #[arg(value_name = "CAPTURE")]
    capture: String,
    #[command(flatten)]
    input: InputArgs,
    /// The SVG file to write.
    #[arg(long, value_name = "FILE.svg")]
    out: PathBuf,
    /// Start of the time window, seconds from the capture's start.
    #[arg(long, value_name = "S")]
    from: Option<f64>,
    /// End of the time window, seconds from the capture's start.
    #[arg(long, value_name = "S")]
    to: Option<f64>,
    /// Silence in ms that always separates two presses (default 80).
    #[arg(long, value_name = "MS")]
    press_gap_ms: Option<f64>,
    /// Replace an existing output.
    #[arg(long)]
    force: bool,
}

fn plot_cmd(a: PlotArgs) -> i32 {
    use ooksift::plot::{collect_path, write_svg, PlotOptions};
    let out_name = a.out.display().to_string();
    if !a.force && a.out.exists() {
        return fail(&out_name, "exists; add --force to replace it");
    }
    let opts = PlotOptions {
        decode: DecodeOptions {
            open: a.input.open_options(),
            press_gap_ms: a.press_gap_ms,
            ..DecodeOptions::default()
        },
        from_s: a.from,
        to_s: a.to,
        ..PlotOptions::default()
    };
    let data = match collect_path(&a.capture, &opts) {
        Ok(d) => d,
        Err(e) => return fail(&a.capture, e),
    };
    match write_svg(&data, &a.out, a.force) {
        Ok(()) => {
            eprintln!(
                "ooksift: wrote {} ({} code(s), {:.3}–{:.3} s)",
                out_name,
                data.report.codes.len(),
                data.from_s,
                data.to_s
            );
            0
        }
        Err(e) => fail(&out_name, e),
    }
}

/// Writes the `--csv` and `--sigmf-annotate` outputs of `decode`; returns the exit status.
fn write_interchange(args: &DecodeArgs, reports: &[DecodeReport]) -> i32 {
    use ooksift::interchange::{csv, sigmf};
    let mut status = 0;
    if let Some(path) = &args.csv {
        if let Err(e) = csv::write_csv_file(reports, path, args.force) {
            status = fail(&path.display().to_string(), e);
        }
    }
    if args.sigmf_annotate {
        for r in reports {
            match sigmf::write_annotations(r, args.force) {
                Ok(a) => eprintln!(
                    "ooksift: wrote {} ({} annotation(s){})",
                    a.meta.display(),
                    a.annotations,
                    a.data_link
                        .map(|l| format!(", dataset linked as {}", l.display()))
                        .unwrap_or_default()
                ),
                Err(e) => status = fail(&r.capture.path, e),
            }
        }
    }
    status
}

/// Refuses `--csv -` and an existing `--csv` file (unless `--force`) before any work is done.
fn refuse_existing_outputs(args: &DecodeArgs) -> Option<i32> {
    let path = args.csv.as_ref()?;
    let name = path.display().to_string();
    if path.as_os_str() == "-" {
        return Some(fail(
            &name,
            "--csv needs a file name; standard output holds the report",
        ));
    }
    (!args.force && path.exists()).then(|| fail(&name, "exists; add --force to replace it"))
}
