//! The synth specification: presses (codes and their timing) and the channel.

use super::SynthError;
use crate::coding::LineCode;
use serde::{Deserialize, Serialize};

/// A whole capture to write.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(default, deny_unknown_fields)]
pub struct SynthSpec {
    /// A datatype name (`cu8`, `ci16_le`, `cf32_le`, `ru8`, ...), `wav` (mono envelope),
    /// `wav-iq` (stereo I/Q) or `sigmf` (with `datatype`, default `ci16_le`).
    pub format: String,
    /// Dataset format of a SigMF output.
    pub datatype: Option<String>,
    /// WAV sample size: 8, 16, 24 or 32 (integer), or 0 for 32-bit float.
    pub wav_bits: u16,
    /// Sample rate.
    pub rate_hz: f64,
    /// Centre frequency recorded in SigMF metadata.
    pub center_hz: Option<f64>,
    /// Seed of the noise and random phases.
    pub seed: u64,
    /// Silence before the first press.
    pub lead_ms: f64,
    /// Silence after the last press.
    pub tail_ms: f64,
    /// The capture lasts at least this long (pure-noise captures have no presses).
    pub min_duration_ms: f64,
    /// The channel.
    pub channel: ChannelSpec,
    /// The presses, in time order.
    pub presses: Vec<PressSpec>,
}

impl Default for SynthSpec {
    fn default() -> Self {
        SynthSpec {
            format: "cu8".into(),
            datatype: None,
            wav_bits: 16,
            rate_hz: 250_000.0,
            center_hz: None,
            seed: 1,
            lead_ms: 40.0,
            tail_ms: 40.0,
            min_duration_ms: 0.0,
            channel: ChannelSpec::default(),
            presses: Vec::new(),
        }
    }
}

/// The channel between transmitter and file.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(default, deny_unknown_fields)]
pub struct ChannelSpec {
    /// Eu/N0 in dB (A²·T_unit/N0, unit of the first press); `None` writes no noise.
    pub snr_db: Option<f64>,
    /// Carrier (IQ) or mark (envelope) amplitude, full scale = 1.
    pub amplitude: f64,
    /// Envelope outputs: the idle level.
    pub idle_level: f64,
    /// IQ outputs: DC offset, in-phase and quadrature.
    pub dc: [f64; 2],
    /// Edge ramp duration (0 = one sample).
    pub edge_us: f64,
    /// Envelope outputs: every mark lengthened (and the space after it shortened) by this.
    pub stretch_us: f64,
    /// Envelope outputs: written upside down (marks low).
    pub invert: bool,
    /// IQ outputs: continuous carriers (interferers) as [offset_hz, amplitude] pairs.
    pub tones: Vec<[f64; 2]>,
    /// Envelope outputs: AC coupling as a sound card input has it, a single-pole high-pass
    /// of this time constant in ms (droop on long marks, undershoot after); `None` for DC.
    pub ac_tau_ms: Option<f64>,
    /// Envelope outputs: samples clipped to ±`clip` (full scale 1) after everything else.
    pub clip: Option<f64>,
    /// Every edge displaced by Gaussian jitter of this standard deviation, µs.
    pub jitter_us: f64,
    /// Envelope outputs: a superregenerative receiver's idle chatter in the silences between
    /// presses (random marks and spaces at full level, widths log-uniform in 30 µs–1.5 ms),
    /// stopping [`CHATTER_GUARD_MS`] before each press and resuming as long after it.
    ///
    /// Model choices (common practice): with no carrier the receiver's data slicer turns its
    /// own noise into pulses at the same full level as a press's marks, on about half the
    /// time, with widths spread over a wide range; a press is captured cleanly, so its repeats
    /// carry no chatter. Level and silence therefore cannot tell chatter from a code; only
    /// the regularity of the widths can.
    pub chatter: bool,
}

/// Quiet time kept between chatter and a press, ms.
pub const CHATTER_GUARD_MS: f64 = 5.0;

impl Default for ChannelSpec {
    fn default() -> Self {
        ChannelSpec {
            snr_db: Some(30.0),
            amplitude: 0.5,
            idle_level: 0.05,
            dc: [0.0, 0.0],
            edge_us: 0.0,
            stretch_us: 0.0,
            invert: false,
            tones: Vec::new(),
            ac_tau_ms: None,
            clip: None,
            jitter_us: 0.0,
            chatter: false,
        }
    }
}

