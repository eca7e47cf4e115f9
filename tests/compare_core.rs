//! Compare stage on generated code sets: field maps, transmitter grouping, rolling parts,
//! checksum search, report formats and the JSON schema.
//!
//! All sets are generated here with a seeded xorshift PRNG; the generator's truth is the oracle.

use ooksift::compare::{
    compare, crc_bits, render_text, write_csv, CodeEntry, CodeKind, CompareError, CompareOptions,
    CompareReport, CrcParams, FieldClass, GroupingMethod, ScanStatus, SimpleCheckKind,
};

/// Marsaglia's xorshift64 (2003), enough for test data.
struct XorShift(u64);

impl XorShift {
    fn new(seed: u64) -> Self {
        Self(seed.max(1))
    }
    fn next(&mut self) -> u64 {
        let mut x = self.0;
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        self.0 = x;
        x
    }
    fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
    fn bits(&mut self, n: usize) -> Vec<u8> {
        (0..n).map(|_| (self.next() >> 33 & 1) as u8).collect()
    }
}

fn to_str(bits: &[u8]) -> String {
    bits.iter()
        .map(|&b| if b == 1 { '1' } else { '0' })
        .collect()
}

fn num_bits(v: u64, n: usize) -> Vec<u8> {
    (0..n).rev().map(|i| (v >> i & 1) as u8).collect()
}

fn entry(source: &str, label: Option<&str>, bits: &[u8], presses: u32, t: f64) -> CodeEntry {
    CodeEntry {
        source: source.to_string(),
        label: label.map(str::to_string),
        key_id: format!("pwm-{}", to_str(bits)),
        line_code: "pwm".to_string(),
        bits: to_str(bits),
        presses,
        first_start_s: t,
    }
}

fn hamming(a: &[u8], b: &[u8]) -> usize {
    a.iter().zip(b).filter(|(x, y)| x != y).count()
}

const UNITS: [&str; 3] = ["unit-a", "unit-b", "unit-c"];
const KEYS: [&str; 4] = ["lamp-left", "lamp-right", "gate", "chime"];

/// Three units × four keys: a 20-bit random address per unit and a 4-bit key value shared by all
/// units. Returns the entries and the truth (unit index per entry).
///
/// Inferring transmitters without labels needs the addresses to separate units more than the
/// keys separate keys (documented precondition), and "exactly an address and a key field" needs
/// every address bit and every key bit to differ somewhere; the generator draws until both hold.
fn fixed_set(seed: u64, labelled: bool) -> (Vec<CodeEntry>, Vec<usize>) {
    let mut rng = XorShift::new(seed);
    let addresses = loop {
        let a: Vec<Vec<u8>> = (0..3).map(|_| rng.bits(20)).collect();
        let far = (0..3).all(|i| (i + 1..3).all(|j| hamming(&a[i], &a[j]) >= 8));
        let all_vary = (0..20).all(|p| !(a[0][p] == a[1][p] && a[1][p] == a[2][p]));
        if far && all_vary {
            break a;
        }
    };
    let keys = loop {
        let k: Vec<Vec<u8>> = (0..4).map(|_| rng.bits(4)).collect();
        let distinct = (0..4).all(|i| (i + 1..4).all(|j| k[i] != k[j]));
        let all_vary = (0..4).all(|p| (1..4).any(|i| k[i][p] != k[0][p]));
        if distinct && all_vary {
            break k;
        }
    };
    let mut entries = Vec::new();
    let mut truth = Vec::new();
    let mut t = 0.0;
    for (u, unit) in UNITS.iter().enumerate() {
        for (k, key) in KEYS.iter().enumerate() {
            let mut bits = addresses[u].clone();
            bits.extend(&keys[k]);
            t += 1.7;
            let presses = 1 + rng.below(3) as u32;
            let label = labelled.then_some(*unit);
            entries.push(entry(
                &format!("{unit}-{key}.cu8"),
                label,
                &bits,
                presses,
                t,
            ));
            truth.push(u);
        }
    }
    (entries, truth)
}

/// True when two assignments of codes to groups are the same partition.
fn same_partition(a: &[usize], b: &[String]) -> bool {
    (0..a.len()).all(|i| (0..a.len()).all(|j| (a[i] == a[j]) == (b[i] == b[j])))
}

