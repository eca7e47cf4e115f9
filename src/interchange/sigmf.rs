//! SigMF annotations of decoded frames, written beside the capture without touching it.
//!
//! SigMF core v1.2 (facts.md §3) pairs a `.sigmf-meta` with its dataset by base name, or,
//! for a *non-conforming dataset* (any file that is not a plain `.sigmf-data`: raw IQ with
//! another extension, a WAV with its header), through `global.core:dataset`, which names the
//! data file; `core:header_bytes` (in the capture segment) and `core:trailing_bytes` (global)
//! skip bytes that are not samples. Non-conforming datasets must not be named `.sigmf-data`
//! (§3.5). What [`write_annotations`] writes therefore depends on the input:
//!
//! | input                    | written                                                       |
//! |--------------------------|---------------------------------------------------------------|
//! | raw `NAME.cu8` (any datatype) | `NAME.sigmf-meta` with `core:dataset = "NAME.cu8"`       |
//! | WAV `NAME.wav`           | `NAME.sigmf-meta` with `core:dataset`, `core:header_bytes` and `core:trailing_bytes` |
//! | SigMF `NAME.sigmf-meta`  | `NAME-ooksift.sigmf-meta` (the original metadata, annotations added) and `NAME-ooksift.sigmf-data`, a hard link to `NAME.sigmf-data` (a symbolic link where hard links are refused) |
//!
//! The SigMF case keeps the recording conforming without a copy: the link shares the
//! original's bytes, which are never opened for writing. (Writing into the recording's own
//! metadata would replace a file the user owns; pointing `core:dataset` at a `.sigmf-data`
//! would break the naming rule above.) Existing outputs are replaced only with `force`.
//!
//! Annotations, one per decoded frame, sorted by `core:sample_start` (§3.4):
//! `core:sample_start` and `core:sample_count` from the frame's first rising and last falling
//! edge; `core:freq_lower_edge`/`core:freq_upper_edge` (both or neither, §3.4) at the code's
//! carrier ± 1/unit — the first nulls of the spectrum of the shortest element, a rectangular
//! pulse (Fourier transform of a rectangle, textbook) — absolute when the centre frequency is
//! known, relative to baseband otherwise, and absent for envelope captures; `core:label` the
//! key id (at most 20 characters, §3.4); `core:comment` the bits, hex, press and frame;
//! `core:generator` the program and version.

use super::InterchangeError;
use crate::output::{write_atomic, OutputError};
use crate::report::{CodeReport, DecodeReport, FrameTimeline};
use serde_json::{json, Map, Value};
use std::fs;
use std::io::Read;
use std::path::{Path, PathBuf};

/// SigMF version written in new metadata.
pub const SIGMF_VERSION: &str = "1.2.0";
/// Longest `core:label` SigMF recommends (facts.md §3.4).
pub const MAX_LABEL_CHARS: usize = 20;
/// Suffix added to a SigMF recording's base name for the annotated copy.
pub const ANNOTATED_SUFFIX: &str = "-ooksift";

/// What [`write_annotations`] wrote.
#[derive(Debug, Clone, PartialEq)]
pub struct Annotated {
    /// The metadata file.
    pub meta: PathBuf,
    /// The link made to the original dataset (SigMF inputs only).
    pub data_link: Option<PathBuf>,
    /// Annotations added.
    pub annotations: usize,
}

fn unsupported(msg: impl Into<String>) -> InterchangeError {
    InterchangeError::Unsupported(msg.into())
}

/// The annotations of every decoded frame of `r`, sorted by `core:sample_start`.
pub fn frame_annotations(r: &DecodeReport) -> Vec<Value> {
    let rate = r.capture.sample_rate_hz;
    let mut out: Vec<(u64, Value)> = Vec::new();
    let mut presses: Vec<(f64, usize, usize)> = Vec::new();
    for (ci, code) in r.codes.iter().enumerate() {
        for (pi, p) in code.timeline.iter().enumerate() {
            presses.push((p.start_s, ci, pi));
        }
    }
    presses.sort_by(|a, b| a.0.total_cmp(&b.0));
    for (n, &(_, ci, pi)) in presses.iter().enumerate() {
        let code = &r.codes[ci];
        for (fi, f) in code.timeline[pi].frames.iter().enumerate() {
            let (start, count) = sample_span(f, rate);
            let mut a = Map::new();
            a.insert("core:sample_start".into(), json!(start));
            a.insert("core:sample_count".into(), json!(count));
            if let Some((lo, hi)) = freq_edges(code, r.capture.center_frequency_hz) {
                a.insert("core:freq_lower_edge".into(), json!(lo));
                a.insert("core:freq_upper_edge".into(), json!(hi));
            }
            a.insert("core:label".into(), json!(label(&code.key_id)));
            a.insert(
                "core:comment".into(),
                json!(format!(
                    "{} {} bits {} (hex {}), press {} frame {}, unit {} us, SNR {} dB",
                    code.line_code,
                    code.bit_count,
                    code.bits,
                    code.hex,
                    n + 1,
                    fi + 1,
                    code.unit_us,
                    code.snr_db
                )),
            );
            a.insert("core:generator".into(), json!(r.generator));
            out.push((start, Value::Object(a)));
        }
    }
    out.sort_by_key(|x| x.0);
    out.into_iter().map(|x| x.1).collect()
}