/// One press: a code sent `repeats` times.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(default, deny_unknown_fields)]
pub struct PressSpec {
    /// `pwm` or `ppm`.
    pub line_code: String,
    /// Data bits as `0`/`1` characters, or hex with a `0x` prefix (4 bits per digit).
    pub bits: String,
    /// Nominal unit.
    pub unit_us: f64,
    /// Frames in the press.
    pub repeats: usize,
    /// Silence between the previous press (or the lead-in) and this one.
    pub gap_before_ms: Option<f64>,
    /// Start time from the capture start, instead of after the previous press (presses may
    /// then overlap in time).
    pub at_ms: Option<f64>,
    /// Carrier drift across the press: the offset moves linearly by this much from the first
    /// mark to the last.
    pub drift_hz: f64,
    /// Carrier offset from the centre (IQ outputs).
    pub carrier_offset_hz: f64,
    /// Carrier phase at the press start in radians (random when absent).
    pub phase: Option<f64>,
    /// Encoder clock error: every duration scaled by `1 + clock_error`.
    pub clock_error: f64,
    /// Encoder clock drift across the press: the unit scales linearly from `1` at the press
    /// start to `1 + drift` at its end (on top of `clock_error`).
    pub drift: f64,
    /// Units of mark and space for a 0 bit (default PWM 1/3, PPM 1/1).
    pub zero: Option<[f64; 2]>,
    /// Units of mark and space for a 1 bit (default PWM 3/1, PPM 1/3).
    pub one: Option<[f64; 2]>,
    /// Header mark and space in units (default PPM 8/4, PWM none; `[0, 0]` for none).
    pub header: Option<[f64; 2]>,
    /// Closing mark in units (default 1; 0 for none).
    pub closing_mark: Option<f64>,
    /// Space between repeats in units (default PWM 31, PPM 40, chip codes 20).
    pub gap_units: Option<f64>,
    /// NRZ: alternating preamble bits before the sync word (default 16; 0 for none).
    pub preamble_bits: Option<usize>,
    /// NRZ: sync word between preamble and data, 0/1 or 0x-hex (default 0x3b91).
    pub sync_word: Option<String>,
}

impl Default for PressSpec {
    fn default() -> Self {
        PressSpec {
            line_code: "pwm".into(),
            bits: String::new(),
            unit_us: 350.0,
            repeats: 5,
            gap_before_ms: None,
            at_ms: None,
            drift_hz: 0.0,
            carrier_offset_hz: 0.0,
            phase: None,
            clock_error: 0.0,
            drift: 0.0,
            zero: None,
            one: None,
            header: None,
            closing_mark: None,
            gap_units: None,
            preamble_bits: None,
            sync_word: None,
        }
    }
}

/// A press's resolved layout, in seconds.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Layout {
    pub line_code: LineCode,
    pub bits: String,
    pub unit_s: f64,
    pub zero: [f64; 2],
    pub one: [f64; 2],
    pub header: Option<[f64; 2]>,
    pub closing: Option<f64>,
    pub gap: f64,
    /// Chip codes: the chips of one frame (1 = mark), one unit each.
    pub chips: Option<Vec<u8>>,
}

impl PressSpec {
    /// A press of `bits` in `line_code` with default timing.
    pub fn new(line_code: &str, bits: &str) -> PressSpec {
        PressSpec {
            line_code: line_code.into(),
            bits: bits.into(),
            ..PressSpec::default()
        }
    }

    /// The data bits as a `0`/`1` string.
    pub fn bit_string(&self) -> Result<String, SynthError> {
        let b = self.bits.trim();
        if let Some(hex) = b.strip_prefix("0x").or_else(|| b.strip_prefix("0X")) {
            let mut s = String::new();
            for c in hex.chars() {
                let v = c
                    .to_digit(16)
                    .ok_or_else(|| SynthError::Spec(format!("'{c}' is not a hex digit in {b}")))?;
                s.push_str(&format!("{v:04b}"));
            }
            Ok(s)
        } else if !b.is_empty() && b.chars().all(|c| c == '0' || c == '1') {
            Ok(b.to_string())
        } else {
            Err(SynthError::Spec(format!(
                "bits '{b}' must be 0/1 characters or 0x-prefixed hex"
            )))
        }
    }

