//! One block of paths advanced step by step: the per-thread working memory, the step of
//! each scheme over 64 lanes, the coarse grid of step doubling, the discount integral, and
//! the values recorded at the dates.

use crate::bytecode::{Lanes, LANES};
use crate::isa::Isa;
use crate::normals::fill_normals_chunk_inline;
use crate::streams::BlockStream;

use super::compile::{Compiled, EulerState, GroupStep, LognormalState, Segment};

/// Per-thread working memory, reused across blocks.
pub(super) struct Scratch {
    pub(super) current: Vec<Lanes>,
    pub(super) next: Vec<Lanes>,
    pub(super) words: [u64; LANES],
    pub(super) normals: Vec<Lanes>,
    pub(super) increments: Vec<Lanes>,
    pub(super) group_normals: Vec<Lanes>,
    pub(super) stack: Vec<Lanes>,
    pub(super) value: Lanes,
    /// Step doubling: the coarse grid's states, and the first half of each pair of steps.
    pub(super) coarse: Vec<Lanes>,
    pub(super) coarse_next: Vec<Lanes>,
    pub(super) first_increments: Vec<Lanes>,
    pub(super) first_normals: Vec<Lanes>,
    /// With a discount: ∫ r ds so far and the rate at the current time, on the fine and
    /// on the coarse grid.
    pub(super) integral: Lanes,
    pub(super) rate: Lanes,
    pub(super) coarse_integral: Lanes,
    pub(super) coarse_rate: Lanes,
}

impl Scratch {
    pub(super) fn new(compiled: &Compiled) -> Scratch {
        let group_size = compiled
            .segments
            .first()
            .and_then(|s| s.group.as_ref())
            .map_or(0, |g| g.states.len());
        let doubling = if compiled.step_doubling { 1 } else { 0 };
        Scratch {
            current: vec![[0.0; LANES]; compiled.state_count],
            next: vec![[0.0; LANES]; compiled.state_count],
            words: [0; LANES],
            normals: vec![[0.0; LANES]; compiled.noise_count],
            increments: vec![[0.0; LANES]; compiled.noise_count],
            group_normals: vec![[0.0; LANES]; group_size],
            stack: vec![[0.0; LANES]; compiled.stack_depth],
            value: [0.0; LANES],
            coarse: vec![[0.0; LANES]; compiled.state_count * doubling],
            coarse_next: vec![[0.0; LANES]; compiled.state_count * doubling],
            first_increments: vec![[0.0; LANES]; compiled.noise_count * doubling],
            first_normals: vec![[0.0; LANES]; compiled.noise_count * doubling],
            integral: [0.0; LANES],
            rate: [0.0; LANES],
            coarse_integral: [0.0; LANES],
            coarse_rate: [0.0; LANES],
        }
    }
}

/// The values of one block: `values[(date * states + state) * LANES + lane]`, the same for
/// `coarse`, and for recorded blocks `bands[(record * states + state) * LANES + lane]`.
pub(super) struct BlockOutput {
    pub(super) values: Vec<f64>,
    pub(super) coarse: Vec<f64>,
    pub(super) bands: Vec<f64>,
    /// With a discount: `discount[date * LANES + lane]`, the same for `coarse_discount`.
    pub(super) discount: Vec<f64>,
    pub(super) coarse_discount: Vec<f64>,
}

pub(super) fn reported(value: f64, truncated: bool) -> f64 {
    if truncated {
        value.max(0.0)
    } else {
        value
    }
}

/// Correlated Brownian increments √Δ·L·Z from the normals of every noise.
#[inline(always)]
pub(super) fn increments_from_normals(
    factor: Option<&[Vec<f64>]>,
    sqrt_dt: f64,
    normals: &[Lanes],
    increments: &mut [Lanes],
) {
    match factor {
        None => {
            for (increment, normal) in increments.iter_mut().zip(normals) {
                for (d, z) in increment.iter_mut().zip(normal) {
                    *d = sqrt_dt * z;
                }
            }
        }
        Some(factor) => {
            for (increment, row) in increments.iter_mut().zip(factor) {
                increment.fill(0.0);
                for (weight, normal) in row.iter().zip(normals) {
                    if *weight == 0.0 {
                        continue;
                    }
                    let w = weight * sqrt_dt;
                    for (d, z) in increment.iter_mut().zip(normal) {
                        *d += w * z;
                    }
                }
            }
        }
    }
}

/// The increment of a state with no shock.
static NO_INCREMENT: Lanes = [0.0; LANES];

/// The increments of `noise`, or on the coarse grid their sums with `extra` (in `buffer`).
#[inline(always)]
fn summed_increment<'a>(
    increments: &'a [Lanes],
    extra: Option<&[Lanes]>,
    noise: usize,
    buffer: &'a mut Lanes,
) -> &'a Lanes {
    match extra {
        None => &increments[noise],
        Some(extra) => {
            for ((b, d), e) in buffer.iter_mut().zip(&increments[noise]).zip(&extra[noise]) {
                *b = d + e;
            }
            buffer
        }
    }
}

