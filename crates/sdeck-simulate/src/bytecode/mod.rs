//! Compiles drift and diffusion expressions into a flat stack program evaluated over a
//! chunk of paths at once, with parameters folded into constants.
//!
//! The tree walk of `Expr::eval` costs a recursive call and a match per node per path.
//! Here each instruction runs over [`LANES`] paths in a tight loop that the compiler can
//! vectorise, so the dispatch cost is shared by all the paths of a chunk, and no memory is
//! allocated while paths advance: the stack is a scratch buffer sized at compile time.
//!
//! Layout: [`fold`] replaces parameters by their values and computes constant parts,
//! [`emit`] writes the instructions, this module runs them.

mod emit;
mod fold;
#[cfg(test)]
mod tests;

use emit::Emitter;
use fold::{fold, Node};
use sdeck_semantics::{Expr, Function};

/// Number of paths evaluated together by one pass over a program.
pub const LANES: usize = 64;

/// One lane-wise value: the same quantity for each of the [`LANES`] paths of a chunk.
pub type Lanes = [f64; LANES];

/// One instruction of a [`Program`]. Binary instructions pop two values and push one;
/// the `...Const` forms take their right operand from the instruction itself.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Instruction {
    Const(f64),
    /// Pushes the value of a state.
    State(usize),
    /// Pushes max(state, 0): full truncation for states under a square root or a log.
    StatePositivePart(usize),
    Time,
    Negate,
    Add,
    Subtract,
    Multiply,
    Divide,
    Power,
    /// x^n for a small integer n, computed by repeated multiplication.
    PowerInteger(i32),
    Sqrt,
    Exp,
    Log,
    Abs,
    Sin,
    Cos,
    Min,
    Max,
    AddConst(f64),
    MultiplyConst(f64),
    /// c − x.
    ConstMinus(f64),
    /// c / x.
    ConstDivide(f64),
    /// 1 where x ≥ c, else 0: the jump of a `step` at the knot c.
    AtOrAfter(f64),
}

/// Why an expression could not be compiled.
#[derive(Clone, Debug, PartialEq)]
pub enum CompileError {
    /// The expression contains a part that did not resolve.
    Invalid,
    /// A parameter or state index outside the model.
    UnknownIndex,
    /// A function called with the wrong number of arguments.
    Arity(&'static str),
}

/// A compiled expression.
#[derive(Clone, Debug, PartialEq)]
pub struct Program {
    instructions: Vec<Instruction>,
    max_depth: usize,
    /// Set when the whole expression folded to one number.
    constant: Option<f64>,
}

/// Marks every state that appears inside the argument of `sqrt`, `log` or a power with a
/// non-integer or non-constant exponent: the candidates for full truncation (the plan
/// decides which are truncated).
pub fn mark_root_states(expr: &Expr, marks: &mut [bool]) {
    fn mark_all(expr: &Expr, marks: &mut [bool]) {
        expr.walk(&mut |e| {
            if let Expr::Factor(i) = e {
                if let Some(mark) = marks.get_mut(i.index()) {
                    *mark = true;
                }
            }
        });
    }
    match expr {
        Expr::Call(Function::Sqrt | Function::Log, args) => {
            args.iter().for_each(|a| mark_all(a, marks))
        }
        Expr::Call(_, args) => args.iter().for_each(|a| mark_root_states(a, marks)),
        Expr::Pow(base, exponent) => {
            let integer_exponent = matches!(exponent.as_ref(), Expr::Const(e) if e.fract() == 0.0);
            if integer_exponent {
                mark_root_states(base, marks);
            } else {
                mark_all(base, marks);
                mark_root_states(exponent, marks);
            }
        }
        _ => expr.for_each_child(|child| mark_root_states(child, marks)),
    }
}

impl Program {
    /// Compiles `expr` with parameter values `params` folded in. States flagged in
    /// `positive_part` are read as max(x, 0).
    pub fn compile(
        expr: &Expr,
        params: &[f64],
        state_count: usize,
        positive_part: &[bool],
    ) -> Result<Program, CompileError> {
        let node = fold(expr, params, state_count)?;
        let constant = match node {
            Node::Const(c) => Some(c),
            _ => None,
        };
        let mut emitter = Emitter {
            instructions: Vec::new(),
            depth: 0,
            max_depth: 0,
            positive_part,
        };
        emitter.emit(&node);
        Ok(Program {
            instructions: emitter.instructions,
            max_depth: emitter.max_depth,
            constant,
        })
    }

