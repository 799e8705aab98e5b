//! The expression folded: parameters replaced by their values, constant parts computed,
//! schedules written out as sums of jumps and ramps.

use super::CompileError;
use sdeck_semantics::{Expr, Function};

/// A folded expression tree: parameters replaced by their values, constant parts computed.
#[derive(Clone, Debug, PartialEq)]
pub(super) enum Node {
    Const(f64),
    State(usize),
    Time,
    Unary(UnaryOp, Box<Node>),
    Binary(BinaryOp, Box<Node>, Box<Node>),
    PowerInteger(Box<Node>, i32),
    AtOrAfter(Box<Node>, f64),
}

#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) enum UnaryOp {
    Negate,
    Sqrt,
    Exp,
    Log,
    Abs,
    Sin,
    Cos,
}

#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) enum BinaryOp {
    Add,
    Subtract,
    Multiply,
    Divide,
    Power,
    Min,
    Max,
}

impl UnaryOp {
    fn apply(self, x: f64) -> f64 {
        match self {
            UnaryOp::Negate => -x,
            UnaryOp::Sqrt => x.sqrt(),
            UnaryOp::Exp => x.exp(),
            UnaryOp::Log => x.ln(),
            UnaryOp::Abs => x.abs(),
            UnaryOp::Sin => x.sin(),
            UnaryOp::Cos => x.cos(),
        }
    }
}

impl BinaryOp {
    fn apply(self, x: f64, y: f64) -> f64 {
        match self {
            BinaryOp::Add => x + y,
            BinaryOp::Subtract => x - y,
            BinaryOp::Multiply => x * y,
            BinaryOp::Divide => x / y,
            BinaryOp::Power => x.powf(y),
            BinaryOp::Min => x.min(y),
            BinaryOp::Max => x.max(y),
        }
    }
}

/// Largest |n| for which `x^n` is computed by multiplication rather than `powf`.
const MAX_INTEGER_POWER: f64 = 16.0;

// Long (about 90 lines): one arm per variant of the expression tree, as every fold
// that builds something per variant (DEVELOPERS.md, invariants).
pub(super) fn fold(expr: &Expr, params: &[f64], state_count: usize) -> Result<Node, CompileError> {
    let node = match expr {
        Expr::Invalid => return Err(CompileError::Invalid),
        Expr::Const(c) => Node::Const(*c),
        Expr::Param(i) => Node::Const(*params.get(i.index()).ok_or(CompileError::UnknownIndex)?),
        Expr::Factor(i) => {
            if i.index() >= state_count {
                return Err(CompileError::UnknownIndex);
            }
            Node::State(i.index())
        }
        Expr::Time => Node::Time,
        Expr::Neg(a) => unary(UnaryOp::Negate, fold(a, params, state_count)?),
        Expr::Add(a, b) => binary(
            BinaryOp::Add,
            fold(a, params, state_count)?,
            fold(b, params, state_count)?,
        ),
        Expr::Sub(a, b) => binary(
            BinaryOp::Subtract,
            fold(a, params, state_count)?,
            fold(b, params, state_count)?,
        ),
        Expr::Mul(a, b) => binary(
            BinaryOp::Multiply,
            fold(a, params, state_count)?,
            fold(b, params, state_count)?,
        ),
        Expr::Div(a, b) => binary(
            BinaryOp::Divide,
            fold(a, params, state_count)?,
            fold(b, params, state_count)?,
        ),
        Expr::Pow(a, b) => {
            let base = fold(a, params, state_count)?;
            let exponent = fold(b, params, state_count)?;
            match exponent {
                Node::Const(e) if e == 0.5 && !matches!(base, Node::Const(_)) => {
                    unary(UnaryOp::Sqrt, base)
                }
                Node::Const(e)
                    if e.fract() == 0.0
                        && e.abs() <= MAX_INTEGER_POWER
                        && !matches!(base, Node::Const(_)) =>
                {
                    // The guard bounds |e| by 16, so the cast is exact.
                    Node::PowerInteger(Box::new(base), e as i32)
                }
                exponent => binary(BinaryOp::Power, base, exponent),
            }
        }
        Expr::Call(function, args) if function.is_schedule() => {
            if !function.accepts(args.len()) {
                return Err(CompileError::Arity(function.name()));
            }
            let folded = args
                .iter()
                .map(|arg| fold(arg, params, state_count))
                .collect::<Result<Vec<Node>, CompileError>>()?;
            schedule(*function, folded)?
        }
        Expr::Call(function, args) => {
            if !function.accepts(args.len()) {
                return Err(CompileError::Arity(function.name()));
            }
            let mut folded = Vec::with_capacity(args.len());
            for arg in args {
                folded.push(fold(arg, params, state_count)?);
            }
            let mut folded = folded.into_iter();
            let (Some(first), second) = (folded.next(), folded.next()) else {
                return Err(CompileError::Arity(function.name()));
            };
            match (function, second) {
                (Function::Min, Some(second)) => binary(BinaryOp::Min, first, second),
                (Function::Max, Some(second)) => binary(BinaryOp::Max, first, second),
                (Function::Exp, None) => unary(UnaryOp::Exp, first),
                (Function::Log, None) => unary(UnaryOp::Log, first),
                (Function::Sqrt, None) => unary(UnaryOp::Sqrt, first),
                (Function::Abs, None) => unary(UnaryOp::Abs, first),
                (Function::Sin, None) => unary(UnaryOp::Sin, first),
                (Function::Cos, None) => unary(UnaryOp::Cos, first),
                _ => return Err(CompileError::Arity(function.name())),
            }
        }
    };
    Ok(node)
}

