//! Band rules: United States 47 CFR Part 15 and European ERC/REC 70-03 Annex 1.
//!
//! Sources and their confidence are listed in facts.md §1 and §2; the weak points (the exact
//! §15.35(c) wording, the §15.231(b)/(e) interpolation footnotes, current ERC/REC 70-03 row
//! labels) are repeated in the notes of the results that depend on them. Every result is an
//! estimate, not a test report.

use serde::{Deserialize, Serialize};

use super::airtime::{CodeAirtime, DutyConvention, PressAirtime, WINDOW_S};
use super::RULE_CAUTION;

/// What the figures say about a rule. Never a test verdict: see [`super::RULE_CAUTION`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Verdict {
    /// The timing figures are consistent with the rule.
    Consistent,
    /// The timing figures contradict the rule.
    Inconsistent,
    /// The figures cannot decide (unknown release, carrier unknown, truncated press, …).
    Undetermined,
    /// The rule does not apply (carrier outside its band).
    NotApplicable,
    /// The result is a figure (a limit or a correction), not a judgement.
    Figure,
}

impl Verdict {
    /// The name used in text and CSV output.
    pub fn name(self) -> &'static str {
        match self {
            Verdict::Consistent => "consistent",
            Verdict::Inconsistent => "inconsistent",
            Verdict::Undetermined => "undetermined",
            Verdict::NotApplicable => "not_applicable",
            Verdict::Figure => "figure",
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Formulas
// ---------------------------------------------------------------------------------------------

/// 47 CFR §15.35(c) duty-cycle correction: `20·log10(on-time in the worst 100 ms / 100 ms)`,
/// 0 dB when the on-time reaches 100 ms (facts.md §1.2). Returns `-inf` for no on-time.
pub fn duty_cycle_correction_db(worst_window_on_time_ms: f64) -> f64 {
    let window_ms = WINDOW_S * 1e3;
    if worst_window_on_time_ms >= window_ms {
        0.0
    } else {
        20.0 * (worst_window_on_time_ms / window_ms).log10()
    }
}

/// 47 CFR §15.231(b) average field-strength limit of the fundamental at 3 m, µV/m, for a
/// carrier in 260–470 MHz: linear from 3,750 µV/m at 260 MHz to 12,500 µV/m at 470 MHz
/// (facts.md §1.4). `None` outside that range.
pub fn fcc_15231b_limit_uv_m(carrier_hz: f64) -> Option<f64> {
    linear_limit(carrier_hz, 3_750.0, 12_500.0)
}

/// 47 CFR §15.231(e) average field-strength limit of the fundamental at 3 m, µV/m, for a
/// carrier in 260–470 MHz: linear from 1,500 to 5,000 µV/m (facts.md §1.6; the interpolation
/// is the line through the table's end points). `None` outside that range.
pub fn fcc_15231e_limit_uv_m(carrier_hz: f64) -> Option<f64> {
    linear_limit(carrier_hz, 1_500.0, 5_000.0)
}

fn linear_limit(carrier_hz: f64, at_260: f64, at_470: f64) -> Option<f64> {
    let mhz = carrier_hz / 1e6;
    if !(260.0..=470.0).contains(&mhz) {
        return None;
    }
    Some(at_260 + (mhz - 260.0) * (at_470 - at_260) / (470.0 - 260.0))
}

/// µV/m to dBµV/m: `20·log10(E)`.
pub fn uv_m_to_dbuv_m(uv_m: f64) -> f64 {
    20.0 * uv_m.log10()
}

/// Far-field EIRP for a field strength at a distance: `E_dBµV/m + 20·log10(d_m) − 104.77`
/// (facts.md §1.4, from E = √(30·EIRP)/d).
pub fn eirp_dbm_from_field(dbuv_m: f64, distance_m: f64) -> f64 {
    // 10·log10(30) + 90 (W→dBm, µV→V) − 120 … written out: EIRP_W = (E·d)²/30.
    let e_v_m = 10f64.powf(dbuv_m / 20.0) * 1e-6;
    let eirp_w = (e_v_m * distance_m).powi(2) / 30.0;
    10.0 * (eirp_w * 1e3).log10()
}

/// 47 CFR §15.231(e) minimum silent period after a transmission of `transmission_s`:
/// `max(30 × transmission, 10 s)`; `None` when the transmission exceeds the 1 s allowed
/// (facts.md §1.6).
pub fn silent_period_s(transmission_s: f64) -> Option<f64> {
    if !(transmission_s.is_finite() && (0.0..=1.0).contains(&transmission_s)) {
        return None;
    }
    Some((30.0 * transmission_s).max(10.0))
}

/// Presses that fit in a duty-cycle budget: `floor(duty × observation / press time)`
/// (facts.md §2.3: at 10 % over one hour, 360 s / press time). A relative 1e-9 slack absorbs
/// rounding at exact multiples. Returns 0 for a non-positive or non-finite press time.
pub fn presses_per_hour(press_time_s: f64, duty_fraction: f64, observation_s: f64) -> u64 {
    if !(press_time_s.is_finite() && press_time_s > 0.0) {
        return 0;
    }
    let n = (duty_fraction * observation_s / press_time_s) * (1.0 + 1e-9);
    if n.is_finite() && n >= 0.0 {
        n.floor() as u64
    } else {
        0
    }
}

// ---------------------------------------------------------------------------------------------
// United States
// ---------------------------------------------------------------------------------------------

/// The United States results of one code.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct UsReport {
    /// §15.35(b)/(c): averaging over the worst 100 ms, and the peak limit.
    pub duty_cycle_correction: Us1535c,
    /// §15.231(a)(1): a manually operated transmitter stops within 5 s of release.
    pub release: ReleaseRule,
    /// §15.231(b): field-strength limit at the carrier.
    pub field_strength: UsFieldStrength,
    /// §15.231(e): the alternative for periodic transmitters.
    pub periodic: PeriodicRule,
}

/// 47 CFR §15.35(b)/(c) result.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Us1535c {
    /// Our stable identifier of the result.
    pub id: String,
    /// The clause.
    pub clause: String,
    /// What the rule asks, paraphrased.
    pub rule: String,
    /// [`Verdict::Figure`]: a correction, not a judgement.
    pub verdict: Verdict,
    /// On-time inside the worst 100 ms window of any press.
    pub worst_window_on_time_ms: f64,
    /// `20·log10(on-time / 100 ms)`, 0 dB at ≥ 100 ms.
    pub correction_db: f64,
    /// The correction that still counts once the §15.35(b) peak limit bites: `max(correction, −20 dB)`.
    pub effective_correction_db: f64,
    /// How far the peak may exceed the average limit: `min(−correction, 20 dB)`.
    pub peak_above_average_limit_db: f64,
    /// The correction is below −20 dB, so its excess buys nothing.
    pub correction_capped: bool,
    /// What the figures mean.
    pub finding: String,
    /// Source caveats.
    pub notes: Vec<String>,
    /// Always [`RULE_CAUTION`].
    pub caution: String,
}