    /// The value when the expression folded to a number.
    pub fn constant(&self) -> Option<f64> {
        self.constant
    }

    /// Stack slots needed by [`Program::evaluate`].
    pub fn max_depth(&self) -> usize {
        self.max_depth
    }

    pub fn instructions(&self) -> &[Instruction] {
        &self.instructions
    }

    /// Evaluates the program for one chunk of paths. `states[i]` holds state i for each
    /// lane, `stack` has at least [`Program::max_depth`] slots; the result goes to `out`.
    /// Always inlined, so that it takes the vector instructions of the step it runs in.
    #[inline(always)]
    pub fn evaluate(&self, states: &[Lanes], t: f64, stack: &mut [Lanes], out: &mut Lanes) {
        if let Some(c) = self.constant {
            out.fill(c);
            return;
        }
        let mut top = 0usize;
        for instruction in &self.instructions {
            match *instruction {
                Instruction::Const(c) => {
                    stack[top].fill(c);
                    top += 1;
                }
                Instruction::State(i) => {
                    stack[top] = states[i];
                    top += 1;
                }
                Instruction::StatePositivePart(i) => {
                    let (slot, source) = (&mut stack[top], &states[i]);
                    for (s, x) in slot.iter_mut().zip(source) {
                        *s = x.max(0.0);
                    }
                    top += 1;
                }
                Instruction::Time => {
                    stack[top].fill(t);
                    top += 1;
                }
                Instruction::Negate => map_top(stack, top, |x| -x),
                Instruction::Sqrt => map_top(stack, top, f64::sqrt),
                Instruction::Exp => map_top(stack, top, f64::exp),
                Instruction::Log => map_top(stack, top, f64::ln),
                Instruction::Abs => map_top(stack, top, f64::abs),
                Instruction::Sin => map_top(stack, top, f64::sin),
                Instruction::Cos => map_top(stack, top, f64::cos),
                Instruction::PowerInteger(n) => map_top(stack, top, |x| integer_power(x, n)),
                Instruction::AddConst(c) => map_top(stack, top, |x| x + c),
                Instruction::MultiplyConst(c) => map_top(stack, top, |x| x * c),
                Instruction::ConstMinus(c) => map_top(stack, top, |x| c - x),
                Instruction::ConstDivide(c) => map_top(stack, top, |x| c / x),
                Instruction::AtOrAfter(c) => {
                    map_top(stack, top, |x| if x >= c { 1.0 } else { 0.0 })
                }
                Instruction::Add => top = combine_top(stack, top, |x, y| x + y),
                Instruction::Subtract => top = combine_top(stack, top, |x, y| x - y),
                Instruction::Multiply => top = combine_top(stack, top, |x, y| x * y),
                Instruction::Divide => top = combine_top(stack, top, |x, y| x / y),
                Instruction::Power => top = combine_top(stack, top, f64::powf),
                Instruction::Min => top = combine_top(stack, top, f64::min),
                Instruction::Max => top = combine_top(stack, top, f64::max),
            }
        }
        if top > 0 {
            *out = stack[top - 1];
        } else {
            out.fill(f64::NAN);
        }
    }

    /// Evaluates the program for a single point (used by tests and by plan-time checks).
    pub fn evaluate_one(&self, states: &[f64], t: f64) -> f64 {
        let mut lanes = vec![[0.0; LANES]; states.len()];
        for (lane, value) in lanes.iter_mut().zip(states) {
            lane.fill(*value);
        }
        let mut stack = vec![[0.0; LANES]; self.max_depth.max(1)];
        let mut out = [0.0; LANES];
        self.evaluate(&lanes, t, &mut stack, &mut out);
        out[0]
    }
}

#[inline(always)]
fn map_top(stack: &mut [Lanes], top: usize, f: impl Fn(f64) -> f64) {
    for x in stack[top - 1].iter_mut() {
        *x = f(*x);
    }
}

#[inline(always)]
fn combine_top(stack: &mut [Lanes], top: usize, f: impl Fn(f64, f64) -> f64) -> usize {
    let (lower, upper) = stack.split_at_mut(top - 1);
    let right = &upper[0];
    for (x, y) in lower[top - 2].iter_mut().zip(right) {
        *x = f(*x, *y);
    }
    top - 1
}

#[inline(always)]
fn integer_power(x: f64, n: i32) -> f64 {
    match n {
        0 => 1.0,
        1 => x,
        2 => x * x,
        3 => x * x * x,
        4 => {
            let square = x * x;
            square * square
        }
        n => x.powi(n),
    }
}
