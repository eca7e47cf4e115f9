//! Trellis re-slicing: the most likely sequence of the line code's symbols in a burst's
//! envelope, found by dynamic programming over a fine time grid.
//!
//! The edge stage decides mark or space sample by sample (with hysteresis); near the noise
//! floor a dip inside a mark or a noise peak inside a space breaks the structure of the frame,
//! and one broken mark costs the whole frame. Once the first pass has inferred the timing plan
//! of a burst — its line code, unit, header, closing mark and gap — that plan says which
//! mark/space patterns can occur at all: a PWM bit is a short mark and a long space or a long
//! mark and a short space, a PPM bit is a unit mark and a short or long space. This stage
//! searches, over every way of laying those symbols end to end (each element free to stretch
//! or shrink by a little, so drift and jitter are followed), for the sequence whose marks hold
//! the most evidence of a carrier:
//!
//! ```text
//! score(sequence) = Σ over its marks Σ over their samples  llr(envelope sample)
//! ```
//!
//! where `llr` is the log-likelihood ratio of "carrier on" against "carrier off" for one
//! envelope sample. Spaces add nothing (the all-space reading is the reference), so the best
//! sequence is the maximum-likelihood reading of the burst under the plan; summing the samples
//! of a whole mark is the integrate-and-dump matched filter, and the symbol grammar compares
//! exactly the units in which two symbols differ. Noise alone gives marks a negative expected
//! score, so the search lays no frame where there is no carrier.
//!
//! The search runs on bins of about an eighth of a unit (prefix sums make every mark's score
//! O(1)); its cost is a few hundred operations per unit of burst, independent of the sample
//! rate.
//!
//! ```
//! use ooksift::trellis::{segment, Plan, Symbol};
//! // 4 PWM bits (1 = 3 units on + 1 off, 0 = 1 on + 3 off), closing mark, 10-unit gap, twice;
//! // 8 samples per unit, envelope 1.0 on and 0.0 off: llr = x − 0.5.
//! let mut env = vec![0.0f32; 40];
//! for _ in 0..2 {
//!     for &b in &[true, false, true, true] {
//!         let (on, off) = if b { (24, 8) } else { (8, 24) };
//!         env.extend(std::iter::repeat(1.0).take(on));
//!         env.extend(std::iter::repeat(0.0).take(off));
//!     }
//!     env.extend(std::iter::repeat(1.0).take(8));
//!     env.extend(std::iter::repeat(0.0).take(80));
//! }
//! let llr: Vec<f32> = env.iter().map(|x| x - 0.5).collect();
//! let plan = Plan {
//!     unit: 8.0,
//!     symbols: vec![Symbol { mark: 1.0, space: 3.0, bit: false }, Symbol { mark: 3.0, space: 1.0, bit: true }],
//!     header: None,
//!     closing: Some(1.0),
//!     gap_min: 6.0,
//! };
//! let reading = segment(&llr, &plan);
//! assert_eq!(reading.marks.len(), 10);
//! assert_eq!(reading.marks[0], (40.0, 64.0));
//! assert_eq!(reading.frames.len(), 2);
//! assert_eq!(reading.frames[1].bits, [true, false, true, true]);
//! assert_eq!((reading.frames[1].first_mark, reading.frames[1].last_mark), (5, 9));
//! ```

/// One data symbol of a plan: a mark and the space after it, in units, and the bit it carries.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Symbol {
    /// Mark length in units.
    pub mark: f64,
    /// Space length in units (inside a frame).
    pub space: f64,
    /// The bit.
    pub bit: bool,
}

/// The timing plan of a burst, in envelope samples and units.
#[derive(Debug, Clone, PartialEq)]
pub struct Plan {
    /// The unit in envelope samples.
    pub unit: f64,
    /// Data symbols.
    pub symbols: Vec<Symbol>,
    /// Header mark and space in units, when frames open with one.
    pub header: Option<(f64, f64)>,
    /// Closing mark in units, when frames end with one that carries no bit.
    pub closing: Option<f64>,
    /// Shortest space between frames, in units.
    pub gap_min: f64,
}

impl std::fmt::Display for Plan {
    /// `unit 29.5, symbols 0:1/3 1:3/1, header 8/4, closing 1` (lengths in units: mark/space).
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "unit {:.1}, symbols", self.unit)?;
        for s in &self.symbols {
            write!(f, " {}:{}/{}", u8::from(s.bit), s.mark, s.space)?;
        }
        if let Some((m, s)) = self.header {
            write!(f, ", header {m}/{s}")?;
        }
        if let Some(c) = self.closing {
            write!(f, ", closing {c}")?;
        }
        Ok(())
    }
}

/// Grid steps per unit (fewer for long bursts, see [`MAX_CELLS`]).
const STEPS_PER_UNIT: f64 = 8.0;
/// Grid steps per unit of [`segment_coarse`].
const COARSE_STEPS_PER_UNIT: f64 = 4.0;
/// Fewest grid steps per unit the search accepts.
const MIN_STEPS_PER_UNIT: f64 = 3.0;
/// Largest search table (states × grid positions); a burst needing more is left to the
/// edge-based readings. 1 M cells are 8 MB (a score and a back-pointer code each).
pub const MAX_CELLS: usize = 1 << 20;

/// Back-pointer: which state and position a state was reached from.
#[derive(Debug, Clone, Copy)]
struct Back {
    state: u16,
    pos: u32,
}

const NONE: Back = Back {
    state: u16::MAX,
    pos: u32::MAX,
};

/// State numbering of the search: frame start (A), end of header mark (H), end of closing
/// mark (C), symbol start after k bits (B_k), end of symbol s's mark as bit k (E_{s,k}).
struct States {
    /// Bits per frame (exact), or the fewest bits when `open`.
    k: usize,
    /// Frames may hold more than `k` bits.
    open: bool,
    symbols: usize,
}

impl States {
    const A: usize = 0;
    const H: usize = 1;
    const C: usize = 2;
    fn b(&self, k: usize) -> usize {
        3 + k
    }
    fn e(&self, s: usize, k: usize) -> usize {
        3 + self.k + 1 + s * self.k + (k - 1)
    }
    fn count(&self) -> usize {
        3 + self.k + 1 + self.symbols * self.k
    }
}

/// What the search reads a burst from.
#[derive(Debug, Clone, Copy)]
pub enum Evidence<'a> {
    /// One log-likelihood ratio of "carrier on" against "carrier off" per envelope sample; a
    /// mark scores the sum of those it covers.
    Llr(&'a [f32]),
    /// The burst's complex samples with its carrier turned to zero frequency (one sample per
    /// envelope sample, e.g. [`crate::front::coherent::centred_carrier`]). A mark of `N`
    /// samples summing to `S` scores the log-likelihood ratio of a carrier of amplitude `A`
    /// and unknown phase in complex white noise of power `σ²` against noise alone,
    /// `ln I0(2A·|S|/σ²) − N·A²/σ²` — the noncoherent matched filter over the whole mark,
    /// where summing per-sample ratios integrates magnitudes after detection.
    Coherent {
        /// The samples.
        iq: &'a [num_complex::Complex32],
        /// `A`, the carrier's amplitude in the samples.
        amplitude: f64,
        /// `σ²`, the noise power per sample (for sums: the variance of a sum over `N` samples
        /// divided by `N`).
        noise_power: f64,
        /// Scores already computed for these samples by earlier searches, to reuse
        /// ([`MarkCache`]); `None` computes every search's own.
        shared: Option<&'a MarkCache<'a>>,
    },
}

/// Whole-mark scores ([`Evidence::Coherent`]) that the searches of one burst share: the units
/// [`fit_unit`] tries and a plan's exact frame lengths lay marks of mostly the same lengths on
/// mostly the same grid, and each score costs a logarithm. Kept per grid bin, amplitude and
/// noise power, one column of scores per mark length; a search reuses the columns it finds and
/// adds those it computes, up to [`MARK_CACHE_BYTES`] (beyond, it computes without keeping).
/// Serves only the samples it was made for (other samples compute their own scores).
///
/// ```
/// use num_complex::Complex32;
/// use ooksift::trellis::{segment, Evidence, MarkCache, Plan, Symbol};
/// let mut iq = vec![Complex32::new(0.0, 0.0); 16];
/// for &b in &[true, false, true, true] {
///     let (on, off) = if b { (12, 4) } else { (4, 12) };
///     iq.extend(std::iter::repeat(Complex32::new(1.0, 0.0)).take(on));
///     iq.extend(std::iter::repeat(Complex32::new(0.0, 0.0)).take(off));
/// }
/// let plan = Plan {
///     unit: 4.0,
///     symbols: vec![Symbol { mark: 1.0, space: 3.0, bit: false }, Symbol { mark: 3.0, space: 1.0, bit: true }],
///     header: None,
///     closing: None,
///     gap_min: 6.0,
/// };
/// let cache = MarkCache::new(&iq);
/// let ev = |shared| Evidence::Coherent { iq: &iq, amplitude: 1.0, noise_power: 0.5, shared };
/// let fresh = segment(ev(None), &plan);
/// assert_eq!(fresh.frames[0].bits, [true, false, true, true]);
/// // The same reading with the scores shared, the second time from the cache alone.
/// assert_eq!(segment(ev(Some(&cache)), &plan), fresh);
/// assert_eq!(segment(ev(Some(&cache)), &plan), fresh);
/// // One column per mark length laid: 3–5 and 11–13 samples (a unit of 4 samples ± slack).
/// assert_eq!(cache.columns(), 6);
/// ```
#[derive(Debug)]
pub struct MarkCache<'a> {
    iq: &'a [num_complex::Complex32],
    grids: std::cell::RefCell<Vec<CachedGrid>>,
    /// Bytes of scores and prefix sums held.
    held: std::cell::Cell<usize>,
}

/// Most bytes a [`MarkCache`] holds: a long burst's searches would otherwise keep tens of
/// columns of 10⁵ grid steps. Measured on a 60 s capture at 14 dB (CPU s, peak RSS MiB):
/// no cache 1.77, 27.5; 4 MiB 1.47, 27.4; 8 MiB 1.36, 31.4; 16 MiB 1.32, 40.1; no bound
/// 1.21, 54.5.
pub const MARK_CACHE_BYTES: usize = 4 << 20;

/// The scores of one grid bin, amplitude and noise power.
#[derive(Debug)]
struct CachedGrid {
    bin: usize,
    amplitude: u64,
    noise_power: u64,
    prefix: Vec<num_complex::Complex64>,
    /// Mark length in grid steps and its score at every grid position.
    columns: Vec<(usize, Vec<f32>)>,
}

impl<'a> MarkCache<'a> {
    /// An empty cache for `iq`.
    pub fn new(iq: &'a [num_complex::Complex32]) -> Self {
        MarkCache {
            iq,
            grids: std::cell::RefCell::new(Vec::new()),
            held: std::cell::Cell::new(0),
        }
    }

    /// Bytes of scores and prefix sums held (at most [`MARK_CACHE_BYTES`]).
    pub fn bytes(&self) -> usize {
        self.held.get()
    }

    /// Takes `bytes` more from the budget if they fit.
    fn reserve(&self, bytes: usize) -> bool {
        let fits = self.held.get() + bytes <= MARK_CACHE_BYTES;
        if fits {
            self.held.set(self.held.get() + bytes);
        }
        fits
    }

