//! `spread`: flows, split shares and wall shear under the chip's tolerances — table, JSON
//! (with the mergeable Monte Carlo state) and CSV.

use super::csv::{n, Tables};
use super::fmt_sig;
use crate::analysis::spread::{stats::Accumulator, McState, Quantity, SpreadResult, Stat};
use crate::chip::design::TargetKind;
use crate::chip::Chip;
use crate::outcome::SpreadOutcome;
use serde::Serialize;
use std::io::{self, Write};

#[derive(Serialize)]
struct JsonContribution<'a> {
    variable: &'a str,
    share: f64,
}

#[derive(Serialize)]
struct JsonChannel<'a> {
    name: &'a str,
    flow_nominal_m3_per_s: f64,
    flow_mean_m3_per_s: f64,
    flow_std_m3_per_s: f64,
    flow_std_linear_m3_per_s: f64,
    flow_p05_m3_per_s: f64,
    flow_p95_m3_per_s: f64,
    linear_agrees: bool,
    linear_std_agrees: bool,
    linear_mean_agrees: bool,
    contributions: Vec<JsonContribution<'a>>,
}

#[derive(Serialize)]
struct JsonSplit<'a> {
    target: usize,
    channel: &'a str,
    share_wanted: f64,
    share_nominal: f64,
    share_mean: f64,
    share_std: f64,
    share_std_linear: f64,
    share_p05: f64,
    share_p95: f64,
    linear_agrees: bool,
    linear_std_agrees: bool,
    linear_mean_agrees: bool,
    contributions: Vec<JsonContribution<'a>>,
}

#[derive(Serialize)]
struct JsonShear<'a> {
    channel: &'a str,
    limit_pa: f64,
    probability_over_limit: f64,
    max_wall_shear_nominal_pa: f64,
    max_wall_shear_mean_pa: f64,
    max_wall_shear_std_pa: f64,
    max_wall_shear_std_linear_pa: f64,
    max_wall_shear_p05_pa: f64,
    max_wall_shear_p95_pa: f64,
    linear_agrees: bool,
    linear_std_agrees: bool,
    linear_mean_agrees: bool,
    contributions: Vec<JsonContribution<'a>>,
}

#[derive(Serialize)]
struct JsonTarget {
    target: usize,
    what: String,
    probability_missed: f64,
}

#[derive(Serialize)]
struct JsonRating {
    rating_pa: f64,
    probability_over_rating: f64,
}

#[derive(Serialize)]
struct JsonAccumulator {
    count: u64,
    /// Σ of the fixed-point deviations (a decimal integer: it can exceed 2⁵³).
    sum: String,
    /// Σ of their squares, as a 256-bit number [high, low] of decimal 128-bit halves.
    sum_sq: [String; 2],
    zeros: u64,
    positive: Vec<[i64; 2]>,
    negative: Vec<[i64; 2]>,
}

#[derive(Serialize)]
struct JsonState {
    chip_fingerprint: String,
    seed: u64,
    samples_total: u64,
    shard_index: u64,
    shard_count: u64,
    samples: u64,
    withheld: u64,
    first_withheld_index: Option<u64>,
    first_withheld_reason: Option<String>,
    good: u64,
    rating_exceeded: u64,
    target_misses: Vec<u64>,
    shear_exceeded: Vec<u64>,
    quantities: Vec<JsonAccumulator>,
}

#[derive(Serialize)]
struct JsonSpread<'a> {
    schema_version: u32,
    chip: &'a str,
    seed: u64,
    samples: u64,
    shard: String,
    samples_run: u64,
    samples_withheld: u64,
    #[serde(rename = "yield")]
    yield_fraction: f64,
    variables: Vec<&'a str>,
    channels: Vec<JsonChannel<'a>>,
    splits: Vec<JsonSplit<'a>>,
    shear: Vec<JsonShear<'a>>,
    targets: Vec<JsonTarget>,
    pressure_rating: Option<JsonRating>,
    method: &'static str,
    /// Channels whose numerically solved section is linearised (not re-solved per sample).
    linearised_sections_in: Vec<&'a str>,
    caution: &'static str,
    state: JsonState,
}

