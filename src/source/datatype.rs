//! SigMF dataset formats (the names used for raw captures too).
//!
//! The grammar is the SigMF core ABNF (`../shared/reference/facts.md` §3.2):
//! `(r|c)` then either a multi-byte type with `_le`/`_be` (`f32 f64 i32 i16 u32 u16`) or a byte
//! type without one (`i8 u8`) — 28 strings in all. Byte types never take an endianness suffix.
//!
//! ```
//! use ooksift::source::Datatype;
//! let d: Datatype = "ci16_le".parse().unwrap();
//! assert!(d.complex);
//! assert_eq!(d.sample_bytes(), 4);
//! assert_eq!(d.to_string(), "ci16_le");
//! assert!("cu8_le".parse::<Datatype>().is_err());
//! ```

use std::fmt;
use std::str::FromStr;

/// One component's storage type.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Component {
    F32,
    F64,
    I32,
    I16,
    U32,
    U16,
    I8,
    U8,
}

impl Component {
    /// Bytes of one component.
    pub fn bytes(self) -> usize {
        match self {
            Component::F64 => 8,
            Component::F32 | Component::I32 | Component::U32 => 4,
            Component::I16 | Component::U16 => 2,
            Component::I8 | Component::U8 => 1,
        }
    }

    fn name(self) -> &'static str {
        match self {
            Component::F32 => "f32",
            Component::F64 => "f64",
            Component::I32 => "i32",
            Component::I16 => "i16",
            Component::U32 => "u32",
            Component::U16 => "u16",
            Component::I8 => "i8",
            Component::U8 => "u8",
        }
    }

    fn is_float(self) -> bool {
        matches!(self, Component::F32 | Component::F64)
    }
}

/// A dataset format: real or complex, component type, byte order.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Datatype {
    /// Complex (interleaved I then Q) or real.
    pub complex: bool,
    /// Storage of one component.
    pub component: Component,
    /// Big-endian byte order (always false for byte types).
    pub big_endian: bool,
}

/// The string was not one of the 28 SigMF dataset formats.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct UnknownDatatype(pub String);

impl fmt::Display for UnknownDatatype {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "unknown datatype '{}' (expected a SigMF dataset format such as cu8, ci8, ci16_le, cf32_le, ru8, ri16_le, rf32_le)",
            self.0
        )
    }
}

impl std::error::Error for UnknownDatatype {}

impl FromStr for Datatype {
    type Err = UnknownDatatype;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let bad = || UnknownDatatype(s.to_string());
        let complex = match s.as_bytes().first() {
            Some(b'c') => true,
            Some(b'r') => false,
            _ => return Err(bad()),
        };
        let rest = &s[1..];
        let (ty, endian) = match rest.split_once('_') {
            Some((t, e)) => (t, Some(e)),
            None => (rest, None),
        };
        let component = match ty {
            "f32" => Component::F32,
            "f64" => Component::F64,
            "i32" => Component::I32,
            "i16" => Component::I16,
            "u32" => Component::U32,
            "u16" => Component::U16,
            "i8" => Component::I8,
            "u8" => Component::U8,
            _ => return Err(bad()),
        };
        let big_endian = match (component.bytes(), endian) {
            (1, None) => false,
            (1, Some(_)) => return Err(bad()),
            (_, Some("le")) => false,
            (_, Some("be")) => true,
            _ => return Err(bad()),
        };
        Ok(Datatype {
            complex,
            component,
            big_endian,
        })
    }
}

impl fmt::Display for Datatype {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let kind = if self.complex { 'c' } else { 'r' };
        let suffix = match (self.component.bytes(), self.big_endian) {
            (1, _) => "",
            (_, false) => "_le",
            (_, true) => "_be",
        };
        write!(f, "{kind}{}{suffix}", self.component.name())
    }
}