fn check_fixed_report(report: &CompareReport, truth: &[usize], labelled: bool) {
    assert_eq!(report.layouts.len(), 1);
    let layout = &report.layouts[0];
    let fields: Vec<(FieldClass, usize, usize)> = layout
        .fields
        .iter()
        .map(|f| (f.class, f.start, f.length))
        .collect();
    assert_eq!(
        fields,
        vec![(FieldClass::Address, 0, 20), (FieldClass::Key, 20, 4)]
    );
    assert_eq!(layout.fields[0].distinct, 3);
    assert_eq!(layout.fields[1].distinct, 4);
    let tx: Vec<String> = report.codes.iter().map(|c| c.transmitter.clone()).collect();
    assert!(same_partition(truth, &tx), "transmitters {tx:?}");
    assert_eq!(layout.grouping.transmitters.len(), 3);
    if labelled {
        assert_eq!(layout.grouping.method, GroupingMethod::Labels);
        for (c, &u) in report.codes.iter().zip(truth) {
            assert_eq!(c.transmitter, UNITS[u]);
        }
    } else {
        assert_eq!(layout.grouping.method, GroupingMethod::Inferred);
        assert!(layout.grouping.cut_distance.is_some());
    }
    let v = &layout.verdicts;
    assert_eq!(v.code_kind, CodeKind::Fixed);
    assert_eq!(v.buttons, 12);
    assert_eq!(v.distinguishable, Some(true));
    // Closest pair, recomputed by brute force over the bit strings.
    let bits: Vec<&str> = report.codes.iter().map(|c| c.bits.as_str()).collect();
    let mut min = usize::MAX;
    for i in 0..bits.len() {
        for j in i + 1..bits.len() {
            let d = bits[i]
                .chars()
                .zip(bits[j].chars())
                .filter(|(x, y)| x != y)
                .count();
            min = min.min(d);
            assert_eq!(layout.distances[i][j] as usize, d);
            assert_eq!(layout.distances[j][i] as usize, d);
        }
    }
    let closest = v.closest_codes.expect("closest pair");
    assert_eq!(closest.distance as usize, min);
    let (a, b) = (closest.a, closest.b);
    assert_eq!(
        bits[a]
            .chars()
            .zip(bits[b].chars())
            .filter(|(x, y)| x != y)
            .count(),
        min
    );
    // Field values per code match the bits.
    for c in &report.codes {
        assert_eq!(
            c.field_values,
            vec![c.bits[..20].to_string(), c.bits[20..].to_string()]
        );
    }
    // Addresses and keys are independent of each other: no checksum can explain the key.
    assert!(layout.checksums.crc.is_empty());
    assert!(layout.check_field.is_none());
}

#[test]
fn three_units_four_keys_labelled() {
    for seed in 1..=20 {
        let (entries, truth) = fixed_set(seed, true);
        let report = compare(&entries, &CompareOptions::default()).expect("compare");
        check_fixed_report(&report, &truth, true);
    }
}

#[test]
fn three_units_four_keys_inferred() {
    for seed in 1..=40 {
        let (entries, truth) = fixed_set(seed, false);
        let report = compare(&entries, &CompareOptions::default()).expect("compare");
        check_fixed_report(&report, &truth, false);
    }
}

/// Layout [address 20][counter 16][key 4]; two units, two keys pressed alternately, one counter
/// per unit advancing by 1..=3 per press. Returns entries and, per unit, the positions that
/// changed between consecutive presses.
fn counter_set(seed: u64) -> (Vec<CodeEntry>, Vec<bool>) {
    let mut rng = XorShift::new(seed);
    let addresses = loop {
        let a = [rng.bits(20), rng.bits(20)];
        if hamming(&a[0], &a[1]) >= 8 {
            break a;
        }
    };
    let keys = [num_bits(0b0001, 4), num_bits(0b0010, 4)];
    let mut entries = Vec::new();
    let mut changed = vec![false; 40];
    for (u, unit) in UNITS.iter().take(2).enumerate() {
        let mut counter = rng.below(1 << 16);
        let mut prev: Option<Vec<u8>> = None;
        for press in 0..10 {
            counter = (counter + 1 + rng.below(3)) % (1 << 16);
            let mut bits = addresses[u].clone();
            bits.extend(num_bits(counter, 16));
            bits.extend(&keys[press % 2]);
            if let Some(p) = &prev {
                for i in 20..36 {
                    changed[i] |= p[i] != bits[i];
                }
            }
            prev = Some(bits.clone());
            entries.push(entry(
                &format!("{unit}.cu8"),
                None,
                &bits,
                1,
                press as f64 * 2.0,
            ));
        }
    }
    (entries, changed)
}

