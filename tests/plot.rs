//! `plot`: the SVG is well-formed XML, shows one box per decoded frame and one label per bit
//! (checked against the synth truth), carries axis titles with units, draws a given
//! spectrum where it belongs, and the CLI keeps existing outputs.

use ooksift::decode::DecodeOptions;
use ooksift::plot::{
    collect_path, render_svg, CarrierMarker, PlotOptions, SpectrumView, SVG_WIDTH_PX,
};
use ooksift::source::OpenOptions;
use ooksift::synth::{write_capture, PressSpec, SynthSpec, TruthFile};
use std::path::{Path, PathBuf};
use std::process::Command;

/// Two presses of the Harrowgate Lane "gate" (PWM) and "chime" (PPM) buttons, noiseless.
fn two_buttons(dir: &Path) -> (PathBuf, TruthFile) {
    let mut spec = SynthSpec {
        format: "cu8".into(),
        rate_hz: 250_000.0,
        ..SynthSpec::default()
    };
    spec.channel.snr_db = Some(50.0);
    let mut gate = PressSpec::new("pwm", "0xcf2b12");
    gate.repeats = 4;
    gate.carrier_offset_hz = 25_000.0;
    let mut chime = PressSpec::new("ppm", "0x5a3c");
    chime.unit_us = 500.0;
    chime.repeats = 3;
    chime.gap_before_ms = Some(150.0);
    chime.carrier_offset_hz = -40_000.0;
    spec.presses = vec![gate, chime];
    let path = dir.join("harrowgate-buttons.cu8");
    let truth = write_capture(&spec, &path, false).expect("synth writes");
    (path, truth)
}

fn options(from_s: Option<f64>, to_s: Option<f64>) -> PlotOptions {
    PlotOptions {
        decode: DecodeOptions {
            open: OpenOptions {
                rate_hz: Some(250_000.0),
                ..OpenOptions::default()
            },
            ..DecodeOptions::default()
        },
        from_s,
        to_s,
        ..PlotOptions::default()
    }
}

fn with_class<'a>(doc: &'a roxmltree::Document<'a>, class: &str) -> Vec<roxmltree::Node<'a, 'a>> {
    doc.descendants()
        .filter(|n| {
            n.attribute("class")
                .is_some_and(|c| c.split_whitespace().any(|x| x == class))
        })
        .collect()
}

fn texts(nodes: &[roxmltree::Node<'_, '_>]) -> Vec<String> {
    nodes
        .iter()
        .map(|n| n.text().unwrap_or("").to_string())
        .collect()
}

#[test]
fn whole_capture_has_one_box_per_frame_and_labelled_axes() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (path, truth) = two_buttons(dir.path());
    let data = collect_path(path.to_str().expect("utf-8"), &options(None, None)).expect("plots");
    let svg = render_svg(&data);
    let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
    let root = doc.root_element();
    assert_eq!(root.tag_name().name(), "svg");
    assert_eq!(
        root.attribute("width"),
        Some(SVG_WIDTH_PX.to_string().as_str())
    );

    // One box per frame the synth wrote (4 gate + 3 chime).
    let want_frames: usize = truth.codes.iter().map(|c| c.frames).sum();
    assert_eq!(want_frames, 7);
    assert_eq!(with_class(&doc, "frame").len(), want_frames);
    // At this zoom bits are too narrow for labels; each frame shows its hex instead.
    assert!(with_class(&doc, "bit").is_empty());
    let hex = texts(&with_class(&doc, "frame-hex"));
    assert_eq!(hex.iter().filter(|h| *h == "0xcf2b12").count(), 4);
    assert_eq!(hex.iter().filter(|h| *h == "0x5a3c").count(), 3);

    let titles = texts(&with_class(&doc, "axis-title"));
    for t in [
        "time from capture start (ms)",
        "envelope (full scale)",
        "mark width (µs, log scale)",
        "space width (µs, log scale)",
        "count",
    ] {
        assert!(
            titles.iter().any(|x| x == t),
            "missing axis title {t}: {titles:?}"
        );
    }
    // The envelope band and the detector's lines are drawn; no spectrum was given.
    assert_eq!(with_class(&doc, "envelope").len(), 1);
    assert_eq!(with_class(&doc, "floor").len(), 1);
    assert_eq!(with_class(&doc, "threshold").len(), 1);
    assert!(with_class(&doc, "spectrum-view").is_empty());
    // Every mark of the capture is shaded somewhere (merged spans, so at most one per mark).
    let shaded = with_class(&doc, "mark").len();
    assert!((7..=200).contains(&shaded), "{shaded} shaded spans");
    // One unit line per code in each histogram, at the truth's units.
    let units = texts(&with_class(&doc, "unit-label"));
    assert_eq!(
        units.iter().filter(|u| *u == "unit 350 µs").count(),
        2,
        "{units:?}"
    );
    assert_eq!(
        units.iter().filter(|u| *u == "unit 500 µs").count(),
        2,
        "{units:?}"
    );
}

