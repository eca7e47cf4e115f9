//! Axes: scales from data to pixels, tick positions and their labels.

/// A linear or logarithmic map from a data range onto a pixel range.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Scale {
    d0: f64,
    d1: f64,
    p0: f64,
    p1: f64,
    log: bool,
}

impl Scale {
    /// Linear: `d0 → p0`, `d1 → p1` (a degenerate range is widened).
    pub fn linear(d0: f64, d1: f64, p0: f64, p1: f64) -> Scale {
        let (d0, d1) = widen(d0, d1);
        Scale {
            d0,
            d1,
            p0,
            p1,
            log: false,
        }
    }

    /// Logarithmic (base 10) over positive `d0 < d1`.
    pub fn log(d0: f64, d1: f64, p0: f64, p1: f64) -> Scale {
        let d0 = d0.max(1e-12);
        let d1 = if d1 > d0 * 1.0001 { d1 } else { d0 * 10.0 };
        Scale {
            d0: d0.log10(),
            d1: d1.log10(),
            p0,
            p1,
            log: true,
        }
    }

    /// Pixel position of `v`.
    pub fn at(&self, v: f64) -> f64 {
        let v = if self.log { v.max(1e-300).log10() } else { v };
        self.p0 + (v - self.d0) / (self.d1 - self.d0) * (self.p1 - self.p0)
    }

    /// Pixel position of `v`, clamped to the pixel range.
    pub fn clamped(&self, v: f64) -> f64 {
        let (lo, hi) = (self.p0.min(self.p1), self.p0.max(self.p1));
        self.at(v).clamp(lo, hi)
    }

    /// The data range (`lo`, `hi`), undoing the logarithm.
    pub fn domain(&self) -> (f64, f64) {
        if self.log {
            (10f64.powf(self.d0), 10f64.powf(self.d1))
        } else {
            (self.d0, self.d1)
        }
    }
}

fn widen(d0: f64, d1: f64) -> (f64, f64) {
    if !(d0.is_finite() && d1.is_finite()) {
        return (0.0, 1.0);
    }
    if (d1 - d0).abs() < 1e-12 * d0.abs().max(1e-12) {
        let pad = if d0 == 0.0 { 1.0 } else { d0.abs() * 0.1 };
        return (d0 - pad, d1 + pad);
    }
    (d0, d1)
}

/// A "nice" step (1, 2 or 5 × 10ⁿ) giving about `target` intervals over `span`.
pub(crate) fn nice_step(span: f64, target: usize) -> f64 {
    let raw = span.abs().max(1e-300) / target.max(1) as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let f = raw / mag;
    let m = if f <= 1.0 {
        1.0
    } else if f <= 2.0 {
        2.0
    } else if f <= 5.0 {
        5.0
    } else {
        10.0
    };
    m * mag
}

/// Tick values at multiples of a nice step inside `[lo, hi]`, and the step.
pub(crate) fn linear_ticks(lo: f64, hi: f64, target: usize) -> (Vec<f64>, f64) {
    let (lo, hi) = widen(lo.min(hi), hi.max(lo));
    let step = nice_step(hi - lo, target);
    let first = (lo / step - 1e-9).ceil() as i64;
    let last = (hi / step + 1e-9).floor() as i64;
    let ticks = (first..=last.min(first + 1000))
        .map(|i| i as f64 * step)
        .collect();
    (ticks, step)
}

/// `lo`, `hi` rounded outwards to the nice step of about `target` intervals.
pub(crate) fn nice_range(lo: f64, hi: f64, target: usize) -> (f64, f64) {
    let (lo, hi) = widen(lo.min(hi), hi.max(lo));
    let step = nice_step(hi - lo, target);
    ((lo / step).floor() * step, (hi / step).ceil() * step)
}

