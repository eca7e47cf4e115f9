//! Text and CSV views of a [`CompareReport`].

use std::fmt::Write as _;

use super::{CodeKind, CompareError, CompareReport, FieldClass, Layout, ScanStatus};

/// Most codes for which the text view prints the distance matrix (the JSON always has it).
const MAX_TEXT_MATRIX: usize = 40;

/// Leading CSV columns, before the per-field columns.
///
/// The CSV has one row per input code. After these columns come one column per field of every
/// layout, named `l<layout>_<class>_<start>_<length>` (e.g. `l0_address_0_20`), holding the
/// code's bits in that field, or empty for codes of another layout.
pub const CSV_FIXED_COLUMNS: [&str; 13] = [
    "index",
    "source",
    "label",
    "transmitter",
    "layout",
    "time_rank",
    "key_id",
    "line_code",
    "bit_count",
    "bits",
    "hex",
    "presses",
    "first_start_s",
];

/// Writes the report as CSV (see [`CSV_FIXED_COLUMNS`] for the header).
pub fn write_csv<W: std::io::Write>(report: &CompareReport, writer: W) -> Result<(), CompareError> {
    let mut w = csv::Writer::from_writer(writer);
    let mut header: Vec<String> = CSV_FIXED_COLUMNS.iter().map(|s| s.to_string()).collect();
    let mut offsets = Vec::with_capacity(report.layouts.len());
    for layout in &report.layouts {
        offsets.push(header.len());
        for f in &layout.fields {
            header.push(format!(
                "l{}_{}_{}_{}",
                layout.index,
                f.class.name(),
                f.start,
                f.length
            ));
        }
    }
    let width = header.len();
    w.write_record(&header)?;
    for c in &report.codes {
        let mut row = vec![
            c.index.to_string(),
            c.source.clone(),
            c.label.clone().unwrap_or_default(),
            c.transmitter.clone(),
            c.layout.to_string(),
            c.time_rank.to_string(),
            c.key_id.clone(),
            c.line_code.clone(),
            c.bit_count.to_string(),
            c.bits.clone(),
            c.hex.clone(),
            c.presses.to_string(),
            c.first_start_s.to_string(),
        ];
        row.resize(width, String::new());
        if let Some(&off) = offsets.get(c.layout) {
            for (i, v) in c.field_values.iter().enumerate() {
                if let Some(slot) = row.get_mut(off + i) {
                    slot.clone_from(v);
                }
            }
        }
        w.write_record(&row)?;
    }
    w.flush().map_err(|e| CompareError::Csv(e.into()))?;
    Ok(())
}

/// Renders the report for a terminal: per layout the transmitters, an aligned field map with one
/// code per row, the fields, the verdicts with evidence, the distance matrix and the checksum
/// candidates.
pub fn render_text(report: &CompareReport) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "compare: {} code{} in {} layout{}",
        report.codes.len(),
        plural(report.codes.len()),
        report.layouts.len(),
        plural(report.layouts.len())
    );
    for layout in &report.layouts {
        out.push('\n');
        layout_text(report, layout, &mut out);
    }
    out
}

fn plural(n: usize) -> &'static str {
    if n == 1 {
        ""
    } else {
        "s"
    }
}

fn yes_no(b: bool) -> &'static str {
    if b {
        "yes"
    } else {
        "no"
    }
}

/// Splits a string of per-position characters into field groups separated by spaces.
fn grouped(layout: &Layout, chars: &[char]) -> String {
    let mut s = String::new();
    for (i, f) in layout.fields.iter().enumerate() {
        if i > 0 {
            s.push(' ');
        }
        s.extend(chars.iter().skip(f.start).take(f.length));
    }
    s
}

