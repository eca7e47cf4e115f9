//! Checks of the budget layer against the worked values of facts.md (source named beside each
//! check) and against hand calculations written out in the comments.

use super::*;

/// facts.md §5.4 (common practice, [M]): unit T = 350 µs.
const T: f64 = 350e-6;

fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol
}

macro_rules! assert_close {
    ($a:expr, $b:expr, $tol:expr) => {{
        let (a, b, tol): (f64, f64, f64) = ($a, $b, $tol);
        assert!(
            close(a, b, tol),
            "{} = {a}, expected {b} ± {tol}",
            stringify!($a)
        );
    }};
}

/// One PWM frame as in facts.md §5.4: 24 bits MSB first, bit = 4T (0: 1T mark + 3T space,
/// 1: 3T mark + 1T space), then the sync: 1T mark + 31T space. The sync mark closes the frame
/// (DESIGN.md: a short mark before a long sync space belongs to the frame it closes), so the
/// frame has 25 marks and the next frame starts 128T after this one.
fn pwm_frame(word: u32, t0: f64) -> (FrameTiming, f64) {
    let mut marks = Vec::with_capacity(25);
    let mut t = t0;
    for i in (0..24).rev() {
        let w = if (word >> i) & 1 == 1 { 3.0 * T } else { T };
        marks.push((t, t + w));
        t += 4.0 * T;
    }
    marks.push((t, t + T));
    t += 32.0 * T;
    (FrameTiming { marks }, t)
}

/// `n` frames back to back from `t0`.
fn pwm_press(word: u32, n: usize, t0: f64) -> PressTiming {
    let mut frames = Vec::with_capacity(n);
    let mut t = t0;
    for _ in 0..n {
        let (f, next) = pwm_frame(word, t);
        frames.push(f);
        t = next;
    }
    PressTiming {
        frames,
        truncated: false,
    }
}

fn code(key: &str, presses: Vec<PressTiming>, carrier_hz: Option<f64>) -> CodeTiming {
    CodeTiming {
        key_id: key.to_string(),
        line_code: "pwm".to_string(),
        carrier_hz,
        presses,
        capture_duration_s: 60.0,
    }
}

const ALL: Rules = Rules { us: true, eu: true };

// -------------------------------------------------------------------------------------------
// §15.35(c)
// -------------------------------------------------------------------------------------------

#[test]
fn correction_worked_values() {
    // facts.md §1.2 worked values [D] (20·log10 form: IEEE EMC-PSTC list, Oct 2001 [C2]).
    assert_close!(duty_cycle_correction_db(50.0), -6.021, 0.0005);
    assert_close!(duty_cycle_correction_db(30.0), -10.458, 0.0005);
    assert_close!(duty_cycle_correction_db(25.0), -12.041, 0.0005);
    assert_close!(duty_cycle_correction_db(10.0), -20.000, 0.0005);
    assert_close!(duty_cycle_correction_db(5.0), -26.021, 0.0005);
    assert_close!(duty_cycle_correction_db(1.0), -40.000, 0.0005);
    // facts.md §1.2: "DCCF = 0 dB if T_on ≥ 100 ms".
    assert_eq!(duty_cycle_correction_db(100.0), 0.0);
    assert_eq!(duty_cycle_correction_db(250.0), 0.0);
}

#[test]
fn pwm_worked_examples() {
    // facts.md §1.2 table [D]: 24 bits, T = 350 µs, 128 T = 44.8 ms per frame, 8 frames back
    // to back; (word, mark time per frame, mark fraction of the 128 T period,
    // worst 100 ms on-time, correction).
    let cases = [
        (0x000000, 8.75, 0.1953, 20.30, -13.850),
        (0xAAAAAA, 17.15, 0.3828, 39.90, -7.981),
        (0xFFFFFF, 25.55, 0.5703, 59.05, -4.576),
    ];
    for (word, on_ms, fraction, worst_ms, dccf) in cases {
        let c = code("k", vec![pwm_press(word, 8, 0.5)], Some(433.92e6));
        let r = budget(&[c], &ALL, None).expect("valid timing");
        let a = &r.codes[0].airtime;
        assert_eq!(a.frames, 8);
        assert_close!(a.frame_on_time_ms, on_ms, 1e-9);
        // facts.md §1.2: 128 T = 44.8 ms start to start.
        let period = a.frame_period_ms.expect("repeats");
        assert_close!(period, 44.8, 1e-9);
        assert_close!(a.frame_on_time_ms / period, fraction, 5e-5);
        // Derived here from the DESIGN.md definition (first rise to last fall): 96 T + 1 T.
        assert_close!(a.frame_airtime_ms, 97.0 * 0.35, 1e-9);
        // Press: 7 periods + one frame airtime = 993 T.
        assert_close!(a.press_airtime_ms, 993.0 * 0.35, 1e-9);
        assert_close!(a.press_on_time_ms, 8.0 * on_ms, 1e-9);
        assert_close!(a.worst_window_on_time_ms, worst_ms, 1e-9);
        let us = r.codes[0].us.as_ref().expect("us asked");
        assert_close!(us.duty_cycle_correction.correction_db, dccf, 0.0005);
        assert!(!us.duty_cycle_correction.correction_capped);
    }
}

/// Naive reference: the on-time of every window whose start or end touches any edge, by
/// direct overlap sums (O(n²)).
fn naive_worst(marks: &[(f64, f64)], w: f64) -> f64 {
    let overlap = |a: f64| -> f64 {
        marks
            .iter()
            .map(|&(r, f)| (f.min(a + w) - r.max(a)).max(0.0))
            .sum()
    };
    marks
        .iter()
        .flat_map(|&(r, f)| [r, f, r - w, f - w])
        .map(overlap)
        .fold(0.0, f64::max)
}

