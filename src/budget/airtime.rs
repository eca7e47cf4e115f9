//! Airtime and on-time of frames and presses, and the worst 100 ms window.
//!
//! Definitions (DESIGN.md, decode contract): a frame's airtime runs from its first mark's
//! rising edge to its last mark's falling edge; its on-time is its total mark time; the frame
//! period is start-to-start of consecutive repeats; a press's airtime runs from its first
//! rising edge to its last falling edge.

use serde::{Deserialize, Serialize};

use super::{BudgetError, CodeTiming};

/// Length of the averaging window of 47 CFR §15.35(c).
pub(crate) const WINDOW_S: f64 = 0.1;

/// How a duty-cycle rule counts the time a press keeps the transmitter on.
///
/// The texts read do not settle whether the carrier-off chips inside an OOK frame count
/// (facts.md §2.2), so both are reported side by side.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DutyConvention {
    /// Carrier-on (mark) time only — the optimistic reading.
    MarksOnly,
    /// Each frame from its first to its last mark edge, spaces inside it included, gaps
    /// between frames excluded — the conservative reading.
    FrameSpans,
}

impl DutyConvention {
    /// Both conventions, in report order.
    pub const ALL: [DutyConvention; 2] = [DutyConvention::MarksOnly, DutyConvention::FrameSpans];

    /// The name used in reports and CSV headers.
    pub fn name(self) -> &'static str {
        match self {
            DutyConvention::MarksOnly => "marks_only",
            DutyConvention::FrameSpans => "frame_spans",
        }
    }
}

/// The time one press counts under one duty-cycle convention.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct DutyTime {
    /// The counting convention.
    pub convention: DutyConvention,
    /// Counted time of the press (the longest press of the code at code level).
    pub press_time_ms: f64,
}

/// Airtime figures of one press.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PressAirtime {
    /// 1-based number of the press within its code.
    pub press: usize,
    /// First rising edge, seconds from capture start.
    pub start_s: f64,
    /// Last falling edge, seconds from capture start.
    pub end_s: f64,
    /// The press runs to the capture's end.
    pub truncated: bool,
    /// Frames (repeats) in the press.
    pub repeats: usize,
    /// First rising edge to last falling edge.
    pub airtime_ms: f64,
    /// Total mark time.
    pub on_time_ms: f64,
    /// `on_time_ms / airtime_ms`.
    pub mark_fraction: f64,
    /// Sum of the frames' airtimes (the [`DutyConvention::FrameSpans`] time).
    pub frame_spans_ms: f64,
    /// Mark time inside the worst (maximum) 100 ms window of the press.
    pub worst_window_on_time_ms: f64,
    /// Where that window starts, seconds from capture start.
    pub worst_window_start_s: f64,
    /// Silence since the previous press of the same code ends (`None` for the first press).
    pub gap_before_s: Option<f64>,
}

/// Code-level airtime figures.
///
/// Frame figures are medians over all frames (the typical repeat); press figures come from the
/// longest press; the worst window is the maximum over presses.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CodeAirtime {
    /// Presses carrying the code.
    pub presses: usize,
    /// Presses that run to the capture's end.
    pub truncated_presses: usize,
    /// Frames over all presses.
    pub frames: usize,
    /// Median repeats per press.
    pub repeats_median: f64,
    /// Most repeats in one press.
    pub repeats_max: usize,
    /// Median frame airtime (first rising to last falling edge of a frame).
    pub frame_airtime_ms: f64,
    /// Median frame on-time (total mark time of a frame).
    pub frame_on_time_ms: f64,
    /// `frame_on_time_ms / frame_airtime_ms`.
    pub frame_mark_fraction: f64,
    /// Median start-to-start time of consecutive repeats (`None` if no press repeats).
    pub frame_period_ms: Option<f64>,
    /// 1-based number of the longest press.
    pub longest_press: usize,
    /// Airtime of the longest press.
    pub press_airtime_ms: f64,
    /// On-time of the longest press.
    pub press_on_time_ms: f64,
    /// Mark fraction of the longest press.
    pub press_mark_fraction: f64,
    /// Averaging window used for the worst-window figure (100 ms, 47 CFR §15.35(c)).
    pub window_ms: f64,
    /// Maximum over presses of the on-time inside the worst 100 ms window.
    pub worst_window_on_time_ms: f64,
    /// Start of that window, seconds from capture start.
    pub worst_window_start_s: f64,
    /// Longest press time under each duty-cycle counting convention.
    pub duty_times: Vec<DutyTime>,
    /// Shortest silence between consecutive presses of the code (`None` with one press).
    pub min_gap_s: Option<f64>,
}

