//! Line codes: each slicer rates a burst under its hypothesis and slices it into frames of bits.
//!
//! [`assess`] splits a burst into frames at its sync spaces, runs every slicer, and returns
//! the candidates best first. Scores lie in [0, 1]: how well the hypothesis explains the
//! measured widths. Ties go to the earlier slicer in [`SLICERS`] order (PWM, PPM,
//! Manchester, differential Manchester, NRZ).
//!
//! Bit conventions (DESIGN.md): PWM — the wider mark is 1; PPM — the wider space is 1.

pub mod chips;
mod ppm;
mod pwm;

use crate::edges::Mark;
use crate::timing::{self, median};
use serde::{Deserialize, Serialize};
use std::fmt;

/// A line code.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
#[non_exhaustive]
pub enum LineCode {
    /// Pulse-width: one mark and the space after it per bit; the wider mark is 1.
    Pwm,
    /// Pulse-distance: alike marks; the space between two marks is the bit; wider is 1.
    Ppm,
    /// Manchester, IEEE 802.3 convention by default (a rising mid-bit transition is 1).
    Manchester,
    /// Differential Manchester: 1 = no transition at the bit start.
    #[serde(rename = "diff_manchester")]
    DiffManchester,
    /// NRZ: one unit per bit, mark = 1.
    Nrz,
}

impl LineCode {
    /// The lower-case name used in reports.
    pub fn name(self) -> &'static str {
        match self {
            LineCode::Pwm => "pwm",
            LineCode::Ppm => "ppm",
            LineCode::Manchester => "manchester",
            LineCode::DiffManchester => "diff_manchester",
            LineCode::Nrz => "nrz",
        }
    }
}

impl fmt::Display for LineCode {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl std::str::FromStr for LineCode {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s.to_ascii_lowercase().as_str() {
            "pwm" => Ok(LineCode::Pwm),
            "ppm" => Ok(LineCode::Ppm),
            "manchester" => Ok(LineCode::Manchester),
            "diff_manchester" => Ok(LineCode::DiffManchester),
            "nrz" => Ok(LineCode::Nrz),
            other => Err(format!(
                "unknown line code '{other}' (pwm, ppm, manchester, diff_manchester or nrz)"
            )),
        }
    }
}

/// Marks of one burst cut into frames.
#[derive(Debug, Clone)]
pub struct BurstFrames<'a> {
    /// All marks of the burst.
    pub marks: &'a [Mark],
    /// Inclusive mark-index ranges of the frames.
    pub frames: Vec<(usize, usize)>,
    /// Spaces between frames (samples).
    pub gaps: Vec<f64>,
    /// Whether each frame opens with a header (long mark + its space).
    pub header: Vec<bool>,
}

