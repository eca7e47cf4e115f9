//! CSV: one row per decoded frame, in capture time order.
//!
//! The header row is [`CSV_HEADER`]:
//!
//! | column              | meaning                                                          |
//! |---------------------|------------------------------------------------------------------|
//! | `capture`           | the capture's path as given                                      |
//! | `press_index`       | 1-based press number in the capture, by start time (all codes)   |
//! | `frame_index`       | 1-based frame number within its press                            |
//! | `start_s`           | frame's first rising edge, seconds from capture start            |
//! | `carrier_offset_hz` | the code's carrier offset from the centre; empty for envelopes   |
//! | `line_code`         | `pwm`, `ppm`, ...                                                |
//! | `key_id`            | the code's stable identifier (same as the JSON report)           |
//! | `bits`              | the frame's code as `0`/`1`, MSB first (the voted press code)    |
//! | `hex`               | the bits in hex, MSB first, left-padded to whole nibbles         |
//! | `airtime_ms`        | the frame's first rising edge to its last falling edge           |
//! | `on_time_ms`        | total mark time of the frame                                     |
//! | `snr_db`            | the code's median mark level over the noise floor                |
//!
//! Spreadsheets read `bits` and `hex` as numbers unless told otherwise: import those two
//! columns as text. Fields are quoted only when they need it (RFC 4180).
//!
//! ```
//! use ooksift::interchange::csv::CSV_HEADER;
//! assert_eq!(CSV_HEADER[0], "capture");
//! ```

use super::InterchangeError;
use crate::output::AtomicFile;
use crate::report::DecodeReport;
use crate::units::round_to;
use std::io::Write;
use std::path::Path;

/// The header row.
pub const CSV_HEADER: [&str; 12] = [
    "capture",
    "press_index",
    "frame_index",
    "start_s",
    "carrier_offset_hz",
    "line_code",
    "key_id",
    "bits",
    "hex",
    "airtime_ms",
    "on_time_ms",
    "snr_db",
];

/// One decoded frame, as a CSV row.
#[derive(Debug, Clone, PartialEq)]
pub struct FrameRow {
    /// The capture's path.
    pub capture: String,
    /// 1-based press number by start time.
    pub press_index: usize,
    /// 1-based frame number within the press.
    pub frame_index: usize,
    /// First rising edge, seconds.
    pub start_s: f64,
    /// Carrier offset of the code (none for envelopes).
    pub carrier_offset_hz: Option<f64>,
    /// Line code.
    pub line_code: String,
    /// Key identifier.
    pub key_id: String,
    /// Bits, MSB first.
    pub bits: String,
    /// Hex of the bits.
    pub hex: String,
    /// First rise to last fall of the frame.
    pub airtime_ms: f64,
    /// Mark time of the frame.
    pub on_time_ms: f64,
    /// The code's SNR.
    pub snr_db: f64,
}

impl FrameRow {
    fn fields(&self) -> [String; 12] {
        [
            self.capture.clone(),
            self.press_index.to_string(),
            self.frame_index.to_string(),
            self.start_s.to_string(),
            self.carrier_offset_hz
                .map_or_else(String::new, |v| v.to_string()),
            self.line_code.clone(),
            self.key_id.clone(),
            self.bits.clone(),
            self.hex.clone(),
            self.airtime_ms.to_string(),
            self.on_time_ms.to_string(),
            self.snr_db.to_string(),
        ]
    }
}

/// Every frame of a report, ordered by start time; presses are numbered across codes.
pub fn frame_rows(r: &DecodeReport) -> Vec<FrameRow> {
    // (press start, code index, press index within the code)
    let mut presses: Vec<(f64, usize, usize)> = Vec::new();
    for (ci, code) in r.codes.iter().enumerate() {
        for (pi, p) in code.timeline.iter().enumerate() {
            presses.push((p.start_s, ci, pi));
        }
    }
    presses.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    let mut rows = Vec::new();
    for (n, &(_, ci, pi)) in presses.iter().enumerate() {
        let code = &r.codes[ci];
        for (fi, f) in code.timeline[pi].frames.iter().enumerate() {
            let m = &f.marks_us;
            let airtime_us = m.last().copied().unwrap_or(0.0) - m.first().copied().unwrap_or(0.0);
            let on_us: f64 = m
                .chunks(2)
                .filter(|c| c.len() == 2)
                .map(|c| c[1] - c[0])
                .sum();
            rows.push(FrameRow {
                capture: r.capture.path.clone(),
                press_index: n + 1,
                frame_index: fi + 1,
                start_s: f.start_s,
                carrier_offset_hz: code.carrier_offset_hz,
                line_code: code.line_code.clone(),
                key_id: code.key_id.clone(),
                bits: code.bits.clone(),
                hex: code.hex.clone(),
                airtime_ms: round_to(airtime_us / 1e3, 4),
                on_time_ms: round_to(on_us / 1e3, 4),
                snr_db: code.snr_db,
            });
        }
    }
    rows.sort_by(|a, b| {
        a.start_s
            .total_cmp(&b.start_s)
            .then(a.press_index.cmp(&b.press_index))
    });
    rows
}

/// Writes the header and the rows of every report to `w`.
pub fn write_csv<W: Write>(reports: &[DecodeReport], w: W) -> Result<(), InterchangeError> {
    let mut out = ::csv::Writer::from_writer(w);
    let err = |e: ::csv::Error| InterchangeError::Io(std::io::Error::other(e.to_string()));
    out.write_record(CSV_HEADER).map_err(err)?;
    for r in reports {
        for row in frame_rows(r) {
            out.write_record(row.fields()).map_err(err)?;
        }
    }
    out.flush()?;
    Ok(())
}

/// Writes the CSV of `reports` to `path` atomically (an existing file only with `force`).
pub fn write_csv_file(
    reports: &[DecodeReport],
    path: &Path,
    force: bool,
) -> Result<(), InterchangeError> {
    if path.as_os_str() == "-" {
        return Err(InterchangeError::Unsupported(
            "the CSV goes to a file; `-` (standard output) would mix it with the report".into(),
        ));
    }
    let mut f = AtomicFile::create(path, force)?;
    write_csv(reports, &mut f)?;
    f.commit()?;
    Ok(())
}
