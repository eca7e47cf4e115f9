//! Rendering a [`SynthSpec`] to a capture file and writing its truth sidecar.

use super::spec::{Layout, SynthSpec, CHATTER_GUARD_MS};
use super::SynthError;
use crate::frames::{hex_of, key_id};
use crate::output::{AtomicFile, OutputError};
use crate::rng::Rng;
use crate::source::Datatype;
use crate::timing::median;
use crate::units::round_to;
use serde::{Deserialize, Serialize};
use std::f64::consts::TAU;
use std::io::Write;
use std::path::{Path, PathBuf};

/// The truth sidecar: what was written, in the decode report's terms.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct TruthFile {
    /// Who wrote it.
    pub generator: String,
    /// The capture.
    pub capture: TruthCapture,
    /// One entry per distinct (line code, bits), in order of first press.
    pub codes: Vec<TruthCode>,
    /// The full specification, to reproduce the file.
    pub spec: Option<SynthSpec>,
}

/// The capture part of a truth file.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct TruthCapture {
    /// `cu8`, ..., `wav`, `sigmf`.
    pub format: String,
    /// Dataset format.
    pub datatype: String,
    /// Sample rate.
    pub sample_rate_hz: f64,
    /// Centre frequency if recorded.
    pub center_frequency_hz: Option<f64>,
    /// Samples written.
    pub samples: u64,
    /// Length in seconds.
    pub duration_s: f64,
}

/// One code as transmitted (the same fields and meanings as a decode report's code).
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct TruthCode {
    /// Stable identifier.
    pub key_id: String,
    /// Line code.
    pub line_code: String,
    /// Data bits.
    pub bits: String,
    /// Number of bits.
    pub bit_count: usize,
    /// Hex of the bits.
    pub hex: String,
    /// Unit as transmitted (clock error included).
    pub unit_us: f64,
    /// Carrier offset (null for envelope outputs).
    pub carrier_offset_hz: Option<f64>,
    /// Presses.
    pub presses: usize,
    /// Frames in all.
    pub frames: usize,
    /// Median frames per press.
    pub frames_per_press: f64,
    /// First rise to last fall of one frame.
    pub frame_airtime_ms: f64,
    /// Mark time of one frame.
    pub frame_on_time_ms: f64,
    /// Start-to-start of repeats (null if single).
    pub frame_period_ms: Option<f64>,
    /// First rise to last fall of one press.
    pub press_airtime_ms: f64,
    /// Mark time of one press.
    pub press_on_time_ms: f64,
    /// First rise of the first frame from capture start.
    pub first_start_s: f64,
}

/// The truth sidecar's path: the output name without its capture extension(s), plus
/// `.truth.json`.
pub fn truth_path(out: &Path) -> PathBuf {
    let s = out.display().to_string();
    let base = s
        .strip_suffix(".sigmf-meta")
        .or_else(|| s.strip_suffix(".sigmf-data"))
        .map(str::to_string)
        .unwrap_or_else(|| match (out.file_stem(), out.extension()) {
            (Some(_), Some(_)) => out.with_extension("").display().to_string(),
            _ => s.clone(),
        });
    PathBuf::from(format!("{base}.truth.json"))
}

struct TxMark {
    rise: f64,
    fall: f64,
    offset_hz: f64,
    phase: f64,
    /// Drift in Hz per second, from `t0`.
    drift_rate: f64,
    t0: f64,
}

struct PressPlan {
    layout: Layout,
    offset_hz: f64,
    drift_hz: f64,
    drift: f64,
    frames: Vec<Vec<(f64, f64)>>,
}

