//! Per-layout analysis: rolling parts, transmitter grouping, field map and verdicts. The method
//! is described in the [module docs of `compare`](super).

use std::collections::HashMap;

use super::bits::{hamming, pack, to_string, value_lsb, value_msb, IsNoneOr};
use super::checks;
use super::{
    BitOrder, CheckField, CodeEntry, CodeKind, CodePair, CompareOptions, CounterEvidence, Field,
    FieldClass, Grouping, GroupingMethod, Layout, Transmitter, Verdicts,
};

/// Longest segment considered by the description-length split.
const MAX_SEGMENT: usize = 128;
/// Smallest mean silhouette for an inferred cut to be kept (a common rule of thumb: above 0.5 is
/// "reasonable structure"; from memory of Rousseeuw 1987 / Kaufman & Rousseeuw 1990).
const MIN_SILHOUETTE: f64 = 0.5;
/// Most collisions listed.
const MAX_COLLISIONS: usize = 100;

/// Codes of one layout.
pub(crate) struct LayoutInput<'a> {
    pub(crate) layout: usize,
    pub(crate) several_layouts: bool,
    /// Global indices of the layout's codes, input order.
    pub(crate) members: &'a [usize],
    pub(crate) entries: &'a [CodeEntry],
    pub(crate) bits: Vec<&'a [u8]>,
    pub(crate) time_rank: Vec<usize>,
}