fn layout_text(report: &CompareReport, layout: &Layout, out: &mut String) {
    let _ = writeln!(
        out,
        "== layout {}: {}, {} bits, {} code{} ==",
        layout.index,
        layout.line_code,
        layout.bit_count,
        layout.codes.len(),
        plural(layout.codes.len())
    );
    let g = &layout.grouping;
    let method = match g.method {
        super::GroupingMethod::Labels => "by label",
        super::GroupingMethod::Inferred => "inferred",
        super::GroupingMethod::Mixed => "labels + inferred",
    };
    let _ = writeln!(out, "transmitters ({method}): {}", g.transmitters.len());
    for t in &g.transmitters {
        let codes: Vec<String> = t.codes.iter().map(|c| c.to_string()).collect();
        let _ = writeln!(out, "  {:<12} codes {}", t.name, codes.join(" "));
    }
    let _ = writeln!(out, "  rule: {}", g.rule);

    // Field map.
    let _ = writeln!(
        out,
        "field map (F fixed, A address, K key, C counter, R random, X check):"
    );
    let tx_w = layout
        .codes
        .iter()
        .filter_map(|&i| report.codes.get(i))
        .map(|c| c.transmitter.chars().count())
        .max()
        .unwrap_or(0)
        .max("transmitter".len());
    let idx_w = layout
        .codes
        .iter()
        .map(|i| i.to_string().len())
        .max()
        .unwrap_or(1)
        .max(4);
    let class_chars: Vec<char> = layout.position_classes.iter().map(|c| c.letter()).collect();
    let class_line = grouped(layout, &class_chars);
    let bits_w = class_line.chars().count();
    // Start positions written at each field's first column when they fit.
    let mut start_line: Vec<char> = vec![' '; bits_w];
    let mut col = 0;
    for (i, f) in layout.fields.iter().enumerate() {
        if i > 0 {
            col += 1;
        }
        let label: Vec<char> = f.start.to_string().chars().collect();
        if label.len() <= f.length + 1 && col + label.len() <= bits_w {
            start_line[col..col + label.len()].copy_from_slice(&label);
        }
        col += f.length;
    }
    let start_line: String = start_line.into_iter().collect();
    let _ = writeln!(
        out,
        "  {:>idx_w$}  {:<tx_w$}  {:<bits_w$}  presses  source",
        "code", "transmitter", "bits"
    );
    let _ = writeln!(out, "  {:>idx_w$}  {:<tx_w$}  {}", "", "class", class_line);
    let _ = writeln!(
        out,
        "  {:>idx_w$}  {:<tx_w$}  {}",
        "",
        "start",
        start_line.trim_end()
    );
    let mut rows: Vec<usize> = layout.codes.clone();
    rows.sort_by_key(|&i| {
        let c = report.codes.get(i);
        let tx = g
            .transmitters
            .iter()
            .position(|t| t.codes.contains(&i))
            .unwrap_or(usize::MAX);
        (tx, c.map_or(0, |c| c.time_rank))
    });
    for i in rows {
        let Some(c) = report.codes.get(i) else {
            continue;
        };
        let bit_chars: Vec<char> = c.bits.chars().collect();
        let _ = writeln!(
            out,
            "  {:>idx_w$}  {:<tx_w$}  {:<bits_w$}  {:>7}  {}",
            c.index,
            c.transmitter,
            grouped(layout, &bit_chars),
            c.presses,
            c.source
        );
    }

    // Fields.
    let _ = writeln!(out, "fields:");
    let _ = writeln!(
        out,
        "  {:<8} {:>9} {:>8}  values",
        "class", "bits", "distinct"
    );
    for f in &layout.fields {
        let shown: Vec<&str> = f.values.iter().take(6).map(String::as_str).collect();
        let more = if f.values.len() > shown.len() {
            format!(" … (+{})", f.values.len() - shown.len())
        } else {
            String::new()
        };
        let _ = writeln!(
            out,
            "  {:<8} {:>9} {:>8}  {}{}",
            f.class.name(),
            format!("{}..{}", f.start, f.start + f.length),
            f.distinct,
            shown.join(" "),
            more
        );
        if matches!(
            f.class,
            FieldClass::Counter | FieldClass::Random | FieldClass::Check
        ) {
            for e in &f.evidence {
                let _ = writeln!(out, "           {e}");
            }
        }
    }

    // Verdicts.
    let v = &layout.verdicts;
    let kind = match v.code_kind {
        CodeKind::Fixed => "fixed",
        CodeKind::Rolling => "rolling",
        CodeKind::Undetermined => "undetermined",
    };
    let _ = writeln!(out, "verdicts:");
    let _ = writeln!(out, "  code: {kind}");
    for e in &v.code_kind_evidence {
        let _ = writeln!(out, "    - {e}");
    }
    let dist = match v.distinguishable {
        Some(b) => yes_no(b),
        None => "n/a",
    };
    let _ = writeln!(out, "  every button distinguishable: {dist}");
    for e in &v.distinguishable_evidence {
        let _ = writeln!(out, "    - {e}");
    }
    if let Some(c) = v.closest_codes {
        let _ = writeln!(
            out,
            "  closest codes: {} and {}, {} bit{} apart",
            c.a,
            c.b,
            c.distance,
            plural(c.distance as usize)
        );
    }

    // Distance matrix.
    let n = layout.codes.len();
    if n > MAX_TEXT_MATRIX {
        let _ = writeln!(out, "distances: {n} codes, matrix omitted here (see JSON)");
    } else if n >= 2 {
        let w = layout
            .codes
            .iter()
            .map(|i| i.to_string().len())
            .chain(std::iter::once(layout.bit_count.to_string().len()))
            .max()
            .unwrap_or(1);
        let _ = writeln!(out, "distances (bits):");
        let mut head = format!("  {:>w$}", "");
        for i in &layout.codes {
            let _ = write!(head, " {i:>w$}");
        }
        let _ = writeln!(out, "{head}");
        for (r, i) in layout.codes.iter().enumerate() {
            let mut line = format!("  {i:>w$}");
            for d in layout.distances.get(r).into_iter().flatten() {
                let _ = write!(line, " {d:>w$}");
            }
            let _ = writeln!(out, "{line}");
        }
    }

    // Checksums.
    let cs = &layout.checksums;
    let _ = writeln!(
        out,
        "checksums over {} distinct code{} (kept when expected false matches ≤ {:e}):",
        cs.distinct_codes,
        plural(cs.distinct_codes),
        cs.max_false_match
    );
    let scans: Vec<String> = cs
        .widths
        .iter()
        .map(|s| {
            let st = match s.status {
                ScanStatus::Searched => format!("searched, {} found", s.candidates),
                ScanStatus::TooFewCodes => {
                    format!("too few codes (rank {})", s.independent_differences)
                }
                ScanStatus::Inconsistent => "inconsistent".to_string(),
                ScanStatus::TooShort => "too short".to_string(),
            };
            format!("{}: {st}", s.width)
        })
        .collect();
    let _ = writeln!(out, "  crc widths — {}", scans.join("; "));
    if cs.crc.is_empty() && cs.simple.is_empty() {
        let _ = writeln!(out, "  no candidate explains every code");
    }
    for c in &cs.crc {
        let digits = (c.width as usize).div_ceil(4);
        let ones_init = if c.width >= 32 {
            u32::MAX
        } else {
            (1u32 << c.width) - 1
        };
        let zero_x = c
            .init_at_xorout_zero
            .map_or("none unique".to_string(), |i| format!("0x{i:0digits$X}"));
        let _ = writeln!(
            out,
            "  crc-{} poly 0x{:0digits$X} refin {} refout {}: init 0x{:0digits$X} → xorout 0x{:0digits$X}; \
             init 0x{:0digits$X} → xorout 0x{:0digits$X}; xorout 0 with init {}; {} codes, {} independent; \
             expected false matches {:.1e}{}",
            c.width,
            c.poly,
            yes_no(c.refin),
            yes_no(c.refout),
            0,
            c.xorout_at_init_zero,
            ones_init,
            c.xorout_at_init_ones,
            zero_x,
            c.supporting_codes,
            c.independent_differences,
            c.false_match_estimate,
            if c.catalogue_names.is_empty() {
                String::new()
            } else {
                format!("; catalogue: {}", c.catalogue_names.join(", "))
            }
        );
        if let Some(note) = &c.note {
            let _ = writeln!(out, "      {note}");
        }
    }
    for s in &cs.simple {
        let digits = (s.width as usize).div_ceil(4);
        let _ = writeln!(
            out,
            "  {} constant 0x{:0digits$X}: {} codes, {} independent; expected false matches {:.1e}",
            s.kind.name(),
            s.constant,
            s.supporting_codes,
            s.independent_differences,
            s.false_match_estimate
        );
    }
    if !layout.notes.is_empty() {
        let _ = writeln!(out, "notes:");
        for n in &layout.notes {
            let _ = writeln!(out, "  - {n}");
        }
    }
}