/// How the numbers were made (in every output).
pub const METHOD: &str = "first order: adjoint sensitivities, variance summed over independent \
draws (one per correlation group); Monte Carlo: counter-based draws per sample, each sample \
through the balance-checked solve; percentiles nearest-rank within 0.05 % relative (or 1e-4 of max(|nominal|, linear std) near 0); \
linear_agrees = |s - s_lin| <= 3 s/sqrt(2(n-1)) and |mean - nominal| <= 3 s/sqrt(n)";

fn contributions<'a>(r: &'a SpreadResult, s: &Stat) -> Vec<JsonContribution<'a>> {
    s.contributions
        .iter()
        .map(|&(j, share)| JsonContribution {
            variable: &r.variables[j].label,
            share,
        })
        .collect()
}

fn wanted_share(chip: &Chip, target: usize, channel: crate::network::ChannelId) -> f64 {
    match &chip.design.targets[target].kind {
        TargetKind::Split { channels, ratio } => {
            let sum: f64 = ratio.iter().sum();
            channels
                .iter()
                .position(|c| *c == channel)
                .map_or(f64::NAN, |i| ratio[i] / sum)
        }
        _ => f64::NAN,
    }
}

fn target_what(chip: &Chip, t: usize) -> String {
    let net = &chip.network;
    match &chip.design.targets[t].kind {
        TargetKind::ChannelFlow { channel, .. } => {
            format!("flow in {}", net.channels[*channel].name)
        }
        TargetKind::Split { channels, .. } => format!(
            "split {}",
            channels
                .iter()
                .map(|c| net.channels[*c].name.as_str())
                .collect::<Vec<_>>()
                .join(":")
        ),
        TargetKind::NodePressure { node, .. } => format!("pressure at {}", net.nodes[*node].name),
        TargetKind::WallShear { channel, .. } => {
            format!("wall shear in {}", net.channels[*channel].name)
        }
        TargetKind::Concentration {
            channel, species, ..
        } => format!("{species} in {}", net.channels[*channel].name),
    }
}

fn json_state(o: &SpreadOutcome) -> JsonState {
    let r = &o.result;
    let st: &McState = &r.state;
    let acc = |a: &Accumulator| JsonAccumulator {
        count: a.count,
        sum: a.sum.to_string(),
        sum_sq: [a.sum_sq.hi.to_string(), a.sum_sq.lo.to_string()],
        zeros: a.zeros,
        positive: (a.positive.counts().into_iter())
            .map(|(k, c)| [k, c as i64])
            .collect(),
        negative: (a.negative.counts().into_iter())
            .map(|(k, c)| [k, c as i64])
            .collect(),
    };
    JsonState {
        chip_fingerprint: o.fingerprint.clone(),
        seed: r.seed,
        samples_total: r.total_samples,
        shard_index: r.shard.index,
        shard_count: r.shard.count,
        samples: st.samples,
        withheld: st.withheld,
        first_withheld_index: st.first_withheld.as_ref().map(|w| w.0),
        first_withheld_reason: st.first_withheld.as_ref().map(|w| w.1.clone()),
        good: st.good,
        rating_exceeded: st.rating_exceeded,
        target_misses: st.target_misses.clone(),
        shear_exceeded: st.shear_exceeded.clone(),
        quantities: st.quantities.iter().map(acc).collect(),
    }
}

