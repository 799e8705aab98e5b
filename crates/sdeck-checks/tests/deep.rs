//! The analysis of the largest statements the parser accepts fits in a small stack: the
//! language server analyses on threads of 2 MiB, the default for worker threads.

use sdeck_checks::{check, RuleSettings};

fn on_small_stack(text: String) {
    let handle = std::thread::Builder::new()
        .stack_size(2 << 20)
        .spawn(move || {
            check(&text, "deep", &RuleSettings::default())
                .diagnostics
                .len()
        })
        .unwrap_or_else(|e| panic!("cannot spawn: {e}"));
    assert!(handle.join().is_ok());
}

#[test]
fn a_long_sum_in_an_equation_is_analysed_on_a_small_stack() {
    let sum = vec!["x"; 990].join(" + ");
    on_small_stack(format!(
        "param k = 1 [1/year]\nparam v = 0.1 [1/sqrt(year)]\nshock W\nfactor x = 1\n\
         dx = -k * ({sum}) dt + v dW\n"
    ));
}

#[test]
fn a_long_product_and_nested_lets_are_analysed_on_a_small_stack() {
    let product = vec!["k"; 990].join(" * ");
    let mut text = String::from("param k = 1 [1/year]\nparam v = 0.1 [1/sqrt(year)]\nshock W\n");
    text.push_str(&format!("let l0 = {product}\n"));
    for i in 1..200 {
        text.push_str(&format!(
            "let l{i} = l{} + {}\n",
            i - 1,
            ["k"; 9].join(" + ")
        ));
    }
    text.push_str("factor x = 1\ndx = -l199 * x dt + v * sqrt(x) dW\n");
    on_small_stack(text);
}

#[test]
fn lets_that_double_at_every_level_are_stopped() {
    let mut text = String::from("param k = 1 [1/year]\nparam v = 0.1 [1/sqrt(year)]\nshock W\n");
    text.push_str("let a0 = k\n");
    for i in 1..60 {
        text.push_str(&format!("let a{i} = a{} + a{}\n", i - 1, i - 1));
    }
    text.push_str("factor x = 1\ndx = -a59 * x dt + v dW\n");
    let result = check(&text, "doubling", &RuleSettings::default());
    assert!(result
        .diagnostics
        .iter()
        .any(|d| d.message.contains("more than 3000 terms")));
}

#[test]
fn a_chain_of_lets_up_to_the_limit_is_analysed_on_a_small_stack() {
    let mut text = String::from("param k = 1 [1/year]\nparam v = 0.1 [1/sqrt(year)]\nshock W\n");
    text.push_str("let l0 = k\n");
    for i in 1..1400 {
        text.push_str(&format!("let l{i} = l{} + k\n", i - 1));
    }
    text.push_str("factor x = 1\ndx = -l1399 * x dt + v dW\n");
    on_small_stack(text);
}
