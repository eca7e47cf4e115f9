//! Command-line definitions and dispatch.

use clap::{Args, Parser, Subcommand};
use ooksift::budget::{EnergyProfile, Rules};
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
    /// Airtime, duty-cycle rules and the energy budget of each code of a capture or report.
    Budget(BudgetArgs),
    /// Codes of several captures or saved reports side by side: field map, fixed or rolling,
    /// distances, checksum candidates.
    Compare(CompareArgs),
    /// Carriers in an IQ capture: offset, frequency, peak and average level, bandwidth.
    Spectrum(SpectrumArgs),
    /// Print shell completions for bash, zsh, fish, elvish or powershell.
    Completions {
        /// The shell.
        shell: clap_complete::Shell,
    },
    /// Print the manual page (roff), generated from these definitions.
    Manual,
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
    #[arg(long, value_name = "HZ", allow_negative_numbers = true)]
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
    /// Capture files or folders of captures (decoded in parallel), or - for standard input.
    #[arg(value_name = "CAPTURE", required = true)]
    captures: Vec<String>,
    #[command(flatten)]
    input: InputArgs,
    /// Print the JSON report (schemas/decode.schema.json) instead of text.
    #[arg(long)]
    json: bool,
    /// Print one compact JSON report per capture per line (for scripts and batch jobs).
    #[arg(long, conflicts_with = "json")]
    jsonl: bool,
    /// No summary line on stderr after several captures, and no progress bar.
    #[arg(long)]
    quiet: bool,
    /// Captures decoded at once (default: one per core).
    #[arg(long, value_name = "N")]
    jobs: Option<usize>,
    /// Silence in ms that always separates two presses (default 80).
    #[arg(long, value_name = "MS")]
    press_gap_ms: Option<f64>,
    /// Read every burst with this line code: pwm, ppm, manchester, diff_manchester or nrz.
    #[arg(long, value_name = "CODE")]
    line_code: Option<String>,
    /// Manchester bit convention: ieee (IEEE 802.3, a rising mid-bit transition is 1) or
    /// thomas (the opposite).
    #[arg(long, value_name = "CONVENTION", default_value = "ieee")]
    manchester: String,
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
    #[arg(long, value_name = "I,Q", allow_hyphen_values = true)]
    dc: Option<String>,
    /// Envelope outputs: write the envelope upside down.
    #[arg(long)]
    invert: bool,
    /// Envelope outputs: AC coupling, a single-pole high-pass of this time constant (ms).
    #[arg(long, value_name = "MS")]
    ac_tau_ms: Option<f64>,
    /// Envelope outputs: clip samples to ±LEVEL (full scale 1).
    #[arg(long, value_name = "LEVEL")]
    clip: Option<f64>,
    /// Displace every edge by Gaussian jitter of this standard deviation (µs).
    #[arg(long, value_name = "US")]
    jitter_us: Option<f64>,
    /// Envelope outputs: a superregenerative receiver's idle chatter between presses.
    #[arg(long)]
    chatter: bool,
    /// IQ outputs: add a continuous carrier OFFSET_HZ,AMPLITUDE (repeatable).
    #[arg(long, value_name = "HZ,A", allow_hyphen_values = true)]
    tone: Vec<String>,
    /// Silence before the first press, ms.
    #[arg(long, value_name = "MS")]
    lead_ms: Option<f64>,
    /// Silence after the last press, ms.
    #[arg(long, value_name = "MS")]
    tail_ms: Option<f64>,
    /// Make the capture at least this long, ms (with no --press: pure noise).
    #[arg(long, value_name = "MS")]
    duration_ms: Option<f64>,
    /// Seed of noise and phases.
    #[arg(long, value_name = "N")]
    seed: Option<u64>,
    /// Replace existing outputs.
    #[arg(long)]
    force: bool,
}

