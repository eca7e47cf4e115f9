//! `plot`: the SVG is well-formed XML, shows one box per decoded frame and one label per bit
//! (checked against the synth truth), carries axis titles with units, draws a given
//! spectrum where it belongs, and the CLI keeps existing outputs. `--carrier` shows one
//! transmitter's channel and decode (checked against the synth truth of two transmitters,
//! apart and overlapping in time) and refuses what it cannot show.

mod common;

use ooksift::decode::DecodeOptions;
use ooksift::plot::{
    collect_path, render_svg, CarrierMarker, ChannelChoice, PlotError, PlotOptions, SpectrumView,
    SVG_WIDTH_PX,
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

/// Boxes, frame labels (keys) and hex labels of a plot of `path` with `choice`.
fn channel_plot(path: &Path, choice: ChannelChoice) -> (ooksift::plot::PlotData, String) {
    let opts = PlotOptions {
        channel: choice,
        ..options(None, None)
    };
    let data = collect_path(path.to_str().expect("utf-8"), &opts).expect("plots");
    let svg = render_svg(&data);
    (data, svg)
}

#[test]
fn a_chosen_carrier_shows_its_own_channel_and_decode() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (path, truth) = two_buttons(dir.path());
    let (gate, chime) = (&truth.codes[0], &truth.codes[1]);
    assert_eq!(gate.carrier_offset_hz, Some(25_000.0));
    assert_eq!(chime.carrier_offset_hz, Some(-40_000.0));
    // Requests a little off the carriers still find them (inside their channels).
    for (ask, want, other) in [(24_000.0, gate, chime), (-41_000.0, chime, gate)] {
        let (data, svg) = channel_plot(&path, ChannelChoice::Nearest(ask));
        let shown = data.channel.as_ref().expect("a channel was shown");
        let want_off = want.carrier_offset_hz.expect("IQ truth has an offset");
        assert!(
            (shown.carrier_offset_hz - want_off).abs() < 1_000.0,
            "asked {ask}, got {shown:?}"
        );
        assert_eq!(shown.requested_hz, Some(ask));
        // The decode drawn is the channel's: the chosen code only, every one of its frames.
        assert_eq!(data.report.codes.len(), 1, "{:?}", data.report.codes);
        assert_eq!(data.report.codes[0].key_id, want.key_id);
        let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
        assert_eq!(with_class(&doc, "frame").len(), want.frames);
        let hex = texts(&with_class(&doc, "frame-hex"));
        assert_eq!(hex, vec![format!("0x{}", want.hex); want.frames]);
        assert!(!svg.contains(&format!("0x{}", other.hex)));
        // The view says which carrier it reads; the spectrum marks it and shades its channel.
        let source = texts(&with_class(&doc, "view-source"));
        let label = if want_off > 0.0 {
            "+25.0 kHz"
        } else {
            "−40.0 kHz"
        };
        assert_eq!(source.len(), 1);
        assert!(
            source[0].contains(&format!("carrier at {label}")),
            "{source:?}"
        );
        assert_eq!(with_class(&doc, "spectrum-view").len(), 1);
        assert_eq!(with_class(&doc, "channel-band").len(), 1);
        let chosen = with_class(&doc, "chosen");
        assert_eq!(chosen.len(), 1);
        // Both carriers are marked, the chosen one at its offset (1290 px for ±rate/2).
        assert!(with_class(&doc, "carrier").len() >= 2);
        let rate = 250_000.0;
        let x_of = |off: f64| 80.0 + (off + rate / 2.0) / rate * 1290.0;
        let x: f64 = chosen[0]
            .attribute("x1")
            .expect("x1")
            .parse()
            .expect("number");
        assert!(
            (x - x_of(want_off)).abs() < 6.0,
            "{x} vs {}",
            x_of(want_off)
        );
    }
    // Without a choice the whole band is read, both codes drawn, no spectrum surveyed.
    let (data, svg) = channel_plot(&path, ChannelChoice::WholeBand);
    assert!(data.channel.is_none() && data.spectrum.is_none());
    assert_eq!(data.report.codes.len(), 2);
    let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
    assert_eq!(
        texts(&with_class(&doc, "view-source")),
        vec!["whole band, every carrier at once"]
    );
}

#[test]
fn a_carrier_far_from_every_transmitter_is_refused_with_what_was_found() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (path, _) = two_buttons(dir.path());
    let opts = |c| PlotOptions {
        channel: c,
        ..options(None, None)
    };
    let p = path.to_str().expect("utf-8");
    match collect_path(p, &opts(ChannelChoice::Nearest(-100_000.0))) {
        Err(PlotError::Carrier(m)) => {
            assert!(
                m.contains("−100.0 kHz") && m.contains("nearest: −40.0 kHz"),
                "{m}"
            );
            assert!(m.contains("+25.0 kHz"), "lists what was found: {m}");
            assert!(!m.contains('\n'));
        }
        other => panic!(
            "expected a carrier error, got {:?}",
            other.map(|d| d.channel)
        ),
    }
    // An absolute frequency is not an offset.
    match collect_path(p, &opts(ChannelChoice::Nearest(433.92e6))) {
        Err(PlotError::Carrier(m)) => assert!(m.contains("outside the band"), "{m}"),
        other => panic!(
            "expected a carrier error, got {:?}",
            other.map(|d| d.channel)
        ),
    }
}

