//! Prints the marks the edge stage finds in a capture (debugging aid).
use ooksift::edges::{EdgeConfig, EdgeDetector};
use ooksift::front::envelope::{EnvelopeBlock, WideEnvelope};
use ooksift::source::{open, OpenOptions};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let path = args.get(1).ok_or("usage: dump_marks CAPTURE [RATE]")?;
    let opts = OpenOptions {
        rate_hz: args.get(2).and_then(|r| r.parse().ok()),
        ..OpenOptions::default()
    };
    let mut src = open(path, &opts)?;
    let rate = src.info().rate.hz();
    let d = WideEnvelope::decimation_for(rate, 250_000.0);
    let mut env = WideEnvelope::with_smoothing(d, (60e-6 * rate / d as f64).round() as usize);
    let mut det = EdgeDetector::new(EdgeConfig::for_rate(rate / env.decim() as f64));
    let mut blk = EnvelopeBlock::default();
    let mut marks = Vec::new();
    while let Some(b) = src.next_block()? {
        blk.clear();
        env.process(b, &mut blk);
        det.process(&blk.env, &blk.lag, &mut marks);
    }
    det.finish(&mut marks);
    let us = 1e6 / rate * env.decim() as f64;
    let mut prev: Option<f64> = None;
    for m in &marks {
        let space = prev.map(|p| (m.rise - p) * us);
        println!(
            "rise {:10.1} us  mark {:8.1} us  space-before {:>10}  level {:.3} noise {:.4}",
            m.rise * us,
            m.width() * us,
            space.map_or("-".into(), |s| format!("{s:.1}")),
            m.level,
            m.noise
        );
        prev = Some(m.fall);
    }
    Ok(())
}