impl<'a> BurstFrames<'a> {
    /// Cuts `marks` into frames at the spaces [`timing::frame_gap_threshold`] finds, and
    /// marks frames whose first mark is far longer than the burst's other marks as headed.
    pub fn new(marks: &'a [Mark]) -> BurstFrames<'a> {
        let spaces: Vec<f64> = marks.windows(2).map(|w| w[1].rise - w[0].fall).collect();
        let thr = timing::frame_gap_threshold(&spaces);
        let mut frames = Vec::new();
        let mut gaps = Vec::new();
        let mut start = 0;
        for (i, &s) in spaces.iter().enumerate() {
            if thr.is_some_and(|t| s > t) {
                frames.push((start, i));
                gaps.push(s);
                start = i + 1;
            }
        }
        if !marks.is_empty() {
            frames.push((start, marks.len() - 1));
        }
        // Reference width: the 90th percentile of marks that do not open a frame.
        let mut inner: Vec<f64> = Vec::new();
        for &(a, b) in &frames {
            inner.extend(marks[a + 1..=b].iter().map(Mark::width));
        }
        inner.sort_by(f64::total_cmp);
        let reference = inner
            .get((inner.len() as f64 * 0.9) as usize)
            .or(inner.last())
            .copied();
        let header = frames
            .iter()
            .map(|&(a, b)| b > a && reference.is_some_and(|r| marks[a].width() > 1.6 * r))
            .collect();
        BurstFrames {
            marks,
            frames,
            gaps,
            header,
        }
    }

    /// Space after mark `i` (samples); infinite after the burst's last mark.
    pub fn space_after(&self, i: usize) -> f64 {
        match self.marks.get(i + 1) {
            Some(n) => n.rise - self.marks[i].fall,
            None => f64::INFINITY,
        }
    }

    /// First data mark of frame `f` (after its header, if any).
    pub fn data_start(&self, f: usize) -> usize {
        self.frames[f].0 + usize::from(self.header[f])
    }
}

/// A frame sliced into bits.
#[derive(Debug, Clone, PartialEq)]
pub struct SlicedFrame {
    /// Data bits (preamble, header, sync and stop marks excluded).
    pub bits: Vec<bool>,
    /// Index of the frame's first mark (header included) in the burst.
    pub first_mark: usize,
    /// Index of the frame's last mark (closing/stop mark included).
    pub last_mark: usize,
}

/// Framing elements around the data bits, in samples (medians over the burst's frames).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Layout {
    /// Header mark and the space after it.
    pub header: Option<(f64, f64)>,
    /// A mark closing the frame that is not a data bit (PWM sync mark, PPM stop mark).
    pub closing_mark: Option<f64>,
    /// Space between repeats.
    pub gap: Option<f64>,
    /// Preamble bits (NRZ), reported apart from the data.
    pub preamble: Option<Vec<bool>>,
    /// Sync word bits (NRZ), reported apart from the data.
    pub sync_word: Option<Vec<bool>>,
}

/// One hypothesis' reading of a burst.
#[derive(Debug, Clone)]
pub struct Candidate {
    /// The hypothesis.
    pub line_code: LineCode,
    /// How well it explains the widths, 0 to 1.
    pub score: f64,
    /// The frames it sliced.
    pub frames: Vec<SlicedFrame>,
    /// Base unit in capture samples.
    pub unit: f64,
    /// Header, closing mark and gap.
    pub layout: Layout,
}

