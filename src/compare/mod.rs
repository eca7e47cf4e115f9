//! Compare codes across captures and transmitters: which bits are the transmitter's address,
//! which the key, which roll from press to press, whether every button can be told apart, and
//! whether the code ends in a checksum.
//!
//! The decoder yields codes (a [`CodeEntry`] each: line code, data bits, presses, time). Codes
//! of the same line code and length form a *layout*; each layout is analysed on its own:
//!
//! 1. **Checksum search** ([`ChecksumSearch`]): simple checks and CRCs over the trailing bits,
//!    with a false-match estimate that must stay below
//!    [`CompareOptions::max_false_match`]. The widest check found becomes a `check` field and is
//!    left out of the steps below. See the `checks` and `crc` module docs for the method.
//! 2. **Rolling parts**, found before any grouping (they would blur it): the bit positions are cut
//!    into contiguous segments by a minimum-description-length split. Each segment is costed
//!    either *raw* (each varying column coded alone: `presses × its binary entropy`, summed) or
//!    as a *dictionary* of the values seen plus an index per press (`distinct × varying bits +
//!    presses × entropy of the value counts`), plus `log2(length + 1)` bits per segment boundary.
//!    Address and key parts repeat their values and come out as dictionaries; a part that takes
//!    a new value in (nearly) every press comes out raw. Inside a raw segment:
//!    - a **`counter`** is a sub-span whose value, ordered by time (input order of the sources,
//!      then `first_start_s`) within each group of codes that agree on the dictionary positions
//!      (and label), read MSB-first or LSB-first, steps by small increments
//!      `1..=min(counter_max_step, 2^k/4)` (`k`-bit span) in at least 3 of 4 steps, over at least
//!      3 steps, with a binomial chance of that many small steps from random values — times the
//!      number of sub-spans tried (Bonferroni) — at most `max_false_match`. The sub-span with the
//!      fewest large steps, then the most bits, wins. A counter never repeats a value within a
//!      group beyond `rolling_max_repeat_fraction`, and independent counters do not run through
//!      the same values in the same order (keys pressed in the same order on every unit do):
//!      either rules a counter out;
//!    - otherwise the segment is **`random`** when at least `rolling_min_presses` presses are
//!      seen, at most `rolling_max_repeat_fraction` of them repeat a value anywhere, and it has
//!      `k` varying bits with `2^k ≥ presses²` (a uniformly random field that short would itself
//!      show repeats, so a short never-repeating field is more likely a set of keys);
//!    - otherwise it stays a candidate for address/key and the layout notes say why.
//! 3. **Transmitters** ([`Grouping`]): by label when every code has one. Otherwise inferred from
//!    the remaining varying positions (neither fixed, rolling nor check): codes equal on those
//!    positions count as one point (one button), the points are clustered by single linkage on
//!    the Hamming distance, and the tree is cut at the merge distance that gives the best mean
//!    silhouette (Rousseeuw 1987); the cut is kept only when that silhouette is at least 0.5,
//!    else all codes form one transmitter (also when there are only two distinct points). Codes
//!    with labels are grouped by label and the unlabelled rest is inferred among itself. Without
//!    labels, transmitters that carry one key each cannot be told from one transmitter's keys:
//!    pass labels then.
//! 4. **Counters, second look**: a counter's upper bits change only at carries, so they can come
//!    out of steps 2–3 as key bits (they change within a transmitter) or even as address bits
//!    (a long carry splits one transmitter in two). With transmitters known, runs of key
//!    positions are searched for counter spans (groups: transmitter and the other key bits), and
//!    every counter is refined over its neighbours: a span that overlaps it may take in a
//!    varying position only if that position changes within some group of codes agreeing on all
//!    other varying positions outside the span, and the best fit by the rule above replaces the
//!    field. Transmitters are then formed again; this repeats until nothing changes (at most 4
//!    rounds).
//! 5. **Field map**: per position one [`FieldClass`]: `check`, `counter`, `random` as above;
//!    `fixed` when equal in every code; `address` when constant within every transmitter (so it
//!    differs between transmitters); `key` when it varies within a transmitter. Adjacent
//!    positions of one class merge into a [`Field`]. A counter field keeps constant positions
//!    inside its span; a random field does not.
//! 6. **Verdicts** ([`Verdicts`]) and the full pairwise Hamming distance matrix.
//!
//! ```
//! use ooksift::compare::{compare, render_text, CodeEntry, CompareOptions};
//! let code = |source: &str, bits: &str| CodeEntry {
//!     source: source.into(),
//!     label: None,
//!     key_id: format!("pwm-{bits}"),
//!     line_code: "pwm".into(),
//!     bits: bits.into(),
//!     presses: 2,
//!     first_start_s: 0.5,
//! };
//! let entries = vec![
//!     code("lamp-left.cu8", "1011001110001000"),
//!     code("lamp-right.cu8", "1011001110000100"),
//! ];
//! let report = compare(&entries, &CompareOptions::default()).expect("two comparable codes");
//! assert_eq!(report.layouts[0].verdicts.code_kind, ooksift::compare::CodeKind::Fixed);
//! println!("{}", render_text(&report));
//! ```

