//! Throughput of the IQ front end: spectrum survey and one channel, on a seeded synthetic
//! capture held in memory (default 60 s at 2.048 MHz: a weak OOK transmitter in noise, with a
//! receiver DC offset).
//!
//! ```text
//! cargo run --release --example front_throughput [-- --seconds 60 --block 65536]
//! ```
//!
//! Prints samples per second and the multiple of real time for each stage. The same signal and
//! stages in numpy/scipy: `tests/reference/front_numpy.py` (run both on the same machine and
//! compare ratios; the machine is shared, so figures are rough).

use std::time::Instant;

use num_complex::Complex32;
use ooksift::front::channel::{ChannelPlan, Channelizer};
use ooksift::front::spectrum::{SpectrumSurvey, SurveyConfig};

const RATE_HZ: f64 = 2_048_000.0;
const OFFSET_HZ: f64 = -187_300.0;
const UNIT_S: f64 = 350e-6;
const AMP: f64 = 0.05;

/// xorshift64* (Vigna 2016; constants from memory); Box–Muller turns two uniforms into one
/// complex Gaussian sample.
struct Rng(u64);

impl Rng {
    fn next_f64(&mut self) -> f64 {
        let mut x = self.0;
        x ^= x >> 12;
        x ^= x << 25;
        x ^= x >> 27;
        self.0 = x;
        ((x.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 + 1.0) / (1u64 << 53) as f64
    }
}

/// Noise power 0.01 (−20 dBFS), DC offset, and every 2 s a press of 5 frames of a 24-bit PWM
/// code (unit 350 µs; 1 = 3 units mark + 1 space, 0 = 1 + 3), carrier amplitude 0.05
/// (per-sample SNR −6 dB over the full 2.048 MHz).
fn synthesise(seconds: f64) -> Vec<Complex32> {
    let n = (seconds * RATE_HZ) as usize;
    let unit = (UNIT_S * RATE_HZ) as usize;
    let code: u32 = 0b1011_0010_1110_0001_0110_1001;
    // Keying pattern of one frame, in units: 24 bits × 4 units, then a 30-unit gap.
    let mut frame = Vec::with_capacity(24 * 4 + 30);
    for b in (0..24).rev() {
        let marks = if code >> b & 1 == 1 { 3 } else { 1 };
        frame.extend((0..4).map(|u| u < marks));
    }
    frame.resize(frame.len() + 30, false);
    let press_len = 5 * frame.len() * unit;
    let press_period = (2.0 * RATE_HZ) as usize;
    let mut rng = Rng(0x9E37_79B9_7F4A_7C15);
    let mut out = Vec::with_capacity(n);
    let dc = Complex32::new(0.015, -0.01);
    let step = OFFSET_HZ / RATE_HZ;
    let sigma = (0.01f64 / 2.0).sqrt();
    for i in 0..n {
        let r = sigma * (-2.0 * rng.next_f64().ln()).sqrt();
        let th = 2.0 * std::f64::consts::PI * rng.next_f64();
        let mut v = Complex32::new((r * th.cos()) as f32, (r * th.sin()) as f32) + dc;
        let t = i % press_period;
        let start = press_period / 8;
        if t >= start && t < start + press_len && frame[((t - start) / unit) % frame.len()] {
            let a = 2.0 * std::f64::consts::PI * (step * i as f64).rem_euclid(1.0);
            v += Complex32::new((AMP * a.cos()) as f32, (AMP * a.sin()) as f32);
        }
        out.push(v);
    }
    out
}

fn arg(args: &[String], name: &str, default: f64) -> f64 {
    args.iter()
        .position(|a| a == name)
        .and_then(|i| args.get(i + 1))
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

/// CPU time of this thread in seconds (Linux `/proc/thread-self/schedstat`), if available. On a
/// shared machine it is steadier than wall time, which also counts time spent descheduled.
fn thread_cpu_s() -> Option<f64> {
    let text = std::fs::read_to_string("/proc/thread-self/schedstat").ok()?;
    let ns: f64 = text.split_whitespace().next()?.parse().ok()?;
    Some(ns / 1e9)
}

/// Wall and CPU stopwatch.
struct Watch {
    wall: Instant,
    cpu: Option<f64>,
}

impl Watch {
    fn start() -> Self {
        Watch {
            wall: Instant::now(),
            cpu: thread_cpu_s(),
        }
    }
    fn stop(&self) -> (f64, Option<f64>) {
        let wall = self.wall.elapsed().as_secs_f64();
        let cpu = match (self.cpu, thread_cpu_s()) {
            (Some(a), Some(b)) => Some(b - a),
            _ => None,
        };
        (wall, cpu)
    }
}

fn report(what: &str, samples: usize, (wall, cpu): (f64, Option<f64>)) {
    let line = |secs: f64| {
        let sps = samples as f64 / secs;
        format!(
            "{:>8.1} Msamples/s {:>7.1}x real time",
            sps / 1e6,
            sps / RATE_HZ
        )
    };
    match cpu {
        Some(c) => println!(
            "{what:<36} wall {:.3} s {}   | cpu {:.3} s {}",
            wall,
            line(wall),
            c,
            line(c)
        ),
        None => println!("{what:<36} wall {:.3} s {}", wall, line(wall)),
    }
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let seconds = arg(&args, "--seconds", 60.0);
    let block = arg(&args, "--block", 65536.0).max(1.0) as usize;

    let w = Watch::start();
    let x = synthesise(seconds);
    println!(
        "synthesised {} samples ({seconds} s at {} Hz) in {:.2} s; block {block}",
        x.len(),
        RATE_HZ,
        w.stop().0
    );

    // Survey over the whole capture.
    let mut survey = SpectrumSurvey::new(RATE_HZ, SurveyConfig::for_rate(RATE_HZ))?;
    let w = Watch::start();
    for b in x.chunks(block) {
        survey.push(b);
    }
    let found = survey.finish();
    report("spectrum survey (push + finish)", x.len(), w.stop());
    println!(
        "  floor {:.1} dB/bin, DC offset {}, carriers:",
        found.floor_db,
        match &found.dc_spike {
            Some(d) => format!("flagged ({:+.1} dB over floor)", d.snr_db),
            None => "none".to_string(),
        }
    );
    for c in &found.carriers {
        println!(
            "    {:+10.0} Hz  peak {:6.1} dB  snr {:5.1} dB  activity {:.2}  bw {:6.0} Hz  {}",
            c.offset_hz,
            c.peak_db,
            c.snr_db,
            c.activity,
            c.occupied_bw_hz,
            if c.continuous { "continuous" } else { "bursty" }
        );
    }
    let offset = found
        .carriers
        .iter()
        .filter(|c| !c.continuous)
        .max_by(|a, b| a.snr_db.total_cmp(&b.snr_db))
        .map_or(OFFSET_HZ, |c| c.offset_hz);
    println!("  truth: bursty carrier at {OFFSET_HZ:+.0} Hz, DC offset present");

    // One channel at the carrier found.
    let bw = ChannelPlan::bandwidth_for_mark(UNIT_S, 2e3)?;
    let min_out = ChannelPlan::out_rate_for_mark(UNIT_S, 8.0)?;
    let plan = ChannelPlan::design(RATE_HZ, offset, bw, min_out)?;
    println!(
        "  plan: bw {:.0} Hz, CIC order {} / {}, FIR {} taps / {}, out {:.0} Hz, delay {:.1} us",
        plan.bandwidth_hz,
        plan.cic_order,
        plan.cic_decim,
        plan.fir_taps.len(),
        plan.fir_decim,
        plan.out_rate_hz,
        plan.delay_s * 1e6
    );
    let mut ch = Channelizer::new(&plan)?;
    let mut env = Vec::with_capacity(x.len() / plan.decim + 1);
    let w = Watch::start();
    for b in x.chunks(block) {
        ch.process(b, &mut env);
    }
    report("channelizer (mix, CIC, FIR, |z|)", x.len(), w.stop());

    // Both stages block by block, as a streaming pipeline runs them (the second stage finds
    // the block in cache).
    survey.reset();
    ch.reset();
    env.clear();
    let w = Watch::start();
    for b in x.chunks(block) {
        survey.push(b);
        ch.process(b, &mut env);
    }
    let again = survey.finish();
    report("survey + channel, per block", x.len(), w.stop());
    if again != found {
        return Err("survey differs between runs".into());
    }

    // Sanity: count marks with a fixed hysteresis (the real edge detector adapts).
    let (hi, lo) = (0.035f32, 0.015f32);
    let mut on = false;
    let mut marks = 0usize;
    for &v in &env {
        if !on && v >= hi {
            on = true;
            marks += 1;
        } else if on && v < lo {
            on = false;
        }
    }
    let presses = (seconds / 2.0).floor() as usize;
    println!(
        "  envelope: {} samples, {} marks (truth: {} presses x 5 frames x 24 marks = {})",
        env.len(),
        marks,
        presses,
        presses * 5 * 24
    );
    Ok(())
}
