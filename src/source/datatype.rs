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
        let start = out.len();
        out.resize(
            start + bytes.len() / 2,
            num_complex::Complex32::new(0.0, 0.0),
        );
        for (z, p) in out[start..].iter_mut().zip(bytes.chunks_exact(2)) {
            z.re = (p[0] as f32 - 127.5) / 127.5;
            z.im = (p[1] as f32 - 127.5) / 127.5;
        }
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

#[cfg(test)]
mod tests {
    use super::*;

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