pub(crate) fn spread_json(o: &SpreadOutcome, w: &mut dyn Write) -> io::Result<()> {
    let (chip, r) = (&o.chip, &o.result);
    let net = &chip.network;
    let mut channels = Vec::new();
    let mut splits = Vec::new();
    let mut shear = Vec::new();
    for s in &r.stats {
        match s.quantity {
            Quantity::Flow(c) => channels.push(JsonChannel {
                name: &net.channels[c].name,
                flow_nominal_m3_per_s: s.nominal,
                flow_mean_m3_per_s: s.mean,
                flow_std_m3_per_s: s.std,
                flow_std_linear_m3_per_s: s.std_linear,
                flow_p05_m3_per_s: s.p05,
                flow_p95_m3_per_s: s.p95,
                linear_agrees: s.agree,
                linear_std_agrees: s.std_agrees,
                linear_mean_agrees: s.mean_agrees,
                contributions: contributions(r, s),
            }),
            Quantity::Share { target, channel } => splits.push(JsonSplit {
                target,
                channel: &net.channels[channel].name,
                share_wanted: wanted_share(chip, target, channel),
                share_nominal: s.nominal,
                share_mean: s.mean,
                share_std: s.std,
                share_std_linear: s.std_linear,
                share_p05: s.p05,
                share_p95: s.p95,
                linear_agrees: s.agree,
                linear_std_agrees: s.std_agrees,
                linear_mean_agrees: s.mean_agrees,
                contributions: contributions(r, s),
            }),
            Quantity::MaxShear(c) => {
                let (limit, p) = r
                    .shear_exceed
                    .iter()
                    .find(|e| e.0 == c)
                    .map_or((f64::NAN, f64::NAN), |e| (e.1, e.2));
                shear.push(JsonShear {
                    channel: &net.channels[c].name,
                    limit_pa: limit,
                    probability_over_limit: p,
                    max_wall_shear_nominal_pa: s.nominal,
                    max_wall_shear_mean_pa: s.mean,
                    max_wall_shear_std_pa: s.std,
                    max_wall_shear_std_linear_pa: s.std_linear,
                    max_wall_shear_p05_pa: s.p05,
                    max_wall_shear_p95_pa: s.p95,
                    linear_agrees: s.agree,
                    linear_std_agrees: s.std_agrees,
                    linear_mean_agrees: s.mean_agrees,
                    contributions: contributions(r, s),
                })
            }
        }
    }
    let doc = JsonSpread {
        schema_version: super::json::SCHEMA_VERSION,
        chip: chip.title(),
        seed: r.seed,
        samples: r.total_samples,
        shard: format!("{}/{}", r.shard.index, r.shard.count),
        samples_run: r.samples,
        samples_withheld: r.withheld,
        yield_fraction: r.yield_fraction,
        variables: r.variables.iter().map(|v| v.label.as_str()).collect(),
        channels,
        splits,
        shear,
        targets: (r.target_miss.iter().enumerate())
            .map(|(t, &p)| JsonTarget {
                target: t,
                what: target_what(chip, t),
                probability_missed: p,
            })
            .collect(),
        pressure_rating: r.rating_exceed.map(|(rating, p)| JsonRating {
            rating_pa: rating,
            probability_over_rating: p,
        }),
        method: METHOD,
        linearised_sections_in: (r.linearised.iter())
            .map(|c| net.channels[*c].name.as_str())
            .collect(),
        caution: super::CAUTION,
        state: json_state(o),
    };
    super::json::write_json(&doc, w)
}

/// Captions of the report's spread pictures (distributions, tornado chart).
pub(crate) fn captions(r: &SpreadResult) -> (String, String) {
    (
        format!(
            "Spread under the chip's tolerances: Monte Carlo distributions of the key flows, \
             splits and wall shear ({} samples, seed {}), with targets, tolerance bands and \
             limits; `rillnet spread` gives the tables.",
            r.samples - r.withheld,
            r.seed
        ),
        "What drives the spread: first-order variance contributions of the tolerances to the \
         key quantities."
            .into(),
    )
}