/// 47 CFR §15.231(a)(1) result.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ReleaseRule {
    /// Our stable identifier of the result.
    pub id: String,
    /// The clause.
    pub clause: String,
    /// What the rule asks, paraphrased.
    pub rule: String,
    /// Consistent when every press lasts at most 5 s; undetermined otherwise (the release
    /// instant is not in the capture) or when a press runs to the capture's end.
    pub verdict: Verdict,
    /// 5 s.
    pub limit_s: f64,
    /// Airtime of the longest press.
    pub longest_press_s: f64,
    /// Presses that run to the capture's end (release unknown).
    pub truncated_presses: usize,
    /// What the figures mean.
    pub finding: String,
    /// Always [`RULE_CAUTION`].
    pub caution: String,
}

/// 47 CFR §15.231(b) result.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct UsFieldStrength {
    /// Our stable identifier of the result.
    pub id: String,
    /// The clause.
    pub clause: String,
    /// What the rule asks, paraphrased.
    pub rule: String,
    /// Figure when the carrier is known and in 260–470 MHz; undetermined when unknown;
    /// not applicable outside.
    pub verdict: Verdict,
    /// The carrier used.
    pub carrier_hz: Option<f64>,
    /// Measurement distance of the limit (3 m).
    pub distance_m: f64,
    /// Average limit of the fundamental.
    pub average_limit_uv_m: Option<f64>,
    /// The same in dBµV/m.
    pub average_limit_dbuv_m: Option<f64>,
    /// Peak limit, 20 dB above the average limit (§15.35(b)).
    pub peak_limit_dbuv_m: Option<f64>,
    /// Highest peak reading the average limit allows with this code's correction:
    /// `average − max(correction, −20 dB)`.
    pub allowed_peak_reading_dbuv_m: Option<f64>,
    /// Far-field EIRP equivalent of the average limit.
    pub average_limit_eirp_dbm: Option<f64>,
    /// What the figures mean.
    pub finding: String,
    /// Source caveats.
    pub notes: Vec<String>,
    /// Always [`RULE_CAUTION`].
    pub caution: String,
}