#[test]
fn counter_field_located() {
    for seed in 1..=40 {
        let (entries, changed) = counter_set(seed);
        let report = compare(&entries, &CompareOptions::default()).expect("compare");
        let layout = &report.layouts[0];
        assert_eq!(
            layout.verdicts.code_kind,
            CodeKind::Rolling,
            "seed {seed}: {:?}",
            layout.fields
        );
        let counters: Vec<_> = layout
            .fields
            .iter()
            .filter(|f| f.class == FieldClass::Counter)
            .collect();
        assert_eq!(counters.len(), 1, "seed {seed}: {:?}", layout.fields);
        let c = counters[0];
        // Inside the true counter field, ending at its least significant bit, covering every bit
        // that changed between presses of a unit.
        assert!(
            c.start >= 20 && c.start + c.length == 36,
            "seed {seed}: {c:?}"
        );
        for (p, &ch) in changed.iter().enumerate() {
            if ch {
                assert!(
                    p >= c.start && p < c.start + c.length,
                    "seed {seed}: bit {p} changed, field {c:?}"
                );
            }
        }
        let ev = c.counter.as_ref().expect("counter evidence");
        assert_eq!(ev.bit_order, ooksift::compare::BitOrder::MsbFirst);
        assert!(ev.small_steps >= ev.steps * 3 / 4);
        // No random part, and the two units are found from their addresses.
        assert!(layout.fields.iter().all(|f| f.class != FieldClass::Random));
        let tx: Vec<String> = report
            .codes
            .iter()
            .map(|cd| cd.transmitter.clone())
            .collect();
        let truth: Vec<usize> = (0..20).map(|i| i / 10).collect();
        assert!(same_partition(&truth, &tx), "seed {seed}: {tx:?}");
        // The key bits that differ (last two) are key positions.
        assert_eq!(layout.position_classes[38], FieldClass::Key);
        assert_eq!(layout.position_classes[39], FieldClass::Key);
    }
}

/// Layout [random 28][address 20][key 4]; two units, two keys pressed alternately, eight presses
/// per unit. Returns the entries and the expected class of every position: random for the
/// rolling part, address where the two addresses differ, key where the two key values differ,
/// fixed elsewhere. (Two keys per unit: with a single button per unit, inferred grouping sees
/// only two distinct points and keeps them together — a documented limit.)
fn random_rolling_set(seed: u64) -> (Vec<CodeEntry>, Vec<FieldClass>) {
    let mut rng = XorShift::new(seed);
    let addresses = loop {
        let a = [rng.bits(20), rng.bits(20)];
        if hamming(&a[0], &a[1]) >= 8 {
            break a;
        }
    };
    let keys = [num_bits(0b0100, 4), num_bits(0b0010, 4)];
    let mut entries = Vec::new();
    for (u, unit) in UNITS.iter().take(2).enumerate() {
        for press in 0..8 {
            let mut bits = rng.bits(28);
            bits.extend(&addresses[u]);
            bits.extend(&keys[press % 2]);
            entries.push(entry(&format!("{unit}.cu8"), None, &bits, 1, press as f64));
        }
    }
    let mut expected = vec![FieldClass::Random; 28];
    expected.extend((0..20).map(|p| {
        if addresses[0][p] != addresses[1][p] {
            FieldClass::Address
        } else {
            FieldClass::Fixed
        }
    }));
    expected.extend([
        FieldClass::Fixed,
        FieldClass::Key,
        FieldClass::Key,
        FieldClass::Fixed,
    ]);
    (entries, expected)
}