/// The name of a quantity for tables.
fn quantity_name(chip: &Chip, q: Quantity) -> String {
    let net = &chip.network;
    match q {
        Quantity::Flow(c) => format!("flow {}", net.channels[c].name),
        Quantity::Share { target, channel } => {
            format!(
                "share {} (target {})",
                net.channels[channel].name,
                target + 1
            )
        }
        Quantity::MaxShear(c) => format!("max shear {}", net.channels[c].name),
    }
}

fn unit(q: Quantity) -> &'static str {
    match q {
        Quantity::Flow(_) => "uL/min",
        Quantity::Share { .. } => "",
        Quantity::MaxShear(_) => "Pa",
    }
}

fn shown(q: Quantity, v: f64) -> String {
    let v = match q {
        Quantity::Flow(_) => v * 6e10,
        _ => v,
    };
    if v.is_finite() {
        fmt_sig(v, 4)
    } else {
        "-".into()
    }
}

fn percent(p: f64) -> String {
    if p.is_finite() {
        format!("{} %", fmt_sig(100.0 * p, 3))
    } else {
        "-".into()
    }
}

pub(crate) fn spread_table(o: &SpreadOutcome, w: &mut dyn Write) -> io::Result<()> {
    let (chip, r) = (&o.chip, &o.result);
    let mut s = String::new();
    s.push_str(&format!(
        "Spread of {} under its tolerances: {} samples (shard {}/{} of {}), seed {}, {} withheld\n\n",
        chip.title(),
        r.samples,
        r.shard.index,
        r.shard.count,
        r.total_samples,
        r.seed,
        r.withheld
    ));
    s.push_str(&format!(
        "{:<34} {:>6} {:>11} {:>11} {:>11} {:>11} {:>11} {:>11}  linear\n",
        "quantity", "unit", "nominal", "mean", "std (MC)", "std (lin)", "p05", "p95"
    ));
    for st in &r.stats {
        let q = st.quantity;
        s.push_str(&format!(
            "{:<34} {:>6} {:>11} {:>11} {:>11} {:>11} {:>11} {:>11}  {}\n",
            quantity_name(chip, q),
            unit(q),
            shown(q, st.nominal),
            shown(q, st.mean),
            shown(q, st.std),
            shown(q, st.std_linear),
            shown(q, st.p05),
            shown(q, st.p95),
            match (st.std_agrees, st.mean_agrees) {
                (true, true) => "agrees",
                (false, true) => "DISAGREES (std)",
                (true, false) => "DISAGREES (mean)",
                (false, false) => "DISAGREES (std, mean)",
            }
        ));
    }
    if r.stats.iter().any(|st| !st.agree) {
        s.push_str(
            "\nDISAGREES: Monte Carlo differs from the first-order answer beyond its sampling \
             error (std: the standard deviations; mean: the mean moved off the nominal value, \
             which a linearisation cannot show); there the first-order answer is not to be \
             trusted.\n",
        );
    }
    s.push_str("\nLargest shares of the first-order variance\n");
    for st in &r.stats {
        let top: Vec<String> = (st.contributions.iter().take(3))
            .map(|&(j, share)| format!("{} {}", r.variables[j].label, percent(share)))
            .collect();
        if !top.is_empty() {
            s.push_str(&format!(
                "  {:<34} {}\n",
                quantity_name(chip, st.quantity),
                top.join(", ")
            ));
        }
    }
    if !r.target_miss.is_empty() {
        s.push_str("\nProbability of missing a target by more than its tolerance\n");
        for (t, p) in r.target_miss.iter().enumerate() {
            s.push_str(&format!("  {:<40} {}\n", target_what(chip, t), percent(*p)));
        }
    }
    if !r.shear_exceed.is_empty() {
        s.push_str("\nProbability of exceeding the wall-shear limit\n");
        for (c, limit, p) in &r.shear_exceed {
            s.push_str(&format!(
                "  {:<40} limit {} Pa: {}\n",
                chip.network.channels[*c].name,
                fmt_sig(*limit, 4),
                percent(*p)
            ));
        }
    }
    if let Some((rating, p)) = r.rating_exceed {
        s.push_str(&format!(
            "\nProbability of a static pressure over the rating ({} Pa): {}\n",
            fmt_sig(rating, 4),
            percent(p)
        ));
    }
    s.push_str(&format!(
        "\nYield (every target and limit met; withheld samples count as failed): {}\n",
        percent(r.yield_fraction)
    ));
    if let Some((i, why)) = &r.first_withheld {
        s.push_str(&format!("First withheld sample: #{i}: {why}\n"));
    }
    if !r.linearised.is_empty() {
        let names: Vec<&str> = (r.linearised.iter())
            .map(|c| chip.network.channels[*c].name.as_str())
            .collect();
        s.push_str(&format!(
            "\nNumerically solved sections are not re-solved per sample: ln K is taken linear in \
             each toleranced dimension (slope from converged solves) and tau_max/G kept \
             nominal, in channels {}.\n",
            names.join(", ")
        ));
    }
    s.push_str(&format!("\nMethod: {METHOD}.\n"));
    if !r.shear_exceed.is_empty() || r.rating_exceed.is_some() {
        s.push_str(&format!("\n{}\n", super::CAUTION));
    }
    w.write_all(s.as_bytes())
}

