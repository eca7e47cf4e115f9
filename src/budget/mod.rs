//! Airtime, duty-cycle rules and energy budget of the codes a capture holds.
//!
//! The decoder hands over plain timing — the rising and falling edge of every mark of every
//! frame of every press — and [`budget`] turns it into a [`BudgetReport`]:
//!
//! - **airtime** ([`CodeAirtime`], [`PressAirtime`]): frame and press airtime (first rising edge
//!   to last falling edge), on-time (total mark time), frame period, repeats, mark fraction, the
//!   on-time in the worst 100 ms window of a press, and the press time under both duty-cycle
//!   counting conventions ([`DutyConvention`]);
//! - **band rules** ([`UsReport`], [`EuReport`]), chosen by [`Rules`]: 47 CFR §15.35(b)/(c),
//!   §15.231(a)(1), (b) and (e); ERC/REC 70-03 Annex 1 entries for 433.050–434.790 MHz;
//! - **energy** ([`CodeEnergy`]) when an [`EnergyProfile`] is given: energy per frame and per
//!   press, frames one press can power, margin, and a simulation of the store over each press.
//!
//! Every figure is an estimate that defers to local regulations, accredited test labs and
//! licensed practice; the report says so in [`BudgetReport::caution`] and in every rule result.
//! Analyse only transmitters you own or may test.
//!
//! ```
//! use ooksift::budget::{budget, CodeTiming, FrameTiming, PressTiming, Rules};
//!
//! // One press of two frames; each frame is three 1 ms marks 2 ms apart.
//! let frame = |t0: f64| FrameTiming {
//!     marks: (0..3).map(|i| (t0 + i as f64 * 0.003, t0 + i as f64 * 0.003 + 0.001)).collect(),
//! };
//! let code = CodeTiming {
//!     key_id: "k1".into(),
//!     line_code: "pwm".into(),
//!     carrier_hz: Some(433.92e6),
//!     presses: vec![PressTiming { frames: vec![frame(0.010), frame(0.030)], truncated: false }],
//!     capture_duration_s: 1.0,
//! };
//! let report = budget(&[code], &Rules { us: true, eu: true }, None).unwrap();
//! let airtime = &report.codes[0].airtime;
//! assert!((airtime.frame_airtime_ms - 7.0).abs() < 1e-9);
//! assert!((airtime.press_on_time_ms - 6.0).abs() < 1e-9);
//! assert_eq!(airtime.frame_period_ms.map(|p| p.round()), Some(20.0));
//! let text = ooksift::budget::render_text(&report);
//! assert!(text.contains("15.35(c)"));
//! ```

mod airtime;
mod energy;
mod input;
mod render;
mod rules;

pub use airtime::{worst_window_on_time_s, CodeAirtime, DutyConvention, DutyTime, PressAirtime};
pub use energy::{
    capacitor_energy_uj, capacitor_window_energy_uj, divider_output_v, linear_regulator_energy_uj,
    pulse_energy_uj, CodeEnergy, Divider, EnergyProfile, EnergySetup, HarvesterProfile,
    HarvesterSummary, PressEnergy, StoreRun, SupplyProfile, TransmitterProfile,
};
pub use input::from_decode_report;
pub use render::{render_text, write_csv};
pub use rules::{
    duty_cycle_correction_db, eirp_dbm_from_field, fcc_15231b_limit_uv_m, fcc_15231e_limit_uv_m,
    presses_per_hour, silent_period_s, uv_m_to_dbuv_m, EuReport, EuSubBand, PeriodicRule,
    PressCount, ReleaseRule, Us1535c, UsFieldStrength, UsReport, Verdict,
};

use serde::{Deserialize, Serialize};

/// The caution every report carries.
pub const CAUTION: &str = "Analyse only transmitters you own or may test. All figures are \
estimates that defer to local regulations, accredited test labs and licensed practice.";

/// The caution every rule result carries.
pub const RULE_CAUTION: &str = "estimate, not a test report";

/// Timing of one frame: the `(rise_s, fall_s)` of each of its marks, in order, preamble and sync
/// marks included. Times are seconds from capture start.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct FrameTiming {
    /// `(rise_s, fall_s)` of each mark, in time order, not overlapping.
    pub marks: Vec<(f64, f64)>,
}

/// Timing of one press (one burst): its frames in order.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct PressTiming {
    /// The repeats of the press, in time order.
    pub frames: Vec<FrameTiming>,
    /// The press runs to the capture's end: its true end and the release are unknown.
    pub truncated: bool,
}