/// Seeded xorshift generator for reproducible test inputs.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        (self.0 >> 11) as f64 / (1u64 << 53) as f64
    }
}

#[test]
fn worst_window_matches_naive_reference() {
    let mut rng = Rng(0x9E37_79B9_7F4A_7C15);
    for trial in 0..200 {
        let n = 1 + (rng.next() * 60.0) as usize;
        let mut t = rng.next() * 0.01;
        let mut marks = Vec::with_capacity(n);
        for _ in 0..n {
            let gap = rng.next() * if trial % 3 == 0 { 0.08 } else { 0.004 };
            let w = 1e-5 + rng.next() * 0.006;
            t += gap;
            marks.push((t, t + w));
            t += w;
        }
        let (fast, start) = worst_window_on_time_s(&marks, 0.1);
        let slow = naive_worst(&marks, 0.1);
        assert_close!(fast, slow, 1e-12);
        // The reported start really holds that much mark time.
        let check: f64 = marks
            .iter()
            .map(|&(r, f)| (f.min(start + 0.1) - r.max(start)).max(0.0))
            .sum();
        assert_close!(check, fast, 1e-12);
    }
}

#[test]
fn worst_window_of_short_press_is_whole_press() {
    // A press shorter than 100 ms: the window holds all of it (hand check: 3 × 2 ms).
    let marks = vec![(1.0, 1.002), (1.010, 1.012), (1.050, 1.052)];
    let (on, _) = worst_window_on_time_s(&marks, 0.1);
    assert_close!(on, 0.006, 1e-12);
    assert_eq!(worst_window_on_time_s(&[], 0.1), (0.0, 0.0));
}

#[test]
fn peak_cap_below_minus_20_db() {
    // facts.md §1.2 [D] with §1.1 (47 CFR §15.35(b) [C]): a correction below −20 dB buys
    // nothing. One 1 ms mark per 200 ms: worst window 1 ms → −40 dB, effective −20 dB.
    let presses = vec![PressTiming {
        frames: (0..5)
            .map(|i| {
                let t = 0.1 + i as f64 * 0.2;
                FrameTiming {
                    marks: vec![(t, t + 0.001)],
                }
            })
            .collect(),
        truncated: false,
    }];
    let r = budget(&[code("k", presses, Some(433.92e6))], &ALL, None).expect("valid");
    let us = r.codes[0].us.as_ref().expect("us");
    let c = &us.duty_cycle_correction;
    assert_close!(c.correction_db, -40.0, 1e-9);
    assert_close!(c.effective_correction_db, -20.0, 1e-12);
    assert_close!(c.peak_above_average_limit_db, 20.0, 1e-12);
    assert!(c.correction_capped);
    // facts.md §1.4: average 80.83, peak 100.83 dBµV/m at 433.92 MHz; the allowed peak reading
    // stops at the peak limit.
    let allowed = us
        .field_strength
        .allowed_peak_reading_dbuv_m
        .expect("carrier known");
    assert_close!(allowed, 100.83, 0.005);
}

// -------------------------------------------------------------------------------------------
// §15.231
// -------------------------------------------------------------------------------------------

#[test]
fn fcc_15231b_at_433_92() {
    // facts.md §1.4 [D] (table row [C2], a regulatory training page cited there):
    // 10,996.67 µV/m = 80.83 dBµV/m,
    // peak 100.83 dBµV/m, −14.40 dBm EIRP.
    let uv = fcc_15231b_limit_uv_m(433.92e6).expect("in range");
    assert_close!(uv, 10_996.67, 0.005);
    assert_close!(uv_m_to_dbuv_m(uv), 80.83, 0.005);
    assert_close!(eirp_dbm_from_field(uv_m_to_dbuv_m(uv), 3.0), -14.40, 0.005);
    // Table end points (facts.md §1.4 [C2]): 3,750 µV/m at 260 MHz, 12,500 µV/m at 470 MHz.
    assert_close!(fcc_15231b_limit_uv_m(260e6).unwrap_or(0.0), 3_750.0, 1e-9);
    assert_close!(fcc_15231b_limit_uv_m(470e6).unwrap_or(0.0), 12_500.0, 1e-9);
    assert_eq!(fcc_15231b_limit_uv_m(250e6), None);
    assert_eq!(fcc_15231b_limit_uv_m(868e6), None);

    let r = budget(
        &[code("k", vec![pwm_press(0, 8, 0.0)], Some(433.92e6))],
        &ALL,
        None,
    )
    .expect("valid");
    let fs = &r.codes[0].us.as_ref().expect("us").field_strength;
    assert_eq!(fs.verdict, Verdict::Figure);
    assert_close!(fs.average_limit_dbuv_m.unwrap_or(0.0), 80.83, 0.005);
    assert_close!(fs.peak_limit_dbuv_m.unwrap_or(0.0), 100.83, 0.005);
    // −13.850 dB correction (facts.md §1.2) → peak reading may be 80.83 + 13.85.
    assert_close!(fs.allowed_peak_reading_dbuv_m.unwrap_or(0.0), 94.675, 0.005);

    let unknown =
        budget(&[code("k", vec![pwm_press(0, 2, 0.0)], None)], &ALL, None).expect("valid");
    let fs = &unknown.codes[0].us.as_ref().expect("us").field_strength;
    assert_eq!(fs.verdict, Verdict::Undetermined);
    assert_eq!(fs.average_limit_uv_m, None);
}