/// `step` as v0 + Σ (vₖ − vₖ₋₁)·[x ≥ tₖ], `ramp` as v0 + Σ slopeₖ·(clamp(x, tₖ₋₁, tₖ) − tₖ₋₁):
/// the knots are numbers once parameters are folded in.
fn schedule(function: Function, folded: Vec<Node>) -> Result<Node, CompileError> {
    let mut items = folded.into_iter();
    let x = items.next().ok_or(CompileError::Arity(function.name()))?;
    let rest: Vec<Node> = items.collect();
    let knot = |node: &Node| match node {
        Node::Const(k) => Ok(*k),
        _ => Err(CompileError::Invalid),
    };
    match function {
        Function::Step => {
            let (first, pairs) = rest
                .split_first()
                .ok_or(CompileError::Arity(function.name()))?;
            let mut acc = first.clone();
            let mut previous = first.clone();
            for pair in pairs.chunks_exact(2) {
                let at = knot(&pair[0])?;
                let jump = binary(BinaryOp::Subtract, pair[1].clone(), previous);
                let indicator = match &x {
                    Node::Const(value) => Node::Const(if *value >= at { 1.0 } else { 0.0 }),
                    _ => Node::AtOrAfter(Box::new(x.clone()), at),
                };
                acc = binary(
                    BinaryOp::Add,
                    acc,
                    binary(BinaryOp::Multiply, jump, indicator),
                );
                previous = pair[1].clone();
            }
            Ok(acc)
        }
        _ => {
            let pairs: Vec<&[Node]> = rest.chunks_exact(2).collect();
            let first = pairs.first().ok_or(CompileError::Arity(function.name()))?;
            let mut acc = first[1].clone();
            for window in pairs.windows(2) {
                let (low, high) = (knot(&window[0][0])?, knot(&window[1][0])?);
                let rise = binary(
                    BinaryOp::Subtract,
                    window[1][1].clone(),
                    window[0][1].clone(),
                );
                let slope = binary(BinaryOp::Divide, rise, Node::Const(high - low));
                let clamped = binary(
                    BinaryOp::Max,
                    binary(BinaryOp::Min, x.clone(), Node::Const(high)),
                    Node::Const(low),
                );
                let run = binary(BinaryOp::Subtract, clamped, Node::Const(low));
                acc = binary(BinaryOp::Add, acc, binary(BinaryOp::Multiply, slope, run));
            }
            Ok(acc)
        }
    }
}

fn unary(op: UnaryOp, a: Node) -> Node {
    match a {
        Node::Const(x) => Node::Const(op.apply(x)),
        a => Node::Unary(op, Box::new(a)),
    }
}

fn binary(op: BinaryOp, a: Node, b: Node) -> Node {
    match (a, b) {
        (Node::Const(x), Node::Const(y)) => Node::Const(op.apply(x, y)),
        (a, b) => Node::Binary(op, Box::new(a), Box::new(b)),
    }
}
