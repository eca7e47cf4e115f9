//! Energy of frames and presses against what one press harvests.
//!
//! A profile ([`EnergyProfile`], JSON per `schemas/budget-profile.schema.json`) describes the
//! transmitter — how it is supplied, its current with the carrier on (mark) and off (space),
//! its oscillator start-up — and the harvester: a storage capacitor between a start and a
//! cut-off voltage, or a measured pulse.
//!
//! All energies in the report are *load-side*: energy delivered to the transmitter at its
//! supply voltage. The harvester's usable energy is converted to the same side
//! (facts.md §7):
//!
//! | supply        | capacitor C, V1 → V2                  | pulse V, t, R            |
//! |---------------|---------------------------------------|--------------------------|
//! | `switching` η | η·½C(V1² − V2²)                        | η·V²t/R                  |
//! | `linear`      | V_out·C·(V1 − V2'), V2' = max(V2, V_out + dropout) | V²t/R · V_out/V |
//! | `unregulated` | ½C(V1² − V2²), load at (V1 + V2)/2     | V²t/R, load at V         |
//! | `fixed`       | ½C(V1² − V2²) (lossless converter)     | V²t/R (lossless)         |
//!
//! For `linear` and `unregulated` stores the accounting is charge-based (input current =
//! output current), which the mean voltage (V1 + V2)/2 makes exact for constant currents.

use serde::{Deserialize, Serialize};

use super::airtime::CodeAirtime;
use super::{BudgetError, CodeTiming};

// ---------------------------------------------------------------------------------------------
// Formulas (facts.md §7)
// ---------------------------------------------------------------------------------------------

/// Energy stored in a capacitor: `½·C·V²`, with C in µF, result in µJ.
pub fn capacitor_energy_uj(capacitance_uf: f64, voltage_v: f64) -> f64 {
    0.5 * capacitance_uf * voltage_v * voltage_v
}

/// Energy a capacitor gives up between two voltages: `½·C·(V1² − V2²)`, C in µF, result in µJ.
pub fn capacitor_window_energy_uj(capacitance_uf: f64, start_v: f64, cutoff_v: f64) -> f64 {
    0.5 * capacitance_uf * (start_v * start_v - cutoff_v * cutoff_v)
}

/// Load energy a linear regulator delivers while its input capacitor falls from V1 to V2
/// (input current ≈ output current): `V_out·C·(V1 − V2)`, C in µF, result in µJ.
pub fn linear_regulator_energy_uj(
    capacitance_uf: f64,
    start_v: f64,
    cutoff_v: f64,
    output_v: f64,
) -> f64 {
    output_v * capacitance_uf * (start_v - cutoff_v)
}

/// Output of an adjustable regulator set by a divider (R1 from the output to the feedback pin,
/// R2 from the feedback pin to ground): `V_ref·(1 + R1/R2)`.
pub fn divider_output_v(vref_v: f64, r1_ohm: f64, r2_ohm: f64) -> f64 {
    vref_v * (1.0 + r1_ohm / r2_ohm)
}

/// Energy of a rectangular voltage pulse into a resistor: `V²·t/R`, t in ms, result in µJ.
pub fn pulse_energy_uj(voltage_v: f64, duration_ms: f64, load_ohm: f64) -> f64 {
    voltage_v * voltage_v * duration_ms * 1e3 / load_ohm
}

// ---------------------------------------------------------------------------------------------
// Profile
// ---------------------------------------------------------------------------------------------

/// A transmitter and (optionally) the harvester that powers one press.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EnergyProfile {
    /// Name shown in reports.
    pub name: String,
    /// Free text: where the figures come from (say "typical" for datasheet-typical values).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
    /// The transmitter.
    pub transmitter: TransmitterProfile,
    /// What one press harvests; without it only energy per frame and press is reported.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub harvester: Option<HarvesterProfile>,
}

