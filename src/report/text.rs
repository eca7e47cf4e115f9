//! The human view of a decode report: one header block, one table row per code, then each
//! code's bits and evidence.

use super::DecodeReport;
use std::fmt::Write;

fn opt(x: Option<f64>, digits: usize) -> String {
    x.map_or_else(|| "-".to_string(), |v| format!("{v:.digits$}"))
}

/// Renders a report as aligned text.
pub fn render_text(r: &DecodeReport) -> String {
    let mut s = String::new();
    let c = &r.capture;
    let centre = c.center_frequency_hz.map_or_else(
        || "centre unknown".to_string(),
        |f| format!("centre {:.6} MHz", f / 1e6),
    );
    let _ = writeln!(s, "capture  {}", c.path);
    let _ = writeln!(
        s,
        "         {} ({}), {} Hz, {} samples = {:.3} s, {}",
        c.format, c.datatype, c.sample_rate_hz, c.samples, c.duration_s, centre
    );
    let _ = writeln!(s);
    if r.codes.is_empty() {
        let _ = writeln!(s, "no code found");
    } else {
        let _ = writeln!(
            s,
            "{:<16} {:<4} {:>4} {:<17} {:>8} {:>7} {:>6} {:>9} {:>9} {:>9} {:>7} {:>10}",
            "key",
            "code",
            "bits",
            "hex",
            "unit µs",
            "presses",
            "rpt",
            "frame ms",
            "period ms",
            "press ms",
            "SNR dB",
            "offset kHz"
        );
        for k in &r.codes {
            let hex = if k.hex.len() > 17 {
                format!("{}…", &k.hex[..16])
            } else {
                k.hex.clone()
            };
            let _ = writeln!(
                s,
                "{:<16} {:<4} {:>4} {:<17} {:>8.1} {:>7} {:>6} {:>9.2} {:>9} {:>9.2} {:>7.1} {:>10}",
                k.key_id,
                k.line_code,
                k.bit_count,
                hex,
                k.unit_us,
                k.presses,
                k.frames_per_press,
                k.frame_airtime_ms,
                opt(k.frame_period_ms, 2),
                k.press_airtime_ms,
                k.snr_db,
                opt(k.carrier_offset_hz.map(|h| h / 1e3), 2),
            );
        }
        for k in &r.codes {
            let _ = writeln!(s);
            let _ = writeln!(s, "{}  bits {}", k.key_id, k.bits);
            let f = &k.framing;
            let mut parts = Vec::new();
            if let (Some(m), Some(sp)) = (f.in_units[0], f.in_units[1]) {
                parts.push(format!("header {m:.1}u mark + {sp:.1}u space"));
            }
            if let Some(m) = f.in_units[2] {
                parts.push(format!("closing mark {m:.1}u"));
            }
            if let Some(g) = f.in_units[3] {
                parts.push(format!("gap {g:.1}u"));
            }
            if let Some(p) = &f.preamble {
                parts.push(format!("preamble {p}"));
            }
            if let Some(w) = &f.sync_word {
                parts.push(format!("sync word {w}"));
            }
            if parts.is_empty() {
                parts.push("no header, closing mark or repeats".into());
            }
            let _ = writeln!(s, "  framing   {}", parts.join(", "));
            if let Some(t) = &k.tristate {
                let _ = writeln!(s, "  tristate  {t}");
            }
            let list = |cs: &[super::WidthCluster]| {
                cs.iter()
                    .map(|c| format!("{:.2}u ×{}", c.units, c.count))
                    .collect::<Vec<_>>()
                    .join(", ")
            };
            let _ = writeln!(
                s,
                "  widths    marks {}; spaces {}",
                list(&k.clusters.marks),
                list(&k.clusters.spaces)
            );
            let runner = k.runner_up.as_ref().map_or_else(
                || "no other line code fits".to_string(),
                |ru| format!("runner-up {} {:.2}", ru.line_code, ru.score),
            );
            let _ = writeln!(
                s,
                "  evidence  {} confidence {:.2}, {}; {} frames, {} bit(s) corrected by vote, {} partial frame(s)",
                k.line_code, k.confidence, runner, k.frames, k.corrected_bits, k.partial_frames
            );
            let _ = writeln!(
                s,
                "  airtime   frame {:.2} ms ({:.2} ms on), press {:.2} ms ({:.2} ms on), first at {:.4} s",
                k.frame_airtime_ms,
                k.frame_on_time_ms,
                k.press_airtime_ms,
                k.press_on_time_ms,
                k.first_start_s
            );
        }
    }
    if r.undecoded_bursts > 0 {
        let _ = writeln!(s);
        let _ = writeln!(s, "{} burst(s) held marks but no code", r.undecoded_bursts);
    }
    for n in &r.notes {
        let _ = writeln!(s, "note: {n}");
    }
    let _ = writeln!(s);
    let _ = writeln!(s, "{}", r.caution);
    s
}
