//! One carrier's channel for the envelope view: survey, choose, then one pass through the
//! channel and its decoder.

use super::{
    CarrierMarker, ChannelChoice, PlotCollector, PlotData, PlotError, PlotOptions, ShownChannel,
    SpectrumView, NEAREST_TOLERANCE_HZ,
};
use crate::decode::{channel_plans, merge_reports, survey_with_mean, DecodeOptions, Decoder};
use crate::front::channel::ChannelPlan;
use crate::front::spectrum::{Carrier, Survey};
use crate::source::{self, CaptureInfo, SampleSource};
use num_complex::Complex32;

/// An offset written for people: sign, kHz with one decimal (`+25.0 kHz`, `−40.0 kHz`).
pub(crate) fn khz(offset_hz: f64) -> String {
    let sign = if offset_hz < 0.0 { "−" } else { "+" };
    format!("{sign}{:.1} kHz", offset_hz.abs() / 1e3)
}

/// Every carrier of the survey in one short list (`+25.0 kHz, −40.0 kHz steady`).
fn found_list(survey: &Survey) -> String {
    if survey.carriers.is_empty() {
        return "none".into();
    }
    survey
        .carriers
        .iter()
        .map(|c| {
            if c.continuous {
                format!("{} steady", khz(c.offset_hz))
            } else {
                khz(c.offset_hz)
            }
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// The channel `decode` gives carrier `c` of `survey` (same bandwidth, rate and filters).
fn plan_for(
    survey: &Survey,
    c: &Carrier,
    info: &CaptureInfo,
    decode: &DecodeOptions,
) -> Option<ChannelPlan> {
    let one = Survey {
        carriers: vec![c.clone()],
        ..survey.clone()
    };
    let opts = DecodeOptions {
        max_channels: 1,
        ..decode.clone()
    };
    channel_plans(&one, info, &opts).into_iter().next()
}

/// Picks the surveyed carrier `choice` names and designs its channel as `decode` does.
///
/// Only bursty carriers are candidates (a steady carrier carries no presses). For
/// [`ChannelChoice::Nearest`], the nearest bursty carrier is taken when the requested offset
/// lies within half its channel's bandwidth, or within [`NEAREST_TOLERANCE_HZ`] when that is
/// wider. Every refusal is one line that lists what the survey found.
pub fn pick_carrier(
    survey: &Survey,
    info: &CaptureInfo,
    decode: &DecodeOptions,
    choice: ChannelChoice,
) -> Result<(Carrier, ChannelPlan), PlotError> {
    let refuse = |m: String| Err(PlotError::Carrier(m));
    let bursty: Vec<&Carrier> = survey.carriers.iter().filter(|c| !c.continuous).collect();
    let half_band = info.rate.hz() / 2.0;
    let chosen = match choice {
        ChannelChoice::WholeBand => {
            return refuse("the whole band has no single carrier to pick".into());
        }
        ChannelChoice::Nearest(f) if !f.is_finite() => {
            return refuse(format!("carrier offset {f} is not a number"));
        }
        ChannelChoice::Nearest(f) if f.abs() > half_band => {
            return refuse(format!(
                "carrier offset {f} Hz lies outside the band (±{} around the centre); give \
                 an offset from the centre frequency, not a frequency",
                khz(half_band).trim_start_matches('+')
            ));
        }
        _ if bursty.is_empty() => {
            return refuse(format!(
                "the spectrum survey found no bursty carrier to show (carriers found: {}); \
                 plot the whole band instead",
                found_list(survey)
            ));
        }
        ChannelChoice::Nearest(f) => bursty
            .iter()
            .min_by(|a, b| (a.offset_hz - f).abs().total_cmp(&(b.offset_hz - f).abs())),
        ChannelChoice::Strongest => bursty.iter().max_by(|a, b| a.peak_db.total_cmp(&b.peak_db)),
    };
    let Some(&c) = chosen else {
        return refuse("no carrier to pick".into());
    };
    let Some(plan) = plan_for(survey, c, info, decode) else {
        return refuse(format!(
            "no channel could be designed for the carrier at {}",
            khz(c.offset_hz)
        ));
    };
    if let ChannelChoice::Nearest(f) = choice {
        let tol = (plan.bandwidth_hz / 2.0).max(NEAREST_TOLERANCE_HZ);
        let off = (c.offset_hz - f).abs();
        if off > tol {
            return refuse(format!(
                "no bursty carrier within ±{} of {} (nearest: {}, {} away; carriers found: {})",
                khz(tol).trim_start_matches('+'),
                khz(f),
                khz(c.offset_hz),
                khz(off).trim_start_matches('+'),
                found_list(survey)
            ));
        }
    }
    Ok((c.clone(), plan))
}

/// The survey as a spectrum to draw: both level traces and every carrier, labelled with its
/// offset (`steady` for a continuous one).
pub fn spectrum_of(survey: &Survey, center_hz: Option<f64>) -> SpectrumView {
    SpectrumView {
        rate_hz: survey.rate_hz,
        center_hz,
        average_db: survey.avg_db.clone(),
        peak_db: survey.peak_db.clone(),
        carriers: survey
            .carriers
            .iter()
            .map(|c| CarrierMarker {
                offset_hz: c.offset_hz,
                level_db: Some(c.peak_db as f64),
                label: if c.continuous {
                    format!("{} steady", khz(c.offset_hz))
                } else {
                    khz(c.offset_hz)
                },
            })
            .collect(),
    }
}

/// Survey pass, choice, then the channel pass (see [`super::collect_path`]).
pub(crate) fn collect_channel(
    path: &str,
    mut src: Box<dyn SampleSource>,
    opts: &PlotOptions,
) -> Result<PlotData, PlotError> {
    let info = src.info().clone();
    if !info.is_iq() {
        return Err(PlotError::Carrier(
            "an envelope capture holds no carriers to choose from; a carrier's channel needs IQ \
             samples"
                .into(),
        ));
    }
    if path == "-" {
        return Err(PlotError::Carrier(
            "a carrier's channel needs two passes (survey, then channel) and standard input \
             can be read only once; give the capture as a file"
                .into(),
        ));
    }
    super::collect::check_window(opts)?;
    let (survey, mean) = survey_with_mean(src.as_mut())?;
    drop(src);
    // As `decode` does: remove the receiver's DC offset only when the survey sees one.
    let dc = if survey.dc_spike.is_some() {
        mean
    } else {
        Complex32::new(0.0, 0.0)
    };
    let (carrier, plan) = pick_carrier(&survey, &info, &opts.decode, opts.channel)?;
    let shown = ShownChannel {
        carrier_offset_hz: carrier.offset_hz,
        peak_db: carrier.peak_db,
        bandwidth_hz: plan.bandwidth_hz,
        out_rate_hz: plan.out_rate_hz,
        requested_hz: match opts.channel {
            ChannelChoice::Nearest(f) => Some(f),
            _ => None,
        },
    };
    // The other channels `decode` would open, decoded alongside: a code this channel hears
    // only as a stronger neighbour's splatter is dropped, as `decode` drops it.
    let mut others: Vec<Decoder> = channel_plans(&survey, &info, &opts.decode)
        .into_iter()
        .filter(|p| p.offset_hz != plan.offset_hz)
        .filter_map(|p| Decoder::for_channel(info.clone(), &opts.decode, p, dc).ok())
        .collect();
    let mut src = source::open(path, &opts.decode.open)?;
    let mut c = PlotCollector::for_channel(info.clone(), opts, plan, dc)?;
    while let Some(block) = src.next_block()? {
        c.push(block);
        for d in &mut others {
            d.push(block);
        }
    }
    let mut data = c.finish()?;
    if !others.is_empty() {
        let mut reports = vec![data.report.clone()];
        reports.extend(others.into_iter().map(Decoder::finish));
        let merged = merge_reports(reports);
        let before = data.report.codes.len();
        data.report
            .codes
            .retain(|k| merged.codes.iter().any(|m| m.key_id == k.key_id));
        let dropped = before - data.report.codes.len();
        if dropped > 0 {
            data.report.notes.push(format!(
                "{dropped} code(s) heard in this channel only while a carrier 10 dB stronger \
                 keyed in another were left out, as decode leaves them out"
            ));
        }
    }
    data.spectrum = Some(spectrum_of(&survey, info.center_frequency_hz));
    data.channel = Some(shown);
    Ok(data)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::source::Container;
    use crate::units::Rate;

    fn info() -> Option<CaptureInfo> {
        Some(CaptureInfo {
            path: "harrowgate.cu8".into(),
            container: Container::Raw,
            datatype: "cu8".parse().ok()?,
            rate: Rate::new(250_000.0)?,
            center_frequency_hz: None,
            declared_samples: None,
        })
    }

    fn carrier(offset_hz: f64, peak_db: f32, continuous: bool) -> Carrier {
        Carrier {
            offset_hz,
            peak_db,
            avg_db: peak_db - 20.0,
            snr_db: 30.0,
            occupied_bw_hz: 1_000.0,
            activity: if continuous { 1.0 } else { 0.1 },
            continuous,
            low_hz: offset_hz - 500.0,
            high_hz: offset_hz + 500.0,
        }
    }

    fn survey(carriers: Vec<Carrier>) -> Survey {
        Survey {
            rate_hz: 250_000.0,
            fft_len: 64,
            bin_hz: 250_000.0 / 64.0,
            samples: 0,
            frames: 0,
            avg_db: vec![-60.0; 64],
            peak_db: vec![-50.0; 64],
            floor_db: -60.0,
            peak_floor_db: -50.0,
            carriers,
            dc_spike: None,
        }
    }

    #[test]
    fn the_nearest_bursty_carrier_within_its_channel_is_picked() {
        let info = info().expect("a valid capture description");
        let s = survey(vec![
            carrier(-40_000.0, -10.0, true),
            carrier(25_000.0, -30.0, false),
            carrier(60_000.0, -20.0, false),
        ]);
        let opts = DecodeOptions::default();
        let pick = |c| pick_carrier(&s, &info, &opts, c).map(|(k, p)| (k.offset_hz, p));
        // A 1 kHz-wide carrier gets decode's narrowest channel, 8 kHz (decode.rs
        // `channel_plans`): half of it is below the 5 kHz floor, so ±5 kHz is accepted.
        let (off, plan) = pick(ChannelChoice::Nearest(29_900.0)).expect("within 5 kHz");
        assert_eq!(off, 25_000.0);
        assert_eq!(plan.bandwidth_hz, 8_000.0);
        assert_eq!(plan.offset_hz, 25_000.0);
        assert!(pick(ChannelChoice::Nearest(30_100.0)).is_err());
        // The steady carrier is never a candidate, however strong or near.
        assert!(matches!(
            pick(ChannelChoice::Nearest(-40_000.0)),
            Err(PlotError::Carrier(m)) if m.contains("−40.0 kHz steady")
        ));
        assert_eq!(pick(ChannelChoice::Strongest).expect("bursty").0, 60_000.0);
        assert!(pick(ChannelChoice::Nearest(f64::NAN)).is_err());
        assert!(pick(ChannelChoice::Nearest(433.92e6)).is_err());
        assert!(pick(ChannelChoice::WholeBand).is_err());
        // Only a steady carrier: nothing to show.
        let steady = survey(vec![carrier(-40_000.0, -10.0, true)]);
        assert!(matches!(
            pick_carrier(&steady, &info, &opts, ChannelChoice::Strongest),
            Err(PlotError::Carrier(m)) if m.contains("no bursty carrier")
        ));
    }

    #[test]
    fn offsets_read_with_a_sign_and_one_decimal() {
        assert_eq!(khz(25_000.0), "+25.0 kHz");
        assert_eq!(khz(-40_049.0), "−40.0 kHz");
        assert_eq!(khz(0.0), "+0.0 kHz");
    }
}