pub(crate) fn spread_csv(o: &SpreadOutcome, t: &mut Tables<'_>) -> io::Result<()> {
    let (chip, r) = (&o.chip, &o.result);
    let kind = |q: Quantity| match q {
        Quantity::Flow(_) => "flow_m3_per_s",
        Quantity::Share { .. } => "share",
        Quantity::MaxShear(_) => "max_wall_shear_pa",
    };
    let name = |q: Quantity| match q {
        Quantity::Flow(c) | Quantity::MaxShear(c) | Quantity::Share { channel: c, .. } => {
            chip.network.channels[c].name.clone()
        }
    };
    t.table(
        &[
            "record",
            "channel",
            "quantity",
            "target",
            "nominal",
            "mean",
            "std",
            "std_linear",
            "p05",
            "p95",
            "linear_agrees",
        ],
        r.stats.iter().map(|st| {
            let q = st.quantity;
            vec![
                "spread".into(),
                name(q),
                kind(q).into(),
                match q {
                    Quantity::Share { target, .. } => target.to_string(),
                    _ => String::new(),
                },
                n(st.nominal),
                n(st.mean),
                n(st.std),
                n(st.std_linear),
                n(st.p05),
                n(st.p95),
                st.agree.to_string(),
            ]
        }),
    )?;
    t.table(
        &[
            "record", "channel", "quantity", "target", "rank", "variable", "share",
        ],
        r.stats.iter().flat_map(|st| {
            let q = st.quantity;
            st.contributions
                .iter()
                .enumerate()
                .map(move |(rank, &(j, share))| {
                    vec![
                        "contribution".into(),
                        name(q),
                        kind(q).into(),
                        match q {
                            Quantity::Share { target, .. } => target.to_string(),
                            _ => String::new(),
                        },
                        (rank + 1).to_string(),
                        r.variables[j].label.clone(),
                        n(share),
                    ]
                })
        }),
    )?;
    let mut rows: Vec<Vec<String>> = (r.target_miss.iter().enumerate())
        .map(|(i, p)| vec!["target_missed".into(), target_what(chip, i), n(*p)])
        .collect();
    rows.extend(r.shear_exceed.iter().map(|(c, _, p)| {
        vec![
            "over_shear_limit".into(),
            chip.network.channels[*c].name.clone(),
            n(*p),
        ]
    }));
    if let Some((_, p)) = r.rating_exceed {
        rows.push(vec!["over_rating".into(), "chip".into(), n(p)]);
    }
    rows.push(vec!["yield".into(), "chip".into(), n(r.yield_fraction)]);
    t.table(&["record", "what", "probability"], rows)
}