#[test]
fn fcc_15231e_limit_and_silent_periods() {
    // facts.md §1.6 [D]: 4,398.67 µV/m = 72.87 dBµV/m at 433.92 MHz.
    let uv = fcc_15231e_limit_uv_m(433.92e6).expect("in range");
    assert_close!(uv, 4_398.67, 0.005);
    assert_close!(uv_m_to_dbuv_m(uv), 72.87, 0.005);
    // facts.md §1.6 worked [D] (rule [C2], a 2007 serial-communication book cited there):
    // silent ≥ max(30 t, 10 s).
    assert_eq!(silent_period_s(0.1), Some(10.0));
    assert_eq!(silent_period_s(0.3), Some(10.0));
    assert_close!(silent_period_s(0.5).unwrap_or(0.0), 15.0, 1e-12);
    assert_close!(silent_period_s(1.0).unwrap_or(0.0), 30.0, 1e-12);
    assert_eq!(silent_period_s(1.2), None); // 1.2 s: not permitted
    assert_eq!(silent_period_s(f64::NAN), None);
}

fn long_press(t0: f64, len_s: f64) -> PressTiming {
    // Marks of 1 ms every 10 ms, as one frame, lasting `len_s`.
    let n = (len_s / 0.01).round() as usize;
    PressTiming {
        frames: vec![FrameTiming {
            marks: (0..n)
                .map(|i| {
                    let t = t0 + i as f64 * 0.01;
                    (t, t + 0.001)
                })
                .collect(),
        }],
        truncated: false,
    }
}

#[test]
fn periodic_rule_verdicts() {
    // §15.231(e) (facts.md §1.6): 1.2 s transmission not permitted.
    let r = budget(&[code("k", vec![long_press(0.0, 1.2)], None)], &ALL, None).expect("ok");
    let p = &r.codes[0].us.as_ref().expect("us").periodic;
    assert_eq!(p.verdict, Verdict::Inconsistent);
    assert_eq!(p.min_silent_s, None);

    // Presses of 50 marks 10 ms apart last 0.491 s and need 30 × 0.491 = 14.73 s of silence;
    // presses 12 s apart (11.509 s gap) break it.
    let r = budget(
        &[code(
            "k",
            vec![long_press(0.0, 0.5), long_press(12.0, 0.5)],
            None,
        )],
        &ALL,
        None,
    )
    .expect("ok");
    let p = &r.codes[0].us.as_ref().expect("us").periodic;
    assert_eq!(p.verdict, Verdict::Inconsistent, "{}", p.finding);
    assert_close!(p.min_silent_s.unwrap_or(0.0), 14.73, 1e-9);

    // 0.1 s presses 20 s apart respect the 10 s silence.
    let r = budget(
        &[code(
            "k",
            vec![long_press(0.0, 0.1), long_press(20.0, 0.1)],
            None,
        )],
        &ALL,
        None,
    )
    .expect("ok");
    let p = &r.codes[0].us.as_ref().expect("us").periodic;
    assert_eq!(p.verdict, Verdict::Consistent, "{}", p.finding);
    assert_eq!(p.min_silent_s, Some(10.0));
}

#[test]
fn release_rule_verdicts() {
    // §15.231(a)(1) (facts.md §1.3 [C]): deactivate within 5 s of release.
    let short = budget(&[code("k", vec![long_press(0.0, 0.4)], None)], &ALL, None).expect("ok");
    let rel = &short.codes[0].us.as_ref().expect("us").release;
    assert_eq!(rel.verdict, Verdict::Consistent);
    assert_eq!(rel.limit_s, 5.0);

    let long = budget(&[code("k", vec![long_press(0.0, 6.0)], None)], &ALL, None).expect("ok");
    let rel = &long.codes[0].us.as_ref().expect("us").release;
    assert_eq!(rel.verdict, Verdict::Undetermined);

    let mut p = long_press(0.0, 0.4);
    p.truncated = true;
    let cut = budget(&[code("k", vec![p], None)], &ALL, None).expect("ok");
    let rel = &cut.codes[0].us.as_ref().expect("us").release;
    assert_eq!(rel.verdict, Verdict::Undetermined);
    assert_eq!(rel.truncated_presses, 1);
}

// -------------------------------------------------------------------------------------------
// ERC/REC 70-03
// -------------------------------------------------------------------------------------------

#[test]
fn presses_per_hour_worked_values() {
    // facts.md §2.3 [D] (10 % over one hour = 360 s, ERC/REC 70-03 via facts §2.1/§2.2 [C2]).
    assert_eq!(presses_per_hour(0.300, 0.10, 3600.0), 1200);
    assert_eq!(presses_per_hour(0.250, 0.10, 3600.0), 1440);
    assert_eq!(presses_per_hour(0.100, 0.10, 3600.0), 3600);
    assert_eq!(presses_per_hour(0.3584, 0.10, 3600.0), 1004);
    assert_eq!(presses_per_hour(0.1372, 0.10, 3600.0), 2623);
    assert_eq!(presses_per_hour(0.300, 0.01, 3600.0), 120); // 1 % band
    assert_eq!(presses_per_hour(0.0, 0.10, 3600.0), 0);
    assert_eq!(presses_per_hour(f64::NAN, 0.10, 3600.0), 0);
}