#[derive(Args, Debug)]
struct BudgetArgs {
    /// A capture, or a report saved by `decode --json` (a .json file).
    #[arg(value_name = "CAPTURE|REPORT")]
    input: String,
    #[command(flatten)]
    input_args: InputArgs,
    /// Band rules to apply: us, eu, all or none.
    #[arg(long, value_name = "SET", default_value = "all")]
    rules: String,
    /// Energy profile (schemas/budget-profile.schema.json); options below override it.
    #[arg(long, value_name = "FILE")]
    profile: Option<PathBuf>,
    /// Supply: a fixed voltage.
    #[arg(long, value_name = "V")]
    supply_v: Option<f64>,
    /// Supply: a regulator, linear or switching (give --vout-v or --vref-v/--r1-ohm/--r2-ohm).
    #[arg(long, value_name = "KIND")]
    regulator: Option<String>,
    /// Regulator output voltage.
    #[arg(long, value_name = "V")]
    vout_v: Option<f64>,
    /// Regulator reference voltage (with the divider: Vout = Vref·(1 + R1/R2)).
    #[arg(long, value_name = "V")]
    vref_v: Option<f64>,
    /// Divider resistor from the output to the feedback pin.
    #[arg(long, value_name = "OHM")]
    r1_ohm: Option<f64>,
    /// Divider resistor from the feedback pin to ground.
    #[arg(long, value_name = "OHM")]
    r2_ohm: Option<f64>,
    /// Switching regulator efficiency (0–1].
    #[arg(long, value_name = "E")]
    efficiency: Option<f64>,
    /// Linear regulator dropout.
    #[arg(long, value_name = "V")]
    dropout_v: Option<f64>,
    /// Transmitter current with the carrier on.
    #[arg(long, value_name = "MA")]
    mark_ma: Option<f64>,
    /// Transmitter current with the carrier off, between marks.
    #[arg(long, value_name = "MA")]
    space_ma: Option<f64>,
    /// Oscillator start-up time before the first mark.
    #[arg(long, value_name = "MS")]
    startup_ms: Option<f64>,
    /// Current during start-up.
    #[arg(long, value_name = "MA")]
    startup_ma: Option<f64>,
    /// Harvester: storage capacitor.
    #[arg(long, value_name = "UF")]
    store_uf: Option<f64>,
    /// Harvester: capacitor voltage after the press (V1).
    #[arg(long, value_name = "V")]
    start_v: Option<f64>,
    /// Harvester: voltage at which the transmitter stops (V2).
    #[arg(long, value_name = "V")]
    cutoff_v: Option<f64>,
    /// Harvester: a measured pulse, its voltage across --load-ohm.
    #[arg(long, value_name = "V")]
    pulse_v: Option<f64>,
    /// Harvester: the pulse's duration.
    #[arg(long, value_name = "MS")]
    pulse_ms: Option<f64>,
    /// Harvester: the load the pulse was measured into.
    #[arg(long, value_name = "OHM")]
    load_ohm: Option<f64>,
    /// Print the JSON report (schemas/budget.schema.json) instead of text.
    #[arg(long)]
    json: bool,
    /// Also write one CSV row per press to FILE.
    #[arg(long, value_name = "FILE")]
    csv: Option<PathBuf>,
    /// Replace an existing CSV file.
    #[arg(long)]
    force: bool,
}

#[derive(Args, Debug)]
struct CompareArgs {
    /// Captures, or reports saved by `decode --json` (.json files).
    #[arg(value_name = "CAPTURE|REPORT", required = true)]
    inputs: Vec<String>,
    #[command(flatten)]
    input_args: InputArgs,
    /// Name the transmitter an input belongs to: NAME=INPUT (repeatable). Unlabelled
    /// inputs' codes are grouped into transmitters by Hamming distance.
    #[arg(long = "label", value_name = "NAME=INPUT")]
    labels: Vec<String>,
    /// Print the JSON report (schemas/compare.schema.json) instead of text.
    #[arg(long)]
    json: bool,
    /// Also write one CSV row per code to FILE.
    #[arg(long, value_name = "FILE")]
    csv: Option<PathBuf>,
    /// Replace an existing CSV file.
    #[arg(long)]
    force: bool,
}