    /// Columns of scores held (over every grid).
    pub fn columns(&self) -> usize {
        self.grids.borrow().iter().map(|g| g.columns.len()).sum()
    }
}

impl Evidence<'_> {
    /// Samples of the burst.
    pub fn len(&self) -> usize {
        match self {
            Evidence::Llr(v) => v.len(),
            Evidence::Coherent { iq, .. } => iq.len(),
        }
    }

    /// No samples.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

impl<'a> Evidence<'a> {
    /// The same evidence with the carrier amplitude of [`Evidence::Coherent`] replaced.
    pub fn with_amplitude(self, a: f64) -> Evidence<'a> {
        match self {
            Evidence::Coherent {
                iq,
                noise_power,
                shared,
                ..
            } => Evidence::Coherent {
                iq,
                amplitude: a,
                noise_power,
                shared,
            },
            llr => llr,
        }
    }
}

impl<'a> From<&'a [f32]> for Evidence<'a> {
    fn from(llr: &'a [f32]) -> Self {
        Evidence::Llr(llr)
    }
}

impl<'a> From<&'a Vec<f32>> for Evidence<'a> {
    fn from(llr: &'a Vec<f32>) -> Self {
        Evidence::Llr(llr)
    }
}

/// The most likely reading of the burst `ev` (e.g. one log-likelihood ratio per envelope
/// sample) under `plan`: frames of at least [`crate::frames::MIN_BITS`] bits. Empty when no
/// sequence scores above the all-space reading or the burst is too long to search.
pub fn segment<'a>(ev: impl Into<Evidence<'a>>, plan: &Plan) -> Reading {
    segment_frames(ev, plan, None)
}

/// [`segment`] with frames of exactly `bits` data bits when `bits` is given.
pub fn segment_frames<'a>(
    ev: impl Into<Evidence<'a>>,
    plan: &Plan,
    bits: Option<usize>,
) -> Reading {
    search(ev.into(), plan, bits, STEPS_PER_UNIT)
}

/// [`segment`] on a grid of a quarter unit: a quarter of the cost, for ranking plans and
/// fitting units, where only the scores of one grid are compared with each other.
pub fn segment_coarse<'a>(ev: impl Into<Evidence<'a>>, plan: &Plan) -> Reading {
    search(ev.into(), plan, None, COARSE_STEPS_PER_UNIT)
}

/// ln I0(x) for x ≥ 0 (I0: the modified Bessel function of the first kind, order zero), from
/// the polynomial approximations of Abramowitz & Stegun, *Handbook of Mathematical
/// Functions*, 9.8.1 (x ≤ 3.75, relative error of I0 below 1.6·10⁻⁷) and 9.8.2 (x > 3.75,
/// below 1.9·10⁻⁷); checked against the power series in the tests. Both polynomials are
/// evaluated and one logarithm taken of the chosen one, without a branch, so a loop of it
/// (a column of whole-mark scores) runs on vector lanes.
#[inline(always)]
pub fn ln_i0(x: f64) -> f64 {
    let x = x.abs();
    let t = (x / 3.75) * (x / 3.75);
    let small = 1.0
        + t * (3.515_622_9
            + t * (3.089_942_4
                + t * (1.206_749_2 + t * (0.265_973_2 + t * (0.036_076_8 + t * 0.004_581_3)))));
    let t = 3.75 / x;
    let p = 0.398_942_28
        + t * (0.013_285_92
            + t * (0.002_253_19
                + t * (-0.001_575_65
                    + t * (0.009_162_81
                        + t * (-0.020_577_06
                            + t * (0.026_355_37 + t * (-0.016_476_33 + t * 0.003_923_77)))))));
    // I0(x) = small for x ≤ 3.75, else e^x · p / √x.
    let (arg, add) = if x <= 3.75 {
        (small, 0.0)
    } else {
        (p / x.sqrt(), x)
    };
    add + ln_positive(arg)
}

/// ln x for a positive normal `x`, to within 10⁻¹³ or so: the binary exponent split off and
/// ln m = 2·atanh((m − 1)/(m + 1)) summed as its power series for the mantissa m in [√½, √2)
/// (common practice). Bit operations and arithmetic only, so it runs on vector lanes where
/// the C library's `log` would be one call per value. (Zero, infinities, NaN and subnormals
/// give finite nonsense; [`ln_i0`] never passes them: its argument is at least 1, or
/// 0.39/√x for a finite x.)
#[inline(always)]
fn ln_positive(x: f64) -> f64 {
    const MANTISSA: u64 = (1 << 52) - 1;
    const ONE: u64 = 1023 << 52;
    // 2⁵² as a double: adding the biased exponent to its bits gives 2⁵² + exponent.
    const TWO_52: u64 = 0x4330_0000_0000_0000;
    let bits = x.to_bits();
    let m = f64::from_bits((bits & MANTISSA) | ONE);
    let biased = f64::from_bits(TWO_52 | (bits >> 52)) - f64::from_bits(TWO_52);
    let (m, e) = if m > std::f64::consts::SQRT_2 {
        (m * 0.5, biased - 1022.0)
    } else {
        (m, biased - 1023.0)
    };
    let s = (m - 1.0) / (m + 1.0);
    let z = s * s;
    // |s| ≤ 0.172, z ≤ 0.0295: the first omitted term, 2s·z⁸/17, is below 10⁻¹⁴.
    let series = 1.0
        + z * (1.0 / 3.0
            + z * (1.0 / 5.0
                + z * (1.0 / 7.0
                    + z * (1.0 / 9.0 + z * (1.0 / 11.0 + z * (1.0 / 13.0 + z * (1.0 / 15.0)))))));
    e * std::f64::consts::LN_2 + 2.0 * s * series
}

/// `|Σ iq[a..b]|` (ends clamped to `iq`) and the number of samples summed.
fn coherent_sum(iq: &[num_complex::Complex32], a: usize, b: usize) -> (f64, usize) {
    let (a, b) = (a.min(iq.len()), b.min(iq.len()));
    let b = b.max(a);
    let s = iq[a..b]
        .iter()
        .fold(num_complex::Complex64::new(0.0, 0.0), |acc, z| {
            acc + num_complex::Complex64::new(z.re as f64, z.im as f64)
        });
    (s.norm_sqr().sqrt(), b - a)
}

/// The score of a mark from grid position `a` to `b` (exclusive).
trait MarkScores {
    fn mark(&self, a: usize, b: usize) -> f32;
}

/// Sums of per-sample log-likelihood ratios: prefix sums per grid step.
struct Sums(Vec<f64>);

impl MarkScores for Sums {
    #[inline]
    fn mark(&self, a: usize, b: usize) -> f32 {
        (self.0[b] - self.0[a]) as f32
    }
}

/// Whole-mark ratios of [`Evidence::Coherent`], one column per mark length the plan allows
/// (few distinct lengths, each looked up many times) holding its score at every grid position.
struct MarkTable {
    table: Vec<f32>,
    /// Column of each length from `shortest`; `u16::MAX` for lengths the plan never lays.
    column: Vec<u16>,
    shortest: usize,
    /// Grid positions per column (`n + 1`).
    rows: usize,
}

impl MarkScores for MarkTable {
    #[inline]
    fn mark(&self, a: usize, b: usize) -> f32 {
        let c = self.column[b - a - self.shortest] as usize;
        self.table[c * self.rows + a]
    }
}

/// Sums of `iq` over grid steps of `bin` samples from the start: `n + 1` values.
fn grid_prefix(iq: &[num_complex::Complex32], bin: usize, n: usize) -> Vec<num_complex::Complex64> {
    use num_complex::Complex64;
    let mut prefix = Vec::with_capacity(n + 1);
    let mut acc = Complex64::new(0.0, 0.0);
    prefix.push(acc);
    for chunk in iq.chunks(bin) {
        for z in chunk {
            acc += Complex64::new(z.re as f64, z.im as f64);
        }
        prefix.push(acc);
    }
    prefix
}

/// The whole-mark score of marks of `len` grid steps at every grid position (`prefix.len()`
/// of them; −∞ where the mark would run past the end), for a carrier of `amplitude` in noise
/// of `noise_power` (`total` samples on a grid of `bin`).
fn mark_column(
    prefix: &[num_complex::Complex64],
    amplitude: f64,
    noise_power: f64,
    bin: usize,
    total: usize,
    len: usize,
) -> Vec<f32> {
    let (c, per) = if noise_power > 0.0 && amplitude.is_finite() && amplitude > 0.0 {
        (
            2.0 * amplitude / noise_power,
            amplitude * amplitude / noise_power,
        )
    } else {
        (0.0, 0.0)
    };
    let mut column = vec![f32::NEG_INFINITY; prefix.len()];
    let starts = prefix.len().saturating_sub(len);
    // Marks starting before `whole` lie inside the `total` samples; the last few are cut short.
    let span = len * bin;
    let whole = if total >= span {
        ((total - span) / bin.max(1) + 1).min(starts)
    } else {
        0
    };
    #[cfg(target_arch = "x86_64")]
    if crate::front::channel::has_avx2() {
        // SAFETY: the CPU reports AVX2, the only feature `mark_scores_avx2` is compiled for.
        unsafe { mark_scores_avx2(prefix, c, per, span as f64, len, &mut column[..whole]) };
    } else {
        mark_scores(prefix, c, per, span as f64, len, &mut column[..whole]);
    }
    #[cfg(not(target_arch = "x86_64"))]
    mark_scores(prefix, c, per, span as f64, len, &mut column[..whole]);
    for a in whole..starts {
        let samples = total.saturating_sub(a * bin) as f64;
        mark_scores(&prefix[a..], c, per, samples, len, &mut column[a..=a]);
    }
    column
}

/// The scores of marks of `len` steps, each of `samples` samples, starting at grid positions
/// `0..out.len()` (ln I0(c·|Σ iq|) − per·samples). A loop of arithmetic only, so it runs on
/// vector lanes; [`mark_scores_avx2`] is the same code on four lanes, bit for bit (Rust fuses
/// no multiply-adds).
#[inline(always)]
fn mark_scores(
    prefix: &[num_complex::Complex64],
    c: f64,
    per: f64,
    samples: f64,
    len: usize,
    out: &mut [f32],
) {
    let energy = per * samples;
    let ends = prefix.get(len..).unwrap_or_default();
    for ((o, p), q) in out.iter_mut().zip(prefix).zip(ends) {
        let (re, im) = (q.re - p.re, q.im - p.im);
        *o = (ln_i0(c * (re * re + im * im).sqrt()) - energy) as f32;
    }
}

/// [`mark_scores`] compiled for AVX2.
///
/// # Safety
/// The CPU must support AVX2.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn mark_scores_avx2(
    prefix: &[num_complex::Complex64],
    c: f64,
    per: f64,
    samples: f64,
    len: usize,
    out: &mut [f32],
) {
    mark_scores(prefix, c, per, samples, len, out);
}

