//! Measures one design direction for the channelizer before building it into the library:
//! two carriers mixed once per sample by a table oscillator and filtered by a *recursive*
//! order-3 CIC in wrap-around integers (exact whatever the capture length), both channels in
//! the lanes of one vector, then the same clean-up FIR — against today's `Channelizer`
//! (oscillator folded into polyphase CIC tables, f32), on the same cu8 bytes.
//!
//! ```text
//! cargo run --release --example channel_kernels -- FILE.cu8 [--seconds 16]
//! ```
//!
//! The capture is read into memory first (2.048 MHz cu8, e.g. from `scripts/throughput.sh`).
//! Prints CPU time per stage (this thread, `/proc/thread-self/schedstat`) as ns per complex
//! input sample and × real time, and the largest difference between the two channelizers'
//! outputs relative to the largest output (the prototype's oscillator is 14-bit, its input the
//! cu8 codes themselves). Carriers sit on multiples of the table's 500 Hz step so that both
//! mix by the same frequency. The machine is shared: compare figures within one run.

use num_complex::Complex32;
use ooksift::front::channel::{ChannelPlan, Channelizer};
use ooksift::source::Datatype;

const RATE_HZ: f64 = 2_048_000.0;
/// Oscillator table length: carriers are quantised to RATE_HZ / TABLE = 500 Hz.
const TABLE: usize = 4096;
/// Oscillator amplitude (14 bits).
const NCO_ONE: f64 = 16384.0;

fn thread_cpu_s() -> f64 {
    std::fs::read_to_string("/proc/thread-self/schedstat")
        .ok()
        .and_then(|t| t.split_whitespace().next()?.parse::<f64>().ok())
        .map_or(0.0, |ns| ns / 1e9)
}

/// Two channels with the same CIC decimation and FIR, lanes [re0, im0, re1, im1].
struct PairChannel {
    d: usize,
    /// Per sample of the table period: x·e^{−jωn} = xr·t1 + xi·t2 lane by lane.
    t1: Vec<[i32; 4]>,
    t2: Vec<[i32; 4]>,
    phase: usize,
    fill: usize,
    int: [[i64; 4]; 3],
    comb: [[i64; 4]; 3],
    scale: f32,
    taps: Vec<f32>,
    /// Mirrored FIR history per lane: sample k at k and k + taps.len().
    hist: [Vec<f32>; 4],
    hist_pos: usize,
}

impl PairChannel {
    fn new(plan: &ChannelPlan, offsets: [f64; 2]) -> PairChannel {
        let mut t1 = vec![[0i32; 4]; TABLE];
        let mut t2 = vec![[0i32; 4]; TABLE];
        for n in 0..TABLE {
            for (k, &off) in offsets.iter().enumerate() {
                let steps = (off / RATE_HZ * TABLE as f64).round() as i64;
                let a = 2.0 * std::f64::consts::PI * ((steps * n as i64) as f64 / TABLE as f64);
                let (c, s) = (
                    (a.cos() * NCO_ONE).round() as i32,
                    (a.sin() * NCO_ONE).round() as i32,
                );
                // (xr + j·xi)(c − j·s) = (xr·c + xi·s) + j(xi·c − xr·s)
                t1[n][2 * k] = c;
                t2[n][2 * k] = s;
                t1[n][2 * k + 1] = -s;
                t2[n][2 * k + 1] = c;
            }
        }
        let d = plan.cic_decim;
        let l = plan.fir_taps.len();
        // Input codes are 2b − 255 = 255 × the library's float value.
        let scale = (1.0 / (255.0 * NCO_ONE * (d * d * d) as f64)) as f32;
        PairChannel {
            d,
            t1,
            t2,
            phase: 0,
            fill: 0,
            int: [[0; 4]; 3],
            comb: [[0; 4]; 3],
            scale,
            taps: plan.fir_taps.iter().rev().copied().collect(),
            hist: std::array::from_fn(|_| vec![0.0; 2 * l]),
            hist_pos: 0,
        }
    }

    fn process(&mut self, bytes: &[u8], out: &mut [Vec<Complex32>; 2]) {
        // State in locals for the inner loop (kept in registers, not written back per sample).
        let (mut int, mut phase, mut fill) = (self.int, self.phase, self.fill);
        for p in bytes.chunks_exact(2) {
            let xr = 2 * p[0] as i32 - 255;
            let xi = 2 * p[1] as i32 - 255;
            let (a, b) = (&self.t1[phase], &self.t2[phase]);
            // |m| ≤ 2·255·16384 < 2²³: the product fits i32; the integrators wrap in i64.
            let m: [i64; 4] = std::array::from_fn(|l| (xr * a[l] + xi * b[l]) as i64);
            for (l, &m) in m.iter().enumerate() {
                int[0][l] = int[0][l].wrapping_add(m);
                int[1][l] = int[1][l].wrapping_add(int[0][l]);
                int[2][l] = int[2][l].wrapping_add(int[1][l]);
            }
            phase = (phase + 1) & (TABLE - 1);
            fill += 1;
            if fill == self.d {
                fill = 0;
                self.output(&int[2], out);
            }
        }
        (self.int, self.phase, self.fill) = (int, phase, fill);
    }

