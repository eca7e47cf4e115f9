//! The SVG writer: plain text, one `<g>` per view, classes that name what each element is
//! (`frame`, `bit`, `mark`, `envelope`, `floor`, `threshold`, `bar`, `cluster`, `unit`,
//! `carrier`, `average`, `peak`, `view-source`, `channel-band`), so tests and style sheets can
//! find them.

use super::axis::{self, Scale};
use super::channel::khz;
use super::{PlotData, ShownChannel, SpectrumView};
use crate::report::{CodeReport, FrameTimeline};
use crate::timing;
use std::fmt::Write;

/// Width of the whole picture.
pub const SVG_WIDTH_PX: u32 = 1400;
/// Width of the plot areas (the envelope keeps one column per pixel of it).
pub(crate) const PLOT_WIDTH_PX: u32 = 1290;
const LEFT: f64 = 80.0;
const RIGHT: f64 = LEFT + PLOT_WIDTH_PX as f64;
const SANS: &str = "DejaVu Sans, Helvetica, Arial, sans-serif";
const MONO: &str = "DejaVu Sans Mono, Menlo, Consolas, monospace";
/// Frame colours, one per code (cycled).
const PALETTE: [&str; 6] = [
    "#1b7f3b", "#8e3bb5", "#c0392b", "#1f6fb2", "#b7791f", "#2c7a7b",
];
/// Narrowest a bit may be drawn to get its own label, px.
const MIN_BIT_PX: f64 = 8.0;

/// Escapes text for XML content and attribute values.
fn esc(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            '\'' => o.push_str("&apos;"),
            c if (c as u32) < 0x20 && c != '\t' && c != '\n' => o.push('\u{fffd}'),
            c => o.push(c),
        }
    }
    o
}

/// A coordinate with one decimal (enough at screen resolution).
fn n(x: f64) -> String {
    if !x.is_finite() {
        return "0".into();
    }
    let r = (x * 10.0).round() / 10.0;
    if r == 0.0 {
        "0".into()
    } else {
        format!("{r}")
    }
}

struct Svg {
    s: String,
}

impl Svg {
    fn text(&mut self, x: f64, y: f64, attrs: &str, body: &str) {
        let _ = writeln!(
            self.s,
            r#"<text x="{}" y="{}" {attrs}>{}</text>"#,
            n(x),
            n(y),
            esc(body)
        );
    }

    fn line(&mut self, x1: f64, y1: f64, x2: f64, y2: f64, attrs: &str) {
        let _ = writeln!(
            self.s,
            r#"<line x1="{}" y1="{}" x2="{}" y2="{}" {attrs}/>"#,
            n(x1),
            n(y1),
            n(x2),
            n(y2)
        );
    }

    fn rect(&mut self, x: f64, y: f64, w: f64, h: f64, attrs: &str) {
        let _ = writeln!(
            self.s,
            r#"<rect x="{}" y="{}" width="{}" height="{}" {attrs}/>"#,
            n(x),
            n(y),
            n(w.max(0.0)),
            n(h.max(0.0))
        );
    }

    fn raw(&mut self, t: &str) {
        self.s.push_str(t);
        self.s.push('\n');
    }
}

/// A polyline path through finite points; a non-finite y breaks the line.
fn path_of(points: impl Iterator<Item = (f64, f64)>) -> String {
    let mut d = String::new();
    let mut pen_up = true;
    for (x, y) in points {
        if !(x.is_finite() && y.is_finite()) {
            pen_up = true;
            continue;
        }
        let _ = write!(d, "{}{} {} ", if pen_up { "M" } else { "L" }, n(x), n(y));
        pen_up = false;
    }
    d.trim_end().to_string()
}

/// One legend entry: a swatch (line or box) and a label; returns the x after it.
fn legend(svg: &mut Svg, x: f64, y: f64, swatch: &str, label: &str) -> f64 {
    svg.raw(&format!(
        r#"<g transform="translate({},{})">{swatch}</g>"#,
        n(x),
        n(y - 4.0)
    ));
    svg.text(x + 22.0, y, r##"font-size="11" fill="#333""##, label);
    x + 22.0 + 6.6 * label.chars().count() as f64 + 18.0
}

/// Axes around a plot area: frame, grid, tick labels and titles.
struct AxisSpec<'a> {
    top: f64,
    bottom: f64,
    left: f64,
    right: f64,
    x_title: &'a str,
    y_title: &'a str,
}