/// Supply and currents of the transmitter.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TransmitterProfile {
    /// How the transmitter is supplied.
    pub supply: SupplyProfile,
    /// Current with the carrier on.
    pub mark_current_ma: f64,
    /// Current with the carrier off between marks and between frames of a press.
    pub space_current_ma: f64,
    /// Oscillator start-up time before the first mark of a press.
    #[serde(default)]
    pub startup_ms: f64,
    /// Current during start-up.
    #[serde(default)]
    pub startup_current_ma: f64,
}

/// How the transmitter is supplied. Regulators take either `output_v` or a `divider`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum SupplyProfile {
    /// A fixed voltage (battery, bench supply, or an ideal lossless converter).
    Fixed {
        /// Supply voltage.
        voltage_v: f64,
    },
    /// Straight from the harvester: the capacitor's falling voltage or the pulse's voltage.
    Unregulated,
    /// A linear regulator (input current ≈ output current).
    Linear {
        /// Output voltage, when given directly.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        output_v: Option<f64>,
        /// Divider setting the output, instead of `output_v`.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        divider: Option<Divider>,
        /// Minimum input-output difference.
        #[serde(default)]
        dropout_v: f64,
    },
    /// A switching converter with a constant efficiency.
    Switching {
        /// Output voltage, when given directly.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        output_v: Option<f64>,
        /// Divider setting the output, instead of `output_v`.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        divider: Option<Divider>,
        /// Output energy / input energy, in (0, 1].
        efficiency: f64,
    },
}

/// Output divider of an adjustable regulator: `V_out = vref_v·(1 + r1_ohm/r2_ohm)`.
/// Its current `vref_v / r2_ohm` flows whenever the regulator runs and is counted as load.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Divider {
    /// Feedback reference voltage.
    pub vref_v: f64,
    /// Resistor from the output to the feedback pin.
    pub r1_ohm: f64,
    /// Resistor from the feedback pin to ground.
    pub r2_ohm: f64,
}

/// What one press harvests.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum HarvesterProfile {
    /// A storage capacitor charged to `start_v` by the press; the transmitter stops at `cutoff_v`.
    Capacitor {
        /// Capacitance.
        capacitance_uf: f64,
        /// Voltage when the press has charged it (V1).
        start_v: f64,
        /// Voltage below which the transmitter stops (V2).
        cutoff_v: f64,
    },
    /// A measured pulse: `voltage_v` across `load_ohm` for `duration_ms` (E = V²t/R), treated
    /// as an energy pool for the press (harvest timing not modelled).
    Pulse {
        /// Pulse voltage across the load.
        voltage_v: f64,
        /// Pulse duration.
        duration_ms: f64,
        /// Load resistance it was measured into.
        load_ohm: f64,
    },
}

impl EnergyProfile {
    /// Parse a profile from JSON and check it.
    pub fn from_json_str(text: &str) -> Result<Self, BudgetError> {
        let profile: EnergyProfile = serde_json::from_str(text)?;
        profile.validate()?;
        Ok(profile)
    }

    /// Parse a profile from a JSON reader and check it.
    pub fn from_reader<R: std::io::Read>(reader: R) -> Result<Self, BudgetError> {
        let profile: EnergyProfile = serde_json::from_reader(reader)?;
        profile.validate()?;
        Ok(profile)
    }

    /// Check every value; the same checks [`super::budget`] runs.
    pub fn validate(&self) -> Result<(), BudgetError> {
        Resolved::new(self).map(|_| ())
    }
}

// ---------------------------------------------------------------------------------------------
// Report types
// ---------------------------------------------------------------------------------------------

/// The energy set-up as resolved from the profile (once per report).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EnergySetup {
    /// Profile name.
    pub profile: String,
    /// Profile note.
    pub note: Option<String>,
    /// `fixed`, `unregulated`, `linear` or `switching`.
    pub supply: String,
    /// Voltage at the transmitter used for load energies.
    pub load_v: f64,
    /// Regulator output (regulators only).
    pub regulator_output_v: Option<f64>,
    /// Divider current, counted as load while the transmitter runs.
    pub divider_current_ua: Option<f64>,
    /// Converter efficiency (switching only).
    pub efficiency: Option<f64>,
    /// From the profile.
    pub mark_current_ma: f64,
    /// From the profile.
    pub space_current_ma: f64,
    /// From the profile.
    pub startup_ms: f64,
    /// From the profile.
    pub startup_current_ma: f64,
    /// The harvester, when given.
    pub harvester: Option<HarvesterSummary>,
    /// Modelling assumptions.
    pub notes: Vec<String>,
}

