//! Real `budget` output and energy profiles validated against the JSON Schemas in `schemas/`.

use ooksift::budget::{
    budget, BudgetReport, CodeTiming, Divider, EnergyProfile, FrameTiming, HarvesterProfile,
    PressTiming, Rules, SupplyProfile, TransmitterProfile,
};
use serde_json::Value;

fn load(rel: &str) -> Value {
    let path = format!("{}/{rel}", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path}: {e}"));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{path}: {e}"))
}

fn validator(rel: &str) -> jsonschema::Validator {
    jsonschema::validator_for(&load(rel)).unwrap_or_else(|e| panic!("{rel}: {e}"))
}

fn errors(v: &jsonschema::Validator, instance: &Value) -> Vec<String> {
    v.iter_errors(instance)
        .map(|e| format!("{} at {}", e, e.instance_path))
        .collect()
}

/// PWM press: 24-bit word, T = 350 µs, 1:3 marks, sync 1 T mark + 31 T space, `n` frames.
fn press(word: u32, n: usize, t0: f64, truncated: bool) -> PressTiming {
    const T: f64 = 350e-6;
    let mut t = t0;
    let mut frames = Vec::new();
    for _ in 0..n {
        let mut marks = Vec::new();
        for i in (0..24).rev() {
            let w = if (word >> i) & 1 == 1 { 3.0 * T } else { T };
            marks.push((t, t + w));
            t += 4.0 * T;
        }
        marks.push((t, t + T));
        t += 32.0 * T;
        frames.push(FrameTiming { marks });
    }
    PressTiming { frames, truncated }
}

fn codes() -> Vec<CodeTiming> {
    vec![
        CodeTiming {
            key_id: "lamp-left".into(),
            line_code: "pwm".into(),
            carrier_hz: Some(433.92e6),
            presses: vec![
                press(0xA5A5A5, 6, 0.1, false),
                press(0xA5A5A5, 3, 20.0, true),
            ],
            capture_duration_s: 20.2,
        },
        CodeTiming {
            key_id: "gate".into(),
            line_code: "pwm".into(),
            carrier_hz: None,
            presses: vec![press(0x123456, 1, 5.0, false)],
            capture_duration_s: 20.2,
        },
        CodeTiming {
            key_id: "chime".into(),
            line_code: "pwm".into(),
            carrier_hz: Some(868.3e6),
            presses: vec![press(0, 40, 8.0, false)],
            capture_duration_s: 20.2,
        },
    ]
}

fn profiles() -> Vec<EnergyProfile> {
    let tx = |supply: SupplyProfile| TransmitterProfile {
        supply,
        mark_current_ma: 6.0,
        space_current_ma: 0.2,
        startup_ms: 0.5,
        startup_current_ma: 1.5,
    };
    let cap = Some(HarvesterProfile::Capacitor {
        capacitance_uf: 47.0,
        start_v: 5.0,
        cutoff_v: 2.0,
    });
    let pulse = Some(HarvesterProfile::Pulse {
        voltage_v: 3.0,
        duration_ms: 50.0,
        load_ohm: 300.0,
    });
    let divider = Some(Divider {
        vref_v: 0.5,
        r1_ohm: 180e3,
        r2_ohm: 51e3,
    });
    let p = |name: &str, supply, harvester| EnergyProfile {
        name: name.into(),
        note: Some("test".into()),
        transmitter: tx(supply),
        harvester,
    };
    vec![
        p("fixed-none", SupplyProfile::Fixed { voltage_v: 3.0 }, None),
        p("unreg-cap", SupplyProfile::Unregulated, cap.clone()),
        p(
            "linear-cap",
            SupplyProfile::Linear {
                output_v: Some(1.8),
                divider: None,
                dropout_v: 0.1,
            },
            cap.clone(),
        ),
        p(
            "switching-pulse",
            SupplyProfile::Switching {
                output_v: None,
                divider,
                efficiency: 0.85,
            },
            pulse,
        ),
        p(
            "switching-cap",
            SupplyProfile::Switching {
                output_v: None,
                divider,
                efficiency: 0.9,
            },
            cap,
        ),
    ]
}