fn compare_cmd(a: CompareArgs) -> i32 {
    use ooksift::compare::{CodeEntry, CompareOptions};
    let mut labels: Vec<(String, String)> = Vec::new();
    for l in &a.labels {
        match l.split_once('=') {
            Some((name, input)) if !name.is_empty() && a.inputs.iter().any(|i| i == input) => {
                labels.push((input.to_string(), name.to_string()))
            }
            Some((_, input)) if !a.inputs.iter().any(|i| i == input) => {
                return fail(input, "--label names an input that is not compared")
            }
            _ => return fail(l, "--label takes NAME=INPUT"),
        }
    }
    let mut entries = Vec::new();
    for input in &a.inputs {
        let report = match load_report(input, &a.input_args) {
            Ok(r) => r,
            Err(e) => return fail(input, e),
        };
        let label = labels
            .iter()
            .find(|(i, _)| i == input)
            .map(|(_, n)| n.clone());
        for c in &report.codes {
            entries.push(CodeEntry {
                source: input.clone(),
                label: label.clone(),
                key_id: c.key_id.clone(),
                line_code: c.line_code.clone(),
                bits: c.bits.clone(),
                presses: c.presses as u32,
                first_start_s: c.first_start_s,
            });
        }
    }
    let subject = a.inputs.join(", ");
    let report = match ooksift::compare::compare(&entries, &CompareOptions::default()) {
        Ok(r) => r,
        Err(e) => return fail(&subject, e),
    };
    if let Err(code) = write_csv_file(a.csv.as_deref(), a.force, |w| {
        ooksift::compare::write_csv(&report, w).map_err(|e| e.to_string())
    }) {
        return code;
    }
    if a.json {
        if let Err(code) = emit_json(&subject, &report) {
            return code;
        }
    } else {
        emit(&ooksift::compare::render_text(&report));
    }
    0
}

#[derive(Args, Debug)]
struct SpectrumArgs {
    /// An IQ capture (raw, stereo WAV or SigMF).
    #[arg(value_name = "CAPTURE")]
    capture: String,
    #[command(flatten)]
    input: InputArgs,
    /// Print JSON (schemas/spectrum.schema.json) instead of text.
    #[arg(long)]
    json: bool,
}

/// What `spectrum --json` prints.
#[derive(serde::Serialize)]
struct SpectrumReport {
    generator: String,
    capture: ooksift::report::CaptureSummary,
    bin_hz: f64,
    frames: u64,
    floor_db: f32,
    carriers: Vec<CarrierLine>,
    dc_spike: Option<ooksift::front::spectrum::DcSpike>,
    caution: String,
}

#[derive(serde::Serialize)]
struct CarrierLine {
    offset_hz: f64,
    frequency_hz: Option<f64>,
    peak_db: f32,
    average_db: f32,
    snr_db: f32,
    occupied_bw_hz: f64,
    activity: f32,
    kind: &'static str,
}

