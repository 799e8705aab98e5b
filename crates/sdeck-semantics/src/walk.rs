//! The one walker of the semantic [`Expr`]: every layer that visits the nodes of an
//! expression of the model (to collect the parameters or factors it mentions, to find a
//! function call, to mark roots) goes through these instead of matching on every variant
//! to recurse. Folds that build something per variant (evaluation, polynomials,
//! bytecode) still match; they are not walks.

use crate::model::{Expr, FactorId, ParamId};

sdeck_syntax::expression_walks!(Expr);

impl Expr {
    /// Calls `f` on each direct sub-expression, left to right.
    pub fn for_each_child<'e>(&'e self, mut f: impl FnMut(&'e Expr)) {
        match self {
            Expr::Const(_) | Expr::Param(_) | Expr::Factor(_) | Expr::Time | Expr::Invalid => {}
            Expr::Neg(a) => f(a),
            Expr::Add(a, b)
            | Expr::Sub(a, b)
            | Expr::Mul(a, b)
            | Expr::Div(a, b)
            | Expr::Pow(a, b) => {
                f(a);
                f(b);
            }
            Expr::Call(_, args) => args.iter().for_each(f),
        }
    }

    /// Appends every parameter the expression mentions, left to right.
    pub fn params(&self, out: &mut Vec<ParamId>) {
        self.walk(&mut |e| {
            if let Expr::Param(i) = e {
                out.push(*i);
            }
        });
    }

    /// Appends every factor the expression mentions, left to right.
    pub fn factors(&self, out: &mut Vec<FactorId>) {
        self.walk(&mut |e| {
            if let Expr::Factor(i) = e {
                out.push(*i);
            }
        });
    }

    /// Whether any part of the expression failed to resolve.
    pub fn is_invalid(&self) -> bool {
        self.any(&mut |e| matches!(e, Expr::Invalid))
    }
}

#[cfg(test)]
mod tests {
    use crate::model::{Expr, FactorId, Function, ParamId};

    fn p(i: usize) -> Expr {
        Expr::Param(ParamId::new(i))
    }

    fn x(i: usize) -> Expr {
        Expr::Factor(FactorId::new(i))
    }

    fn b(e: Expr) -> Box<Expr> {
        Box::new(e)
    }

    /// `-(p0 * x1) + max(p2, t) ^ x0`
    fn sample() -> Expr {
        Expr::Add(
            b(Expr::Neg(b(Expr::Mul(b(p(0)), b(x(1)))))),
            b(Expr::Pow(
                b(Expr::Call(Function::Max, vec![p(2), Expr::Time])),
                b(x(0)),
            )),
        )
    }

    #[test]
    fn walk_visits_every_node_outermost_first_left_to_right() {
        let mut count = 0;
        let mut leaves = Vec::new();
        sample().walk(&mut |e| {
            count += 1;
            match e {
                Expr::Param(i) => leaves.push(format!("p{i}")),
                Expr::Factor(i) => leaves.push(format!("x{i}")),
                Expr::Time => leaves.push("t".to_string()),
                _ => {}
            }
        });
        assert_eq!(count, 10);
        assert_eq!(leaves, ["p0", "x1", "p2", "t", "x0"]);
        let mut params = Vec::new();
        sample().params(&mut params);
        assert_eq!(params, [ParamId::new(0), ParamId::new(2)]);
        let mut factors = Vec::new();
        sample().factors(&mut factors);
        assert_eq!(factors, [FactorId::new(1), FactorId::new(0)]);
    }

    #[test]
    fn any_and_is_invalid_look_at_every_depth() {
        assert!(!sample().is_invalid());
        let deep = Expr::Call(
            Function::Exp,
            vec![Expr::Neg(b(Expr::Add(
                b(Expr::Const(1.0)),
                b(Expr::Invalid),
            )))],
        );
        assert!(deep.is_invalid());
        assert!(sample().any(&mut |e| matches!(e, Expr::Time)));
        let mut visited = 0;
        assert!(sample().any(&mut |e| {
            visited += 1;
            matches!(e, Expr::Neg(_))
        }));
        assert_eq!(visited, 2, "stops at the first match");
    }
}
