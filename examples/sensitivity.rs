//! Sensitivity benchmark (issue 3 §5): frame and press success against Eu/N0 for ooksift and
//! for a genie detector, on the same capture files.
//!
//! ```text
//! cargo run --release --example sensitivity -- [--trials 200] [--from 6] [--to 18] [--step 1]
//!     [--codes pwm,ppm] [--long-units 1000000] [--dir /tmp/ooksift-sensitivity]
//! ```
//!
//! Every trial is one press of 4 frames written by `ooksift::synth::write_capture` as a 2.048 MHz
//! `cu8` file with the carrier 100 kHz above centre, fresh random bits, carrier phase and noise.
//! The noise level is fixed (complex σ = 0.25 FS per sample, 8-bit quantisation far below it)
//! and the carrier amplitude is set from Eu/N0 = A²·T_unit/N0 (σ² = N0·fs), as a receiver with
//! fixed gain sees a weaker or stronger button.
//!
//! * **ooksift**: `decode_path` with default options (survey, one channel per carrier).
//!   *Frame success* = transmitted frames whose own marks, as reported on the timeline of any
//!   reported code, slice to exactly the transmitted bits (PWM: mark > 2 units is 1; PPM: space
//!   after the data mark > 2 units is 1), divided by frames sent. *Credited* = frames counted
//!   in the code whose bits equal the truth (after ooksift's vote across repeats). *Press
//!   success* = a code with exactly the transmitted bits and line code is reported.
//! * **genie**: knows the carrier frequency, the unit, the frame starts, the amplitude and the
//!   noise level (not the phase). It mixes the carrier to zero and sums the samples of every
//!   unit (noncoherent integrate-and-dump, r = |Σ z·e^{-jωt}|). PWM: a 0 (1T mark + 3T space)
//!   and a 1 (3T + 1T) differ in the bit's 2nd and 3rd units; the genie takes the
//!   likelihood-ratio test on those two units, Σ [ln I0(α·r_u) − α²/2] > 0 → 1, which is the
//!   optimum threshold on their combined statistic. PPM: after each data mark the genie looks
//!   at the unit two units later (a mark there = 0, a space = 1) with the optimum single-unit
//!   threshold I0(αβ) = exp(α²/2), and steps on by 2 or 4 units. Frame success = all data bits
//!   right (header/sync known). Press success = the same decisions with the per-unit
//!   log-likelihoods summed across the press's 4 frames.
//! * **check of the genie**: every unit of every frame is also decided alone with the optimum
//!   threshold and compared to the transmitted keying; the measured unit error rates are
//!   printed beside the textbook P(e|0) = exp(−β²/2), P(e|1) = 1 − Q1(α, β) (facts.md §4.1;
//!   L. W. Couch II, *Digital and Analog Communication Systems*, 7th ed., ch. 7; Proakis &
//!   Salehi, *Digital Communications*, 5th ed., noncoherent detection), α² = 2·Eu/N0 (= 4Ē_b/N0
//!   with Ē_b = Eu/2). A long in-memory run at three points checks the same detector against
//!   the facts.md §4.2 table values.
//!
//! The machine is shared, so run time varies; the success figures do not (seeded).
//! `SENSITIVITY_SHOW_WRONG=1` prints every wrong code beside the truth to standard error.
//! *Unit off* counts presses whose right code came with a unit more than 5 % off the truth.

use std::f64::consts::TAU;
use std::path::{Path, PathBuf};
use std::time::Instant;

use ooksift::decode::{decode_path, DecodeOptions, Decoder};
use ooksift::front::channel::ChannelPlan;
use ooksift::report::DecodeReport;
use ooksift::rng::Rng;
use ooksift::synth::{write_capture, ChannelSpec, PressSpec, SynthSpec};

const RATE_HZ: f64 = 2_048_000.0;
const OFFSET_HZ: f64 = 100_000.0;
const REPEATS: usize = 4;
/// Complex noise standard deviation per sample, full scale = 1.
const SIGMA_C: f64 = 0.25;
const LEAD_MS: f64 = 40.0;

// ---------------------------------------------------------------------------------------------
// Noncoherent OOK theory: I0, Marcum Q1, optimum threshold.