mod bits;
mod checks;
mod crc;
mod fields;
mod render;

use std::collections::HashMap;

use serde::{Deserialize, Serialize};

pub use checks::{ChecksumSearch, ScanStatus, SimpleCandidate, SimpleCheckKind, WidthScan};
pub use crc::{crc_bits, crc_bytes, CatalogueEntry, CrcCandidate, CrcParams, CRC_CATALOGUE};
pub use render::{render_text, write_csv, CSV_FIXED_COLUMNS};

/// Longest code accepted, in bits.
pub const MAX_CODE_BITS: usize = 512;

/// Format tag written into every report.
pub const REPORT_FORMAT: &str = "ooksift-compare/1";

/// One decoded code to compare (plain data; the CLI fills it from captures or saved reports).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CodeEntry {
    /// Where the code came from (capture or report path); its first appearance fixes the
    /// source's place in time order.
    pub source: String,
    /// Name of the transmitter this code belongs to, when the user gave one.
    pub label: Option<String>,
    /// Stable id of (line code, bits).
    pub key_id: String,
    /// Line code, lower case ("pwm", "ppm", "manchester", "nrz", …).
    pub line_code: String,
    /// Data bits, MSB first, as `'0'`/`'1'` characters.
    pub bits: String,
    /// Separate transmissions carrying this code (0 is counted as 1).
    pub presses: u32,
    /// Time of the code's first frame from its capture's start, seconds.
    pub first_start_s: f64,
}

/// Settings of [`compare`]. Start from [`Default`] and change fields.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub struct CompareOptions {
    /// Smallest CRC width searched (≥ 1). Default 4.
    pub crc_width_min: u32,
    /// Largest CRC width searched (≤ 16). Default 16.
    pub crc_width_max: u32,
    /// Largest accepted expected number of false matches of a checksum width or kind, and
    /// largest chance of a counter's small steps arising from random values. Default 1e-3.
    pub max_false_match: f64,
    /// Fewest presses before a never-repeating part is called random rolling. Default 8.
    pub rolling_min_presses: u32,
    /// Largest fraction of presses that may repeat an earlier value in a rolling part (e.g. one
    /// transmission captured as two presses). Default 0.1.
    pub rolling_max_repeat_fraction: f64,
    /// Largest step between consecutive counter values. Default 16.
    pub counter_max_step: u32,
    /// Most codes accepted (the distance matrix grows with the square). Default 2000.
    pub max_codes: usize,
}

impl Default for CompareOptions {
    fn default() -> Self {
        Self {
            crc_width_min: 4,
            crc_width_max: 16,
            max_false_match: 1e-3,
            rolling_min_presses: 8,
            rolling_max_repeat_fraction: 0.1,
            counter_max_step: 16,
            max_codes: 2000,
        }
    }
}