/// One Euler–Maruyama step of every Euler state, from `from` to `to`, over `dt` with
/// increments `increments` (or the sums `increments + extra`, for the coarse grid).
#[inline(always)]
#[allow(clippy::too_many_arguments)]
pub(super) fn euler_step(
    euler: &[EulerState],
    from: &[Lanes],
    to: &mut [Lanes],
    t: f64,
    dt: f64,
    increments: &[Lanes],
    extra: Option<&[Lanes]>,
    stack: &mut [Lanes],
    value: &mut Lanes,
) {
    let mut summed = [0.0; LANES];
    for state in euler {
        let i = state.index;
        if let Some(polynomial) = &state.polynomial {
            let increment = match state.diffusion.first() {
                Some((noise, _)) => summed_increment(increments, extra, *noise, &mut summed),
                None => &NO_INCREMENT,
            };
            polynomial.advance(&from[i], &mut to[i], dt, increment);
            continue;
        }
        state.drift.evaluate(from, t, stack, value);
        let (target, start) = (&mut to[i], &from[i]);
        for ((n, x), a) in target.iter_mut().zip(start).zip(value.iter()) {
            *n = x + a * dt;
        }
        for (noise, program) in &state.diffusion {
            let increment = summed_increment(increments, extra, *noise, &mut summed);
            if let Some(c) = program.constant() {
                for (n, d) in to[i].iter_mut().zip(increment) {
                    *n += c * d;
                }
            } else {
                program.evaluate(from, t, stack, value);
                for ((n, b), d) in to[i].iter_mut().zip(value.iter()).zip(increment) {
                    *n += b * d;
                }
            }
        }
    }
}

#[inline(always)]
pub(super) fn lognormal_step(
    states: &[LognormalState],
    drifts: &[f64],
    current: &[Lanes],
    next: &mut [Lanes],
    increments: &[Lanes],
    value: &mut Lanes,
) {
    for (state, drift) in states.iter().zip(drifts) {
        value.fill(*drift);
        for (noise, loading) in &state.loadings {
            for (v, d) in value.iter_mut().zip(&increments[*noise]) {
                *v += loading * d;
            }
        }
        let i = state.index;
        for ((n, x), v) in next[i].iter_mut().zip(&current[i]).zip(value.iter()) {
            *n = x * v.exp();
        }
    }
}

pub(super) fn group_step(
    group: &GroupStep,
    current: &[Lanes],
    next: &mut [Lanes],
    normals: &[Lanes],
    value: &mut Lanes,
) {
    for (a, &target) in group.states.iter().enumerate() {
        value.fill(group.shift[a]);
        for (b, &source) in group.states.iter().enumerate() {
            let weight = group.transition[a][b];
            if weight != 0.0 {
                for (v, x) in value.iter_mut().zip(&current[source]) {
                    *v += weight * x;
                }
            }
            let loading = group.noise_factor[a][b];
            if loading != 0.0 {
                for (v, z) in value.iter_mut().zip(&normals[b]) {
                    *v += loading * z;
                }
            }
        }
        next[target] = *value;
    }
}

/// Advances a block by one step of `segment`; `t` is the time at the start of the step,
/// `second_of_pair` says whether this step closes a pair of the coarse grid.
#[inline(always)]
pub(super) fn advance(
    compiled: &Compiled,
    segment: &Segment,
    scratch: &mut Scratch,
    rng: &mut BlockStream,
    t: f64,
    second_of_pair: bool,
) {
    let dt = segment.dt;
    draw_shocks(compiled, segment, scratch, rng);
    euler_step(
        &compiled.euler,
        &scratch.current,
        &mut scratch.next,
        t,
        dt,
        &scratch.increments,
        None,
        &mut scratch.stack,
        &mut scratch.value,
    );
    lognormal_step(
        &compiled.lognormal,
        &segment.lognormal,
        &scratch.current,
        &mut scratch.next,
        &scratch.increments,
        &mut scratch.value,
    );
    exact_steps(compiled, segment, scratch, rng);
    if compiled.step_doubling {
        coarse_grid(compiled, segment, scratch, t, second_of_pair);
    }
    std::mem::swap(&mut scratch.current, &mut scratch.next);
    if let Some(program) = &compiled.discount {
        program.evaluate(
            &scratch.current,
            t + dt,
            &mut scratch.stack,
            &mut scratch.value,
        );
        trapezoid(&mut scratch.integral, &mut scratch.rate, &scratch.value, dt);
    }
}

