//! Voting benchmark (issue 4): at Eu/N0 = 12 dB, a 24-bit PWM code sent 10 times per press,
//! 100 trials (each a fresh random code and noise seed), written by `synth` as cu8 at 250 kHz
//! and decoded. Prints the fraction of trials whose report holds exactly the sent code and
//! nothing else, and the bits the vote corrected.
//!
//! Run: `cargo run --release --example voting [TRIALS] [SNR_DB]`

use ooksift::decode::DecodeError;
use ooksift::decode::{decode_path, DecodeOptions};
use ooksift::rng::Rng;
use ooksift::synth::{write_capture, ChannelSpec, PressSpec, SynthSpec};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let trials: usize = args.get(1).and_then(|a| a.parse().ok()).unwrap_or(100);
    let snr: f64 = args.get(2).and_then(|a| a.parse().ok()).unwrap_or(12.0);
    let dir = std::env::temp_dir().join(format!("ooksift-voting-{}", std::process::id()));
    std::fs::create_dir_all(&dir)?;
    let (mut exact, mut corrected, mut extra) = (0usize, 0usize, 0usize);
    for t in 0..trials {
        let bits = Rng::new(5000 + t as u64).bits(24);
        let spec = SynthSpec {
            format: "cu8".into(),
            rate_hz: 250e3,
            seed: 100 + t as u64,
            channel: ChannelSpec {
                snr_db: Some(snr),
                ..ChannelSpec::default()
            },
            presses: vec![PressSpec {
                repeats: 10,
                unit_us: 350.0,
                ..PressSpec::new("pwm", &bits)
            }],
            ..SynthSpec::default()
        };
        let path = dir.join(format!("t{t}.cu8"));
        write_capture(&spec, &path, true)?;
        let mut opts = DecodeOptions::default();
        opts.open.rate_hz = Some(250e3);
        let r = decode_path(path.to_str().unwrap_or_default(), &opts)
            .map_err(|e: DecodeError| e.to_string())?;
        let hit = r.codes.iter().find(|c| c.bits == bits);
        if let Some(c) = hit {
            corrected += c.corrected_bits;
            if r.codes.len() == 1 {
                exact += 1;
            }
        }
        extra += r.codes.iter().filter(|c| c.bits != bits).count();
        let _ = std::fs::remove_file(&path);
        let _ = std::fs::remove_file(ooksift::synth::truth_path(&path));
    }
    let _ = std::fs::remove_dir(&dir);
    println!(
        "Eu/N0 {snr} dB, 10 repeats, {trials} trials: exact code in {:.1} % ({exact}/{trials}); \
         {corrected} bits corrected by the vote; {extra} wrong codes reported",
        100.0 * exact as f64 / trials as f64
    );
    Ok(())
}