/// Check the timing of one code; see [`super::budget`] for what is rejected.
pub(crate) fn validate(code: &CodeTiming) -> Result<(), BudgetError> {
    let bad = |detail: String| BudgetError::InvalidTiming {
        key_id: code.key_id.clone(),
        detail,
    };
    if !code.capture_duration_s.is_finite() || code.capture_duration_s < 0.0 {
        return Err(bad(format!(
            "capture duration {} s is not a finite non-negative number",
            code.capture_duration_s
        )));
    }
    if let Some(hz) = code.carrier_hz {
        if !hz.is_finite() || hz <= 0.0 {
            return Err(bad(format!(
                "carrier {hz} Hz is not a positive finite number"
            )));
        }
    }
    if code.presses.is_empty() {
        return Err(bad("no presses".to_string()));
    }
    let mut last_fall = f64::NEG_INFINITY;
    for (p, press) in code.presses.iter().enumerate() {
        if press.frames.is_empty() {
            return Err(bad(format!("press {} has no frames", p + 1)));
        }
        for (f, frame) in press.frames.iter().enumerate() {
            if frame.marks.is_empty() {
                return Err(bad(format!("press {} frame {} has no marks", p + 1, f + 1)));
            }
            for (m, &(rise, fall)) in frame.marks.iter().enumerate() {
                let at = || format!("press {} frame {} mark {}", p + 1, f + 1, m + 1);
                if !rise.is_finite() || !fall.is_finite() {
                    return Err(bad(format!("{}: edge time is not finite", at())));
                }
                if fall <= rise {
                    return Err(bad(format!(
                        "{}: falls at {fall} s, not after it rises at {rise} s",
                        at()
                    )));
                }
                if rise < last_fall {
                    return Err(bad(format!(
                        "{}: rises at {rise} s, before the previous mark falls at {last_fall} s \
                         (marks, frames and presses must be in time order)",
                        at()
                    )));
                }
                last_fall = fall;
            }
        }
    }
    Ok(())
}

/// Mark time before any instant, by binary search over sorted, non-overlapping marks.
struct MarkIndex<'a> {
    marks: &'a [(f64, f64)],
    /// `prefix[i]` = total width of marks `0..i`.
    prefix: Vec<f64>,
}

impl<'a> MarkIndex<'a> {
    fn new(marks: &'a [(f64, f64)]) -> Self {
        let mut prefix = Vec::with_capacity(marks.len() + 1);
        let mut sum = 0.0;
        prefix.push(sum);
        for &(r, f) in marks {
            sum += f - r;
            prefix.push(sum);
        }
        Self { marks, prefix }
    }

    /// Total mark time in `(-inf, x]`.
    fn before(&self, x: f64) -> f64 {
        let k = self.marks.partition_point(|&(r, _)| r < x);
        if k == 0 {
            return 0.0;
        }
        let (r, f) = self.marks[k - 1];
        self.prefix[k - 1] + (x.min(f) - r)
    }

    fn within(&self, a: f64, b: f64) -> f64 {
        self.before(b) - self.before(a)
    }
}

/// Maximum mark time inside any window of length `window_s`, and where that window starts.
///
/// `marks` must be sorted and non-overlapping `(rise_s, fall_s)` pairs. The on-time as a function
/// of the window start is piecewise linear; its maximum is reached where its slope drops, i.e.
/// with the window start on a rising edge or the window end on a falling edge, so only those
/// starts are searched (exact, `O(n log n)`). Either set alone already reaches the maximum
/// (a flat top always touches a rising start and a falling end); both are searched as a
/// cross-check. Returns `(0.0, 0.0)` for no marks.
pub fn worst_window_on_time_s(marks: &[(f64, f64)], window_s: f64) -> (f64, f64) {
    let index = MarkIndex::new(marks);
    let mut best = (0.0, marks.first().map_or(0.0, |m| m.0));
    let starts = marks
        .iter()
        .map(|&(r, _)| r)
        .chain(marks.iter().map(|&(_, f)| f - window_s));
    for start in starts {
        let on = index.within(start, start + window_s);
        if on > best.0 {
            best = (on, start);
        }
    }
    best
}

fn median(values: &mut [f64]) -> Option<f64> {
    if values.is_empty() {
        return None;
    }
    values.sort_by(f64::total_cmp);
    let n = values.len();
    Some(if n % 2 == 1 {
        values[n / 2]
    } else {
        0.5 * (values[n / 2 - 1] + values[n / 2])
    })
}