/// First sample and sample count of a frame (at least one sample).
fn sample_span(f: &FrameTimeline, rate: f64) -> (u64, u64) {
    let last_us = f.marks_us.last().copied().unwrap_or(0.0);
    let start = (f.start_s * rate).round().max(0.0);
    let end = ((f.start_s + last_us * 1e-6) * rate)
        .round()
        .max(start + 1.0);
    (start as u64, (end - start) as u64)
}

/// The label: the key id cut to [`MAX_LABEL_CHARS`].
fn label(key: &str) -> String {
    key.chars().take(MAX_LABEL_CHARS).collect()
}

/// Frequency edges of a code's frames: carrier ± 1/unit, absolute when the centre is known.
fn freq_edges(code: &CodeReport, center: Option<f64>) -> Option<(f64, f64)> {
    let off = code.carrier_offset_hz?;
    if !(code.unit_us.is_finite() && code.unit_us > 0.0) {
        return None;
    }
    let half = 1e6 / code.unit_us;
    let c = center.unwrap_or(0.0) + off;
    Some(((c - half).round(), (c + half).round()))
}

/// The base of a SigMF recording named by its meta, data or base name.
fn sigmf_base(path: &str) -> &str {
    path.strip_suffix(".sigmf-meta")
        .or_else(|| path.strip_suffix(".sigmf-data"))
        .unwrap_or(path)
}

/// The metadata file [`write_annotations`] writes for the capture of `r`.
pub fn annotation_path(r: &DecodeReport) -> Result<PathBuf, InterchangeError> {
    let path = r.capture.path.as_str();
    if path == "-" {
        return Err(unsupported(
            "standard input has no file to annotate; save the capture to a file first",
        ));
    }
    if r.capture.format == "sigmf" {
        return Ok(PathBuf::from(format!(
            "{}{ANNOTATED_SUFFIX}.sigmf-meta",
            sigmf_base(path)
        )));
    }
    let p = Path::new(path);
    Ok(p.with_extension("sigmf-meta"))
}

/// Writes the annotations of `r` beside its capture (see the module docs for what is
/// written where). `force` replaces existing outputs; the capture itself is never written.
pub fn write_annotations(r: &DecodeReport, force: bool) -> Result<Annotated, InterchangeError> {
    let meta_path = annotation_path(r)?;
    let annotations = frame_annotations(r);
    let count = annotations.len();
    if r.capture.format == "sigmf" {
        return annotate_recording(r, &meta_path, annotations, force);
    }
    let data = Path::new(&r.capture.path);
    let data_name = data
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .ok_or_else(|| unsupported("the capture path names no file"))?;
    let twin = data.with_extension("sigmf-data");
    if twin.exists() {
        return Err(unsupported(format!(
            "{} exists and would be taken for the dataset of {}; move it or annotate the SigMF recording",
            twin.display(),
            meta_path.display()
        )));
    }
    let mut global = Map::new();
    let mut capture = Map::new();
    capture.insert("core:sample_start".into(), json!(0));
    let datatype = if r.capture.format == "wav" {
        let w = wav_layout(data)?;
        capture.insert("core:header_bytes".into(), json!(w.header_bytes));
        if w.trailing_bytes > 0 {
            global.insert("core:trailing_bytes".into(), json!(w.trailing_bytes));
        }
        w.datatype
    } else {
        r.capture.datatype.clone()
    };
    if let Some(f) = r.capture.center_frequency_hz {
        capture.insert("core:frequency".into(), json!(f));
    }
    global.insert("core:datatype".into(), json!(datatype));
    global.insert("core:version".into(), json!(SIGMF_VERSION));
    global.insert("core:sample_rate".into(), json!(r.capture.sample_rate_hz));
    global.insert("core:dataset".into(), json!(data_name));
    global.insert(
        "core:description".into(),
        json!(format!("OOK frames decoded by {}", r.generator)),
    );
    let doc = json!({
        "global": global,
        "captures": [capture],
        "annotations": annotations,
    });
    write_json(&meta_path, &doc, force)?;
    Ok(Annotated {
        meta: meta_path,
        data_link: None,
        annotations: count,
    })
}

