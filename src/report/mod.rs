//! The decode report: the JSON contract of DESIGN.md, plus evidence, as typed structs.
//!
//! [`DecodeReport`] is what `ooksift decode --json` prints and what `compare` and `budget`
//! read back from a saved report; `schemas/decode.schema.json` describes it and the tests
//! validate real output against that schema. [`render_text`] is the human view.

mod text;

pub use text::render_text;

use crate::frames::{bit_string, hex_of, key_id, CodeGroup, PressDecode};
use crate::source::CaptureInfo;
use crate::timing::median;
use crate::units::{round_to, Rate};
use serde::{Deserialize, Serialize};

/// The caution every report carries.
pub const CAUTION: &str = "Analyse only transmitters you own or are authorised to test. \
Airtime, duty-cycle and energy figures are estimates from one capture; they do not replace \
local regulations, accredited test laboratories or licensed practice.";

/// One decoded capture.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct DecodeReport {
    /// Program and version that wrote the report.
    pub generator: String,
    /// The capture.
    pub capture: CaptureSummary,
    /// Codes found, in order of first appearance.
    pub codes: Vec<CodeReport>,
    /// Bursts that held marks but no code (noise, interference, unknown coding).
    pub undecoded_bursts: usize,
    /// Warnings: limits hit, partial presses, ...
    pub notes: Vec<String>,
    /// The usual caution.
    pub caution: String,
}

/// What the capture was.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct CaptureSummary {
    /// Path as given.
    pub path: String,
    /// `cu8`, `ci16_le`, ... for raw captures; `wav` or `sigmf` for containers.
    pub format: String,
    /// Dataset format of the samples.
    pub datatype: String,
    /// Sample rate.
    pub sample_rate_hz: f64,
    /// Centre frequency when known.
    pub center_frequency_hz: Option<f64>,
    /// Samples read.
    pub samples: u64,
    /// Length in seconds.
    pub duration_s: f64,
}

impl CaptureSummary {
    /// Summary of a capture after `samples` samples were read.
    pub fn new(info: &CaptureInfo, samples: u64) -> CaptureSummary {
        CaptureSummary {
            path: info.path.clone(),
            format: info.format_name(),
            datatype: info.datatype.to_string(),
            sample_rate_hz: info.rate.hz(),
            center_frequency_hz: info.center_frequency_hz,
            samples,
            duration_s: round_to(info.rate.to_s(samples as f64), 9),
        }
    }
}

/// Another hypothesis and its score.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct RunnerUp {
    /// Line code.
    pub line_code: String,
    /// Its score (0–1).
    pub score: f64,
}

/// Framing around the data bits (medians), in microseconds and in units.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq, Default)]
pub struct Framing {
    /// Header mark, when frames open with one.
    pub header_mark_us: Option<f64>,
    /// Space after the header mark.
    pub header_space_us: Option<f64>,
    /// Mark that closes a frame without being a bit (PWM sync mark, PPM stop mark).
    pub closing_mark_us: Option<f64>,
    /// Space between repeats.
    pub gap_us: Option<f64>,
    /// The same four in units of `unit_us`: header mark, header space, closing mark, gap.
    pub in_units: [Option<f64>; 4],
    /// Preamble bits ahead of the sync word (NRZ), not part of `bits`.
    pub preamble: Option<String>,
    /// Sync word between preamble and data (NRZ), not part of `bits`.
    pub sync_word: Option<String>,
}

/// One frame on the timeline.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct FrameTimeline {
    /// First rising edge, seconds from capture start.
    pub start_s: f64,
    /// Marks as rise, fall, rise, fall, ... in microseconds from `start_s`.
    pub marks_us: Vec<f64>,
}

/// One press on the timeline.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct PressTimeline {
    /// First rising edge of the press, seconds from capture start.
    pub start_s: f64,
    /// Last falling edge of the press, seconds from capture start.
    pub end_s: f64,
    /// Its full-length frames.
    pub frames: Vec<FrameTimeline>,
}