fn spectrum_cmd(a: SpectrumArgs) -> i32 {
    let mut src = match ooksift::source::open(&a.capture, &a.input.open_options()) {
        Ok(s) => s,
        Err(e) => return fail(&a.capture, e),
    };
    let info = src.info().clone();
    if !info.is_iq() {
        return fail(
            &a.capture,
            "an envelope capture has no spectrum of carriers; spectrum needs IQ samples",
        );
    }
    let survey = match ooksift::decode::survey_source(src.as_mut()) {
        Ok(s) => s,
        Err(e) => return fail(&a.capture, e),
    };
    let centre = info.center_frequency_hz;
    let report = SpectrumReport {
        generator: format!("ooksift {}", env!("CARGO_PKG_VERSION")),
        capture: ooksift::report::CaptureSummary::new(&info, survey.samples),
        bin_hz: survey.bin_hz,
        frames: survey.frames,
        floor_db: survey.floor_db,
        carriers: survey
            .carriers
            .iter()
            .map(|c| CarrierLine {
                offset_hz: ooksift::units::round_to(c.offset_hz, 1),
                frequency_hz: centre.map(|f| ooksift::units::round_to(f + c.offset_hz, 1)),
                peak_db: c.peak_db,
                average_db: c.avg_db,
                snr_db: c.snr_db,
                occupied_bw_hz: ooksift::units::round_to(c.occupied_bw_hz, 1),
                activity: c.activity,
                kind: if c.continuous { "continuous" } else { "bursty" },
            })
            .collect(),
        dc_spike: survey.dc_spike.clone(),
        caution: ooksift::report::CAUTION.to_string(),
    };
    if a.json {
        return emit_json(&a.capture, &report).err().unwrap_or(0);
    }
    let mut t = format!(
        "capture  {}\n         {} Hz, {} FFT frames of {:.0} Hz bins, floor {:.1} dB\n\n",
        info.path,
        info.rate.hz(),
        survey.frames,
        survey.bin_hz,
        survey.floor_db
    );
    if report.carriers.is_empty() {
        t.push_str("no carrier above the floor\n");
    } else {
        t.push_str(&format!(
            "{:>12} {:>16} {:>9} {:>9} {:>7} {:>10} {:>9}  {}\n",
            "offset kHz",
            "frequency MHz",
            "peak dB",
            "avg dB",
            "SNR dB",
            "bw kHz",
            "activity",
            "kind"
        ));
        for c in &report.carriers {
            t.push_str(&format!(
                "{:>+12.2} {:>16} {:>9.1} {:>9.1} {:>7.1} {:>10.2} {:>9.2}  {}\n",
                c.offset_hz / 1e3,
                c.frequency_hz
                    .map_or_else(|| "-".to_string(), |f| format!("{:.6}", f / 1e6)),
                c.peak_db,
                c.average_db,
                c.snr_db,
                c.occupied_bw_hz / 1e3,
                c.activity,
                c.kind
            ));
        }
    }
    if let Some(dc) = &report.dc_spike {
        t.push_str(&format!(
            "receiver DC offset at 0 Hz: {:.1} dB average (not a transmitter)\n",
            dc.avg_db
        ));
    }
    t.push_str(&format!("\n{}\n", ooksift::report::CAUTION));
    emit(&t);
    0
}

/// Reads a capture or a saved decode report into a report.
fn load_report(input: &str, args: &InputArgs) -> Result<DecodeReport, String> {
    if input.to_ascii_lowercase().ends_with(".json") {
        let text = std::fs::read_to_string(input).map_err(|e| format!("cannot read: {e}"))?;
        return serde_json::from_str(&text)
            .map_err(|e| format!("not a decode report saved by `ooksift decode --json`: {e}"));
    }
    let opts = DecodeOptions {
        open: args.open_options(),
        ..DecodeOptions::default()
    };
    decode_path(input, &opts).map_err(|e| e.to_string())
}