/// Ticks of a log axis over `[lo, hi]`: `(value, major)`, majors at powers of ten and minors
/// at 2× and 5×.
pub(crate) fn log_ticks(lo: f64, hi: f64) -> Vec<(f64, bool)> {
    let lo = lo.max(1e-12);
    let hi = hi.max(lo * 1.0001);
    // Under about one decade, label more multiples so at least a few ticks show.
    let steps: &[f64] = if hi / lo < 8.0 {
        &[1.0, 1.5, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0]
    } else {
        &[1.0, 2.0, 5.0]
    };
    let mut out = Vec::new();
    let mut e = lo.log10().floor() as i32;
    while 10f64.powi(e) <= hi * 1.0001 && out.len() < 200 {
        for (m, major) in steps.iter().map(|&m| (m, m == 1.0)) {
            let v = m * 10f64.powi(e);
            if v >= lo * 0.9999 && v <= hi * 1.0001 {
                out.push((v, major));
            }
        }
        e += 1;
    }
    out
}

/// A tick label with as many decimals as the step needs.
pub(crate) fn label(v: f64, step: f64) -> String {
    let decimals = if step >= 1.0 {
        0
    } else {
        (-step.log10()).ceil().clamp(0.0, 9.0) as usize
    };
    let v = if v.abs() < step * 1e-6 { 0.0 } else { v };
    format!("{v:.decimals$}")
}

/// A width in µs written compactly (`350`, `1.2k`, `12k`).
pub(crate) fn short_us(v: f64) -> String {
    if v >= 10_000.0 {
        format!("{:.0}k", v / 1000.0)
    } else if v >= 1000.0 {
        format!("{:.1}k", v / 1000.0)
    } else if v >= 10.0 {
        format!("{v:.0}")
    } else {
        format!("{v:.1}")
    }
}

/// The unit a time span reads best in: (name, seconds per unit).
pub(crate) fn time_unit(span_s: f64) -> (&'static str, f64) {
    if span_s < 2e-3 {
        ("µs", 1e-6)
    } else if span_s < 2.0 {
        ("ms", 1e-3)
    } else {
        ("s", 1.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nice_steps_and_ticks() {
        assert_eq!(nice_step(10.0, 5), 2.0);
        assert_eq!(nice_step(0.7, 7), 0.1);
        assert_eq!(nice_step(3.0, 10), 0.5);
        let (t, step) = linear_ticks(0.0, 2.3, 5);
        assert_eq!(step, 0.5);
        assert_eq!(t.len(), 5);
        assert_eq!(label(t[3], step), "1.5");
        assert_eq!(nice_range(0.03, 0.91, 5), (0.0, 1.0));
    }

    #[test]
    fn scales_map_both_ways() {
        let s = Scale::linear(0.0, 10.0, 100.0, 200.0);
        assert_eq!(s.at(5.0), 150.0);
        assert_eq!(s.clamped(20.0), 200.0);
        let l = Scale::log(10.0, 1000.0, 0.0, 200.0);
        assert!((l.at(100.0) - 100.0).abs() < 1e-9);
        let (lo, hi) = l.domain();
        assert!((lo - 10.0).abs() < 1e-9 && (hi - 1000.0).abs() < 1e-6);
        // An inverted pixel range (y axes grow downwards).
        let y = Scale::linear(0.0, 1.0, 300.0, 100.0);
        assert_eq!(y.at(1.0), 100.0);
    }

    #[test]
    fn log_ticks_cover_the_range() {
        let t = log_ticks(150.0, 12_000.0);
        let majors: Vec<f64> = t.iter().filter(|x| x.1).map(|x| x.0).collect();
        assert_eq!(majors, vec![1000.0, 10_000.0]);
        assert_eq!(t.first().map(|x| x.0), Some(200.0));
        assert_eq!(t.last().map(|x| x.0), Some(10_000.0));
        // A narrow range gets more ticks.
        let narrow = log_ticks(230.0, 1600.0);
        let v: Vec<f64> = narrow.iter().map(|x| x.0).collect();
        assert_eq!(
            v,
            vec![300.0, 400.0, 500.0, 600.0, 700.0, 800.0, 1000.0, 1500.0]
        );
    }
}