impl LayoutInput<'_> {
    fn n(&self) -> usize {
        self.bits.len()
    }
    fn len(&self) -> usize {
        self.bits.first().map_or(0, |b| b.len())
    }
    fn entry(&self, k: usize) -> &CodeEntry {
        &self.entries[self.members[k]]
    }
    fn weight(&self, k: usize) -> f64 {
        f64::from(self.entry(k).presses.max(1))
    }
    fn label(&self, k: usize) -> Option<&str> {
        self.entry(k).label.as_deref()
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum SegKind {
    Raw,
    Dict,
}

#[derive(Debug, Clone, Copy)]
struct Segment {
    start: usize,
    end: usize,
    kind: SegKind,
}

/// Minimum-description-length split of positions `0..len` into raw and dictionary segments.
fn segment(input: &LayoutInput<'_>, constant: &[bool], len: usize) -> Vec<Segment> {
    let n = input.n();
    let weights: Vec<f64> = (0..n).map(|k| input.weight(k)).collect();
    let total: f64 = weights.iter().sum();
    // Raw cost of one varying column: presses × its binary entropy (weighted by presses).
    let column_cost: Vec<f64> = (0..len)
        .map(|p| {
            let ones: f64 = (0..n)
                .filter(|&i| input.bits[i][p] == 1)
                .map(|i| weights[i])
                .sum();
            total * binary_entropy(ones / total)
        })
        .collect();
    // Coding one segment boundary costs the bits to name its position.
    let segment_cost = ((len + 1) as f64).log2();
    let mut best = vec![f64::INFINITY; len + 1];
    let mut back = vec![(0usize, SegKind::Dict); len + 1];
    best[0] = 0.0;
    let mut class = vec![0usize; n];
    let mut next: Vec<usize> = Vec::new();
    let mut class_weight: Vec<f64> = Vec::new();
    for a in 0..len {
        if !best[a].is_finite() {
            continue;
        }
        class.fill(0);
        let mut n_classes = 1usize;
        let mut k = 0usize;
        let mut raw = 0.0f64;
        for b in a + 1..=len.min(a + MAX_SEGMENT) {
            let p = b - 1;
            if !constant[p] {
                k += 1;
                raw += column_cost[p];
                next.clear();
                next.resize(2 * n_classes, usize::MAX);
                let mut count = 0;
                for (i, c) in class.iter_mut().enumerate() {
                    let key = *c * 2 + usize::from(input.bits[i][p]);
                    if next[key] == usize::MAX {
                        next[key] = count;
                        count += 1;
                    }
                    *c = next[key];
                }
                n_classes = count;
            }
            let (cost, kind) = if k == 0 {
                (0.0, SegKind::Dict)
            } else {
                class_weight.clear();
                class_weight.resize(n_classes, 0.0);
                for (i, &c) in class.iter().enumerate() {
                    class_weight[c] += weights[i];
                }
                let entropy: f64 = class_weight
                    .iter()
                    .filter(|&&w| w > 0.0)
                    .map(|&w| w * (total / w).log2())
                    .sum();
                let dict = (n_classes * k) as f64 + entropy;
                if raw < dict {
                    (raw, SegKind::Raw)
                } else {
                    (dict, SegKind::Dict)
                }
            };
            let c = best[a] + cost + segment_cost;
            if c < best[b] - 1e-9 {
                best[b] = c;
                back[b] = (a, kind);
            }
        }
    }
    let mut segs = Vec::new();
    let mut b = len;
    while b > 0 {
        let (a, kind) = back[b];
        segs.push(Segment {
            start: a,
            end: b,
            kind,
        });
        b = a;
    }
    segs.reverse();
    // Adjacent raw segments form one candidate.
    let mut merged: Vec<Segment> = Vec::new();
    for s in segs {
        match merged.last_mut() {
            Some(last) if last.kind == SegKind::Raw && s.kind == SegKind::Raw => last.end = s.end,
            _ => merged.push(s),
        }
    }
    merged
}

/// Entropy in bits of a binary variable that is 1 with probability `p`.
fn binary_entropy(p: f64) -> f64 {
    if p <= 0.0 || p >= 1.0 {
        0.0
    } else {
        -(p * p.log2() + (1.0 - p) * (1.0 - p).log2())
    }
}

/// P(X ≥ s) for X ~ Binomial(t, q).
fn binomial_tail(t: usize, s: usize, q: f64) -> f64 {
    if s == 0 {
        return 1.0;
    }
    if q <= 0.0 {
        return 0.0;
    }
    if q >= 1.0 {
        return 1.0;
    }
    let (lq, lp) = (q.ln(), (1.0 - q).ln());
    let mut ln_choose = 0.0f64;
    let mut sum = 0.0;
    for j in 0..=t {
        if j >= s {
            sum += (ln_choose + j as f64 * lq + (t - j) as f64 * lp).exp();
        }
        if j < t {
            ln_choose += ((t - j) as f64).ln() - ((j + 1) as f64).ln();
        }
    }
    sum.min(1.0)
}

/// Outcome of testing a raw segment for a rolling part.
enum Rolling {
    Counter {
        start: usize,
        end: usize,
        evidence: CounterEvidence,
        text: String,
    },
    Random {
        start: usize,
        end: usize,
        text: String,
    },
    NotShown {
        start: usize,
        end: usize,
        text: String,
    },
}

/// Groups codes by label and their bits on `anchor` positions.
fn anchor_groups(input: &LayoutInput<'_>, anchor: &[usize]) -> Vec<usize> {
    let mut ids: HashMap<(Option<&str>, Vec<u8>), usize> = HashMap::new();
    (0..input.n())
        .map(|k| {
            let key = (
                input.label(k),
                anchor.iter().map(|&p| input.bits[k][p]).collect(),
            );
            let next = ids.len();
            *ids.entry(key).or_insert(next)
        })
        .collect()
}

fn counter_test(
    input: &LayoutInput<'_>,
    start: usize,
    end: usize,
    groups: &[usize],
    opts: &CompareOptions,
) -> Option<CounterEvidence> {
    let k = end - start;
    if !(2..=62).contains(&k) {
        return None;
    }
    let modulus = 1u64 << k;
    let max_step = u64::from(opts.counter_max_step).min(modulus / 4);
    if max_step < 1 {
        return None;
    }
    let q = max_step as f64 / modulus as f64;
    let mut order: Vec<usize> = (0..input.n()).collect();
    order.sort_by_key(|&i| (groups[i], input.time_rank[i]));

    // A counter never repeats a value within a group: a code seen in several presses, or two
    // codes of a group with equal span bits, are repeats.
    let presses: f64 = (0..input.n()).map(|i| input.weight(i)).sum();
    let mut repeats = 0.0;
    let mut seen: HashMap<(usize, &[u8]), ()> = HashMap::new();
    for &i in &order {
        repeats += input.weight(i) - 1.0;
        if seen
            .insert((groups[i], &input.bits[i][start..end]), ())
            .is_some()
        {
            repeats += 1.0;
        }
    }
    if repeats / presses > opts.rolling_max_repeat_fraction {
        return None;
    }
    // Independent counters do not run through the same values in the same order; keys pressed
    // in the same order on every unit do.
    let mut sequences: Vec<Vec<&[u8]>> = Vec::new();
    for w in order.chunk_by(|a, b| groups[*a] == groups[*b]) {
        if w.len() >= 2 {
            sequences.push(w.iter().map(|&i| &input.bits[i][start..end]).collect());
        }
    }
    if sequences.len() >= 2 && sequences.windows(2).all(|w| w[0] == w[1]) {
        return None;
    }

    let mut best: Option<CounterEvidence> = None;
    for bit_order in [BitOrder::MsbFirst, BitOrder::LsbFirst] {
        let value = |i: usize| {
            let field = &input.bits[i][start..end];
            match bit_order {
                BitOrder::MsbFirst => value_msb(field),
                BitOrder::LsbFirst => value_lsb(field),
            }
        };
        let (mut steps, mut small) = (0usize, 0usize);
        for w in order.windows(2) {
            if groups[w[0]] != groups[w[1]] {
                continue;
            }
            steps += 1;
            let step = value(w[1]).wrapping_sub(value(w[0])) & (modulus - 1);
            if (1..=max_step).contains(&step) {
                small += 1;
            }
        }
        let chance = binomial_tail(steps, small, q);
        let ev = CounterEvidence {
            bit_order,
            steps,
            small_steps: small,
            max_step,
            chance,
        };
        if best.is_none_or_compat(|b| ev.small_steps > b.small_steps) {
            best = Some(ev);
        }
    }
    // The caller compares `chance` with the threshold, corrected for the spans it tried.
    best.filter(|ev| ev.steps >= 3 && 4 * ev.small_steps >= 3 * ev.steps)
}

/// Best counter span among `spans`: fewest large steps, then most varying bits, then least
/// chance. `groups_for(a, b)` groups the codes for a span; `varying(a, b)` counts its bits.
/// Spans count only when their chance times the number of spans tried is at most
/// `max_false_match` (Bonferroni correction for trying many spans).
fn best_counter_span(
    input: &LayoutInput<'_>,
    spans: impl Iterator<Item = (usize, usize)>,
    groups_for: impl Fn(usize, usize) -> Vec<usize>,
    varying: impl Fn(usize, usize) -> usize,
    opts: &CompareOptions,
) -> Option<(usize, usize, CounterEvidence)> {
    let spans: Vec<(usize, usize)> = spans.collect();
    let tried = spans.len().max(1) as f64;
    let mut best: Option<(usize, usize, usize, CounterEvidence)> = None;
    for (a, b) in spans {
        let groups = groups_for(a, b);
        let Some(mut ev) = counter_test(input, a, b, &groups, opts) else {
            continue;
        };
        ev.chance = (ev.chance * tried).min(1.0);
        if ev.chance > opts.max_false_match {
            continue;
        }
        let v = varying(a, b);
        let rank = |v: usize, e: &CounterEvidence| (e.steps - e.small_steps, usize::MAX - v);
        let better = best.as_ref().is_none_or_compat(|(_, _, bv, be)| {
            rank(v, &ev) < rank(*bv, be) || (rank(v, &ev) == rank(*bv, be) && ev.chance < be.chance)
        });
        if better {
            best = Some((a, b, v, ev));
        }
    }
    best.map(|(a, b, _, ev)| (a, b, ev))
}

fn test_rolling(
    input: &LayoutInput<'_>,
    seg: Segment,
    constant: &[bool],
    anchor: &[usize],
    opts: &CompareOptions,
) -> Option<Rolling> {
    // Trim constant ends.
    let mut start = seg.start;
    let mut end = seg.end;
    while start < end && constant[start] {
        start += 1;
    }
    while end > start && constant[end - 1] {
        end -= 1;
    }
    if start == end {
        return None;
    }
    let varying = (start..end).filter(|&p| !constant[p]).count();
    let presses: f64 = (0..input.n()).map(|k| input.weight(k)).sum();
    let mut distinct: HashMap<&[u8], ()> = HashMap::new();
    for k in 0..input.n() {
        distinct.insert(&input.bits[k][start..end], ());
    }
    let repeat_fraction = (presses - distinct.len() as f64) / presses;
    let few_repeats = repeat_fraction <= opts.rolling_max_repeat_fraction;
    let summary = span_summary(input, start, end);
    let groups = anchor_groups(input, anchor);
    let spans = (start..end)
        .flat_map(|a| (a + 2..=end.min(a + MAX_COUNTER_SPAN)).map(move |b| (a, b)))
        .filter(|&(a, b)| !constant[a] && !constant[b - 1]);
    let found = best_counter_span(
        input,
        spans,
        |_, _| groups.clone(),
        |a, b| (a..b).filter(|&p| !constant[p]).count(),
        opts,
    );
    if let Some((a, b, ev)) = found {
        let text = counter_text(&span_summary(input, a, b), &ev);
        return Some(Rolling::Counter {
            start: a,
            end: b,
            evidence: ev,
            text,
        });
    }
    if few_repeats {
        let enough_presses = presses >= f64::from(opts.rolling_min_presses);
        let enough_bits = varying as f64 >= 2.0 * presses.log2();
        if enough_presses && enough_bits {
            let text =
                format!("{summary}; {varying} varying bits ≥ 2·log2(presses), no counter steps");
            return Some(Rolling::Random { start, end, text });
        }
        let why = if !enough_presses {
            format!("fewer than {} presses", opts.rolling_min_presses)
        } else {
            format!("only {varying} varying bits: a random part that short would repeat")
        };
        let text = format!(
            "{summary}: a new value in (nearly) every press, but {why}; kept as address/key — \
             capture more presses of one button to tell"
        );
        return Some(Rolling::NotShown { start, end, text });
    }
    None
}

/// Result of the transmitter grouping of a layout.
struct Groups {
    of: Vec<usize>,
    grouping: Grouping,
}

/// Single-linkage clustering of `subset` on packed identity vectors, cut by best silhouette.
///
/// Codes with equal identity bits (the same button pressed again, or a rolling code's presses)
/// are one point: otherwise every button would form a zero-width cluster and the silhouette would
/// favour splitting buttons rather than transmitters. With only two distinct points there is no
/// cut to compare, so they stay one group.
///
/// Returns cluster ids per subset member (0-based, ordered by first member), merge distances,
/// cut and best silhouette.
fn infer(subset: &[usize], ident: &[Vec<u64>]) -> (Vec<usize>, Vec<u32>, Option<u32>, Option<f64>) {
    let mut point_of: Vec<usize> = Vec::with_capacity(subset.len());
    let mut points: Vec<usize> = Vec::new(); // representative code of each distinct point
    {
        let mut ids: HashMap<&[u64], usize> = HashMap::new();
        for &i in subset {
            let next = points.len();
            let id = *ids.entry(ident[i].as_slice()).or_insert_with(|| {
                points.push(i);
                next
            });
            point_of.push(id);
        }
    }
    let m = points.len();
    if m < 2 {
        return (vec![0; subset.len()], Vec::new(), None, None);
    }
    let d: Vec<Vec<u32>> = points
        .iter()
        .map(|&i| {
            points
                .iter()
                .map(|&j| hamming(&ident[i], &ident[j]))
                .collect()
        })
        .collect();
    // Prim's minimum spanning tree.
    let mut in_tree = vec![false; m];
    let mut dist = vec![u32::MAX; m];
    let mut parent = vec![0usize; m];
    let mut edges: Vec<(u32, usize, usize)> = Vec::with_capacity(m - 1);
    dist[0] = 0;
    for _ in 0..m {
        let Some(u) = (0..m)
            .filter(|&v| !in_tree[v])
            .min_by_key(|&v| (dist[v], v))
        else {
            break;
        };
        in_tree[u] = true;
        if u != 0 {
            edges.push((dist[u], parent[u], u));
        }
        for v in 0..m {
            if !in_tree[v] && d[u][v] < dist[v] {
                dist[v] = d[u][v];
                parent[v] = u;
            }
        }
    }
    let mut merge: Vec<u32> = edges.iter().map(|e| e.0).collect();
    merge.sort_unstable();
    let mut levels = merge.clone();
    levels.dedup();
    let max_level = levels.last().copied();
    let mut best: Option<(f64, u32, Vec<usize>)> = None;
    for &cut in levels.iter().filter(|&&c| Some(c) != max_level) {
        let labels = union_find_labels(m, edges.iter().filter(|e| e.0 <= cut).map(|e| (e.1, e.2)));
        let clusters = labels.iter().max().map_or(0, |&x| x + 1);
        if clusters < 2 {
            continue;
        }
        let s = silhouette(&d, &labels, clusters);
        if best.is_none_or_compat(|b| s > b.0) {
            best = Some((s, cut, labels));
        }
    }
    let n = subset.len();
    match best {
        Some((s, cut, labels)) if s >= MIN_SILHOUETTE => {
            // Renumber by first subset member.
            let mut ids: HashMap<usize, usize> = HashMap::new();
            let out = point_of
                .iter()
                .map(|&pt| {
                    let next = ids.len();
                    *ids.entry(labels[pt]).or_insert(next)
                })
                .collect();
            (out, merge, Some(cut), Some(s))
        }
        Some((s, _, _)) => (vec![0; n], merge, None, Some(s)),
        None => (vec![0; n], merge, None, None),
    }
}

/// Connected components, numbered by their smallest member.
fn union_find_labels(m: usize, edges: impl Iterator<Item = (usize, usize)>) -> Vec<usize> {
    let mut parent: Vec<usize> = (0..m).collect();
    fn find(p: &mut [usize], mut x: usize) -> usize {
        while p[x] != x {
            p[x] = p[p[x]];
            x = p[x];
        }
        x
    }
    for (a, b) in edges {
        let (ra, rb) = (find(&mut parent, a), find(&mut parent, b));
        if ra != rb {
            parent[ra.max(rb)] = ra.min(rb);
        }
    }
    let mut ids: HashMap<usize, usize> = HashMap::new();
    (0..m)
        .map(|x| {
            let r = find(&mut parent, x);
            let next = ids.len();
            *ids.entry(r).or_insert(next)
        })
        .collect()
}

/// Mean silhouette (Rousseeuw 1987); members of single-member clusters score 0.
fn silhouette(d: &[Vec<u32>], labels: &[usize], clusters: usize) -> f64 {
    let m = labels.len();
    let mut size = vec![0usize; clusters];
    for &l in labels {
        size[l] += 1;
    }
    let mut total = 0.0;
    let mut sums = vec![0f64; clusters];
    for i in 0..m {
        if size[labels[i]] < 2 {
            continue;
        }
        sums.fill(0.0);
        for j in 0..m {
            sums[labels[j]] += f64::from(d[i][j]);
        }
        let a = sums[labels[i]] / (size[labels[i]] - 1) as f64;
        let b = (0..clusters)
            .filter(|&c| c != labels[i] && size[c] > 0)
            .map(|c| sums[c] / size[c] as f64)
            .fold(f64::INFINITY, f64::min);
        let den = a.max(b);
        if den > 0.0 && b.is_finite() {
            total += (b - a) / den;
        }
    }
    total / m as f64
}

fn group_codes(input: &LayoutInput<'_>, cluster_pos: &[usize]) -> Groups {
    let n = input.n();
    let ident: Vec<Vec<u64>> = (0..n)
        .map(|k| {
            pack(
                &cluster_pos
                    .iter()
                    .map(|&p| input.bits[k][p])
                    .collect::<Vec<u8>>(),
            )
        })
        .collect();
    let labelled: Vec<usize> = (0..n).filter(|&k| input.label(k).is_some()).collect();
    let unlabelled: Vec<usize> = (0..n).filter(|&k| input.label(k).is_none()).collect();
    let method = match (labelled.is_empty(), unlabelled.is_empty()) {
        (false, true) => GroupingMethod::Labels,
        (true, _) => GroupingMethod::Inferred,
        (false, false) => GroupingMethod::Mixed,
    };
    let mut names: Vec<(String, bool)> = Vec::new();
    let mut of = vec![0usize; n];
    let mut by_label: HashMap<&str, usize> = HashMap::new();
    for &k in &labelled {
        let label = input.label(k).unwrap_or_default();
        let id = *by_label.entry(label).or_insert_with(|| {
            names.push((label.to_string(), true));
            names.len() - 1
        });
        of[k] = id;
    }
    let (ids, merge, cut, sil) = infer(&unlabelled, &ident);
    let offset = names.len();
    let inferred_count = ids.iter().max().map_or(0, |&x| x + 1);
    for c in 0..inferred_count {
        let mut name = if input.several_layouts {
            format!("L{}-tx{}", input.layout, c + 1)
        } else {
            format!("tx{}", c + 1)
        };
        while names.iter().any(|(n, _)| *n == name) {
            name.push('\'');
        }
        names.push((name, false));
    }
    for (&k, &c) in unlabelled.iter().zip(&ids) {
        of[k] = offset + c;
    }
    let rule = match method {
        GroupingMethod::Labels => "by label: every code has one".to_string(),
        _ => {
            let what = if method == GroupingMethod::Mixed {
                "labelled codes by label; the unlabelled ones"
            } else {
                "codes"
            };
            let verdict = match (cut, sil) {
                (Some(c), Some(s)) => format!(
                    "cut at distance {c} (mean silhouette {s:.2} ≥ {MIN_SILHOUETTE}) gives {inferred_count} groups"
                ),
                (None, Some(s)) => format!(
                    "best cut has mean silhouette {s:.2} < {MIN_SILHOUETTE}: kept as one group"
                ),
                _ => "no cut possible: one group".to_string(),
            };
            format!(
                "{what} clustered (equal codes as one point) by single linkage on Hamming \
                 distance over {} varying, non-rolling, non-check positions; {verdict}",
                cluster_pos.len()
            )
        }
    };
    let transmitters = names
        .iter()
        .enumerate()
        .map(|(g, (name, labelled))| Transmitter {
            name: name.clone(),
            labelled: *labelled,
            codes: (0..n)
                .filter(|&k| of[k] == g)
                .map(|k| input.members[k])
                .collect(),
        })
        .collect();
    Groups {
        of,
        grouping: Grouping {
            method,
            positions_used: cluster_pos.len(),
            merge_distances: merge,
            cut_distance: cut,
            silhouette: sil,
            rule,
            transmitters,
        },
    }
}

/// Groups codes on the positions `base` leaves open and classes those positions address or key.
fn assign(
    input: &LayoutInput<'_>,
    base: &[Option<FieldClass>],
) -> (Groups, Vec<Option<FieldClass>>) {
    let cluster_pos: Vec<usize> = (0..base.len()).filter(|&p| base[p].is_none()).collect();
    let groups = group_codes(input, &cluster_pos);
    let n_groups = groups.grouping.transmitters.len();
    let mut class = base.to_vec();
    for &p in &cluster_pos {
        let mut first: Vec<Option<u8>> = vec![None; n_groups];
        let mut varies = false;
        for k in 0..input.n() {
            let g = groups.of[k];
            match first[g] {
                None => first[g] = Some(input.bits[k][p]),
                Some(v) if v != input.bits[k][p] => varies = true,
                Some(_) => {}
            }
        }
        class[p] = Some(if varies {
            FieldClass::Key
        } else {
            FieldClass::Address
        });
    }
    (groups, class)
}

/// Longest counter span tried.
const MAX_COUNTER_SPAN: usize = 62;

/// Searches maximal runs of key, fixed and counter positions for the span that passes the counter
/// test with the fewest large steps, then the most varying bits. A span must contain a key position (something new) and may
/// not cut an existing counter field in two; it may swallow one, which extends that counter by
/// its slowly changing upper bits. Codes are grouped by transmitter and by the key bits outside
/// the span.
fn counter_in_key_runs(
    input: &LayoutInput<'_>,
    class: &[Option<FieldClass>],
    tx_of: &[usize],
    opts: &CompareOptions,
) -> Option<(usize, usize, CounterEvidence)> {
    let len = class.len();
    let is_key = |p: usize| class[p] == Some(FieldClass::Key);
    let is_counter = |p: usize| class[p] == Some(FieldClass::Counter);
    let in_run = |p: usize| {
        matches!(
            class[p],
            Some(FieldClass::Key | FieldClass::Fixed | FieldClass::Counter)
        )
    };
    let key_pos: Vec<usize> = (0..len).filter(|&p| is_key(p)).collect();
    let mut best: Option<(usize, usize, usize, CounterEvidence)> = None;
    let mut p = 0;
    while p < len {
        if !in_run(p) {
            p += 1;
            continue;
        }
        let r0 = p;
        while p < len && in_run(p) {
            p += 1;
        }
        let r1 = p;
        let edge = |q: usize| is_key(q) || is_counter(q);
        let spans = (r0..r1)
            .filter(|&a| edge(a) && !(a > r0 && is_counter(a) && is_counter(a - 1)))
            .flat_map(|a| (a + 2..=r1.min(a + MAX_COUNTER_SPAN)).map(move |b| (a, b)))
            .filter(|&(_, b)| edge(b - 1))
            .filter(|&(_, b)| !(b < r1 && is_counter(b - 1) && is_counter(b)))
            .filter(|&(a, b)| (a..b).any(is_key));
        let groups_for = |a: usize, b: usize| {
            let mut ids: HashMap<(usize, Vec<u8>), usize> = HashMap::new();
            (0..input.n())
                .map(|k| {
                    let outside: Vec<u8> = key_pos
                        .iter()
                        .filter(|&&q| q < a || q >= b)
                        .map(|&q| input.bits[k][q])
                        .collect();
                    let next = ids.len();
                    *ids.entry((tx_of[k], outside)).or_insert(next)
                })
                .collect()
        };
        let varying = |a: usize, b: usize| (a..b).filter(|&q| is_key(q) || is_counter(q)).count();
        if let Some((a, b, ev)) = best_counter_span(input, spans, groups_for, varying, opts) {
            let better = best.as_ref().is_none_or_compat(|(_, _, bv, be)| {
                (ev.steps - ev.small_steps, usize::MAX - varying(a, b))
                    < (be.steps - be.small_steps, usize::MAX - *bv)
            });
            if better {
                best = Some((a, b, varying(a, b), ev));
            }
        }
    }
    best.map(|(a, b, _, ev)| (a, b, ev))
}

/// "bits a..b: D distinct values over P presses (R % repeat)".
fn span_summary(input: &LayoutInput<'_>, start: usize, end: usize) -> String {
    let presses: f64 = (0..input.n()).map(|k| input.weight(k)).sum();
    let mut distinct: HashMap<&[u8], ()> = HashMap::new();
    for k in 0..input.n() {
        distinct.insert(&input.bits[k][start..end], ());
    }
    let repeat_fraction = (presses - distinct.len() as f64) / presses;
    format!(
        "bits {start}..{end}: {} distinct values over {presses} presses ({:.0} % repeat)",
        distinct.len(),
        100.0 * repeat_fraction
    )
}

/// Evidence sentence of a counter.
fn counter_text(summary: &str, ev: &CounterEvidence) -> String {
    format!(
        "{summary}; read {}, {} of {} time-ordered steps within 1..={} (chance {:.1e})",
        match ev.bit_order {
            BitOrder::MsbFirst => "MSB first",
            BitOrder::LsbFirst => "LSB first",
        },
        ev.small_steps,
        ev.steps,
        ev.max_step,
        ev.chance
    )
}

/// Refines the counter field `[start, end)`: its upper bits change only at carries, so before
/// this they may look like address bits that split one transmitter in two, and the first span
/// found may hold a neighbouring key bit. Every span `[a, b)` within reach (no check, random or
/// other counter position; at most [`MAX_COUNTER_SPAN`] bits) that overlaps the field is tried:
/// codes are grouped (with their label) by all other varying, non-rolling, non-check positions
/// outside the span, every varying position the span adds must change within some group, and
/// the counter test must pass (chance corrected for the spans tried). The best fit — fewest
/// large steps, then most varying bits, then least chance — replaces the field when it differs.
fn refine_counter(
    input: &LayoutInput<'_>,
    base: &[Option<FieldClass>],
    constant: &[bool],
    start: usize,
    end: usize,
    opts: &CompareOptions,
) -> Option<(usize, usize, CounterEvidence)> {
    let len = base.len();
    let mine = |p: usize| (start..end).contains(&p);
    let open = |p: usize| mine(p) || base[p].is_none() || base[p] == Some(FieldClass::Fixed);
    let mut lo = start;
    while lo > 0 && open(lo - 1) && end - (lo - 1) <= MAX_COUNTER_SPAN {
        lo -= 1;
    }
    let mut hi = end;
    while hi < len && open(hi) && hi + 1 - start <= MAX_COUNTER_SPAN {
        hi += 1;
    }
    let spans = (lo..hi)
        .flat_map(|a| (a + 2..=hi.min(a + MAX_COUNTER_SPAN)).map(move |b| (a, b)))
        .filter(|&(a, b)| a < end && b > start && !constant[a] && !constant[b - 1]);
    let groups_for = |a: usize, b: usize| {
        let anchor: Vec<usize> = (0..len)
            .filter(|&p| (p < a || p >= b) && !constant[p] && (base[p].is_none() || mine(p)))
            .collect();
        let groups = anchor_groups(input, &anchor);
        let added_vary = (a..b)
            .filter(|&p| !mine(p) && !constant[p])
            .all(|p| varies_within(input, &groups, p));
        if added_vary {
            groups
        } else {
            // Make the counter test fail: every code its own group leaves no steps.
            (0..input.n()).collect()
        }
    };
    let varying = |a: usize, b: usize| (a..b).filter(|&p| !constant[p]).count();
    let best = best_counter_span(input, spans, groups_for, varying, opts)?;
    ((best.0, best.1) != (start, end)).then_some(best)
}

/// Whether position `p` takes two values within one group.
fn varies_within(input: &LayoutInput<'_>, groups: &[usize], p: usize) -> bool {
    let mut first: HashMap<usize, u8> = HashMap::new();
    (0..input.n()).any(|k| *first.entry(groups[k]).or_insert(input.bits[k][p]) != input.bits[k][p])
}

/// Analyses one layout. Returns the layout and, per layout code, (transmitter, field values).
pub(crate) fn analyse(
    input: &LayoutInput<'_>,
    opts: &CompareOptions,
) -> (Layout, Vec<(String, Vec<String>)>) {
    let n = input.n();
    let len = input.len();
    let mut notes = Vec::new();

    // 1. Checksum search over distinct codewords.
    let mut distinct_codes: Vec<&[u8]> = Vec::new();
    {
        let mut seen: HashMap<&[u8], ()> = HashMap::new();
        for &b in &input.bits {
            if seen.insert(b, ()).is_none() {
                distinct_codes.push(b);
            }
        }
    }
    let checksums = checks::search(
        &distinct_codes,
        opts.crc_width_min,
        opts.crc_width_max,
        opts.max_false_match,
    );
    let check_field = checksums.widest().and_then(|(w, by)| {
        let w = w as usize;
        (w < len).then(|| CheckField {
            start: len - w,
            length: w,
            explained_by: by,
        })
    });
    let msg_len = check_field.as_ref().map_or(len, |c| c.start);

    // 2. Constant positions and rolling parts found from the description-length split.
    let constant: Vec<bool> = (0..len)
        .map(|p| input.bits.iter().all(|b| b[p] == input.bits[0][p]))
        .collect();
    let segments = if n >= 2 {
        segment(input, &constant, msg_len)
    } else {
        Vec::new()
    };
    let anchor: Vec<usize> = segments
        .iter()
        .filter(|s| s.kind == SegKind::Dict)
        .flat_map(|s| s.start..s.end)
        .filter(|&p| !constant[p])
        .collect();
    let mut base: Vec<Option<FieldClass>> = vec![None; len];
    if let Some(c) = &check_field {
        for slot in &mut base[c.start..] {
            *slot = Some(FieldClass::Check);
        }
    }
    for p in 0..msg_len {
        if constant[p] {
            base[p] = Some(FieldClass::Fixed);
        }
    }
    let mut rolling_info: Vec<(usize, usize, String, Option<CounterEvidence>)> = Vec::new();
    let mut unresolved: Vec<(usize, usize, String)> = Vec::new();
    for seg in segments.iter().filter(|s| s.kind == SegKind::Raw) {
        match test_rolling(input, *seg, &constant, &anchor, opts) {
            Some(Rolling::Counter {
                start,
                end,
                evidence,
                text,
            }) => {
                for slot in &mut base[start..end] {
                    *slot = Some(FieldClass::Counter);
                }
                rolling_info.push((start, end, text, Some(evidence)));
            }
            Some(Rolling::Random { start, end, text }) => {
                for p in start..end {
                    if !constant[p] {
                        base[p] = Some(FieldClass::Random);
                    }
                }
                rolling_info.push((start, end, text, None));
            }
            Some(Rolling::NotShown { start, end, text }) => unresolved.push((start, end, text)),
            None => {}
        }
    }

    // 3. Transmitters and address/key over the remaining varying positions; then counters whose
    // slowly changing upper bits looked like keys, searched within runs of key positions with the
    // transmitters known; regroup after each find.
    let (mut groups, mut class) = assign(input, &base);
    for _ in 0..4 {
        let mut changed = false;
        if let Some((start, end, ev)) = counter_in_key_runs(input, &class, &groups.of, opts) {
            for slot in &mut base[start..end] {
                *slot = Some(FieldClass::Counter);
            }
            let text = counter_text(&span_summary(input, start, end), &ev);
            rolling_info.retain(|(s, e, _, _)| *e <= start || *s >= end);
            rolling_info.push((start, end, text, Some(ev)));
            changed = true;
        }
        let counters: Vec<(usize, usize, CounterEvidence)> = rolling_info
            .iter()
            .filter_map(|(s, e, _, ev)| ev.clone().map(|ev| (*s, *e, ev)))
            .collect();
        for (start, end, _) in counters {
            if let Some((a, b, grown)) = refine_counter(input, &base, &constant, start, end, opts) {
                for p in start..end {
                    base[p] = if constant[p] {
                        Some(FieldClass::Fixed)
                    } else {
                        None
                    };
                }
                for slot in &mut base[a..b] {
                    *slot = Some(FieldClass::Counter);
                }
                let text = counter_text(&span_summary(input, a, b), &grown);
                rolling_info.retain(|(s, e, _, _)| *e <= a || *s >= b);
                rolling_info.push((a, b, text, Some(grown)));
                changed = true;
            }
        }
        if !changed {
            break;
        }
        (groups, class) = assign(input, &base);
    }
    let n_groups = groups.grouping.transmitters.len();
    let mut not_shown = false;
    for (start, end, text) in unresolved {
        if !class[start..end]
            .iter()
            .any(|c| c.is_some_and(FieldClass::is_rolling))
        {
            not_shown = true;
            notes.push(text);
        }
    }
    let position_classes: Vec<FieldClass> = class
        .iter()
        .map(|c| c.unwrap_or(FieldClass::Fixed))
        .collect();

    // Fields.
    let mut by_time: Vec<usize> = (0..n).collect();
    by_time.sort_by_key(|&k| input.time_rank[k]);
    let total_presses: u64 = (0..n)
        .map(|k| u64::from(input.entry(k).presses.max(1)))
        .sum();
    let mut fields = Vec::new();
    let mut start = 0;
    while start < len {
        let c = position_classes[start];
        let mut end = start + 1;
        while end < len && position_classes[end] == c {
            end += 1;
        }
        let mut values: Vec<String> = Vec::new();
        for &k in &by_time {
            let v = to_string(&input.bits[k][start..end]);
            if !values.contains(&v) {
                values.push(v);
            }
        }
        let distinct = values.len();
        let (mut evidence, mut counter) = (Vec::new(), None);
        match c {
            FieldClass::Fixed => evidence.push(format!("same in all {n} codes")),
            FieldClass::Address => evidence.push(format!(
                "constant within each of {n_groups} transmitters; {distinct} distinct values"
            )),
            FieldClass::Key => evidence.push(format!(
                "varies within a transmitter; {distinct} distinct values over {total_presses} presses"
            )),
            FieldClass::Check => {
                if let Some(cf) = &check_field {
                    evidence.push(format!("explained by {}", cf.explained_by));
                }
            }
            FieldClass::Counter | FieldClass::Random => {
                if let Some((_, _, text, ev)) =
                    rolling_info.iter().find(|(s, e, _, _)| *s < end && start < *e)
                {
                    evidence.push(text.clone());
                    counter.clone_from(ev);
                }
            }
        }
        fields.push(Field {
            class: c,
            start,
            length: end - start,
            distinct,
            values,
            evidence,
            counter,
        });
        start = end;
    }
    let per_code: Vec<(String, Vec<String>)> = (0..n)
        .map(|k| {
            let tx = groups
                .grouping
                .transmitters
                .get(groups.of[k])
                .map(|t| t.name.clone())
                .unwrap_or_default();
            let vals = fields
                .iter()
                .map(|f| to_string(&input.bits[k][f.start..f.start + f.length]))
                .collect();
            (tx, vals)
        })
        .collect();

    // 5. Distances and verdicts.
    let packed: Vec<Vec<u64>> = input.bits.iter().map(|b| pack(b)).collect();
    let distances: Vec<Vec<u32>> = (0..n)
        .map(|i| (0..n).map(|j| hamming(&packed[i], &packed[j])).collect())
        .collect();
    let verdicts = verdicts(
        input,
        &position_classes,
        &groups,
        &distances,
        &fields,
        not_shown,
    );
    if n < 2 {
        notes.push("only one code of this line code and length: nothing to compare".to_string());
    }
    if groups.grouping.method != GroupingMethod::Labels
        && groups.grouping.cut_distance.is_none()
        && verdicts.buttons >= 2
    {
        notes.push(
            "transmitters inferred as one group; codes of different transmitters that carry one key \
             each look like one transmitter's keys — give labels to separate them"
                .to_string(),
        );
    }

    let layout = Layout {
        index: input.layout,
        line_code: input.entry(0).line_code.clone(),
        bit_count: len,
        codes: input.members.to_vec(),
        grouping: groups.grouping,
        position_classes,
        fields,
        check_field,
        verdicts,
        distances,
        checksums,
        notes,
    };
    (layout, per_code)
}

fn verdicts(
    input: &LayoutInput<'_>,
    classes: &[FieldClass],
    groups: &Groups,
    distances: &[Vec<u32>],
    fields: &[Field],
    not_shown: bool,
) -> Verdicts {
    let n = input.n();
    let g = |k: usize| input.members[k];

    // Fixed or rolling.
    let mut kind_evidence = Vec::new();
    let rolling: Vec<&Field> = fields.iter().filter(|f| f.class.is_rolling()).collect();
    let repeated: Vec<usize> = (0..n).filter(|&k| input.entry(k).presses >= 2).collect();
    let duplicates: usize = distances
        .iter()
        .enumerate()
        .map(|(i, row)| row.iter().skip(i + 1).filter(|&&d| d == 0).count())
        .sum();
    let code_kind = if !rolling.is_empty() {
        for f in &rolling {
            kind_evidence.push(format!(
                "{} field at bits {}..{}: {}",
                f.class.name(),
                f.start,
                f.start + f.length,
                f.evidence.join("; ")
            ));
        }
        CodeKind::Rolling
    } else if n < 2 {
        kind_evidence.push("only one code".to_string());
        CodeKind::Undetermined
    } else {
        if let Some(&k) = repeated.first() {
            kind_evidence.push(format!(
                "{} of {n} codes were each seen in two or more presses (e.g. code {} in {})",
                repeated.len(),
                g(k),
                input.entry(k).presses
            ));
        }
        if duplicates > 0 {
            kind_evidence.push(format!(
                "{duplicates} pairs of inputs carry identical codes"
            ));
        }
        if !not_shown {
            kind_evidence.push("every varying part repeats its values across presses".to_string());
        }
        if repeated.is_empty() && duplicates == 0 && not_shown {
            kind_evidence.push(
                "no code was seen twice and part of the code takes a new value in every press, \
                 but too few presses to call it rolling (see notes)"
                    .to_string(),
            );
            CodeKind::Undetermined
        } else {
            CodeKind::Fixed
        }
    };

    // Buttons and distinguishability.
    let ident_pos: Vec<usize> = (0..classes.len())
        .filter(|&p| matches!(classes[p], FieldClass::Address | FieldClass::Key))
        .collect();
    let ident: Vec<Vec<u64>> = (0..n)
        .map(|k| {
            pack(
                &ident_pos
                    .iter()
                    .map(|&p| input.bits[k][p])
                    .collect::<Vec<u8>>(),
            )
        })
        .collect();
    let mut buttons: HashMap<(usize, &[u64]), usize> = HashMap::new();
    for (k, id) in ident.iter().enumerate() {
        let next = buttons.len();
        buttons.entry((groups.of[k], id.as_slice())).or_insert(next);
    }
    let button_of: Vec<usize> = (0..n)
        .map(|k| {
            buttons
                .get(&(groups.of[k], ident[k].as_slice()))
                .copied()
                .unwrap_or(0)
        })
        .collect();
    let mut collisions = Vec::new();
    let mut closest_buttons: Option<CodePair> = None;
    let mut closest_codes: Option<CodePair> = None;
    for i in 0..n {
        for j in i + 1..n {
            let full = distances[i][j];
            if full > 0 && closest_codes.is_none_or_compat(|c| full < c.distance) {
                closest_codes = Some(CodePair {
                    a: g(i),
                    b: g(j),
                    distance: full,
                });
            }
            if button_of[i] == button_of[j] {
                continue;
            }
            let d = hamming(&ident[i], &ident[j]);
            if d == 0 && groups.of[i] != groups.of[j] && collisions.len() < MAX_COLLISIONS {
                collisions.push(CodePair {
                    a: g(i),
                    b: g(j),
                    distance: 0,
                });
            }
            if closest_buttons.is_none_or_compat(|c| d < c.distance) {
                closest_buttons = Some(CodePair {
                    a: g(i),
                    b: g(j),
                    distance: d,
                });
            }
        }
    }
    let names = &groups.grouping.transmitters;
    let tx_of = |global: usize| {
        names
            .iter()
            .find(|t| t.codes.contains(&global))
            .map_or("?", |t| t.name.as_str())
    };
    let mut dist_evidence = Vec::new();
    let distinguishable = if buttons.len() < 2 {
        dist_evidence.push(format!(
            "{} button(s): nothing to tell apart",
            buttons.len()
        ));
        None
    } else if !collisions.is_empty() {
        for c in collisions.iter().take(5) {
            dist_evidence.push(format!(
                "codes {} ({}) and {} ({}) have the same address and key bits",
                c.a,
                tx_of(c.a),
                c.b,
                tx_of(c.b)
            ));
        }
        Some(false)
    } else {
        if let Some(c) = closest_buttons {
            dist_evidence.push(format!(
                "{} buttons; closest: codes {} ({}) and {} ({}) differ in {} of {} address/key bits{}",
                buttons.len(),
                c.a,
                tx_of(c.a),
                c.b,
                tx_of(c.b),
                c.distance,
                ident_pos.len(),
                if c.distance == 1 { " — one bit error turns one into the other" } else { "" }
            ));
        }
        Some(true)
    };
    Verdicts {
        code_kind,
        code_kind_evidence: kind_evidence,
        buttons: buttons.len(),
        distinguishable,
        distinguishable_evidence: dist_evidence,
        identity_positions: ident_pos.len(),
        closest_buttons,
        collisions,
        closest_codes,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn binomial_tail_matches_hand_values() {
        // P(X ≥ 3), X ~ Bin(3, 0.5) = 1/8; P(X ≥ 1) = 7/8; P(X ≥ 0) = 1.
        assert!((binomial_tail(3, 3, 0.5) - 0.125).abs() < 1e-12);
        assert!((binomial_tail(3, 1, 0.5) - 0.875).abs() < 1e-12);
        assert_eq!(binomial_tail(3, 0, 0.5), 1.0);
        // P(X ≥ 2), X ~ Bin(4, 0.1) = 1 − 0.9^4 − 4·0.1·0.9^3 = 0.0523.
        assert!((binomial_tail(4, 2, 0.1) - 0.0523).abs() < 1e-12);
    }

    #[test]
    fn silhouette_of_two_tight_clusters() {
        // Two clusters {0,1} and {2,3}: within distance 1, between 9.
        let d = vec![
            vec![0, 1, 9, 9],
            vec![1, 0, 9, 9],
            vec![9, 9, 0, 1],
            vec![9, 9, 1, 0],
        ];
        let s = silhouette(&d, &[0, 0, 1, 1], 2);
        assert!((s - (9.0 - 1.0) / 9.0).abs() < 1e-12);
        assert_eq!(silhouette(&d, &[0, 1, 2, 3], 4), 0.0);
    }

    #[test]
    fn union_find_numbers_by_first_member() {
        let l = union_find_labels(5, [(3, 4), (1, 3)].into_iter());
        assert_eq!(l, vec![0, 1, 2, 1, 1]);
    }
}