fn frame_bounds(marks: &[(f64, f64)]) -> (f64, f64, f64) {
    let start = marks.first().map_or(0.0, |m| m.0);
    let end = marks.last().map_or(0.0, |m| m.1);
    let on: f64 = marks.iter().map(|&(r, f)| f - r).sum();
    (start, end, on)
}

/// Airtime figures of a validated code.
pub(crate) fn analyse(code: &CodeTiming) -> Result<(CodeAirtime, Vec<PressAirtime>), BudgetError> {
    let mut presses = Vec::with_capacity(code.presses.len());
    let mut frame_air = Vec::new();
    let mut frame_on = Vec::new();
    let mut periods = Vec::new();
    let mut repeats = Vec::new();
    let mut prev_end: Option<f64> = None;
    for (p, press) in code.presses.iter().enumerate() {
        let mut all_marks = Vec::new();
        let mut spans = 0.0;
        let mut prev_start: Option<f64> = None;
        for frame in &press.frames {
            let (start, end, on) = frame_bounds(&frame.marks);
            frame_air.push(end - start);
            frame_on.push(on);
            spans += end - start;
            if let Some(ps) = prev_start {
                periods.push(start - ps);
            }
            prev_start = Some(start);
            all_marks.extend_from_slice(&frame.marks);
        }
        let (start, end, on) = frame_bounds(&all_marks);
        let (worst, worst_start) = worst_window_on_time_s(&all_marks, WINDOW_S);
        let airtime = end - start;
        repeats.push(press.frames.len() as f64);
        presses.push(PressAirtime {
            press: p + 1,
            start_s: start,
            end_s: end,
            truncated: press.truncated,
            repeats: press.frames.len(),
            airtime_ms: airtime * 1e3,
            on_time_ms: on * 1e3,
            mark_fraction: on / airtime,
            frame_spans_ms: spans * 1e3,
            worst_window_on_time_ms: worst * 1e3,
            worst_window_start_s: worst_start,
            gap_before_s: prev_end.map(|e| start - e),
        });
        prev_end = Some(end);
    }
    let invalid = |detail: &str| BudgetError::InvalidTiming {
        key_id: code.key_id.clone(),
        detail: detail.to_string(),
    };
    let longest = presses
        .iter()
        .max_by(|a, b| a.airtime_ms.total_cmp(&b.airtime_ms))
        .ok_or_else(|| invalid("no presses"))?;
    let worst = presses
        .iter()
        .max_by(|a, b| {
            a.worst_window_on_time_ms
                .total_cmp(&b.worst_window_on_time_ms)
        })
        .ok_or_else(|| invalid("no presses"))?;
    let max_of = |f: fn(&PressAirtime) -> f64| presses.iter().map(f).fold(0.0, f64::max);
    let frame_airtime_ms = median(&mut frame_air).ok_or_else(|| invalid("no frames"))? * 1e3;
    let frame_on_time_ms = median(&mut frame_on).ok_or_else(|| invalid("no frames"))? * 1e3;
    let min_gap_s = presses
        .iter()
        .filter_map(|p| p.gap_before_s)
        .min_by(f64::total_cmp);
    let code_air = CodeAirtime {
        presses: presses.len(),
        truncated_presses: presses.iter().filter(|p| p.truncated).count(),
        frames: frame_on.len(),
        repeats_median: median(&mut repeats).unwrap_or(0.0),
        repeats_max: presses.iter().map(|p| p.repeats).max().unwrap_or(0),
        frame_airtime_ms,
        frame_on_time_ms,
        frame_mark_fraction: frame_on_time_ms / frame_airtime_ms,
        frame_period_ms: median(&mut periods).map(|p| p * 1e3),
        longest_press: longest.press,
        press_airtime_ms: longest.airtime_ms,
        press_on_time_ms: longest.on_time_ms,
        press_mark_fraction: longest.mark_fraction,
        window_ms: WINDOW_S * 1e3,
        worst_window_on_time_ms: worst.worst_window_on_time_ms,
        worst_window_start_s: worst.worst_window_start_s,
        duty_times: vec![
            DutyTime {
                convention: DutyConvention::MarksOnly,
                press_time_ms: max_of(|p| p.on_time_ms),
            },
            DutyTime {
                convention: DutyConvention::FrameSpans,
                press_time_ms: max_of(|p| p.frame_spans_ms),
            },
        ],
        min_gap_s,
    };
    Ok((code_air, presses))
}