/// Superregenerative idle chatter: random marks and spaces, widths log-uniform in
/// 30 µs–1.5 ms (a spread of 50, about half the time on), full level like a press's marks,
/// filling every silence but a guard of [`CHATTER_GUARD_MS`] around presses (model choices:
/// common practice, see [`ChannelSpec::chatter`](super::spec::ChannelSpec::chatter)).
fn add_chatter(presses: &[PressPlan], duration: f64, rng: &mut Rng, marks: &mut Vec<TxMark>) {
    let guard = CHATTER_GUARD_MS * 1e-3;
    let mut quiet: Vec<(f64, f64)> = Vec::new();
    let mut from = 0.0;
    for p in presses {
        let start = p
            .frames
            .first()
            .and_then(|f| f.first())
            .map_or(from, |m| m.0);
        let end = p
            .frames
            .last()
            .and_then(|f| f.last())
            .map_or(start, |m| m.1);
        quiet.push((from, start - guard));
        from = end + guard;
    }
    quiet.push((from, duration));
    let width = |rng: &mut Rng| 30e-6 * (50.0f64).powf(rng.uniform());
    for (a, b) in quiet {
        let mut t = a + width(rng);
        loop {
            let w = width(rng);
            if t + w > b {
                break;
            }
            marks.push(TxMark {
                rise: t,
                fall: t + w,
                offset_hz: 0.0,
                phase: 0.0,
                drift_rate: 0.0,
                t0: 0.0,
            });
            t += w + width(rng);
        }
    }
}

fn plan(
    spec: &SynthSpec,
    iq: bool,
    rng: &mut Rng,
) -> Result<(Vec<PressPlan>, Vec<TxMark>, f64), SynthError> {
    let mut t = spec.lead_ms * 1e-3;
    let mut presses = Vec::new();
    let mut marks = Vec::new();
    for (i, p) in spec.presses.iter().enumerate() {
        let layout = p.layout()?;
        let default_gap = if i == 0 { 0.0 } else { 300.0 };
        let gap = p.gap_before_ms.unwrap_or(default_gap) * 1e-3;
        if !(gap.is_finite() && gap >= 0.0) {
            return Err(SynthError::Spec("gap_before_ms must be ≥ 0".into()));
        }
        t += gap;
        if let Some(at) = p.at_ms {
            if !(at.is_finite() && at >= 0.0) {
                return Err(SynthError::Spec("at_ms must be ≥ 0".into()));
            }
            t = at * 1e-3;
        }
        let phase = p.phase.unwrap_or_else(|| rng.uniform() * TAU);
        let (frame, period) = layout.frame();
        let span = (p.repeats.max(1) - 1) as f64 * period + frame.last().map_or(0.0, |m| m.1);
        let drift_rate = if span > 0.0 { p.drift_hz / span } else { 0.0 };
        let t0 = t;
        // Drift: the unit grows linearly by `drift` over the press's nominal length `len`,
        // so nominal time `x` from the press start lands at `x + drift·x²/(2·len)`.
        let len = frame.last().map_or(0.0, |m| m.1) + (p.repeats - 1) as f64 * period;
        let warp = |x: f64| x + p.drift * x * x / (2.0 * len.max(1e-12));
        let jitter = spec.channel.jitter_us.abs() * 1e-6;
        let mut frames = Vec::new();
        let mut end = t;
        for k in 0..p.repeats {
            let s = k as f64 * period;
            let mut f: Vec<(f64, f64)> = frame
                .iter()
                .map(|&(r, fa)| (t + warp(s + r), t + warp(s + fa)))
                .collect();
            if jitter > 0.0 {
                for m in &mut f {
                    let r = m.0 + jitter * rng.gauss();
                    let fa = m.1 + jitter * rng.gauss();
                    *m = (r, fa.max(r + 1e-9));
                }
            }
            end = f.last().map_or(end, |m| m.1);
            for &(r, fa) in &f {
                marks.push(TxMark {
                    rise: r,
                    fall: fa,
                    offset_hz: p.carrier_offset_hz,
                    phase,
                    drift_rate,
                    t0,
                });
            }
            frames.push(f);
        }
        presses.push(PressPlan {
            layout,
            offset_hz: p.carrier_offset_hz,
            drift_hz: p.drift_hz,
            drift: p.drift,
            frames,
        });
        t = t.max(end);
    }
    let duration = (t + spec.tail_ms * 1e-3).max(spec.min_duration_ms * 1e-3);
    if !(duration.is_finite() && duration > 0.0) {
        return Err(SynthError::Spec(
            "nothing to write: give presses or min_duration_ms".into(),
        ));
    }
    if spec.channel.chatter && !iq {
        add_chatter(&presses, duration, rng, &mut marks);
    }
    Ok((presses, marks, duration))
}

