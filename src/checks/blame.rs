//! A small set of conditions that clash or strain together: the deletion filter of Chinneck
//! and Dravnieks (1991), ALGORITHMS §9.3.
//!
//! Starting from a failing set, each condition in turn is left out; if the rest still fails,
//! it stays out. For monotone tests (clashes; the corridor probability, which can only fall
//! as corridors are added; `d²`, which can only grow as pins are added) one pass leaves a set
//! in which every member is needed. Mixed tests need not be monotone, so the result is
//! verified and the pass repeated if a member turns out not to be needed. The number of tests
//! is bounded (`|𝒞| + 1` per pass) and capped by a budget, so the window can run it live.

/// The result of a blame search.
#[derive(Debug, Clone, PartialEq)]
pub struct Blame {
    /// Indices of the conditions to blame.
    pub set: Vec<usize>,
    /// True when every member was verified to be needed (false if the budget ran out).
    pub minimal: bool,
    /// Tests evaluated.
    pub tests: usize,
}

/// Shrink `start` (a failing set, listed in the order conditions are tried for removal:
/// least suspicious first) to a set in which every member is needed for `fails`. If `start`
/// does not fail under `fails`, it comes back whole, not marked minimal.
pub fn deletion_filter(
    start: &[usize],
    budget: usize,
    mut fails: impl FnMut(&[usize]) -> bool,
) -> Blame {
    let mut set = start.to_vec();
    // The whole set must fail under this test (a noisier test than the verdict's may not).
    let mut tests = 1;
    if !fails(&set) {
        return Blame {
            set,
            minimal: false,
            tests,
        };
    }
    loop {
        let mut changed = false;
        for &c in start {
            if !set.contains(&c) || set.len() == 1 {
                continue;
            }
            if tests >= budget {
                return Blame {
                    set,
                    minimal: false,
                    tests,
                };
            }
            let trial: Vec<usize> = set.iter().copied().filter(|&x| x != c).collect();
            tests += 1;
            if fails(&trial) {
                set = trial;
                changed = true;
            }
        }
        // A pass that removed nothing has just shown every member to be needed.
        if !changed {
            return Blame {
                set,
                minimal: true,
                tests,
            };
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Monotone test "the sum of the chosen weights exceeds 10": from {1, 5, 6, 7} the filter,
    /// trying the smallest first, keeps a set whose every member is needed.
    #[test]
    fn monotone_test_gives_a_minimal_set() {
        let w = [1.0, 5.0, 6.0, 7.0];
        let fails = |s: &[usize]| s.iter().map(|&i| w[i]).sum::<f64>() > 10.0;
        let b = deletion_filter(&[0, 1, 2, 3], 100, fails);
        assert!(b.minimal);
        assert!(fails(&b.set));
        for &c in &b.set {
            let rest: Vec<usize> = b.set.iter().copied().filter(|&x| x != c).collect();
            assert!(!fails(&rest), "{c} is not needed in {:?}", b.set);
        }
        assert_eq!(b.set, vec![2, 3]);
    }

    /// A clash between exactly two of five conditions is found, whatever the order.
    #[test]
    fn finds_the_clashing_pair() {
        let fails = |s: &[usize]| s.contains(&1) && s.contains(&3);
        for order in [[0, 1, 2, 3, 4], [4, 3, 2, 1, 0]] {
            let b = deletion_filter(&order, 100, fails);
            let mut set = b.set.clone();
            set.sort();
            assert_eq!(set, vec![1, 3]);
            assert!(b.minimal && b.tests <= 2 * order.len());
        }
    }

    /// A non-monotone test needs the verification pass; the budget caps the work.
    #[test]
    fn non_monotone_and_budget() {
        // Fails for {0, 1, 2} and for {1} alone, not for {1, 2}.
        let fails = |s: &[usize]| matches!(s, [0, 1, 2] | [1] | [0, 1]);
        let b = deletion_filter(&[0, 1, 2], 100, fails);
        assert!(b.minimal);
        assert_eq!(b.set, vec![1]);
        let capped = deletion_filter(&[0, 1, 2], 2, fails);
        assert!(!capped.minimal && capped.tests == 2);
        // A start that does not fail is returned whole and not called minimal.
        let none = deletion_filter(&[0, 2], 100, fails);
        assert!(!none.minimal && none.set == vec![0, 2]);
    }
}