/// The harvester as resolved.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HarvesterSummary {
    /// `capacitor` or `pulse`.
    pub kind: String,
    /// Capacitor: ½CV1²; pulse: V²t/R.
    pub stored_energy_uj: f64,
    /// Capacitor: ½C(V1² − V2'²) between start and effective cut-off.
    pub window_energy_uj: Option<f64>,
    /// Energy the transmitter can use, load side.
    pub usable_energy_uj: f64,
    /// Capacitor start voltage.
    pub start_v: Option<f64>,
    /// Effective cut-off (raised to V_out + dropout behind a linear regulator).
    pub cutoff_v: Option<f64>,
    /// The formula used for `usable_energy_uj`.
    pub method: String,
}

/// Energy figures of one code.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CodeEnergy {
    /// Oscillator start-up, once per press.
    pub startup_energy_uj: f64,
    /// Charge of the typical (median) frame, first to last mark edge.
    pub frame_charge_uc: f64,
    /// Energy of the typical frame, first to last mark edge.
    pub frame_energy_uj: f64,
    /// Energy of one repeat over a frame period (frame plus the gap to the next), when the
    /// code repeats.
    pub repeat_energy_uj: Option<f64>,
    /// Energy of the costliest press (start-up included once).
    pub press_energy_uj: f64,
    /// Usable harvester energy, load side.
    pub usable_energy_uj: Option<f64>,
    /// Frames one press could power: start-up, one frame, then whole repeats.
    pub frames_powered: Option<u64>,
    /// Usable energy minus the costliest press (negative = short).
    pub margin_uj: Option<f64>,
    /// `margin_uj / usable_energy_uj`.
    pub margin_fraction: Option<f64>,
    /// Per press, in time order.
    pub presses: Vec<PressEnergy>,
}

/// Energy of one press.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PressEnergy {
    /// 1-based number of the press within its code.
    pub press: usize,
    /// Charge drawn by the transmitter, start-up included.
    pub charge_uc: f64,
    /// Load energy, start-up included.
    pub energy_uj: f64,
    /// Usable energy minus this press.
    pub margin_uj: Option<f64>,
    /// The store simulated over this press.
    pub store: Option<StoreRun>,
}

/// The store simulated over a press's timeline.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StoreRun {
    /// Frames in the press.
    pub frames_total: usize,
    /// Frames sent completely before the store fell below cut-off.
    pub frames_sent: usize,
    /// 1-based repeat number of the last frame sent completely (`None` if none).
    pub last_complete_repeat: Option<usize>,
    /// The whole press was powered.
    pub completes: bool,
    /// When the store fell below cut-off, seconds from capture start.
    pub cutoff_at_s: Option<f64>,
    /// Usable energy left at the end of the press (0 after a cut-off).
    pub energy_left_uj: f64,
    /// Capacitor voltage at the end of the press or at cut-off (capacitor stores only).
    pub store_end_v: Option<f64>,
}

// ---------------------------------------------------------------------------------------------
// Resolution and computation
// ---------------------------------------------------------------------------------------------

/// How the capacitor voltage follows the remaining usable energy.
#[derive(Debug, Clone, Copy)]
enum VoltageModel {
    None,
    /// Energy-based: V = √(V2² + 2·(U/η)/C).
    Energy {
        c_uf: f64,
        v2: f64,
        eff: f64,
    },
    /// Charge-based: V = V2 + (U/load_v)/C.
    Charge {
        c_uf: f64,
        v2: f64,
    },
}

#[derive(Debug, Clone)]
struct Store {
    summary: HarvesterSummary,
    voltage: VoltageModel,
}