fn energy_profile(a: &BudgetArgs) -> Result<Option<EnergyProfile>, String> {
    use ooksift::budget::{Divider, HarvesterProfile, SupplyProfile, TransmitterProfile};
    let mut profile = match &a.profile {
        Some(p) => {
            let f = std::fs::File::open(p).map_err(|e| format!("{}: {e}", p.display()))?;
            Some(EnergyProfile::from_reader(f).map_err(|e| format!("{}: {e}", p.display()))?)
        }
        None => None,
    };
    let any_tx = a.supply_v.is_some()
        || a.regulator.is_some()
        || a.mark_ma.is_some()
        || a.space_ma.is_some()
        || a.startup_ms.is_some();
    let any_store = a.store_uf.is_some() || a.start_v.is_some() || a.cutoff_v.is_some();
    let any_pulse = a.pulse_v.is_some() || a.pulse_ms.is_some() || a.load_ohm.is_some();
    if profile.is_none() && !(any_tx || any_store || any_pulse) {
        return Ok(None);
    }
    let mut p = profile.take().unwrap_or_else(|| EnergyProfile {
        name: "command line".into(),
        note: None,
        transmitter: TransmitterProfile {
            supply: SupplyProfile::Fixed { voltage_v: 3.0 },
            mark_current_ma: f64::NAN,
            space_current_ma: 0.0,
            startup_ms: 0.0,
            startup_current_ma: 0.0,
        },
        harvester: None,
    });
    let tx = &mut p.transmitter;
    if let Some(v) = a.supply_v {
        tx.supply = SupplyProfile::Fixed { voltage_v: v };
    }
    if let Some(kind) = &a.regulator {
        let divider = match (a.vref_v, a.r1_ohm, a.r2_ohm) {
            (Some(vref_v), Some(r1_ohm), Some(r2_ohm)) => Some(Divider {
                vref_v,
                r1_ohm,
                r2_ohm,
            }),
            (None, None, None) => None,
            _ => return Err("--vref-v, --r1-ohm and --r2-ohm go together".into()),
        };
        tx.supply = match kind.as_str() {
            "linear" => SupplyProfile::Linear {
                output_v: a.vout_v,
                divider,
                dropout_v: a.dropout_v.unwrap_or(0.0),
            },
            "switching" => SupplyProfile::Switching {
                output_v: a.vout_v,
                divider,
                efficiency: a.efficiency.unwrap_or(0.85),
            },
            other => return Err(format!("--regulator {other}: use linear or switching")),
        };
    }
    if let Some(v) = a.mark_ma {
        tx.mark_current_ma = v;
    }
    if tx.mark_current_ma.is_nan() {
        return Err("the energy budget needs --mark-ma (or a --profile)".into());
    }
    if let Some(v) = a.space_ma {
        tx.space_current_ma = v;
    }
    if let Some(v) = a.startup_ms {
        tx.startup_ms = v;
    }
    if let Some(v) = a.startup_ma {
        tx.startup_current_ma = v;
    }
    if any_store {
        match (a.store_uf, a.start_v, a.cutoff_v) {
            (Some(capacitance_uf), Some(start_v), Some(cutoff_v)) => {
                p.harvester = Some(HarvesterProfile::Capacitor {
                    capacitance_uf,
                    start_v,
                    cutoff_v,
                })
            }
            _ => return Err("--store-uf, --start-v and --cutoff-v go together".into()),
        }
    }
    if any_pulse {
        match (a.pulse_v, a.pulse_ms, a.load_ohm) {
            (Some(voltage_v), Some(duration_ms), Some(load_ohm)) => {
                p.harvester = Some(HarvesterProfile::Pulse {
                    voltage_v,
                    duration_ms,
                    load_ohm,
                })
            }
            _ => return Err("--pulse-v, --pulse-ms and --load-ohm go together".into()),
        }
    }
    p.validate().map_err(|e| e.to_string())?;
    Ok(Some(p))
}

fn budget_cmd(a: BudgetArgs) -> i32 {
    let rules = match a.rules.as_str() {
        "us" => Rules {
            us: true,
            eu: false,
        },
        "eu" => Rules {
            us: false,
            eu: true,
        },
        "all" => Rules { us: true, eu: true },
        "none" => Rules {
            us: false,
            eu: false,
        },
        other => {
            return fail(
                &a.input,
                format!("--rules {other}: use us, eu, all or none"),
            )
        }
    };
    let profile = match energy_profile(&a) {
        Ok(p) => p,
        Err(e) => return fail(&a.input, e),
    };
    let report = match load_report(&a.input, &a.input_args) {
        Ok(r) => r,
        Err(e) => return fail(&a.input, e),
    };
    let timings = ooksift::budget::from_decode_report(&report);
    let b = match ooksift::budget::budget(&timings, &rules, profile.as_ref()) {
        Ok(b) => b,
        Err(e) => return fail(&a.input, e),
    };
    if let Err(code) = write_csv_file(a.csv.as_deref(), a.force, |w| {
        ooksift::budget::write_csv(&b, w).map_err(|e| e.to_string())
    }) {
        return code;
    }
    if a.json {
        if let Err(code) = emit_json(&a.input, &b) {
            return code;
        }
    } else {
        if report.codes.is_empty() {
            emit("no code found: nothing to budget\n");
        }
        emit(&ooksift::budget::render_text(&b));
    }
    0
}

/// Writes a CSV file (when asked for) atomically from a writer callback; on failure the error
/// line is printed and the exit status returned.
fn write_csv_file(
    path: Option<&std::path::Path>,
    force: bool,
    write: impl FnOnce(&mut Vec<u8>) -> Result<(), String>,
) -> Result<(), i32> {
    let Some(path) = path else { return Ok(()) };
    let name = path.display().to_string();
    let mut buf = Vec::new();
    write(&mut buf).map_err(|e| fail(&name, e))?;
    ooksift::output::write_atomic(path, &buf, force).map_err(|e| fail(&name, e))
}