/// 47 CFR §15.231(e) result.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PeriodicRule {
    /// Our stable identifier of the result.
    pub id: String,
    /// The clause.
    pub clause: String,
    /// What the rule asks, paraphrased.
    pub rule: String,
    /// Inconsistent when a press exceeds 1 s or two presses are closer than the silent period;
    /// undetermined when a press runs to the capture's end.
    pub verdict: Verdict,
    /// 1 s.
    pub max_transmission_s: f64,
    /// Longest press airtime, taken as the transmission.
    pub transmission_s: f64,
    /// Required silence after it: `max(30 × transmission, 10 s)`; `None` above 1 s.
    pub min_silent_s: Option<f64>,
    /// Shortest observed silence between presses of this code.
    pub observed_min_gap_s: Option<f64>,
    /// §15.231(e) average limit at the carrier, when known and in 260–470 MHz.
    pub average_limit_uv_m: Option<f64>,
    /// The same in dBµV/m.
    pub average_limit_dbuv_m: Option<f64>,
    /// What the figures mean.
    pub finding: String,
    /// Source caveats.
    pub notes: Vec<String>,
    /// Always [`RULE_CAUTION`].
    pub caution: String,
}

pub(crate) fn us_report(
    carrier_hz: Option<f64>,
    air: &CodeAirtime,
    presses: &[PressAirtime],
) -> UsReport {
    let correction = duty_cycle_correction(air);
    UsReport {
        release: release_rule(air),
        field_strength: field_strength(carrier_hz, correction.effective_correction_db),
        periodic: periodic_rule(carrier_hz, air, presses),
        duty_cycle_correction: correction,
    }
}

fn duty_cycle_correction(air: &CodeAirtime) -> Us1535c {
    let on_ms = air.worst_window_on_time_ms;
    let correction_db = duty_cycle_correction_db(on_ms);
    let effective = correction_db.max(-20.0);
    let capped = correction_db < -20.0;
    let mut finding = format!(
        "{on_ms:.3} ms on in the worst 100 ms window: average = peak {correction_db:+.2} dB"
    );
    if capped {
        finding.push_str(
            "; below -20 dB the 20 dB peak limit of 15.35(b) governs, so the excess buys nothing",
        );
    } else {
        finding.push_str(&format!(
            "; the peak may sit {:.2} dB above the average limit",
            -effective
        ));
    }
    let mut notes = vec![
        "47 CFR 15.35(c) text not retrieved; rule and 20·log10 form from secondary sources \
         (facts.md §1.2)"
            .to_string(),
    ];
    if air.press_airtime_ms <= WINDOW_S * 1e3 {
        notes.push(
            "the whole press lasts at most 100 ms: 15.35(c) also allows averaging over one \
             complete pulse train, which a test lab may choose instead"
                .to_string(),
        );
    }
    Us1535c {
        id: "us-15.35c".to_string(),
        clause: "47 CFR §15.35(b), §15.35(c)".to_string(),
        rule: "average limits of pulsed emissions apply to the average over the 0.1 s in which \
               the emission is greatest; the peak may not exceed the average limit by more \
               than 20 dB"
            .to_string(),
        verdict: Verdict::Figure,
        worst_window_on_time_ms: on_ms,
        correction_db,
        effective_correction_db: effective,
        peak_above_average_limit_db: -effective,
        correction_capped: capped,
        finding,
        notes,
        caution: RULE_CAUTION.to_string(),
    }
}