    fn output(&mut self, last: &[i64; 4], out: &mut [Vec<Complex32>; 2]) {
        let l2 = self.taps.len();
        for (l, &top) in last.iter().enumerate() {
            let mut v = top;
            for c in self.comb.iter_mut() {
                let prev = std::mem::replace(&mut c[l], v);
                v = v.wrapping_sub(prev);
            }
            let f = v as f32 * self.scale;
            let h = &mut self.hist[l];
            h[self.hist_pos] = f;
            h[self.hist_pos + l2] = f;
        }
        self.hist_pos = (self.hist_pos + 1) % l2;
        let mut y = [0f32; 4];
        for (l, yl) in y.iter_mut().enumerate() {
            let x = &self.hist[l][self.hist_pos..self.hist_pos + l2];
            let mut s = [0f32; 8];
            for (xs, hs) in x.chunks_exact(8).zip(self.taps.chunks_exact(8)) {
                for k in 0..8 {
                    s[k] += xs[k] * hs[k];
                }
            }
            let full = l2 - l2 % 8;
            let tail: f32 = x[full..]
                .iter()
                .zip(&self.taps[full..])
                .map(|(a, b)| a * b)
                .sum();
            *yl = s.iter().sum::<f32>() + tail;
        }
        out[0].push(Complex32::new(y[0], y[1]));
        out[1].push(Complex32::new(y[2], y[3]));
    }
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let path = args
        .get(1)
        .ok_or("usage: channel_kernels FILE.cu8 [--seconds S]")?;
    let seconds: f64 = args
        .iter()
        .position(|a| a == "--seconds")
        .and_then(|i| args.get(i + 1)?.parse().ok())
        .unwrap_or(16.0);
    let mut bytes = std::fs::read(path)?;
    bytes.truncate(((seconds * RATE_HZ) as usize * 2).min(bytes.len() / 2 * 2));
    let n = bytes.len() / 2;
    let block = 1 << 16;
    let report = |what: &str, cpu: f64| {
        println!(
            "{what:<52} {:6.2} ns/sample  {:7.1}x real time",
            cpu * 1e9 / n as f64,
            n as f64 / RATE_HZ / cpu
        );
    };
    println!("{n} samples ({:.1} s)", n as f64 / RATE_HZ);

    let dt: Datatype = "cu8".parse()?;
    let mut iq = Vec::with_capacity(block);
    let t = thread_cpu_s();
    let mut check = Complex32::new(0.0, 0.0);
    for b in bytes.chunks(2 * block) {
        iq.clear();
        dt.decode_iq_fast(b, &mut iq);
        check += iq[iq.len() / 2];
    }
    report("cu8 -> f32 conversion, block by block", thread_cpu_s() - t);
    let mut all = Vec::with_capacity(n);
    for b in bytes.chunks(2 * block) {
        iq.clear();
        dt.decode_iq_fast(b, &mut iq);
        all.extend_from_slice(&iq);
    }
    std::hint::black_box(check);

    let offsets = [100_000.0, -250_000.0];
    let plans: Vec<ChannelPlan> = offsets
        .iter()
        .map(|&o| ChannelPlan::design(RATE_HZ, o, 14e3, 80e3))
        .collect::<Result<_, _>>()?;
    println!(
        "plans: CIC {}x order {}, FIR {} taps /{}, out {:.0} Hz",
        plans[0].cic_decim,
        plans[0].cic_order,
        plans[0].fir_taps.len(),
        plans[0].fir_decim,
        plans[0].out_rate_hz
    );
    let mut chans: Vec<Channelizer> = plans
        .iter()
        .map(Channelizer::new)
        .collect::<Result<_, _>>()?;
    let mut today: [Vec<Complex32>; 2] = [Vec::new(), Vec::new()];
    let t = thread_cpu_s();
    for b in all.chunks(block) {
        for (c, o) in chans.iter_mut().zip(today.iter_mut()) {
            c.process_iq(b, o);
        }
    }
    drop(all);
    report(
        "today: 2 x Channelizer (polyphase, f32)",
        thread_cpu_s() - t,
    );

    let mut pair = PairChannel::new(&plans[0], offsets);
    let mut proto: [Vec<Complex32>; 2] = [Vec::new(), Vec::new()];
    let t = thread_cpu_s();
    for b in bytes.chunks(2 * block) {
        pair.process(b, &mut proto);
    }
    report(
        "prototype: 2 channels, recursive integer CIC",
        thread_cpu_s() - t,
    );

    for k in 0..2 {
        let peak = today[k].iter().map(|z| z.norm()).fold(0f32, f32::max);
        let worst = today[k]
            .iter()
            .zip(&proto[k])
            .map(|(a, b)| (a - b).norm())
            .fold(0f32, f32::max);
        println!(
            "channel {:+.0} Hz: {} / {} outputs, largest difference {:.2e} of the peak {:.3}",
            offsets[k],
            today[k].len(),
            proto[k].len(),
            worst / peak.max(1e-12),
            peak
        );
    }
    Ok(())
}