impl MarkTable {
    /// Which column holds each of `lengths` (ascending, distinct).
    fn columns_of(lengths: &[usize]) -> (Vec<u16>, usize) {
        let shortest = lengths.iter().copied().min().unwrap_or(1);
        let longest = lengths.iter().copied().max().unwrap_or(1);
        let mut column = vec![u16::MAX; longest - shortest + 1];
        for (i, &l) in lengths.iter().enumerate() {
            column[l - shortest] = i as u16;
        }
        (column, shortest)
    }

    /// The table for marks of `lengths` grid steps on a grid of `bin` samples over `n` steps.
    fn new(
        iq: &[num_complex::Complex32],
        amplitude: f64,
        noise_power: f64,
        bin: usize,
        n: usize,
        lengths: &[usize],
    ) -> Self {
        let prefix = grid_prefix(iq, bin, n);
        let (column, shortest) = Self::columns_of(lengths);
        let mut table = Vec::with_capacity((n + 1) * lengths.len());
        for &l in lengths {
            table.extend(mark_column(
                &prefix,
                amplitude,
                noise_power,
                bin,
                iq.len(),
                l,
            ));
        }
        MarkTable {
            table,
            column,
            shortest,
            rows: n + 1,
        }
    }

    /// [`MarkTable::new`] for the cache's samples, from the columns `cache` holds, computing
    /// (and adding) the others.
    fn shared(
        cache: &MarkCache<'_>,
        amplitude: f64,
        noise_power: f64,
        bin: usize,
        n: usize,
        lengths: &[usize],
    ) -> Self {
        let mut grids = cache.grids.borrow_mut();
        let key = (bin, amplitude.to_bits(), noise_power.to_bits());
        let i = match grids
            .iter()
            .position(|g| (g.bin, g.amplitude, g.noise_power) == key)
        {
            Some(i) => i,
            None => {
                if !cache.reserve((n + 1) * std::mem::size_of::<num_complex::Complex64>()) {
                    drop(grids);
                    return Self::new(cache.iq, amplitude, noise_power, bin, n, lengths);
                }
                grids.push(CachedGrid {
                    bin,
                    amplitude: key.1,
                    noise_power: key.2,
                    prefix: grid_prefix(cache.iq, bin, n),
                    columns: Vec::new(),
                });
                grids.len() - 1
            }
        };
        let g = &mut grids[i];
        let (column, shortest) = Self::columns_of(lengths);
        let mut table = Vec::with_capacity((n + 1) * lengths.len());
        for &l in lengths {
            match g.columns.iter().find(|c| c.0 == l) {
                Some(c) => table.extend_from_slice(&c.1),
                None => {
                    let col =
                        mark_column(&g.prefix, amplitude, noise_power, bin, cache.iq.len(), l);
                    table.extend_from_slice(&col);
                    if cache.reserve(col.len() * std::mem::size_of::<f32>()) {
                        g.columns.push((l, col));
                    }
                }
            }
        }
        MarkTable {
            table,
            column,
            shortest,
            rows: n + 1,
        }
    }
}

fn search(ev: Evidence<'_>, plan: &Plan, bits: Option<usize>, steps_per_unit: f64) -> Reading {
    if !(plan.unit.is_finite() && plan.unit >= 1.0) || plan.symbols.is_empty() || ev.is_empty() {
        return Reading::default();
    }
    let st = States {
        k: bits.unwrap_or(crate::frames::MIN_BITS).max(1),
        open: bits.is_none(),
        symbols: plan.symbols.len(),
    };
    let ns = st.count();
    if ns >= u16::MAX as usize {
        return Reading::default();
    }
    // Grid of `bin` samples: about an eighth of a unit (coarser for long bursts), at least one
    // sample.
    let mut steps = steps_per_unit;
    let fits = |steps: f64| {
        let bin = (plan.unit / steps).floor().max(1.0) as usize;
        (ev.len().div_ceil(bin) + 1).saturating_mul(ns) <= MAX_CELLS
    };
    while !fits(steps) && steps > MIN_STEPS_PER_UNIT {
        steps -= 1.0;
    }
    if !fits(steps) {
        return Reading::default();
    }
    let bin = (plan.unit / steps).floor().max(1.0) as usize;
    let n = ev.len().div_ceil(bin);
    let grid = Grid::new(plan, bin);
    match ev {
        Evidence::Llr(llr) => {
            let mut prefix = Vec::with_capacity(n + 1);
            prefix.push(0.0f64);
            for chunk in llr.chunks(bin) {
                let s: f64 = chunk.iter().map(|&v| v as f64).sum();
                let last = prefix[prefix.len() - 1];
                prefix.push(last + s);
            }
            search_grid(&Sums(prefix), &grid, &st, plan, n, llr.len())
        }
        Evidence::Coherent {
            iq,
            amplitude,
            noise_power,
            shared,
        } => {
            let lengths = grid.mark_lengths();
            let table = match shared {
                Some(cache) if std::ptr::eq(cache.iq, iq) => {
                    MarkTable::shared(cache, amplitude, noise_power, bin, n, &lengths)
                }
                _ => MarkTable::new(iq, amplitude, noise_power, bin, n, &lengths),
            };
            search_grid(&table, &grid, &st, plan, n, iq.len())
        }
    }
}

/// A plan's elements as ranges of grid steps.
struct Grid {
    bin: usize,
    gap_min: usize,
    closing: Option<(usize, usize)>,
    header: Option<((usize, usize), (usize, usize))>,
    syms: Vec<((usize, usize), (usize, usize))>,
}

impl Grid {
    fn new(plan: &Plan, bin: usize) -> Self {
        let upb = plan.unit / bin as f64; // grid steps per unit
                                          // An element of `u` units spans round(u·upb) ± slack steps: a tenth of a unit, plus 3 %
                                          // of its length for drift, at least one step.
        let span = |u: f64| -> (usize, usize) {
            let c = (u * upb).round().max(1.0);
            let slack = (upb * (0.1 + 0.03 * u)).round().max(1.0);
            (((c - slack).max(1.0)) as usize, (c + slack) as usize)
        };
        Grid {
            bin,
            gap_min: ((plan.gap_min * upb).round().max(1.0)) as usize,
            closing: plan.closing.map(span),
            header: plan.header.map(|(m, s)| (span(m), span(s))),
            syms: plan
                .symbols
                .iter()
                .map(|s| (span(s.mark), span(s.space)))
                .collect(),
        }
    }

    /// Every mark length (grid steps) the plan can lay, ascending.
    fn mark_lengths(&self) -> Vec<usize> {
        let mut v: Vec<usize> = self
            .syms
            .iter()
            .map(|s| s.0)
            .chain(self.closing)
            .chain(self.header.map(|h| h.0))
            .flat_map(|(a, b)| a..=b)
            .collect();
        v.sort_unstable();
        v.dedup();
        v
    }
}

/// How a cell of the search was reached, one `u32` per cell (a third of the table's bytes):
/// the state it came from follows from the cell's own state (see [`search_grid`]), so the
/// code holds only the length in grid steps of the element that led to it, the symbol of a
/// `B_k` state's predecessor `E_{s,k}` above [`SYMBOL_SHIFT`], and [`FROM_FULL`] for an
/// `E_{s,k}` state of an open frame reached from `B_k` rather than `B_{k−1}`. Frame starts
/// (state A) keep full pointers beside the table.
type Code = u32;
/// Codes of cells never reached.
const NO_CODE: Code = Code::MAX;
/// The symbol's bit position in a `B_k` code (lengths stay below 2²⁰ steps: the table holds
/// at most [`MAX_CELLS`] cells).
const SYMBOL_SHIFT: u32 = 20;
/// Flag of an `E_{s,k}` code reached from `B_k`.
const FROM_FULL: Code = 1 << 31;
/// Most symbols a plan may have (their index must fit above [`SYMBOL_SHIFT`]).
const MAX_SYMBOLS: usize = 1 << 11;

/// One element laid from row `t` for every length in `lens` (grid steps): for each length,
/// `dst[i] = max(dst[i], src[i] + add(len))` in the row `len` steps on, noting
/// `code | len` where it rises — the step of the search that moves every bit count at once.
/// `src` is a run of row `t`; `tail` and `tail_codes` are the rows after `t` (row `t + len`
/// starts at `(len − 1)·ns`), and the run written starts `at` cells into each row. `full`
/// is the score of `B_K` in row `t` for a data mark of an open frame (also laid from `B_K`
/// into `E_{s,K}`), `−∞` otherwise.
///
/// All lengths in one call, four cells at a time as fixed-size arrays: free searches move
/// runs of exactly four bit counts ([`crate::frames::MIN_BITS`]), too short for the
/// vectoriser's loop over a slice, and [`relax4`] compiles to one vector of each. Not
/// inlined: inside [`search_grid`] the compiler no longer sees that the row read and the
/// rows written cannot overlap and leaves the four cells scalar, with a branch (measured:
/// 20 % of the whole-chain fuzz corpora's decode time, readings bit-identical).
#[allow(clippy::too_many_arguments)]
#[inline(never)]
fn relax_lengths(
    src: &[f32],
    add: impl Fn(usize) -> f32,
    lens: std::ops::RangeInclusive<usize>,
    full: f32,
    tail: &mut [f32],
    tail_codes: &mut [Code],
    ns: usize,
    at: usize,
    code: Code,
) {
    let k = src.len();
    for len in lens {
        let from = (len - 1) * ns + at;
        let add = add(len);
        let (dst, dst_codes) = (&mut tail[from..from + k], &mut tail_codes[from..from + k]);
        relax_run(src, add, dst, dst_codes, code | len as Code);
        // An open frame's mark from `B_K` into the run's last cell `E_{s,K}`, after the one
        // from `B_{K−1}` (the order of candidates the search keeps).
        if full > f32::NEG_INFINITY {
            let v = full + add;
            if let (Some(d), Some(c)) = (dst.last_mut(), dst_codes.last_mut()) {
                if v > *d {
                    *d = v;
                    *c = FROM_FULL | len as Code;
                }
            }
        }
    }
}

/// `dst[i] = max(dst[i], src[i] + add)`, noting `code` where it rises.
#[inline(always)]
fn relax_run(src: &[f32], add: f32, dst: &mut [f32], codes: &mut [Code], code: Code) {
    let mut d4 = dst.chunks_exact_mut(4);
    let mut c4 = codes.chunks_exact_mut(4);
    let mut s4 = src.chunks_exact(4);
    for ((d, c), s) in (&mut d4).zip(&mut c4).zip(&mut s4) {
        if let (Ok(d), Ok(c), Ok(s)) = (d.try_into(), c.try_into(), s.try_into()) {
            relax4(s, add, d, c, code);
        }
    }
    for ((d, c), &s) in d4
        .into_remainder()
        .iter_mut()
        .zip(c4.into_remainder().iter_mut())
        .zip(s4.remainder())
    {
        let v = s + add;
        let rise = ((v > *d) as Code).wrapping_neg();
        *d = f32::from_bits((v.to_bits() & rise) | (d.to_bits() & !rise));
        *c = (code & rise) | (*c & !rise);
    }
}

/// [`relax_run`] on four cells, branch-free.
#[inline(always)]
fn relax4(src: &[f32; 4], add: f32, dst: &mut [f32; 4], codes: &mut [Code; 4], code: Code) {
    for i in 0..4 {
        let v = src[i] + add;
        // All ones where `v` rises above the cell, as integer masks: branches here are taken
        // at random on noise, and a select written as one compiles to a branch.
        let rise = ((v > dst[i]) as Code).wrapping_neg();
        dst[i] = f32::from_bits((v.to_bits() & rise) | (dst[i].to_bits() & !rise));
        codes[i] = (code & rise) | (codes[i] & !rise);
    }
}

