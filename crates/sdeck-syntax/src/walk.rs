//! The one walker of the tree's expressions and unit expressions: every layer that needs
//! to visit the nodes of an [`Expr`] or a [`UnitExpr`] goes through these, instead of
//! matching on every variant to recurse. Depth is bounded by the parser's limits
//! ([`crate::MAX_NESTING`], [`crate::MAX_NODES`]).

use crate::ast::{Expr, Ident, Quantity, StatementKind, UnitExpr};

/// Gives a tree type with a `for_each_child` method its `walk` (every node, outermost
/// first) and `any` (stops at the first node that holds): the syntax tree and the
/// semantic tree share these two from one text.
#[macro_export]
macro_rules! expression_walks {
    ($tree:ty) => {
        impl $tree {
            /// Calls `f` on this expression and every sub-expression, outermost first, in
            /// order.
            pub fn walk<'e>(&'e self, f: &mut impl FnMut(&'e $tree)) {
                f(self);
                self.for_each_child(|child| child.walk(f));
            }

            /// Whether `f` holds for this expression or any sub-expression; stops at the
            /// first.
            pub fn any(&self, f: &mut impl FnMut(&$tree) -> bool) -> bool {
                if f(self) {
                    return true;
                }
                let mut found = false;
                self.for_each_child(|child| found = found || child.any(f));
                found
            }
        }
    };
}

expression_walks!(Expr);

impl Expr {
    /// Calls `f` on each direct sub-expression, in source order.
    pub fn for_each_child<'e>(&'e self, mut f: impl FnMut(&'e Expr)) {
        match self {
            Expr::Number(_) | Expr::Quantity(_) | Expr::Name(_) => {}
            Expr::Neg { operand, .. } => f(operand),
            Expr::Binary { lhs, rhs, .. } => {
                f(lhs);
                f(rhs);
            }
            Expr::Call { args, .. } => args.iter().for_each(f),
            Expr::Paren { inner, .. } => f(inner),
        }
    }

    /// Calls `f` on every unit name in the quantities of this expression.
    pub fn walk_unit_names<'e>(&'e self, f: &mut impl FnMut(&'e Ident)) {
        self.walk(&mut |e| {
            if let Expr::Quantity(q) = e {
                q.walk_unit_names(f);
            }
        });
    }
}

impl Quantity {
    /// Calls `f` on every unit name of the quantity's unit, if it has one.
    pub fn walk_unit_names<'e>(&'e self, f: &mut impl FnMut(&'e Ident)) {
        if let Some(unit) = &self.unit {
            unit.walk_names(f);
        }
    }
}

impl UnitExpr {
    /// Calls `f` on each direct sub-unit, in source order.
    pub fn for_each_child<'u>(&'u self, mut f: impl FnMut(&'u UnitExpr)) {
        match self {
            UnitExpr::One { .. } | UnitExpr::Name(_) => {}
            UnitExpr::Mul { lhs, rhs, .. } | UnitExpr::Div { lhs, rhs, .. } => {
                f(lhs);
                f(rhs);
            }
            UnitExpr::Pow { base, .. } => f(base),
            UnitExpr::Sqrt { inner, .. } => f(inner),
        }
    }

    /// Calls `f` on this unit expression and every sub-unit, outermost first.
    pub fn walk<'u>(&'u self, f: &mut impl FnMut(&'u UnitExpr)) {
        f(self);
        self.for_each_child(|child| child.walk(f));
    }

    /// Calls `f` on every unit name, in source order.
    pub fn walk_names<'u>(&'u self, f: &mut impl FnMut(&'u Ident)) {
        self.walk(&mut |u| {
            if let UnitExpr::Name(ident) = u {
                f(ident);
            }
        });
    }
}

impl StatementKind {
    /// Calls `f` on each expression the statement holds at its top level (a let's value,
    /// a correlation, the discount rate, a declared expression, each coefficient of an
    /// equation), in source order. Walk each with [`Expr::walk`] to reach every node.
    pub fn for_each_expr<'s>(&'s self, mut f: impl FnMut(&'s Expr)) {
        match self {
            StatementKind::Param(d) | StatementKind::Factor(d) => {
                if let crate::ast::DeclaredValue::Expr(e) = &d.value {
                    f(e);
                }
            }
            StatementKind::Corr { value, .. } | StatementKind::Let { value, .. } => f(value),
            StatementKind::Discount { rate } => f(rate),
            StatementKind::Equation(eq) => {
                for term in &eq.terms {
                    if let Some(c) = &term.coefficient {
                        f(c);
                    }
                }
            }
            StatementKind::Model { .. }
            | StatementKind::Clock { .. }
            | StatementKind::Horizon { .. }
            | StatementKind::Unit { .. }
            | StatementKind::Shock { .. }
            | StatementKind::Expect(_)
            | StatementKind::Measure { .. } => {}
        }
    }