fn release_rule(air: &CodeAirtime) -> ReleaseRule {
    let longest_s = air.press_airtime_ms / 1e3;
    let (verdict, finding) = if air.truncated_presses > 0 {
        (
            Verdict::Undetermined,
            format!(
                "{} press(es) run to the end of the capture: the release and the true end of \
                 transmission are unknown",
                air.truncated_presses
            ),
        )
    } else if longest_s <= 5.0 {
        (
            Verdict::Consistent,
            format!(
                "the longest press lasts {longest_s:.3} s, so it ends within 5 s of any release"
            ),
        )
    } else {
        (
            Verdict::Undetermined,
            format!(
                "the longest press lasts {longest_s:.3} s: consistent only if the button was \
                 held until at least {:.3} s after the press began",
                longest_s - 5.0
            ),
        )
    };
    ReleaseRule {
        id: "us-15.231a1".to_string(),
        clause: "47 CFR §15.231(a)(1)".to_string(),
        rule: "a manually operated transmitter deactivates automatically within 5 s of being \
               released"
            .to_string(),
        verdict,
        limit_s: 5.0,
        longest_press_s: longest_s,
        truncated_presses: air.truncated_presses,
        finding,
        caution: RULE_CAUTION.to_string(),
    }
}

fn field_strength(carrier_hz: Option<f64>, effective_correction_db: f64) -> UsFieldStrength {
    let limit = carrier_hz.and_then(fcc_15231b_limit_uv_m);
    let avg_db = limit.map(uv_m_to_dbuv_m);
    let (verdict, finding) = match (carrier_hz, avg_db) {
        (None, _) => (
            Verdict::Undetermined,
            "carrier frequency unknown: no limit computed".to_string(),
        ),
        (Some(hz), None) => (
            Verdict::NotApplicable,
            format!(
                "carrier {:.4} MHz is outside 260-470 MHz, the only row tabulated here",
                hz / 1e6
            ),
        ),
        (Some(hz), Some(db)) => (
            Verdict::Figure,
            format!(
                "at {:.4} MHz: average {:.2} dBµV/m, peak {:.2} dBµV/m at 3 m; with this \
                 code's correction a peak reading up to {:.2} dBµV/m meets the average limit",
                hz / 1e6,
                db,
                db + 20.0,
                db - effective_correction_db
            ),
        ),
    };
    UsFieldStrength {
        id: "us-15.231b".to_string(),
        clause: "47 CFR §15.231(b)".to_string(),
        rule: "field strength of the fundamental at 3 m, average detector: 3,750 to 12,500 µV/m \
               (linear) over 260-470 MHz; peak limit 20 dB above"
            .to_string(),
        verdict,
        carrier_hz,
        distance_m: 3.0,
        average_limit_uv_m: limit,
        average_limit_dbuv_m: avg_db,
        peak_limit_dbuv_m: avg_db.map(|d| d + 20.0),
        allowed_peak_reading_dbuv_m: avg_db.map(|d| d - effective_correction_db),
        average_limit_eirp_dbm: avg_db.map(|d| eirp_dbm_from_field(d, 3.0)),
        finding,
        notes: vec![
            "table row confirmed in a secondary source; the interpolation is the line through \
             its end points (facts.md §1.4)"
                .to_string(),
            "spurious emissions, bandwidth (15.231(c)) and the measurement itself are not \
             covered"
                .to_string(),
        ],
        caution: RULE_CAUTION.to_string(),
    }
}

fn periodic_rule(
    carrier_hz: Option<f64>,
    air: &CodeAirtime,
    presses: &[PressAirtime],
) -> PeriodicRule {
    let t = air.press_airtime_ms / 1e3;
    let silent = silent_period_s(t);
    let observed = air.min_gap_s;
    let (verdict, finding) = match silent {
        None => (
            Verdict::Inconsistent,
            format!("a press lasts {t:.3} s, more than the 1 s a transmission may last"),
        ),
        Some(_) if air.truncated_presses > 0 => (
            Verdict::Undetermined,
            "a press runs to the end of the capture: its length is unknown".to_string(),
        ),
        Some(s) => {
            // The requirement is per transmission: compare each gap with the silence its
            // preceding press requires.
            let short = presses.windows(2).find(|w| {
                let need = silent_period_s(w[0].airtime_ms / 1e3).unwrap_or(f64::INFINITY);
                w[1].gap_before_s.is_some_and(|g| g < need)
            });
            match short {
                Some(w) => (
                    Verdict::Inconsistent,
                    format!(
                        "press {} follows press {} after {:.3} s of silence, less than the {:.3} s \
                         required",
                        w[1].press,
                        w[0].press,
                        w[1].gap_before_s.unwrap_or(0.0),
                        silent_period_s(w[0].airtime_ms / 1e3).unwrap_or(f64::NAN)
                    ),
                ),
                None => (
                    Verdict::Consistent,
                    format!(
                        "each press lasts at most {t:.3} s (≤ 1 s) and needs {s:.3} s of silence \
                         after it{}",
                        if observed.is_some() {
                            "; the presses observed respect it"
                        } else {
                            ""
                        }
                    ),
                ),
            }
        }
    };
    let limit = carrier_hz.and_then(fcc_15231e_limit_uv_m);
    PeriodicRule {
        id: "us-15.231e".to_string(),
        clause: "47 CFR §15.231(e)".to_string(),
        rule: "alternative to (a): each transmission at most 1 s, then silent for at least 30 \
               times its length and at least 10 s, at lower field strength (1,500 to 5,000 \
               µV/m over 260-470 MHz)"
            .to_string(),
        verdict,
        max_transmission_s: 1.0,
        transmission_s: t,
        min_silent_s: silent,
        observed_min_gap_s: observed,
        average_limit_uv_m: limit,
        average_limit_dbuv_m: limit.map(uv_m_to_dbuv_m),
        finding,
        notes: vec![
            "timing confirmed only in secondary sources; exact CFR wording and the limit \
             interpolation are from memory (facts.md §1.6)"
                .to_string(),
        ],
        caution: RULE_CAUTION.to_string(),
    }
}