fn frame_and_titles(svg: &mut Svg, a: &AxisSpec<'_>) {
    svg.rect(
        a.left,
        a.top,
        a.right - a.left,
        a.bottom - a.top,
        r##"fill="none" stroke="#888" stroke-width="1""##,
    );
    svg.text(
        (a.left + a.right) / 2.0,
        a.bottom + 36.0,
        r##"class="axis-title" text-anchor="middle" font-size="12" fill="#222""##,
        a.x_title,
    );
    let cy = (a.top + a.bottom) / 2.0;
    let x = a.left - 52.0;
    svg.text(
        x,
        cy,
        &format!(
            r##"class="axis-title" text-anchor="middle" font-size="12" fill="#222" transform="rotate(-90 {} {})""##,
            n(x),
            n(cy)
        ),
        a.y_title,
    );
}

fn y_ticks(svg: &mut Svg, a: &AxisSpec<'_>, y: &Scale, target: usize) {
    let (lo, hi) = y.domain();
    let (ticks, step) = axis::linear_ticks(lo, hi, target);
    for t in ticks {
        let py = y.at(t);
        svg.line(
            a.left,
            py,
            a.right,
            py,
            r##"stroke="#e6e6e6" stroke-width="1""##,
        );
        svg.line(a.left - 4.0, py, a.left, py, r##"stroke="#888""##);
        svg.text(
            a.left - 7.0,
            py + 4.0,
            r##"class="tick" text-anchor="end" font-size="11" fill="#444""##,
            &axis::label(t, step),
        );
    }
}

/// Linear x ticks in display units (`value_s / per_unit`), labelled at `label_y`.
fn x_ticks(svg: &mut Svg, a: &AxisSpec<'_>, x: &Scale, per_unit: f64, label_y: f64) {
    let (lo, hi) = x.domain();
    let (ticks, step) = axis::linear_ticks(lo / per_unit, hi / per_unit, 10);
    for t in ticks {
        let px = x.at(t * per_unit);
        svg.line(
            px,
            a.top,
            px,
            a.bottom,
            r##"stroke="#eeeeee" stroke-width="1""##,
        );
        svg.line(px, a.bottom, px, a.bottom + 4.0, r##"stroke="#888""##);
        svg.text(
            px,
            label_y,
            r##"class="tick" text-anchor="middle" font-size="11" fill="#444""##,
            &axis::label(t, step),
        );
    }
}

/// Start and end (seconds) of a frame on the timeline.
fn frame_span(f: &FrameTimeline) -> (f64, f64) {
    let last = f.marks_us.last().copied().unwrap_or(0.0);
    (f.start_s, f.start_s + last * 1e-6)
}

/// Time span (seconds) of each data bit of a frame, when its marks fit the code's layout:
/// PWM — a bit is a mark and the space after it; PPM — the space between two marks.
fn bit_spans(code: &CodeReport, f: &FrameTimeline) -> Option<Vec<(f64, f64)>> {
    let m: Vec<(f64, f64)> = f
        .marks_us
        .chunks(2)
        .filter(|c| c.len() == 2)
        .map(|c| (f.start_s + c[0] * 1e-6, f.start_s + c[1] * 1e-6))
        .collect();
    let h = usize::from(code.framing.header_mark_us.is_some());
    let nb = code.bit_count;
    match code.line_code.as_str() {
        "pwm" if m.len() >= h + nb => Some(
            (0..nb)
                .map(|i| {
                    let (r, fa) = m[h + i];
                    let next = m.get(h + i + 1).map_or(fa + (fa - r), |x| x.0);
                    (r, next)
                })
                .collect(),
        ),
        "ppm" if m.len() > h + nb => Some((0..nb).map(|i| (m[h + i].1, m[h + i + 1].0)).collect()),
        _ => None,
    }
}

/// Renders the plot as an SVG document.
pub fn render_svg(d: &PlotData) -> String {
    let has_spectrum = d
        .spectrum
        .as_ref()
        .is_some_and(|s| !s.average_db.is_empty());
    let hist_top = if has_spectrum { 760.0 } else { 470.0 };
    let height = hist_top + 290.0;
    let mut svg = Svg { s: String::new() };
    let _ = writeln!(
        svg.s,
        r#"<?xml version="1.0" encoding="UTF-8"?>
<svg xmlns="http://www.w3.org/2000/svg" width="{w}" height="{h}" viewBox="0 0 {w} {h}" font-family="{SANS}">"#,
        w = SVG_WIDTH_PX,
        h = n(height)
    );
    let c = &d.report.capture;
    let name = std::path::Path::new(&c.path)
        .file_name()
        .map_or_else(|| c.path.clone(), |s| s.to_string_lossy().into_owned());
    let _ = writeln!(svg.s, "<title>ooksift plot of {}</title>", esc(&name));
    svg.rect(0.0, 0.0, SVG_WIDTH_PX as f64, height, r##"fill="#ffffff""##);
    header(&mut svg, d, &name);
    envelope_view(&mut svg, d);
    if let Some(s) = d.spectrum.as_ref().filter(|_| has_spectrum) {
        spectrum_view(&mut svg, s, d.channel.as_ref(), 470.0);
    }
    histogram_view(&mut svg, d, hist_top);
    let col_s = d.columns.first().map_or(0.0, |c| c.t1_s - c.t0_s);
    let (u, per) = axis::time_unit(col_s * 1000.0);
    svg.text(
        LEFT,
        height - 10.0,
        r##"font-size="10" fill="#888""##,
        &format!(
            "{} · envelope reduced to min/max per column: {} columns of {:.3} {u} · marks shaded as detected; frames, bits and widths from the decode",
            d.report.generator,
            d.columns.len(),
            col_s / per
        ),
    );
    svg.raw("</svg>");
    svg.s
}

fn header(svg: &mut Svg, d: &PlotData, name: &str) {
    let c = &d.report.capture;
    svg.text(
        LEFT,
        28.0,
        r##"font-size="18" font-weight="bold" fill="#111""##,
        name,
    );
    let centre = c.center_frequency_hz.map_or_else(
        || "centre unknown".to_string(),
        |f| format!("centre {:.4} MHz", f / 1e6),
    );
    let frames: usize = d.report.codes.iter().map(|k| k.frames).sum();
    let sub = format!(
        "{} ({}) · {} kS/s · {} · {:.3} s · window {:.4}–{:.4} s · {} code(s), {} frame(s), {} undecoded burst(s)",
        c.format,
        c.datatype,
        axis::label(c.sample_rate_hz / 1e3, 0.001),
        centre,
        c.duration_s,
        d.from_s,
        d.to_s,
        d.report.codes.len(),
        frames,
        d.report.undecoded_bursts
    );
    svg.text(LEFT, 48.0, r##"font-size="12" fill="#555""##, &sub);
}

/// What the envelope view reads: a carrier's channel, the whole band, or a recorded envelope.
pub fn view_source(d: &PlotData) -> String {
    match &d.channel {
        Some(c) => {
            let asked = match c.requested_hz {
                Some(f) => format!("asked for {}", khz(f)),
                None => "the strongest".to_string(),
            };
            format!(
                "channel of the carrier at {} ({asked}), {} wide",
                khz(c.carrier_offset_hz),
                khz(c.bandwidth_hz).trim_start_matches('+')
            )
        }
        // SigMF datatype names start with `c` for complex samples.
        None if d.report.capture.datatype.starts_with('c') => {
            "whole band, every carrier at once".to_string()
        }
        None => "as recorded".to_string(),
    }
}

fn envelope_view(svg: &mut Svg, d: &PlotData) {
    let top = 84.0;
    let bottom = 384.0;
    svg.raw(r#"<g class="view envelope-view">"#);
    svg.text(
        LEFT,
        74.0,
        r##"font-size="14" font-weight="bold" fill="#222""##,
        "Envelope over time",
    );
    svg.text(
        LEFT + 172.0,
        74.0,
        r##"class="view-source" font-size="12" fill="#1f4e79""##,
        &view_source(d),
    );
    let mut x = RIGHT - 650.0;
    x = legend(
        svg,
        x,
        74.0,
        r##"<rect width="16" height="8" fill="#1f4e79"/>"##,
        "envelope (min/max)",
    );
    x = legend(
        svg,
        x,
        74.0,
        r##"<rect width="16" height="8" fill="#f0a030" fill-opacity="0.35"/>"##,
        "mark",
    );
    x = legend(
        svg,
        x,
        74.0,
        r##"<line x1="0" y1="4" x2="16" y2="4" stroke="#777" stroke-dasharray="4 2" stroke-width="1.5"/>"##,
        "floor",
    );
    x = legend(
        svg,
        x,
        74.0,
        r##"<line x1="0" y1="4" x2="16" y2="4" stroke="#d62728" stroke-dasharray="5 3" stroke-width="1.5"/>"##,
        &format!("floor + {}σ", d.on_sigma),
    );
    legend(
        svg,
        x,
        74.0,
        &format!(
            r##"<rect width="16" height="8" fill="none" stroke="{}" stroke-width="1.5"/>"##,
            PALETTE[0]
        ),
        "frame, bits below",
    );
    let xs = Scale::linear(d.from_s, d.to_s, LEFT, RIGHT);
    let mut lo = 0.0f64;
    let mut hi = 0.0f64;
    for c in &d.columns {
        lo = lo.min(c.min as f64);
        hi = hi.max(c.max as f64);
        if c.threshold.is_finite() {
            hi = hi.max(c.threshold as f64);
        }
    }
    if hi <= lo {
        hi = lo + 1.0;
    }
    let (ylo, yhi) = axis::nice_range(lo, hi + 0.05 * (hi - lo), 5);
    let ys = Scale::linear(ylo, yhi, bottom, top);
    let (unit, per) = axis::time_unit(d.to_s - d.from_s);
    let a = AxisSpec {
        top,
        bottom,
        left: LEFT,
        right: RIGHT,
        x_title: &format!("time from capture start ({unit})"),
        y_title: "envelope (full scale)",
    };
    y_ticks(svg, &a, &ys, 5);
    x_ticks(svg, &a, &xs, per, bottom + 36.0);
    // Shift the x title below the tick labels and the bit strip.
    let a = AxisSpec {
        bottom: bottom + 18.0,
        ..a
    };

    // Marks, merged where they share a pixel.
    let mut shaded: Vec<(f64, f64)> = Vec::new();
    for &(r, f) in &d.marks_s {
        if f < d.from_s || r > d.to_s {
            continue;
        }
        let x0 = xs.clamped(r);
        let x1 = xs.clamped(f).max(x0 + 0.8);
        match shaded.last_mut() {
            Some(last) if x0 <= last.1 + 0.3 => last.1 = last.1.max(x1),
            _ => shaded.push((x0, x1)),
        }
    }
    for (x0, x1) in shaded {
        svg.rect(
            x0,
            top,
            x1 - x0,
            bottom - top,
            r##"class="mark" fill="#f0a030" fill-opacity="0.35""##,
        );
    }

    // The envelope band: maxima left to right, minima back.
    if !d.columns.is_empty() {
        let centre = |c: &super::EnvelopeColumn| xs.clamped(0.5 * (c.t0_s + c.t1_s));
        let upper = d.columns.iter().map(|c| (centre(c), ys.at(c.max as f64)));
        let lower = d
            .columns
            .iter()
            .rev()
            .map(|c| (centre(c), ys.at(c.min as f64)));
        let mut p = path_of(upper.chain(lower));
        p.push_str(" Z");
        svg.raw(&format!(
            r##"<path class="envelope" d="{p}" fill="#1f4e79" stroke="#1f4e79" stroke-width="1" stroke-linejoin="round"/>"##
        ));
        let level = |f: fn(&super::EnvelopeColumn) -> f32| {
            path_of(d.columns.iter().map(|c| (centre(c), ys.at(f(c) as f64))))
        };
        let floor = level(|c| c.floor);
        let thr = level(|c| c.threshold);
        svg.raw(&format!(
            r##"<path class="floor" d="{floor}" fill="none" stroke="#777" stroke-width="1.5" stroke-dasharray="4 2"/>"##
        ));
        svg.raw(&format!(
            r##"<path class="threshold" d="{thr}" fill="none" stroke="#d62728" stroke-width="1.5" stroke-dasharray="5 3"/>"##
        ));
    }

    // Frames with their keys above and bits below.
    for (ci, code) in d.report.codes.iter().enumerate() {
        let colour = PALETTE[ci % PALETTE.len()];
        for press in &code.timeline {
            for f in &press.frames {
                let (s, e) = frame_span(f);
                if e < d.from_s || s > d.to_s {
                    continue;
                }
                let x0 = xs.clamped(s);
                let x1 = xs.clamped(e).max(x0 + 1.0);
                svg.rect(
                    x0,
                    top + 1.0,
                    x1 - x0,
                    bottom - top - 2.0,
                    &format!(r#"class="frame" fill="none" stroke="{colour}" stroke-width="1.5""#),
                );
                let key = &code.key_id;
                if x1 - x0 >= 6.5 * key.len() as f64 + 6.0 {
                    svg.text(
                        (x0 + x1) / 2.0,
                        top + 13.0,
                        &format!(
                            r#"class="frame-label" text-anchor="middle" font-size="11" fill="{colour}""#
                        ),
                        key,
                    );
                }
                frame_bits(svg, code, f, &xs, (x0, x1), bottom + 15.0, colour, d);
            }
        }
    }
    frame_and_titles(svg, &a);
    svg.raw("</g>");
}

/// Writes a frame's bits under it: one label per bit when bits are wide enough, else the hex
/// when the frame is wide enough for it.
#[allow(clippy::too_many_arguments)]
fn frame_bits(
    svg: &mut Svg,
    code: &CodeReport,
    f: &FrameTimeline,
    xs: &Scale,
    (x0, x1): (f64, f64),
    y: f64,
    colour: &str,
    d: &PlotData,
) {
    let spans = bit_spans(code, f);
    let bits: Vec<char> = code.bits.chars().collect();
    if let Some(spans) = spans.filter(|s| !s.is_empty() && s.len() == bits.len()) {
        let px = (xs.at(spans[spans.len() - 1].1) - xs.at(spans[0].0)) / spans.len() as f64;
        if px >= MIN_BIT_PX {
            for ((a, b), ch) in spans.iter().zip(&bits) {
                let c = 0.5 * (a + b);
                if c < d.from_s || c > d.to_s {
                    continue;
                }
                let (weight, fill) = if *ch == '1' {
                    ("bold", "#111")
                } else {
                    ("normal", "#777")
                };
                svg.text(
                    xs.at(c),
                    y,
                    &format!(
                        r#"class="bit" text-anchor="middle" font-size="11" font-family="{MONO}" font-weight="{weight}" fill="{fill}""#
                    ),
                    &ch.to_string(),
                );
            }
            return;
        }
    }
    let hex = format!("0x{}", code.hex);
    if x1 - x0 >= 7.0 * hex.len() as f64 + 4.0 {
        svg.text(
            (x0 + x1) / 2.0,
            y,
            &format!(
                r#"class="frame-hex" text-anchor="middle" font-size="11" font-family="{MONO}" fill="{colour}""#
            ),
            &hex,
        );
    }
}

fn spectrum_view(svg: &mut Svg, s: &SpectrumView, shown: Option<&ShownChannel>, top0: f64) {
    let top = top0 + 24.0;
    let bottom = top + 200.0;
    svg.raw(r#"<g class="view spectrum-view">"#);
    svg.text(
        LEFT,
        top0 + 14.0,
        r##"font-size="14" font-weight="bold" fill="#222""##,
        "Spectrum",
    );
    let mut lx = RIGHT - if shown.is_some() { 530.0 } else { 360.0 };
    if shown.is_some() {
        lx = legend(
            svg,
            lx,
            top0 + 14.0,
            r##"<rect width="16" height="8" fill="#1f4e79" fill-opacity="0.18"/>"##,
            "channel shown above",
        );
    }
    lx = legend(
        svg,
        lx,
        top0 + 14.0,
        r##"<line x1="0" y1="4" x2="16" y2="4" stroke="#1f77b4" stroke-width="2"/>"##,
        "average",
    );
    lx = legend(
        svg,
        lx,
        top0 + 14.0,
        r##"<line x1="0" y1="4" x2="16" y2="4" stroke="#ff7f0e" stroke-width="1.5"/>"##,
        "peak hold",
    );
    legend(
        svg,
        lx,
        top0 + 14.0,
        r##"<line x1="0" y1="4" x2="16" y2="4" stroke="#d62728" stroke-dasharray="4 3" stroke-width="1.5"/>"##,
        "carrier",
    );
    let nb = s.average_db.len().min(s.peak_db.len());
    let rate = if s.rate_hz.is_finite() && s.rate_hz > 0.0 {
        s.rate_hz
    } else {
        1.0
    };
    // Axis in MHz (absolute) when the centre is known, else offset in kHz or MHz.
    let (base, per, title) = match s.center_hz {
        Some(c) if c.is_finite() => (c, 1e6, "frequency (MHz)".to_string()),
        _ if rate >= 4e6 => (0.0, 1e6, "offset from centre (MHz)".to_string()),
        _ => (0.0, 1e3, "offset from centre (kHz)".to_string()),
    };
    let xs = Scale::linear(base - rate / 2.0, base + rate / 2.0, LEFT, RIGHT);
    let finite = |v: &f32| v.is_finite();
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for &v in s.average_db[..nb]
        .iter()
        .chain(&s.peak_db[..nb])
        .filter(|v| finite(v))
    {
        lo = lo.min(v as f64);
        hi = hi.max(v as f64);
    }
    if !lo.is_finite() {
        (lo, hi) = (-100.0, 0.0);
    }
    let (ylo, yhi) = axis::nice_range(lo - 3.0, hi + 3.0, 5);
    let ys = Scale::linear(ylo, yhi, bottom, top);
    let a = AxisSpec {
        top,
        bottom,
        left: LEFT,
        right: RIGHT,
        x_title: &title,
        y_title: "level (dB)",
    };
    y_ticks(svg, &a, &ys, 5);
    x_ticks(svg, &a, &xs, per, bottom + 16.0);
    // One point per pixel: mean of the averages, max of the peaks.
    let px = PLOT_WIDTH_PX as usize;
    let mut avg: Vec<(f64, usize)> = vec![(0.0, 0); px];
    let mut peak: Vec<f64> = vec![f64::NEG_INFINITY; px];
    for k in 0..nb {
        let f = base + s.bin_offset_hz(k, nb);
        let col = ((xs.at(f) - LEFT).floor() as isize).clamp(0, px as isize - 1) as usize;
        if s.average_db[k].is_finite() {
            avg[col].0 += s.average_db[k] as f64;
            avg[col].1 += 1;
        }
        if s.peak_db[k].is_finite() {
            peak[col] = peak[col].max(s.peak_db[k] as f64);
        }
    }
    let pts_avg = avg
        .iter()
        .enumerate()
        .filter(|(_, a)| a.1 > 0)
        .map(|(i, a)| (LEFT + i as f64 + 0.5, ys.clamped(a.0 / a.1 as f64)));
    let pts_peak = peak
        .iter()
        .enumerate()
        .filter(|(_, p)| p.is_finite())
        .map(|(i, p)| (LEFT + i as f64 + 0.5, ys.clamped(*p)));
    // The chosen channel's passband, behind the traces.
    if let Some(c) = shown {
        let x0 = xs.clamped(base + c.carrier_offset_hz - c.bandwidth_hz / 2.0);
        let x1 = xs
            .clamped(base + c.carrier_offset_hz + c.bandwidth_hz / 2.0)
            .max(x0 + 2.0);
        svg.rect(
            x0,
            top,
            x1 - x0,
            bottom - top,
            r##"class="channel-band" fill="#1f4e79" fill-opacity="0.18""##,
        );
    }
    svg.raw(&format!(
        r##"<path class="peak" d="{}" fill="none" stroke="#ff7f0e" stroke-width="1.2"/>"##,
        path_of(pts_peak)
    ));
    svg.raw(&format!(
        r##"<path class="average" d="{}" fill="none" stroke="#1f77b4" stroke-width="1.6"/>"##,
        path_of(pts_avg)
    ));
    // The marker of the shown carrier (the nearest one, should offsets be rounded).
    let chosen = shown.and_then(|c| {
        s.carriers
            .iter()
            .enumerate()
            .min_by(|a, b| {
                let d = |m: &super::CarrierMarker| (m.offset_hz - c.carrier_offset_hz).abs();
                d(a.1).total_cmp(&d(b.1))
            })
            .filter(|(_, m)| (m.offset_hz - c.carrier_offset_hz).abs() <= 1.0)
            .map(|(i, _)| i)
    });
    for (i, c) in s.carriers.iter().enumerate() {
        let x = xs.at(base + c.offset_hz);
        if !(LEFT..=RIGHT).contains(&x) {
            continue;
        }
        let is_chosen = chosen == Some(i);
        svg.line(
            x,
            top,
            x,
            bottom,
            if is_chosen {
                r##"class="carrier chosen" stroke="#d62728" stroke-width="2.5""##
            } else {
                r##"class="carrier" stroke="#d62728" stroke-width="1.5" stroke-dasharray="4 3""##
            },
        );
        if let Some(l) = c.level_db.filter(|l| l.is_finite()) {
            let _ = writeln!(
                svg.s,
                r##"<circle class="carrier-level" cx="{}" cy="{}" r="3.5" fill="#d62728"/>"##,
                n(x),
                n(ys.clamped(l))
            );
        }
        let anchor = if x > RIGHT - 120.0 { "end" } else { "start" };
        let dx = if anchor == "end" { -4.0 } else { 4.0 };
        let weight = if is_chosen { "bold" } else { "normal" };
        svg.text(
            x + dx,
            top + 13.0,
            &format!(
                r##"class="carrier-label" text-anchor="{anchor}" font-size="11" font-weight="{weight}" fill="#d62728""##
            ),
            &c.label,
        );
        if is_chosen {
            svg.text(
                x + dx,
                top + 26.0,
                &format!(
                    r##"class="chosen-label" text-anchor="{anchor}" font-size="11" fill="#1f4e79""##
                ),
                "shown above",
            );
        }
    }
    frame_and_titles(svg, &a);
    svg.raw("</g>");
}

/// Mark widths, spaces inside frames and gaps between the frames of a press (µs), over the
/// frames that overlap the window.
fn widths_in_window(d: &PlotData) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
    let mut marks = Vec::new();
    let mut spaces = Vec::new();
    let mut units = Vec::new();
    for code in &d.report.codes {
        let mut used = false;
        for press in &code.timeline {
            let mut prev_end: Option<f64> = None;
            for f in &press.frames {
                let (s, e) = frame_span(f);
                let inside = e >= d.from_s && s <= d.to_s;
                if inside {
                    used = true;
                    let m = &f.marks_us;
                    for c in m.chunks(2).filter(|c| c.len() == 2) {
                        marks.push(c[1] - c[0]);
                    }
                    for w in m.get(1..).unwrap_or(&[]).chunks(2).filter(|c| c.len() == 2) {
                        spaces.push(w[1] - w[0]);
                    }
                    if let Some(pe) = prev_end {
                        spaces.push((s - pe) * 1e6);
                    }
                }
                prev_end = inside.then_some(e);
            }
        }
        if used
            && !units
                .iter()
                .any(|u: &f64| (u / code.unit_us - 1.0).abs() < 0.02)
        {
            units.push(code.unit_us);
        }
    }
    marks.retain(|w| w.is_finite() && *w > 0.0);
    spaces.retain(|w| w.is_finite() && *w > 0.0);
    (marks, spaces, units)
}

fn histogram_view(svg: &mut Svg, d: &PlotData, top0: f64) {
    let (marks, spaces, units) = widths_in_window(d);
    svg.raw(r#"<g class="view histogram-view">"#);
    let all = marks.iter().chain(&spaces);
    let lo = all.clone().fold(f64::INFINITY, |a, &b| a.min(b));
    let hi = all.fold(0.0f64, |a, &b| a.max(b));
    let gap = 70.0;
    let w = (RIGHT - LEFT - gap) / 2.0;
    let panels = [
        ("Mark widths", "mark width (µs, log scale)", &marks, LEFT),
        (
            "Space widths",
            "space width (µs, log scale)",
            &spaces,
            LEFT + w + gap,
        ),
    ];
    for (title, x_title, widths, left) in panels {
        let right = left + w;
        let top = top0 + 24.0;
        let bottom = top + 190.0;
        svg.text(
            left,
            top0 + 14.0,
            r##"font-size="14" font-weight="bold" fill="#222""##,
            title,
        );
        let a = AxisSpec {
            top,
            bottom,
            left,
            right,
            x_title,
            y_title: "count",
        };
        if widths.is_empty() || !lo.is_finite() {
            svg.text(
                (left + right) / 2.0,
                (top + bottom) / 2.0,
                r##"text-anchor="middle" font-size="12" fill="#888""##,
                "no decoded frames in this window",
            );
            frame_and_titles(svg, &a);
            continue;
        }
        let xs = Scale::log(lo / 1.5, hi * 1.5, left, right);
        let (dlo, dhi) = xs.domain();
        const BINS: usize = 120;
        let ratio = (dhi / dlo).ln() / BINS as f64;
        let mut counts = [0usize; BINS];
        for &v in widths.iter() {
            let b = (((v / dlo).ln() / ratio).floor() as isize).clamp(0, BINS as isize - 1);
            counts[b as usize] += 1;
        }
        let max = counts.iter().copied().max().unwrap_or(1).max(1) as f64;
        let (_, yhi) = axis::nice_range(0.0, max * 1.18, 4);
        let ys = Scale::linear(0.0, yhi, bottom, top);
        y_ticks(svg, &a, &ys, 4);
        for (v, major) in axis::log_ticks(dlo, dhi) {
            let px = xs.at(v);
            let stroke = if major { "#dddddd" } else { "#f0f0f0" };
            svg.line(px, top, px, bottom, &format!(r#"stroke="{stroke}""#));
            svg.line(px, bottom, px, bottom + 4.0, r##"stroke="#888""##);
            svg.text(
                px,
                bottom + 16.0,
                r##"class="tick" text-anchor="middle" font-size="11" fill="#444""##,
                &axis::short_us(v),
            );
        }
        // Clusters behind the bars, labelled with their mean and count.
        let clusters = timing::clusters(widths, 0.25);
        let single_unit = (units.len() == 1).then(|| units[0]);
        for (i, c) in clusters.iter().enumerate() {
            let x0 = xs.at(c.min / 1.04);
            let x1 = xs.at(c.max * 1.04).max(x0 + 3.0);
            svg.rect(
                x0,
                top,
                x1 - x0,
                bottom - top,
                r##"class="cluster" fill="#2ca02c" fill-opacity="0.12" stroke="#2ca02c" stroke-opacity="0.5""##,
            );
            let mut label = format!("{} µs ×{}", axis::short_us(c.mean), c.count);
            if let Some(u) = single_unit.filter(|u| *u > 0.0) {
                let _ = write!(label, " ({:.1}u)", c.mean / u);
            }
            // Alternate rows so neighbouring clusters' labels do not collide.
            let y = top + 13.0 + 13.0 * (i % 2) as f64;
            svg.text(
                (x0 + x1) / 2.0,
                y,
                r##"class="cluster-label" text-anchor="middle" font-size="10" fill="#1e6b1e""##,
                &label,
            );
        }
        for (b, &k) in counts.iter().enumerate() {
            if k == 0 {
                continue;
            }
            let x0 = xs.at(dlo * (ratio * b as f64).exp());
            let x1 = xs.at(dlo * (ratio * (b + 1) as f64).exp());
            let y = ys.at(k as f64);
            svg.rect(
                x0,
                y,
                (x1 - x0 - 0.5).max(1.0),
                bottom - y,
                r##"class="bar" fill="#1f4e79""##,
            );
        }
        for (i, &u) in units.iter().enumerate() {
            let x = xs.at(u);
            if !(left..=right).contains(&x) {
                continue;
            }
            svg.line(
                x,
                top,
                x,
                bottom,
                r##"class="unit" stroke="#d62728" stroke-width="1.5" stroke-dasharray="6 3""##,
            );
            svg.text(
                x + 4.0,
                bottom - 8.0 - 13.0 * i as f64,
                r##"class="unit-label" font-size="11" fill="#d62728""##,
                &format!("unit {} µs", axis::short_us(u)),
            );
        }
        frame_and_titles(svg, &a);
    }
    svg.raw("</g>");
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escaping_and_numbers() {
        assert_eq!(esc(r#"a<b>&"c'"#), "a&lt;b&gt;&amp;&quot;c&apos;");
        assert_eq!(n(1.04), "1");
        assert_eq!(n(-0.01), "0");
        assert_eq!(n(12.35), "12.4");
        assert_eq!(n(f64::NAN), "0");
        assert_eq!(
            path_of([(0.0, 1.0), (1.0, f64::NAN), (2.0, 3.0)].into_iter()),
            "M0 1 M2 3"
        );
    }
}