/// Pretty JSON with the top-level objects in SigMF's order (`global`, `captures`,
/// `annotations`, then any others), for people who read the file.
fn sigmf_text(doc: &Value) -> Result<String, InterchangeError> {
    let pretty = |v: &Value| {
        serde_json::to_string_pretty(v)
            .map(|t| t.replace('\n', "\n  "))
            .map_err(|e| InterchangeError::Io(std::io::Error::other(e)))
    };
    let Some(obj) = doc.as_object() else {
        return pretty(doc);
    };
    let order = ["global", "captures", "annotations"];
    let mut keys: Vec<&String> = obj.keys().filter(|k| order.contains(&k.as_str())).collect();
    keys.sort_by_key(|k| order.iter().position(|o| o == k));
    keys.extend(obj.keys().filter(|k| !order.contains(&k.as_str())));
    let mut parts = Vec::with_capacity(keys.len());
    for k in keys {
        parts.push(format!(
            "  {}: {}",
            Value::from(k.as_str()),
            pretty(&obj[k])?
        ));
    }
    Ok(format!("{{\n{}\n}}\n", parts.join(",\n")))
}

fn write_json(path: &Path, doc: &Value, force: bool) -> Result<(), InterchangeError> {
    let text = sigmf_text(doc)?;
    write_atomic(path, text.as_bytes(), force)?;
    Ok(())
}

/// A SigMF input: its metadata with our annotations, and a link to its dataset.
fn annotate_recording(
    r: &DecodeReport,
    meta_path: &Path,
    ours: Vec<Value>,
    force: bool,
) -> Result<Annotated, InterchangeError> {
    let base = sigmf_base(&r.capture.path);
    let src_meta = PathBuf::from(format!("{base}.sigmf-meta"));
    let src_data = PathBuf::from(format!("{base}.sigmf-data"));
    let link = meta_path.with_extension("sigmf-data");
    if !force {
        for p in [meta_path, link.as_path()] {
            if p.symlink_metadata().is_ok() && !same_file(p, &src_data) {
                return Err(OutputError::Exists(p.display().to_string()).into());
            }
        }
        if meta_path.exists() {
            return Err(OutputError::Exists(meta_path.display().to_string()).into());
        }
    }
    let mut text = String::new();
    fs::File::open(&src_meta)?
        .take(64 << 20)
        .read_to_string(&mut text)?;
    let mut doc: Value = serde_json::from_str(&text)
        .map_err(|e| InterchangeError::Metadata(format!("{}: {e}", src_meta.display())))?;
    let obj = doc
        .as_object_mut()
        .ok_or_else(|| InterchangeError::Metadata("the top level is not an object".into()))?;
    // Keep annotations from other generators; replace ours from an earlier run.
    let mut annotations: Vec<Value> = obj
        .get("annotations")
        .and_then(Value::as_array)
        .map(|a| {
            a.iter()
                .filter(|x| {
                    !x.get("core:generator")
                        .and_then(Value::as_str)
                        .is_some_and(|g| g.starts_with("ooksift"))
                })
                .cloned()
                .collect()
        })
        .unwrap_or_default();
    let count = ours.len();
    annotations.extend(ours);
    annotations.sort_by_key(|a| {
        a.get("core:sample_start")
            .and_then(Value::as_u64)
            .unwrap_or(0)
    });
    obj.insert("annotations".into(), Value::Array(annotations));
    // The rate and centre the annotations were computed with (command-line overrides win).
    if let Some(g) = obj.get_mut("global").and_then(Value::as_object_mut) {
        g.insert("core:sample_rate".into(), json!(r.capture.sample_rate_hz));
    }
    if let Some(f) = r.capture.center_frequency_hz {
        if let Some(c0) = obj
            .get_mut("captures")
            .and_then(Value::as_array_mut)
            .and_then(|c| c.first_mut())
            .and_then(Value::as_object_mut)
        {
            c0.insert("core:frequency".into(), json!(f));
        }
    }
    link_dataset(&src_data, &link, force)?;
    write_json(meta_path, &doc, force)?;
    Ok(Annotated {
        meta: meta_path.to_path_buf(),
        data_link: Some(link),
        annotations: count,
    })
}