/// The search proper on a grid of `n` steps (`samples` samples).
///
/// The table holds one row of [`States`] per grid position. Each position first settles its
/// frame start (A), then pushes every element that can begin there into the rows where it
/// ends: a header mark (A → H), a header space (H → B₀), a data symbol's space
/// (E_{s,k} → B_k), a data symbol's mark (B_k → E_{s,k+1}; in open frames also
/// B_K → E_{s,K}) and the closing mark (B_K → C). The symbol steps move all bit counts at once,
/// as runs of consecutive states ([`relax_lengths`]). A cell keeps the first of equal
/// candidates, in the order: position, then element kind as listed, then symbol, then length
/// (and of a data mark of one length into E_{s,K}, the one from B_{K−1} before B_K's).
fn search_grid<M: MarkScores>(
    scores: &M,
    grid: &Grid,
    st: &States,
    plan: &Plan,
    n: usize,
    samples: usize,
) -> Reading {
    let ns = st.count();
    if st.symbols >= MAX_SYMBOLS {
        return Reading::default();
    }
    let bin = grid.bin;
    let gap_min = grid.gap_min;
    let k_max = st.k;
    let neg = f32::NEG_INFINITY;
    let mut score = vec![neg; ns * (n + 1)];
    let mut codes = vec![NO_CODE; ns * (n + 1)];
    // Where each frame start came from: the end of the previous frame, or nothing.
    let mut starts = vec![NONE; n + 1];
    let idx = |state: usize, pos: usize| pos * ns + state;
    let at = |state: usize, pos: usize| Back {
        state: state as u16,
        pos: pos as u32,
    };
    // One candidate into one cell.
    #[inline(always)]
    fn relax(score: &mut [f32], codes: &mut [Code], to: usize, v: f32, code: Code) {
        if v > score[to] {
            score[to] = v;
            codes[to] = code;
        }
    }
    // One element of `lens` grid steps from position `t` (from a state scoring `from`) into
    // state `to` at its end (row `t + len` at `(t + len)·ns`): a mark adds its score, a space
    // nothing; the code is the length with `flags`. (Functions rather than closures, so
    // builds that inline little, as the fuzz targets', still inline them.)
    #[inline(always)]
    fn lay<M: MarkScores>(
        (score, codes): (&mut [f32], &mut [Code]),
        (t, n, ns): (usize, usize, usize),
        from: f32,
        (l0, l1): (usize, usize),
        mark: Option<&M>,
        to: usize,
        flags: Code,
    ) {
        for len in l0..=l1.min(n - t) {
            let v = match mark {
                Some(m) => from + m.mark(t, t + len),
                None => from,
            };
            relax(score, codes, (t + len) * ns + to, v, flags | len as Code);
        }
    }
    // Consecutive runs of states: B₀…B_{K−1} (read by the marks), B₁…B_K (written by the
    // spaces), and E_{s,1}…E_{s,K} per symbol.
    let b_from = st.b(0)..st.b(0) + k_max;
    let b_to = st.b(1)..st.b(1) + k_max;
    let e_run = |s: usize| st.e(s, 1)..st.e(s, 1) + k_max;

    // States after which a frame may end: the closing mark's end when the plan has one,
    // otherwise the end of a last data mark (its space runs into the gap).
    let ends: Vec<usize> = if plan.closing.is_some() {
        vec![States::C]
    } else {
        (0..st.symbols).map(|s| st.e(s, st.k)).collect()
    };
    // Best frame end at or before `t - gap_min` (running maximum), and the best complete
    // reading: a frame end followed by space to the end of the burst.
    let mut best_end = (neg, NONE);
    let mut best_final = (0.0f32, NONE);
    let (closing, header, syms) = (grid.closing, grid.header, &grid.syms);

    for t in 0..=n {
        if t >= gap_min {
            let e = t - gap_min;
            for &s in &ends {
                let v = score[idx(s, e)];
                if v > best_end.0 {
                    best_end = (v, at(s, e));
                }
            }
        }
        // A: a frame may start anywhere after silence, or after a gap.
        let (a, from) = if best_end.0 > 0.0 {
            best_end
        } else {
            (0.0, NONE)
        };
        score[idx(States::A, t)] = a;
        starts[t] = from;
        match header {
            Some((mark, _)) => lay(
                (&mut score, &mut codes),
                (t, n, ns),
                a,
                mark,
                Some(scores),
                States::H,
                0,
            ),
            // B₀ from A at the same position: length 0.
            None => relax(&mut score, &mut codes, idx(st.b(0), t), a, 0),
        }
        if let Some((_, space)) = header {
            let h = score[idx(States::H, t)];
            if h > neg {
                lay(
                    (&mut score, &mut codes),
                    (t, n, ns),
                    h,
                    space,
                    None::<&M>,
                    st.b(0),
                    0,
                );
            }
        }
        // E_{s,k} → B_k: the symbol's space leads to the next symbol; B_k → E_{s,k+1}: a
        // data symbol's mark, and in open frames also B_K → E_{s,K}.
        {
            let (head, tail) = score.split_at_mut((t + 1) * ns);
            let row = &head[t * ns..];
            let tail_codes = &mut codes[(t + 1) * ns..];
            let left = n - t;
            // In open frames a data mark also follows B_K, into E_{s,K}.
            let open_full = if st.open { row[st.b(k_max)] } else { neg };
            for (s, &(_, (s0, s1))) in syms.iter().enumerate() {
                relax_lengths(
                    &row[e_run(s)],
                    |_| 0.0,
                    s0..=s1.min(left),
                    neg,
                    tail,
                    tail_codes,
                    ns,
                    b_to.start,
                    (s as Code) << SYMBOL_SHIFT,
                );
            }
            for (s, &((m0, m1), _)) in syms.iter().enumerate() {
                relax_lengths(
                    &row[b_from.clone()],
                    |len| scores.mark(t, t + len),
                    m0..=m1.min(left),
                    open_full,
                    tail,
                    tail_codes,
                    ns,
                    e_run(s).start,
                    0,
                );
            }
        }
        let full = score[idx(st.b(k_max), t)];
        // B_K → C: the closing mark.
        if let (Some(mark), true) = (closing, full > neg) {
            lay(
                (&mut score, &mut codes),
                (t, n, ns),
                full,
                mark,
                Some(scores),
                States::C,
                0,
            );
        }
        for &s in &ends {
            let v = score[idx(s, t)];
            if v > best_final.0 {
                best_final = (v, at(s, t));
            }
        }
    }

    // The state and position a cell was reached from.
    let first_e = st.e(0, 1);
    let prev_of = |s: usize, pos: usize| -> Back {
        if s == States::A {
            return starts[pos];
        }
        let code = codes[idx(s, pos)];
        if code == NO_CODE {
            return NONE;
        }
        let len = (code & ((1 << SYMBOL_SHIFT) - 1)) as usize;
        let from = match s {
            States::H => States::A,
            States::C => st.b(k_max),
            _ if s == st.b(0) => {
                if header.is_some() {
                    States::H
                } else {
                    States::A
                }
            }
            _ if s < first_e => {
                // B_k from E_{sym,k}.
                let k = s - st.b(0);
                st.e(((code & !FROM_FULL) >> SYMBOL_SHIFT) as usize, k)
            }
            _ => {
                // E_{sym,k} from B_{k−1}, or from B_K in an open frame.
                let k = (s - first_e) % k_max + 1;
                if code & FROM_FULL != 0 {
                    st.b(k_max)
                } else {
                    st.b(k - 1)
                }
            }
        };
        at(from, pos - len)
    };

    // Walk back, collecting marks (every transition into H, C or an E state ends one) and
    // frames (a transition into A from a frame end closes one).
    let mut marks = Vec::new();
    let mut frames: Vec<FrameSpan> = Vec::new();
    let mut open = FrameSpan::default();
    let mut in_frame = false;
    let mut cur = best_final.1;
    let mut guard = 0usize;
    while cur.state != u16::MAX && guard <= ns * (n + 1) {
        guard += 1;
        let (s, pos) = (cur.state as usize, cur.pos as usize);
        let prev = prev_of(s, pos);
        if !in_frame && s != States::A {
            in_frame = true;
            open = FrameSpan {
                last_mark: marks.len(),
                ..FrameSpan::default()
            };
        }
        if s == States::A && in_frame {
            open.first_mark = marks.len().saturating_sub(1);
            frames.push(std::mem::take(&mut open));
            in_frame = false;
        }
        if prev.state == u16::MAX {
            break;
        }
        if s == States::H || s == States::C || s >= first_e {
            marks.push((
                (prev.pos as usize * bin) as f64,
                ((pos * bin).min(samples)) as f64,
            ));
        }
        if s >= first_e {
            open.bits.push(plan.symbols[(s - first_e) / st.k].bit);
        }
        cur = prev;
    }
    if in_frame && !marks.is_empty() {
        open.first_mark = marks.len() - 1;
        frames.push(open);
    }
    marks.reverse();
    let last = marks.len().saturating_sub(1);
    let mut frames: Vec<FrameSpan> = frames
        .into_iter()
        .rev()
        .map(|mut f| {
            f.bits.reverse();
            FrameSpan {
                first_mark: last - f.first_mark,
                last_mark: last - f.last_mark,
                bits: f.bits,
            }
        })
        .collect();
    frames.retain(|f| f.first_mark <= f.last_mark);
    Reading {
        score: best_final.0 as f64,
        marks,
        frames,
    }
}

/// `plan` with its unit replaced by the one, within `±span` (a fraction) of it to `step`,
/// whose free search ([`segment`]) scores best, and that search's reading: a unit measured
/// from noisy marks is off by several percent, and every frame's length multiplies the
/// error. The search climbs in coarse steps of `2·step` — both neighbours, then onward from
/// the better one while the score rises — and refines the best by `step` either side: five
/// free searches when the unit was right, at most `span/(2·step) + 4`. (Trying every coarse
/// step cost 1.2–1.3× as much and read the sensitivity sweeps no better. The quarter-unit
/// grid of [`segment_coarse`] is too coarse here: its slack absorbs a 10 % error in a
/// one-unit mark, so scores tie and the fit strays.)
pub fn fit_unit<'a>(
    ev: impl Into<Evidence<'a>>,
    plan: &Plan,
    span: f64,
    step: f64,
) -> (Plan, Reading) {
    let ev = ev.into();
    let with = |unit: f64| Plan {
        unit,
        ..plan.clone()
    };
    let mut best = (segment(ev, plan), plan.unit);
    let try_unit = |unit: f64, best: &mut (Reading, f64)| {
        let r = segment(ev, &with(unit));
        if r.score > best.0.score {
            *best = (r, unit);
        }
    };
    if step > 0.0 && span > 0.0 {
        // Coarse steps of twice `step`: both neighbours, then onward from the better one while
        // the score rises; then the two neighbours of the best at `step`.
        let k = (span / (2.0 * step)).round() as i32;
        let at = |i: i32| plan.unit * (1.0 + 2.0 * step * i as f64);
        if k >= 1 {
            let centre = best.0.score;
            try_unit(at(-1), &mut best);
            let below = best.0.score;
            try_unit(at(1), &mut best);
            let dir = if best.0.score > below {
                1
            } else if below > centre {
                -1
            } else {
                0
            };
            for i in 2..=k {
                if dir == 0 {
                    break;
                }
                let before = best.0.score;
                try_unit(at(dir * i), &mut best);
                if best.0.score <= before {
                    break;
                }
            }
        }
        let centre = best.1;
        for unit in [centre * (1.0 - step), centre * (1.0 + step)] {
            try_unit(unit, &mut best);
        }
    }
    (with(best.1), best.0)
}