/// A progress bar on stderr for one long capture: only when stderr is a terminal and not
/// `quiet`, and drawn only once the work has lasted two seconds. No colour is used anywhere,
/// so NO_COLOR and pipes need no special case.
fn progress_bar(quiet: bool) -> Option<(indicatif::ProgressBar, ooksift::decode::Progress)> {
    use std::io::IsTerminal;
    if quiet || !std::io::stderr().is_terminal() {
        return None;
    }
    let bar = indicatif::ProgressBar::hidden();
    bar.set_style(
        indicatif::ProgressStyle::with_template("{spinner} {percent:>3}% {wide_bar} {eta}")
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    );
    let start = std::time::Instant::now();
    let shown = std::sync::atomic::AtomicBool::new(false);
    let b = bar.clone();
    let f = move |done: u64, total: u64| {
        if total == 0 {
            return;
        }
        if !shown.load(std::sync::atomic::Ordering::Relaxed) {
            if start.elapsed() < std::time::Duration::from_secs(2) {
                return;
            }
            shown.store(true, std::sync::atomic::Ordering::Relaxed);
            b.set_length(total);
            b.set_position(done.min(total));
            b.set_draw_target(indicatif::ProgressDrawTarget::stderr());
        }
        b.set_length(total);
        b.set_position(done.min(total));
    };
    Some((bar, ooksift::decode::Progress(std::sync::Arc::new(f))))
}

/// Prints one pretty JSON document on stdout.
fn emit_json<T: serde::Serialize>(subject: &str, value: &T) -> Result<(), i32> {
    let s = serde_json::to_string_pretty(value).map_err(|e| fail(subject, e))?;
    emit(&(s + "\n"));
    Ok(())
}

/// Prints to stdout; a closed pipe ends the program quietly.
fn emit(text: &str) {
    let mut out = std::io::stdout().lock();
    if out
        .write_all(text.as_bytes())
        .and_then(|_| out.flush())
        .is_err()
    {
        std::process::exit(0);
    }
}

/// Like `eprintln!`, but a closed stderr is ignored instead of panicking.
macro_rules! note {
    ($($arg:tt)*) => {{
        let _ = writeln!(std::io::stderr(), $($arg)*);
    }};
}

fn fail(subject: &str, msg: impl std::fmt::Display) -> i32 {
    // Not eprintln!: it panics when stderr is a closed pipe (`2>&1 | head`).
    let _ = writeln!(std::io::stderr(), "ooksift: {subject}: {msg}");
    1
}

fn decode(args: DecodeArgs) -> i32 {
    let line_code = match args.line_code.as_deref().map(str::parse) {
        None => None,
        Some(Ok(lc)) => Some(lc),
        Some(Err(e)) => return fail("--line-code", e),
    };
    let manchester_thomas = match args.manchester.as_str() {
        "ieee" => false,
        "thomas" => true,
        other => return fail("--manchester", format!("'{other}': use ieee or thomas")),
    };
    if let Some(code) = refuse_existing_outputs(&args) {
        return code;
    }
    let progress = progress_bar(args.quiet || args.captures.len() > 1);
    let opts = DecodeOptions {
        open: args.input.open_options(),
        press_gap_ms: args.press_gap_ms,
        press: ooksift::frames::PressOptions {
            line_code,
            manchester_thomas,
        },
        progress: progress.as_ref().map(|(_, p)| p.clone()),
        ..DecodeOptions::default()
    };
    let inputs = match expand_inputs(&args.captures) {
        Ok(v) => v,
        Err((path, e)) => return fail(&path, e),
    };
    let mut status = 0;
    let mut reports: Vec<DecodeReport> = Vec::new();
    for (path, result) in inputs.iter().zip(decode_all(&inputs, &opts, args.jobs)) {
        match result {
            Ok(r) => reports.push(r),
            Err(e) => status = fail(path, e),
        }
    }
    if let Some((bar, _)) = &progress {
        bar.finish_and_clear();
    }
    for r in &reports {
        if args.jsonl {
            match serde_json::to_string(r) {
                Ok(s) => emit(&(s + "\n")),
                Err(e) => status = fail(&r.capture.path, e),
            }
        } else if args.json {
            if let Err(code) = emit_json(&r.capture.path, r) {
                status = code;
            }
        } else {
            emit(&render_text(r));
        }
    }
    if inputs.len() > 1 && !args.quiet {
        let codes: usize = reports.iter().map(|r| r.codes.len()).sum();
        note!(
            "ooksift: {} capture(s) decoded, {} code(s) found, {} failed",
            reports.len(),
            codes,
            inputs.len() - reports.len()
        );
    }
    write_interchange(&args, &reports).max(status)
}