/// Timing of every press carrying one code.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct CodeTiming {
    /// Stable short identifier of the code (see the decode contract).
    pub key_id: String,
    /// Line code name, lower case (`pwm`, `ppm`, …).
    pub line_code: String,
    /// Absolute RF carrier frequency, when known.
    pub carrier_hz: Option<f64>,
    /// The presses carrying this code, in time order.
    pub presses: Vec<PressTiming>,
    /// Length of the capture the timing comes from.
    pub capture_duration_s: f64,
}

/// Which band rules to evaluate.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub struct Rules {
    /// United States, 47 CFR Part 15 (§15.35, §15.231).
    pub us: bool,
    /// Europe, ERC/REC 70-03 Annex 1 (433.050–434.790 MHz).
    pub eu: bool,
}

/// The budget of every code, with the rules and energy set-up used.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BudgetReport {
    /// Always [`CAUTION`].
    pub caution: String,
    /// The rule sets evaluated.
    pub rules: Rules,
    /// The energy set-up, when a profile was given.
    pub energy: Option<EnergySetup>,
    /// One entry per code, in input order.
    pub codes: Vec<CodeBudget>,
}

/// Budget of one code.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CodeBudget {
    /// From the input.
    pub key_id: String,
    /// From the input.
    pub line_code: String,
    /// From the input.
    pub carrier_hz: Option<f64>,
    /// From the input.
    pub capture_duration_s: f64,
    /// Code-level airtime figures.
    pub airtime: CodeAirtime,
    /// Per-press airtime figures, in time order.
    pub presses: Vec<PressAirtime>,
    /// United States rules, when asked for.
    pub us: Option<UsReport>,
    /// European rules, when asked for.
    pub eu: Option<EuReport>,
    /// Energy figures, when a profile was given.
    pub energy: Option<CodeEnergy>,
}

/// Errors of the budget layer.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum BudgetError {
    /// The timing of a code is unusable (empty, NaN, marks out of order, …).
    #[error("budget: code {key_id:?}: {detail}")]
    InvalidTiming {
        /// The code concerned.
        key_id: String,
        /// What is wrong.
        detail: String,
    },
    /// A value of the energy profile is unusable.
    #[error("budget: energy profile: {field}: {detail}")]
    InvalidProfile {
        /// The profile field concerned, as a JSON path.
        field: String,
        /// What is wrong.
        detail: String,
    },
    /// The energy profile is not valid JSON for the profile schema.
    #[error("budget: energy profile: {0}")]
    ProfileJson(#[from] serde_json::Error),
    /// Writing the CSV failed.
    #[error("budget: csv: {0}")]
    Csv(#[from] csv::Error),
    /// Writing failed.
    #[error("budget: write: {0}")]
    Io(#[from] std::io::Error),
}

/// Budget every code: airtime, the chosen band rules and, with a profile, energy.
///
/// Fails with [`BudgetError::InvalidTiming`] on unusable timing (no presses, a frame without
/// marks, NaN or infinite times, a mark that does not rise before it falls, marks or frames out
/// of order or overlapping) and with [`BudgetError::InvalidProfile`] on an unusable profile.
pub fn budget(
    codes: &[CodeTiming],
    rules: &Rules,
    energy: Option<&EnergyProfile>,
) -> Result<BudgetReport, BudgetError> {
    let setup = match energy {
        Some(profile) => Some(energy::Resolved::new(profile)?),
        None => None,
    };
    let mut out = Vec::with_capacity(codes.len());
    for code in codes {
        airtime::validate(code)?;
        let (code_air, presses) = airtime::analyse(code)?;
        let us = rules
            .us
            .then(|| rules::us_report(code.carrier_hz, &code_air, &presses));
        let eu = rules
            .eu
            .then(|| rules::eu_report(code.carrier_hz, &code_air));
        let energy = setup.as_ref().map(|s| s.code_energy(code, &code_air));
        out.push(CodeBudget {
            key_id: code.key_id.clone(),
            line_code: code.line_code.clone(),
            carrier_hz: code.carrier_hz,
            capture_duration_s: code.capture_duration_s,
            airtime: code_air,
            presses,
            us,
            eu,
            energy,
        });
    }
    Ok(BudgetReport {
        caution: CAUTION.to_string(),
        rules: *rules,
        energy: setup.map(|s| s.summary()),
        codes: out,
    })
}

#[cfg(test)]
mod tests;