/// Duty ratios a PWM plan is also tried with on its bit period (1:r for a 0, r:1 for a 1):
/// the common ones (common practice: 1:2 and 1:3).
pub const PWM_DUTY_RATIOS: [f64; 2] = [2.0, 3.0];

/// The PWM plans of the other [`PWM_DUTY_RATIOS`] on `plan`'s bit period: the period of a weak
/// burst is measured well (its fitted unit), how it parts into mark and space is not (a
/// short mark's edges blur), so the likelihood picks among them. Header and closing mark
/// keep their lengths in samples as nearly as whole new units allow, the shortest gap
/// exactly. Empty unless `plan` is PWM-shaped: two symbols of one period, a short mark for 0
/// and a long one for 1.
///
/// ```
/// use ooksift::trellis::{duty_variants, Plan, Symbol};
///
/// let sym = |mark, space, bit| Symbol { mark, space, bit };
/// // 1:4 at 24 samples: a 120-sample bit.
/// let plan = Plan {
///     unit: 24.0,
///     symbols: vec![sym(1.0, 4.0, false), sym(4.0, 1.0, true)],
///     header: None,
///     closing: Some(1.0),
///     gap_min: 30.0,
/// };
/// let v = duty_variants(&plan);
/// assert_eq!(v.len(), 2);
/// assert_eq!((v[0].unit, v[0].symbols[0].space), (40.0, 2.0)); // 1:2 at 40
/// assert_eq!((v[1].unit, v[1].symbols[0].space), (30.0, 3.0)); // 1:3 at 30
/// assert_eq!(v[1].gap_min, 24.0); // 720 samples
/// assert_eq!(v[1].closing, Some(1.0)); // 24 samples → one 30-sample unit
///
/// // PPM (one mark, two spaces): no variants.
/// let ppm = Plan {
///     symbols: vec![sym(1.0, 1.0, false), sym(1.0, 3.0, true)],
///     ..plan
/// };
/// assert!(duty_variants(&ppm).is_empty());
/// ```
pub fn duty_variants(plan: &Plan) -> Vec<Plan> {
    let [zero, one] = plan.symbols[..] else {
        return Vec::new();
    };
    let period = zero.mark + zero.space;
    let pwm = !zero.bit
        && one.bit
        && zero.mark < one.mark
        && (one.mark + one.space - period).abs() < 1e-9
        && plan.unit.is_finite()
        && plan.unit > 0.0;
    if !pwm {
        return Vec::new();
    }
    let own_ratio = (zero.mark == one.space).then(|| zero.space / zero.mark);
    PWM_DUTY_RATIOS
        .iter()
        .filter(|&&r| own_ratio != Some(r))
        .map(|&r| {
            let unit = plan.unit * period / (r + 1.0);
            // Lengths in the new unit, as whole units (the search lays whole units).
            let units = |x: f64| (x * plan.unit / unit).round().max(1.0);
            Plan {
                unit,
                symbols: vec![
                    Symbol {
                        mark: 1.0,
                        space: r,
                        bit: false,
                    },
                    Symbol {
                        mark: r,
                        space: 1.0,
                        bit: true,
                    },
                ],
                header: plan.header.map(|(m, s)| (units(m), units(s))),
                closing: plan.closing.map(units),
                gap_min: plan.gap_min * plan.unit / unit,
            }
        })
        .collect()
}

/// Units a header's space is also tried longer or shorter by.
pub const HEADER_SPACE_STEPS: [f64; 4] = [-2.0, -1.0, 1.0, 2.0];

/// `plan` with its header's space [`HEADER_SPACE_STEPS`] units longer or shorter (at least
/// one unit): a header space measured from a weak burst's marks is often a unit or two off
/// (its edges blur into the noise), and a plan with the wrong one lays the frame's first
/// symbol wrong in every repeat alike (measured: a PPM code with an 8/4 header read under
/// 8/6 took its first bit as the other symbol), so the likelihood picks among them. Empty
/// without a header.
///
/// ```
/// use ooksift::trellis::{header_variants, Plan, Symbol};
///
/// let sym = |mark, space, bit| Symbol { mark, space, bit };
/// let plan = Plan {
///     unit: 32.0,
///     symbols: vec![sym(1.0, 1.0, false), sym(1.0, 3.0, true)],
///     header: Some((8.0, 2.0)),
///     closing: Some(1.0),
///     gap_min: 10.0,
/// };
/// let spaces: Vec<f64> = header_variants(&plan)
///     .iter()
///     .map(|v| v.header.unwrap().1)
///     .collect();
/// assert_eq!(spaces, [1.0, 3.0, 4.0]); // 0 units is no space
/// assert!(header_variants(&Plan { header: None, ..plan }).is_empty());
/// ```
pub fn header_variants(plan: &Plan) -> Vec<Plan> {
    let Some((mark, space)) = plan.header else {
        return Vec::new();
    };
    HEADER_SPACE_STEPS
        .iter()
        .map(|d| space + d)
        .filter(|&s| s >= 1.0)
        .map(|s| Plan {
            header: Some((mark, s)),
            ..plan.clone()
        })
        .collect()
}

/// One frame of a [`Reading`].
#[derive(Debug, Clone, Default, PartialEq)]
pub struct FrameSpan {
    /// Index of its first mark (header included) in [`Reading::marks`].
    pub first_mark: usize,
    /// Index of its last mark (closing mark included).
    pub last_mark: usize,
    /// Its data bits.
    pub bits: Vec<bool>,
}

/// The best symbol sequence of a burst.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Reading {
    /// Its log-likelihood ratio against the all-space reading (the sum of the llr under its
    /// marks); 0 when empty.
    pub score: f64,
    /// Its marks as (rise, fall) envelope-sample positions, in time order.
    pub marks: Vec<(f64, f64)>,
    /// Its frames, in time order.
    pub frames: Vec<FrameSpan>,
}

impl Reading {
    /// How well the reading lies on `llr`: the mean llr under its marks and minus the mean
    /// under the spaces inside its frames, the smaller of the two, as a fraction of `half`
    /// (half the difference between the carrier and idle levels the llr was made from). About
    /// 1 when every mark and space lies where the carrier does; a plan that does not match the
    /// code straddles marks and spaces and fits neither. (Gaps between frames are not
    /// counted: a header the plan lacks lies there, and counting them rejected right PPM
    /// readings — wrong codes at 12 dB rose from 30 to 35 of 200 in the sensitivity sweep.)
    pub fn fit(&self, llr: &[f32], half: f64) -> f64 {
        let sum = |a: usize, b: usize| -> (f64, usize) {
            let (a, b) = (a.min(llr.len()), b.min(llr.len()));
            let b = b.max(a);
            (llr[a..b].iter().map(|&v| v as f64).sum(), b - a)
        };
        let (mut on, mut n_on, mut off, mut n_off) = (0.0f64, 0usize, 0.0f64, 0usize);
        self.each_interval(|a, b, mark| {
            let (s, n) = sum(a, b);
            if mark {
                on += s;
                n_on += n;
            } else {
                off += s;
                n_off += n;
            }
        });
        if half <= 0.0 || n_on == 0 {
            return 0.0;
        }
        (on / n_on as f64).min(-off / n_off.max(1) as f64) / half
    }

    /// [`Reading::fit`] on whatever the reading was searched in. For [`Evidence::Coherent`]
    /// with amplitude `A`: the smallest of
    ///
    /// * `(a_marks − A'/2) / (A'/2)`, `a_marks = Σ|S| / ΣN` over the sums `S` of `N` samples of
    ///   its marks, `A'` = `own` (the amplitude its marks are expected to hold) or `A`;
    /// * `(A/2 − a_spaces) / (A/2)`, `a_spaces` the same over the spaces inside its frames less
    ///   what noise alone gives a sum of that length on average (Rayleigh: `√(π·N·σ²/4)`, `σ²`
    ///   measured in the reading's idle stretches: before, between and after its frames);
    /// * `1 − 2·w`, `w` the larger of the shares of its marks' pieces (each mark cut into
    ///   pieces of about its shortest mark) below `A/4` and of its spaces above `3A/4` — a few
    ///   spaces full of carrier (a header read as short symbols), marks on noise, or long marks
    ///   laid across two short ones and the space between hardly move the averages.
    ///
    /// Scoring a whole-mark reading on the per-sample look instead would mark it down wherever
    /// that noisier look dips inside a mark the search rightly laid there. `half` is the llr's
    /// (see [`Reading::fit`]).
    pub fn fit_to(&self, ev: Evidence<'_>, half: f64, own: Option<f64>) -> f64 {
        let (iq, amplitude, noise_power) = match ev {
            Evidence::Llr(llr) => return self.fit(llr, half),
            Evidence::Coherent {
                iq,
                amplitude,
                noise_power,
                ..
            } => (iq, amplitude, noise_power),
        };
        let sum = |a: usize, b: usize| -> (f64, f64) {
            let (s, n) = coherent_sum(iq, a, b);
            (s * s, n as f64)
        };
        // σ² from the reading's own idle stretches (before, between and after its frames,
        // a shortest mark clear of them), cut into pieces of a shortest mark: the noise
        // the marks and spaces are summed against, at their scale (a channel's noise is not
        // white, so the variance of a sum per sample grows with its length).
        let piece = self
            .marks
            .iter()
            .map(|m| (m.1 - m.0) as usize)
            .min()
            .unwrap_or(1)
            .max(1);
        let mut idle = Vec::new();
        let mut from = 0usize;
        for fr in &self.frames {
            if let (Some(a), Some(b)) =
                (self.marks.get(fr.first_mark), self.marks.get(fr.last_mark))
            {
                idle.push((from, (a.0 as usize).saturating_sub(piece)));
                from = b.1 as usize + piece;
            }
        }
        idle.push((from, iq.len()));
        let (mut pieces, mut power) = (0usize, 0.0f64);
        for (a, b) in idle {
            let mut k = a;
            while k + piece <= b.min(iq.len()) {
                let (s2, n) = sum(k, k + piece);
                power += s2 / n;
                pieces += 1;
                k += piece;
            }
        }
        let noise_power = if pieces >= 8 {
            power / pieces as f64
        } else {
            noise_power
        };
        // Σ|S| and ΣN of marks, and of spaces less what noise alone gives a sum's
        // magnitude on average (Rayleigh: √(π·N·σ²/4)), so spaces of noise read 0 whatever
        // their length (marks are not corrected: a carrier's sum is far above its noise); and
        // the counts of mark pieces below a quarter of the amplitude and of spaces above three
        // quarters.
        let (mut on, mut n_on, mut off, mut n_off) = (0.0f64, 0.0f64, 0.0f64, 0.0f64);
        let (mut marks, mut dead, mut spaces, mut lit) = (0usize, 0usize, 0usize, 0usize);
        self.each_interval(|a, b, mark| {
            let (s2, n) = sum(a, b);
            if mark {
                on += s2.sqrt();
                n_on += n;
                // Piece by piece, about a shortest mark each: a long mark laid across two
                // short ones and the space between them holds a piece without carrier.
                let k = ((b.saturating_sub(a)) as f64 / piece as f64)
                    .round()
                    .max(1.0) as usize;
                for i in 0..k {
                    let (x, y) = (a + (b - a) * i / k, a + (b - a) * (i + 1) / k);
                    let (p2, pn) = sum(x, y);
                    marks += 1;
                    dead += usize::from(pn == 0.0 || p2.sqrt() / pn < amplitude / 4.0);
                }
            } else {
                off += s2.sqrt() - (std::f64::consts::PI * n * noise_power / 4.0).sqrt();
                n_off += n;
                spaces += 1;
                lit += usize::from(n > 0.0 && s2.sqrt() / n > 0.75 * amplitude);
            }
        });
        if amplitude.is_nan() || amplitude <= 0.0 || n_on == 0.0 {
            return 0.0;
        }
        let a_on = on / n_on;
        let a_off = off / n_off.max(1.0);
        let h = amplitude / 2.0;
        let h_own = own.filter(|a| *a > 0.0).map_or(h, |a| a / 2.0);
        let wrong = (dead as f64 / marks.max(1) as f64).max(lit as f64 / spaces.max(1) as f64);
        if std::env::var_os("OOKSIFT_DEBUG").is_some() {
            eprintln!(
                "    whole-mark fit: amplitude {amplitude:.4} (own {:.4}), marks {a_on:.4}, spaces {a_off:.4}, noise {noise_power:.6}; {dead} of {marks} mark pieces dead, {lit} of {spaces} spaces lit",
                2.0 * h_own
            );
        }
        ((a_on - h_own) / h_own)
            .min((h - a_off) / h)
            .min(1.0 - 2.0 * wrong)
    }