/// A slicer function: rates and slices a framed burst, or declines.
pub type Slicer = fn(&BurstFrames<'_>) -> Option<Candidate>;

/// The registry of slicers, in tie-break order.
pub const SLICERS: &[Slicer] = &[
    pwm::slice,
    ppm::slice,
    chips::slice_manchester,
    chips::slice_diff_manchester,
    chips::slice_nrz,
];

/// Every slicer's candidate for a burst, best first.
pub fn assess(marks: &[Mark]) -> Vec<Candidate> {
    let bf = BurstFrames::new(marks);
    let mut out: Vec<Candidate> = SLICERS.iter().filter_map(|s| s(&bf)).collect();
    // Stable sort keeps registry order on equal scores.
    out.sort_by(|a, b| b.score.total_cmp(&a.score));
    out
}

/// Maps a width ratio to a separation score: 0 at 1.25 or below, 1 at 1.75 or above.
pub(crate) fn separation_score(ratio: f64) -> f64 {
    ((ratio - 1.25) / 0.5).clamp(0.0, 1.0)
}

/// Median header, closing mark and gap over the frames that have them.
pub(crate) fn layout_of(bf: &BurstFrames<'_>, closing: &[f64]) -> Layout {
    let mut hm = Vec::new();
    let mut hs = Vec::new();
    for (f, &(a, _)) in bf.frames.iter().enumerate() {
        if bf.header[f] {
            hm.push(bf.marks[a].width());
            hs.push(bf.space_after(a));
        }
    }
    let majority = hm.len() * 2 > bf.frames.len();
    Layout {
        header: majority.then(|| (median(&hm), median(&hs))),
        closing_mark: (!closing.is_empty() && closing.len() * 2 >= bf.frames.len())
            .then(|| median(closing)),
        gap: (!bf.gaps.is_empty()).then(|| median(&bf.gaps)),
        preamble: None,
        sync_word: None,
    }
}

#[cfg(test)]
pub(crate) mod test_marks {
    use crate::edges::Mark;

    /// Marks from (mark, space) widths in samples; the last space is ignored.
    pub fn from_widths(pairs: &[(f64, f64)]) -> Vec<Mark> {
        let mut t = 1000.0;
        pairs
            .iter()
            .map(|&(m, s)| {
                let mk = Mark {
                    rise: t,
                    fall: t + m,
                    level: 1.0,
                    noise: 0.01,
                    lag: Default::default(),
                };
                t += m + s;
                mk
            })
            .collect()
    }

    /// PWM 1:3 frames with a closing 1-unit mark and a 31-unit gap.
    pub fn pwm(bits: &str, unit: f64, repeats: usize) -> Vec<Mark> {
        let mut pairs = Vec::new();
        for _ in 0..repeats {
            for c in bits.chars() {
                pairs.push(if c == '1' {
                    (3.0 * unit, unit)
                } else {
                    (unit, 3.0 * unit)
                });
            }
            pairs.push((unit, 31.0 * unit));
        }
        from_widths(&pairs)
    }

    /// PPM frames: header 8+4 units, 1-unit marks, spaces 1 (0) or 3 (1), stop mark, 40-unit gap.
    pub fn ppm(bits: &str, unit: f64, repeats: usize) -> Vec<Mark> {
        let mut pairs = Vec::new();
        for _ in 0..repeats {
            pairs.push((8.0 * unit, 4.0 * unit));
            for c in bits.chars() {
                pairs.push((unit, if c == '1' { 3.0 * unit } else { unit }));
            }
            pairs.push((unit, 40.0 * unit));
        }
        from_widths(&pairs)
    }
}

#[cfg(test)]
mod tests {
    use super::test_marks;
    use super::*;

    fn bits_of(c: &Candidate) -> Vec<String> {
        c.frames
            .iter()
            .map(|f| f.bits.iter().map(|&b| if b { '1' } else { '0' }).collect())
            .collect()
    }

    #[test]
    fn pwm_burst_is_read_as_pwm() {
        let marks = test_marks::pwm("110100101100", 87.5, 4);
        let c = assess(&marks);
        assert_eq!(c[0].line_code, LineCode::Pwm);
        assert!(c[0].score > 0.9);
        assert_eq!(bits_of(&c[0]), vec!["110100101100"; 4]);
        assert!((c[0].unit - 87.5).abs() < 0.01);
        assert_eq!(c[0].layout.closing_mark, Some(87.5));
        assert!(c[0].score > c[1].score);
    }

    #[test]
    fn ppm_burst_is_read_as_ppm_with_its_header() {
        let marks = test_marks::ppm("1011001110001011", 100.0, 3);
        let c = assess(&marks);
        assert_eq!(c[0].line_code, LineCode::Ppm);
        assert_eq!(bits_of(&c[0]), vec!["1011001110001011"; 3]);
        assert!((c[0].unit - 100.0).abs() < 0.01);
        assert_eq!(c[0].layout.header, Some((800.0, 400.0)));
        assert_eq!(c[0].layout.closing_mark, Some(100.0));
        assert_eq!(c[0].layout.gap, Some(4000.0));
    }

    #[test]
    fn stretched_marks_do_not_bias_the_unit() {
        // A receiver that lengthens marks by 20 % of a unit and shortens spaces alike.
        let mut marks = test_marks::pwm("1001011010", 100.0, 3);
        for m in &mut marks {
            m.fall += 20.0;
        }
        let c = assess(&marks);
        assert_eq!(c[0].line_code, LineCode::Pwm);
        assert!((c[0].unit - 100.0).abs() < 0.5, "{}", c[0].unit);
    }
}