/// Capture names in a folder (recursively, sorted): WAV, SigMF metadata, and raw files whose
/// extension is a datatype. Plain files and `-` pass through as given.
fn expand_inputs(inputs: &[String]) -> Result<Vec<String>, (String, String)> {
    fn is_capture(p: &std::path::Path) -> bool {
        let name = p.file_name().and_then(|n| n.to_str()).unwrap_or("");
        if name.starts_with('.') {
            return false;
        }
        let lower = name.to_ascii_lowercase();
        lower.ends_with(".wav")
            || lower.ends_with(".sigmf-meta")
            || p.extension()
                .and_then(|e| e.to_str())
                .is_some_and(|e| e.parse::<ooksift::source::Datatype>().is_ok())
    }
    fn walk(dir: &std::path::Path, out: &mut Vec<String>) -> std::io::Result<()> {
        let mut entries: Vec<_> = std::fs::read_dir(dir)?
            .filter_map(|e| e.ok().map(|e| e.path()))
            .collect();
        entries.sort();
        for p in entries {
            if p.is_dir() {
                walk(&p, out)?;
            } else if is_capture(&p) {
                out.push(p.display().to_string());
            }
        }
        Ok(())
    }
    let mut out = Vec::new();
    for i in inputs {
        let p = std::path::Path::new(i);
        if i != "-" && p.is_dir() {
            let before = out.len();
            walk(p, &mut out).map_err(|e| (i.clone(), format!("cannot list the folder: {e}")))?;
            if out.len() == before {
                return Err((i.clone(), "the folder holds no capture".into()));
            }
        } else {
            out.push(i.clone());
        }
    }
    Ok(out)
}