/// The normals of the step and, where a scheme needs them, the Brownian increments.
#[inline(always)]
fn draw_shocks(
    compiled: &Compiled,
    segment: &Segment,
    scratch: &mut Scratch,
    rng: &mut BlockStream,
) {
    if compiled.needs_normals {
        for lanes in scratch.normals.iter_mut() {
            fill_normals_chunk_inline(rng, &mut scratch.words, lanes);
        }
    }
    if compiled.needs_increments {
        increments_from_normals(
            compiled.noise_factor.as_deref(),
            segment.sqrt_dt,
            &scratch.normals,
            &mut scratch.increments,
        );
    }
}

/// The exact transitions: square roots, then the Gaussian group, then the log-prices
/// driven by a square-root variance (which read its next value).
#[inline(always)]
fn exact_steps(
    compiled: &Compiled,
    segment: &Segment,
    scratch: &mut Scratch,
    rng: &mut BlockStream,
) {
    let Scratch {
        current,
        next,
        words,
        normals,
        group_normals,
        value,
        ..
    } = scratch;
    for (state, transition) in compiled.square_root.iter().zip(&segment.square_root) {
        let i = state.index;
        for (n, x) in next[i].iter_mut().zip(&current[i]) {
            *n = transition.sample(rng.scalar(), *x);
        }
    }
    if let Some(group) = &segment.group {
        for lanes in group_normals.iter_mut() {
            fill_normals_chunk_inline(rng, words, lanes);
        }
        group_step(group, current, next, group_normals, value);
    }
    for (state, step) in compiled.driven.iter().zip(&segment.driven) {
        let (i, v, k) = (state.index, state.law.variance, state.law.noise);
        let variance_next = next[v];
        for ((((n, x), v0), v1), z) in next[i]
            .iter_mut()
            .zip(&current[i])
            .zip(&current[v])
            .zip(&variance_next)
            .zip(&normals[k])
        {
            *n = step.advance(state.law.price, *x, *v0, *v1, *z);
        }
    }
}

/// Step doubling: at the start of a pair, the coarse grid takes the exact states and keeps
/// the first step's shocks; at its close, one step of 2Δ with the summed increments (and
/// the coarse discount's trapezoid).
#[inline(always)]
fn coarse_grid(
    compiled: &Compiled,
    segment: &Segment,
    scratch: &mut Scratch,
    t: f64,
    second_of_pair: bool,
) {
    let dt = segment.dt;
    let Scratch {
        current,
        next,
        normals,
        increments,
        stack,
        value,
        coarse,
        coarse_next,
        first_increments,
        first_normals,
        coarse_integral,
        coarse_rate,
        ..
    } = scratch;
    if !second_of_pair {
        // Start of a pair: the exact states on the coarse grid are the fine ones.
        for (i, discretised) in compiled.discretised.iter().enumerate() {
            if !discretised {
                coarse[i] = current[i];
            }
        }
        first_increments.copy_from_slice(increments);
        first_normals.copy_from_slice(normals);
        return;
    }
    // Close the pair: one step of 2Δ on the coarse grid with the summed increments.
    coarse_step(
        compiled,
        segment,
        coarse,
        coarse_next,
        t - dt,
        increments,
        first_increments,
        normals,
        first_normals,
        next,
        stack,
        value,
    );
    if let Some(program) = &compiled.discount {
        // The exact states of the coarse grid are the fine ones.
        for (i, discretised) in compiled.discretised.iter().enumerate() {
            if !discretised {
                coarse[i] = next[i];
            }
        }
        program.evaluate(coarse, t + dt, stack, value);
        trapezoid(coarse_integral, coarse_rate, value, 2.0 * dt);
    }
}

/// One panel of the trapezoid rule: `integral += h (rate + next)/2`, then `rate = next`.
#[inline(always)]
pub(super) fn trapezoid(integral: &mut Lanes, rate: &mut Lanes, next: &Lanes, h: f64) {
    let half = 0.5 * h;
    for ((i, r), n) in integral.iter_mut().zip(rate.iter_mut()).zip(next) {
        *i += half * (*r + n);
        *r = *n;
    }
}