/// Errors of the compare stage.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum CompareError {
    /// The input held no codes.
    #[error("compare: no codes to compare")]
    NoCodes,
    /// A code's bits are not a non-empty string of 0 and 1, or another field is unusable.
    #[error("compare: code {index} from {input}: {reason}")]
    InvalidCode {
        /// Position in the input.
        index: usize,
        /// The code's source.
        input: String,
        /// What is wrong.
        reason: String,
    },
    /// A code is longer than [`MAX_CODE_BITS`].
    #[error("compare: code {index} from {input} has {bits} bits, more than the limit of {limit}")]
    CodeTooLong {
        /// Position in the input.
        index: usize,
        /// The code's source.
        input: String,
        /// Its length.
        bits: usize,
        /// The limit.
        limit: usize,
    },
    /// More codes than [`CompareOptions::max_codes`].
    #[error("compare: {count} codes exceed the limit of {limit}")]
    TooManyCodes {
        /// Codes given.
        count: usize,
        /// The limit.
        limit: usize,
    },
    /// No two codes share a line code and length.
    #[error(
        "compare: no two of the {codes} codes share a line code and length ({layouts} layouts); \
         nothing to compare"
    )]
    NothingToCompare {
        /// Codes given.
        codes: usize,
        /// Distinct (line code, length) pairs.
        layouts: usize,
    },
    /// An option is out of range.
    #[error("compare: invalid option: {0}")]
    InvalidOptions(String),
    /// Writing CSV failed.
    #[error("compare: writing CSV: {0}")]
    Csv(#[from] csv::Error),
}

/// Class of one bit position.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum FieldClass {
    /// Same in every code of the layout.
    Fixed,
    /// Same within each transmitter, differs between transmitters.
    Address,
    /// Differs between codes of one transmitter; not shown to roll.
    Key,
    /// Rolling: steps by small increments from press to press.
    Counter,
    /// Rolling: a new, unpredictable value in every press.
    Random,
    /// Trailing checksum explained by a candidate of the checksum search.
    Check,
}

impl FieldClass {
    /// One-letter tag used in the text field map.
    pub fn letter(self) -> char {
        match self {
            Self::Fixed => 'F',
            Self::Address => 'A',
            Self::Key => 'K',
            Self::Counter => 'C',
            Self::Random => 'R',
            Self::Check => 'X',
        }
    }

    /// Word used in text, JSON and CSV.
    pub fn name(self) -> &'static str {
        match self {
            Self::Fixed => "fixed",
            Self::Address => "address",
            Self::Key => "key",
            Self::Counter => "counter",
            Self::Random => "random",
            Self::Check => "check",
        }
    }

    /// Whether the class changes from press to press.
    pub fn is_rolling(self) -> bool {
        matches!(self, Self::Counter | Self::Random)
    }
}

/// Bit order in which a counter's value was read.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum BitOrder {
    /// First bit most significant.
    MsbFirst,
    /// First bit least significant.
    LsbFirst,
}

/// Why a field was called a counter.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CounterEvidence {
    /// Order in which the bits were read as a number.
    pub bit_order: BitOrder,
    /// Consecutive pairs (in time, within a group) compared.
    pub steps: usize,
    /// Pairs whose step was within `1..=max_step`.
    pub small_steps: usize,
    /// Largest step counted as small.
    pub max_step: u64,
    /// Binomial chance of at least `small_steps` small steps from random values, multiplied by
    /// the number of candidate spans tried (Bonferroni), capped at 1.
    pub chance: f64,
}

/// Adjacent positions of one class.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Field {
    /// Class of every position of the field.
    pub class: FieldClass,
    /// First bit position (0 = first bit sent).
    pub start: usize,
    /// Number of bits.
    pub length: usize,
    /// Number of distinct values over the layout's codes.
    pub distinct: usize,
    /// Distinct values (bit strings) in time order of first appearance.
    pub values: Vec<String>,
    /// Plain-words reasons for the class.
    pub evidence: Vec<String>,
    /// Counter evidence, for `counter` fields.
    pub counter: Option<CounterEvidence>,
}

/// How transmitters were formed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum GroupingMethod {
    /// Every code has a label.
    Labels,
    /// No code has a label: inferred by clustering.
    Inferred,
    /// Labelled codes by label, the others inferred among themselves.
    Mixed,
}