#[test]
fn random_rolling_part_located() {
    for seed in 1..=40 {
        let (entries, expected) = random_rolling_set(seed);
        let report = compare(&entries, &CompareOptions::default()).expect("compare");
        let layout = &report.layouts[0];
        assert_eq!(layout.verdicts.code_kind, CodeKind::Rolling);
        assert_eq!(layout.position_classes, expected, "seed {seed}");
        assert_eq!(
            (
                layout.fields[0].class,
                layout.fields[0].start,
                layout.fields[0].length
            ),
            (FieldClass::Random, 0, 28)
        );
        let tx: Vec<String> = report.codes.iter().map(|c| c.transmitter.clone()).collect();
        let truth: Vec<usize> = (0..16).map(|i| i / 8).collect();
        assert!(same_partition(&truth, &tx), "seed {seed}: {tx:?}");
        assert_eq!(layout.verdicts.buttons, 4);
    }
}

#[test]
fn same_layout_pressed_repeatedly_is_fixed() {
    // The rolling layout's shape, but each unit repeats one code: told apart from rolling.
    let mut rng = XorShift::new(41);
    let mut entries = Vec::new();
    for unit in UNITS.iter().take(2) {
        let bits = rng.bits(52);
        for capture in 0..4 {
            entries.push(entry(&format!("{unit}-{capture}.cu8"), None, &bits, 2, 0.5));
        }
    }
    let report = compare(&entries, &CompareOptions::default()).expect("compare");
    let v = &report.layouts[0].verdicts;
    assert_eq!(v.code_kind, CodeKind::Fixed);
    assert!(report.layouts[0]
        .fields
        .iter()
        .all(|f| !f.class.is_rolling()));
}

#[test]
fn one_unit_few_keys_once_each_is_undetermined() {
    let mut rng = XorShift::new(42);
    let address = rng.bits(20);
    let entries: Vec<CodeEntry> = (0..4u64)
        .map(|k| {
            let mut bits = address.clone();
            bits.extend(num_bits(1 << k, 4));
            entry("unit-a.cu8", None, &bits, 1, k as f64)
        })
        .collect();
    let report = compare(&entries, &CompareOptions::default()).expect("compare");
    let layout = &report.layouts[0];
    assert_eq!(layout.verdicts.code_kind, CodeKind::Undetermined);
    assert!(!layout.notes.is_empty());
    assert!(layout
        .fields
        .iter()
        .any(|f| f.class == FieldClass::Key && f.start == 20 && f.length == 4));
}

#[test]
fn identical_codes_of_two_labelled_units_are_not_distinguishable() {
    let mut rng = XorShift::new(43);
    let a = rng.bits(24);
    let mut b = a.clone();
    b[23] ^= 1;
    let entries = vec![
        entry("unit-a.cu8", Some("unit-a"), &a, 3, 0.0),
        entry("unit-a.cu8", Some("unit-a"), &b, 3, 1.0),
        entry("unit-b.cu8", Some("unit-b"), &a, 3, 0.0),
    ];
    let report = compare(&entries, &CompareOptions::default()).expect("compare");
    let v = &report.layouts[0].verdicts;
    assert_eq!(v.distinguishable, Some(false));
    assert_eq!(v.collisions.len(), 1);
    assert_eq!((v.collisions[0].a, v.collisions[0].b), (0, 2));
}

/// Codes of `msg_bits` random bits followed by their CRC (trailing `width` bits, MSB first).
fn crc_set(rng: &mut XorShift, p: &CrcParams, msg_bits: usize, count: usize) -> Vec<CodeEntry> {
    (0..count)
        .map(|i| {
            let mut bits = rng.bits(msg_bits);
            let crc = crc_bits(p, &bits);
            bits.extend(num_bits(crc, p.width as usize));
            entry("gate.cu8", None, &bits, 1, i as f64)
        })
        .collect()
}