/// Decodes every input, several at a time on all cores; results come back in input order.
fn decode_all(
    inputs: &[String],
    opts: &DecodeOptions,
    jobs: Option<usize>,
) -> Vec<Result<DecodeReport, ooksift::decode::DecodeError>> {
    let workers = jobs
        .unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get()))
        .min(inputs.len())
        .max(1);
    if workers == 1 {
        return inputs.iter().map(|p| decode_path(p, opts)).collect();
    }
    let next = std::sync::atomic::AtomicUsize::new(0);
    let slots: Vec<std::sync::Mutex<Option<_>>> =
        inputs.iter().map(|_| std::sync::Mutex::new(None)).collect();
    std::thread::scope(|scope| {
        for _ in 0..workers {
            scope.spawn(|| loop {
                let i = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                let Some(path) = inputs.get(i) else { break };
                let r = decode_path(path, opts);
                if let Ok(mut slot) = slots[i].lock() {
                    *slot = Some(r);
                }
            });
        }
    });
    slots
        .into_iter()
        .map(|m| {
            m.into_inner().ok().flatten().unwrap_or_else(|| {
                Err(ooksift::decode::DecodeError::Front(
                    "a decoding thread failed".into(),
                ))
            })
        })
        .collect()
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
        let parsed = dc
            .split_once(',')
            .and_then(|(i, q)| Some([i.trim().parse().ok()?, q.trim().parse().ok()?]));
        match parsed {
            Some(pair) => spec.channel.dc = pair,
            None => return fail(&out_name, format!("--dc {dc}: expected I,Q")),
        }
    }
    if a.invert {
        spec.channel.invert = true;
    }
    if a.ac_tau_ms.is_some() {
        spec.channel.ac_tau_ms = a.ac_tau_ms;
    }
    if a.clip.is_some() {
        spec.channel.clip = a.clip;
    }
    if let Some(j) = a.jitter_us {
        spec.channel.jitter_us = j;
    }
    if a.chatter {
        spec.channel.chatter = true;
    }
    for t in &a.tone {
        let parsed = t
            .split_once(',')
            .and_then(|(f, v)| Some([f.trim().parse().ok()?, v.trim().parse().ok()?]));
        match parsed {
            Some(pair) => spec.channel.tones.push(pair),
            None => {
                return fail(
                    &out_name,
                    format!("--tone {t}: expected OFFSET_HZ,AMPLITUDE"),
                )
            }
        }
    }
    if let Some(v) = a.lead_ms {
        spec.lead_ms = v;
    }
    if let Some(v) = a.tail_ms {
        spec.tail_ms = v;
    }
    if let Some(v) = a.duration_ms {
        spec.min_duration_ms = v;
    }
    if let Some(v) = a.seed {
        spec.seed = v;
    }
    match synth::write_capture(&spec, &a.out, a.force) {
        Ok(truth) => {
            let _ = writeln!(
                std::io::stderr(),
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
        Command::Budget(a) => budget_cmd(a),
        Command::Compare(a) => compare_cmd(a),
        Command::Spectrum(a) => spectrum_cmd(a),
        Command::Completions { shell } => {
            let mut cmd = <Cli as clap::CommandFactory>::command();
            let mut buf = Vec::new();
            clap_complete::generate(shell, &mut cmd, "ooksift", &mut buf);
            emit(&String::from_utf8_lossy(&buf));
            0
        }
        Command::Manual => {
            let cmd = <Cli as clap::CommandFactory>::command();
            let mut buf = Vec::new();
            match clap_mangen::Man::new(cmd).render(&mut buf) {
                Ok(()) => {
                    emit(&String::from_utf8_lossy(&buf));
                    0
                }
                Err(e) => fail("manual", e),
            }
        }
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
    /// IQ files: show one carrier's channel instead of the whole band, and draw that channel's
    /// decode. HZ is an offset from the centre frequency (e.g. 25000 or -40e3); the nearest
    /// bursty carrier of the spectrum survey is taken when HZ lies inside its channel
    /// (at least ±5 kHz). `strongest` takes the carrier with the highest peak. Reads the file
    /// twice; not for standard input or envelope captures.
    #[arg(long, value_name = "HZ|strongest", allow_hyphen_values = true, value_parser = parse_carrier)]
    carrier: Option<ooksift::plot::ChannelChoice>,
    /// Silence in ms that always separates two presses (default 80).
    #[arg(long, value_name = "MS")]
    press_gap_ms: Option<f64>,
    /// Replace an existing output.
    #[arg(long)]
    force: bool,
}

/// `--carrier`: an offset in Hz, or `strongest`.
fn parse_carrier(s: &str) -> Result<ooksift::plot::ChannelChoice, String> {
    use ooksift::plot::ChannelChoice;
    if s.eq_ignore_ascii_case("strongest") {
        return Ok(ChannelChoice::Strongest);
    }
    match s.trim().parse::<f64>() {
        Ok(f) if f.is_finite() => Ok(ChannelChoice::Nearest(f)),
        _ => Err(format!(
            "'{s}' is neither an offset in Hz (e.g. 25000, -40e3) nor 'strongest'"
        )),
    }
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
        channel: a.carrier.unwrap_or_default(),
        ..PlotOptions::default()
    };
    let data = match collect_path(&a.capture, &opts) {
        Ok(d) => d,
        Err(e) => return fail(&a.capture, e),
    };
    match write_svg(&data, &a.out, a.force) {
        Ok(()) => {
            note!(
                "ooksift: wrote {} ({} code(s), {:.3}–{:.3} s, {})",
                out_name,
                data.report.codes.len(),
                data.from_s,
                data.to_s,
                ooksift::plot::view_source(&data)
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
                Ok(a) => note!(
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
