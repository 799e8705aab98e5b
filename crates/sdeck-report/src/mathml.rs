//! The calculus' readable formulas (`E[r(t)] = theta + (r₀ − theta)·e^(−kappa·t)`) as
//! MathML Core, which current browsers lay out natively. A small reader of that text:
//! names become `<mi>` (with `sigma_m` as a subscript), numbers `<mn>`, operators `<mo>`,
//! `x^(…)` a superscript, `∫₀ᵗ` an integral with limits; anything it does not know stays
//! as an operator character, so nothing is lost.

use crate::charts::escape;

#[derive(Clone, Debug, PartialEq)]
enum Token {
    Name(String),
    Number(String),
    Op(String),
    Open,
    Close,
    Caret,
    Space,
}

fn is_name_char(c: char) -> bool {
    c.is_alphanumeric() && !is_sub_or_sup(c) || c == '_' || c == '′'
}

fn is_sub_or_sup(c: char) -> bool {
    matches!(c, '₀'..='₉' | '²' | '³' | 'ᵀ' | 'ᵗ' | '⁻' | '¹')
}

fn tokens(text: &str) -> Vec<Token> {
    let chars: Vec<char> = text.chars().collect();
    let mut out = Vec::new();
    let mut i = 0;
    while let Some(&c) = chars.get(i) {
        if c.is_ascii_digit() || (c == '.' && chars.get(i + 1).is_some_and(char::is_ascii_digit)) {
            let start = i;
            while chars
                .get(i)
                .is_some_and(|c| c.is_ascii_digit() || *c == '.')
            {
                i += 1;
            }
            out.push(Token::Number(chars[start..i].iter().collect()));
            continue;
        }
        if is_name_char(c) {
            let start = i;
            while chars
                .get(i)
                .is_some_and(|c| is_name_char(*c) || is_sub_or_sup(*c))
            {
                i += 1;
            }
            out.push(Token::Name(chars[start..i].iter().collect()));
            continue;
        }
        if c == '∫' {
            // ∫₀ᵗ: the limits are read with it.
            let mut limits = String::new();
            i += 1;
            while chars.get(i).is_some_and(|c| is_sub_or_sup(*c)) {
                limits.push(chars[i]);
                i += 1;
            }
            out.push(Token::Op(format!("∫{limits}")));
            continue;
        }
        i += 1;
        out.push(match c {
            '(' => Token::Open,
            ')' => Token::Close,
            '^' => Token::Caret,
            ' ' => Token::Space,
            _ if is_sub_or_sup(c) => Token::Op(c.to_string()),
            _ => Token::Op(c.to_string()),
        });
    }
    out
}

/// A name with its trailing subscript digits and superscripts: `r₀` → r sub 0,
/// `sigma²` → sigma sup 2, `sigma_m` → sigma sub m.
fn name(text: &str) -> String {
    let base: String = text.chars().take_while(|c| !is_sub_or_sup(*c)).collect();
    let rest: String = text.chars().skip(base.chars().count()).collect();
    let mut core = match base.split_once('_') {
        Some((a, b)) if !a.is_empty() && !b.is_empty() => {
            format!("<msub><mi>{}</mi><mi>{}</mi></msub>", escape(a), escape(b))
        }
        _ => format!("<mi>{}</mi>", escape(&base)),
    };
    let sub: String = rest
        .chars()
        .filter_map(|c| match c {
            '₀'..='₉' => char::from_digit(c as u32 - '₀' as u32, 10),
            _ => None,
        })
        .collect();
    if !sub.is_empty() {
        core = format!("<msub>{core}<mn>{sub}</mn></msub>");
    }
    let sup: String = rest
        .chars()
        .filter_map(|c| match c {
            '²' => Some("2"),
            '³' => Some("3"),
            'ᵀ' => Some("T"),
            '⁻' => Some("−"),
            '¹' => Some("1"),
            _ => None,
        })
        .collect();
    if !sup.is_empty() {
        core = format!("<msup>{core}<mi>{}</mi></msup>", escape(&sup));
    }
    core
}