fn truth_codes(presses: &[PressPlan], iq: bool) -> Vec<TruthCode> {
    let mut groups: Vec<(String, String, Vec<&PressPlan>)> = Vec::new();
    for p in presses {
        let lc = p.layout.line_code.name().to_string();
        match groups
            .iter_mut()
            .find(|g| g.0 == lc && g.1 == p.layout.bits)
        {
            Some(g) => g.2.push(p),
            None => groups.push((lc, p.layout.bits.clone(), vec![p])),
        }
    }
    let ms = |s: f64| round_to(s * 1e3, 6);
    groups
        .into_iter()
        .map(|(lc, bits, ps)| {
            let first = ps[0];
            let f0 = &first.frames[0];
            let on = |f: &[(f64, f64)]| f.iter().map(|m| m.1 - m.0).sum::<f64>();
            let press_air: Vec<f64> = ps
                .iter()
                .map(|p| {
                    let last = &p.frames[p.frames.len() - 1];
                    last[last.len() - 1].1 - p.frames[0][0].0
                })
                .collect();
            let press_on: Vec<f64> = ps
                .iter()
                .map(|p| p.frames.iter().map(|f| on(f)).sum())
                .collect();
            TruthCode {
                key_id: key_id(&lc, &bits),
                hex: hex_of(&bits),
                bit_count: bits.len(),
                // With drift, the unit the press averages.
                unit_us: round_to(first.layout.unit_s * (1.0 + first.drift / 2.0) * 1e6, 6),
                // A drifting carrier is reported at its mean offset over the press.
                carrier_offset_hz: iq.then_some(first.offset_hz + 0.5 * first.drift_hz),
                presses: ps.len(),
                frames: ps.iter().map(|p| p.frames.len()).sum(),
                frames_per_press: median(
                    &ps.iter().map(|p| p.frames.len() as f64).collect::<Vec<_>>(),
                ),
                frame_airtime_ms: ms(f0[f0.len() - 1].1 - f0[0].0),
                frame_on_time_ms: ms(on(f0)),
                frame_period_ms: (first.frames.len() > 1)
                    .then(|| ms(first.frames[1][0].0 - f0[0].0)),
                press_airtime_ms: ms(median(&press_air)),
                press_on_time_ms: ms(median(&press_on)),
                first_start_s: round_to(f0[0].0, 9),
                line_code: lc,
                bits,
            }
        })
        .collect()
}

/// What kind of file the format names.
enum Kind {
    Raw(Datatype),
    Wav { iq: bool, bits: u16 },
    Sigmf(Datatype),
}

fn kind_of(spec: &SynthSpec) -> Result<Kind, SynthError> {
    let bits = spec.wav_bits;
    if !matches!(bits, 0 | 8 | 16 | 24 | 32) {
        return Err(SynthError::Spec(format!(
            "wav_bits {bits}: use 8, 16, 24, 32 or 0 (32-bit float)"
        )));
    }
    Ok(match spec.format.as_str() {
        "wav" => Kind::Wav { iq: false, bits },
        "wav-iq" => Kind::Wav { iq: true, bits },
        "sigmf" => {
            let d: Datatype = spec
                .datatype
                .as_deref()
                .unwrap_or("ci16_le")
                .parse()
                .map_err(|e: crate::source::UnknownDatatype| SynthError::Spec(e.to_string()))?;
            Kind::Sigmf(d)
        }
        other => Kind::Raw(
            other
                .parse()
                .map_err(|e: crate::source::UnknownDatatype| SynthError::Spec(e.to_string()))?,
        ),
    })
}