/// One code: the DESIGN.md contract fields first, then evidence.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct CodeReport {
    /// Stable identifier of (line code, bits).
    pub key_id: String,
    /// `pwm`, `ppm`, ...
    pub line_code: String,
    /// Data bits, MSB first.
    pub bits: String,
    /// Number of data bits.
    pub bit_count: usize,
    /// Bits in hex, MSB first, left-padded to whole nibbles.
    pub hex: String,
    /// Inferred base unit.
    pub unit_us: f64,
    /// Carrier relative to the centre (null for envelope input).
    pub carrier_offset_hz: Option<f64>,
    /// Separate transmissions carrying this code.
    pub presses: usize,
    /// Frames decoded for this code.
    pub frames: usize,
    /// Median repeats per press.
    pub frames_per_press: f64,
    /// First rise to last fall of one frame (median).
    pub frame_airtime_ms: f64,
    /// Mark time of one frame (median).
    pub frame_on_time_ms: f64,
    /// Start-to-start of consecutive repeats (median; null if single).
    pub frame_period_ms: Option<f64>,
    /// First rise to last fall of one press (median).
    pub press_airtime_ms: f64,
    /// Mark time of one press (median).
    pub press_on_time_ms: f64,
    /// First rise of the first frame, seconds from capture start.
    pub first_start_s: f64,
    /// Mark level above the floor over the idle noise RMS, in the analysis bandwidth.
    pub snr_db: f64,
    /// Score of the chosen line code (0–1).
    pub confidence: f64,
    /// The next-best line code.
    pub runner_up: Option<RunnerUp>,
    /// Bits the vote across repeats changed.
    pub corrected_bits: usize,
    /// Frames of another length (cut by the capture's ends or damaged).
    pub partial_frames: usize,
    /// Header, closing mark and gap.
    pub framing: Framing,
    /// Every press and frame with its marks (what `budget` works from).
    pub timeline: Vec<PressTimeline>,
    /// PWM codes whose bits pair up as 00, 11 and 01 (never 10): the code as tri-state
    /// symbols, `0`, `1` and `F` per pair (see [`tristate`]); null otherwise.
    #[serde(default)]
    pub tristate: Option<String>,
    /// Evidence: mark and space widths of the reported frames, clustered, in units.
    #[serde(default)]
    pub clusters: WidthClusters,
}

/// One group of similar widths, in units of `unit_us`.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq, Default)]
pub struct WidthCluster {
    /// Mean width in units.
    pub units: f64,
    /// Widths in the group.
    pub count: usize,
}

/// Mark and space widths inside the frames (gaps between repeats excluded), clustered with
/// 25 % gaps ([`crate::timing::clusters`]), narrowest first.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq, Default)]
pub struct WidthClusters {
    /// Mark widths.
    pub marks: Vec<WidthCluster>,
    /// Space widths between marks of one frame.
    pub spaces: Vec<WidthCluster>,
}

/// The tri-state view of a PWM code: bits taken in pairs, `00` → `0`, `11` → `1`, `01` → `F`;
/// `None` when the code is not PWM, has an odd bit count, or holds a `10` pair.
///
/// ```
/// use ooksift::report::tristate;
/// assert_eq!(tristate("pwm", "001101"), Some("01F".to_string()));
/// assert_eq!(tristate("pwm", "0010"), None);
/// assert_eq!(tristate("ppm", "0011"), None);
/// ```
pub fn tristate(line_code: &str, bits: &str) -> Option<String> {
    if line_code != "pwm" || bits.is_empty() || bits.len() % 2 != 0 {
        return None;
    }
    bits.as_bytes()
        .chunks(2)
        .map(|p| match p {
            b"00" => Some('0'),
            b"11" => Some('1'),
            b"01" => Some('F'),
            _ => None,
        })
        .collect()
}

