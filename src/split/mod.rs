//! Seeds and draws: how a task's score pool becomes a fixed test set, a
//! calibration reservoir and, per unit, a calibration sample.
//!
//! Every random choice in plumbline comes from a seed derived here from the
//! suite seed alone — never from the clock or a thread-local generator — so a
//! run is reproducible bit for bit whatever the thread count.
//!
//! Seeds are derived with the SplitMix64 finaliser (Steele, Lea & Flood 2014,
//! "Fast splittable pseudorandom number generators", OOPSLA) folded over the
//! parts; strings enter as their 64-bit FNV-1a hash (Fowler–Noll–Vo, common
//! practice). The derived seed feeds ChaCha8 (`rand_chacha`).

use rand_chacha::rand_core::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// SplitMix64 finaliser.
pub fn splitmix64(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// 64-bit FNV-1a hash of bytes.
pub fn fnv1a(bytes: &[u8]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for &b in bytes {
        h ^= b as u64;
        h = h.wrapping_mul(0x0000_0100_0000_01B3);
    }
    h
}

/// Fold parts into a seed: `mix(seed, [a, b, ...])`.
pub fn mix(seed: u64, parts: &[u64]) -> u64 {
    let mut h = splitmix64(seed);
    for &p in parts {
        h = splitmix64(h ^ p);
    }
    h
}

/// Domain tags keep seeds of different purposes apart.
const TAG_TASK: u64 = 0x7461_736b; // "task"
const TAG_UNIT: u64 = 0x756e_6974; // "unit"

/// Seed of a task's one-time partition into test set and reservoir.
pub fn task_seed(suite_seed: u64, task_id: &str) -> u64 {
    mix(suite_seed, &[TAG_TASK, fnv1a(task_id.as_bytes())])
}

/// Seed of one unit: `mix(suite seed, task id, size, repeat)`.
pub fn unit_seed(suite_seed: u64, task_id: &str, size: usize, repeat: usize) -> u64 {
    mix(
        suite_seed,
        &[
            TAG_UNIT,
            fnv1a(task_id.as_bytes()),
            size as u64,
            repeat as u64,
        ],
    )
}

/// A fresh ChaCha8 generator from a derived seed.
pub fn rng(seed: u64) -> ChaCha8Rng {
    ChaCha8Rng::seed_from_u64(seed)
}

/// Uniform integer in `0..n` (n > 0) by Lemire's unbiased multiply-and-reject.
pub fn below(rng: &mut ChaCha8Rng, n: u64) -> u64 {
    assert!(n > 0);
    loop {
        let x = rng.next_u64();
        let m = (x as u128) * (n as u128);
        let low = m as u64;
        if low >= n.wrapping_neg() % n {
            return (m >> 64) as u64;
        }
    }
}

/// `k` distinct indices drawn uniformly from `0..n`, in draw order
/// (partial Fisher–Yates shuffle).
pub fn sample_indices(n: usize, k: usize, rng: &mut ChaCha8Rng) -> Vec<usize> {
    assert!(k <= n, "sample of {k} from {n}");
    let mut idx: Vec<usize> = (0..n).collect();
    for i in 0..k {
        let j = i + below(rng, (n - i) as u64) as usize;
        idx.swap(i, j);
    }
    idx.truncate(k);
    idx
}

/// Split `0..n` into (reservoir, test) with `test_rows` rows in the test set,
/// both sorted ascending.
pub fn partition(n: usize, test_rows: usize, seed: u64) -> (Vec<usize>, Vec<usize>) {
    let mut r = rng(seed);
    let mut test = sample_indices(n, test_rows, &mut r);
    test.sort_unstable();
    let mut in_test = vec![false; n];
    for &i in &test {
        in_test[i] = true;
    }
    let reservoir = (0..n).filter(|&i| !in_test[i]).collect();
    (reservoir, test)
}

/// The calibration sample of one unit: `size` positions into the reservoir.
pub fn draw_calibration(reservoir_len: usize, size: usize, seed: u64) -> Vec<usize> {
    let mut r = rng(seed);
    sample_indices(reservoir_len, size, &mut r)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn seeds_differ_by_every_part() {
        let base = unit_seed(1, "a", 100, 0);
        assert_ne!(base, unit_seed(2, "a", 100, 0));
        assert_ne!(base, unit_seed(1, "b", 100, 0));
        assert_ne!(base, unit_seed(1, "a", 101, 0));
        assert_ne!(base, unit_seed(1, "a", 100, 1));
        assert_eq!(base, unit_seed(1, "a", 100, 0));
    }

    #[test]
    fn sample_is_distinct_and_uniform_enough() {
        let mut r = rng(7);
        let s = sample_indices(10, 10, &mut r);
        let mut t = s.clone();
        t.sort_unstable();
        assert_eq!(t, (0..10).collect::<Vec<_>>());
        // Each of 5 positions chosen ~ 2/5 of the time in 20,000 draws of 2 from 5.
        let mut counts = [0usize; 5];
        for _ in 0..20_000 {
            for i in sample_indices(5, 2, &mut r) {
                counts[i] += 1;
            }
        }
        for c in counts {
            assert!((c as f64 - 8000.0).abs() < 300.0, "{counts:?}");
        }
    }

    #[test]
    fn partition_covers_all_rows_once() {
        let (res, test) = partition(100, 30, 5);
        assert_eq!(test.len(), 30);
        assert_eq!(res.len(), 70);
        let mut all: Vec<_> = res.iter().chain(&test).copied().collect();
        all.sort_unstable();
        assert_eq!(all, (0..100).collect::<Vec<_>>());
    }
}