/// The coarse grid's step over [t0, t0 + 2Δ]: Euler states with the summed increments,
/// log-prices with the summed normals over the fine variance path (the variance is exact,
/// so its coarse values are its fine ones).
#[allow(clippy::too_many_arguments)]
pub(super) fn coarse_step(
    compiled: &Compiled,
    segment: &Segment,
    coarse: &mut [Lanes],
    coarse_next: &mut [Lanes],
    t0: f64,
    increments: &[Lanes],
    first_increments: &[Lanes],
    normals: &[Lanes],
    first_normals: &[Lanes],
    fine_next: &[Lanes],
    stack: &mut [Lanes],
    value: &mut Lanes,
) {
    // Euler reads every state at t0, so the new values go to `coarse_next` first.
    euler_step(
        &compiled.euler,
        coarse,
        coarse_next,
        t0,
        2.0 * segment.dt,
        first_increments,
        Some(increments),
        stack,
        value,
    );
    for state in &compiled.euler {
        coarse[state.index] = coarse_next[state.index];
    }
    let half = std::f64::consts::FRAC_1_SQRT_2;
    for (state, step) in compiled.driven.iter().zip(&segment.driven_coarse) {
        let (i, v, k) = (state.index, state.law.variance, state.law.noise);
        for lane in 0..LANES {
            let z = (first_normals[k][lane] + normals[k][lane]) * half;
            coarse[i][lane] = step.advance(
                state.law.price,
                coarse[i][lane],
                coarse[v][lane],
                fine_next[v][lane],
                z,
            );
        }
    }
}

/// Simulates block `block`: its paths from the start to the last date, each step compiled
/// for `isa` (the same bits whichever it is).
pub(super) fn simulate_block(
    compiled: &Compiled,
    scratch: &mut Scratch,
    seed: u64,
    block: usize,
    record_steps: &[usize],
    isa: Isa,
) -> BlockOutput {
    let mut rng = BlockStream::new(seed, block as u64);
    start_block(compiled, scratch);
    let mut output = BlockOutput::with_capacity(compiled, record_steps.len());
    let mut next_record = record_steps.iter().peekable();
    if next_record.peek() == Some(&&0) {
        record(compiled, &scratch.current, &mut output.bands);
        next_record.next();
    }
    let mut global = 0usize;
    for segment in &compiled.segments {
        for k in 0..segment.steps {
            let t = segment.start + k as f64 * segment.dt;
            isa.run(
                #[inline(always)]
                || advance(compiled, segment, scratch, &mut rng, t, k % 2 == 1),
            );
            global += 1;
            if next_record.peek() == Some(&&global) {
                record(compiled, &scratch.current, &mut output.bands);
                next_record.next();
            }
        }
        close_date(compiled, scratch, &mut output);
    }
    output
}

/// Every path of the block at its initial values, and the discount integrals at zero.
fn start_block(compiled: &Compiled, scratch: &mut Scratch) {
    for (lanes, x0) in scratch.current.iter_mut().zip(&compiled.initial) {
        lanes.fill(*x0);
    }
    for (lanes, x0) in scratch.coarse.iter_mut().zip(&compiled.initial) {
        lanes.fill(*x0);
    }
    if let Some(program) = &compiled.discount {
        program.evaluate(
            &scratch.current,
            0.0,
            &mut scratch.stack,
            &mut scratch.value,
        );
        scratch.rate = scratch.value;
        scratch.coarse_rate = scratch.value;
        scratch.integral = [0.0; LANES];
        scratch.coarse_integral = [0.0; LANES];
    }
}

impl BlockOutput {
    /// Empty vectors with room for every date (and `records` band times) of one block.
    fn with_capacity(compiled: &Compiled, records: usize) -> BlockOutput {
        let (states, dates) = (compiled.state_count, compiled.segments.len());
        let with_discount = compiled.discount.is_some();
        let doubling = usize::from(compiled.step_doubling);
        BlockOutput {
            values: Vec::with_capacity(dates * states * LANES),
            coarse: Vec::with_capacity(doubling * dates * states * LANES),
            bands: Vec::with_capacity(records * states * LANES),
            discount: Vec::with_capacity(usize::from(with_discount) * dates * LANES),
            coarse_discount: Vec::with_capacity(
                usize::from(with_discount) * doubling * dates * LANES,
            ),
        }
    }
}

/// The reported value of every state of `current`, appended to `out`.
fn record(compiled: &Compiled, current: &[Lanes], out: &mut Vec<f64>) {
    for (i, lanes) in current.iter().enumerate() {
        let truncated = compiled.truncated[i];
        out.extend(lanes.iter().map(|x| reported(*x, truncated)));
    }
}

/// At a reporting date: the states, the discount factors and, with step doubling, the same
/// on the coarse grid (whose exact states are the fine ones).
fn close_date(compiled: &Compiled, scratch: &mut Scratch, output: &mut BlockOutput) {
    let with_discount = compiled.discount.is_some();
    record(compiled, &scratch.current, &mut output.values);
    if with_discount {
        output
            .discount
            .extend(scratch.integral.iter().map(|i| (-i).exp()));
    }
    if compiled.step_doubling {
        for (i, discretised) in compiled.discretised.iter().enumerate() {
            if !discretised {
                scratch.coarse[i] = scratch.current[i];
            }
        }
        record(compiled, &scratch.coarse, &mut output.coarse);
        if with_discount {
            output
                .coarse_discount
                .extend(scratch.coarse_integral.iter().map(|i| (-i).exp()));
        }
    }
}
