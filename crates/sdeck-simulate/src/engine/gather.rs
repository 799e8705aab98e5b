//! The values of every block put back in path order: one vector per date (or band time)
//! and state, blocks in order, the unused lanes of the last block left out.

use super::step::BlockOutput;
use crate::bytecode::LANES;

/// `out[d][i]` = the values of state `i` at date `d` of every path, from the blocks'
/// `pick(output)[(d * states + i) * LANES + lane]`.
pub(super) fn gather_states(
    outputs: &[BlockOutput],
    paths: usize,
    states: usize,
    dates: usize,
    pick: impl Fn(&BlockOutput) -> &[f64],
) -> Vec<Vec<Vec<f64>>> {
    let mut gathered = vec![vec![Vec::with_capacity(paths); states]; dates];
    for (block, output) in outputs.iter().enumerate() {
        let lanes_used = (paths - block * LANES).min(LANES);
        let values = pick(output);
        for (d, per_state) in gathered.iter_mut().enumerate() {
            for (i, target) in per_state.iter_mut().enumerate() {
                let start = (d * states + i) * LANES;
                target.extend_from_slice(&values[start..start + lanes_used]);
            }
        }
    }
    gathered
}

/// `out[d]` = the discount factor to date `d` of every path, from the blocks'
/// `pick(output)[d * LANES + lane]`.
pub(super) fn gather_discount(
    outputs: &[BlockOutput],
    paths: usize,
    dates: usize,
    pick: impl Fn(&BlockOutput) -> &[f64],
) -> Vec<Vec<f64>> {
    let mut gathered = vec![Vec::with_capacity(paths); dates];
    for (block, output) in outputs.iter().enumerate() {
        let lanes_used = (paths - block * LANES).min(LANES);
        let values = pick(output);
        for (d, target) in gathered.iter_mut().enumerate() {
            target.extend_from_slice(&values[d * LANES..d * LANES + lanes_used]);
        }
    }
    gathered
}