/// e^{-z}·I0(z) for z ≥ 0, from the power series Σ (z/2)^{2k}/(k!)², summed with the e^{-z}
/// factor carried in the first term (exact to double precision for the z < 700 used here).
fn i0e(z: f64) -> f64 {
    let q = z * z / 4.0;
    let mut term = (-z).exp();
    let mut sum = term;
    let mut k = 1.0;
    loop {
        term *= q / (k * k);
        sum += term;
        if term < sum * 1e-17 && k > z {
            break;
        }
        k += 1.0;
    }
    sum
}

/// ln I0(z).
fn ln_i0(z: f64) -> f64 {
    if z < 1e-8 {
        return z * z / 4.0;
    }
    i0e(z).ln() + z
}

/// 1 − Q1(a, b) = ∫₀^b x·exp(−(x²+a²)/2)·I0(a·x) dx, composite Simpson with 4000 panels.
fn one_minus_marcum_q1(a: f64, b: f64) -> f64 {
    let n = 4000;
    let h = b / n as f64;
    let f = |x: f64| {
        if x <= 0.0 {
            return 0.0;
        }
        // x·exp(−(x−a)²/2)·e^{−ax}I0(ax)
        x * (-(x - a) * (x - a) / 2.0).exp() * i0e(a * x)
    };
    let mut s = f(0.0) + f(b);
    for i in 1..n {
        let x = i as f64 * h;
        s += if i % 2 == 1 { 4.0 } else { 2.0 } * f(x);
    }
    s * h / 3.0
}