impl Datatype {
    /// Every dataset format of the SigMF grammar, real ones first.
    pub fn all() -> Vec<Datatype> {
        let mut v = Vec::new();
        for complex in [false, true] {
            for component in [
                Component::F32,
                Component::F64,
                Component::I32,
                Component::I16,
                Component::U32,
                Component::U16,
                Component::I8,
                Component::U8,
            ] {
                let orders: &[bool] = if component.bytes() == 1 {
                    &[false]
                } else {
                    &[false, true]
                };
                for &big_endian in orders {
                    v.push(Datatype {
                        complex,
                        component,
                        big_endian,
                    });
                }
            }
        }
        v
    }

    /// Bytes of one sample (both components for complex data).
    pub fn sample_bytes(self) -> usize {
        self.component.bytes() * if self.complex { 2 } else { 1 }
    }

    /// True for floating-point storage (the only kind that can hold NaN or infinity).
    pub fn is_float(self) -> bool {
        self.component.is_float()
    }

    /// Converts whole components from `bytes` to full-scale-normalised `f32`, appending to `out`.
    ///
    /// Integers map to about [-1, 1]: signed types divide by 2^(bits-1); unsigned types are
    /// centred on their mid-code first, `(v - 127.5) / 127.5` for `u8`. Floats pass unchanged.
    /// `bytes.len()` must be a multiple of the component size (trailing bytes are ignored).
    pub fn decode_components(self, bytes: &[u8], out: &mut Vec<f32>) {
        let be = self.big_endian;
        macro_rules! conv {
            ($n:expr, $t:ty, $f:expr) => {
                out.extend(bytes.chunks_exact($n).map(|c| {
                    let mut a = [0u8; $n];
                    a.copy_from_slice(c);
                    let v = if be {
                        <$t>::from_be_bytes(a)
                    } else {
                        <$t>::from_le_bytes(a)
                    };
                    #[allow(clippy::redundant_closure_call)]
                    $f(v)
                }))
            };
        }
        match self.component {
            Component::U8 => out.extend(bytes.iter().map(|&b| (b as f32 - 127.5) / 127.5)),
            Component::I8 => out.extend(bytes.iter().map(|&b| (b as i8) as f32 / 128.0)),
            Component::I16 => conv!(2, i16, |v: i16| v as f32 / 32768.0),
            Component::U16 => conv!(2, u16, |v: u16| (v as f32 - 32767.5) / 32767.5),
            Component::I32 => conv!(4, i32, |v: i32| (v as f64 / 2147483648.0) as f32),
            Component::U32 => conv!(4, u32, |v: u32| ((v as f64 - 2147483647.5) / 2147483647.5)
                as f32),
            Component::F32 => conv!(4, f32, |v: f32| v),
            Component::F64 => conv!(8, f64, |v: f64| v as f32),
        }
    }

