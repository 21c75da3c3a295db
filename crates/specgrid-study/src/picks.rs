//! The sets a `role = "pick"` control block offers: how many there are (exact, never by listing
//! them), the set behind an option number, and the option names.
//!
//! Option order: `none` first when the block includes it, then the sets of the smallest size,
//! then the next size, …; within one size, sets in lexicographic order of the term positions
//! ({0,1,2}, {0,1,3}, …, {n−3,n−2,n−1}). A set's option name is its term labels in file order
//! joined by " + ".

/// Most options one pick block may offer: every option name is held once in the plan's
/// decision list, so this bounds that list (a few hundred MiB of names at most).
pub(crate) const MAX_PICK_OPTIONS: u128 = 5_000_000;

/// The binomial coefficient C(n, k), exact, saturating at `u128::MAX` (handbook formula,
/// computed as the running product C(n, i) = C(n, i − 1)·(n − i + 1)/i, every step exact).
pub(crate) fn binomial(n: usize, k: usize) -> u128 {
    if k > n {
        return 0;
    }
    let k = k.min(n - k);
    let mut c: u128 = 1;
    for i in 1..=k as u128 {
        // c·(n − i + 1) is divisible by i because the result is C(n, i); divide the gcd first
        // so the product overflows only when the result itself is out of range.
        let factor = n as u128 - i + 1;
        let g = gcd(c, i);
        let (c_part, i_part) = (c / g, i / g);
        let Some(next) = c_part.checked_mul(factor / i_part) else {
            return u128::MAX;
        };
        c = next;
    }
    c
}

fn gcd(mut a: u128, mut b: u128) -> u128 {
    while b != 0 {
        (a, b) = (b, a % b);
    }
    a
}

/// Number of options of a pick block: Σ C(n, size) over its sizes, plus one for `none`.
pub(crate) fn option_count(n: usize, sizes: &[usize], include_none: bool) -> u128 {
    sizes.iter().fold(u128::from(include_none), |acc, &k| {
        acc.saturating_add(binomial(n, k))
    })
}

/// Turns option numbers of one pick block back into sets, with the binomial coefficients it
/// needs tabulated once (a model's set then costs O(n) table look-ups, no 128-bit division).
#[derive(Debug, Clone)]
pub(crate) struct Unranker {
    n: usize,
    sizes: Vec<usize>,
    include_none: bool,
    /// C(m, j) for m ≤ n, j ≤ the largest size, row-major (m·(largest + 1) + j); every entry
    /// is at most the block's option count, which [`MAX_PICK_OPTIONS`] bounds.
    table: Vec<u64>,
}

impl Unranker {
    /// For a block of `n` candidates with these sizes (ascending) and `none` option.
    pub fn new(n: usize, sizes: &[usize], include_none: bool) -> Unranker {
        let width = sizes.iter().max().copied().unwrap_or(0) + 1;
        let mut table = vec![0u64; (n + 1) * width];
        for m in 0..=n {
            for j in 0..width.min(m + 1) {
                table[m * width + j] = u64::try_from(binomial(m, j)).unwrap_or(u64::MAX);
            }
        }
        Unranker {
            n,
            sizes: sizes.to_vec(),
            include_none,
            table,
        }
    }

    fn choose(&self, m: usize, j: usize) -> u64 {
        let width = self.table.len() / (self.n + 1);
        self.table[m * width + j]
    }

    /// The positions (ascending) of the set behind option `option`, written into `out`
    /// (cleared first); empty for `none`. `option` must be below [`option_count`].
    pub fn set(&self, option: usize, out: &mut Vec<usize>) {
        out.clear();
        let mut rank = option as u64;
        if self.include_none {
            if rank == 0 {
                return;
            }
            rank -= 1;
        }
        for &k in &self.sizes {
            let count = self.choose(self.n, k);
            if rank >= count {
                rank -= count;
                continue;
            }
            // Lexicographic unranking: position c starts the rest of the set when the rank
            // falls among the C(n − c − 1, still − 1) sets that begin with it.
            let mut c = 0;
            for still in (1..=k).rev() {
                loop {
                    let starting_here = self.choose(self.n - c - 1, still - 1);
                    if rank < starting_here {
                        break;
                    }
                    rank -= starting_here;
                    c += 1;
                }
                out.push(c);
                c += 1;
            }
            return;
        }
    }
}