#[test]
fn real_reports_match_the_budget_schema() {
    let v = validator("schemas/budget.schema.json");
    let codes = codes();
    let mut reports = vec![
        budget(&codes, &Rules { us: true, eu: true }, None).expect("ok"),
        budget(&codes, &Rules::default(), None).expect("ok"),
        budget(
            &[],
            &Rules {
                us: true,
                eu: false,
            },
            None,
        )
        .expect("ok"),
    ];
    for p in profiles() {
        reports.push(budget(&codes, &Rules { us: true, eu: true }, Some(&p)).expect("ok"));
    }
    for r in &reports {
        let json = serde_json::to_value(r).expect("serializes");
        let errs = errors(&v, &json);
        assert!(errs.is_empty(), "schema errors: {errs:#?}");
        // And it deserializes back into the report type.
        let _: BudgetReport = serde_json::from_value(json).expect("deserializes");
    }
}

#[test]
fn budget_schema_rejects_drift() {
    // The check can fail: a report missing its caution, with a renamed field, or with a
    // misspelt verdict is refused.
    let v = validator("schemas/budget.schema.json");
    let r = budget(
        &codes(),
        &Rules { us: true, eu: true },
        Some(&profiles()[2]),
    )
    .expect("ok");
    let good = serde_json::to_value(&r).expect("serializes");
    assert!(v.is_valid(&good));

    let mut no_caution = good.clone();
    no_caution.as_object_mut().map(|o| o.remove("caution"));
    assert!(!v.is_valid(&no_caution));

    let mut renamed = good.clone();
    let air = &mut renamed["codes"][0]["airtime"];
    let x = air["frame_airtime_ms"].take();
    air.as_object_mut().map(|o| o.remove("frame_airtime_ms"));
    air["frame_airtime"] = x;
    assert!(!v.is_valid(&renamed));

    let mut verdict = good;
    verdict["codes"][0]["us"]["release"]["verdict"] = Value::from("pass");
    assert!(!v.is_valid(&verdict));
}

#[test]
fn profiles_match_the_profile_schema() {
    let v = validator("schemas/budget-profile.schema.json");
    let example = load("captures/profiles/harrowgate-button.json");
    let errs = errors(&v, &example);
    assert!(errs.is_empty(), "example profile: {errs:#?}");
    let parsed: EnergyProfile = serde_json::from_value(example).expect("parses");
    parsed.validate().expect("example profile valid");
    for p in profiles() {
        let json = serde_json::to_value(&p).expect("serializes");
        let errs = errors(&v, &json);
        assert!(errs.is_empty(), "{}: {errs:#?}", p.name);
        let back = EnergyProfile::from_json_str(&json.to_string()).expect("round trip");
        assert_eq!(back.name, p.name);
    }
    // Negative checks: both output forms, a negative capacitance, an unknown field.
    let bad = [
        r#"{"name":"x","transmitter":{"supply":{"kind":"linear","output_v":1.8,
            "divider":{"vref_v":0.5,"r1_ohm":1,"r2_ohm":1}},"mark_current_ma":5,
            "space_current_ma":0}}"#,
        r#"{"name":"x","transmitter":{"supply":{"kind":"fixed","voltage_v":3},
            "mark_current_ma":5,"space_current_ma":0},"harvester":{"kind":"capacitor",
            "capacitance_uf":-47,"start_v":5,"cutoff_v":2}}"#,
        r#"{"name":"x","colour":"red","transmitter":{"supply":{"kind":"fixed",
            "voltage_v":3},"mark_current_ma":5,"space_current_ma":0}}"#,
    ];
    for text in bad {
        let json: Value = serde_json::from_str(text).expect("json");
        assert!(!v.is_valid(&json), "schema accepted {text}");
        assert!(
            EnergyProfile::from_json_str(text).is_err(),
            "tool accepted {text}"
        );
    }
}
