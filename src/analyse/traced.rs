//! The traced set: which bursts keep their plot traces.
//!
//! Takes each burst's index and RMS EVM, offered in any order; gives the first
//! `k` bursts and the `k` worst by RMS EVM (ties: the lower index), and a
//! superset test ([`TraceSelection::may_enter`]) the driver uses to compute
//! detail only for bursts that may end up traced.

/// Which bursts keep their trace: the first `k` and the `k` worst by RMS EVM
/// (ties broken towards the lower index). Offer every burst once, in any order:
/// the worst-`k` set of everything offered is the same whatever the order.
#[derive(Debug)]
pub(super) struct TraceSelection {
    k: usize,
    worst: std::collections::BTreeSet<Badness>,
}

/// Order of "worse": larger RMS EVM, then the lower index.
#[derive(Debug, Clone, Copy)]
struct Badness {
    evm: f64,
    index: usize,
}

impl Ord for Badness {
    fn cmp(&self, other: &Self) -> std::cmp::Ordering {
        self.evm
            .total_cmp(&other.evm)
            .then_with(|| other.index.cmp(&self.index))
    }
}
impl PartialOrd for Badness {
    fn partial_cmp(&self, other: &Self) -> Option<std::cmp::Ordering> {
        Some(self.cmp(other))
    }
}
impl PartialEq for Badness {
    fn eq(&self, other: &Self) -> bool {
        self.cmp(other) == std::cmp::Ordering::Equal
    }
}
impl Eq for Badness {}

impl TraceSelection {
    pub(super) fn new(k: usize) -> TraceSelection {
        TraceSelection {
            k,
            worst: std::collections::BTreeSet::new(),
        }
    }

    /// Offer burst `index` with RMS EVM `evm`; returns the index of a burst
    /// (possibly this one) that has just left the traced set for good.
    pub(super) fn offer(&mut self, index: usize, evm: f64) -> Option<usize> {
        self.worst.insert(Badness { evm, index });
        if self.worst.len() <= self.k {
            return None;
        }
        let out = self.worst.pop_first()?;
        (out.index >= self.k).then_some(out.index)
    }

    /// The RMS EVM a burst offered next must exceed to enter the worst `k`, or
    /// `None` while fewer than `k` bursts are in (any burst enters).
    pub(super) fn entry_floor(&self) -> Option<f64> {
        if self.worst.len() < self.k {
            return None;
        }
        Some(self.worst.first().map_or(f64::INFINITY, |b| b.evm))
    }

    /// Whether burst `index` with RMS EVM `evm`, offered after the bursts that
    /// gave `floor` ([`entry_floor`](Self::entry_floor)), may be in the final
    /// traced set (a superset test: a later burst can still push it out).
    pub(super) fn may_enter(&self, index: usize, evm: f64, floor: Option<f64>) -> bool {
        self.k > 0 && (index < self.k || floor.map_or(true, |f| evm.total_cmp(&f).is_ge()))
    }

    /// The traced set once all `n` bursts are offered, in increasing index order:
    /// bursts `0..k` and the `k` worst.
    pub(super) fn members(&self, n: usize) -> Vec<usize> {
        let mut v: std::collections::BTreeSet<usize> = (0..self.k.min(n)).collect();
        v.extend(self.worst.iter().map(|b| b.index));
        v.into_iter().collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::seq::SliceRandom;
    use rand::{Rng, SeedableRng};

    /// The slow twin: sort everything by (EVM descending, index ascending), take
    /// `k`, add the first `k` indices (the documented rule; common practice).
    fn reference(evm: &[f64], k: usize) -> Vec<usize> {
        let mut order: Vec<usize> = (0..evm.len()).collect();
        order.sort_by(|&a, &b| evm[b].total_cmp(&evm[a]).then(a.cmp(&b)));
        let mut set: std::collections::BTreeSet<usize> = order.into_iter().take(k).collect();
        set.extend(0..k.min(evm.len()));
        set.into_iter().collect()
    }

    /// Offer every burst in `order`; the traced set at the end.
    fn streamed(evm: &[f64], k: usize, order: &[usize]) -> Vec<usize> {
        let mut sel = TraceSelection::new(k);
        let mut traced = vec![true; evm.len()];
        for &i in order {
            if let Some(d) = sel.offer(i, evm[i]) {
                traced[d] = false;
            }
        }
        let kept: Vec<usize> = (0..evm.len()).filter(|&i| traced[i]).collect();
        assert_eq!(kept, sel.members(evm.len()));
        kept
    }

    #[test]
    fn the_traced_set_matches_a_full_sort_for_any_arrival_order_with_ties() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(9);
        for n in [0usize, 1, 2, 3, 7, 31, 300] {
            for k in [0usize, 1, 2, 5, 40] {
                // Few distinct values, so ties are common.
                let evm: Vec<f64> = (0..n).map(|_| f64::from(rng.gen_range(0..6u8))).collect();
                let want = reference(&evm, k);
                assert!(want.len() <= 2 * k);
                let mut order: Vec<usize> = (0..n).collect();
                assert_eq!(streamed(&evm, k, &order), want, "n {n} k {k} in order");
                for _ in 0..5 {
                    order.shuffle(&mut rng);
                    assert_eq!(streamed(&evm, k, &order), want, "n {n} k {k} shuffled");
                }
            }
        }
    }

    #[test]
    fn bursts_judged_unlikely_in_their_batch_never_end_up_in_the_traced_set() {
        // The first pass computes details only where `may_enter` says yes, judged
        // against the floor the earlier batches settled; the traced set at the end
        // (checked against the full-sort twin) must lie inside what was judged.
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        for n in [0usize, 1, 5, 64, 65, 300] {
            for k in [0usize, 1, 3, 8] {
                for batch in [1usize, 7, 64] {
                    let evm: Vec<f64> = (0..n).map(|_| f64::from(rng.gen_range(0..9u8))).collect();
                    let mut sel = TraceSelection::new(k);
                    let mut judged = Vec::new();
                    for start in (0..n).step_by(batch) {
                        let floor = sel.entry_floor();
                        let end = (start + batch).min(n);
                        for (i, e) in evm.iter().enumerate().take(end).skip(start) {
                            if sel.may_enter(i, *e, floor) {
                                judged.push(i);
                            }
                        }
                        for (i, e) in evm.iter().enumerate().take(end).skip(start) {
                            sel.offer(i, *e);
                        }
                    }
                    let members = sel.members(n);
                    assert_eq!(members, reference(&evm, k), "n {n} k {k} batch {batch}");
                    for m in &members {
                        assert!(judged.contains(m), "n {n} k {k} batch {batch}: {m}");
                    }
                }
            }
        }
    }

    #[test]
    fn the_traced_set_of_a_worked_example_is_the_first_k_and_the_worst_k() {
        let evm = [9.0, 1.0, 2.0, 8.0, 3.0, 7.0, 0.5];
        let mut sel = TraceSelection::new(2);
        for (i, e) in evm.iter().enumerate() {
            sel.offer(i, *e);
        }
        // Worst two: 0 (9.0) and 3 (8.0); first two: 0, 1. Traced {0, 1, 3}:
        // worked by hand from the rule.
        assert_eq!(sel.members(evm.len()), vec![0, 1, 3]);
    }
}
