//! Compiles drift and diffusion expressions into a flat stack program evaluated over a
//! chunk of paths at once, with parameters folded into constants.
//!
//! The tree walk of `Expr::eval` costs a recursive call and a match per node per path.
//! Here each instruction runs over [`LANES`] paths in a tight loop that the compiler can
//! vectorise, so the dispatch cost is shared by all the paths of a chunk, and no memory is
//! allocated while paths advance: the stack is a scratch buffer sized at compile time.

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

/// A folded expression tree: parameters replaced by their values, constant parts computed.
#[derive(Clone, Debug, PartialEq)]
enum Node {
    Const(f64),
    State(usize),
    Time,
    Unary(UnaryOp, Box<Node>),
    Binary(BinaryOp, Box<Node>, Box<Node>),
    PowerInteger(Box<Node>, i32),
    AtOrAfter(Box<Node>, f64),
}

#[derive(Clone, Copy, Debug, PartialEq)]
enum UnaryOp {
    Negate,
    Sqrt,
    Exp,
    Log,
    Abs,
    Sin,
    Cos,
}

#[derive(Clone, Copy, Debug, PartialEq)]
enum BinaryOp {
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

fn fold(expr: &Expr, params: &[f64], state_count: usize) -> Result<Node, CompileError> {
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

struct Emitter<'a> {
    instructions: Vec<Instruction>,
    depth: usize,
    max_depth: usize,
    positive_part: &'a [bool],
}

impl Emitter<'_> {
    fn push(&mut self, instruction: Instruction, depth_change: isize) {
        self.instructions.push(instruction);
        self.depth = self.depth.saturating_add_signed(depth_change);
        self.max_depth = self.max_depth.max(self.depth);
    }

    fn emit(&mut self, node: &Node) {
        match node {
            Node::Const(c) => self.push(Instruction::Const(*c), 1),
            Node::State(i) => {
                let truncated = self.positive_part.get(*i).copied().unwrap_or(false);
                let instruction = if truncated {
                    Instruction::StatePositivePart(*i)
                } else {
                    Instruction::State(*i)
                };
                self.push(instruction, 1)
            }
            Node::Time => self.push(Instruction::Time, 1),
            Node::Unary(op, a) => {
                self.emit(a);
                let instruction = match op {
                    UnaryOp::Negate => Instruction::Negate,
                    UnaryOp::Sqrt => Instruction::Sqrt,
                    UnaryOp::Exp => Instruction::Exp,
                    UnaryOp::Log => Instruction::Log,
                    UnaryOp::Abs => Instruction::Abs,
                    UnaryOp::Sin => Instruction::Sin,
                    UnaryOp::Cos => Instruction::Cos,
                };
                self.push(instruction, 0);
            }
            Node::PowerInteger(a, n) => {
                self.emit(a);
                self.push(Instruction::PowerInteger(*n), 0);
            }
            Node::AtOrAfter(a, c) => {
                self.emit(a);
                self.push(Instruction::AtOrAfter(*c), 0);
            }
            Node::Binary(op, a, b) => {
                // Peephole: an operand that is a number rides on the instruction.
                match (op, a.as_ref(), b.as_ref()) {
                    (BinaryOp::Add, _, Node::Const(c)) => {
                        self.emit(a);
                        self.push(Instruction::AddConst(*c), 0);
                    }
                    (BinaryOp::Add, Node::Const(c), _) => {
                        self.emit(b);
                        self.push(Instruction::AddConst(*c), 0);
                    }
                    (BinaryOp::Subtract, _, Node::Const(c)) => {
                        self.emit(a);
                        self.push(Instruction::AddConst(-*c), 0);
                    }
                    (BinaryOp::Subtract, Node::Const(c), _) => {
                        self.emit(b);
                        self.push(Instruction::ConstMinus(*c), 0);
                    }
                    (BinaryOp::Multiply, _, Node::Const(c)) => {
                        self.emit(a);
                        self.push(Instruction::MultiplyConst(*c), 0);
                    }
                    (BinaryOp::Multiply, Node::Const(c), _) => {
                        self.emit(b);
                        self.push(Instruction::MultiplyConst(*c), 0);
                    }
                    (BinaryOp::Divide, Node::Const(c), _) => {
                        self.emit(b);
                        self.push(Instruction::ConstDivide(*c), 0);
                    }
                    _ => {
                        self.emit(a);
                        self.emit(b);
                        let instruction = match op {
                            BinaryOp::Add => Instruction::Add,
                            BinaryOp::Subtract => Instruction::Subtract,
                            BinaryOp::Multiply => Instruction::Multiply,
                            BinaryOp::Divide => Instruction::Divide,
                            BinaryOp::Power => Instruction::Power,
                            BinaryOp::Min => Instruction::Min,
                            BinaryOp::Max => Instruction::Max,
                        };
                        self.push(instruction, -1);
                    }
                }
            }
        }
    }
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

#[cfg(test)]
mod tests {
    use super::*;