#[test]
fn eu_sub_bands_and_both_conventions() {
    let r = budget(
        &[code("k", vec![pwm_press(0xAAAAAA, 8, 0.0)], Some(433.92e6))],
        &ALL,
        None,
    )
    .expect("ok");
    let eu = r.codes[0].eu.as_ref().expect("eu");
    assert_eq!(eu.observation_period_s, 3600.0);
    // 433.92 MHz lies in 433.050–434.790 but not in 434.040–434.790 (facts.md §2.1).
    assert_eq!(eu.carrier_in, vec!["eu-433-10pct", "eu-433-1mw"]);
    let ten = &eu.sub_bands[0];
    assert_eq!(ten.duty_cycle_limit_pct, Some(10.0));
    let by = |c: DutyConvention| {
        ten.presses_per_hour
            .iter()
            .find(|p| p.convention == c)
            .copied()
            .expect("both conventions")
    };
    // facts.md §2.3 [D]: mark-only, 0xAAAAAA, 8 × 17.15 ms = 137.2 ms → 2623 presses/h.
    let marks = by(DutyConvention::MarksOnly);
    assert_close!(marks.press_time_ms, 137.2, 1e-9);
    assert_eq!(marks.presses_per_hour, 2623);
    // Frame spans (first to last edge, DESIGN.md): 8 × 97 T = 271.6 ms → floor(1325.4) = 1325
    // (derived here; facts.md §2.3's 1004 counts the whole 128 T period incl. the sync gap).
    let spans = by(DutyConvention::FrameSpans);
    assert_close!(spans.press_time_ms, 271.6, 1e-9);
    assert_eq!(spans.presses_per_hour, 1325);
    assert_eq!(eu.sub_bands[2].verdict, Verdict::NotApplicable);
    assert_eq!(eu.sub_bands[2].max_bandwidth_hz, Some(25e3));

    let inside_all = budget(
        &[code("k", vec![pwm_press(0, 2, 0.0)], Some(434.5e6))],
        &ALL,
        None,
    )
    .expect("ok");
    assert_eq!(
        inside_all.codes[0]
            .eu
            .as_ref()
            .expect("eu")
            .carrier_in
            .len(),
        3
    );
    let unknown = budget(&[code("k", vec![pwm_press(0, 2, 0.0)], None)], &ALL, None).expect("ok");
    let eu = unknown.codes[0].eu.as_ref().expect("eu");
    assert!(eu.carrier_in.is_empty());
    assert!(eu.sub_bands.iter().all(|b| b.carrier_inside.is_none()));
    let outside = budget(
        &[code("k", vec![pwm_press(0, 2, 0.0)], Some(868.3e6))],
        &ALL,
        None,
    )
    .expect("ok");
    let eu = outside.codes[0].eu.as_ref().expect("eu");
    assert!(eu
        .sub_bands
        .iter()
        .all(|b| b.verdict == Verdict::NotApplicable));
}

#[test]
fn rules_off_means_no_results() {
    let r = budget(
        &[code("k", vec![pwm_press(0, 2, 0.0)], None)],
        &Rules::default(),
        None,
    )
    .expect("ok");
    assert!(r.codes[0].us.is_none() && r.codes[0].eu.is_none() && r.energy.is_none());
    assert_eq!(r.caution, CAUTION);
}

// -------------------------------------------------------------------------------------------
// Energy
// -------------------------------------------------------------------------------------------

#[test]
fn energy_formulas_worked_values() {
    // facts.md §7 [D] (textbook physics).
    assert_close!(capacitor_energy_uj(47.0, 5.0), 587.5, 1e-9);
    assert_close!(capacitor_energy_uj(100.0, 5.0), 1250.0, 1e-9);
    assert_close!(capacitor_window_energy_uj(47.0, 5.0, 2.0), 493.5, 1e-9);
    assert_close!(capacitor_window_energy_uj(100.0, 3.3, 1.8), 382.5, 1e-9);
    assert_close!(linear_regulator_energy_uj(47.0, 5.0, 2.0, 1.8), 253.8, 1e-9);
    assert_close!(divider_output_v(0.5, 180e3, 51e3), 2.2647, 5e-5);
    assert_close!(pulse_energy_uj(3.0, 50.0, 300.0), 1500.0, 1e-9);
}

fn profile(supply: SupplyProfile, harvester: Option<HarvesterProfile>) -> EnergyProfile {
    EnergyProfile {
        name: "test".to_string(),
        note: None,
        transmitter: TransmitterProfile {
            supply,
            mark_current_ma: 10.0,
            space_current_ma: 1.0,
            startup_ms: 0.0,
            startup_current_ma: 0.0,
        },
        harvester,
    }
}

fn cap(c: f64, v1: f64, v2: f64) -> Option<HarvesterProfile> {
    Some(HarvesterProfile::Capacitor {
        capacitance_uf: c,
        start_v: v1,
        cutoff_v: v2,
    })
}

#[test]
fn usable_energy_by_supply() {
    let c = [code("k", vec![pwm_press(0, 1, 0.0)], None)];
    let usable = |p: EnergyProfile| {
        let r = budget(&c, &Rules::default(), Some(&p)).expect("valid profile");
        let h = r.energy.and_then(|e| e.harvester).expect("harvester");
        h.usable_energy_uj
    };
    // facts.md §7 [D]: linear 1.8 V, 47 µF 5.0 → 2.0 V: 253.8 µJ.
    let linear = SupplyProfile::Linear {
        output_v: Some(1.8),
        divider: None,
        dropout_v: 0.0,
    };
    assert_close!(usable(profile(linear, cap(47.0, 5.0, 2.0))), 253.8, 1e-9);
    // facts.md §7 [D]: 90 %-efficient buck: 444.2 µJ (0.9 × 493.5 = 444.15).
    let buck = SupplyProfile::Switching {
        output_v: Some(1.8),
        divider: None,
        efficiency: 0.9,
    };
    assert_close!(usable(profile(buck, cap(47.0, 5.0, 2.0))), 444.15, 1e-9);
    // facts.md §7: ½C(V1² − V2²) = 382.5 µJ straight from 100 µF, 3.3 → 1.8 V.
    assert_close!(
        usable(profile(SupplyProfile::Unregulated, cap(100.0, 3.3, 1.8))),
        382.5,
        1e-9
    );
    // facts.md §7: V²t/R = 1.5 mJ (3.0 V, 300 Ω, 50 ms), used as is at 3.0 V.
    let pulse = Some(HarvesterProfile::Pulse {
        voltage_v: 3.0,
        duration_ms: 50.0,
        load_ohm: 300.0,
    });
    assert_close!(
        usable(profile(SupplyProfile::Unregulated, pulse.clone())),
        1500.0,
        1e-9
    );
    // Hand: through a linear regulator to 1.8 V the pulse gives 1500 × 1.8/3.0 = 900 µJ.
    let linear = SupplyProfile::Linear {
        output_v: Some(1.8),
        divider: None,
        dropout_v: 0.2,
    };
    assert_close!(usable(profile(linear, pulse)), 900.0, 1e-9);
    // Hand: a 1.8 V linear regulator with 0.3 V dropout raises the 2.0 V cut-off to 2.1 V:
    // 1.8 × 47 × (5.0 − 2.1) = 245.34 µJ.
    let linear = SupplyProfile::Linear {
        output_v: Some(1.8),
        divider: None,
        dropout_v: 0.3,
    };
    assert_close!(usable(profile(linear, cap(47.0, 5.0, 2.0))), 245.34, 1e-9);
}