impl CodeReport {
    /// Builds a code's report from its presses. The carrier offset is `carrier_base_hz` (the
    /// channel's centre; `None` for envelope input) plus the residual measured from the
    /// lag-1 products, taken at `lag_rate_hz`.
    pub fn from_group(
        g: &CodeGroup,
        rate: Rate,
        carrier_base_hz: Option<f64>,
        lag_rate_hz: f64,
    ) -> CodeReport {
        let ms = |x: f64| round_to(rate.to_ms(x), 4);
        let us = |x: f64| round_to(rate.to_us(x), 2);
        let ps = &g.presses;
        let bits = bit_string(&g.bits);
        let line_code = g.line_code.name().to_string();
        let all_frames: Vec<_> = ps.iter().flat_map(|p| p.frames.iter()).collect();
        let airtimes: Vec<f64> = all_frames.iter().map(|f| f.end - f.start).collect();
        let on_times: Vec<f64> = all_frames.iter().map(|f| f.on_time).collect();
        let periods: Vec<f64> = ps
            .iter()
            .flat_map(|p| p.frames.windows(2).map(|w| w[1].start - w[0].start))
            .collect();
        let units: Vec<f64> = ps.iter().map(|p| p.unit).collect();
        let unit = median(&units);
        let per_press: Vec<f64> = ps.iter().map(|p| p.frames.len() as f64).collect();
        let best = best_press(ps);
        let snr: Vec<f64> = ps
            .iter()
            .map(|p| 20.0 * (p.level.max(1e-12) / p.noise.max(1e-12)).log10())
            .collect();
        let lag: num_complex::Complex64 = ps.iter().map(|p| p.lag).sum();
        let carrier_offset_hz = carrier_base_hz.map(|base| {
            let residual = if lag.norm() > 0.0 {
                lag.arg() * lag_rate_hz / std::f64::consts::TAU
            } else {
                0.0
            };
            round_to(base + residual, 1)
        });
        let l = &best.layout;
        let in_u = |x: Option<f64>| x.map(|v| round_to(v / unit, 2));
        let framing = Framing {
            header_mark_us: l.header.map(|h| us(h.0)),
            header_space_us: l.header.map(|h| us(h.1)),
            closing_mark_us: l.closing_mark.map(us),
            gap_us: l.gap.map(us),
            in_units: [
                in_u(l.header.map(|h| h.0)),
                in_u(l.header.map(|h| h.1)),
                in_u(l.closing_mark),
                in_u(l.gap),
            ],
            preamble: l.preamble.as_deref().map(bit_string),
            sync_word: l.sync_word.as_deref().map(bit_string),
        };
        let timeline = ps
            .iter()
            .map(|p| PressTimeline {
                start_s: round_to(rate.to_s(p.start), 7),
                end_s: round_to(rate.to_s(p.end), 7),
                frames: p
                    .frames
                    .iter()
                    .map(|f| FrameTimeline {
                        start_s: round_to(rate.to_s(f.start), 7),
                        marks_us: f
                            .marks
                            .iter()
                            .flat_map(|&(r, fa)| [us(r - f.start), us(fa - f.start)])
                            .collect(),
                    })
                    .collect(),
            })
            .collect();
        let (mut mark_w, mut space_w) = (Vec::new(), Vec::new());
        for f in &all_frames {
            mark_w.extend(f.marks.iter().map(|&(r, fa)| (fa - r) / unit.max(1e-12)));
            space_w.extend(
                f.marks
                    .windows(2)
                    .map(|w| (w[1].0 - w[0].1) / unit.max(1e-12)),
            );
        }
        let group = |w: &[f64]| -> Vec<WidthCluster> {
            crate::timing::clusters(w, 0.25)
                .iter()
                .map(|c| WidthCluster {
                    units: round_to(c.mean, 2),
                    count: c.count,
                })
                .collect()
        };
        let clusters = WidthClusters {
            marks: group(&mark_w),
            spaces: group(&space_w),
        };
        CodeReport {
            tristate: tristate(&line_code, &bits),
            clusters,
            key_id: key_id(&line_code, &bits),
            hex: hex_of(&bits),
            bit_count: bits.len(),
            bits,
            line_code,
            unit_us: us(unit),
            carrier_offset_hz,
            presses: ps.len(),
            frames: all_frames.len(),
            frames_per_press: median(&per_press),
            frame_airtime_ms: ms(median(&airtimes)),
            frame_on_time_ms: ms(median(&on_times)),
            frame_period_ms: (!periods.is_empty()).then(|| ms(median(&periods))),
            press_airtime_ms: ms(median(
                &ps.iter().map(|p| p.end - p.start).collect::<Vec<_>>(),
            )),
            press_on_time_ms: ms(median(&ps.iter().map(|p| p.on_time).collect::<Vec<_>>())),
            first_start_s: round_to(
                rate.to_s(
                    ps.iter()
                        .filter_map(|p| p.frames.first().map(|f| f.start))
                        .fold(f64::INFINITY, f64::min),
                ),
                7,
            ),
            snr_db: round_to(median(&snr), 1),
            confidence: round_to(best.score, 3),
            runner_up: best.runner_up.map(|(c, s)| RunnerUp {
                line_code: c.name().to_string(),
                score: round_to(s, 3),
            }),
            corrected_bits: ps.iter().map(|p| p.corrected_bits).sum(),
            partial_frames: ps.iter().map(|p| p.partial_frames).sum(),
            framing,
            timeline,
        }
    }
}

/// The press with the most frames (the clearest evidence of the layout).
fn best_press(ps: &[PressDecode]) -> &PressDecode {
    let mut best = &ps[0];
    for p in ps {
        if p.frames.len() > best.frames.len() {
            best = p;
        }
    }
    best
}