    fn b(e: Expr) -> Box<Expr> {
        Box::new(e)
    }

    /// A set of expressions covering every instruction, checked against the tree walk of
    /// `Expr::eval`, the semantic layer's reference evaluator.
    fn sample_expressions() -> Vec<Expr> {
        use Expr::*;
        vec![
            // kappa * (level - x)
            Mul(
                b(Expr::param(0)),
                b(Sub(b(Expr::param(1)), b(Expr::factor(0)))),
            ),
            // vol * sqrt(x)
            Mul(
                b(Expr::param(2)),
                b(Call(Function::Sqrt, vec![Expr::factor(0)])),
            ),
            // x - x^3 + y / 2
            Add(
                b(Sub(
                    b(Expr::factor(0)),
                    b(Pow(b(Expr::factor(0)), b(Const(3.0)))),
                )),
                b(Div(b(Expr::factor(1)), b(Const(2.0)))),
            ),
            // exp(-x) * log(y) + abs(sin(t)) - cos(x * t)
            Sub(
                b(Add(
                    b(Mul(
                        b(Call(Function::Exp, vec![Neg(b(Expr::factor(0)))])),
                        b(Call(Function::Log, vec![Expr::factor(1)])),
                    )),
                    b(Call(Function::Abs, vec![Call(Function::Sin, vec![Time])])),
                )),
                b(Call(Function::Cos, vec![Mul(b(Expr::factor(0)), b(Time))])),
            ),
            // min(x, level) + max(y, 1) - 1 / x + x ^ y + x ^ 0.5 + (2 - y) + (x - 1)
            Add(
                b(Add(
                    b(Add(
                        b(Sub(
                            b(Add(
                                b(Call(Function::Min, vec![Expr::factor(0), Expr::param(1)])),
                                b(Call(Function::Max, vec![Expr::factor(1), Const(1.0)])),
                            )),
                            b(Div(b(Const(1.0)), b(Expr::factor(0)))),
                        )),
                        b(Pow(b(Expr::factor(0)), b(Expr::factor(1)))),
                    )),
                    b(Pow(b(Expr::factor(0)), b(Const(0.5)))),
                )),
                b(Add(
                    b(Sub(b(Const(2.0)), b(Expr::factor(1)))),
                    b(Sub(b(Expr::factor(0)), b(Const(1.0)))),
                )),
            ),
            // a constant expression: 2 * kappa ^ 2
            Mul(b(Const(2.0)), b(Pow(b(Expr::param(0)), b(Const(2.0))))),
            // x ^ -2 + x ^ 7 + (1 + x) + (x * 3)
            Add(
                b(Add(
                    b(Pow(b(Expr::factor(0)), b(Const(-2.0)))),
                    b(Pow(b(Expr::factor(0)), b(Const(7.0)))),
                )),
                b(Add(
                    b(Add(b(Const(1.0)), b(Expr::factor(0)))),
                    b(Mul(b(Expr::factor(0)), b(Const(3.0)))),
                )),
            ),
        ]
    }