#[test]
fn frame_budget_example() {
    // facts.md §7 [D]: one 44.8 ms frame, 3.0 V, 10 mA marks, 1 mA spaces, 0xAAAAAA:
    // Q = 171.5 + 27.65 = 199.15 µC → 597.5 µJ; 8 frames = 4.78 mJ.
    let p = profile(SupplyProfile::Fixed { voltage_v: 3.0 }, None);
    let r = budget(
        &[code("k", vec![pwm_press(0xAAAAAA, 8, 0.2)], None)],
        &Rules::default(),
        Some(&p),
    )
    .expect("ok");
    let e = r.codes[0].energy.as_ref().expect("energy");
    // The 44.8 ms frame of facts §7 is our frame period (frame + sync gap).
    assert_close!(e.repeat_energy_uj.unwrap_or(0.0), 597.45, 1e-9);
    assert_close!(8.0 * e.repeat_energy_uj.unwrap_or(0.0), 4780.0, 1.0);
    // Our press stops at the last falling edge: hand, 7 × 597.45 + (597.45 − 3 V × 1 mA ×
    // 31 T) = 4182.15 + 564.9 = 4747.05 µJ.
    assert_close!(e.press_energy_uj, 4747.05, 1e-9);
    // Frame first-to-last edge: 3 × (10 × 17.15 + 1 × 16.8) = 3 × 188.3 = 564.9 µJ.
    assert_close!(e.frame_energy_uj, 564.9, 1e-9);
    assert!(e.frames_powered.is_none() && e.margin_uj.is_none());

    // facts.md §7 [D]: E = V·I·t = 3.0 V · 10 mA · 17.15 ms = 514.5 µJ (marks only).
    let mut p = profile(SupplyProfile::Fixed { voltage_v: 3.0 }, None);
    p.transmitter.space_current_ma = 0.0;
    let r = budget(
        &[code("k", vec![pwm_press(0xAAAAAA, 1, 0.2)], None)],
        &Rules::default(),
        Some(&p),
    )
    .expect("ok");
    let e = r.codes[0].energy.as_ref().expect("energy");
    assert_close!(e.frame_energy_uj, 514.5, 1e-9);
    assert_eq!(e.repeat_energy_uj, None);
}

#[test]
fn frame_budget_by_hand_with_divider() {
    // Hand calculation: switching converter, output set by the divider of facts.md §7
    // (0.5 V, 180 kΩ, 51 kΩ → 2.264706 V; divider current 0.5/51k = 9.8039 µA), efficiency
    // 0.8; mark 8 mA, space 0.5 mA; all-0 PWM frame: on 25 T = 8.75 ms, airtime 97 T =
    // 33.95 ms, space 25.2 ms.
    //   Q = 8 × 8.75 + 0.5 × 25.2 + 0.0098039 × 33.95 = 70 + 12.6 + 0.332843 = 82.932843 µC
    //   E = 2.264706 × 82.932843 = 187.8185 µJ
    // Start-up 0.6 ms at 2 mA (+ divider): (2.0098039 × 0.6) × 2.264706 = 2.73097 µJ.
    // Store 100 µF, 3.3 → 1.8 V: η·½C(V1² − V2²) = 0.8 × 382.5 = 306 µJ.
    // One press of 1 frame: 190.5495 µJ; left 115.4505 µJ; store energy left 115.4505 / 0.8
    // = 144.3131 µJ → V = √(1.8² + 2 × 144.3131 / 100) = √(3.24 + 2.886263) = 2.475129 V.
    let p = EnergyProfile {
        name: "hand".into(),
        note: None,
        transmitter: TransmitterProfile {
            supply: SupplyProfile::Switching {
                output_v: None,
                divider: Some(Divider {
                    vref_v: 0.5,
                    r1_ohm: 180e3,
                    r2_ohm: 51e3,
                }),
                efficiency: 0.8,
            },
            mark_current_ma: 8.0,
            space_current_ma: 0.5,
            startup_ms: 0.6,
            startup_current_ma: 2.0,
        },
        harvester: cap(100.0, 3.3, 1.8),
    };
    let r = budget(
        &[code("k", vec![pwm_press(0, 1, 1.0)], None)],
        &Rules::default(),
        Some(&p),
    )
    .expect("ok");
    let setup = r.energy.as_ref().expect("setup");
    assert_close!(setup.load_v, 2.264706, 1e-6);
    assert_close!(setup.divider_current_ua.unwrap_or(0.0), 9.804, 5e-4);
    let e = r.codes[0].energy.as_ref().expect("energy");
    assert_close!(e.frame_charge_uc, 82.932843, 1e-6);
    assert_close!(e.frame_energy_uj, 187.8185, 1e-4);
    assert_close!(e.startup_energy_uj, 2.73097, 1e-5);
    assert_close!(e.usable_energy_uj.unwrap_or(0.0), 306.0, 1e-9);
    assert_close!(e.press_energy_uj, 190.5495, 1e-4);
    assert_close!(e.margin_uj.unwrap_or(0.0), 115.4505, 1e-4);
    // Frames powered, by hand: 1 + floor((306 − 2.73097 − 187.8185) / 187.8185) = 1.
    assert_eq!(e.frames_powered, Some(1));
    let run = e.presses[0].store.as_ref().expect("store");
    assert!(run.completes);
    assert_eq!(run.last_complete_repeat, Some(1));
    assert_close!(run.energy_left_uj, 115.4505, 1e-4);
    assert_close!(run.store_end_v.unwrap_or(0.0), 2.475129, 1e-6);
}