    /// The carrier amplitude under the marks of the reading's frames, `Σ|S| / ΣN` over their
    /// sums `S` of `N` samples, each mark less `trim` of its length at either end. `None` for
    /// evidence other than [`Evidence::Coherent`], or without marks.
    ///
    /// A whole-mark search lays a mark's ends where the samples stop paying for the amplitude
    /// it assumes, half of it: assume too little and the marks reach into the idle samples
    /// around them, and their full sums dilute an amplitude measured again from them. Their
    /// interiors lie on the carrier either way (an eighth of a mark in from either end is
    /// more than the slack the search gives an end).
    pub fn mark_amplitude(&self, ev: Evidence<'_>, trim: f64) -> Option<f64> {
        let Evidence::Coherent { iq, .. } = ev else {
            return None;
        };
        let (mut on, mut n_on) = (0.0f64, 0usize);
        self.each_interval(|a, b, mark| {
            let cut = ((b.saturating_sub(a)) as f64 * trim).round() as usize;
            if mark {
                let (s, n) = coherent_sum(iq, a + cut, b.saturating_sub(cut));
                on += s;
                n_on += n;
            }
        });
        (n_on > 0).then(|| on / n_on as f64)
    }

    /// Calls `f(start, end, is_mark)` for every mark of the reading's frames and every space
    /// between two marks of one frame.
    fn each_interval(&self, mut f: impl FnMut(usize, usize, bool)) {
        for fr in &self.frames {
            for k in fr.first_mark..=fr.last_mark.min(self.marks.len().saturating_sub(1)) {
                let (x, y) = (self.marks[k].0 as usize, self.marks[k].1 as usize);
                f(x, y, true);
                if k < fr.last_mark {
                    if let Some(next) = self.marks.get(k + 1) {
                        f(y, next.0 as usize, false);
                    }
                }
            }
        }
    }

    /// Every frame length (bits) held by as many frames as the most common one, ascending.
    pub fn modal_lengths(&self) -> Vec<usize> {
        let mut counts: Vec<(usize, usize)> = Vec::new();
        for f in &self.frames {
            match counts.iter_mut().find(|c| c.0 == f.bits.len()) {
                Some(c) => c.1 += 1,
                None => counts.push((f.bits.len(), 1)),
            }
        }
        let top = counts.iter().map(|c| c.1).max().unwrap_or(0);
        let mut v: Vec<usize> = counts
            .into_iter()
            .filter(|c| c.1 == top)
            .map(|c| c.0)
            .collect();
        v.sort_unstable();
        v
    }

    /// The most common frame length in bits (ties: the longer); `None` without frames.
    pub fn modal_bits(&self) -> Option<usize> {
        let mut counts: Vec<(usize, usize)> = Vec::new();
        for f in &self.frames {
            match counts.iter_mut().find(|c| c.0 == f.bits.len()) {
                Some(c) => c.1 += 1,
                None => counts.push((f.bits.len(), 1)),
            }
        }
        counts
            .into_iter()
            .max_by_key(|&(len, n)| (n, len))
            .map(|c| c.0)
    }
}

/// The timing plans of a burst's marks (capture or envelope samples alike; glitches merged
/// as [`crate::frames`] does) under each of its line-code hypotheses that has one, best
/// score first, in the same samples. PWM and PPM only (the codes whose symbols are a mark
/// and a space); hypotheses whose widths do not round to a consistent plan are skipped.
pub fn plans_of(marks: &[crate::edges::Mark]) -> Vec<PlanReading> {
    use crate::coding::{assess, BurstFrames};
    let mut cleaned = marks.to_vec();
    crate::bursts::merge_glitches(&mut cleaned, crate::frames::GLITCH_FRACTION);
    let marks = &cleaned[..];
    let candidates = assess(marks);
    let bf = BurstFrames::new(marks);
    candidates
        .iter()
        .enumerate()
        .flat_map(|(i, c)| {
            let runner_up = candidates
                .iter()
                .enumerate()
                .find(|&(j, _)| j != i)
                .map(|(_, o)| (o.line_code, o.score));
            plan_for(c, &bf)
                .unwrap_or_default()
                .into_iter()
                .map(move |plan| PlanReading {
                    line_code: c.line_code,
                    score: c.score,
                    runner_up,
                    plan,
                })
        })
        .collect()
}

/// The plan of one line-code hypothesis of a framed burst.
fn plan_for(
    best: &crate::coding::Candidate,
    bf: &crate::coding::BurstFrames<'_>,
) -> Option<Vec<Plan>> {
    use crate::coding::LineCode;
    use crate::timing::{median, split_two};
    let u = best.unit;
    if !(u.is_finite() && u > 0.0) {
        return None;
    }
    let units = |x: f64| (x / u).round();
    let closing = best.layout.closing_mark.map(|c| units(c).max(1.0));
    let (mut widths, mut spaces, mut periods) = (Vec::new(), Vec::new(), Vec::new());
    for f in 0..bf.frames.len() {
        let (_, b) = bf.frames[f];
        let s = bf.data_start(f);
        let last = if closing.is_some() {
            b.checked_sub(1)?
        } else {
            b
        };
        if last < s {
            continue;
        }
        for i in s..=last {
            widths.push(bf.marks[i].width());
            if i < b {
                let sp = bf.space_after(i);
                spaces.push(sp);
                periods.push(bf.marks[i].width() + sp);
            }
        }
    }
    let shapes: Vec<Vec<Symbol>> = match best.line_code {
        LineCode::Pwm => {
            // The long mark as the short bit's space (common practice: 1:3/3:1, 1:2/2:1),
            // which noise-split long marks cannot mislead; the measured long mark when it
            // differs comes as a second plan.
            let (short, long) = split_two(&widths)?;
            let (a, b) = (units(short.mean).max(1.0), units(long.mean));
            let p = units(median(&periods));
            if p - a <= a {
                return None;
            }
            let mut shapes = vec![p - a];
            if b > a && b < p && b != p - a {
                shapes.push(b);
            }
            shapes
                .into_iter()
                .map(|b| {
                    vec![
                        Symbol {
                            mark: a,
                            space: p - a,
                            bit: false,
                        },
                        Symbol {
                            mark: b,
                            space: p - b,
                            bit: true,
                        },
                    ]
                })
                .collect::<Vec<_>>()
        }
        LineCode::Ppm => {
            let m = units(median(&widths)).max(1.0);
            let (short, long) = split_two(&spaces)?;
            let (a, b) = (units(short.mean).max(1.0), units(long.mean));
            if b <= a {
                return None;
            }
            vec![vec![
                Symbol {
                    mark: m,
                    space: a,
                    bit: false,
                },
                Symbol {
                    mark: m,
                    space: b,
                    bit: true,
                },
            ]]
        }
        _ => return None,
    };
    let header = best
        .layout
        .header
        .map(|(m, s)| (units(m).max(1.0), units(s).max(1.0)));
    let longest = shapes
        .iter()
        .flatten()
        .map(|s| s.space.max(s.mark))
        .fold(0.0, f64::max);
    // Frames part at a space clearly longer than any inside them; a measured gap tightens
    // that, but a noisy one (stray marks read as very long gaps) must not stop frames from
    // parting at all.
    let gap_min = match best.layout.gap {
        Some(g) => (0.6 * g / u).min(2.0 * longest + 4.0).max(longest + 2.0),
        None => longest + 3.0,
    };
    Some(
        shapes
            .into_iter()
            .map(|symbols| Plan {
                unit: u,
                symbols,
                header,
                closing,
                gap_min,
            })
            .collect(),
    )
}

