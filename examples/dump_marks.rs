//! Prints the marks the edge stage finds in a capture (debugging aid). With IQ input the
//! strongest bursty carrier's channel is used, as `decode` does.
use ooksift::decode::{channel_plans, survey_source, DecodeOptions};
use ooksift::edges::{EdgeConfig, EdgeDetector};
use ooksift::front::envelope::{ChannelEnvelope, EnvelopeBlock, Front, WideEnvelope};
use ooksift::source::{open, OpenOptions};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let path = args.get(1).ok_or("usage: dump_marks CAPTURE [RATE]")?;
    let opts = OpenOptions {
        rate_hz: args.get(2).and_then(|r| r.parse().ok()),
        ..OpenOptions::default()
    };
    let mut src = open(path, &opts)?;
    let info = src.info().clone();
    let rate = info.rate.hz();
    let mut front = if info.is_iq() {
        let survey = survey_source(src.as_mut())?;
        for c in &survey.carriers {
            eprintln!(
                "carrier {:+.0} Hz peak {:.1} dB snr {:.1} bw {:.0} continuous {}",
                c.offset_hz, c.peak_db, c.snr_db, c.occupied_bw_hz, c.continuous
            );
        }
        src = open(path, &opts)?;
        let plan = channel_plans(&survey, &info, &DecodeOptions::default())
            .into_iter()
            .next()
            .ok_or("no carrier")?;
        eprintln!(
            "channel {:+.0} Hz bw {:.0} out {:.0} Hz decim {}",
            plan.nco_offset_hz, plan.bandwidth_hz, plan.out_rate_hz, plan.decim
        );
        let smooth = (60e-6 * plan.out_rate_hz).round() as usize;
        Front::Channel(Box::new(ChannelEnvelope::new(plan, smooth)?))
    } else {
        let d = WideEnvelope::decimation_for(rate, 250_000.0);
        Front::Wide(WideEnvelope::with_smoothing(
            d,
            (60e-6 * rate / d as f64).round() as usize,
        ))
    };
    let mut det = EdgeDetector::new(EdgeConfig::for_rate(rate / front.decim()));
    let mut blk = EnvelopeBlock::default();
    let mut marks = Vec::new();
    while let Some(b) = src.next_block()? {
        blk.clear();
        front.process(b, &mut blk);
        det.process(&blk.env, &blk.lag, &mut marks);
    }
    det.finish(&mut marks);
    let us = 1e6 / rate;
    let mut prev: Option<f64> = None;
    for m in &marks {
        let (r, f) = (front.position_of(m.rise), front.position_of(m.fall));
        let space = prev.map(|p| (r - p) * us);
        println!(
            "rise {:10.1} us  mark {:8.1} us  space-before {:>10}  level {:.3} noise {:.4}",
            r * us,
            (f - r) * us,
            space.map_or("-".into(), |s| format!("{s:.1}")),
            m.level,
            m.noise
        );
        prev = Some(f);
    }
    Ok(())
}
