//! `ooksift compare` end to end (issue 5): synth captures of three transmitters with four keys
//! each (20-bit address + 4-bit key), decoded and compared through the real binary, with and
//! without --label; saved reports mixed with captures give the same answer.

mod common;

use common::{run, synth};
use ooksift::rng::Rng;
use serde_json::Value;
use std::path::{Path, PathBuf};

fn compare(args: &[&str]) -> Value {
    let mut a = vec!["compare", "--json"];
    a.extend_from_slice(args);
    let out = run(&a);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("JSON")
}

/// Three unit captures, each with one press of each of four keys.
fn units(dir: &Path) -> (Vec<PathBuf>, Vec<String>) {
    let mut rng = Rng::new(2026);
    let keys = ["0001", "0010", "0100", "1000"];
    let mut paths = Vec::new();
    let mut addrs = Vec::new();
    let first = rng.bits(20);
    for u in 0..3 {
        // Unit b's address is unit a's complement, so no address bit is the same in all
        // three units (such a bit would rightly be reported as fixed).
        let addr = match u {
            0 => first.clone(),
            1 => first
                .chars()
                .map(|c| if c == '1' { '0' } else { '1' })
                .collect(),
            _ => rng.bits(20),
        };
        let p = dir.join(format!("unit-{u}.cu8"));
        let presses: Vec<String> = keys
            .iter()
            .map(|k| format!("pwm:{addr}{k},repeats=4,gap_ms=150"))
            .collect();
        let mut args = vec!["--rate", "250000", "--snr-db", "25"];
        let seed = (50 + u).to_string();
        args.extend(["--seed", seed.as_str()]);
        for p in &presses {
            args.extend(["--press", p.as_str()]);
        }
        let truth = synth(&p, &args);
        assert_eq!(truth["codes"].as_array().map(Vec::len), Some(4));
        paths.push(p);
        addrs.push(addr);
    }
    (paths, addrs)
}

fn check_field_map(r: &Value, ctx: &str) {
    let layouts = r["layouts"].as_array().expect("layouts");
    assert_eq!(layouts.len(), 1, "{ctx}");
    let fields: Vec<(String, u64, u64)> = layouts[0]["fields"]
        .as_array()
        .expect("fields")
        .iter()
        .map(|f| {
            (
                f["class"].as_str().unwrap_or("").to_string(),
                f["start"].as_u64().unwrap_or(99),
                f["length"].as_u64().unwrap_or(99),
            )
        })
        .collect();
    assert_eq!(
        fields,
        vec![("address".to_string(), 0, 20), ("key".to_string(), 20, 4)],
        "{ctx}"
    );
    let codes = r["codes"].as_array().expect("codes");
    assert_eq!(codes.len(), 12, "{ctx}");
    // Every code is put with the other codes of its own capture, and only with them.
    for a in codes {
        for b in codes {
            let same_src = a["source"] == b["source"];
            let same_tx = a["transmitter"] == b["transmitter"];
            assert_eq!(
                same_src, same_tx,
                "{ctx}: {} / {}",
                a["source"], b["source"]
            );
        }
    }
}

#[test]
fn three_units_four_keys_give_address_and_key_fields() {
    let d = tempfile::tempdir().expect("tempdir");
    let (paths, _) = units(d.path());
    let p: Vec<&str> = paths.iter().map(|p| p.to_str().expect("utf-8")).collect();
    let mut args = vec!["--rate", "250000"];
    args.extend(&p);
    let inferred = compare(&args);
    check_field_map(&inferred, "inferred");
    assert_eq!(inferred["layouts"][0]["verdicts"]["code_kind"], "fixed");
    assert_eq!(inferred["layouts"][0]["verdicts"]["distinguishable"], true);

    let labels: Vec<String> = p
        .iter()
        .enumerate()
        .map(|(i, x)| format!("unit-{}={x}", ["a", "b", "c"][i]))
        .collect();
    let mut args = vec!["--rate", "250000"];
    args.extend(&p);
    for l in &labels {
        args.extend(["--label", l.as_str()]);
    }
    let labelled = compare(&args);
    check_field_map(&labelled, "labelled");
    let names: Vec<&str> = labelled["codes"]
        .as_array()
        .expect("codes")
        .iter()
        .map(|c| c["transmitter"].as_str().unwrap_or(""))
        .collect();
    assert!(names.iter().all(|n| n.starts_with("unit-")), "{names:?}");
}

#[test]
fn saved_reports_mixed_with_captures_give_the_same_answer() {
    let d = tempfile::tempdir().expect("tempdir");
    let (paths, _) = units(d.path());
    // Save the first unit's decode as a report.
    let rep = d.path().join("unit-0.json");
    let out = run(&[
        "decode",
        "--json",
        "--rate",
        "250000",
        paths[0].to_str().expect("utf-8"),
    ]);
    assert!(out.status.success());
    std::fs::write(&rep, &out.stdout).expect("write");
    let caps: Vec<&str> = paths.iter().map(|p| p.to_str().expect("utf-8")).collect();
    let a = compare(&["--rate", "250000", caps[0], caps[1], caps[2]]);
    let b = compare(&[
        "--rate",
        "250000",
        rep.to_str().expect("utf-8"),
        caps[1],
        caps[2],
    ]);
    assert_eq!(a["layouts"][0]["fields"], b["layouts"][0]["fields"]);
    assert_eq!(
        a["layouts"][0]["verdicts"]["code_kind"],
        b["layouts"][0]["verdicts"]["code_kind"]
    );
    let bits = |r: &Value| {
        let mut v: Vec<String> = r["codes"]
            .as_array()
            .expect("codes")
            .iter()
            .map(|c| c["bits"].as_str().unwrap_or("").to_string())
            .collect();
        v.sort();
        v
    };
    assert_eq!(bits(&a), bits(&b));
    common::assert_valid("compare.schema.json", &a);
}