/// A timing plan with the line-code evidence it was read from.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanReading {
    /// The line code.
    pub line_code: crate::coding::LineCode,
    /// Its score on the marks the plan was read from.
    pub score: f64,
    /// The runner-up hypothesis on those marks.
    pub runner_up: Option<(crate::coding::LineCode, f64)>,
    /// The plan.
    pub plan: Plan,
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Whole-mark evidence of `iq` (amplitude, noise power), computed afresh by each search.
    fn whole_marks(
        iq: &[num_complex::Complex32],
        amplitude: f64,
        noise_power: f64,
    ) -> Evidence<'_> {
        Evidence::Coherent {
            iq,
            amplitude,
            noise_power,
            shared: None,
        }
    }
    use crate::rng::Rng;

    fn pwm_plan(unit: f64) -> Plan {
        Plan {
            unit,
            symbols: vec![
                Symbol {
                    mark: 1.0,
                    space: 3.0,
                    bit: false,
                },
                Symbol {
                    mark: 3.0,
                    space: 1.0,
                    bit: true,
                },
            ],
            header: None,
            closing: Some(1.0),
            gap_min: 8.0,
        }
    }

    /// An on/off envelope of PWM frames, `unit` samples per unit, plus Gaussian noise.
    fn pwm_env(bits: &[bool], unit: usize, repeats: usize, noise: f32, seed: u64) -> Vec<f32> {
        let mut env = vec![0.0f32; 20 * unit];
        for _ in 0..repeats {
            for &b in bits {
                let (on, off) = if b { (3, 1) } else { (1, 3) };
                env.extend(std::iter::repeat_n(1.0, on * unit));
                env.extend(std::iter::repeat_n(0.0, off * unit));
            }
            env.extend(std::iter::repeat_n(1.0, unit));
            env.extend(std::iter::repeat_n(0.0, 31 * unit));
        }
        let mut rng = Rng::new(seed);
        env.iter()
            .map(|&x| x + noise * rng.gauss() as f32)
            .collect()
    }

    fn bits_of(marks: &[(f64, f64)], unit: f64) -> Vec<bool> {
        marks.iter().map(|(a, b)| b - a > 2.0 * unit).collect()
    }

    #[test]
    fn clean_frames_are_found_exactly() {
        let bits = [true, false, false, true, true, false, true, false];
        let env = pwm_env(&bits, 16, 3, 0.0, 1);
        let llr: Vec<f32> = env.iter().map(|x| x - 0.5).collect();
        let marks = segment(&llr, &pwm_plan(16.0)).marks;
        assert_eq!(marks.len(), 3 * 9);
        let got = bits_of(&marks[..8], 16.0);
        assert_eq!(got, bits);
        assert_eq!(marks[0], (320.0, 368.0));
    }

    #[test]
    fn noise_that_breaks_hard_decisions_does_not_break_the_sequence() {
        // Per-sample SNR of 0 dB: a sample-by-sample threshold errs on a quarter of the samples.
        let bits = [
            true, false, true, true, false, false, true, false, true, true, false, true,
        ];
        let env = pwm_env(&bits, 24, 2, 1.0, 7);
        let llr: Vec<f32> = env.iter().map(|x| x - 0.5).collect();
        let marks = segment_frames(&llr, &pwm_plan(24.0), Some(12)).marks;
        assert_eq!(marks.len(), 2 * 13, "{marks:?}");
        assert_eq!(bits_of(&marks[..12], 24.0), bits);
        assert_eq!(bits_of(&marks[13..25], 24.0), bits);
    }

    #[test]
    fn open_frame_lengths_follow_moderate_noise() {
        let bits = [
            false, true, true, false, true, false, false, true, true, true,
        ];
        let env = pwm_env(&bits, 16, 3, 0.35, 11);
        let llr: Vec<f32> = env.iter().map(|x| x - 0.5).collect();
        let marks = segment(&llr, &pwm_plan(16.0)).marks;
        assert_eq!(marks.len(), 3 * 11, "{marks:?}");
        for f in 0..3 {
            assert_eq!(bits_of(&marks[11 * f..11 * f + 10], 16.0), bits);
        }
    }

    #[test]
    fn the_right_plan_fits_and_a_wrong_unit_does_not() {
        let bits = [true, false, true, true, false, false, true, false];
        let env = pwm_env(&bits, 16, 3, 0.1, 13);
        let llr: Vec<f32> = env.iter().map(|x| x - 0.5).collect();
        let right = segment_frames(&llr, &pwm_plan(16.0), Some(8));
        assert!(right.fit(&llr, 0.5) > 0.9, "{}", right.fit(&llr, 0.5));
        // A unit a third too short lays marks across spaces.
        let wrong = segment(&llr, &pwm_plan(11.0));
        assert!(wrong.fit(&llr, 0.5) < 0.9, "{}", wrong.fit(&llr, 0.5));
        assert_eq!(Reading::default().fit(&llr, 0.5), 0.0);
    }

    #[test]
    fn the_coarse_grid_reads_the_same_frames_and_fits_the_unit() {
        // The noise of the open-length test above: the quarter-unit grid lays the same frames.
        let bits = [
            false, true, true, false, true, false, false, true, true, true,
        ];
        let env = pwm_env(&bits, 16, 3, 0.35, 11);
        let llr: Vec<f32> = env.iter().map(|x| x - 0.5).collect();
        let coarse = segment_coarse(&llr, &pwm_plan(16.0));
        assert_eq!(coarse.frames.len(), 3);
        for f in &coarse.frames {
            assert_eq!(f.bits, bits);
        }
        // A unit 20 % off, beyond what each element's slack absorbs, is pulled back within
        // it, and the exact search at the fitted unit reads every frame.
        let (fitted, reading) = fit_unit(&llr, &pwm_plan(16.0 * 1.2), 0.15, 0.025);
        assert!((fitted.unit / 16.0 - 1.0).abs() <= 0.1, "{}", fitted.unit);
        // What it returns is the free search at that unit.
        assert_eq!(reading, segment(&llr, &fitted));
        let exact = segment_frames(&llr, &fitted, Some(bits.len()));
        assert_eq!(exact.frames.len(), 3);
        for f in &exact.frames {
            assert_eq!(f.bits, bits);
        }
        // Without the fit, the exact search at the 20 % unit does not.
        let off = segment_frames(&llr, &pwm_plan(16.0 * 1.2), Some(bits.len()));
        assert!(off.frames.iter().filter(|f| f.bits == bits).count() < 3);
    }

    #[test]
    fn pure_noise_yields_no_frames() {
        let mut rng = Rng::new(3);
        let llr: Vec<f32> = (0..20_000)
            .map(|_| 0.3 * rng.gauss() as f32 - 0.5)
            .collect();
        assert!(segment(&llr, &pwm_plan(16.0)).marks.is_empty());
    }

    #[test]
    fn a_drifting_clock_is_followed() {
        // Unit grows 3 % over the press; the plan knows only the starting unit.
        let bits = [
            true, false, true, false, false, true, true, false, true, false, true, true,
        ];
        let mut env = vec![0.0f32; 200];
        let mut unit = 20.0f64;
        for _ in 0..3 {
            for &b in &bits {
                let (on, off) = if b { (3.0, 1.0) } else { (1.0, 3.0) };
                env.extend(std::iter::repeat_n(1.0, (on * unit).round() as usize));
                env.extend(std::iter::repeat_n(0.0, (off * unit).round() as usize));
                unit *= 1.0 + 0.03 / 39.0;
            }
            env.extend(std::iter::repeat_n(1.0, unit.round() as usize));
            env.extend(std::iter::repeat_n(0.0, (31.0 * unit).round() as usize));
        }
        let llr: Vec<f32> = env.iter().map(|x| x - 0.5).collect();
        let marks = segment(&llr, &pwm_plan(20.0)).marks;
        assert_eq!(marks.len(), 39);
        for f in 0..3 {
            assert_eq!(bits_of(&marks[13 * f..13 * f + 12], 20.0), bits);
        }
    }

    #[test]
    fn headers_are_laid_before_the_bits() {
        // PPM: header 8+4, bits 1 + (1 | 3), stop mark, 40-unit gap.
        let unit = 10usize;
        let bits = [true, true, false, true, false, false, true, false];
        let mut env = vec![0.0f32; 100];
        for _ in 0..2 {
            env.extend(std::iter::repeat_n(1.0, 8 * unit));
            env.extend(std::iter::repeat_n(0.0, 4 * unit));
            for &b in &bits {
                env.extend(std::iter::repeat_n(1.0, unit));
                env.extend(std::iter::repeat_n(0.0, if b { 3 } else { 1 } * unit));
            }
            env.extend(std::iter::repeat_n(1.0, unit));
            env.extend(std::iter::repeat_n(0.0, 40 * unit));
        }
        let mut rng = Rng::new(5);
        let llr: Vec<f32> = env
            .iter()
            .map(|x| x - 0.5 + 0.8 * rng.gauss() as f32)
            .collect();
        let plan = Plan {
            unit: unit as f64,
            symbols: vec![
                Symbol {
                    mark: 1.0,
                    space: 1.0,
                    bit: false,
                },
                Symbol {
                    mark: 1.0,
                    space: 3.0,
                    bit: true,
                },
            ],
            header: Some((8.0, 4.0)),
            closing: Some(1.0),
            gap_min: 10.0,
        };
        let marks = segment_frames(&llr, &plan, Some(8)).marks;
        assert_eq!(marks.len(), 2 * 10, "{marks:?}");
        let spaces: Vec<bool> = marks[1..9]
            .windows(2)
            .map(|w| w[1].0 - w[0].1 > 2.0 * unit as f64)
            .chain(std::iter::once(marks[9].0 - marks[8].1 > 2.0 * unit as f64))
            .collect();
        assert_eq!(spaces, bits);
        assert!(marks[0].1 - marks[0].0 > 6.0 * unit as f64);
    }

    /// [`pwm_env`]'s keying on a carrier of amplitude 1 and one random phase, plus complex
    /// white noise of `noise_power` per sample.
    fn pwm_iq(
        bits: &[bool],
        unit: usize,
        repeats: usize,
        noise_power: f64,
        seed: u64,
    ) -> Vec<num_complex::Complex32> {
        let keying = pwm_env(bits, unit, repeats, 0.0, seed);
        let mut rng = Rng::new(seed);
        let phase = rng.uniform() * std::f64::consts::TAU;
        let s = (noise_power / 2.0).sqrt();
        keying
            .iter()
            .map(|&k| {
                let c = num_complex::Complex64::from_polar(k as f64, phase);
                num_complex::Complex32::new(
                    (c.re + s * rng.gauss()) as f32,
                    (c.im + s * rng.gauss()) as f32,
                )
            })
            .collect()
    }

    #[test]
    fn ln_positive_matches_the_c_library() {
        // Against the C library's log (std's f64::ln): mantissas across [1, 2), both sides
        // of the √2 fold, and exponents from 10⁻³⁰⁰ to 10³⁰⁰.
        let mut worst = 0.0f64;
        for e in -1000..=1000 {
            for i in 0..64 {
                let x = 2f64.powi(e) * (1.0 + i as f64 / 64.0) * 1.000_123_4;
                let err = (ln_positive(x) - x.ln()).abs() / x.ln().abs().max(1.0);
                worst = worst.max(err);
            }
        }
        assert!(worst < 1e-13, "worst relative error {worst:e}");
        assert_eq!(ln_positive(1.0), 0.0);
        for x in [
            std::f64::consts::SQRT_2,
            0.5,
            2.0,
            f64::MIN_POSITIVE,
            f64::MAX,
        ] {
            assert!((ln_positive(x) - x.ln()).abs() < 1e-12, "x {x:e}");
        }
    }

    #[test]
    fn mark_columns_match_direct_scores_on_every_path() {
        // Each entry against ln I0(c·|Σ iq|) − per·samples summed directly, the marks cut
        // short at the end included; with AVX2, the vector kernel against the portable one.
        let mut rng = Rng::new(17);
        let iq: Vec<num_complex::Complex32> = (0..203)
            .map(|_| num_complex::Complex32::new(rng.gauss() as f32, rng.gauss() as f32))
            .collect();
        let (bin, amplitude, noise) = (4usize, 0.8, 1.3);
        let n = iq.len().div_ceil(bin);
        let prefix = grid_prefix(&iq, bin, n);
        let (c, per) = (2.0 * amplitude / noise, amplitude * amplitude / noise);
        for len in [1usize, 3, 7, 60] {
            let column = mark_column(&prefix, amplitude, noise, bin, iq.len(), len);
            assert_eq!(column.len(), n + 1);
            for (a, &got) in column.iter().enumerate() {
                if a + len > n {
                    assert_eq!(got, f32::NEG_INFINITY, "len {len} at {a}");
                    continue;
                }
                let (s, samples) = coherent_sum(&iq, a * bin, (a + len) * bin);
                let want = ln_i0(c * s) - per * samples as f64;
                assert!(
                    (got as f64 - want).abs() <= 1e-5 * want.abs().max(1.0),
                    "len {len} at {a}: {got} against {want}"
                );
            }
            #[cfg(target_arch = "x86_64")]
            if crate::front::channel::has_avx2() {
                let starts = n + 1 - len.min(n + 1);
                let mut wide = vec![0f32; starts];
                let mut narrow = vec![0f32; starts];
                // SAFETY: the CPU reports AVX2.
                unsafe { mark_scores_avx2(&prefix, c, per, 11.0, len, &mut wide) };
                mark_scores(&prefix, c, per, 11.0, len, &mut narrow);
                assert_eq!(wide, narrow, "len {len}");
            }
        }
    }

    #[test]
    fn ln_i0_matches_the_power_series() {
        // I0(x) = Σ (x/2)^(2k) / (k!)² (Abramowitz & Stegun 9.6.12); the polynomials of
        // 9.8.1/9.8.2 promise errors below 1.6·10⁻⁷ (of I0) and 1.9·10⁻⁷ (of √x·e^(−x)·I0 ≈ 0.4).
        for i in 0..=500 {
            let x = i as f64 * 0.1;
            let q = x * x / 4.0;
            let (mut term, mut sum, mut k) = (1.0f64, 1.0f64, 1.0f64);
            while term > sum * 1e-17 {
                term *= q / (k * k);
                sum += term;
                k += 1.0;
            }
            let err = (ln_i0(x) - sum.ln()).abs();
            assert!(err < 6e-7, "x {x}: {} against {}", ln_i0(x), sum.ln());
        }
        assert_eq!(ln_i0(-2.0), ln_i0(2.0));
    }

    #[test]
    fn whole_marks_read_a_noisy_carrier_exactly() {
        // 16 samples per unit, amplitude 1, σ² = 1: Eu/N0 = 16 (12 dB).
        let bits = [true, false, false, true, true, false, true, false];
        let iq = pwm_iq(&bits, 16, 3, 1.0, 5);
        let ev = whole_marks(&iq, 1.0, 1.0);
        // (Frames of exactly 8 bits: a free search may add a bit whose mark lies on a noise
        // peak just before or after a frame, which the decoder's exact searches sort out.)
        let r = segment_frames(ev, &pwm_plan(16.0), Some(8));
        assert_eq!(r.frames.len(), 3);
        for f in &r.frames {
            assert_eq!(f.bits, bits);
        }
        assert_eq!(r.marks[0], (320.0, 368.0));
        // The score is the likelihood ratio of the whole reading: about Eu/N0 per unit of
        // carrier (27 marks, 3·(5·3 + 3·1 + 1) = 57 units), less the ln I0 terms' shortfall.
        assert!(
            r.score > 0.8 * 57.0 * 16.0 && r.score < 1.1 * 57.0 * 16.0,
            "{}",
            r.score
        );
        // Noise alone lays nothing.
        let mut rng = Rng::new(6);
        let noise: Vec<num_complex::Complex32> = (0..3000)
            .map(|_| {
                let (a, b) = (rng.gauss() / 2f64.sqrt(), rng.gauss() / 2f64.sqrt());
                num_complex::Complex32::new(a as f32, b as f32)
            })
            .collect();
        let quiet = segment(whole_marks(&noise, 1.0, 1.0), &pwm_plan(16.0));
        assert!(quiet.frames.is_empty(), "{:?}", quiet.frames);
    }

    #[test]
    fn whole_marks_make_fewer_errors_than_a_half_unit_look() {
        // Eu/N0 = 8 dB, 16 samples per unit, 60 bursts of 3 frames of 12 bits. The look is
        // what the decoder searched before whole marks: the magnitude of half-unit boxcar
        // means less the midpoint of its idle and carrier levels.
        let unit = 16usize;
        let np = unit as f64 / 10f64.powf(0.8);
        let half_unit = unit / 2;
        let idle = (std::f64::consts::PI * np / (4.0 * half_unit as f64)).sqrt();
        let mid = (0.5 * (idle + 1.0)) as f32;
        let mut rng = Rng::new(99);
        let (mut whole, mut look) = (0usize, 0usize);
        for seed in 0..60 {
            let bits: Vec<bool> = (0..12).map(|_| rng.below(2) == 1).collect();
            let iq = pwm_iq(&bits, unit, 3, np, 100 + seed);
            let wrong = |r: &Reading| 3 - r.frames.iter().filter(|f| f.bits == bits).count().min(3);
            let ev = whole_marks(&iq, 1.0, np);
            whole += wrong(&segment_frames(ev, &pwm_plan(16.0), Some(12)));
            let env =
                crate::front::coherent::coherent_envelope(&iq, 1.0, half_unit, 0.0, iq.len(), 0.0);
            let llr: Vec<f32> = env.iter().map(|&x| x - mid).collect();
            look += wrong(&segment_frames(&llr, &pwm_plan(16.0), Some(12)));
        }
        // Measured when written: 32 and 65 frames of 180 wrong.
        assert!(
            whole * 3 < look * 2,
            "frames wrong: whole marks {whole}, look {look} of 180"
        );
    }

    #[test]
    fn shared_whole_mark_scores_give_the_readings_fresh_ones_give() {
        // A unit 10 % off at 8 dB: fit_unit's units, then exact searches at a second
        // amplitude, as the decoder runs them on one burst, with and without a cache.
        let bits = [
            true, false, false, true, true, false, true, false, false, true, true, true,
        ];
        let np = 16.0 / 10f64.powf(0.8);
        let iq = pwm_iq(&bits, 16, 3, np, 21);
        let cache = MarkCache::new(&iq);
        let ev = |amplitude, shared| Evidence::Coherent {
            iq: &iq,
            amplitude,
            noise_power: np,
            shared,
        };
        let plan = pwm_plan(16.0 * 1.1);
        let (fresh_plan, fresh) = fit_unit(ev(1.0, None), &plan, 0.15, 0.025);
        let (cached_plan, cached) = fit_unit(ev(1.0, Some(&cache)), &plan, 0.15, 0.025);
        assert_eq!(fresh_plan, cached_plan);
        assert_eq!(fresh, cached);
        let after_fit = cache.columns();
        for n in [11, 12, 13] {
            assert_eq!(
                segment_frames(ev(0.9, None), &fresh_plan, Some(n)),
                segment_frames(ev(0.9, Some(&cache)), &fresh_plan, Some(n))
            );
        }
        // Searches at units a few percent apart share columns: seven of them compute fewer
        // than they lay (measured when written: 32 against 64).
        let units: Vec<Plan> = (-3..=3)
            .map(|i| Plan {
                unit: plan.unit * (1.0 + 0.05 * i as f64),
                ..plan.clone()
            })
            .collect();
        let laid: usize = units
            .iter()
            .map(|p| {
                let bin = (p.unit / STEPS_PER_UNIT).floor().max(1.0) as usize;
                Grid::new(p, bin).mark_lengths().len()
            })
            .sum();
        let seven = MarkCache::new(&iq);
        for p in &units {
            assert_eq!(segment(ev(1.0, Some(&seven)), p), segment(ev(1.0, None), p));
        }
        assert!(
            seven.columns() * 3 < laid * 2,
            "{} columns of {laid}",
            seven.columns()
        );
        // Another amplitude is another grid of scores, shared by the exact searches.
        assert!(cache.columns() > after_fit);
        assert!(cache.bytes() > 0 && cache.bytes() <= MARK_CACHE_BYTES);
        // Other samples never read this cache's scores.
        let other = pwm_iq(&bits, 16, 3, np, 22);
        let foreign = Evidence::Coherent {
            iq: &other,
            amplitude: 1.0,
            noise_power: np,
            shared: Some(&cache),
        };
        let own = whole_marks(&other, 1.0, np);
        assert_eq!(segment(foreign, &fresh_plan), segment(own, &fresh_plan));
    }

    #[test]
    fn a_full_cache_computes_without_keeping() {
        // A burst whose grids outgrow the budget: every search still reads as a fresh one
        // does, and the cache stays within its bytes.
        let bits = [true, false, true, true, false, false, true, false];
        let np = 0.5;
        let mut iq = Vec::new();
        while iq.len() * 16 * 20 < MARK_CACHE_BYTES * 2 {
            iq.extend(pwm_iq(&bits, 4, 2, np, iq.len() as u64));
        }
        let cache = MarkCache::new(&iq);
        let ev = |amplitude, shared| Evidence::Coherent {
            iq: &iq,
            amplitude,
            noise_power: np,
            shared,
        };
        let mut laid = 0;
        for (i, amplitude) in [1.0, 0.9, 0.8, 1.1].into_iter().enumerate() {
            let plan = pwm_plan(4.0 * (1.0 + 0.02 * i as f64));
            assert_eq!(
                segment(ev(amplitude, Some(&cache)), &plan),
                segment(ev(amplitude, None), &plan)
            );
            laid += Grid::new(&plan, 1).mark_lengths().len();
        }
        // Some columns were not kept (measured when written: 23 of 24).
        assert!(cache.columns() < laid, "{} of {laid}", cache.columns());
        assert!(cache.bytes() <= MARK_CACHE_BYTES, "{}", cache.bytes());
        assert!(cache.bytes() > MARK_CACHE_BYTES / 2, "{}", cache.bytes());
    }

    #[test]
    fn the_whole_mark_fit_finds_spaces_full_of_carrier_and_the_amplitude_inside_marks() {
        let bits = [true, false, false, true, true, false, true, false];
        let iq = pwm_iq(&bits, 16, 3, 0.5, 3);
        let ev = whole_marks(&iq, 1.0, 0.5);
        let right = segment(ev, &pwm_plan(16.0));
        assert_eq!(right.frames.len(), 3);
        let fit = right.fit_to(ev, 0.5, None);
        assert!(fit > 0.95, "{fit}");
        // Every 1 read as a 0: a unit of carrier, then a "space" holding two more.
        let mut ones_cut = right.clone();
        for m in ones_cut.marks.iter_mut().filter(|m| m.1 - m.0 > 32.0) {
            m.1 = m.0 + 16.0;
        }
        let fit = ones_cut.fit_to(ev, 0.5, None);
        assert!(fit < 0.5, "{fit}");
        // The amplitude under the marks is the carrier's; marks stretched by two samples
        // either side dilute it, their interiors do not.
        let a = right.mark_amplitude(ev, 0.0).expect("marks");
        assert!((a - 1.0).abs() < 0.05, "{a}");
        let mut wide = right.clone();
        for m in wide.marks.iter_mut() {
            *m = (m.0 - 2.0, m.1 + 2.0);
        }
        let whole = wide.mark_amplitude(ev, 0.0).expect("marks");
        let inner = wide.mark_amplitude(ev, 0.125).expect("marks");
        assert!(whole < 0.93, "{whole}");
        assert!((inner - 1.0).abs() < 0.05, "{inner}");
        // Per-sample evidence has no amplitude to measure.
        assert_eq!(right.mark_amplitude(Evidence::Llr(&[0.0; 4]), 0.0), None);
    }
}