#[test]
fn last_repeat_sent_by_hand() {
    // Hand calculation (charge-based, linear regulator 1.8 V, no dropout, so the 2.0 V
    // cut-off stands): store 47 µF, 5.0 → 2.0 V gives 47 × 3.0 = 141 µC (253.8 µJ, facts §7).
    // Start-up 1 ms at 2 mA = 2 µC → 139 µC left at the first rising edge.
    // 0xAAAAAA frame, mark 3 mA, space 0.1 mA: marks 49 T = 17.15 ms → 51.45 µC, spaces inside
    // the frame 48 T = 16.8 ms → 1.68 µC: 53.13 µC per frame; the 31 T sync gap after it
    // (10.85 ms) → 1.085 µC.
    //   after frame 1: 139 − 53.13 = 85.87; gap → 84.785
    //   after frame 2: 31.655; gap → 30.57 µC at the start of frame 3
    // Frame 3 runs bit pairs (1, 0) of 8 T costing 3.15 + 0.035 + 1.05 + 0.105 = 4.34 µC:
    //   7 pairs (56 T) → 30.38 µC, 0.19 µC left; the next 3 mA mark lasts 0.19/3 ms = 63.33 µs.
    // So repeat 2 is the last one sent completely, the store reaches 2.0 V at
    // t3 + 56 T + 63.33 µs where t3 = t0 + 2 × 128 T.
    let t0 = 0.25;
    let mut p = profile(
        SupplyProfile::Linear {
            output_v: Some(1.8),
            divider: None,
            dropout_v: 0.0,
        },
        cap(47.0, 5.0, 2.0),
    );
    p.transmitter.mark_current_ma = 3.0;
    p.transmitter.space_current_ma = 0.1;
    p.transmitter.startup_ms = 1.0;
    p.transmitter.startup_current_ma = 2.0;
    let r = budget(
        &[code("k", vec![pwm_press(0xAAAAAA, 8, t0)], None)],
        &Rules::default(),
        Some(&p),
    )
    .expect("ok");
    let e = r.codes[0].energy.as_ref().expect("energy");
    let run = e.presses[0].store.as_ref().expect("store");
    assert_eq!(run.frames_total, 8);
    assert_eq!(run.frames_sent, 2);
    assert_eq!(run.last_complete_repeat, Some(2));
    assert!(!run.completes);
    let expect_cut = t0 + 2.0 * 128.0 * T + 56.0 * T + 0.19e-3 / 3.0;
    assert_close!(run.cutoff_at_s.unwrap_or(0.0), expect_cut, 1e-9);
    assert_close!(run.store_end_v.unwrap_or(0.0), 2.0, 1e-12);
    assert_eq!(run.energy_left_uj, 0.0);
    // Frames powered: 1 + floor((141 − 2 − 53.13) / 54.215) = 1 + floor(1.584) = 2.
    assert_eq!(e.frames_powered, Some(2));
    // Press energy: (2 + 8 × 53.13 + 7 × 1.085) µC × 1.8 V = 434.635 × 1.8 = 782.343 µJ.
    assert_close!(e.press_energy_uj, 782.343, 1e-6);
    assert_close!(e.margin_uj.unwrap_or(0.0), 253.8 - 782.343, 1e-6);
}

#[test]
fn start_up_alone_can_exhaust_the_store() {
    // Hand: 10 µF, 3.0 → 2.0 V straight: 10 µC; start-up 5 ms at 5 mA = 25 µC → cut-off 2 ms
    // into start-up (10 µC / 5 mA), no frame sent.
    let mut p = profile(SupplyProfile::Unregulated, cap(10.0, 3.0, 2.0));
    p.transmitter.startup_ms = 5.0;
    p.transmitter.startup_current_ma = 5.0;
    let r = budget(
        &[code("k", vec![pwm_press(0, 2, 1.0)], None)],
        &Rules::default(),
        Some(&p),
    )
    .expect("ok");
    let e = r.codes[0].energy.as_ref().expect("energy");
    let run = e.presses[0].store.as_ref().expect("store");
    assert_eq!(run.frames_sent, 0);
    assert_eq!(run.last_complete_repeat, None);
    assert_close!(run.cutoff_at_s.unwrap_or(0.0), 1.0 - 0.003, 1e-12);
    assert_eq!(e.frames_powered, Some(0));
}

// -------------------------------------------------------------------------------------------
// Errors and robustness
// -------------------------------------------------------------------------------------------

fn profile_error(p: &EnergyProfile) -> String {
    match p.validate() {
        Err(BudgetError::InvalidProfile { field, detail }) => format!("{field}: {detail}"),
        other => panic!("expected InvalidProfile, got {other:?}"),
    }
}