/// True when both paths name the same file (same device and inode).
fn same_file(a: &Path, b: &Path) -> bool {
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        match (fs::metadata(a), fs::metadata(b)) {
            (Ok(x), Ok(y)) => x.dev() == y.dev() && x.ino() == y.ino(),
            _ => false,
        }
    }
    #[cfg(not(unix))]
    {
        let _ = (a, b);
        false
    }
}

/// Makes `link` name the same bytes as `data`: reused when it already does, else a hard link
/// (a symbolic link where the file system refuses hard links) put in place by rename.
fn link_dataset(data: &Path, link: &Path, force: bool) -> Result<(), InterchangeError> {
    if !data.is_file() {
        return Err(unsupported(format!(
            "the dataset {} is not a file",
            data.display()
        )));
    }
    if same_file(link, data) {
        return Ok(());
    }
    if link.symlink_metadata().is_ok() && !force {
        return Err(OutputError::Exists(link.display().to_string()).into());
    }
    let dir = match link.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let name = link
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "data".into());
    let tmp = dir.join(format!(".{name}.ooksift-tmp-{}", std::process::id()));
    let _ = fs::remove_file(&tmp);
    if let Err(hard) = fs::hard_link(data, &tmp) {
        symlink_fallback(data, &tmp).map_err(|soft| {
            unsupported(format!(
                "cannot link {} to {}: {hard}; {soft}",
                link.display(),
                data.display()
            ))
        })?;
    }
    fs::rename(&tmp, link).map_err(|e| {
        let _ = fs::remove_file(&tmp);
        InterchangeError::Io(e)
    })
}

#[cfg(unix)]
fn symlink_fallback(data: &Path, tmp: &Path) -> std::io::Result<()> {
    // Relative to the link's own folder: both live in the same one.
    let target = data
        .file_name()
        .map(PathBuf::from)
        .unwrap_or_else(|| data.to_path_buf());
    std::os::unix::fs::symlink(target, tmp)
}

#[cfg(not(unix))]
fn symlink_fallback(_data: &Path, _tmp: &Path) -> std::io::Result<()> {
    Err(std::io::Error::other("no symbolic links on this system"))
}

/// Where a WAV file's samples sit and what SigMF datatype they are.
#[derive(Debug, Clone, PartialEq)]
pub struct WavLayout {
    /// Bytes before the first sample.
    pub header_bytes: u64,
    /// Bytes after the last sample.
    pub trailing_bytes: u64,
    /// SigMF datatype of the samples as stored (8-bit WAV is unsigned: `ru8`/`cu8`).
    pub datatype: String,
}

