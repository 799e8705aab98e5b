//! Instructions written from a folded expression, with constants riding on the
//! instructions that use them.

use super::fold::{BinaryOp, Node, UnaryOp};
use super::Instruction;

pub(super) struct Emitter<'a> {
    pub(super) instructions: Vec<Instruction>,
    pub(super) depth: usize,
    pub(super) max_depth: usize,
    pub(super) positive_part: &'a [bool],
}

impl Emitter<'_> {
    fn push(&mut self, instruction: Instruction, depth_change: isize) {
        self.instructions.push(instruction);
        self.depth = self.depth.saturating_add_signed(depth_change);
        self.max_depth = self.max_depth.max(self.depth);
    }

    // Long (about 85 lines): one arm per node kind and per peephole form of a binary
    // operation with a constant operand.
    pub(super) fn emit(&mut self, node: &Node) {
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