/// The "gate" and "lamp-left" buttons pressed at the same time on two carriers, written by the
/// CLI as a user would: in the whole band their marks interleave, in each channel one remains.
fn overlapping_pair(dir: &Path) -> (PathBuf, TruthFile) {
    let path = dir.join("harrowgate-overlap.cu8");
    let truth = common::synth(
        &path,
        &[
            "--rate",
            "250000",
            "--snr-db",
            "30",
            "--seed",
            "11",
            "--press",
            "pwm:0xcf2b12,unit_us=350,repeats=3,offset_hz=25000,at_ms=40",
            "--press",
            "pwm:0x9a61e4,unit_us=420,repeats=3,offset_hz=-40000,at_ms=47",
        ],
    );
    let truth: TruthFile = serde_json::from_value(truth).expect("truth file");
    (path, truth)
}

#[test]
fn cli_carrier_picks_each_of_two_overlapping_transmitters() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (path, truth) = overlapping_pair(dir.path());
    assert_eq!(truth.codes.len(), 2);
    let (a, b) = (&truth.codes[0], &truth.codes[1]);
    assert_ne!(a.bits, b.bits);
    // A window over both presses: they overlap in time, so it holds both.
    let from = a.first_start_s.min(b.first_start_s) - 0.005;
    let to = (a.first_start_s + a.press_airtime_ms / 1e3)
        .max(b.first_start_s + b.press_airtime_ms / 1e3)
        + 0.005;
    assert!(b.first_start_s < a.first_start_s + a.press_airtime_ms / 1e3);
    for (carrier, want, other) in [("25000", a, b), ("-40000", b, a)] {
        let out = dir.path().join(format!("channel{carrier}.svg"));
        let r = common::run(&[
            "plot",
            path.to_str().expect("utf-8"),
            "--rate",
            "250000",
            "--carrier",
            carrier,
            "--from",
            &from.to_string(),
            "--to",
            &to.to_string(),
            "--out",
            out.to_str().expect("utf-8"),
        ]);
        let stderr = String::from_utf8_lossy(&r.stderr);
        assert!(r.status.success(), "{stderr}");
        assert!(stderr.contains("channel of the carrier at"), "{stderr}");
        let svg = std::fs::read_to_string(&out).expect("written");
        let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
        // Every bit of the chosen transmitter, in order, once per frame; none of the other.
        let bits = texts(&with_class(&doc, "bit"));
        assert_eq!(
            bits.concat(),
            want.bits.repeat(want.frames),
            "--carrier {carrier}"
        );
        let keys = texts(&with_class(&doc, "frame-label"));
        assert_eq!(keys, vec![want.key_id.clone(); want.frames]);
        assert!(!svg.contains(&other.key_id), "--carrier {carrier}");
        assert_eq!(with_class(&doc, "frame").len(), want.frames);
    }
}

#[test]
fn cli_carrier_errors_are_one_line_naming_the_capture_and_write_nothing() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (iq, _) = two_buttons(dir.path());
    let env = dir.path().join("harrowgate-envelope.wav");
    common::synth(
        &env,
        &[
            "--rate",
            "250000",
            "--snr-db",
            "40",
            "--press",
            "pwm:0xcf2b12,repeats=3",
        ],
    );
    let out = dir.path().join("never.svg");
    let o = out.to_str().expect("utf-8");
    let check = |args: &[&str], capture: &str, says: &str| {
        let r = common::run(args);
        assert_eq!(r.status.code(), Some(1), "{args:?}");
        let msg = String::from_utf8_lossy(&r.stderr);
        assert_eq!(msg.lines().count(), 1, "{msg}");
        assert!(
            msg.starts_with(&format!("ooksift: {capture}: ")) && msg.contains(says),
            "{msg}"
        );
        assert!(!out.exists(), "{args:?} wrote an output");
    };
    let iq_s = iq.to_str().expect("utf-8");
    check(
        &[
            "plot",
            iq_s,
            "--rate",
            "250000",
            "--carrier",
            "-100000",
            "--out",
            o,
        ],
        iq_s,
        "no bursty carrier within",
    );
    let env_s = env.to_str().expect("utf-8");
    check(
        &["plot", env_s, "--carrier", "25000", "--out", o],
        env_s,
        "envelope capture",
    );
    // Standard input cannot be surveyed first and read again.
    let r = common::bin()
        .args([
            "plot",
            "-",
            "--format",
            "cu8",
            "--rate",
            "250000",
            "--carrier",
            "25000",
        ])
        .args(["--out", o])
        .stdin(std::fs::File::open(&iq).expect("open"))
        .output()
        .expect("runs");
    assert_eq!(r.status.code(), Some(1));
    let msg = String::from_utf8_lossy(&r.stderr);
    assert!(
        msg.starts_with("ooksift: -: ")
            && msg.contains("standard input")
            && msg.lines().count() == 1,
        "{msg}"
    );
    assert!(!out.exists());
    // Neither a number nor `strongest`: a usage error.
    let r = common::run(&["plot", iq_s, "--carrier", "loud", "--out", o]);
    assert_eq!(r.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&r.stderr).contains("strongest"));
    // `strongest` picks one of the two and says so.
    let r = common::run(&[
        "plot",
        iq_s,
        "--rate",
        "250000",
        "--carrier",
        "strongest",
        "--out",
        o,
    ]);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    let svg = std::fs::read_to_string(&out).expect("written");
    assert!(svg.contains("(the strongest)"));
    let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
    let hex = texts(&with_class(&doc, "frame-hex"));
    assert!(
        hex == vec!["0xcf2b12"; 4] || hex == vec!["0x5a3c"; 3],
        "{hex:?}"
    );
}
