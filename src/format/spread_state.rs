//! Reading back the `state` of a `spread --format json` output, to merge shards.

use crate::analysis::spread::stats::{Accumulator, Buckets, Wide};
use crate::analysis::spread::{McState, Shard};
use serde::Deserialize;

#[derive(Deserialize)]
struct Doc {
    state: StateSpec,
}

#[derive(Deserialize)]
struct AccSpec {
    count: u64,
    sum: String,
    sum_sq: [String; 2],
    zeros: u64,
    positive: Vec<[i64; 2]>,
    negative: Vec<[i64; 2]>,
}

#[derive(Deserialize)]
struct StateSpec {
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
    quantities: Vec<AccSpec>,
}

/// One shard's output as read back.
#[derive(Clone, Debug)]
pub struct ShardState {
    pub fingerprint: String,
    pub seed: u64,
    pub samples_total: u64,
    pub shard: Shard,
    pub state: McState,
}

/// Parse a `spread --format json` document's state; the error says what is wrong.
pub fn parse_shard(text: &str) -> Result<ShardState, String> {
    let doc: Doc = serde_json::from_str(text).map_err(|e| {
        format!(
            "not a 'rillnet spread --format json' output ({e}) at line {}",
            e.line()
        )
    })?;
    let s = doc.state;
    let counts = |v: &[[i64; 2]]| -> Result<Buckets, String> {
        let pairs = (v.iter())
            .map(|[k, c]| {
                u64::try_from(*c)
                    .map(|c| (*k, c))
                    .map_err(|_| format!("negative bucket count {c}"))
            })
            .collect::<Result<Vec<_>, String>>()?;
        Ok(Buckets::from_counts(pairs))
    };
    let quantities = s
        .quantities
        .iter()
        .map(|a| {
            let int = |t: &str| {
                t.parse::<u128>()
                    .map_err(|_| format!("'{t}' is not a count"))
            };
            Ok(Accumulator {
                count: a.count,
                sum: a
                    .sum
                    .parse::<i128>()
                    .map_err(|_| format!("'{}' is not a sum", a.sum))?,
                sum_sq: Wide {
                    hi: int(&a.sum_sq[0])?,
                    lo: int(&a.sum_sq[1])?,
                },
                zeros: a.zeros,
                positive: counts(&a.positive)?,
                negative: counts(&a.negative)?,
            })
        })
        .collect::<Result<Vec<_>, String>>()?;
    if s.shard_count == 0 || s.shard_index == 0 || s.shard_index > s.shard_count {
        return Err(format!(
            "shard {}/{} is not a shard i/n with 1 <= i <= n",
            s.shard_index, s.shard_count
        ));
    }
    Ok(ShardState {
        fingerprint: s.chip_fingerprint,
        seed: s.seed,
        samples_total: s.samples_total,
        shard: Shard {
            index: s.shard_index,
            count: s.shard_count,
        },
        state: McState {
            samples: s.samples,
            withheld: s.withheld,
            first_withheld: s.first_withheld_index.zip(s.first_withheld_reason),
            quantities,
            target_misses: s.target_misses,
            shear_exceeded: s.shear_exceeded,
            rating_exceeded: s.rating_exceeded,
            good: s.good,
        },
    })
}