#[test]
fn a_zoomed_press_has_every_bit_written_under_its_frames() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (path, truth) = two_buttons(dir.path());
    let gate = &truth.codes[0];
    let from = gate.first_start_s - 0.005;
    let to = gate.first_start_s + gate.press_airtime_ms / 1e3 + 0.005;
    let data = collect_path(
        path.to_str().expect("utf-8"),
        &options(Some(from), Some(to)),
    )
    .expect("plots");
    assert!((data.from_s - from).abs() < 1e-12 && (data.to_s - to).abs() < 1e-12);
    let svg = render_svg(&data);
    let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
    assert_eq!(with_class(&doc, "frame").len(), gate.frames);
    let bits = texts(&with_class(&doc, "bit"));
    assert_eq!(bits.len(), gate.frames * gate.bit_count);
    // Left to right, the labels spell the truth's bits once per frame.
    assert_eq!(bits.concat(), gate.bits.repeat(gate.frames));
    let keys = texts(&with_class(&doc, "frame-label"));
    assert_eq!(keys, vec![gate.key_id.clone(); gate.frames]);
    // The time axis switches to milliseconds and the columns cover the window.
    assert!(svg.contains("time from capture start (ms)"));
    let first = data.columns.first().expect("columns");
    let last = data.columns.last().expect("columns");
    assert!(first.t0_s <= from + 1e-3 && last.t1_s >= to - 1e-3);
    assert!(data.columns.len() <= PlotOptions::default().columns + 1);
}