fn wav_header(iq: bool, bits: u16, rate: u32, frames: u64) -> Result<Vec<u8>, SynthError> {
    let channels: u16 = if iq { 2 } else { 1 };
    let (fmt_tag, bps): (u16, u16) = if bits == 0 { (3, 32) } else { (1, bits) };
    let block = channels * bps / 8;
    let data = frames * block as u64;
    if data + 36 > u32::MAX as u64 {
        return Err(SynthError::Spec(
            "a WAV file holds at most 4 GiB; choose a raw or SigMF format".into(),
        ));
    }
    let mut h = Vec::with_capacity(44);
    h.extend_from_slice(b"RIFF");
    h.extend_from_slice(&((36 + data) as u32).to_le_bytes());
    h.extend_from_slice(b"WAVEfmt ");
    h.extend_from_slice(&16u32.to_le_bytes());
    h.extend_from_slice(&fmt_tag.to_le_bytes());
    h.extend_from_slice(&channels.to_le_bytes());
    h.extend_from_slice(&rate.to_le_bytes());
    h.extend_from_slice(&(rate * block as u32).to_le_bytes());
    h.extend_from_slice(&block.to_le_bytes());
    h.extend_from_slice(&bps.to_le_bytes());
    h.extend_from_slice(b"data");
    h.extend_from_slice(&(data as u32).to_le_bytes());
    Ok(h)
}

fn wav_encode(bits: u16, comps: &[f32], out: &mut Vec<u8>) {
    for &x in comps {
        let x = x as f64;
        match bits {
            0 => out.extend_from_slice(&(x as f32).to_le_bytes()),
            8 => out.push((x * 128.0 + 128.0).round().clamp(0.0, 255.0) as u8),
            16 => out.extend_from_slice(
                &((x * 32768.0).round().clamp(-32768.0, 32767.0) as i16).to_le_bytes(),
            ),
            24 => {
                let v = (x * 8_388_608.0).round().clamp(-8_388_608.0, 8_388_607.0) as i32;
                out.extend_from_slice(&v.to_le_bytes()[..3]);
            }
            _ => out.extend_from_slice(
                &((x * 2_147_483_648.0)
                    .round()
                    .clamp(-2_147_483_648.0, 2_147_483_647.0) as i32)
                    .to_le_bytes(),
            ),
        }
    }
}