    #[test]
    fn compiled_programs_agree_with_the_tree_walk() {
        let params = [1.8, 0.032, 0.25];
        let points = [[0.7, 1.3], [2.5, 0.4], [0.05, 3.0], [1.0, 1.0]];
        for expr in sample_expressions() {
            let program = Program::compile(&expr, &params, 2, &[false, false]).unwrap();
            for point in &points {
                for t in [0.0, 0.37, 2.0] {
                    let expected = expr.eval(&params, point, t);
                    let got = program.evaluate_one(point, t);
                    let scale = expected.abs().max(1.0);
                    assert!(
                        (got - expected).abs() <= 1e-12 * scale,
                        "{expr:?} at {point:?}, t={t}: {got} vs {expected}"
                    );
                }
            }
        }
    }

    #[test]
    fn constants_fold_and_parameters_disappear() {
        let expr = Expr::Mul(
            b(Expr::Const(2.0)),
            b(Expr::Pow(b(Expr::param(0)), b(Expr::Const(2.0)))),
        );
        let program = Program::compile(&expr, &[3.0], 0, &[]).unwrap();
        assert_eq!(program.constant(), Some(18.0));
        let expr = Expr::Mul(
            b(Expr::param(0)),
            b(Expr::Sub(b(Expr::param(1)), b(Expr::factor(0)))),
        );
        let program = Program::compile(&expr, &[1.5, 0.04], 1, &[false]).unwrap();
        assert!(program
            .instructions()
            .iter()
            .all(|i| !matches!(i, Instruction::Const(_))));
        assert_eq!(program.instructions().len(), 3);
    }

    #[test]
    fn truncated_states_read_their_positive_part() {
        let expr = Expr::Call(Function::Sqrt, vec![Expr::factor(0)]);
        let program = Program::compile(&expr, &[], 1, &[true]).unwrap();
        assert_eq!(program.evaluate_one(&[-0.3], 0.0), 0.0);
        assert_eq!(program.evaluate_one(&[0.25], 0.0), 0.5);
    }

    #[test]
    fn invalid_and_out_of_range_expressions_are_errors() {
        assert_eq!(
            Program::compile(&Expr::Invalid, &[], 0, &[]),
            Err(CompileError::Invalid)
        );
        assert_eq!(
            Program::compile(&Expr::param(3), &[], 0, &[]),
            Err(CompileError::UnknownIndex)
        );
        assert_eq!(
            Program::compile(&Expr::factor(1), &[], 1, &[false]),
            Err(CompileError::UnknownIndex)
        );
        let bad_call = Expr::Call(Function::Min, vec![Expr::Const(1.0)]);
        assert_eq!(
            Program::compile(&bad_call, &[], 0, &[]),
            Err(CompileError::Arity("min"))
        );
    }

    #[test]
    fn root_states_are_found_under_sqrt_log_and_fractional_powers() {
        use Expr::*;
        let mut marks = [false; 3];
        // sqrt(x) * y^2 + z^1.5
        let expr = Add(
            b(Mul(
                b(Call(Function::Sqrt, vec![Expr::factor(0)])),
                b(Pow(b(Expr::factor(1)), b(Const(2.0)))),
            )),
            b(Pow(b(Expr::factor(2)), b(Const(1.5)))),
        );
        mark_root_states(&expr, &mut marks);
        assert_eq!(marks, [true, false, true]);
    }
}

#[cfg(test)]
mod schedules {
    use super::*;