/// Every option name of a pick block whose terms carry `labels`, in option order.
pub(crate) fn option_names(labels: &[String], sizes: &[usize], include_none: bool) -> Vec<String> {
    let n = labels.len();
    let total = option_count(n, sizes, include_none).min(MAX_PICK_OPTIONS) as usize;
    let mut names = Vec::with_capacity(total);
    if include_none {
        names.push("none".to_string());
    }
    for &k in sizes {
        // Walk the sets of size k in lexicographic order: bump the last position that can
        // still move and reset the ones after it.
        let mut set: Vec<usize> = (0..k).collect();
        loop {
            names.push(
                set.iter()
                    .map(|&i| labels[i].as_str())
                    .collect::<Vec<_>>()
                    .join(" + "),
            );
            let Some(i) = (0..k).rev().find(|&i| set[i] < n - k + i) else {
                break;
            };
            set[i] += 1;
            for j in i + 1..k {
                set[j] = set[j - 1] + 1;
            }
        }
    }
    names
}

#[cfg(test)]
mod tests {
    use super::*;

    /// C(n, k) against the factorial formula n!/(k!(n − k)!) in exact integers for small n,
    /// and two values worked by hand from it: C(57, 3) = 57·56·55/6 = 29,260 and
    /// C(60, 30) = 118,264,581,564,861,424 (handbook formula; both values also checked with
    /// Python's `math.comb`, a general-purpose reference).
    #[test]
    fn binomial_matches_the_factorial_formula() {
        let factorial = |m: u128| (1..=m).product::<u128>();
        for n in 0..=30usize {
            for k in 0..=n {
                let expected =
                    factorial(n as u128) / (factorial(k as u128) * factorial((n - k) as u128));
                assert_eq!(binomial(n, k), expected, "C({n},{k})");
            }
            assert_eq!(binomial(n, n + 1), 0);
        }
        assert_eq!(binomial(57, 3), 29_260);
        assert_eq!(binomial(60, 30), 118_264_581_564_861_424);
        assert_eq!(binomial(200, 100), u128::MAX, "C(200,100) ≈ 9e58 saturates");
    }

    /// Unranking every option gives the same sets, in the same order, as the walk that names
    /// them, and every set is distinct and ascending.
    #[test]
    fn unrank_agrees_with_the_named_walk() {
        let labels: Vec<String> = (0..7).map(|i| format!("t{i}")).collect();
        let sizes = [1, 3, 7];
        let names = option_names(&labels, &sizes, true);
        assert_eq!(names.len() as u128, option_count(7, &sizes, true));
        assert_eq!(names.len(), 1 + 7 + 35 + 1);
        let mut set = Vec::new();
        let unranker = Unranker::new(7, &sizes, true);
        for (option, name) in names.iter().enumerate() {
            unranker.set(option, &mut set);
            let rebuilt = if set.is_empty() {
                "none".to_string()
            } else {
                set.iter()
                    .map(|&i| labels[i].clone())
                    .collect::<Vec<_>>()
                    .join(" + ")
            };
            assert_eq!(&rebuilt, name, "option {option}");
            assert!(set.windows(2).all(|w| w[0] < w[1]));
        }
        assert_eq!(names[1], "t0");
        assert_eq!(names[8], "t0 + t1 + t2");
        assert_eq!(names[9], "t0 + t1 + t3");
        assert_eq!(names[42], "t4 + t5 + t6");
        assert_eq!(names[43], "t0 + t1 + t2 + t3 + t4 + t5 + t6");
    }
}