// ---------------------------------------------------------------------------------------------
// Europe
// ---------------------------------------------------------------------------------------------

/// Presses per hour under one counting convention.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct PressCount {
    /// The counting convention.
    pub convention: DutyConvention,
    /// Counted time of the longest press.
    pub press_time_ms: f64,
    /// `floor(duty × 3600 s / press time)`.
    pub presses_per_hour: u64,
    /// Share of the hourly duty-cycle budget one press uses.
    pub budget_fraction_per_press: f64,
}

/// One ERC/REC 70-03 Annex 1 entry.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EuSubBand {
    /// Our stable identifier of the result.
    pub id: String,
    /// The Recommendation entry.
    pub clause: String,
    /// What the entry allows, paraphrased.
    pub rule: String,
    /// Figure when the carrier is in the band or unknown; not applicable outside; inconsistent
    /// when one press alone exceeds the hourly duty-cycle budget.
    pub verdict: Verdict,
    /// Lower band edge.
    pub low_hz: f64,
    /// Upper band edge.
    pub high_hz: f64,
    /// Maximum effective radiated power.
    pub max_erp_mw: f64,
    /// Duty-cycle limit, percent (`None` = no limit).
    pub duty_cycle_limit_pct: Option<f64>,
    /// Bandwidth limit (`None` = none in the entry).
    pub max_bandwidth_hz: Option<f64>,
    /// Whether the carrier lies in the band (`None` when the carrier is unknown).
    pub carrier_inside: Option<bool>,
    /// Presses per hour under both counting conventions (duty-cycled entries only).
    pub presses_per_hour: Vec<PressCount>,
    /// What the figures mean.
    pub finding: String,
    /// Always [`RULE_CAUTION`].
    pub caution: String,
}

/// The European results of one code.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EuReport {
    /// Duty-cycle observation period (one hour).
    pub observation_period_s: f64,
    /// The carrier used.
    pub carrier_hz: Option<f64>,
    /// Ids of the entries the carrier falls in (empty when unknown or none).
    pub carrier_in: Vec<String>,
    /// Every entry covering 433.050–434.790 MHz.
    pub sub_bands: Vec<EuSubBand>,
    /// Source caveats.
    pub notes: Vec<String>,
}

const HOUR_S: f64 = 3600.0;

struct BandDef {
    id: &'static str,
    clause: &'static str,
    rule: &'static str,
    low_hz: f64,
    high_hz: f64,
    erp_mw: f64,
    duty_pct: Option<f64>,
    bandwidth_hz: Option<f64>,
}