    /// `step(t, 2, 0.5, 3, 1.5, -1)` and `ramp(t, 0.5, 2, 0.75, 3·x, 1.5, -1)` at times
    /// around their knots: the program agrees with the tree walk, on the knot too
    /// (right-continuous step).
    #[test]
    fn step_and_ramp_agree_with_the_tree_walk() {
        let c = Expr::Const;
        let step = Expr::Call(
            Function::Step,
            vec![Expr::Time, c(2.0), c(0.5), c(3.0), Expr::param(0), c(-1.0)],
        );
        let ramp = Expr::Call(
            Function::Ramp,
            vec![
                Expr::Time,
                c(0.5),
                c(2.0),
                c(0.75),
                Expr::Mul(Box::new(c(3.0)), Box::new(Expr::factor(0))),
                Expr::param(0),
                c(-1.0),
            ],
        );
        let params = [1.5];
        for expr in [step, ramp] {
            let program = Program::compile(&expr, &params, 1, &[false]).unwrap();
            for t in [0.0, 0.25, 0.5, 0.6, 0.75, 1.0, 1.4999, 1.5, 2.0] {
                let expected = expr.eval(&params, &[0.7], t);
                let got = program.evaluate_one(&[0.7], t);
                assert!(
                    (got - expected).abs() <= 1e-14,
                    "{expr:?} at {t}: {got} vs {expected}"
                );
            }
        }
        // Worked by hand: the step is 3 on [0.5, 1.5) and −1 from 1.5; the ramp rises
        // from 2 at 0.5 to 2.1 at 0.75, then falls to −1 at 1.5.
        let at = |expr: &Expr, t: f64| expr.eval(&params, &[0.7], t);
        let step = Expr::Call(
            Function::Step,
            vec![Expr::Time, c(2.0), c(0.5), c(3.0), c(1.5), c(-1.0)],
        );
        assert_eq!(
            (at(&step, 0.49), at(&step, 0.5), at(&step, 1.5)),
            (2.0, 3.0, -1.0)
        );
    }
}

#[cfg(test)]
mod properties {
    use super::*;
    use proptest::prelude::*;

    /// The functions of fixed arity (the schedules have their own test).
    const FUNCTIONS: [Function; 8] = [
        Function::Exp,
        Function::Log,
        Function::Sqrt,
        Function::Abs,
        Function::Min,
        Function::Max,
        Function::Sin,
        Function::Cos,
    ];

    /// Random expressions over two parameters, two states and `t`.
    fn expression() -> impl Strategy<Value = Expr> {
        let leaf = prop_oneof![
            (-3.0f64..3.0).prop_map(Expr::Const),
            (0usize..2).prop_map(Expr::param),
            (0usize..2).prop_map(Expr::factor),
            Just(Expr::Time),
            // Small integer and half-integer constants reach the power shortcuts.
            (-4i32..6).prop_map(|n| Expr::Const(f64::from(n) * 0.5)),
        ];
        leaf.prop_recursive(5, 48, 2, |inner| {
            prop_oneof![
                inner.clone().prop_map(|a| Expr::Neg(Box::new(a))),
                (inner.clone(), inner.clone())
                    .prop_map(|(a, b)| Expr::Add(Box::new(a), Box::new(b))),
                (inner.clone(), inner.clone())
                    .prop_map(|(a, b)| Expr::Sub(Box::new(a), Box::new(b))),
                (inner.clone(), inner.clone())
                    .prop_map(|(a, b)| Expr::Mul(Box::new(a), Box::new(b))),
                (inner.clone(), inner.clone())
                    .prop_map(|(a, b)| Expr::Div(Box::new(a), Box::new(b))),
                (inner.clone(), inner.clone())
                    .prop_map(|(a, b)| Expr::Pow(Box::new(a), Box::new(b))),
                (0usize..8, inner.clone(), inner).prop_map(|(f, a, b)| {
                    let function = FUNCTIONS[f];
                    let args = if function.arity() == Some(2) {
                        vec![a, b]
                    } else {
                        vec![a]
                    };
                    Expr::Call(function, args)
                }),
            ]
        })
    }

    /// Equal up to rounding, or both outside the finite numbers (the compiled program may
    /// reach an infinity or NaN by a different but equivalent route, e.g. x·x·x for x³).
    fn close(a: f64, b: f64) -> bool {
        if !a.is_finite() || !b.is_finite() {
            return !a.is_finite() && !b.is_finite();
        }
        (a - b).abs() <= 1e-9 * a.abs().max(b.abs()).max(1.0)
    }

    proptest! {
        #[test]
        fn compiled_program_agrees_with_the_tree_walk(
            expr in expression(),
            x in -2.0f64..2.0,
            y in 0.01f64..3.0,
            t in 0.0f64..2.0,
        ) {
            let params = [1.3, -0.7];
            let program = Program::compile(&expr, &params, 2, &[false, false]).unwrap();
            let expected = expr.eval(&params, &[x, y], t);
            let got = program.evaluate_one(&[x, y], t);
            prop_assert!(close(got, expected), "{expr:?} at x={x}, y={y}, t={t}: {got} vs {expected}");
        }
    }
}