#[test]
fn nonsense_profiles_are_rejected() {
    let fixed = SupplyProfile::Fixed { voltage_v: 3.0 };
    let msg = profile_error(&profile(fixed.clone(), cap(-47.0, 5.0, 2.0)));
    assert!(msg.contains("capacitance_uf"), "{msg}");
    let msg = profile_error(&profile(fixed.clone(), cap(47.0, 2.0, 2.0)));
    assert!(msg.contains("cutoff_v") && msg.contains("below"), "{msg}");
    let msg = profile_error(&profile(fixed.clone(), cap(47.0, 2.0, 3.0)));
    assert!(msg.contains("cutoff_v"), "{msg}");
    let mut p = profile(fixed.clone(), None);
    p.transmitter.mark_current_ma = f64::NAN;
    assert!(profile_error(&p).contains("mark_current_ma"));
    let mut p = profile(fixed, None);
    p.transmitter.startup_ms = -1.0;
    assert!(profile_error(&p).contains("startup_ms"));
    let both = SupplyProfile::Switching {
        output_v: Some(1.8),
        divider: Some(Divider {
            vref_v: 0.5,
            r1_ohm: 1.0,
            r2_ohm: 1.0,
        }),
        efficiency: 0.9,
    };
    assert!(profile_error(&profile(both, None)).contains("not both"));
    let over = SupplyProfile::Switching {
        output_v: Some(1.8),
        divider: None,
        efficiency: 1.2,
    };
    assert!(profile_error(&profile(over, None)).contains("efficiency"));
    assert!(profile_error(&profile(SupplyProfile::Unregulated, None)).contains("harvester"));
    let low = SupplyProfile::Linear {
        output_v: Some(3.3),
        divider: None,
        dropout_v: 0.2,
    };
    assert!(profile_error(&profile(low, cap(47.0, 3.0, 2.0))).contains("start_v"));
    let zero_r2 = SupplyProfile::Linear {
        output_v: None,
        divider: Some(Divider {
            vref_v: 0.5,
            r1_ohm: 1.0,
            r2_ohm: 0.0,
        }),
        dropout_v: 0.0,
    };
    assert!(profile_error(&profile(zero_r2, None)).contains("r2_ohm"));
    // budget() runs the same checks.
    let bad = profile(SupplyProfile::Fixed { voltage_v: 3.0 }, cap(47.0, 2.0, 5.0));
    let err = budget(&[], &ALL, Some(&bad)).expect_err("rejected");
    assert!(err
        .to_string()
        .starts_with("budget: energy profile: harvester.cutoff_v"));
}

#[test]
fn profile_json_parsing() {
    let text = r#"{"name":"x","transmitter":{"supply":{"kind":"linear","divider":
        {"vref_v":0.5,"r1_ohm":180000,"r2_ohm":51000}},"mark_current_ma":5,
        "space_current_ma":0},"harvester":{"kind":"pulse","voltage_v":3,"duration_ms":50,
        "load_ohm":300}}"#;
    let p = EnergyProfile::from_json_str(text).expect("valid");
    assert!(matches!(
        p.transmitter.supply,
        SupplyProfile::Linear { dropout_v, .. } if dropout_v == 0.0
    ));
    let unknown = text.replace("\"name\"", "\"colour\":1,\"name\"");
    assert!(matches!(
        EnergyProfile::from_json_str(&unknown),
        Err(BudgetError::ProfileJson(_))
    ));
    let negative = text.replace("\"load_ohm\":300", "\"load_ohm\":-300");
    assert!(matches!(
        EnergyProfile::from_json_str(&negative),
        Err(BudgetError::InvalidProfile { .. })
    ));
    // The example profile shipped with the project parses and validates.
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/captures/profiles/harrowgate-button.json"
    );
    let file = std::fs::File::open(path).expect("example profile present");
    let p = EnergyProfile::from_reader(file).expect("example profile valid");
    assert!(p.note.unwrap_or_default().contains("typical"));
}

fn timing_error(c: CodeTiming) -> String {
    match budget(&[c], &ALL, None) {
        Err(BudgetError::InvalidTiming { detail, .. }) => detail,
        other => panic!("expected InvalidTiming, got {other:?}"),
    }
}

#[test]
fn nonsense_timing_is_rejected() {
    assert!(timing_error(code("k", vec![], None)).contains("no presses"));
    let empty = PressTiming {
        frames: vec![],
        truncated: false,
    };
    assert!(timing_error(code("k", vec![empty], None)).contains("no frames"));
    let no_marks = PressTiming {
        frames: vec![FrameTiming { marks: vec![] }],
        truncated: false,
    };
    assert!(timing_error(code("k", vec![no_marks], None)).contains("no marks"));
    let one = |marks: Vec<(f64, f64)>| PressTiming {
        frames: vec![FrameTiming { marks }],
        truncated: false,
    };
    assert!(timing_error(code("k", vec![one(vec![(f64::NAN, 1.0)])], None)).contains("finite"));
    assert!(timing_error(code("k", vec![one(vec![(1.0, 1.0)])], None)).contains("not after"));
    let overlap = one(vec![(1.0, 1.2), (1.1, 1.3)]);
    assert!(timing_error(code("k", vec![overlap], None)).contains("time order"));
    // Presses out of order.
    let msg = timing_error(code(
        "k",
        vec![pwm_press(0, 1, 2.0), pwm_press(0, 1, 0.0)],
        None,
    ));
    assert!(msg.contains("press 2"), "{msg}");
    let mut c = code("k", vec![pwm_press(0, 1, 0.0)], Some(-1.0));
    assert!(timing_error(c.clone()).contains("carrier"));
    c.carrier_hz = None;
    c.capture_duration_s = f64::INFINITY;
    assert!(timing_error(c).contains("capture duration"));
}