/// A validated profile with derived values.
#[derive(Debug, Clone)]
pub(crate) struct Resolved {
    name: String,
    note: Option<String>,
    supply: &'static str,
    load_v: f64,
    regulator_v: Option<f64>,
    divider_ma: f64,
    has_divider: bool,
    efficiency: Option<f64>,
    mark_ma: f64,
    space_ma: f64,
    startup_ms: f64,
    startup_ma: f64,
    store: Option<Store>,
    notes: Vec<String>,
}

fn invalid(field: &str, detail: impl Into<String>) -> BudgetError {
    BudgetError::InvalidProfile {
        field: field.to_string(),
        detail: detail.into(),
    }
}

fn positive(field: &str, v: f64) -> Result<f64, BudgetError> {
    if v.is_finite() && v > 0.0 {
        Ok(v)
    } else {
        Err(invalid(
            field,
            format!("{v} must be a positive finite number"),
        ))
    }
}

fn non_negative(field: &str, v: f64) -> Result<f64, BudgetError> {
    if v.is_finite() && v >= 0.0 {
        Ok(v)
    } else {
        Err(invalid(
            field,
            format!("{v} must be a finite number, zero or more"),
        ))
    }
}

fn regulator_output(
    prefix: &str,
    output_v: Option<f64>,
    divider: Option<Divider>,
) -> Result<(f64, Option<f64>), BudgetError> {
    match (output_v, divider) {
        (Some(v), None) => Ok((positive(&format!("{prefix}.output_v"), v)?, None)),
        (None, Some(d)) => {
            let vref = positive(&format!("{prefix}.divider.vref_v"), d.vref_v)?;
            let r1 = non_negative(&format!("{prefix}.divider.r1_ohm"), d.r1_ohm)?;
            let r2 = positive(&format!("{prefix}.divider.r2_ohm"), d.r2_ohm)?;
            Ok((divider_output_v(vref, r1, r2), Some(vref / r2 * 1e3)))
        }
        (Some(_), Some(_)) => Err(invalid(prefix, "give either output_v or divider, not both")),
        (None, None) => Err(invalid(prefix, "give output_v or divider")),
    }
}

