//! Ensembles over uncertain parameters: Latin hypercube samples of config keys, deterministic
//! slices (shards) for cluster job arrays, and the statistics the diagnostics use. Pure
//! functions; the job that runs members lives in `jobs::ensemble`.

pub mod sampling;
pub mod stats;

pub use sampling::{latin_hypercube, normal_quantile, sample, Distribution};

/// Members `[first, end)` of shard `k` of `n` out of `members`: contiguous blocks whose sizes
/// differ by at most one, in member order, so that shards `0..n` concatenated are `0..members`.
pub fn shard_range(members: usize, k: usize, n: usize) -> std::ops::Range<usize> {
    let at = |j: usize| (j as u128 * members as u128 / n as u128) as usize;
    at(k)..at(k + 1)
}

/// Parse a `--shard K/N` argument (K from 0 to N-1).
pub fn parse_shard(text: &str) -> Result<(usize, usize), String> {
    let bad = || {
        format!("--shard {text}: expected K/N with whole numbers 0 <= K < N, e.g. --shard 3/8 (K as $SLURM_ARRAY_TASK_ID with --array=0-(N-1))")
    };
    let (k, n) = text.split_once('/').ok_or_else(bad)?;
    let k: usize = k.trim().parse().map_err(|_| bad())?;
    let n: usize = n.trim().parse().map_err(|_| bad())?;
    if n == 0 || k >= n {
        return Err(bad());
    }
    Ok((k, n))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shards_tile_the_members() {
        for (m, n) in [(10, 3), (1000, 7), (5, 8), (1, 1)] {
            let mut next = 0;
            for k in 0..n {
                let r = shard_range(m, k, n);
                assert_eq!(r.start, next);
                assert!(r.len() <= m / n + 1);
                next = r.end;
            }
            assert_eq!(next, m);
        }
        assert_eq!(parse_shard("2/4"), Ok((2, 4)));
        for bad in ["4/4", "a/2", "3", "1/0", "-1/3"] {
            assert!(parse_shard(bad).is_err(), "{bad}");
        }
    }
}