#[test]
fn arbitrary_timing_never_panics() {
    // Seeded arbitrary inputs, including NaN, infinities and disorder: budget() returns, it
    // never panics, and what it accepts serializes.
    let specials = [f64::NAN, f64::INFINITY, -1.0, 0.0, 1e300, -0.0];
    let mut rng = Rng(12345);
    let p = profile(
        SupplyProfile::Switching {
            output_v: Some(1.8),
            divider: None,
            efficiency: 0.9,
        },
        cap(47.0, 5.0, 2.0),
    );
    let mut accepted = 0;
    for _ in 0..500 {
        let pick = |rng: &mut Rng| {
            if rng.next() < 0.05 {
                specials[(rng.next() * specials.len() as f64) as usize % specials.len()]
            } else {
                rng.next() * 2.0
            }
        };
        let mut presses = Vec::new();
        for _ in 0..(rng.next() * 3.0) as usize {
            let mut frames = Vec::new();
            for _ in 0..(rng.next() * 3.0) as usize {
                let mut marks = Vec::new();
                let mut t = pick(&mut rng);
                for _ in 0..(rng.next() * 5.0) as usize {
                    let w = if rng.next() < 0.9 {
                        0.001
                    } else {
                        pick(&mut rng)
                    };
                    marks.push((t, t + w));
                    t += w + if rng.next() < 0.9 {
                        0.002
                    } else {
                        -pick(&mut rng)
                    };
                }
                frames.push(FrameTiming { marks });
            }
            presses.push(PressTiming {
                frames,
                truncated: rng.next() < 0.2,
            });
        }
        let c = code("k", presses, Some(pick(&mut rng) * 433.92e6));
        if let Ok(r) = budget(&[c], &ALL, Some(&p)) {
            accepted += 1;
            let json = serde_json::to_string(&r).expect("serializes");
            let back: BudgetReport = serde_json::from_str(&json).expect("round trip");
            assert_eq!(back.codes.len(), 1);
        }
    }
    assert!(accepted > 10, "only {accepted} inputs accepted");
}

// -------------------------------------------------------------------------------------------
// Output
// -------------------------------------------------------------------------------------------

fn full_report() -> BudgetReport {
    let mut p = profile(
        SupplyProfile::Linear {
            output_v: Some(1.8),
            divider: None,
            dropout_v: 0.0,
        },
        cap(47.0, 5.0, 2.0),
    );
    p.transmitter.mark_current_ma = 3.0;
    p.transmitter.space_current_ma = 0.1;
    budget(
        &[
            code(
                "gate-1",
                vec![pwm_press(0xAAAAAA, 8, 0.2), pwm_press(0xAAAAAA, 4, 30.0)],
                Some(433.92e6),
            ),
            code("chime-2", vec![pwm_press(0x0F0F0F, 2, 5.0)], None),
        ],
        &ALL,
        Some(&p),
    )
    .expect("ok")
}

#[test]
fn csv_has_one_row_per_press() {
    let r = full_report();
    let mut buf = Vec::new();
    write_csv(&r, &mut buf).expect("writes");
    let mut rd = csv::Reader::from_reader(buf.as_slice());
    let headers = rd.headers().expect("header").clone();
    let col = |name: &str| headers.iter().position(|h| h == name).expect(name);
    let rows: Vec<csv::StringRecord> = rd.records().collect::<Result<_, _>>().expect("rows");
    assert_eq!(rows.len(), 3);
    assert_eq!(&rows[0][col("key_id")], "gate-1");
    assert_eq!(&rows[1][col("press")], "2");
    assert_eq!(&rows[2][col("carrier_hz")], "");
    // facts.md §2.3: 8 × 17.15 ms marks → 2623 presses/h.
    assert_eq!(&rows[0][col("presses_per_hour_marks_only")], "2623");
    // facts.md §1.2: 0xAAAAAA → −7.981 dB.
    let db: f64 = rows[0][col("correction_db")].parse().expect("number");
    assert_close!(db, -7.981, 0.0005);
    // Same store and currents as last_repeat_sent_by_hand, without start-up:
    // 141 µC − 2 × 53.13 − 2 × 1.085 = 32.57 µC before frame 3 (needs 53.13) → 2 frames.
    assert_eq!(&rows[0][col("last_complete_repeat")], "2");
}

#[test]
fn text_carries_caution_and_rules() {
    let t = render_text(&full_report());
    assert!(t.starts_with("CAUTION: Analyse only transmitters you own or may test."));
    for needle in [
        "gate-1",
        "chime-2",
        "us-15.35c",
        "us-15.231a1",
        "us-15.231b",
        "us-15.231e",
        "eu-433-10pct",
        "eu-434-10mw-25khz",
        "estimate, not a test report",
        "2623 presses/h",
        "frames sent completely",
    ] {
        assert!(t.contains(needle), "missing {needle:?} in\n{t}");
    }
}

#[test]
fn report_round_trips_through_json() {
    let r = full_report();
    let json = serde_json::to_string_pretty(&r).expect("serializes");
    let back: BudgetReport = serde_json::from_str(&json).expect("deserializes");
    // serde_json may round the last bit of a float; compare numbers to 1e-12 relative.
    let a = serde_json::to_value(&r).expect("value");
    let b = serde_json::to_value(&back).expect("value");
    assert!(same_json(&a, &b), "round trip differs");
    assert!(!same_json(&a, &serde_json::Value::Null));
}

fn same_json(a: &serde_json::Value, b: &serde_json::Value) -> bool {
    use serde_json::Value as V;
    match (a, b) {
        (V::Number(x), V::Number(y)) => {
            let (x, y) = (
                x.as_f64().unwrap_or(f64::NAN),
                y.as_f64().unwrap_or(f64::NAN),
            );
            (x - y).abs() <= 1e-12 * x.abs().max(y.abs()).max(1.0)
        }
        (V::Array(x), V::Array(y)) => {
            x.len() == y.len() && x.iter().zip(y).all(|(p, q)| same_json(p, q))
        }
        (V::Object(x), V::Object(y)) => {
            x.len() == y.len()
                && x.iter()
                    .all(|(k, v)| y.get(k).is_some_and(|w| same_json(v, w)))
        }
        _ => a == b,
    }
}