const EU_BANDS: [BandDef; 3] = [
    BandDef {
        id: "eu-433-10pct",
        clause: "ERC/REC 70-03 Annex 1, non-specific SRD, 433.050-434.790 MHz (entry f of the \
                 2009 edition)",
        rule: "10 mW e.r.p., duty cycle at most 10 % over one hour, no channel spacing; \
               audio-visual uses excluded",
        low_hz: 433.050e6,
        high_hz: 434.790e6,
        erp_mw: 10.0,
        duty_pct: Some(10.0),
        bandwidth_hz: None,
    },
    BandDef {
        id: "eu-433-1mw",
        clause: "ERC/REC 70-03 Annex 1, non-specific SRD, 433.050-434.790 MHz (entry f1 of the \
                 2009 edition)",
        rule: "1 mW e.r.p. (-13 dBm/10 kHz above 250 kHz modulation bandwidth), no duty-cycle \
               limit",
        low_hz: 433.050e6,
        high_hz: 434.790e6,
        erp_mw: 1.0,
        duty_pct: None,
        bandwidth_hz: None,
    },
    BandDef {
        id: "eu-434-10mw-25khz",
        clause: "ERC/REC 70-03 Annex 1, non-specific SRD, 434.040-434.790 MHz (entry f2 of the \
                 2009 edition)",
        rule: "10 mW e.r.p., no duty-cycle limit, bandwidth at most 25 kHz",
        low_hz: 434.040e6,
        high_hz: 434.790e6,
        erp_mw: 10.0,
        duty_pct: None,
        bandwidth_hz: Some(25e3),
    },
];

pub(crate) fn eu_report(carrier_hz: Option<f64>, air: &CodeAirtime) -> EuReport {
    let mut sub_bands = Vec::with_capacity(EU_BANDS.len());
    let mut carrier_in = Vec::new();
    for def in &EU_BANDS {
        let inside = carrier_hz.map(|hz| (def.low_hz..=def.high_hz).contains(&hz));
        if inside == Some(true) {
            carrier_in.push(def.id.to_string());
        }
        let counts: Vec<PressCount> = match def.duty_pct {
            Some(pct) => air
                .duty_times
                .iter()
                .map(|d| {
                    let budget_s = pct / 100.0 * HOUR_S;
                    PressCount {
                        convention: d.convention,
                        press_time_ms: d.press_time_ms,
                        presses_per_hour: presses_per_hour(
                            d.press_time_ms / 1e3,
                            pct / 100.0,
                            HOUR_S,
                        ),
                        budget_fraction_per_press: d.press_time_ms / 1e3 / budget_s,
                    }
                })
                .collect(),
            None => Vec::new(),
        };
        let where_ = match inside {
            Some(true) => "the carrier is in this band",
            Some(false) => "the carrier is outside this band",
            None => "carrier unknown: applies only if it lies in this band",
        };
        let (verdict, finding) = if inside == Some(false) {
            (Verdict::NotApplicable, where_.to_string())
        } else if counts.iter().any(|c| c.presses_per_hour == 0) {
            (
                Verdict::Inconsistent,
                format!("{where_}; one press alone exceeds the hourly duty-cycle budget"),
            )
        } else if counts.is_empty() {
            let bw = if def.bandwidth_hz.is_some() {
                "; occupied bandwidth is not measured here"
            } else {
                ""
            };
            (
                Verdict::Figure,
                format!("{where_}; no duty-cycle limit, radiated power not measured here{bw}"),
            )
        } else {
            let parts: Vec<String> = counts
                .iter()
                .map(|c| {
                    format!(
                        "{} presses/h counting {} ({:.3} ms per press)",
                        c.presses_per_hour,
                        c.convention.name(),
                        c.press_time_ms
                    )
                })
                .collect();
            (
                Verdict::Figure,
                format!("{where_}; at most {}", parts.join(", ")),
            )
        };
        sub_bands.push(EuSubBand {
            id: def.id.to_string(),
            clause: def.clause.to_string(),
            rule: def.rule.to_string(),
            verdict,
            low_hz: def.low_hz,
            high_hz: def.high_hz,
            max_erp_mw: def.erp_mw,
            duty_cycle_limit_pct: def.duty_pct,
            max_bandwidth_hz: def.bandwidth_hz,
            carrier_inside: inside,
            presses_per_hour: counts,
            finding,
            caution: RULE_CAUTION.to_string(),
        });
    }
    EuReport {
        observation_period_s: HOUR_S,
        carrier_hz,
        carrier_in,
        sub_bands,
        notes: vec![
            "duty cycle = total on-time / one continuous hour (ERC/REC 70-03, facts.md §2.2); \
             whether carrier-off chips inside a frame count is not settled, so both counting \
             conventions are shown"
                .to_string(),
            "entries from the 2009 edition and national copies; current row labels and notes, \
             and national deviations (Appendix 3), are not checked (facts.md §2.1)"
                .to_string(),
        ],
    }
}
