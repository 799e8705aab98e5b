//! Canonical printing of one statement: single spaces around `=`, `+`, `-`, `*`, `/`,
//! none around `^`, `, ` between arguments, units without spaces inside brackets.

use crate::Printed;
use sdeck_syntax::ast::{
    BinaryOp, Bound, Condition, Declaration, DeclaredValue, Differential, Equation, Expr, Quantity,
    Sign, StatementKind, UnitExpr,
};

/// Prints a statement; declarations come back as columns for alignment.
pub(crate) fn statement(source: &str, kind: &StatementKind) -> Printed {
    match kind {
        StatementKind::Model { name } => Printed::Flat(format!("model {}", name.name)),
        StatementKind::Clock { unit } => Printed::Flat(format!("clock {}", unit.name)),
        StatementKind::Horizon { value } => {
            Printed::Flat(format!("horizon {}", quantity(source, value)))
        }
        StatementKind::Unit { name } => Printed::Flat(format!("unit {}", name.name)),
        StatementKind::Param(d) => Printed::Declaration(declaration("param", source, d)),
        StatementKind::Factor(d) => Printed::Declaration(declaration("factor", source, d)),
        StatementKind::Shock { names } => {
            let names: Vec<&str> = names.iter().map(|n| n.name.as_str()).collect();
            Printed::Flat(format!("shock {}", names.join(", ")))
        }
        StatementKind::Corr {
            first,
            second,
            value,
        } => Printed::Flat(format!(
            "corr {} {} = {}",
            first.name,
            second.name,
            expr(source, value)
        )),
        StatementKind::Measure { name } => Printed::Flat(format!("measure {}", name.name)),
        StatementKind::Discount { rate } => {
            Printed::Flat(format!("discount {}", expr(source, rate)))
        }
        StatementKind::Let { name, value } => {
            Printed::Flat(format!("let {} = {}", name.name, expr(source, value)))
        }
        StatementKind::Equation(eq) => {
            let starts_line = vec![false; eq.terms.len()];
            Printed::Flat(equation_lines(source, eq, &starts_line).join(" "))
        }
        StatementKind::Expect(e) => {
            let condition = match &e.condition {
                Condition::Compare { op, value } => {
                    format!("{} {}", op.symbol(), quantity(source, value))
                }
                Condition::Within {
                    lower,
                    lower_inclusive,
                    upper,
                    upper_inclusive,
                } => format!(
                    "in {}{}, {}{}",
                    if *lower_inclusive { "[" } else { "(" },
                    quantity(source, lower),
                    quantity(source, upper),
                    if *upper_inclusive { "]" } else { ")" },
                ),
            };
            let mut args: Vec<String> = Vec::new();
            if let Some(state) = &e.state {
                args.push(match (&e.side, &e.level) {
                    (Some(side), Some(level)) => format!(
                        "{} {} {}",
                        state.name,
                        side.symbol(),
                        quantity(source, level)
                    ),
                    _ => state.name.clone(),
                });
            }
            if let (None, Some(level)) = (&e.side, &e.level) {
                args.push(quantity(source, level));
            }
            if let Some(q) = &e.at {
                args.push(quantity(source, q));
            }
            Printed::Flat(format!(
                "expect {}({}) {condition}",
                e.figure.keyword(),
                args.join(", ")
            ))
        }
    }
}

/// An equation as lines: a new line starts before each term marked in `starts_line`
/// (the author's breaks), continuation lines indented to the first term after `=`, each
/// starting with its term's sign (`     + sigma dW`).
pub(crate) fn equation_lines(source: &str, eq: &Equation, starts_line: &[bool]) -> Vec<String> {
    let head = format!("d{} =", eq.state.name);
    let indent = " ".repeat(head.chars().count() + 1);
    let mut lines = vec![head];
    for (i, term) in eq.terms.iter().enumerate() {
        let differential = match &term.differential {
            Differential::Time(_) => "dt".to_string(),
            Differential::Shock { shock, .. } => format!("d{}", shock.name),
        };
        let body = match &term.coefficient {
            Some(c) => format!("{} {differential}", expr(source, c)),
            None => differential,
        };
        let piece = match (i, term.sign) {
            (0, Sign::Plus) => body,
            (0, Sign::Minus) => format!("-{body}"),
            (_, Sign::Plus) => format!("+ {body}"),
            (_, Sign::Minus) => format!("- {body}"),
        };
        let line = match starts_line.get(i) {
            Some(true) => {
                lines.push(indent.clone());
                lines.last_mut()
            }
            _ => lines.last_mut(),
        };
        if let Some(line) = line {
            if !line.ends_with(' ') {
                line.push(' ');
            }
            line.push_str(&piece);
        }
    }
    lines
}

