//! Random counts and events of a simulated run: Poisson counts per channel, and list-mode
//! events drawn one by one from the same expected spectrum with Walker's alias method, so
//! that the events of every channel are Poisson distributed with the channel's mean (a
//! Poisson total split multinomially; N. L. Johnson, S. Kotz, N. Balakrishnan, Discrete
//! Multivariate Distributions (1997), ch. 35, from memory). One 64-bit draw per event; the
//! same seed gives the same events on every machine (integer arithmetic, and the IEEE-754
//! operations of the table's construction in a fixed order).

use crate::physics::synthetic::Rng;

/// A discrete distribution over `0..n` sampled in constant time: Walker's alias method
/// (A. J. Walker, ACM Trans. Math. Softw. 3 (1977) 253) with Vose's stable construction
/// (M. D. Vose, IEEE Trans. Softw. Eng. 17 (1991) 972). Cell i is kept when the low 32 bits
/// of a draw are below its threshold, else its alias is taken; the thresholds are
/// probabilities rounded to multiples of 2^-32, so each cell's probability is exact to
/// about n · 2^-32 of the total.
#[derive(Debug, Clone)]
pub struct AliasTable {
    threshold: Vec<u64>,
    alias: Vec<u32>,
}

impl AliasTable {
    /// The table of the weights (each >= 0, finite); `None` when they are empty, sum to
    /// nothing, or are more than 2^32 cells.
    pub fn new(weights: &[f64]) -> Option<Self> {
        let n = weights.len();
        let total: f64 = weights.iter().sum();
        if n == 0 || n > 1 << 32 || !(total > 0.0 && total.is_finite()) {
            return None;
        }
        let mut scaled: Vec<f64> = weights.iter().map(|w| w * n as f64 / total).collect();
        let (mut small, mut large): (Vec<usize>, Vec<usize>) = (0..n).partition(|&i| scaled[i] < 1.0);
        let mut alias: Vec<u32> = (0..n as u32).collect();
        let mut keep = vec![1.0; n];
        while let (Some(&s), Some(&l)) = (small.last(), large.last()) {
            small.pop();
            keep[s] = scaled[s];
            alias[s] = l as u32;
            scaled[l] = (scaled[l] + scaled[s]) - 1.0;
            if scaled[l] < 1.0 {
                large.pop();
                small.push(l);
            }
        }
        // What is left holds probability 1 up to rounding (Vose, section III).
        let full = (1u64 << 32) as f64;
        let threshold = keep.iter().map(|k: &f64| (k * full).round().clamp(0.0, full) as u64).collect();
        Some(AliasTable { threshold, alias })
    }

    /// The cell of one 64-bit draw: the high 32 bits pick a cell (by multiplication, no
    /// modulo bias beyond 2^-32), the low 32 bits decide between it and its alias.
    pub fn sample(&self, bits: u64) -> usize {
        let n = self.threshold.len() as u64;
        let i = (((bits >> 32) * n) >> 32) as usize;
        if (bits & 0xFFFF_FFFF) < self.threshold[i] {
            i
        } else {
            self.alias[i] as usize
        }
    }
}

/// Poisson counts of each expected mean, in order.
pub fn poisson_counts(rng: &mut Rng, means: &[f64]) -> Vec<u64> {
    means.iter().map(|m| rng.poisson(*m)).collect()
}

/// The number of k of n trials that succeed, each with probability p (a binomial deviate by
/// n Bernoulli trials; exact, for the pulser counts of a run).
pub fn binomial(rng: &mut Rng, n: u64, p: f64) -> u64 {
    (0..n).filter(|_| rng.uniform() < p).count() as u64
}

/// A batch of events: per event, the detector (its index in the config), the ADC channel
/// and whether it was lost to dead time (written with the pile-up flag).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct EventBatch {
    /// Detector index in config order.
    pub detector: Vec<u16>,
    /// ADC channel.
    pub channel: Vec<u32>,
    /// 1 for an event that arrived while the acquisition was busy, else 0.
    pub pile_up: Vec<u8>,
}