    pub(crate) fn layout(&self) -> Result<Layout, SynthError> {
        let line_code: LineCode = self.line_code.parse().map_err(SynthError::Spec)?;
        let bits = self.bit_string()?;
        if !(self.unit_us.is_finite() && self.unit_us > 0.0) {
            return Err(SynthError::Spec(format!(
                "unit_us {} must be > 0",
                self.unit_us
            )));
        }
        if self.repeats == 0 {
            return Err(SynthError::Spec("repeats must be at least 1".into()));
        }
        if self.clock_error.is_nan() || self.clock_error.abs() >= 0.5 {
            return Err(SynthError::Spec("clock_error must be within ±0.5".into()));
        }
        if self.drift.is_nan() || self.drift.abs() >= 0.5 {
            return Err(SynthError::Spec("drift must be within ±0.5".into()));
        }
        let (zero, one, header, gap) = match line_code {
            LineCode::Pwm => ([1.0, 3.0], [3.0, 1.0], None, 31.0),
            LineCode::Ppm => ([1.0, 1.0], [1.0, 3.0], Some([8.0, 4.0]), 40.0),
            _ => ([1.0, 1.0], [1.0, 1.0], None, 20.0),
        };
        let bools: Vec<bool> = bits.chars().map(|c| c == '1').collect();
        let chips = match line_code {
            LineCode::Manchester => Some(crate::coding::chips::biphase_chips(&bools, false)),
            LineCode::DiffManchester => Some(crate::coding::chips::biphase_chips(&bools, true)),
            LineCode::Nrz => {
                let n = self.preamble_bits.unwrap_or(16);
                let sync = PressSpec {
                    bits: self.sync_word.clone().unwrap_or_else(|| "0x3b91".into()),
                    ..PressSpec::default()
                }
                .bit_string()?;
                let mut c: Vec<u8> = (0..n).map(|i| u8::from(i % 2 == 0)).collect();
                c.extend(sync.chars().map(|ch| u8::from(ch == '1')));
                c.extend(bools.iter().map(|&b| u8::from(b)));
                Some(c)
            }
            _ => None,
        };
        let header = match self.header {
            Some([m, _]) if m <= 0.0 => None,
            Some(h) => Some(h),
            None => header,
        };
        let closing = match self.closing_mark {
            Some(c) if c <= 0.0 => None,
            Some(c) => Some(c),
            None => Some(1.0),
        };
        Ok(Layout {
            line_code,
            bits,
            unit_s: self.unit_us * 1e-6 * (1.0 + self.clock_error),
            zero: self.zero.unwrap_or(zero),
            one: self.one.unwrap_or(one),
            header,
            closing: if chips.is_some() { None } else { closing },
            gap: self.gap_units.unwrap_or(gap),
            chips,
        })
    }
}

impl Layout {
    /// Marks of one frame as (rise, fall) seconds from the frame start, and the frame's
    /// length up to the start of the next repeat.
    pub fn frame(&self) -> (Vec<(f64, f64)>, f64) {
        let u = self.unit_s;
        let mut t = 0.0;
        let mut marks = Vec::new();
        if let Some(chips) = &self.chips {
            // Marks are the runs of 1 chips; the frame ends with its last chip.
            let mut i = 0;
            while i < chips.len() {
                if chips[i] == 1 {
                    let j = chips[i..].iter().take_while(|&&c| c == 1).count();
                    marks.push((i as f64 * u, (i + j) as f64 * u));
                    i += j;
                } else {
                    i += 1;
                }
            }
            let end = marks.last().map_or(0.0, |m| m.1);
            return (marks, end + self.gap * u);
        }
        if let Some([m, s]) = self.header {
            marks.push((t, t + m * u));
            t += (m + s) * u;
        }
        for c in self.bits.chars() {
            let [m, s] = if c == '1' { self.one } else { self.zero };
            marks.push((t, t + m * u));
            t += (m + s) * u;
        }
        if let Some(c) = self.closing {
            marks.push((t, t + c * u));
            t += c * u;
        } else {
            // Without a closing mark the last bit's space merges into the gap.
            let last = if self.bits.ends_with('1') {
                self.one
            } else {
                self.zero
            };
            t -= last[1] * u;
        }
        (marks, t + self.gap * u)
    }
}

