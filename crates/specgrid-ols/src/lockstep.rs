//! Two independent iterations advanced side by side.
//!
//! The per-model kernels that remain are chains of dependent divisions and square roots (the t
//! p-value's continued fraction, the condition estimate's power iteration): each step waits on
//! the one before, and the processor sits idle between them. Two such chains stepped in turn
//! are both in flight at once. Each lane does exactly the operations it would alone, so each
//! result is the same double (docs/performance.md, session 7).

/// Steps both `lanes` for each step number in `steps` until both have finished: `step(lane, i)`
/// performs step i of one lane and returns true when that lane has finished. A lane marked in
/// `finished` (from its start) or finished on the way is not stepped again.
pub(crate) fn advance_pair<S>(
    lanes: &mut [S; 2],
    mut finished: [bool; 2],
    steps: std::ops::Range<i32>,
    mut step: impl FnMut(&mut S, i32) -> bool,
) {
    for i in steps {
        if finished == [true; 2] {
            break;
        }
        for (lane, done) in lanes.iter_mut().zip(finished.iter_mut()) {
            if !*done {
                *done = step(lane, i);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn each_lane_stops_at_its_own_step_and_the_range_bounds_both() {
        // Each lane is (the step it finishes at, steps taken).
        let step = |lane: &mut (i32, i32), i: i32| {
            lane.1 += 1;
            assert_eq!(lane.1, i, "steps are numbered from the range's start");
            lane.1 == lane.0
        };
        let mut lanes = [(3, 0), (i32::MAX, 0)];
        advance_pair(&mut lanes, [false; 2], 1..6, step);
        assert_eq!(lanes.map(|l| l.1), [3, 5]);
        let mut lanes = [(3, 0), (2, 0)];
        advance_pair(&mut lanes, [false; 2], 1..6, step);
        assert_eq!(lanes.map(|l| l.1), [3, 2]);
        let mut lanes = [(3, 0), (4, 0)];
        advance_pair(&mut lanes, [true, false], 1..6, step);
        assert_eq!(lanes.map(|l| l.1), [0, 4]);
    }
}