    /// The keyword that opens the statement as written in the language (from
    /// [`crate::vocabulary::KEYWORDS`]); `None` for an equation, which opens with its
    /// differential.
    pub fn keyword(&self) -> Option<&'static str> {
        let word = match self {
            StatementKind::Model { .. } => "model",
            StatementKind::Clock { .. } => "clock",
            StatementKind::Horizon { .. } => "horizon",
            StatementKind::Unit { .. } => "unit",
            StatementKind::Param(_) => "param",
            StatementKind::Factor(_) => "factor",
            StatementKind::Shock { .. } => "shock",
            StatementKind::Corr { .. } => "corr",
            StatementKind::Let { .. } => "let",
            StatementKind::Expect(_) => "expect",
            StatementKind::Measure { .. } => "measure",
            StatementKind::Discount { .. } => "discount",
            StatementKind::Equation(_) => return None,
        };
        crate::vocabulary::STATEMENT_KEYWORDS
            .into_iter()
            .find(|k| *k == word)
    }
}

#[cfg(test)]
mod tests {
    use crate::ast::{Expr, StatementKind};
    use crate::vocabulary::STATEMENT_KEYWORDS;

    fn expressions(text: &str) -> Vec<Expr> {
        let file = crate::parse(text);
        assert!(file.diagnostics.is_empty(), "{:?}", file.diagnostics);
        let mut out = Vec::new();
        for statement in &file.statements {
            statement.kind.for_each_expr(|e| out.push(e.clone()));
        }
        out
    }

    #[test]
    fn walk_visits_every_node_outermost_first_in_source_order() {
        let exprs = expressions("let a = -(b + max(c, 2 [day])) * sqrt(d)\n");
        assert_eq!(exprs.len(), 1);
        let mut names = Vec::new();
        let mut count = 0;
        exprs[0].walk(&mut |e| {
            count += 1;
            if let Expr::Name(ident)
            | Expr::Call {
                function: ident, ..
            } = e
            {
                names.push(ident.name.clone());
            }
        });
        assert_eq!(names, ["b", "max", "c", "sqrt", "d"]);
        // *, -, ( ), +, b, max, c, 2 [day], sqrt, d
        assert_eq!(count, 10);
        let mut units = Vec::new();
        exprs[0].walk_unit_names(&mut |ident| units.push(ident.name.clone()));
        assert_eq!(units, ["day"]);
        assert!(exprs[0].any(&mut |e| matches!(e, Expr::Quantity(_))));
        assert!(!exprs[0].any(&mut |e| matches!(e, Expr::Name(n) if n.name == "z")));
    }

    #[test]
    fn every_statement_gives_its_expressions_and_its_keyword() {
        let text = "model m\nclock year\nhorizon 1 year\nunit EUR\nparam k = 1 [1/year]\n\
                    param s = k * 2\nfactor x = 1\nshock W, V\ncorr W, V = 0.5\nlet l = k\n\
                    dx = -k * x dt + s dW + 0.1 dV\nexpect mean(x, 1 year) > 0\n\
                    measure risk-neutral\ndiscount x\n";
        let file = crate::parse(text);
        assert!(file.diagnostics.is_empty(), "{:?}", file.diagnostics);
        let mut keywords = Vec::new();
        let mut top_level = 0;
        for statement in &file.statements {
            keywords.extend(statement.kind.keyword());
            statement.kind.for_each_expr(|_| top_level += 1);
            if let Some(word) = statement.kind.keyword() {
                assert!(text[statement.span.clone()].starts_with(word));
            } else {
                assert!(matches!(statement.kind, StatementKind::Equation(_)));
            }
        }
        keywords.dedup(); // two `param` lines
        assert_eq!(keywords, STATEMENT_KEYWORDS);
        // param s, corr, let, three coefficients, discount
        assert_eq!(top_level, 7);
    }
}