/// Optimum threshold β (equal priors): ln I0(αβ) = α²/2, by bisection on (0, α].
fn beta_opt(alpha: f64) -> f64 {
    let (mut lo, mut hi) = (0.0, alpha.max(1e-9) * 1.0 + 1.0);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if ln_i0(alpha * mid) > alpha * alpha / 2.0 {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    0.5 * (lo + hi)
}

/// (P(e|0), P(e|1)) of one noncoherent OOK decision with threshold β.
fn ook_errors(alpha: f64, beta: f64) -> (f64, f64) {
    ((-beta * beta / 2.0).exp(), one_minus_marcum_q1(alpha, beta))
}

// ---------------------------------------------------------------------------------------------
// The codes.

#[derive(Clone, Copy, PartialEq)]
enum Code {
    Pwm,
    Ppm,
}

impl Code {
    fn name(self) -> &'static str {
        match self {
            Code::Pwm => "pwm",
            Code::Ppm => "ppm",
        }
    }
    fn bits(self) -> usize {
        match self {
            Code::Pwm => 24,
            Code::Ppm => 32,
        }
    }
    fn unit_s(self) -> f64 {
        match self {
            Code::Pwm => 350e-6,
            Code::Ppm => 400e-6,
        }
    }
    /// Keying of one frame in units (true = mark), up to and including the closing mark, and
    /// the frame period in units (synth defaults: PWM 1:3 + 1T sync mark + 31T; PPM header
    /// 8T+4T, 0 = 1T+1T, 1 = 1T+3T, 1T stop mark, 40T gap).
    fn keying(self, bits: &[bool]) -> (Vec<bool>, usize) {
        let mut k = Vec::new();
        let push = |k: &mut Vec<bool>, m: usize, s: usize| {
            k.extend(std::iter::repeat_n(true, m));
            k.extend(std::iter::repeat_n(false, s));
        };
        match self {
            Code::Pwm => {
                for &b in bits {
                    if b {
                        push(&mut k, 3, 1)
                    } else {
                        push(&mut k, 1, 3)
                    }
                }
                push(&mut k, 1, 0);
                let len = k.len();
                (k, len + 31)
            }
            Code::Ppm => {
                push(&mut k, 8, 4);
                for &b in bits {
                    if b {
                        push(&mut k, 1, 3)
                    } else {
                        push(&mut k, 1, 1)
                    }
                }
                push(&mut k, 1, 0);
                let len = k.len();
                (k, len + 40)
            }
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Genie.

/// Normalised envelope r = |Σ z·e^{-jωt}| / √(N·σ²/2) of every unit of the press, per frame,
/// and α = A·N/√(N·σ²/2) per unit (N = samples whose time falls in the unit).
struct UnitStats {
    r: Vec<Vec<f64>>,
    alpha: Vec<Vec<f64>>,
}

fn genie_units(
    iq: &[u8],
    code: Code,
    frame_units: usize,
    period_units: usize,
    amp: f64,
) -> UnitStats {
    let t_unit = code.unit_s();
    let sigma2 = SIGMA_C * SIGMA_C;
    let w = TAU * OFFSET_HZ / RATE_HZ;
    let mut r = Vec::new();
    let mut alpha = Vec::new();
    for f in 0..REPEATS {
        let start = LEAD_MS * 1e-3 + (f * period_units) as f64 * t_unit;
        let mut rf = Vec::with_capacity(frame_units);
        let mut af = Vec::with_capacity(frame_units);
        for u in 0..frame_units {
            let t0 = start + u as f64 * t_unit;
            let n0 = (t0 * RATE_HZ).ceil() as usize;
            let n1 = ((t0 + t_unit) * RATE_HZ).ceil() as usize;
            let (mut re, mut im) = (0.0f64, 0.0f64);
            for n in n0..n1.min(iq.len() / 2) {
                let x = (iq[2 * n] as f64 - 127.5) / 127.5;
                let y = (iq[2 * n + 1] as f64 - 127.5) / 127.5;
                let (s, c) = (w * n as f64).sin_cos();
                // (x + jy)·(c − js)
                re += x * c + y * s;
                im += y * c - x * s;
            }
            let n = (n1 - n0) as f64;
            let scale = (n * sigma2 / 2.0).sqrt();
            rf.push((re * re + im * im).sqrt() / scale);
            af.push(amp * n / scale);
        }
        r.push(rf);
        alpha.push(af);
    }
    UnitStats { r, alpha }
}

/// Log-likelihood ratio mark : space of one unit.
fn llr(r: f64, alpha: f64) -> f64 {
    ln_i0(alpha * r) - alpha * alpha / 2.0
}

/// Decides the bits from the frames `frames` (their LLRs summed).
fn genie_decide(code: Code, st: &UnitStats, frames: &[usize], nbits: usize) -> Vec<bool> {
    let l = |u: usize| -> f64 {
        frames
            .iter()
            .map(|&f| llr(st.r[f][u], st.alpha[f][u]))
            .sum()
    };
    let mut out = Vec::with_capacity(nbits);
    match code {
        Code::Pwm => {
            for i in 0..nbits {
                out.push(l(4 * i + 1) + l(4 * i + 2) > 0.0);
            }
        }
        Code::Ppm => {
            let mut p = 12;
            for _ in 0..nbits {
                let zero = l(p + 2) > 0.0;
                out.push(!zero);
                p += if zero { 2 } else { 4 };
            }
        }
    }
    out
}

// ---------------------------------------------------------------------------------------------
// ooksift.

/// Slices one reported frame's marks (rise, fall, ... in µs) to bits.
fn slice_frame(code: Code, marks_us: &[f64], unit_us: f64, nbits: usize) -> Option<Vec<bool>> {
    let m: Vec<(f64, f64)> = marks_us
        .chunks(2)
        .filter(|c| c.len() == 2)
        .map(|c| (c[0], c[1]))
        .collect();
    match code {
        Code::Pwm => {
            if m.len() < nbits {
                return None;
            }
            Some(
                m[..nbits]
                    .iter()
                    .map(|&(r, f)| f - r > 2.0 * unit_us)
                    .collect(),
            )
        }
        Code::Ppm => {
            // Skip a header mark (wider than 4 units) if the frame opens with one.
            let s = usize::from(m.first().is_some_and(|&(r, f)| f - r > 4.0 * unit_us));
            if m.len() < s + nbits + 1 {
                return None;
            }
            Some(
                (0..nbits)
                    .map(|i| m[s + i + 1].0 - m[s + i].1 > 2.0 * unit_us)
                    .collect(),
            )
        }
    }
}

/// ooksift with the spectrum survey bypassed: one channel at the true carrier, planned by the
/// same rule `decode::channel_plans` applies to a surveyed carrier of small occupied bandwidth
/// (the narrowest it uses: a 100 µs mark with 5 kHz of drift; output ≥ 8 samples per 100 µs).
/// Separates the survey's detection limit from the channel decoder's.
fn decode_channel_given(
    path: &str,
    opts: &DecodeOptions,
) -> Result<DecodeReport, Box<dyn std::error::Error>> {
    let bw = ChannelPlan::bandwidth_for_mark(100e-6, 5e3)?;
    let out = (8.0 / 100e-6_f64).max(2.0 * bw).min(RATE_HZ);
    let plan = ChannelPlan::design(RATE_HZ, OFFSET_HZ, bw, out)?;
    let mut src = ooksift::source::open(path, &opts.open)?;
    let mut dec = Decoder::for_channel(
        src.info().clone(),
        opts,
        plan,
        num_complex::Complex32::new(0.0, 0.0),
    )?;
    while let Some(block) = src.next_block()? {
        dec.push(block);
    }
    Ok(dec.finish())
}

struct OokOutcome {
    frames_ok: usize,
    credited: usize,
    press_ok: bool,
    wrong_codes: usize,
    /// The right code reported with a unit more than [`UNIT_TOLERANCE`] off the truth.
    unit_off: bool,
}

/// Relative error of a right code's unit beyond which it counts as off.
const UNIT_TOLERANCE: f64 = 0.05;

fn score_ooksift(code: Code, rep: &DecodeReport, truth: &str) -> OokOutcome {
    let tbits: Vec<bool> = truth.chars().map(|c| c == '1').collect();
    let mut frames_ok = 0;
    let mut credited = 0;
    let mut press_ok = false;
    let mut wrong_codes = 0;
    let mut unit_off = false;
    for c in &rep.codes {
        if c.line_code == code.name() && c.bits == truth {
            press_ok = true;
            credited += c.frames;
            unit_off |= (c.unit_us / (code.unit_s() * 1e6) - 1.0).abs() > UNIT_TOLERANCE;
        } else {
            wrong_codes += 1;
            if std::env::var_os("SENSITIVITY_SHOW_WRONG").is_some() {
                eprintln!(
                    "wrong code {} {} (x{}) for {truth}",
                    c.line_code, c.bits, c.frames
                );
            }
        }
        for p in &c.timeline {
            for f in &p.frames {
                if slice_frame(code, &f.marks_us, c.unit_us, tbits.len()).as_deref()
                    == Some(&tbits[..])
                {
                    frames_ok += 1;
                }
            }
        }
    }
    OokOutcome {
        frames_ok: frames_ok.min(REPEATS),
        credited: credited.min(REPEATS),
        press_ok,
        wrong_codes,
        unit_off,
    }
}

// ---------------------------------------------------------------------------------------------

#[derive(Default, Clone)]
struct Point {
    snr_db: f64,
    ook_frames: usize,
    ook_credited: usize,
    ook_press: usize,
    ook_wrong_codes: usize,
    ook_unit_off: usize,
    genie_frames: usize,
    genie_press: usize,
    chan_frames: usize,
    chan_press: usize,
    // per-unit check: (errors, count) for spaces and marks
    unit_fa: (usize, usize),
    unit_miss: (usize, usize),
    alpha_sum: f64,
}

fn run_point(
    code: Code,
    snr_db: f64,
    trials: usize,
    dir: &Path,
    seed_base: u64,
) -> Result<Point, Box<dyn std::error::Error>> {
    let mut pt = Point {
        snr_db,
        ..Point::default()
    };
    let t_unit = code.unit_s();
    let snr = 10f64.powf(snr_db / 10.0);
    let amp = SIGMA_C * (snr / (t_unit * RATE_HZ)).sqrt();
    let path: PathBuf = dir.join(format!("trial-{}.cu8", code.name()));
    let path_s = path.display().to_string();
    let mut bit_rng = Rng::new(seed_base ^ 0xB175);
    let mut opts = DecodeOptions::default();
    opts.open.rate_hz = Some(RATE_HZ);
    for k in 0..trials {
        let bits = bit_rng.bits(code.bits());
        let press = PressSpec {
            unit_us: t_unit * 1e6,
            repeats: REPEATS,
            carrier_offset_hz: OFFSET_HZ,
            ..PressSpec::new(code.name(), &bits)
        };
        let spec = SynthSpec {
            format: "cu8".into(),
            rate_hz: RATE_HZ,
            seed: seed_base.wrapping_mul(1_000_003).wrapping_add(k as u64),
            lead_ms: LEAD_MS,
            tail_ms: 40.0,
            channel: ChannelSpec {
                snr_db: Some(snr_db),
                amplitude: amp,
                ..ChannelSpec::default()
            },
            presses: vec![press],
            ..SynthSpec::default()
        };
        let truth = write_capture(&spec, &path, true)?;
        let first = truth.codes.first().ok_or("truth without code")?;
        if (first.first_start_s - LEAD_MS * 1e-3).abs() > 1e-9 {
            return Err(format!(
                "first frame at {} s, expected {} s",
                first.first_start_s,
                LEAD_MS * 1e-3
            )
            .into());
        }
        // ooksift
        let rep = decode_path(&path_s, &opts)?;
        let o = score_ooksift(code, &rep, &bits);
        let rep_c = decode_channel_given(&path_s, &opts)?;
        let oc = score_ooksift(code, &rep_c, &bits);
        pt.chan_frames += oc.frames_ok;
        pt.chan_press += usize::from(oc.press_ok);
        pt.ook_frames += o.frames_ok;
        pt.ook_credited += o.credited;
        pt.ook_press += usize::from(o.press_ok);
        pt.ook_wrong_codes += o.wrong_codes;
        pt.ook_unit_off += usize::from(o.unit_off);
        // genie, on the same bytes
        let iq = std::fs::read(&path)?;
        let tb: Vec<bool> = bits.chars().map(|c| c == '1').collect();
        let (keying, period) = code.keying(&tb);
        if let Some(p) = first.frame_period_ms {
            if (p - period as f64 * t_unit * 1e3).abs() > 1e-3 {
                return Err(format!(
                    "frame period {p} ms, genie expects {} ms",
                    period as f64 * t_unit * 1e3
                )
                .into());
            }
        }
        // PPM decisions that go wrong can look past the true keying: integrate the longest
        // frame the bit count allows.
        let span = match code {
            Code::Pwm => keying.len(),
            Code::Ppm => keying.len().max(12 + 4 * tb.len() + 3),
        };
        let st = genie_units(&iq, code, span, period, amp);
        // β_opt depends only on α, which takes two values (N or N+1 samples per unit).
        let mut betas: Vec<(f64, f64)> = Vec::new();
        let mut beta_of = |a: f64| match betas.iter().find(|b| b.0 == a) {
            Some(b) => b.1,
            None => {
                let b = beta_opt(a);
                betas.push((a, b));
                b
            }
        };
        for f in 0..REPEATS {
            if genie_decide(code, &st, &[f], tb.len()) == tb {
                pt.genie_frames += 1;
            }
            for (u, &on) in keying.iter().enumerate() {
                let a = st.alpha[f][u];
                let decided = st.r[f][u] > beta_of(a);
                pt.alpha_sum += a;
                if on {
                    pt.unit_miss.1 += 1;
                    pt.unit_miss.0 += usize::from(!decided);
                } else {
                    pt.unit_fa.1 += 1;
                    pt.unit_fa.0 += usize::from(decided);
                }
            }
        }
        let all: Vec<usize> = (0..REPEATS).collect();
        if genie_decide(code, &st, &all, tb.len()) == tb {
            pt.genie_press += 1;
        }
    }
    Ok(pt)
}

/// Eu/N0 (dB) at which `frac` first crosses 0.9, interpolated linearly between sweep points.
fn at_90(points: &[Point], frac: impl Fn(&Point) -> f64) -> Option<f64> {
    for w in points.windows(2) {
        let (a, b) = (frac(&w[0]), frac(&w[1]));
        if a < 0.9 && b >= 0.9 {
            return Some(w[0].snr_db + (0.9 - a) / (b - a) * (w[1].snr_db - w[0].snr_db));
        }
    }
    points
        .first()
        .filter(|p| frac(p) >= 0.9)
        .map(|_| f64::NEG_INFINITY)
}

/// Long in-memory run of the genie's single-unit decision against the textbook.
fn long_check(units: usize, n_per_unit: usize) {
    println!("\n## Genie unit decision vs textbook noncoherent OOK (in-memory, {units} units per point, {n_per_unit} samples per unit)");
    println!("source: facts.md §4.1/§4.2 (P_b = ½[exp(−β²/2) + 1 − Q1(α,β)], α² = 4Ē_b/N0; Couch 7th ed. ch. 7; Proakis & Salehi 5th ed.)");
    println!("| Ē_b/N0 | Eu/N0 | α | β_opt (ours / table) | P_b theory (ours / facts.md §4.2) | ½e^(−Ē_b/2N0) | measured P_b | errors |");
    println!("|---|---|---|---|---|---|---|---|");
    let table = [
        (8.0, 2.9618, 1.3325e-2),
        (10.0, 3.5527, 1.9128e-3),
        (12.0, 4.3182, 9.2840e-5),
    ];
    let mut rng = Rng::new(0x005E_ED0F_600D);
    let w = TAU * OFFSET_HZ / RATE_HZ;
    for &(eb_db, beta_tab, pb_tab) in &table {
        let eb = 10f64.powf(eb_db / 10.0);
        let eu = 2.0 * eb;
        let n = n_per_unit as f64;
        // Eu/N0 = A²·N/σ² (T = N/fs, N0 = σ²/fs).
        let amp = SIGMA_C * (eu / n).sqrt();
        let alpha = (2.0 * eu).sqrt();
        let beta = beta_opt(alpha);
        let (p0, p1) = ook_errors(alpha, beta);
        let pb = 0.5 * (p0 + p1);
        let sigma = SIGMA_C / std::f64::consts::SQRT_2;
        let scale = (n * SIGMA_C * SIGMA_C / 2.0).sqrt();
        let mut errors = 0usize;
        let mut idx = 0u64;
        for k in 0..units {
            let on = k % 2 == 0;
            let ph = rng.uniform() * TAU;
            let (mut re, mut im) = (0.0, 0.0);
            for _ in 0..n_per_unit {
                let (mut x, mut y) = (sigma * rng.gauss(), sigma * rng.gauss());
                let (s, c) = (w * idx as f64).sin_cos();
                if on {
                    x += amp * (w * idx as f64 + ph).cos();
                    y += amp * (w * idx as f64 + ph).sin();
                }
                re += x * c + y * s;
                im += y * c - x * s;
                idx += 1;
            }
            let r = (re * re + im * im).sqrt() / scale;
            if (r > beta) != on {
                errors += 1;
            }
        }
        let measured = errors as f64 / units as f64;
        println!(
            "| {eb_db} dB | {:.2} dB | {alpha:.4} | {beta:.4} / {beta_tab} | {pb:.4e} / {pb_tab:.4e} | {:.4e} | {measured:.4e} | {errors} |",
            10.0 * eu.log10(),
            0.5 * (-eb / 2.0).exp(),
        );
    }
}

fn arg<T: std::str::FromStr>(args: &[String], name: &str, default: T) -> T {
    args.iter()
        .position(|a| a == name)
        .and_then(|i| args.get(i + 1))
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let trials: usize = arg(&args, "--trials", 200);
    let from: f64 = arg(&args, "--from", 6.0);
    let to: f64 = arg(&args, "--to", 18.0);
    let step: f64 = arg(&args, "--step", 1.0);
    let codes: String = arg(&args, "--codes", "pwm,ppm".to_string());
    let long_units: usize = arg(&args, "--long-units", 1_000_000);
    let long_n: usize = arg(&args, "--long-samples-per-unit", 64);
    let dir: String = arg(&args, "--dir", "/tmp/ooksift-sensitivity".to_string());
    std::fs::create_dir_all(&dir)?;
    let dir = Path::new(&dir);

    // Self-check of the theory code against facts.md §4.2 (10 dB row: α = 6.3246,
    // β_opt = 3.5527, P_b = 1.9128e-3; at β = α/2: 3.6351e-3).
    let a10 = 40f64.sqrt();
    let b10 = beta_opt(a10);
    let (p0, p1) = ook_errors(a10, b10);
    let (q0, q1) = ook_errors(a10, a10 / 2.0);
    println!(
        "theory self-check (facts.md §4.2, Ē_b/N0 = 10 dB): β_opt {b10:.4} (table 3.5527), P_b {:.4e} (table 1.9128e-3), at β=α/2 {:.4e} (table 3.6351e-3)",
        0.5 * (p0 + p1),
        0.5 * (q0 + q1)
    );

    let started = Instant::now();
    let mut gaps = Vec::new();
    for name in codes.split(',') {
        let code = match name {
            "pwm" => Code::Pwm,
            "ppm" => Code::Ppm,
            other => return Err(format!("unknown code {other}").into()),
        };
        println!(
            "\n## {} {}-bit, unit {} µs, {} frames per press, {} trials per point, 2.048 MHz cu8, carrier +100 kHz",
            code.name().to_uppercase(),
            code.bits(),
            code.unit_s() * 1e6,
            REPEATS,
            trials
        );
        println!("| Eu/N0 dB | ooksift frame | ooksift credited | ooksift press | wrong codes | unit off > 5 % | channel-given frame | channel-given press | genie frame | genie press | unit P(e|0) meas / theory | unit P(e|1) meas / theory |");
        println!("|---|---|---|---|---|---|---|---|---|---|---|---|");
        let mut points = Vec::new();
        let mut snr = from;
        let mut pi = 0u64;
        while snr <= to + 1e-9 {
            let t = Instant::now();
            // Seeds depend on the code and the point's index from --from (PWM 1, PPM 2), not on
            // the order of --codes, so a run of one code repeats its rows of a run of both.
            let ci: u64 = match code {
                Code::Pwm => 1,
                Code::Ppm => 2,
            };
            let pt = run_point(code, snr, trials, dir, ci << 32 | pi)?;
            let fr = (trials * REPEATS) as f64;
            // Theory at the mean α of the units measured.
            let n_units = pt.unit_fa.1 + pt.unit_miss.1;
            let alpha = pt.alpha_sum / n_units as f64;
            let (p0, p1) = ook_errors(alpha, beta_opt(alpha));
            println!(
                "| {snr:.1} | {:.3} | {:.3} | {:.3} | {} | {} | {:.3} | {:.3} | {:.3} | {:.3} | {:.2e} / {:.2e} | {:.2e} / {:.2e} |",
                pt.ook_frames as f64 / fr,
                pt.ook_credited as f64 / fr,
                pt.ook_press as f64 / trials as f64,
                pt.ook_wrong_codes,
                pt.ook_unit_off,
                pt.chan_frames as f64 / fr,
                pt.chan_press as f64 / trials as f64,
                pt.genie_frames as f64 / fr,
                pt.genie_press as f64 / trials as f64,
                pt.unit_fa.0 as f64 / pt.unit_fa.1 as f64,
                p0,
                pt.unit_miss.0 as f64 / pt.unit_miss.1 as f64,
                p1
            );
            eprintln!(
                "  {} {snr:.1} dB done in {:.1} s",
                code.name(),
                t.elapsed().as_secs_f64()
            );
            points.push(pt);
            snr += step;
            pi += 1;
        }
        let fr = (trials * REPEATS) as f64;
        let o = at_90(&points, |p| p.ook_frames as f64 / fr);
        let g = at_90(&points, |p| p.genie_frames as f64 / fr);
        let op = at_90(&points, |p| p.ook_press as f64 / trials as f64);
        let gp = at_90(&points, |p| p.genie_press as f64 / trials as f64);
        let cf = at_90(&points, |p| p.chan_frames as f64 / fr);
        let cp = at_90(&points, |p| p.chan_press as f64 / trials as f64);
        let fmt = |x: Option<f64>| x.map_or("not reached".to_string(), |v| format!("{v:.2} dB"));
        let gap = match (o, g) {
            (Some(a), Some(b)) if a.is_finite() && b.is_finite() => format!("{:.2} dB", a - b),
            _ => "n/a (90 % not bracketed)".into(),
        };
        let gap_p = match (op, gp) {
            (Some(a), Some(b)) if a.is_finite() && b.is_finite() => format!("{:.2} dB", a - b),
            _ => "n/a (90 % not bracketed)".into(),
        };
        println!(
            "\n90 % frame success: ooksift {}, genie {} → gap {gap}; 90 % press success: ooksift {}, genie {} → gap {gap_p}",
            fmt(o),
            fmt(g),
            fmt(op),
            fmt(gp)
        );
        let gap_c = match (cf, g) {
            (Some(a), Some(b)) if a.is_finite() && b.is_finite() => format!("{:.2} dB", a - b),
            _ => "n/a (90 % not bracketed)".into(),
        };
        println!(
            "channel given (survey bypassed): 90 % frame success {} → gap to genie {gap_c}; 90 % press success {}",
            fmt(cf),
            fmt(cp)
        );
        gaps.push((code.name(), gap, gap_p, gap_c));
    }
    if long_units > 0 {
        long_check(long_units, long_n);
    }
    println!("\nsummary (code, gap ooksift − genie at 90 % frame success, same at 90 % press success, channel-given frame gap): {gaps:?}; total run time {:.0} s", started.elapsed().as_secs_f64());
    Ok(())
}