#[test]
fn crc8_with_random_parameters_is_found() {
    let mut rng = XorShift::new(51);
    for round in 0..8 {
        let truth = CrcParams {
            width: 8,
            poly: rng.below(128) * 2 + 1, // odd, like every catalogue poly (common practice)
            init: rng.below(256),
            refin: round % 2 == 1,
            refout: rng.below(2) == 1,
            xorout: rng.below(256),
        };
        let entries = crc_set(&mut rng, &truth, 24, 12);
        let report = compare(&entries, &CompareOptions::default()).expect("compare");
        let layout = &report.layouts[0];
        let crc = &layout.checksums.crc;
        let hit = crc
            .iter()
            .find(|c| {
                c.width == 8
                    && u64::from(c.poly) == truth.poly
                    && c.refin == truth.refin
                    && c.refout == truth.refout
            })
            .unwrap_or_else(|| panic!("round {round}: truth {truth:?} not in {crc:#?}"));
        // The truth lies in the reported (init, xorout) family.
        assert_eq!(
            u64::from(hit.xorout_for_init(truth.init as u32)),
            truth.xorout,
            "round {round}"
        );
        assert_eq!(hit.supporting_codes, 12);
        // Every reported candidate really reproduces every code with the bit-serial engine.
        for c in crc {
            let p = c.params_for_init(0);
            for e in &entries {
                let bits: Vec<u8> = e.bits.bytes().map(|b| b - b'0').collect();
                let (m, chk) = bits.split_at(bits.len() - c.width as usize);
                let v = chk.iter().fold(0u64, |a, &b| a << 1 | u64::from(b));
                assert_eq!(crc_bits(&p, m), v, "round {round}: {c:?}");
            }
            if let Some(init) = c.init_at_xorout_zero {
                assert_eq!(c.xorout_for_init(init), 0);
            }
        }
        // Nothing wider than the true check explains the codes.
        assert!(crc.iter().all(|c| c.width <= 8), "round {round}: {crc:?}");
        let check = layout.check_field.as_ref().expect("check field");
        assert_eq!((check.start, check.length), (24, 8));
        assert!(layout.position_classes[24..]
            .iter()
            .all(|&c| c == FieldClass::Check));
    }
}

#[test]
fn catalogue_crc16_is_named() {
    // CRC-16/KERMIT over 4-byte messages (facts.md §6.2 parameters): found and named.
    let mut rng = XorShift::new(52);
    let kermit = ooksift::compare::CRC_CATALOGUE
        .iter()
        .find(|e| e.name == "CRC-16/KERMIT")
        .expect("listed")
        .params;
    let entries = crc_set(&mut rng, &kermit, 32, 6);
    let report = compare(&entries, &CompareOptions::default()).expect("compare");
    let crc = &report.layouts[0].checksums.crc;
    let hit = crc
        .iter()
        .find(|c| c.width == 16 && c.poly == 0x1021 && c.refin && c.refout)
        .expect("found");
    assert_eq!(hit.xorout_at_init_zero, 0);
    assert!(
        hit.catalogue_names.iter().any(|n| n == "CRC-16/KERMIT"),
        "{hit:?}"
    );
}

#[test]
fn random_codes_give_no_checksum() {
    let mut rng = XorShift::new(61);
    for round in 0..20 {
        let entries: Vec<CodeEntry> = (0..12)
            .map(|i| entry("chime.cu8", None, &rng.bits(32), 1, f64::from(i)))
            .collect();
        let report = compare(&entries, &CompareOptions::default()).expect("compare");
        let cs = &report.layouts[0].checksums;
        assert!(cs.crc.is_empty(), "round {round}: {:?}", cs.crc);
        assert!(cs.simple.is_empty(), "round {round}: {:?}", cs.simple);
        // Every width had enough codes to be searched (or was ruled out as inconsistent).
        assert!(cs
            .widths
            .iter()
            .all(|w| matches!(w.status, ScanStatus::Searched | ScanStatus::Inconsistent)));
    }
}

#[test]
fn too_few_codes_for_a_meaningful_crc() {
    // Three CRC-8 codewords: two independent differences, 1020 · 2^-16 ≈ 0.016 expected false
    // matches at width 8 — above the 1e-3 threshold, so width 8 is not searched.
    let mut rng = XorShift::new(62);
    let p = CrcParams {
        width: 8,
        poly: 0x07,
        init: 0,
        refin: false,
        refout: false,
        xorout: 0,
    };
    let entries = crc_set(&mut rng, &p, 24, 3);
    let report = compare(&entries, &CompareOptions::default()).expect("compare");
    let cs = &report.layouts[0].checksums;
    let w8 = cs
        .widths
        .iter()
        .find(|w| w.width == 8)
        .expect("width 8 scanned");
    assert_eq!(w8.status, ScanStatus::TooFewCodes);
    assert_eq!(w8.independent_differences, 2);
    assert!(cs.crc.iter().all(|c| c.width != 8));
}

