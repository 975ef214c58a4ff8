//! MPNet's relative position bias: what sets the family apart from BERT inside attention.
//!
//! Besides absolute position embeddings, an MPNet encoder adds to every layer's attention
//! scores a learned value per head that depends only on the distance from query to key. The
//! distance is first put in one of 32 buckets: one per distance up to 7 in each direction, then
//! buckets growing logarithmically up to a distance of 128, beyond which all distances share
//! the last bucket of their direction (the scheme of T5, Raffel et al. 2020, which MPNet takes;
//! transformers' `MPNetEncoder.relative_position_bucket` is the reference, checked in the
//! tests). The table `encoder.relative_attention_bias.weight` (`[buckets, heads]`) is shared
//! by all layers, so [`RelativeBias`] spreads it once, at load, into one row per head over
//! every distance the position table allows; a sequence of `len` tokens then reads its bias as
//! a slice of that row, in the layout the attention kernel takes.

/// Buckets of the relative position bias. transformers' `MPNetEncoder.compute_position_bias`
/// calls the bucket function with this default whatever config.json says, so kerf does too and
/// refuses a table of another size.
pub const NUM_BUCKETS: usize = 32;

/// Distance from which every larger one shares its direction's last bucket (the same default).
pub const MAX_DISTANCE: usize = 128;

/// The bucket of a key-minus-query distance, as transformers' MPNet computes it: keys before
/// the query (negative distances) take buckets `0..16`, keys after it `16..32`; within each
/// half, distances below 8 have a bucket each and larger ones share logarithmic buckets.
pub fn relative_position_bucket(key_minus_query: i64) -> usize {
    let half = NUM_BUCKETS / 2;
    let max_exact = half / 2;
    let n = -key_minus_query;
    let base = if n < 0 { half } else { 0 };
    let n = n.unsigned_abs() as usize;
    if n < max_exact {
        return base + n;
    }
    // In f32, as torch computes it (`n.float()`), truncated toward zero like `.to(torch.long)`.
    let ratio = (n as f32 / max_exact as f32).ln() / (MAX_DISTANCE as f32 / max_exact as f32).ln();
    let large = max_exact + (ratio * (half - max_exact) as f32) as usize;
    base + large.min(half - 1)
}

/// The relative position bias of every head over every distance a sequence can hold.
#[derive(Debug, Clone)]
pub struct RelativeBias {
    /// `[heads][2 * positions - 1]`: head `h`'s bias for distance `r` (key minus query) at
    /// `h * (2 * positions - 1) + r + positions - 1`.
    table: Vec<f32>,
    /// Longest sequence.
    positions: usize,
}

impl RelativeBias {
    /// Spread `weight` (`[NUM_BUCKETS, heads]` row-major, as
    /// `encoder.relative_attention_bias.weight` stores it) over the distances of sequences up
    /// to `positions` tokens. `Err` says what is wrong with the table's size.
    pub fn new(weight: &[f32], heads: usize, positions: usize) -> Result<Self, String> {
        if weight.len() != NUM_BUCKETS * heads {
            return Err(format!(
                "has {} values; expected {NUM_BUCKETS} buckets x {heads} heads",
                weight.len()
            ));
        }
        let width = (2 * positions).saturating_sub(1);
        let mut table = Vec::with_capacity(heads * width);
        for head in 0..heads {
            table.extend((0..width).map(|x| {
                let bucket = relative_position_bucket(x as i64 - (positions as i64 - 1));
                weight[bucket * heads + head]
            }));
        }
        Ok(Self { table, positions })
    }

    /// Head `head`'s bias for a sequence of `len` tokens: `2 * len - 1` values, distance `r`
    /// (key minus query) at `r + len - 1`, as [`kerf_kernels::attention::attend`] takes it.
    /// Panics when `len` exceeds the positions the table was built for.
    pub fn for_sequence(&self, head: usize, len: usize) -> &[f32] {
        assert!(len <= self.positions, "sequence longer than the bias table");
        let width = (2 * self.positions).saturating_sub(1);
        let centre = head * width + self.positions - 1;
        if len == 0 {
            return &[];
        }
        &self.table[centre + 1 - len..centre + len]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fixture() -> serde_json::Value {
        let path = concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/../../tests/fixtures/mpnet_st.json"
        );
        serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
    }

    #[test]
    fn buckets_match_transformers() {
        // Fixture: tests/reference/mpnet_st.py, transformers 5.24.0
        // MPNetEncoder.relative_position_bucket over distances -600..=600.
        let f = fixture();
        let range = f["bucket_distances"].as_array().unwrap();
        let (lo, hi) = (range[0].as_i64().unwrap(), range[1].as_i64().unwrap());
        let want: Vec<usize> = f["buckets"]
            .as_array()
            .unwrap()
            .iter()
            .map(|b| b.as_u64().unwrap() as usize)
            .collect();
        assert_eq!(want.len() as i64, hi - lo + 1);
        assert!(
            lo <= -511 && hi >= 511,
            "every distance of a 512-token input"
        );
        for (r, w) in (lo..=hi).zip(&want) {
            assert_eq!(relative_position_bucket(r), *w, "distance {r}");
        }
        // Every bucket is used but 16, which would hold a key 0 places after the query (distance
        // 0 is bucket 0), so the whole table is exercised.
        for b in 0..NUM_BUCKETS {
            assert_eq!(want.contains(&b), b != NUM_BUCKETS / 2, "bucket {b}");
        }
    }

    #[test]
    fn a_sequences_bias_is_the_centre_of_the_head_row() {
        // 2 heads; bucket b of head h holds 100 h + b, so each value names its bucket.
        let heads = 2;
        let weight: Vec<f32> = (0..NUM_BUCKETS * heads)
            .map(|i| (100 * (i % heads) + i / heads) as f32)
            .collect();
        let bias = RelativeBias::new(&weight, heads, 300).unwrap();
        for len in [0usize, 1, 5, 200, 300] {
            for head in 0..heads {
                let got = bias.for_sequence(head, len);
                assert_eq!(got.len(), (2 * len).saturating_sub(1));
                for (x, v) in got.iter().enumerate() {
                    let r = x as i64 - (len as i64 - 1);
                    let want = 100 * head + relative_position_bucket(r);
                    assert_eq!(*v, want as f32, "len {len} head {head} distance {r}");
                }
            }
        }
        assert!(RelativeBias::new(&weight[1..], heads, 300).is_err());
    }
}