/// Reads tokens from `i` until a closing parenthesis at this depth (consumed) or the end.
fn group(tokens: &[Token], i: &mut usize) -> String {
    let mut out = String::new();
    let mut last_start = 0;
    while let Some(token) = tokens.get(*i) {
        *i += 1;
        let piece = match token {
            Token::Close => return out,
            Token::Open => format!("<mrow><mo>(</mo>{}<mo>)</mo></mrow>", group(tokens, i)),
            Token::Name(n) => name(n),
            Token::Number(n) => format!("<mn>{}</mn>", escape(n)),
            Token::Space => {
                // A space that no operator stands beside keeps words of prose apart.
                let beside_operator = matches!(tokens.get(*i), Some(Token::Op(_)) | None)
                    || matches!(tokens.get(i.wrapping_sub(2)), Some(Token::Op(_)) | None);
                if !beside_operator {
                    "<mspace width=\"0.3em\"></mspace>".to_string()
                } else {
                    String::new()
                }
            }
            Token::Caret => {
                // Superscript of the last piece: `(…)` or a single token.
                let exponent = match tokens.get(*i) {
                    Some(Token::Open) => {
                        *i += 1;
                        format!("<mrow>{}</mrow>", group(tokens, i))
                    }
                    Some(Token::Name(n)) => {
                        *i += 1;
                        name(n)
                    }
                    Some(Token::Number(n)) => {
                        *i += 1;
                        format!("<mn>{}</mn>", escape(n))
                    }
                    _ => String::new(),
                };
                let base = out.split_off(last_start);
                out.push_str(&format!("<msup><mrow>{base}</mrow>{exponent}</msup>"));
                continue;
            }
            Token::Op(op) if op.starts_with('∫') => {
                let limits: Vec<char> = op.chars().skip(1).collect();
                if limits.is_empty() {
                    "<mo>∫</mo>".to_string()
                } else {
                    let lower: String = limits
                        .iter()
                        .filter_map(|c| char::from_digit((*c as u32).wrapping_sub('₀' as u32), 10))
                        .collect();
                    let upper = if limits.contains(&'ᵗ') { "t" } else { "" };
                    format!(
                        "<msubsup><mo>∫</mo><mn>{}</mn><mi>{upper}</mi></msubsup>",
                        if lower.is_empty() {
                            "0".to_string()
                        } else {
                            lower
                        }
                    )
                }
            }
            Token::Op(op) => format!("<mo>{}</mo>", escape(op)),
        };
        last_start = out.len();
        out.push_str(&piece);
    }
    out
}

/// `text` as a `<math>` element (laid out inline; the page places it).
pub fn math(text: &str) -> String {
    let tokens = tokens(text);
    let mut i = 0;
    let mut body = String::new();
    while i < tokens.len() {
        body.push_str(&group(&tokens, &mut i));
        if i < tokens.len() {
            // An unmatched `)`: keep it.
            body.push_str("<mo>)</mo>");
        }
    }
    format!(
        "<math title=\"{}\"><mrow>{body}</mrow></math>",
        escape(text)
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exponentials_subscripts_and_integrals() {
        let m = math("E[r(t)] = theta + (r₀ − theta)·e^(−kappa·t)");
        assert!(m.contains("<msub><mi>r</mi><mn>0</mn></msub>"), "{m}");
        assert!(m.contains("<msup><mrow><mi>e</mi></mrow><mrow><mo>−</mo><mi>kappa</mi><mo>·</mo><mi>t</mi></mrow></msup>"), "{m}");
        let m = math("sigma_m·∫₀ᵗ e^(−lambda·(t − s)) dW_m(s)");
        assert!(m.contains("<msub><mi>sigma</mi><mi>m</mi></msub>"), "{m}");
        assert!(
            m.contains("<msubsup><mo>∫</mo><mn>0</mn><mi>t</mi></msubsup>"),
            "{m}"
        );
        let m = math("Var[S(t)] = S₀²·e^(2·mu·t)");
        assert!(
            m.contains("<msup><msub><mi>S</mi><mn>0</mn></msub><mi>2</mi></msup>"),
            "{m}"
        );
        // Every element opened is closed.
        for tag in ["mrow", "msup", "msub", "mi", "mo", "mn"] {
            assert_eq!(
                m.matches(&format!("<{tag}>")).count(),
                m.matches(&format!("</{tag}>")).count(),
                "{tag} in {m}"
            );
        }
    }
}