fn simple_set(
    rng: &mut XorShift,
    kind: SimpleCheckKind,
    msg_bits: usize,
    constant: u64,
) -> Vec<CodeEntry> {
    (0..12)
        .map(|i| {
            let mut bits = rng.bits(msg_bits);
            let w = kind.width() as usize;
            let groups: Vec<u64> = bits
                .rchunks(w)
                .map(|g| g.iter().fold(0u64, |a, &b| a << 1 | u64::from(b)))
                .collect();
            let mask = (1u64 << w) - 1;
            let xor = groups.iter().fold(0, |a, g| a ^ g);
            let sum: u64 = groups.iter().sum();
            let check = match kind {
                SimpleCheckKind::XorNibbles
                | SimpleCheckKind::XorBytes
                | SimpleCheckKind::Parity => xor ^ constant,
                SimpleCheckKind::SumNibbles | SimpleCheckKind::SumBytes => (sum + constant) & mask,
                _ => constant.wrapping_sub(sum) & mask,
            };
            bits.extend(num_bits(check, w));
            entry("lamp-left.cu8", None, &bits, 1, f64::from(i))
        })
        .collect()
}

#[test]
fn simple_checks_are_found() {
    let mut rng = XorShift::new(71);
    let cases = [
        (SimpleCheckKind::XorNibbles, 28, 0x0),
        (SimpleCheckKind::XorNibbles, 26, 0xA), // leading partial nibble
        (SimpleCheckKind::SumNibbles, 28, 0x3),
        (SimpleCheckKind::XorBytes, 24, 0xFF),
        (SimpleCheckKind::SumBytes, 24, 0x00),
        (SimpleCheckKind::NegSumBytes, 32, 0x00),
        (SimpleCheckKind::Parity, 23, 1),
    ];
    for (kind, msg_bits, constant) in cases {
        let entries = simple_set(&mut rng, kind, msg_bits, constant);
        let report = compare(&entries, &CompareOptions::default()).expect("compare");
        let cs = &report.layouts[0].checksums;
        let hit = cs
            .simple
            .iter()
            .find(|s| s.kind == kind)
            .unwrap_or_else(|| panic!("{kind:?} not in {:?}", cs.simple));
        assert_eq!(u64::from(hit.constant), constant, "{kind:?}");
        assert_eq!(hit.supporting_codes, 12);
        if kind == SimpleCheckKind::XorNibbles {
            // The nibble XOR is also the CRC-4 with poly x^4 + 1 (Williams poly 0x1).
            assert!(
                cs.crc
                    .iter()
                    .any(|c| c.width == 4 && c.poly == 1 && !c.refin),
                "{:?}",
                cs.crc
            );
        }
    }
}

#[test]
fn errors_are_typed() {
    let opts = CompareOptions::default();
    assert!(matches!(compare(&[], &opts), Err(CompareError::NoCodes)));
    let bad = entry("x.cu8", None, &[1, 0], 1, 0.0);
    let mut bad2 = bad.clone();
    bad2.bits = "01a1".to_string();
    assert!(matches!(
        compare(&[bad.clone(), bad2], &opts),
        Err(CompareError::InvalidCode { index: 1, .. })
    ));
    let mut empty = bad.clone();
    empty.bits.clear();
    assert!(matches!(
        compare(&[empty], &opts),
        Err(CompareError::InvalidCode { .. })
    ));
    let mut nan = bad.clone();
    nan.first_start_s = f64::NAN;
    assert!(matches!(
        compare(&[bad.clone(), nan], &opts),
        Err(CompareError::InvalidCode { .. })
    ));
    let long = entry("x.cu8", None, &vec![1; 600], 1, 0.0);
    assert!(matches!(
        compare(&[long], &opts),
        Err(CompareError::CodeTooLong { bits: 600, .. })
    ));
    let other = entry("y.cu8", None, &[1, 0, 1], 1, 0.0);
    assert!(matches!(
        compare(&[bad.clone(), other], &opts),
        Err(CompareError::NothingToCompare {
            codes: 2,
            layouts: 2
        })
    ));
    let mut o = CompareOptions::default();
    o.crc_width_max = 17;
    assert!(matches!(
        compare(&[bad.clone(), bad.clone()], &o),
        Err(CompareError::InvalidOptions(_))
    ));
    let mut o = CompareOptions::default();
    o.max_codes = 3;
    let many = vec![bad; 4];
    assert!(matches!(
        compare(&many, &o),
        Err(CompareError::TooManyCodes { count: 4, limit: 3 })
    ));
}

