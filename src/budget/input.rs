//! Timing for the budget from a decode report (fresh or saved with `decode --json`).

use super::{CodeTiming, FrameTiming, PressTiming};
use crate::report::DecodeReport;

/// A press is cut by the capture's end when its last fall lies this close to the end.
const END_GUARD_S: f64 = 0.005;

/// The budget's view of every code of a decode report: each mark of each frame of each press
/// (from the report's `timeline`), the absolute carrier when the centre frequency is known,
/// and whether a press runs to the end of the capture (its release is then not seen).
///
/// ```
/// # use ooksift::report::*;
/// # let r: DecodeReport = serde_json::from_str(r#"{"generator":"t","capture":{"path":"x","format":"cu8","datatype":"cu8","sample_rate_hz":1e6,"center_frequency_hz":433.9e6,"samples":1000000,"duration_s":1.0},"codes":[],"undecoded_bursts":0,"notes":[],"caution":"c"}"#).unwrap();
/// assert!(ooksift::budget::from_decode_report(&r).is_empty());
/// ```
pub fn from_decode_report(report: &DecodeReport) -> Vec<CodeTiming> {
    let duration = report.capture.duration_s;
    report
        .codes
        .iter()
        .map(|c| CodeTiming {
            key_id: c.key_id.clone(),
            line_code: c.line_code.clone(),
            carrier_hz: match (report.capture.center_frequency_hz, c.carrier_offset_hz) {
                (Some(centre), Some(off)) => Some(centre + off),
                _ => None,
            },
            presses: c
                .timeline
                .iter()
                .map(|p| PressTiming {
                    frames: p
                        .frames
                        .iter()
                        .map(|f| FrameTiming {
                            marks: f
                                .marks_us
                                .chunks_exact(2)
                                .map(|m| (f.start_s + m[0] * 1e-6, f.start_s + m[1] * 1e-6))
                                .collect(),
                        })
                        .collect(),
                    truncated: p.end_s >= duration - END_GUARD_S,
                })
                .collect(),
            capture_duration_s: duration,
        })
        .collect()
}