/// Walks the RIFF chunks of a WAV file: the `fmt ` chunk gives the datatype, the `data`
/// chunk the sample bytes.
pub fn wav_layout(path: &Path) -> Result<WavLayout, InterchangeError> {
    let bad = |m: &str| unsupported(format!("{}: {m}", path.display()));
    let mut f = fs::File::open(path)?;
    let file_len = f.metadata()?.len();
    let mut head = [0u8; 12];
    f.read_exact(&mut head)
        .map_err(|_| bad("not a RIFF/WAVE file"))?;
    if &head[0..4] != b"RIFF" || &head[8..12] != b"WAVE" {
        return Err(bad("not a RIFF/WAVE file"));
    }
    let mut pos = 12u64;
    let mut fmt: Option<(u16, u16, u16)> = None;
    let mut reader = std::io::BufReader::new(f);
    loop {
        let mut ch = [0u8; 8];
        if reader.read_exact(&mut ch).is_err() {
            return Err(bad("no data chunk"));
        }
        let size = u32::from_le_bytes([ch[4], ch[5], ch[6], ch[7]]) as u64;
        pos += 8;
        if &ch[0..4] == b"data" {
            let (tag, channels, bits) = fmt.ok_or_else(|| bad("data chunk before fmt chunk"))?;
            let kind = match channels {
                1 => 'r',
                2 => 'c',
                n => return Err(bad(&format!("{n} channels"))),
            };
            let datatype = match (tag, bits) {
                (1, 8) => format!("{kind}u8"),
                (1, 16) => format!("{kind}i16_le"),
                (1, 32) => format!("{kind}i32_le"),
                (3, 32) => format!("{kind}f32_le"),
                (3, 64) => format!("{kind}f64_le"),
                (_, b) => {
                    return Err(bad(&format!(
                        "{b}-bit samples have no SigMF datatype (8, 16, 32-bit integer or 32/64-bit float)"
                    )))
                }
            };
            let data_len = size.min(file_len.saturating_sub(pos));
            return Ok(WavLayout {
                header_bytes: pos,
                trailing_bytes: file_len.saturating_sub(pos + data_len),
                datatype,
            });
        }
        let padded = size + (size & 1);
        if &ch[0..4] == b"fmt " {
            if size < 16 {
                return Err(bad("fmt chunk too short"));
            }
            let mut body = vec![0u8; size.min(64) as usize];
            reader
                .read_exact(&mut body)
                .map_err(|_| bad("truncated fmt chunk"))?;
            let mut tag = u16::from_le_bytes([body[0], body[1]]);
            let channels = u16::from_le_bytes([body[2], body[3]]);
            let bits = u16::from_le_bytes([body[14], body[15]]);
            // WAVE_FORMAT_EXTENSIBLE: the real tag opens the sub-format GUID.
            if tag == 0xFFFE && body.len() >= 26 {
                tag = u16::from_le_bytes([body[24], body[25]]);
            }
            fmt = Some((tag, channels, bits));
            std::io::copy(
                &mut (&mut reader).take(padded - body.len() as u64),
                &mut std::io::sink(),
            )?;
        } else {
            std::io::copy(&mut (&mut reader).take(padded), &mut std::io::sink())?;
        }
        pos += padded;
        if pos >= file_len {
            return Err(bad("no data chunk"));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn labels_are_cut_to_twenty_characters() {
        assert_eq!(label("pwm24-5c9f4e1f"), "pwm24-5c9f4e1f");
        assert_eq!(
            label("ppm1024-0123456789abcdef").chars().count(),
            MAX_LABEL_CHARS
        );
    }

    #[test]
    fn top_level_objects_come_in_sigmf_order() {
        let doc = json!({"annotations": [{"core:sample_start": 1}], "zz": 1,
                         "captures": [], "global": {"core:version": "1.2.0"}});
        let text = sigmf_text(&doc).expect("text");
        let at = |k: &str| text.find(k).expect(k);
        assert!(
            at("\"global\"") < at("\"captures\"") && at("\"captures\"") < at("\"annotations\"")
        );
        assert!(at("\"annotations\"") < at("\"zz\""));
        let back: Value = serde_json::from_str(&text).expect("still JSON");
        assert_eq!(back, doc);
    }

    fn chunk(id: &[u8; 4], body: &[u8]) -> Vec<u8> {
        let mut c = id.to_vec();
        c.extend_from_slice(&(body.len() as u32).to_le_bytes());
        c.extend_from_slice(body);
        if body.len() % 2 == 1 {
            c.push(0);
        }
        c
    }

    #[test]
    fn wav_layout_skips_other_chunks_and_counts_trailing_bytes() {
        // fmt: PCM (tag 1), 2 channels, 48 kHz, 16 bits (RIFF WAVE layout, common practice).
        let mut fmt = Vec::new();
        for v in [1u16, 2] {
            fmt.extend_from_slice(&v.to_le_bytes());
        }
        fmt.extend_from_slice(&48_000u32.to_le_bytes());
        fmt.extend_from_slice(&(48_000u32 * 4).to_le_bytes());
        fmt.extend_from_slice(&4u16.to_le_bytes());
        fmt.extend_from_slice(&16u16.to_le_bytes());
        let mut body = b"WAVE".to_vec();
        body.extend(chunk(b"fmt ", &fmt));
        body.extend(chunk(b"LIST", b"odd"));
        body.extend(chunk(b"data", &[0u8; 40]));
        body.extend(chunk(b"note", &[1u8; 6]));
        let mut file = b"RIFF".to_vec();
        file.extend_from_slice(&(body.len() as u32).to_le_bytes());
        file.extend(body);
        let dir = tempfile::tempdir().expect("tempdir");
        let p = dir.path().join("x.wav");
        std::fs::write(&p, &file).expect("write");
        let w = wav_layout(&p).expect("layout");
        // 12 (RIFF) + 8 + 16 (fmt) + 8 + 4 (LIST, padded) + 8 (data header) = 56.
        assert_eq!(w.header_bytes, 56);
        assert_eq!(w.trailing_bytes, 14);
        assert_eq!(w.datatype, "ci16_le");
        assert_eq!(file.len() as u64, 56 + 40 + 14);
        // Not a WAV: refused, no panic.
        std::fs::write(&p, b"RIFX").expect("write");
        assert!(wav_layout(&p).is_err());
    }

    #[test]
    fn sigmf_bases() {
        assert_eq!(sigmf_base("a/rec.sigmf-meta"), "a/rec");
        assert_eq!(sigmf_base("rec.sigmf-data"), "rec");
        assert_eq!(sigmf_base("rec"), "rec");
    }
}