#[test]
fn odd_inputs_never_panic() {
    let mut rng = XorShift::new(81);
    for _ in 0..200 {
        let n = 1 + rng.below(12) as usize;
        let entries: Vec<CodeEntry> = (0..n)
            .map(|i| {
                let span = if rng.below(2) == 0 { 4 } else { 40 };
                let len = 1 + rng.below(span) as usize;
                let bits = if rng.below(3) == 0 {
                    vec![1; len]
                } else {
                    rng.bits(len)
                };
                let label = match rng.below(3) {
                    0 => None,
                    1 => Some("unit-a"),
                    _ => Some("unit-b"),
                };
                let line = if rng.below(4) == 0 { "ppm" } else { "pwm" };
                let mut e = entry(
                    &format!("s{}.cu8", rng.below(3)),
                    label,
                    &bits,
                    rng.below(4) as u32,
                    i as f64,
                );
                e.line_code = line.to_string();
                e
            })
            .collect();
        if let Ok(report) = compare(&entries, &CompareOptions::default()) {
            let _ = render_text(&report);
            let mut buf = Vec::new();
            write_csv(&report, &mut buf).expect("csv to memory");
            serde_json::to_string(&report).expect("json");
        }
    }
}

fn schema_validator() -> jsonschema::Validator {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/schemas/compare.schema.json"
    ))
    .expect("schema file");
    let schema: serde_json::Value = serde_json::from_str(&text).expect("schema is JSON");
    jsonschema::draft202012::new(&schema).expect("schema compiles")
}

fn assert_valid(validator: &jsonschema::Validator, report: &CompareReport, what: &str) {
    let value = serde_json::to_value(report).expect("serialise");
    let errors: Vec<String> = validator
        .iter_errors(&value)
        .map(|e| format!("{} at {}", e, e.instance_path))
        .collect();
    assert!(errors.is_empty(), "{what}: {errors:#?}");
    // Round trip through JSON text gives the same report (floats to 1e-12 relative: serde_json
    // parses floats fast but not always to the last bit without its `float_roundtrip` feature).
    let text = serde_json::to_string(report).expect("json text");
    let back: CompareReport = serde_json::from_str(&text).expect("parse back");
    let again = serde_json::to_value(&back).expect("serialise again");
    assert!(same_json(&value, &again), "{what}: round trip differs");
}

fn same_json(a: &serde_json::Value, b: &serde_json::Value) -> bool {
    use serde_json::Value;
    match (a, b) {
        (Value::Number(x), Value::Number(y)) => match (x.as_f64(), y.as_f64()) {
            (Some(x), Some(y)) => x == y || (x - y).abs() <= 1e-12 * x.abs().max(y.abs()),
            _ => x == y,
        },
        (Value::Array(x), Value::Array(y)) => {
            x.len() == y.len() && x.iter().zip(y).all(|(p, q)| same_json(p, q))
        }
        (Value::Object(x), Value::Object(y)) => {
            x.len() == y.len()
                && x.iter()
                    .all(|(k, v)| y.get(k).is_some_and(|w| same_json(v, w)))
        }
        _ => a == b,
    }
}