impl Resolved {
    pub(crate) fn new(p: &EnergyProfile) -> Result<Self, BudgetError> {
        let t = &p.transmitter;
        let mark_ma = positive("transmitter.mark_current_ma", t.mark_current_ma)?;
        let space_ma = non_negative("transmitter.space_current_ma", t.space_current_ma)?;
        let startup_ms = non_negative("transmitter.startup_ms", t.startup_ms)?;
        let startup_ma = non_negative("transmitter.startup_current_ma", t.startup_current_ma)?;
        let mut notes = Vec::new();

        // The harvester's raw figures first: the supply's load voltage may depend on them.
        enum Raw {
            Cap { c: f64, v1: f64, v2: f64 },
            Pulse { v: f64, e_uj: f64 },
        }
        let raw = match &p.harvester {
            None => None,
            Some(HarvesterProfile::Capacitor {
                capacitance_uf,
                start_v,
                cutoff_v,
            }) => {
                let c = positive("harvester.capacitance_uf", *capacitance_uf)?;
                let v1 = positive("harvester.start_v", *start_v)?;
                let v2 = non_negative("harvester.cutoff_v", *cutoff_v)?;
                if v2 >= v1 {
                    return Err(invalid(
                        "harvester.cutoff_v",
                        format!("cut-off {v2} V must be below the start voltage {v1} V"),
                    ));
                }
                Some(Raw::Cap { c, v1, v2 })
            }
            Some(HarvesterProfile::Pulse {
                voltage_v,
                duration_ms,
                load_ohm,
            }) => {
                let v = positive("harvester.voltage_v", *voltage_v)?;
                let d = positive("harvester.duration_ms", *duration_ms)?;
                let r = positive("harvester.load_ohm", *load_ohm)?;
                Some(Raw::Pulse {
                    v,
                    e_uj: pulse_energy_uj(v, d, r),
                })
            }
        };

        let (supply, load_v, regulator_v, divider_ma, has_divider, efficiency, dropout) =
            match &t.supply {
                SupplyProfile::Fixed { voltage_v } => {
                    let v = positive("transmitter.supply.voltage_v", *voltage_v)?;
                    if raw.is_some() {
                        notes.push(
                            "fixed supply fed by a harvester: the conversion is taken as \
                             lossless (use `switching` with an efficiency for a real converter)"
                                .to_string(),
                        );
                    }
                    ("fixed", v, None, 0.0, false, None, 0.0)
                }
                SupplyProfile::Unregulated => {
                    let v =
                        match &raw {
                            None => return Err(invalid(
                                "transmitter.supply",
                                "an unregulated supply follows the harvester's voltage: give a \
                                 harvester, or use a fixed supply",
                            )),
                            Some(Raw::Cap { v1, v2, .. }) => {
                                notes.push(
                                "unregulated from the capacitor: constant currents, load energy \
                                 taken at the mean voltage (V1 + V2)/2, which makes the charge \
                                 accounting exact"
                                    .to_string(),
                            );
                                0.5 * (v1 + v2)
                            }
                            Some(Raw::Pulse { v, .. }) => *v,
                        };
                    ("unregulated", v, None, 0.0, false, None, 0.0)
                }
                SupplyProfile::Linear {
                    output_v,
                    divider,
                    dropout_v,
                } => {
                    let (vout, div) = regulator_output("transmitter.supply", *output_v, *divider)?;
                    let dropout = non_negative("transmitter.supply.dropout_v", *dropout_v)?;
                    (
                        "linear",
                        vout,
                        Some(vout),
                        div.unwrap_or(0.0),
                        div.is_some(),
                        None,
                        dropout,
                    )
                }
                SupplyProfile::Switching {
                    output_v,
                    divider,
                    efficiency,
                } => {
                    let (vout, div) = regulator_output("transmitter.supply", *output_v, *divider)?;
                    let eff = positive("transmitter.supply.efficiency", *efficiency)?;
                    if eff > 1.0 {
                        return Err(invalid(
                            "transmitter.supply.efficiency",
                            format!("{eff} must be at most 1"),
                        ));
                    }
                    (
                        "switching",
                        vout,
                        Some(vout),
                        div.unwrap_or(0.0),
                        div.is_some(),
                        Some(eff),
                        0.0,
                    )
                }
            };
        if has_divider {
            notes.push("divider current counted as load while the transmitter runs".to_string());
        }

        let store = match raw {
            None => None,
            Some(Raw::Cap { c, v1, v2 }) => {
                let stored = capacitor_energy_uj(c, v1);
                let (usable, cutoff, voltage, method) = match supply {
                    "linear" => {
                        let floor = load_v + dropout;
                        let v2e = v2.max(floor);
                        if v1 <= v2e {
                            return Err(invalid(
                                "harvester.start_v",
                                format!(
                                    "start {v1} V is not above the linear regulator's output \
                                     plus dropout ({floor} V): nothing is usable"
                                ),
                            ));
                        }
                        if v2e > v2 {
                            notes.push(format!(
                                "cut-off raised from {v2} V to {v2e} V (regulator output plus \
                                 dropout)"
                            ));
                        }
                        (
                            linear_regulator_energy_uj(c, v1, v2e, load_v),
                            v2e,
                            VoltageModel::Charge { c_uf: c, v2: v2e },
                            "V_out·C·(V1 − V2), linear regulator",
                        )
                    }
                    "unregulated" => (
                        capacitor_window_energy_uj(c, v1, v2),
                        v2,
                        VoltageModel::Charge { c_uf: c, v2 },
                        "½·C·(V1² − V2²), straight from the capacitor",
                    ),
                    _ => {
                        let eff = efficiency.unwrap_or(1.0);
                        (
                            eff * capacitor_window_energy_uj(c, v1, v2),
                            v2,
                            VoltageModel::Energy { c_uf: c, v2, eff },
                            if supply == "switching" {
                                "η·½·C·(V1² − V2²), switching converter"
                            } else {
                                "½·C·(V1² − V2²), lossless"
                            },
                        )
                    }
                };
                Some(Store {
                    summary: HarvesterSummary {
                        kind: "capacitor".to_string(),
                        stored_energy_uj: stored,
                        window_energy_uj: Some(capacitor_window_energy_uj(c, v1, cutoff)),
                        usable_energy_uj: usable,
                        start_v: Some(v1),
                        cutoff_v: Some(cutoff),
                        method: method.to_string(),
                    },
                    voltage,
                })
            }
            Some(Raw::Pulse { v, e_uj }) => {
                let (usable, method) = match supply {
                    "linear" => {
                        if v <= load_v + dropout {
                            return Err(invalid(
                                "harvester.voltage_v",
                                format!(
                                    "pulse {v} V is not above the linear regulator's output \
                                     plus dropout ({} V)",
                                    load_v + dropout
                                ),
                            ));
                        }
                        (e_uj * load_v / v, "V²·t/R · V_out/V, linear regulator")
                    }
                    "switching" => (
                        e_uj * efficiency.unwrap_or(1.0),
                        "η·V²·t/R, switching converter",
                    ),
                    _ => (e_uj, "V²·t/R"),
                };
                notes.push(
                    "pulse harvester: its energy is treated as a pool for the press; when it \
                     arrives is not modelled"
                        .to_string(),
                );
                Some(Store {
                    summary: HarvesterSummary {
                        kind: "pulse".to_string(),
                        stored_energy_uj: e_uj,
                        window_energy_uj: None,
                        usable_energy_uj: usable,
                        start_v: None,
                        cutoff_v: None,
                        method: method.to_string(),
                    },
                    voltage: VoltageModel::None,
                })
            }
        };

        Ok(Self {
            name: p.name.clone(),
            note: p.note.clone(),
            supply,
            load_v,
            regulator_v,
            divider_ma,
            has_divider,
            efficiency,
            mark_ma,
            space_ma,
            startup_ms,
            startup_ma,
            store,
            notes,
        })
    }