/// One transmitter of a layout.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Transmitter {
    /// Label, or an inferred name `tx1`, `tx2`, … (`L<layout>-tx<k>` when there are several
    /// layouts).
    pub name: String,
    /// Whether the name is a user label.
    pub labelled: bool,
    /// Indices (into [`CompareReport::codes`]) of its codes.
    pub codes: Vec<usize>,
}

/// Transmitter grouping of a layout and the evidence for it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Grouping {
    /// Labels, inferred or mixed.
    pub method: GroupingMethod,
    /// Positions used for clustering (varying, not rolling, not check).
    pub positions_used: usize,
    /// Single-linkage merge distances (minimum spanning tree edges) of the inferred codes,
    /// ascending.
    pub merge_distances: Vec<u32>,
    /// Codes closer than or at this distance were joined (None: no cut, one inferred group).
    pub cut_distance: Option<u32>,
    /// Best mean silhouette over the candidate cuts (None when there was no candidate).
    pub silhouette: Option<f64>,
    /// The rule, in words.
    pub rule: String,
    /// The transmitters.
    pub transmitters: Vec<Transmitter>,
}

/// Fixed or rolling.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum CodeKind {
    /// No part changes from press to press, and something repeats to show it.
    Fixed,
    /// A counter or random part changes from press to press.
    Rolling,
    /// Nothing repeats, yet there are too few presses to call a part rolling.
    Undetermined,
}

/// Two codes and their distance.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct CodePair {
    /// Index of the first code (into [`CompareReport::codes`]).
    pub a: usize,
    /// Index of the second code.
    pub b: usize,
    /// Differing bits.
    pub distance: u32,
}

/// Verdicts of a layout, each with evidence.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Verdicts {
    /// Fixed, rolling or undetermined.
    pub code_kind: CodeKind,
    /// Why.
    pub code_kind_evidence: Vec<String>,
    /// Buttons: distinct (transmitter, address and key bits) pairs.
    pub buttons: usize,
    /// Whether every two buttons differ in an address or key bit (None with fewer than two).
    pub distinguishable: Option<bool>,
    /// Why.
    pub distinguishable_evidence: Vec<String>,
    /// Positions (address and key) that identify a button.
    pub identity_positions: usize,
    /// Closest two codes of different buttons, counted on the identity positions.
    pub closest_buttons: Option<CodePair>,
    /// Codes of different transmitters with equal identity bits (at most 100 listed).
    pub collisions: Vec<CodePair>,
    /// Smallest non-zero Hamming distance between two codes over all bits, and the pair.
    pub closest_codes: Option<CodePair>,
}

/// Trailing bits explained by a checksum candidate.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CheckField {
    /// First position.
    pub start: usize,
    /// Width.
    pub length: usize,
    /// Which candidate explains it.
    pub explained_by: String,
}

/// Analysis of codes sharing one line code and length.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Layout {
    /// Index into [`CompareReport::layouts`].
    pub index: usize,
    /// Line code.
    pub line_code: String,
    /// Code length in bits.
    pub bit_count: usize,
    /// Indices (into [`CompareReport::codes`]) of its codes, in input order.
    pub codes: Vec<usize>,
    /// Transmitters.
    pub grouping: Grouping,
    /// Class of every bit position.
    pub position_classes: Vec<FieldClass>,
    /// Fields: adjacent positions of one class.
    pub fields: Vec<Field>,
    /// Trailing check bits, when a checksum candidate explains them.
    pub check_field: Option<CheckField>,
    /// Verdicts.
    pub verdicts: Verdicts,
    /// Hamming distances between the codes, in the order of `codes`.
    pub distances: Vec<Vec<u32>>,
    /// Checksum search.
    pub checksums: ChecksumSearch,
    /// Remarks (ambiguities, limits).
    pub notes: Vec<String>,
}