    /// Decodes complex samples straight into `out`, without the component buffer, for `cu8`
    /// (the common case worth a loop of its own); returns
    /// false, leaving `out` untouched, for other datatypes. Same values as
    /// [`Datatype::decode_components`] (trailing bytes of a partial sample are ignored).
    pub fn decode_iq_fast(self, bytes: &[u8], out: &mut Vec<num_complex::Complex32>) -> bool {
        if !(self.complex && self.component == Component::U8) {
            return false;
        }
        // (b − 127.5) · (1/127.5) in f64, rounded once to f32, equals (b − 127.5) / 127.5 in
        // f32 for all 256 codes (checked by `cu8_direct_path_matches_the_formula`), and
        // vectorises: an f32 division per component cost more than reading the file.
        let start = out.len();
        out.resize(
            start + bytes.len() / 2,
            num_complex::Complex32::new(0.0, 0.0),
        );
        let dst = &mut out[start..];
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the CPU reports AVX2, the only feature `cu8_to_iq_avx2` is compiled for.
            unsafe { cu8_to_iq_avx2(bytes, dst) };
            return true;
        }
        cu8_to_iq(bytes, dst);
        true
    }

    /// Encodes full-scale-normalised components into this format (clipping integers),
    /// appending to `out`. The inverse of [`Datatype::decode_components`] up to quantisation.
    pub fn encode_components(self, comps: &[f32], out: &mut Vec<u8>) {
        let be = self.big_endian;
        macro_rules! put {
            ($v:expr) => {{
                let v = $v;
                if be {
                    out.extend_from_slice(&v.to_be_bytes())
                } else {
                    out.extend_from_slice(&v.to_le_bytes())
                }
            }};
        }
        for &x in comps {
            let x = x as f64;
            match self.component {
                Component::U8 => out.push((x * 127.5 + 127.5).round().clamp(0.0, 255.0) as u8),
                Component::I8 => out.push((x * 128.0).round().clamp(-128.0, 127.0) as i8 as u8),
                Component::I16 => put!((x * 32768.0).round().clamp(-32768.0, 32767.0) as i16),
                Component::U16 => put!((x * 32767.5 + 32767.5).round().clamp(0.0, 65535.0) as u16),
                Component::I32 => {
                    put!((x * 2147483648.0)
                        .round()
                        .clamp(-2147483648.0, 2147483647.0) as i32)
                }
                Component::U32 => {
                    put!((x * 2147483647.5 + 2147483647.5)
                        .round()
                        .clamp(0.0, 4294967295.0) as u32)
                }
                Component::F32 => put!(x as f32),
                Component::F64 => put!(x),
            }
        }
    }
}

/// Exact integer sums over `cu8` bytes (whole samples): Σ I codes, Σ Q codes and Σ of the
/// squares of all codes. The survey pass needs only these of most samples — the receiver's
/// DC offset and each frame's mean power — so it can skip converting them.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Cu8Sums {
    /// Σ of the I bytes.
    pub i: u64,
    /// Σ of the Q bytes.
    pub q: u64,
    /// Σ of the squares of every byte.
    pub sq: u64,
    /// Samples summed.
    pub n: u64,
}

impl Cu8Sums {
    /// Sums over `bytes` (a trailing odd byte is ignored).
    pub fn of(bytes: &[u8]) -> Cu8Sums {
        let whole = &bytes[..bytes.len() / 2 * 2];
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the CPU reports AVX2, the only feature `cu8_sums_avx2` is compiled for.
            return unsafe { cu8_sums_avx2(whole) };
        }
        cu8_sums(whole)
    }

    /// Mean power of the samples as [`Datatype::decode_components`] scales them,
    /// Σ((b − 127.5)/127.5)² / n, from the exact sums (0 for no sample).
    pub fn mean_power(&self) -> f64 {
        if self.n == 0 {
            return 0.0;
        }
        let s1 = (self.i + self.q) as f64;
        let centred = self.sq as f64 - 255.0 * s1 + 2.0 * self.n as f64 * 127.5 * 127.5;
        centred / (127.5 * 127.5) / self.n as f64
    }

    /// Mean sample, scaled as [`Datatype::decode_components`] does (0 for no sample).
    pub fn mean(&self) -> num_complex::Complex64 {
        if self.n == 0 {
            return num_complex::Complex64::new(0.0, 0.0);
        }
        let n = self.n as f64;
        num_complex::Complex64::new(
            (self.i as f64 - 127.5 * n) / 127.5 / n,
            (self.q as f64 - 127.5 * n) / 127.5 / n,
        )
    }

    /// Adds another stretch's sums.
    pub fn add(&mut self, o: Cu8Sums) {
        self.i += o.i;
        self.q += o.q;
        self.sq += o.sq;
        self.n += o.n;
    }
}