    pub(crate) fn summary(&self) -> EnergySetup {
        EnergySetup {
            profile: self.name.clone(),
            note: self.note.clone(),
            supply: self.supply.to_string(),
            load_v: self.load_v,
            regulator_output_v: self.regulator_v,
            divider_current_ua: self.has_divider.then_some(self.divider_ma * 1e3),
            efficiency: self.efficiency,
            mark_current_ma: self.mark_ma,
            space_current_ma: self.space_ma,
            startup_ms: self.startup_ms,
            startup_current_ma: self.startup_ma,
            harvester: self.store.as_ref().map(|s| s.summary.clone()),
            notes: self.notes.clone(),
        }
    }

    /// Charge in µC of `span_ms` of transmitter time of which `on_ms` is mark.
    fn charge_uc(&self, on_ms: f64, span_ms: f64) -> f64 {
        self.mark_ma * on_ms + self.space_ma * (span_ms - on_ms) + self.divider_ma * span_ms
    }

    fn startup_charge_uc(&self) -> f64 {
        (self.startup_ma + self.divider_ma) * self.startup_ms
    }

    fn voltage_at(&self, left_uj: f64) -> Option<f64> {
        match self.store.as_ref()?.voltage {
            VoltageModel::None => None,
            VoltageModel::Energy { c_uf, v2, eff } => {
                Some((v2 * v2 + 2.0 * (left_uj / eff) / c_uf).sqrt())
            }
            VoltageModel::Charge { c_uf, v2 } => Some(v2 + left_uj / self.load_v / c_uf),
        }
    }