/// Parses a press given on the command line: `LINECODE:BITS[,key=value...]`.
///
/// Keys: `unit_us`, `repeats`, `gap_ms` (silence before the press), `at_ms` (absolute
/// start), `offset_hz`, `drift_hz` (carrier), `phase`, `clock_error`, `drift` (unit),
/// `zero=M/S`, `one=M/S`, `header=M/S`, `closing=U`, `gap_units=U`, and for
/// NRZ `preamble=N` (alternating bits) and `sync=BITS`.
///
/// ```
/// let p = ooksift::synth::parse_press("pwm:0xcf2b12,unit_us=350,repeats=5,offset_hz=20000").unwrap();
/// assert_eq!(p.repeats, 5);
/// assert_eq!(p.carrier_offset_hz, 20000.0);
/// ```
pub fn parse_press(text: &str) -> Result<PressSpec, SynthError> {
    let bad = |m: String| SynthError::Spec(format!("press '{text}': {m}"));
    let mut parts = text.split(',');
    let head = parts.next().unwrap_or("");
    let (code, bits) = head
        .split_once(':')
        .ok_or_else(|| bad("expected LINECODE:BITS first".into()))?;
    let mut p = PressSpec::new(code.trim(), bits.trim());
    let num = |k: &str, v: &str| -> Result<f64, SynthError> {
        v.parse::<f64>()
            .ok()
            .filter(|x| x.is_finite())
            .ok_or_else(|| bad(format!("{k}={v} is not a number")))
    };
    let pair = |k: &str, v: &str| -> Result<[f64; 2], SynthError> {
        let (a, b) = v
            .split_once('/')
            .ok_or_else(|| bad(format!("{k}={v} must be MARK/SPACE units")))?;
        Ok([num(k, a)?, num(k, b)?])
    };
    for kv in parts {
        let (k, v) = kv
            .split_once('=')
            .ok_or_else(|| bad(format!("'{kv}' is not key=value")))?;
        let (k, v) = (k.trim(), v.trim());
        match k {
            "unit_us" => p.unit_us = num(k, v)?,
            "repeats" => {
                p.repeats = v
                    .parse()
                    .map_err(|_| bad(format!("repeats={v} is not a count")))?
            }
            "gap_ms" => p.gap_before_ms = Some(num(k, v)?),
            "at_ms" => p.at_ms = Some(num(k, v)?),
            "drift_hz" => p.drift_hz = num(k, v)?,
            "offset_hz" => p.carrier_offset_hz = num(k, v)?,
            "phase" => p.phase = Some(num(k, v)?),
            "clock_error" => p.clock_error = num(k, v)?,
            "drift" => p.drift = num(k, v)?,
            "zero" => p.zero = Some(pair(k, v)?),
            "one" => p.one = Some(pair(k, v)?),
            "header" => p.header = Some(pair(k, v)?),
            "closing" => p.closing_mark = Some(num(k, v)?),
            "gap_units" => p.gap_units = Some(num(k, v)?),
            "preamble" => {
                p.preamble_bits = Some(
                    v.parse()
                        .map_err(|_| bad(format!("preamble={v} is not a count")))?,
                )
            }
            "sync" => p.sync_word = Some(v.to_string()),
            other => return Err(bad(format!("unknown key '{other}'"))),
        }
    }
    p.layout()?;
    Ok(p)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_common_practice_pwm_frame_is_128_units() {
        // facts.md §5.4 (common practice): 24 bits × 4 T + 32 T sync = 128 T → 44.8 ms at
        // T = 350 µs.
        let p = PressSpec::new("pwm", "0xaaaaaa");
        let (marks, period) = p.layout().expect("valid").frame();
        assert!((period - 0.0448).abs() < 1e-12, "{period}");
        assert_eq!(marks.len(), 25);
        // facts.md §7: marks of one 0xAAAAAA frame last 49 T = 17.15 ms.
        let on: f64 = marks.iter().map(|(r, f)| f - r).sum();
        assert!((on - 0.01715).abs() < 1e-12, "{on}");
    }

    #[test]
    fn hex_and_binary_bits_agree() {
        assert_eq!(
            PressSpec::new("pwm", "0xA5").bit_string().expect("hex"),
            "10100101"
        );
        assert!(PressSpec::new("pwm", "0x5g").bit_string().is_err());
        assert!(PressSpec::new("pwm", "0120").bit_string().is_err());
    }

    #[test]
    fn press_text_is_parsed_and_checked() {
        let p = parse_press("ppm:1011,unit_us=400,header=8/4,gap_units=40").expect("valid");
        assert_eq!(p.header, Some([8.0, 4.0]));
        assert!(parse_press("fsk:1011").is_err());
        assert!(parse_press("pwm:1011,unit_us=abc").is_err());
        assert!(parse_press("pwm:1011,colour=red").is_err());
    }
}
