//! A reader of unit text for the tests, so that tables read like model files:
//! `unit("1/sqrt(day)")` gives the syntax tree the parser would give for `[1/sqrt(day)]`.

use sdeck_diagnostics::Span;
use sdeck_syntax::ast::{Exponent, Ident, UnitExpr};

// A reader of unit text, for the tests only: `expr := factor (('*' | '/') factor)*`,
// `factor := atom ('^' exponent)?`, `atom := '1' | name | 'sqrt(' expr ')' | '(' expr ')'`,
// `exponent := integer | '(' '-'? integer ('/' integer)? ')'`. Spans are byte offsets.

struct Reader<'a> {
    text: &'a str,
    position: usize,
}

impl Reader<'_> {
    fn peek(&self) -> Option<char> {
        self.text[self.position..].chars().next()
    }

    fn eat(&mut self, expected: char) -> bool {
        if self.peek() == Some(expected) {
            self.position += expected.len_utf8();
            true
        } else {
            false
        }
    }

    fn word(&mut self) -> (String, Span) {
        let start = self.position;
        while let Some(c) = self.peek() {
            if c.is_alphanumeric() || c == '_' || c == '-' && self.position == start {
                self.position += c.len_utf8();
            } else {
                break;
            }
        }
        (
            self.text[start..self.position].to_string(),
            start..self.position,
        )
    }

    fn expr(&mut self) -> UnitExpr {
        let start = self.position;
        let mut lhs = self.factor();
        loop {
            if self.eat('*') {
                let rhs = self.factor();
                lhs = UnitExpr::Mul {
                    lhs: Box::new(lhs),
                    rhs: Box::new(rhs),
                    span: start..self.position,
                };
            } else if self.eat('/') {
                let rhs = self.factor();
                lhs = UnitExpr::Div {
                    lhs: Box::new(lhs),
                    rhs: Box::new(rhs),
                    span: start..self.position,
                };
            } else {
                return lhs;
            }
        }
    }

    fn factor(&mut self) -> UnitExpr {
        let start = self.position;
        let base = self.atom();
        if !self.eat('^') {
            return base;
        }
        let exponent = if self.eat('(') {
            let (num, _) = self.word();
            let den = if self.eat('/') {
                self.word().0
            } else {
                "1".into()
            };
            assert!(self.eat(')'), "unclosed exponent in {}", self.text);
            Exponent {
                num: num.parse().unwrap_or_else(|_| panic!("bad exponent {num}")),
                den: den.parse().unwrap_or_else(|_| panic!("bad exponent {den}")),
            }
        } else {
            let (num, _) = self.word();
            Exponent {
                num: num.parse().unwrap_or_else(|_| panic!("bad exponent {num}")),
                den: 1,
            }
        };
        UnitExpr::Pow {
            base: Box::new(base),
            exponent,
            span: start..self.position,
        }
    }

    fn atom(&mut self) -> UnitExpr {
        let start = self.position;
        if self.eat('(') {
            let inner = self.expr();
            assert!(self.eat(')'), "unclosed parenthesis in {}", self.text);
            return inner;
        }
        let (name, span) = self.word();
        if name == "1" {
            return UnitExpr::One { span };
        }
        if name == "sqrt" && self.eat('(') {
            let inner = self.expr();
            assert!(self.eat(')'), "unclosed sqrt in {}", self.text);
            return UnitExpr::Sqrt {
                inner: Box::new(inner),
                span: start..self.position,
            };
        }
        assert!(
            !name.is_empty(),
            "expected a unit at {start} in {}",
            self.text
        );
        UnitExpr::Name(Ident { name, span })
    }
}

/// The syntax tree of a unit written without brackets and without spaces.
pub fn unit(text: &str) -> UnitExpr {
    let mut reader = Reader { text, position: 0 };
    let expr = reader.expr();
    assert_eq!(reader.position, text.len(), "trailing text in {text}");
    expr
}