/// The events of one run, drawn in batches: cells are (detector, channel, lost) in the
/// order of [`EventSource::new`]'s weights.
#[derive(Debug, Clone)]
pub struct EventSource {
    table: AliasTable,
    channels: usize,
    detectors: usize,
    rng: Rng,
    remaining: u64,
}

impl EventSource {
    /// A run of `events` events from `weights`: per detector, per channel, the expected
    /// recorded counts; then, when `lost` is given, the same layout again for the events
    /// lost to dead time (flagged). `None` when the weights are all zero.
    pub fn new(recorded: &[f64], lost: Option<&[f64]>, channels: usize, events: u64, rng: Rng) -> Option<Self> {
        let weights: Vec<f64> = recorded.iter().chain(lost.unwrap_or(&[])).copied().collect();
        let table = AliasTable::new(&weights)?;
        Some(EventSource { table, channels, detectors: recorded.len() / channels.max(1), rng, remaining: events })
    }

    /// The next batch of at most `size` events; `None` when the run is done.
    pub fn next_batch(&mut self, size: usize) -> Option<EventBatch> {
        if self.remaining == 0 {
            return None;
        }
        let m = size.min(usize::try_from(self.remaining).unwrap_or(usize::MAX));
        self.remaining -= m as u64;
        let mut batch = EventBatch {
            detector: Vec::with_capacity(m),
            channel: Vec::with_capacity(m),
            pile_up: Vec::with_capacity(m),
        };
        let per_layer = self.detectors * self.channels;
        for _ in 0..m {
            let cell = self.table.sample(self.rng.next_u64());
            let (lost, rest) = (cell >= per_layer, cell % per_layer);
            batch.detector.push((rest / self.channels) as u16);
            batch.channel.push((rest % self.channels) as u32);
            batch.pile_up.push(u8::from(lost));
        }
        Some(batch)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_alias_table_draws_each_cell_with_its_probability() {
        // (weights): the frequencies of 10^6 draws must match weight/total within 5 standard
        // deviations of a binomial proportion (common practice for a fixed-seed check).
        let cases: [&[f64]; 4] = [&[1.0], &[1.0, 3.0], &[0.0, 2.0, 0.0, 6.0, 2.0], &[0.1, 0.2, 0.3, 0.4, 1e-3]];
        for weights in cases {
            let table = AliasTable::new(weights).expect("weights");
            let mut rng = Rng::new(11);
            let n = 1_000_000u64;
            let mut seen = vec![0u64; weights.len()];
            for _ in 0..n {
                seen[table.sample(rng.next_u64())] += 1;
            }
            let total: f64 = weights.iter().sum();
            for (w, k) in weights.iter().zip(&seen) {
                let p = w / total;
                let sd = (p * (1.0 - p) / n as f64).sqrt();
                let f = *k as f64 / n as f64;
                assert!((f - p).abs() <= 5.0 * sd + 1e-12, "{weights:?}: {f} for {p}");
            }
        }
        assert!(AliasTable::new(&[]).is_none());
        assert!(AliasTable::new(&[0.0, 0.0]).is_none());
    }

    #[test]
    fn events_are_the_same_for_a_seed_and_differ_between_seeds() {
        let recorded = [0.0, 5.0, 1.0, 0.0, 0.0, 2.0];
        let lost = [0.0, 1.0, 0.0, 0.0, 0.0, 1.0];
        let run = |seed| {
            let mut source = EventSource::new(&recorded, Some(&lost), 3, 1000, Rng::new(seed)).expect("weights");
            let mut all = EventBatch::default();
            while let Some(b) = source.next_batch(300) {
                all.detector.extend(b.detector);
                all.channel.extend(b.channel);
                all.pile_up.extend(b.pile_up);
            }
            all
        };
        let (a, b, c) = (run(1), run(1), run(2));
        assert_eq!(a.detector.len(), 1000);
        assert_eq!(a, b, "same seed, same events");
        assert_ne!(a, c, "another seed, other events");
        // Cells of weight 0 never appear: channel 0 of either detector, channel 1 of
        // detector 1 recorded.
        for i in 0..1000 {
            assert_ne!(a.channel[i], 0);
            assert!(!(a.detector[i] == 1 && a.channel[i] == 1 && a.pile_up[i] == 0));
        }
    }
}