#[test]
fn a_given_spectrum_is_drawn_with_its_carriers_where_they_are() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (path, _) = two_buttons(dir.path());
    let mut data =
        collect_path(path.to_str().expect("utf-8"), &options(None, None)).expect("plots");
    // Synthetic survey: a flat −90 dB floor, two carriers (peak hold only, as bursts are).
    let n = 4096;
    let rate = 250_000.0;
    let mut spec = SpectrumView {
        rate_hz: rate,
        center_hz: Some(433.92e6),
        average_db: vec![-90.0; n],
        peak_db: vec![-80.0; n],
        carriers: vec![
            CarrierMarker {
                offset_hz: 25_000.0,
                level_db: Some(-20.0),
                label: "gate +25.0 kHz".into(),
            },
            CarrierMarker {
                offset_hz: -40_000.0,
                level_db: Some(-26.0),
                label: "chime −40.0 kHz".into(),
            },
        ],
    };
    let bin_of = |f: f64| ((f + rate / 2.0) / rate * n as f64).round() as usize;
    spec.peak_db[bin_of(25_000.0)] = -20.0;
    spec.peak_db[bin_of(-40_000.0)] = -26.0;
    spec.average_db[bin_of(25_000.0)] = -60.0;
    // Bins are rate/n = 61 Hz apart: the nearest one is within half a bin.
    assert!((spec.bin_offset_hz(bin_of(25_000.0), n) - 25_000.0).abs() <= rate / n as f64 / 2.0);
    assert_eq!(spec.bin_offset_hz(n / 2, n), 0.0);
    data.spectrum = Some(spec);
    let svg = render_svg(&data);
    let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
    assert_eq!(with_class(&doc, "spectrum-view").len(), 1);
    assert_eq!(with_class(&doc, "average").len(), 1);
    assert_eq!(with_class(&doc, "peak").len(), 1);
    let lines = with_class(&doc, "carrier");
    assert_eq!(lines.len(), 2);
    let labels = texts(&with_class(&doc, "carrier-label"));
    assert_eq!(labels, vec!["gate +25.0 kHz", "chime −40.0 kHz"]);
    assert!(texts(&with_class(&doc, "axis-title")).contains(&"frequency (MHz)".to_string()));
    // The carrier lines sit at their frequencies on a 1290 px axis spanning ±rate/2.
    let x_of = |off: f64| 80.0 + (off + rate / 2.0) / rate * 1290.0;
    for (node, off) in lines.iter().zip([25_000.0, -40_000.0]) {
        let x: f64 = node.attribute("x1").expect("x1").parse().expect("number");
        assert!((x - x_of(off)).abs() < 0.6, "{x} vs {}", x_of(off));
    }
    // The peak-hold path's highest point (smallest y) is at the strongest carrier.
    let d = with_class(&doc, "peak")[0].attribute("d").expect("d");
    let pts: Vec<(f64, f64)> = d
        .split(['M', 'L'])
        .filter_map(|p| {
            let mut it = p.split_whitespace().map(|v| v.parse::<f64>());
            Some((it.next()?.ok()?, it.next()?.ok()?))
        })
        .collect();
    let top = pts
        .iter()
        .min_by(|a, b| a.1.total_cmp(&b.1))
        .expect("points");
    assert!((top.0 - x_of(25_000.0)).abs() < 1.5, "{top:?}");
    // The picture grows to make room for the spectrum.
    let h: f64 = doc
        .root_element()
        .attribute("height")
        .expect("h")
        .parse()
        .expect("n");
    assert!(h > 1000.0, "{h}");
}

fn ooksift() -> Command {
    Command::new(env!("CARGO_BIN_EXE_ooksift"))
}

#[test]
fn cli_keeps_existing_outputs_and_reads_standard_input() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (path, truth) = two_buttons(dir.path());
    let out = dir.path().join("buttons.svg");
    let run = |extra: &[&str]| {
        ooksift()
            .args(["plot", "--rate", "250000", "--out"])
            .arg(&out)
            .arg(&path)
            .args(extra)
            .output()
            .expect("runs")
    };
    let first = run(&[]);
    assert!(
        first.status.success(),
        "{}",
        String::from_utf8_lossy(&first.stderr)
    );
    let before = std::fs::read_to_string(&out).expect("svg written");
    roxmltree::Document::parse(&before).expect("well-formed XML");
    let again = run(&["--from", "0.1"]);
    assert_eq!(again.status.code(), Some(1));
    let msg = String::from_utf8_lossy(&again.stderr);
    assert!(
        msg.starts_with("ooksift: ") && msg.contains("--force"),
        "{msg}"
    );
    assert_eq!(std::fs::read_to_string(&out).expect("kept"), before);
    let forced = run(&["--from", "0.1", "--force"]);
    assert!(forced.status.success());
    assert_ne!(std::fs::read_to_string(&out).expect("replaced"), before);

    // A window past the end is an error naming the capture.
    let late = run(&["--from", "99", "--force"]);
    assert_eq!(late.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&late.stderr).contains("harrowgate-buttons.cu8"));

    // Standard input has no known length: columns adapt, frames are the same.
    let piped = dir.path().join("piped.svg");
    let child = ooksift()
        .args(["plot", "-", "--format", "cu8", "--rate", "250000", "--out"])
        .arg(&piped)
        .stdin(std::fs::File::open(&path).expect("open"))
        .output()
        .expect("runs");
    assert!(
        child.status.success(),
        "{}",
        String::from_utf8_lossy(&child.stderr)
    );
    let text = std::fs::read_to_string(&piped).expect("written");
    let doc = roxmltree::Document::parse(&text).expect("well-formed XML");
    let frames: usize = truth.codes.iter().map(|c| c.frames).sum();
    assert_eq!(with_class(&doc, "frame").len(), frames);
}