/// Writes the capture described by `spec` to `out` (for SigMF, `out` names the
/// `.sigmf-meta`; the `.sigmf-data` goes beside it) and its truth sidecar. Returns the truth.
pub fn write_capture(spec: &SynthSpec, out: &Path, force: bool) -> Result<TruthFile, SynthError> {
    let fs_hz = spec.rate_hz;
    if !(fs_hz.is_finite() && (1.0..=1e9).contains(&fs_hz)) {
        return Err(SynthError::Spec(format!("rate_hz {fs_hz} is not usable")));
    }
    let kind = kind_of(spec)?;
    let iq = match &kind {
        Kind::Raw(d) | Kind::Sigmf(d) => d.complex,
        Kind::Wav { iq, .. } => *iq,
    };
    let mut rng = Rng::new(spec.seed);
    let (presses, mut marks, duration) = plan(spec, iq, &mut rng)?;
    marks.sort_by(|a, b| a.rise.total_cmp(&b.rise));
    let n_total = (duration * fs_hz).ceil() as u64;
    let ch = &spec.channel;
    let a = ch.amplitude;
    // Noise is defined against the first press's unit (350 µs when there is none).
    let unit_s = presses.first().map_or(350e-6, |p| p.layout.unit_s);
    // Eu/N0 = A²·T/N0 and σ² = N0·fs (complex), half per component.
    let sigma_c = ch
        .snr_db
        .map(|snr| (a * a * unit_s * fs_hz / 10f64.powf(snr / 10.0)).sqrt())
        .unwrap_or(0.0);
    let sigma = sigma_c / std::f64::consts::SQRT_2;
    let stretch = if iq { 0.0 } else { ch.stretch_us * 1e-6 };
    let w = (ch.edge_us * 1e-6).max(1.0 / fs_hz);

    let io = |p: &Path| {
        let path = p.display().to_string();
        move |source| SynthError::Io { path, source }
    };
    let out_err = |e: OutputError| match e {
        OutputError::Exists(p) => SynthError::Exists(p),
        OutputError::Io { path, source } => SynthError::Io { path, source },
        #[allow(unreachable_patterns)]
        other => SynthError::Spec(other.to_string()),
    };
    let (data_path, meta_path) = match &kind {
        Kind::Sigmf(_) => {
            let s = out.display().to_string();
            let base = s
                .strip_suffix(".sigmf-meta")
                .or_else(|| s.strip_suffix(".sigmf-data"))
                .unwrap_or(&s)
                .to_string();
            (
                PathBuf::from(format!("{base}.sigmf-data")),
                Some(PathBuf::from(format!("{base}.sigmf-meta"))),
            )
        }
        _ => (out.to_path_buf(), None),
    };
    let tpath = truth_path(out);
    if !force {
        for p in [Some(&data_path), meta_path.as_ref(), Some(&tpath)]
            .into_iter()
            .flatten()
        {
            if p.exists() {
                return Err(SynthError::Exists(p.display().to_string()));
            }
        }
    }
    let mut file = AtomicFile::create(&data_path, force).map_err(out_err)?;
    if let Kind::Wav { iq, bits } = kind {
        let h = wav_header(iq, bits, fs_hz.round() as u32, n_total)?;
        file.write_all(&h).map_err(io(&data_path))?;
    }
    let hp_alpha = ch
        .ac_tau_ms
        .filter(|&t| t > 0.0)
        .map(|t| t * 1e-3 / (t * 1e-3 + 1.0 / fs_hz));
    // (last input, last output): starts settled on the idle level.
    let idle0 = if ch.invert {
        -ch.idle_level
    } else {
        ch.idle_level
    };
    let mut hp = (idle0, 0.0f64);
    let block = 1usize << 16;
    let mut comps: Vec<f32> = Vec::with_capacity(2 * block);
    let mut bytes: Vec<u8> = Vec::with_capacity(16 * block);
    let mut lo = 0usize;
    let mut n0 = 0u64;
    while n0 < n_total {
        let n1 = (n0 + block as u64).min(n_total);
        comps.clear();
        for n in n0..n1 {
            let t = n as f64 / fs_hz;
            while lo < marks.len() && marks[lo].fall + stretch + w / 2.0 < t {
                lo += 1;
            }
            let (mut re, mut im, mut env) = (0.0f64, 0.0f64, 0.0f64);
            let mut j = lo;
            while j < marks.len() && marks[j].rise - w / 2.0 <= t {
                let m = &marks[j];
                let ov = ((t + w / 2.0).min(m.fall + stretch) - (t - w / 2.0).max(m.rise)) / w;
                if ov > 0.0 {
                    if iq {
                        let dt = t - m.t0;
                        let ph = TAU * (m.offset_hz * t + 0.5 * m.drift_rate * dt * dt) + m.phase;
                        re += a * ov * ph.cos();
                        im += a * ov * ph.sin();
                    } else {
                        env += ov;
                    }
                }
                j += 1;
            }
            if iq {
                for tone in &ch.tones {
                    let (s, c) = (TAU * tone[0] * t).sin_cos();
                    re += tone[1] * c;
                    im += tone[1] * s;
                }
                comps.push((re + ch.dc[0] + sigma * rng.gauss()) as f32);
                comps.push((im + ch.dc[1] + sigma * rng.gauss()) as f32);
            } else {
                let y = ch.idle_level + a * env.min(1.0) + sigma * rng.gauss();
                let mut y = if ch.invert { -y } else { y };
                if let Some(alpha) = hp_alpha {
                    // Single-pole high-pass: out[n] = α·(out[n-1] + in[n] - in[n-1]).
                    let o = alpha * (hp.1 + y - hp.0);
                    hp = (y, o);
                    y = o;
                }
                if let Some(c) = ch.clip {
                    y = y.clamp(-c.abs(), c.abs());
                }
                comps.push(y as f32);
            }
        }
        bytes.clear();
        match kind {
            Kind::Raw(d) | Kind::Sigmf(d) => d.encode_components(&comps, &mut bytes),
            Kind::Wav { bits, .. } => wav_encode(bits, &comps, &mut bytes),
        }
        file.write_all(&bytes).map_err(io(&data_path))?;
        n0 = n1;
    }
    file.commit().map_err(out_err)?;

    let (format, datatype) = match &kind {
        Kind::Raw(d) => (d.to_string(), d.to_string()),
        Kind::Sigmf(d) => ("sigmf".to_string(), d.to_string()),
        Kind::Wav { iq, bits } => {
            let c = if *iq { 'c' } else { 'r' };
            let d = match bits {
                0 => format!("{c}f32_le"),
                8 => format!("{c}i8"),
                16 => format!("{c}i16_le"),
                _ => format!("{c}i32_le"),
            };
            ("wav".to_string(), d)
        }
    };
    if let (Some(meta), Kind::Sigmf(d)) = (&meta_path, &kind) {
        let mut capture = serde_json::json!({ "core:sample_start": 0 });
        if let Some(f) = spec.center_hz {
            capture["core:frequency"] = serde_json::json!(f);
        }
        let doc = serde_json::json!({
            "global": {
                "core:datatype": d.to_string(),
                "core:sample_rate": fs_hz,
                "core:version": "1.2.0",
                "core:description": "synthetic capture written by ooksift synth",
                "core:recorder": format!("ooksift {}", env!("CARGO_PKG_VERSION")),
            },
            "captures": [capture],
            "annotations": []
        });
        let text =
            serde_json::to_string_pretty(&doc).map_err(|e| SynthError::Spec(e.to_string()))?;
        crate::output::write_atomic(meta, text.as_bytes(), force).map_err(out_err)?;
    }
    let truth = TruthFile {
        generator: format!("ooksift {} synth", env!("CARGO_PKG_VERSION")),
        capture: TruthCapture {
            format,
            datatype,
            sample_rate_hz: fs_hz,
            center_frequency_hz: spec.center_hz,
            samples: n_total,
            duration_s: round_to(n_total as f64 / fs_hz, 9),
        },
        codes: truth_codes(&presses, iq),
        spec: Some(spec.clone()),
    };
    let text = serde_json::to_string_pretty(&truth).map_err(|e| SynthError::Spec(e.to_string()))?;
    crate::output::write_atomic(&tpath, text.as_bytes(), force).map_err(out_err)?;
    Ok(truth)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn truth_paths_drop_capture_extensions() {
        assert_eq!(
            truth_path(Path::new("a/gate.cu8")),
            PathBuf::from("a/gate.truth.json")
        );
        assert_eq!(
            truth_path(Path::new("rec.sigmf-meta")),
            PathBuf::from("rec.truth.json")
        );
        assert_eq!(
            truth_path(Path::new("x.wav")),
            PathBuf::from("x.truth.json")
        );
    }

    #[test]
    fn wav_headers_are_read_back_by_the_wav_reader() {
        let dir = tempfile::tempdir().expect("tempdir");
        for bits in [0u16, 8, 16, 24, 32] {
            let mut spec = SynthSpec {
                format: "wav".into(),
                wav_bits: bits,
                rate_hz: 48_000.0,
                ..SynthSpec::default()
            };
            spec.presses
                .push(super::super::PressSpec::new("pwm", "0xa5"));
            let p = dir.path().join(format!("t{bits}.wav"));
            let truth = write_capture(&spec, &p, false).expect("writes");
            let r = hound::WavReader::open(&p).expect("hound reads it");
            assert_eq!(r.len() as u64, truth.capture.samples);
            assert_eq!(r.spec().sample_rate, 48_000);
        }
    }
}