fn declaration(keyword: &str, source: &str, d: &Declaration) -> [String; 5] {
    [
        keyword.to_string(),
        d.name.name.clone(),
        match &d.value {
            DeclaredValue::Literal { number, .. } => format!("= {}", number.text),
            DeclaredValue::Expr(e) => format!("= {}", expr(source, e)),
        },
        d.unit()
            .map(|u| format!("[{}]", unit(source, d.value_span().end, u).0))
            .unwrap_or_default(),
        d.bound.as_deref().map(bound).unwrap_or_default(),
    ]
}

/// A unit as written between its brackets, without white space (its structure is kept
/// character for character, so no parenthesis can go missing). `after` is where the
/// search for the opening `[` starts. A bare unit (`6 month`) is a single name.
fn unit(source: &str, after: usize, u: &UnitExpr) -> (String, bool) {
    let span = u.span();
    let bracketed = source
        .get(after..span.start)
        .and_then(|gap| gap.find('['))
        .map(|i| after + i + 1);
    let close = source
        .get(span.end..)
        .and_then(|rest| rest.find(']'))
        .map(|i| span.end + i);
    let (start, end, bracketed) = match (bracketed, close) {
        (Some(start), Some(end)) => (start, end, true),
        _ => (span.start, span.end, false),
    };
    let text = source
        .get(start..end)
        .unwrap_or("")
        .chars()
        .filter(|c| !c.is_whitespace())
        .collect();
    (text, bracketed)
}

/// `6 month` stays bare, `6 [month]` keeps its brackets.
fn quantity(source: &str, q: &Quantity) -> String {
    match &q.unit {
        None => q.number.text.clone(),
        Some(u) => match unit(source, q.number.span.end, u) {
            (text, true) => format!("{} [{text}]", q.number.text),
            (text, false) => format!("{} {text}", q.number.text),
        },
    }
}

fn bound(b: &Bound) -> String {
    match (&b.lower, &b.upper) {
        (Some(lower), None) => format!(
            "{} {}",
            if lower.inclusive { ">=" } else { ">" },
            lower.value.text
        ),
        (None, Some(upper)) => format!(
            "{} {}",
            if upper.inclusive { "<=" } else { "<" },
            upper.value.text
        ),
        (lower, upper) => format!(
            "in {}{}, {}{}",
            match lower {
                Some(l) if l.inclusive => "[",
                _ => "(",
            },
            lower
                .as_ref()
                .map(|l| l.value.text.as_str())
                .unwrap_or("-inf"),
            upper
                .as_ref()
                .map(|u| u.value.text.as_str())
                .unwrap_or("inf"),
            match upper {
                Some(u) if u.inclusive => "]",
                _ => ")",
            },
        ),
    }
}

/// An expression with canonical spacing. Parentheses are kept as the tree records
/// them, so printing never changes how the expression groups.
pub(crate) fn expr(source: &str, e: &Expr) -> String {
    let expr = |e: &Expr| expr(source, e);
    match e {
        Expr::Number(n) => n.text.clone(),
        Expr::Quantity(q) => match &q.unit {
            Some(u) => format!(
                "{} [{}]",
                q.number.text,
                unit(source, q.number.span.end, u).0
            ),
            None => q.number.text.clone(),
        },
        Expr::Name(i) => i.name.clone(),
        Expr::Neg { operand, .. } => format!("-{}", expr(operand)),
        Expr::Binary { op, lhs, rhs, .. } => match op {
            BinaryOp::Pow => format!("{}^{}", expr(lhs), expr(rhs)),
            _ => format!("{} {} {}", expr(lhs), op.symbol(), expr(rhs)),
        },
        Expr::Call { function, args, .. } => {
            let args: Vec<String> = args.iter().map(expr).collect();
            format!("{}({})", function.name, args.join(", "))
        }
        Expr::Paren { inner, .. } => format!("({})", expr(inner)),
    }
}
