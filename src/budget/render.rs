//! Human text and CSV views of a [`BudgetReport`].

use std::fmt::Write as _;
use std::io::Write;

use super::airtime::DutyConvention;
use super::rules::duty_cycle_correction_db;
use super::{BudgetError, BudgetReport, CodeBudget};

fn opt(v: Option<f64>, digits: usize) -> String {
    v.map_or_else(|| "-".to_string(), |x| format!("{x:.digits$}"))
}

/// The report as human-readable text (one block per code, the caution first and last).
pub fn render_text(report: &BudgetReport) -> String {
    let mut s = String::new();
    // Writing into a String cannot fail; the results are ignored on purpose.
    let _ = writeln!(s, "CAUTION: {}", report.caution);
    if let Some(e) = &report.energy {
        let _ = writeln!(s, "\nenergy profile: {}", e.profile);
        if let Some(n) = &e.note {
            let _ = writeln!(s, "  note: {n}");
        }
        let _ = writeln!(
            s,
            "  supply {} at {:.4} V{}{}; mark {:.3} mA, space {:.3} mA, start-up {:.3} ms at {:.3} mA",
            e.supply,
            e.load_v,
            e.efficiency
                .map_or(String::new(), |x| format!(", efficiency {:.0} %", x * 100.0)),
            e.divider_current_ua
                .map_or(String::new(), |x| format!(", divider {x:.3} µA")),
            e.mark_current_ma,
            e.space_current_ma,
            e.startup_ms,
            e.startup_current_ma
        );
        if let Some(h) = &e.harvester {
            let _ = writeln!(
                s,
                "  harvester {}: stored {:.1} µJ, usable {:.1} µJ ({}){}",
                h.kind,
                h.stored_energy_uj,
                h.usable_energy_uj,
                h.method,
                match (h.start_v, h.cutoff_v) {
                    (Some(a), Some(b)) => format!(", {a:.3} V -> {b:.3} V"),
                    _ => String::new(),
                }
            );
        }
        for n in &e.notes {
            let _ = writeln!(s, "  assumption: {n}");
        }
    }
    for code in &report.codes {
        code_text(&mut s, code);
    }
    if report.codes.is_empty() {
        let _ = writeln!(s, "\nno codes to budget");
    }
    let _ = writeln!(s, "\n{}", report.caution);
    s
}

fn code_text(s: &mut String, c: &CodeBudget) {
    let a = &c.airtime;
    let _ = writeln!(
        s,
        "\ncode {} ({}), carrier {}",
        c.key_id,
        c.line_code,
        c.carrier_hz
            .map_or("unknown".to_string(), |hz| format!("{:.4} MHz", hz / 1e6))
    );
    let _ = writeln!(
        s,
        "  presses {} ({} truncated), frames {}, repeats median {:.1} max {}",
        a.presses, a.truncated_presses, a.frames, a.repeats_median, a.repeats_max
    );
    let _ = writeln!(
        s,
        "  frame: airtime {:.3} ms, on {:.3} ms, mark fraction {:.4}, period {} ms",
        a.frame_airtime_ms,
        a.frame_on_time_ms,
        a.frame_mark_fraction,
        opt(a.frame_period_ms, 3)
    );
    let _ = writeln!(
        s,
        "  longest press (#{}): airtime {:.3} ms, on {:.3} ms, mark fraction {:.4}",
        a.longest_press, a.press_airtime_ms, a.press_on_time_ms, a.press_mark_fraction
    );
    let _ = writeln!(
        s,
        "  worst {:.0} ms window: {:.3} ms on, from {:.6} s",
        a.window_ms, a.worst_window_on_time_ms, a.worst_window_start_s
    );
    for d in &a.duty_times {
        let _ = writeln!(
            s,
            "  press time counting {}: {:.3} ms",
            d.convention.name(),
            d.press_time_ms
        );
    }
    if let Some(us) = &c.us {
        let _ = writeln!(s, "  United States:");
        let r = &us.duty_cycle_correction;
        let _ = writeln!(
            s,
            "    [{}] {}: {} — {}",
            r.id,
            r.clause,
            r.verdict.name(),
            r.finding
        );
        let r = &us.release;
        let _ = writeln!(
            s,
            "    [{}] {}: {} — {}",
            r.id,
            r.clause,
            r.verdict.name(),
            r.finding
        );
        let r = &us.field_strength;
        let _ = writeln!(
            s,
            "    [{}] {}: {} — {}",
            r.id,
            r.clause,
            r.verdict.name(),
            r.finding
        );
        let r = &us.periodic;
        let _ = writeln!(
            s,
            "    [{}] {}: {} — {}",
            r.id,
            r.clause,
            r.verdict.name(),
            r.finding
        );
        let _ = writeln!(s, "    ({})", r.caution);
    }
    if let Some(eu) = &c.eu {
        let _ = writeln!(
            s,
            "  Europe (observation period {:.0} s):",
            eu.observation_period_s
        );
        for b in &eu.sub_bands {
            let _ = writeln!(
                s,
                "    [{}] {:.3}-{:.3} MHz, {} mW e.r.p.: {} — {}",
                b.id,
                b.low_hz / 1e6,
                b.high_hz / 1e6,
                b.max_erp_mw,
                b.verdict.name(),
                b.finding
            );
        }
        let _ = writeln!(s, "    ({})", super::RULE_CAUTION);
    }
    if let Some(e) = &c.energy {
        let _ = writeln!(
            s,
            "  energy: start-up {:.2} µJ, frame {:.2} µJ, repeat {} µJ, costliest press {:.2} µJ",
            e.startup_energy_uj,
            e.frame_energy_uj,
            opt(e.repeat_energy_uj, 2),
            e.press_energy_uj
        );
        if let (Some(u), Some(m)) = (e.usable_energy_uj, e.margin_uj) {
            let _ = writeln!(
                s,
                "  usable {:.2} µJ: margin {:+.2} µJ ({:+.1} %), one press powers {} frame(s)",
                u,
                m,
                e.margin_fraction.unwrap_or(0.0) * 100.0,
                e.frames_powered.unwrap_or(0)
            );
        }
        for p in &e.presses {
            if let Some(r) = &p.store {
                let outcome = match (r.completes, r.cutoff_at_s) {
                    (true, _) => "store lasts the whole press".to_string(),
                    (false, Some(t)) => format!("store below cut-off at {t:.6} s"),
                    (false, None) => "store below cut-off".to_string(),
                };
                let _ = writeln!(
                    s,
                    "    press {}: {:.2} µJ; {}; {} of {} frames sent completely{}",
                    p.press,
                    p.energy_uj,
                    outcome,
                    r.frames_sent,
                    r.frames_total,
                    r.store_end_v
                        .map_or(String::new(), |v| format!("; store ends at {v:.3} V"))
                );
            }
        }
    }
}

