//! Exact count of absorbed parameters: the rank of the indicator columns of all effect sets.

/// Connected components of the bipartite graph whose nodes are the levels of two effects and
/// whose edges are the rows (union–find with path halving). All levels are assumed present.
pub(super) fn bipartite_components(a: &[u32], la: usize, b: &[u32], lb: usize) -> usize {
    let mut parent: Vec<usize> = (0..la + lb).collect();
    fn find(parent: &mut [usize], mut v: usize) -> usize {
        while parent[v] != v {
            parent[v] = parent[parent[v]];
            v = parent[v];
        }
        v
    }
    let mut components = la + lb;
    for (&x, &y) in a.iter().zip(b) {
        let (rx, ry) = (
            find(&mut parent, x as usize),
            find(&mut parent, la + y as usize),
        );
        if rx != ry {
            parent[rx] = ry;
            components -= 1;
        }
    }
    components
}

/// Absorbed parameters of the effect sets (levels present, codes dense): one set, its levels;
/// two sets, L₁ + L₂ − C with C the connected components of their level graph (exact; Abowd,
/// Creecy & Kramarz 2002); each further set adds L − 1, an upper bound on its new rank (it
/// shares at least the constant with the others), so the count errs towards fewer residual
/// degrees of freedom (conservative). Returns the count and C (when two or more sets).
pub(super) fn absorbed_parameters(effects: &[(&[u32], usize)]) -> (usize, Option<usize>) {
    match effects {
        [] => (0, None),
        [(_, l)] => (*l, None),
        [(a, la), (b, lb), rest @ ..] => {
            let c = bipartite_components(a, *la, b, *lb);
            let extra: usize = rest.iter().map(|&(_, l)| l.saturating_sub(1)).sum();
            (la + lb - c + extra, Some(c))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn components_of_two_islands() {
        // Levels {0,1}×{0} and {2}×{1,2}: two islands (hand count).
        let a = [0, 1, 2, 2];
        let b = [0, 0, 1, 2];
        assert_eq!(bipartite_components(&a, 3, &b, 3), 2);
        assert_eq!(absorbed_parameters(&[(&a, 3), (&b, 3)]), (4, Some(2)));
    }
}