    /// Walk the press: start-up, then marks and the spaces between them, drawing load energy
    /// until the usable energy runs out.
    fn simulate(&self, usable_uj: f64, press: &super::PressTiming) -> StoreRun {
        let frame_ends: Vec<f64> = press
            .frames
            .iter()
            .map(|f| f.marks.last().map_or(0.0, |m| m.1))
            .collect();
        let first = press
            .frames
            .first()
            .and_then(|f| f.marks.first())
            .map_or(0.0, |m| m.0);
        // (start_s, end_s, current_ma) segments in time order.
        let mut segments = Vec::new();
        if self.startup_ms > 0.0 {
            segments.push((
                first - self.startup_ms / 1e3,
                first,
                self.startup_ma + self.divider_ma,
            ));
        }
        let mut prev_fall: Option<f64> = None;
        for &(rise, fall) in press.frames.iter().flat_map(|f| f.marks.iter()) {
            if let Some(pf) = prev_fall {
                segments.push((pf, rise, self.space_ma + self.divider_ma));
            }
            segments.push((rise, fall, self.mark_ma + self.divider_ma));
            prev_fall = Some(fall);
        }
        let mut left = usable_uj;
        let mut cutoff_at = None;
        for (t0, t1, ma) in segments {
            let power_mw = self.load_v * ma; // µJ per ms
            let cost = power_mw * (t1 - t0) * 1e3;
            if cost > left {
                cutoff_at = Some(t0 + left / power_mw / 1e3);
                left = 0.0;
                break;
            }
            left -= cost;
        }
        let frames_sent = match cutoff_at {
            None => frame_ends.len(),
            Some(tc) => frame_ends.iter().take_while(|&&e| e <= tc).count(),
        };
        StoreRun {
            frames_total: frame_ends.len(),
            frames_sent,
            last_complete_repeat: (frames_sent > 0).then_some(frames_sent),
            completes: cutoff_at.is_none(),
            cutoff_at_s: cutoff_at,
            energy_left_uj: left,
            store_end_v: self.voltage_at(left),
        }
    }

    pub(crate) fn code_energy(&self, code: &CodeTiming, air: &CodeAirtime) -> CodeEnergy {
        let startup_uc = self.startup_charge_uc();
        let startup_uj = self.load_v * startup_uc;
        let frame_uc = self.charge_uc(air.frame_on_time_ms, air.frame_airtime_ms);
        let frame_uj = self.load_v * frame_uc;
        let repeat_uj = air
            .frame_period_ms
            .map(|p| self.load_v * self.charge_uc(air.frame_on_time_ms, p));
        let usable = self.store.as_ref().map(|s| s.summary.usable_energy_uj);

        let mut presses = Vec::with_capacity(code.presses.len());
        for (i, press) in code.presses.iter().enumerate() {
            let marks = press.frames.iter().flat_map(|f| f.marks.iter());
            let on_ms: f64 = marks.clone().map(|&(r, f)| (f - r) * 1e3).sum();
            let first = marks.clone().next().map_or(0.0, |m| m.0);
            let last = marks.last().map_or(0.0, |m| m.1);
            let charge = startup_uc + self.charge_uc(on_ms, (last - first) * 1e3);
            let energy = self.load_v * charge;
            presses.push(PressEnergy {
                press: i + 1,
                charge_uc: charge,
                energy_uj: energy,
                margin_uj: usable.map(|u| u - energy),
                store: usable.map(|u| self.simulate(u, press)),
            });
        }
        let press_uj = presses.iter().map(|p| p.energy_uj).fold(0.0, f64::max);
        let frames_powered = usable.map(|u| {
            let first = startup_uj + frame_uj;
            if u < first {
                return 0;
            }
            let each = repeat_uj.unwrap_or(frame_uj);
            let more = ((u - first) / each * (1.0 + 1e-12)).floor();
            if more.is_finite() && more >= 0.0 {
                1 + more as u64
            } else {
                1
            }
        });
        let margin = usable.map(|u| u - press_uj);
        CodeEnergy {
            startup_energy_uj: startup_uj,
            frame_charge_uc: frame_uc,
            frame_energy_uj: frame_uj,
            repeat_energy_uj: repeat_uj,
            press_energy_uj: press_uj,
            usable_energy_uj: usable,
            frames_powered,
            margin_uj: margin,
            margin_fraction: margin.zip(usable).map(|(m, u)| m / u),
            presses,
        }
    }
}
