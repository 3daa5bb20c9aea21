//! Latin hypercube sampling of config keys, deterministic from a seed.
//!
//! Each of `P` parameters gets its own random permutation of the `M` strata; member `m` takes
//! `u = (perm[m] + U) / M` with `U` uniform in (0, 1), and `u` is mapped through the
//! distribution's quantile function (McKay, Beckman and Conover 1979, Technometrics 21). All
//! draws come from one SplitMix64 stream in a fixed order, so the samples depend only on the
//! seed, the member count and the parameter list, never on threads or shards.

/// A distribution of one sampled key.
#[derive(Debug, Clone, PartialEq)]
pub enum Distribution {
    /// Uniform on `[min, max]`.
    Uniform {
        /// Lower end.
        min: f64,
        /// Upper end.
        max: f64,
    },
    /// Normal with mean and standard deviation.
    Normal {
        /// Mean.
        mean: f64,
        /// Standard deviation.
        sd: f64,
    },
    /// Uniform in the logarithm on `[min, max]`, `min > 0`.
    LogUniform {
        /// Lower end.
        min: f64,
        /// Upper end.
        max: f64,
    },
    /// One of the listed values, each with equal probability.
    Values(Vec<f64>),
}

impl Distribution {
    /// The value at cumulative probability `u` in (0, 1).
    pub fn quantile(&self, u: f64) -> f64 {
        match self {
            Distribution::Uniform { min, max } => min + u * (max - min),
            Distribution::Normal { mean, sd } => mean + sd * normal_quantile(u),
            Distribution::LogUniform { min, max } => (min.ln() + u * (max.ln() - min.ln())).exp(),
            Distribution::Values(v) => v[((u * v.len() as f64) as usize).min(v.len() - 1)],
        }
    }

    /// A short description, e.g. `uniform(0.4, 0.7)`, for file attributes.
    pub fn describe(&self) -> String {
        match self {
            Distribution::Uniform { min, max } => format!("uniform({min}, {max})"),
            Distribution::Normal { mean, sd } => format!("normal(mean {mean}, sd {sd})"),
            Distribution::LogUniform { min, max } => format!("log_uniform({min}, {max})"),
            Distribution::Values(v) => format!(
                "values({})",
                v.iter().map(|x| x.to_string()).collect::<Vec<_>>().join(", ")
            ),
        }
    }
}

/// SplitMix64 (Steele, Lea and Flood 2014, OOPSLA; the constants of Vigna's reference code).
#[derive(Debug, Clone)]
pub struct SplitMix64(u64);

impl SplitMix64 {
    /// A generator started at `seed`.
    pub fn new(seed: u64) -> SplitMix64 {
        SplitMix64(seed)
    }

    /// The next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in the open interval (0, 1): 53 random bits, offset by half a unit.
    pub fn next_open01(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) * (1.0 / (1u64 << 53) as f64)
    }

    /// Uniform integer in `0..n` (`n >= 1`), by rejection (no modulo bias).
    pub fn below(&mut self, n: u64) -> u64 {
        let zone = u64::MAX - u64::MAX % n;
        loop {
            let x = self.next_u64();
            if x < zone {
                return x % n;
            }
        }
    }
}

/// Latin hypercube of `members` points in `dims` dimensions: `u[m][j]` in (0, 1), exactly one
/// point of each parameter in each stratum `[k/M, (k+1)/M)`.
pub fn latin_hypercube(members: usize, dims: usize, seed: u64) -> Vec<Vec<f64>> {
    let mut rng = SplitMix64::new(seed);
    let mut u = vec![vec![0.0; dims]; members];
    for j in 0..dims {
        // Fisher-Yates shuffle of the strata (Knuth, TAOCP vol. 2, algorithm P).
        let mut perm: Vec<usize> = (0..members).collect();
        for i in (1..members).rev() {
            let k = rng.below(i as u64 + 1) as usize;
            perm.swap(i, k);
        }
        for (m, row) in u.iter_mut().enumerate() {
            row[j] = (perm[m] as f64 + rng.next_open01()) / members as f64;
        }
    }
    u
}

/// Sampled values `[member][parameter]` for a list of distributions.
pub fn sample(distributions: &[&Distribution], members: usize, seed: u64) -> Vec<Vec<f64>> {
    latin_hypercube(members, distributions.len(), seed)
        .into_iter()
        .map(|row| {
            row.iter()
                .zip(distributions)
                .map(|(u, d)| d.quantile(*u))
                .collect()
        })
        .collect()
}