/// [`Cu8Sums::of`], portable: 32-bit lane sums over chunks short enough not to overflow.
#[inline(always)]
fn cu8_sums(bytes: &[u8]) -> Cu8Sums {
    const LANES: usize = 16;
    // 4096 bytes per chunk: a lane holds at most 128 squares of 255² < 2³².
    let mut out = Cu8Sums {
        n: (bytes.len() / 2) as u64,
        ..Cu8Sums::default()
    };
    for chunk in bytes.chunks(4096) {
        let (mut si, mut sq, mut s2) = ([0u32; LANES], [0u32; LANES], [0u32; LANES]);
        let mut it = chunk.chunks_exact(2 * LANES);
        for c in &mut it {
            for l in 0..LANES {
                let (a, b) = (c[2 * l] as u32, c[2 * l + 1] as u32);
                si[l] += a;
                sq[l] += b;
                s2[l] += a * a + b * b;
            }
        }
        for p in it.remainder().chunks_exact(2) {
            let (a, b) = (p[0] as u32, p[1] as u32);
            si[0] += a;
            sq[0] += b;
            s2[0] += a * a + b * b;
        }
        out.i += si.iter().map(|&v| v as u64).sum::<u64>();
        out.q += sq.iter().map(|&v| v as u64).sum::<u64>();
        out.sq += s2.iter().map(|&v| v as u64).sum::<u64>();
    }
    out
}

/// [`cu8_sums`] compiled for AVX2 (integer sums: the same result).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn cu8_sums_avx2(bytes: &[u8]) -> Cu8Sums {
    cu8_sums(bytes)
}

/// cu8 bytes to complex samples: (b − 127.5) · (1/127.5) in f64, rounded once to f32.
#[inline(always)]
fn cu8_to_iq(bytes: &[u8], out: &mut [num_complex::Complex32]) {
    const SCALE: f64 = 1.0 / 127.5;
    for (z, p) in out.iter_mut().zip(bytes.chunks_exact(2)) {
        z.re = ((p[0] as f64 - 127.5) * SCALE) as f32;
        z.im = ((p[1] as f64 - 127.5) * SCALE) as f32;
    }
}