/// One input code with what the comparison found about it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ComparedCode {
    /// Position in the input (0-based).
    pub index: usize,
    /// Source.
    pub source: String,
    /// Label given by the user.
    pub label: Option<String>,
    /// Stable id of (line code, bits).
    pub key_id: String,
    /// Line code.
    pub line_code: String,
    /// Bits, MSB first.
    pub bits: String,
    /// Hex of the bits, MSB first, left-padded to whole nibbles.
    pub hex: String,
    /// Number of bits.
    pub bit_count: usize,
    /// Presses carrying it.
    pub presses: u32,
    /// First frame's start in its capture, seconds.
    pub first_start_s: f64,
    /// Rank in time order (source order, then `first_start_s`), 0-based.
    pub time_rank: usize,
    /// Index of its layout.
    pub layout: usize,
    /// Its transmitter's name.
    pub transmitter: String,
    /// Its bits in each field of its layout, in field order.
    pub field_values: Vec<String>,
}

/// Settings the report was made with.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Settings {
    /// Smallest CRC width searched.
    pub crc_width_min: u32,
    /// Largest CRC width searched.
    pub crc_width_max: u32,
    /// See [`CompareOptions::max_false_match`].
    pub max_false_match: f64,
    /// See [`CompareOptions::rolling_min_presses`].
    pub rolling_min_presses: u32,
    /// See [`CompareOptions::rolling_max_repeat_fraction`].
    pub rolling_max_repeat_fraction: f64,
    /// See [`CompareOptions::counter_max_step`].
    pub counter_max_step: u32,
}

/// Everything [`compare`] found. Serialises to the JSON of `schemas/compare.schema.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CompareReport {
    /// [`REPORT_FORMAT`].
    pub format: String,
    /// Settings used.
    pub settings: Settings,
    /// Every input code, in input order.
    pub codes: Vec<ComparedCode>,
    /// One analysis per (line code, length), in order of first appearance.
    pub layouts: Vec<Layout>,
}

fn check_options(o: &CompareOptions) -> Result<(), CompareError> {
    let bad = |s: String| Err(CompareError::InvalidOptions(s));
    if o.crc_width_min < 1 || o.crc_width_max > 16 || o.crc_width_min > o.crc_width_max {
        return bad(format!(
            "CRC widths {}..={} must lie within 1..=16, smallest first",
            o.crc_width_min, o.crc_width_max
        ));
    }
    if !(o.max_false_match > 0.0 && o.max_false_match < 1.0) {
        return bad(format!(
            "max_false_match {} must lie in (0, 1)",
            o.max_false_match
        ));
    }
    if o.rolling_min_presses < 2 {
        return bad(format!(
            "rolling_min_presses {} must be at least 2",
            o.rolling_min_presses
        ));
    }
    if !(0.0..1.0).contains(&o.rolling_max_repeat_fraction) {
        return bad(format!(
            "rolling_max_repeat_fraction {} must lie in [0, 1)",
            o.rolling_max_repeat_fraction
        ));
    }
    if o.counter_max_step < 1 {
        return bad("counter_max_step must be at least 1".to_string());
    }
    if o.max_codes < 2 {
        return bad(format!("max_codes {} must be at least 2", o.max_codes));
    }
    Ok(())
}