/// The standard normal quantile `Phi^-1(p)` for `p` in (0, 1), accurate to about 1e-16
/// relative.
///
/// Reference: Wichura (1988), Algorithm AS 241 (PPND16), Appl. Statist. 37, 477-484:
/// rational approximations in `q = p - 1/2` near the centre and in `r = sqrt(-ln(min(p, 1-p)))`
/// in the tails. The coefficients are written as published (more digits than an `f64` holds).
#[allow(clippy::excessive_precision)]
pub fn normal_quantile(p: f64) -> f64 {
    const A: [f64; 8] = [
        3.387_132_872_796_366_608,
        1.331_416_678_917_843_774_5e2,
        1.971_590_950_306_551_442_7e3,
        1.373_169_376_550_946_112_5e4,
        4.592_195_393_154_987_145_7e4,
        6.726_577_092_700_870_085_3e4,
        3.343_057_558_358_812_810_5e4,
        2.509_080_928_730_122_672_7e3,
    ];
    const B: [f64; 8] = [
        1.0,
        4.231_333_070_160_091_125_2e1,
        6.871_870_074_920_579_083e2,
        5.394_196_021_424_751_107_7e3,
        2.121_379_430_158_659_586_7e4,
        3.930_789_580_009_271_061e4,
        2.872_908_573_572_194_267_4e4,
        5.226_495_278_852_854_561e3,
    ];
    const C: [f64; 8] = [
        1.423_437_110_749_683_577_34,
        4.630_337_846_156_545_295_9,
        5.769_497_221_460_691_405_5,
        3.647_848_324_763_204_605_04,
        1.270_458_252_452_368_382_58,
        2.417_807_251_774_506_117_7e-1,
        2.272_384_498_926_918_458_33e-2,
        7.745_450_142_783_414_076_4e-4,
    ];
    const D: [f64; 8] = [
        1.0,
        2.053_191_626_637_758_821_87,
        1.676_384_830_183_803_849_4,
        6.897_673_349_851_000_045_5e-1,
        1.481_039_764_274_800_745_9e-1,
        1.519_866_656_361_645_719_66e-2,
        5.475_938_084_995_344_946e-4,
        1.050_750_071_644_416_843_24e-9,
    ];
    const E: [f64; 8] = [
        6.657_904_643_501_103_777_2,
        5.463_784_911_164_114_369_9,
        1.784_826_539_917_291_335_8,
        2.965_605_718_285_048_912_3e-1,
        2.653_218_952_657_612_309_3e-2,
        1.242_660_947_388_078_438_6e-3,
        2.711_555_568_743_487_578_15e-5,
        2.010_334_399_292_288_132_65e-7,
    ];
    const F: [f64; 8] = [
        1.0,
        5.998_322_065_558_879_376_9e-1,
        1.369_298_809_227_358_053_1e-1,
        1.487_536_129_085_061_485_25e-2,
        7.868_691_311_456_132_591e-4,
        1.846_318_317_510_054_681_8e-5,
        1.421_511_758_316_445_888_7e-7,
        2.044_263_103_389_939_785_64e-15,
    ];
    fn ratio(num: &[f64; 8], den: &[f64; 8], r: f64) -> f64 {
        let horner = |c: &[f64; 8]| c.iter().rev().fold(0.0, |acc, &k| acc * r + k);
        horner(num) / horner(den)
    }
    let q = p - 0.5;
    if q.abs() <= 0.425 {
        let r = 0.180_625 - q * q;
        return q * ratio(&A, &B, r);
    }
    let tail = if q < 0.0 { p } else { 1.0 - p };
    let mut r = (-tail.ln()).sqrt();
    let z = if r <= 5.0 {
        r -= 1.6;
        ratio(&C, &D, r)
    } else {
        r -= 5.0;
        ratio(&E, &F, r)
    };
    if q < 0.0 {
        -z
    } else {
        z
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn normal_quantile_matches_scipy() {
        // Reference values: scipy.stats.norm.ppf (scipy 1.17), printed with repr.
        for (p, want) in [
            (0.5, 0.0),
            (0.975, 1.959963984540054),
            (0.841_344_746_068_542_9, 1.0),
            (0.001, -3.090232306167813),
            (1e-10, -6.361340902404056),
            (0.3, -0.5244005127080409),
            (1.0 - 1e-12, 7.0344869100478356),
        ] {
            let got = normal_quantile(p);
            assert!(
                (got - want).abs() <= 1e-14 * (1.0 + want.abs()),
                "{p}: {got} vs {want}"
            );
        }
    }

    #[test]
    fn every_stratum_holds_one_point_and_the_seed_decides() {
        let u = latin_hypercube(50, 3, 7);
        for j in 0..3 {
            let mut strata: Vec<usize> = u.iter().map(|r| (r[j] * 50.0) as usize).collect();
            strata.sort_unstable();
            assert_eq!(strata, (0..50).collect::<Vec<_>>());
        }
        assert_eq!(u, latin_hypercube(50, 3, 7));
        assert_ne!(u, latin_hypercube(50, 3, 8));
    }

    #[test]
    fn listed_values_are_drawn_equally() {
        let d = Distribution::Values(vec![1.0, 2.0, 3.0, 4.0]);
        let s = sample(&[&d], 40, 3);
        for v in [1.0, 2.0, 3.0, 4.0] {
            assert_eq!(s.iter().filter(|r| r[0] == v).count(), 10);
        }
        let lu = Distribution::LogUniform { min: 1.0, max: 100.0 };
        assert!((lu.quantile(0.5) - 10.0).abs() < 1e-12);
    }
}