/// [`cu8_to_iq`] compiled for AVX2 (four f64 lanes instead of two): the same operations on
/// each value, so the same floats.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn cu8_to_iq_avx2(bytes: &[u8], out: &mut [num_complex::Complex32]) {
    cu8_to_iq(bytes, out);
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The integer sums give the DC offset and the power of the converted samples.
    #[test]
    fn cu8_sums_match_the_converted_samples() {
        let bytes: Vec<u8> = (0..10_001u32).map(|k| (k * 7919 % 256) as u8).collect();
        let dt: Datatype = "cu8".parse().expect("valid");
        let mut iq = Vec::new();
        assert!(dt.decode_iq_fast(&bytes, &mut iq));
        let s = Cu8Sums::of(&bytes);
        assert_eq!(s.n, 5000);
        let n = iq.len() as f64;
        let mean_re = iq.iter().map(|z| z.re as f64).sum::<f64>() / n;
        let mean_im = iq.iter().map(|z| z.im as f64).sum::<f64>() / n;
        // The converted samples carry f32 rounding (≈ 6e-8 relative); the sums are exact.
        let power = iq
            .iter()
            .map(|z| (z.re as f64).powi(2) + (z.im as f64).powi(2))
            .sum::<f64>()
            / n;
        assert!(
            (s.mean().re - mean_re).abs() < 1e-9,
            "{} {mean_re}",
            s.mean().re
        );
        assert!((s.mean().im - mean_im).abs() < 1e-9);
        assert!(
            (s.mean_power() - power).abs() < 1e-7 * power,
            "{} {power}",
            s.mean_power()
        );
        // The plain loop and the dispatched one agree; sums add.
        assert_eq!(cu8_sums(&bytes[..10_000]), s);
        let mut parts = Cu8Sums::of(&bytes[..4000]);
        parts.add(Cu8Sums::of(&bytes[4000..]));
        assert_eq!(parts, s);
        assert_eq!(Cu8Sums::of(&[]).mean_power(), 0.0);
    }

    /// cu8 components follow the documented formula, and the direct complex path gives the
    /// same samples as the component path, bit for bit.
    #[test]
    fn cu8_direct_path_matches_the_formula() {
        let bytes: Vec<u8> = (0..=255u8).chain((0..=255u8).rev()).collect();
        let mut comps = Vec::new();
        let dt: Datatype = "cu8".parse().expect("valid");
        dt.decode_components(&bytes, &mut comps);
        for (&b, &c) in bytes.iter().zip(&comps) {
            assert_eq!(
                c.to_bits(),
                ((b as f32 - 127.5) / 127.5).to_bits(),
                "code {b}"
            );
        }
        let mut iq = Vec::new();
        assert!(dt.decode_iq_fast(&bytes, &mut iq));
        assert_eq!(iq.len(), bytes.len() / 2);
        for (z, p) in iq.iter().zip(comps.chunks_exact(2)) {
            assert_eq!(
                (z.re.to_bits(), z.im.to_bits()),
                (p[0].to_bits(), p[1].to_bits())
            );
        }
        let ci8: Datatype = "ci8".parse().expect("valid");
        assert!(!ci8.decode_iq_fast(&bytes, &mut iq));
    }

    #[test]
    fn grammar_has_exactly_28_formats_and_they_round_trip_as_text() {
        // facts.md §3.2 (SigMF v1.2.5 ABNF): 2 × (6 × 2 + 2) = 28 strings.
        let all = Datatype::all();
        assert_eq!(all.len(), 28);
        for d in all {
            let s = d.to_string();
            assert_eq!(s.parse::<Datatype>(), Ok(d), "{s}");
        }
    }

    #[test]
    fn rejects_strings_outside_the_grammar() {
        // facts.md §3.2: the schema regex is looser than the ABNF; we follow the ABNF.
        for s in [
            "cu8_le", "cf32", "ci16", "x", "", "c", "cf16_le", "ri8_be", "cf32_me",
        ] {
            assert!(s.parse::<Datatype>().is_err(), "{s}");
        }
    }

    #[test]
    fn sample_sizes_match_the_reference() {
        // facts.md §3.2 [D]: cu8/ci8 = 2, ci16_le = 4, cf32_le = 8, cf64_le = 16, ru8 = 1,
        // ri16_le = 2, rf32_le = 4.
        for (s, n) in [
            ("cu8", 2),
            ("ci8", 2),
            ("ci16_le", 4),
            ("cf32_le", 8),
            ("cf64_le", 16),
            ("ru8", 1),
            ("ri16_le", 2),
            ("rf32_le", 4),
        ] {
            assert_eq!(
                s.parse::<Datatype>().map(|d| d.sample_bytes()),
                Ok(n),
                "{s}"
            );
        }
    }

    #[test]
    fn encode_then_decode_is_within_one_quantisation_step() {
        let comps: Vec<f32> = (0..101).map(|i| -1.0 + i as f32 * 0.02).collect();
        for d in Datatype::all() {
            let mut bytes = Vec::new();
            d.encode_components(&comps, &mut bytes);
            assert_eq!(bytes.len(), comps.len() * d.component.bytes());
            let mut back = Vec::new();
            d.decode_components(&bytes, &mut back);
            let step = match d.component.bytes() {
                1 => 1.0 / 127.0,
                2 => 1.0 / 32767.0,
                _ => 1e-6,
            };
            for (a, b) in comps.iter().zip(&back) {
                // Integers clip just below +1.0; floats are exact.
                assert!((a - b).abs() <= step, "{d}: {a} -> {b}");
            }
        }
    }

    #[test]
    fn byte_order_is_respected() {
        let le: Datatype = "ri16_le".parse().expect("valid");
        let be: Datatype = "ri16_be".parse().expect("valid");
        let mut a = Vec::new();
        let mut b = Vec::new();
        le.decode_components(&[0x00, 0x40], &mut a);
        be.decode_components(&[0x40, 0x00], &mut b);
        assert_eq!(a, vec![0.5]);
        assert_eq!(b, vec![0.5]);
    }
}
