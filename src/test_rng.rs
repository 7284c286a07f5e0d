//! The unit tests' random numbers: a 64-bit linear congruential generator (multiplier and
//! increment of Knuth's MMIX; from memory) whose top 53 bits give a uniform number in
//! [−0.5, 0.5). Reproducible from a seed and free of dependencies; for test inputs only.

/// A stream of uniform numbers in [−0.5, 0.5) from `seed`.
pub(crate) struct TestRng(u64);

impl TestRng {
    pub(crate) fn new(seed: u64) -> Self {
        Self(seed)
    }

    pub(crate) fn uniform(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((self.0 >> 11) as f64) / ((1u64 << 53) as f64) - 0.5
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn uniform_in_half_open_interval_and_reproducible() {
        let (mut a, mut b) = (TestRng::new(3), TestRng::new(3));
        let xs: Vec<f64> = (0..10_000).map(|_| a.uniform()).collect();
        assert!(xs.iter().all(|&x| (-0.5..0.5).contains(&x)));
        assert!(xs.iter().all(|&x| x == b.uniform()));
        let mean = xs.iter().sum::<f64>() / xs.len() as f64;
        assert!(mean.abs() < 0.01, "mean {mean}");
    }
}