/// The report as CSV: a header, then one row per press of every code.
///
/// Columns: `key_id, line_code, carrier_hz, press, start_s, truncated, repeats, airtime_ms,
/// on_time_ms, mark_fraction, frame_spans_ms, worst_window_on_time_ms, correction_db,
/// presses_per_hour_marks_only, presses_per_hour_frame_spans, energy_uj, margin_uj,
/// frames_sent, last_complete_repeat, cutoff_at_s`. Absent values are empty fields; the
/// presses-per-hour columns use the 10 % duty cycle of ERC/REC 70-03 and are filled when the
/// EU rules were asked for.
pub fn write_csv<W: Write>(report: &BudgetReport, out: W) -> Result<(), BudgetError> {
    let mut w = csv::Writer::from_writer(out);
    w.write_record([
        "key_id",
        "line_code",
        "carrier_hz",
        "press",
        "start_s",
        "truncated",
        "repeats",
        "airtime_ms",
        "on_time_ms",
        "mark_fraction",
        "frame_spans_ms",
        "worst_window_on_time_ms",
        "correction_db",
        "presses_per_hour_marks_only",
        "presses_per_hour_frame_spans",
        "energy_uj",
        "margin_uj",
        "frames_sent",
        "last_complete_repeat",
        "cutoff_at_s",
    ])?;
    let num = |v: Option<f64>| v.map_or(String::new(), |x| x.to_string());
    for c in &report.codes {
        for p in &c.presses {
            let per_hour = |conv: DutyConvention| -> String {
                if c.eu.is_none() {
                    return String::new();
                }
                let t = match conv {
                    DutyConvention::MarksOnly => p.on_time_ms,
                    DutyConvention::FrameSpans => p.frame_spans_ms,
                };
                super::rules::presses_per_hour(t / 1e3, 0.10, 3600.0).to_string()
            };
            let energy = c
                .energy
                .as_ref()
                .and_then(|e| e.presses.iter().find(|x| x.press == p.press));
            let store = energy.and_then(|e| e.store.as_ref());
            w.write_record([
                c.key_id.clone(),
                c.line_code.clone(),
                num(c.carrier_hz),
                p.press.to_string(),
                p.start_s.to_string(),
                p.truncated.to_string(),
                p.repeats.to_string(),
                p.airtime_ms.to_string(),
                p.on_time_ms.to_string(),
                p.mark_fraction.to_string(),
                p.frame_spans_ms.to_string(),
                p.worst_window_on_time_ms.to_string(),
                duty_cycle_correction_db(p.worst_window_on_time_ms).to_string(),
                per_hour(DutyConvention::MarksOnly),
                per_hour(DutyConvention::FrameSpans),
                num(energy.map(|e| e.energy_uj)),
                num(energy.and_then(|e| e.margin_uj)),
                store.map_or(String::new(), |s| s.frames_sent.to_string()),
                store
                    .and_then(|s| s.last_complete_repeat)
                    .map_or(String::new(), |n| n.to_string()),
                num(store.and_then(|s| s.cutoff_at_s)),
            ])?;
        }
    }
    w.flush()?;
    Ok(())
}