#[test]
fn reports_validate_against_schema() {
    let validator = schema_validator();
    let opts = CompareOptions::default();
    let (fixed, _) = fixed_set(11, false);
    assert_valid(
        &validator,
        &compare(&fixed, &opts).expect("fixed"),
        "fixed inferred",
    );
    let (labelled, _) = fixed_set(12, true);
    assert_valid(
        &validator,
        &compare(&labelled, &opts).expect("labelled"),
        "fixed labelled",
    );
    let (counter, _) = counter_set(21);
    assert_valid(
        &validator,
        &compare(&counter, &opts).expect("counter"),
        "counter",
    );
    assert_valid(
        &validator,
        &compare(&random_rolling_set(31).0, &opts).expect("random"),
        "random",
    );
    let mut rng = XorShift::new(91);
    let p = CrcParams {
        width: 8,
        poly: 0x1D,
        init: 0xFF,
        refin: false,
        refout: false,
        xorout: 0xFF,
    };
    let mut crc = crc_set(&mut rng, &p, 24, 10);
    // A second layout with a single code, and a mixed labelled/unlabelled set.
    crc.push(entry("other.cu8", Some("unit-c"), &[1, 0, 1, 1], 2, 0.0));
    let report = compare(&crc, &opts).expect("crc");
    assert_eq!(report.layouts.len(), 2);
    assert!(report.layouts[0]
        .checksums
        .crc
        .iter()
        .any(|c| c.catalogue_names.iter().any(|n| n == "CRC-8/SAE-J1850")));
    assert_valid(&validator, &report, "crc + single-code layout");
    let mut mixed = fixed;
    for e in mixed.iter_mut().take(4) {
        e.label = Some("unit-a".to_string());
    }
    let report = compare(&mixed, &opts).expect("mixed");
    assert_eq!(report.layouts[0].grouping.method, GroupingMethod::Mixed);
    assert_valid(&validator, &report, "mixed labels");
    // The schema rejects a broken report.
    let mut value = serde_json::to_value(&report).expect("serialise");
    value["layouts"][0]["position_classes"][0] = serde_json::json!("sometimes");
    assert!(!validator.is_valid(&value));
}

#[test]
fn csv_has_documented_header_and_one_row_per_code() {
    let (entries, _) = fixed_set(13, true);
    let report = compare(&entries, &CompareOptions::default()).expect("compare");
    let mut buf = Vec::new();
    write_csv(&report, &mut buf).expect("csv");
    let mut reader = csv::Reader::from_reader(buf.as_slice());
    let header: Vec<String> = reader
        .headers()
        .expect("header")
        .iter()
        .map(str::to_string)
        .collect();
    let mut expected: Vec<String> = ooksift::compare::CSV_FIXED_COLUMNS
        .iter()
        .map(|s| s.to_string())
        .collect();
    expected.push("l0_address_0_20".to_string());
    expected.push("l0_key_20_4".to_string());
    assert_eq!(header, expected);
    let rows: Vec<csv::StringRecord> = reader.records().map(|r| r.expect("row")).collect();
    assert_eq!(rows.len(), entries.len());
    for (row, e) in rows.iter().zip(&entries) {
        assert_eq!(&row[1], e.source.as_str());
        assert_eq!(&row[3], e.label.as_deref().unwrap_or(""));
        assert_eq!(&row[9], e.bits.as_str());
        assert_eq!(&row[13], &e.bits[..20]);
        assert_eq!(&row[14], &e.bits[20..]);
    }
}

#[test]
fn text_view_aligns_codes_by_field() {
    let (entries, _) = fixed_set(11, true);
    let report = compare(&entries, &CompareOptions::default()).expect("compare");
    let text = render_text(&report);
    assert!(text.contains("AAAAAAAAAAAAAAAAAAAA KKKK"), "{text}");
    for e in &entries {
        let grouped = format!("{} {}", &e.bits[..20], &e.bits[20..]);
        let line = text
            .lines()
            .find(|l| l.contains(&grouped))
            .unwrap_or_else(|| panic!("{grouped} in\n{text}"));
        assert!(line.contains(e.label.as_deref().unwrap_or("?")));
    }
    // The bit columns of all code rows start at the same offset.
    let offsets: Vec<usize> = entries
        .iter()
        .filter_map(|e| text.lines().find_map(|l| l.find(&e.bits[..20])))
        .collect();
    assert!(offsets.windows(2).all(|w| w[0] == w[1]), "{offsets:?}");
    assert!(text.contains("code: fixed"));
    assert!(text.contains("every button distinguishable: yes"));
}
