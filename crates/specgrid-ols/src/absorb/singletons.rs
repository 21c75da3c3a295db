//! Iterative removal of singleton groups: a row alone in its level of some absorbed effect is
//! fitted exactly by that level's coefficient, carries no information about the slopes, and
//! would only inflate the row count (Correia 2015, "Singletons, cluster-robust standard errors
//! and fixed effects: a bad mix", working paper). Dropping one can create another, so the pass
//! repeats until nothing changes.

/// Clears `keep[i]` for every row that is, after earlier removals, the only observation of its
/// level in some effect; `size[i]` is the number of observations row i stands for (its
/// frequency weight, else 1). Returns how many rows were dropped.
pub(super) fn drop_singletons(
    effects: &[(&[u32], usize)],
    size: &[f64],
    keep: &mut [bool],
) -> usize {
    let mut dropped = 0;
    let mut counts: Vec<Vec<f64>> = effects.iter().map(|&(_, l)| vec![0.0; l]).collect();
    loop {
        for (count, &(codes, _)) in counts.iter_mut().zip(effects) {
            count.fill(0.0);
            for (i, &c) in codes.iter().enumerate() {
                if keep[i] {
                    count[c as usize] += size[i];
                }
            }
        }
        let mut changed = false;
        for i in 0..keep.len() {
            if keep[i]
                && counts
                    .iter()
                    .zip(effects)
                    .any(|(count, &(codes, _))| count[codes[i] as usize] <= 1.0)
            {
                keep[i] = false;
                dropped += 1;
                changed = true;
            }
        }
        if !changed {
            return dropped;
        }
    }
}