/// Compares codes: field map, transmitters, verdicts, distances and checksum candidates.
///
/// Codes are grouped into layouts by (line code, length). Errors: [`CompareError::NoCodes`] for
/// an empty input, [`CompareError::InvalidCode`] / [`CompareError::CodeTooLong`] for a bad code,
/// [`CompareError::TooManyCodes`], [`CompareError::InvalidOptions`], and
/// [`CompareError::NothingToCompare`] when no two codes share a layout. Layouts holding a single
/// code are still reported (undetermined) when another layout is comparable.
pub fn compare(
    entries: &[CodeEntry],
    opts: &CompareOptions,
) -> Result<CompareReport, CompareError> {
    check_options(opts)?;
    if entries.is_empty() {
        return Err(CompareError::NoCodes);
    }
    if entries.len() > opts.max_codes {
        return Err(CompareError::TooManyCodes {
            count: entries.len(),
            limit: opts.max_codes,
        });
    }
    let mut parsed = Vec::with_capacity(entries.len());
    for (index, e) in entries.iter().enumerate() {
        let invalid = |reason: String| CompareError::InvalidCode {
            index,
            input: e.source.clone(),
            reason,
        };
        let len = e.bits.chars().count();
        if len > MAX_CODE_BITS {
            return Err(CompareError::CodeTooLong {
                index,
                input: e.source.clone(),
                bits: len,
                limit: MAX_CODE_BITS,
            });
        }
        let bits = bits::parse_bits(&e.bits).map_err(invalid)?;
        if !e.first_start_s.is_finite() {
            return Err(invalid(format!(
                "first_start_s {} is not a finite number",
                e.first_start_s
            )));
        }
        parsed.push(bits);
    }

    // Time order: order of first appearance of the source, then first_start_s, then input order.
    let mut source_rank: HashMap<&str, usize> = HashMap::new();
    for e in entries {
        let next = source_rank.len();
        source_rank.entry(e.source.as_str()).or_insert(next);
    }
    let mut order: Vec<usize> = (0..entries.len()).collect();
    order.sort_by(|&a, &b| {
        let ra = source_rank
            .get(entries[a].source.as_str())
            .copied()
            .unwrap_or(0);
        let rb = source_rank
            .get(entries[b].source.as_str())
            .copied()
            .unwrap_or(0);
        ra.cmp(&rb)
            .then(
                entries[a]
                    .first_start_s
                    .total_cmp(&entries[b].first_start_s),
            )
            .then(a.cmp(&b))
    });
    let mut time_rank = vec![0usize; entries.len()];
    for (rank, &i) in order.iter().enumerate() {
        time_rank[i] = rank;
    }

    // Layouts in order of first appearance.
    let mut layout_of_key: HashMap<(&str, usize), usize> = HashMap::new();
    let mut layout_members: Vec<Vec<usize>> = Vec::new();
    let mut layout_of = vec![0usize; entries.len()];
    for (i, e) in entries.iter().enumerate() {
        let key = (e.line_code.as_str(), parsed[i].len());
        let l = *layout_of_key.entry(key).or_insert_with(|| {
            layout_members.push(Vec::new());
            layout_members.len() - 1
        });
        layout_members[l].push(i);
        layout_of[i] = l;
    }
    if layout_members.iter().all(|m| m.len() < 2) {
        return Err(CompareError::NothingToCompare {
            codes: entries.len(),
            layouts: layout_members.len(),
        });
    }

    let several = layout_members.len() > 1;
    let mut transmitter = vec![String::new(); entries.len()];
    let mut field_values: Vec<Vec<String>> = vec![Vec::new(); entries.len()];
    let mut layouts = Vec::with_capacity(layout_members.len());
    for (l, members) in layout_members.iter().enumerate() {
        let input = fields::LayoutInput {
            layout: l,
            several_layouts: several,
            members,
            entries,
            bits: members.iter().map(|&i| parsed[i].as_slice()).collect(),
            time_rank: members.iter().map(|&i| time_rank[i]).collect(),
        };
        let (layout, per_code) = fields::analyse(&input, opts);
        for (k, &i) in members.iter().enumerate() {
            if let Some((tx, values)) = per_code.get(k) {
                transmitter[i] = tx.clone();
                field_values[i] = values.clone();
            }
        }
        layouts.push(layout);
    }

    let codes = entries
        .iter()
        .enumerate()
        .map(|(i, e)| ComparedCode {
            index: i,
            source: e.source.clone(),
            label: e.label.clone(),
            key_id: e.key_id.clone(),
            line_code: e.line_code.clone(),
            bits: bits::to_string(&parsed[i]),
            hex: bits::to_hex(&parsed[i]),
            bit_count: parsed[i].len(),
            presses: e.presses,
            first_start_s: e.first_start_s,
            time_rank: time_rank[i],
            layout: layout_of[i],
            transmitter: std::mem::take(&mut transmitter[i]),
            field_values: std::mem::take(&mut field_values[i]),
        })
        .collect();

    Ok(CompareReport {
        format: REPORT_FORMAT.to_string(),
        settings: Settings {
            crc_width_min: opts.crc_width_min,
            crc_width_max: opts.crc_width_max,
            max_false_match: opts.max_false_match,
            rolling_min_presses: opts.rolling_min_presses,
            rolling_max_repeat_fraction: opts.rolling_max_repeat_fraction,
            counter_max_step: opts.counter_max_step,
        },
        codes,
        layouts,
    })
}
