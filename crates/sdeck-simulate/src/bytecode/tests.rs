//! The compiled programs against the semantic layer's tree walk.

use super::*;

mod programs {
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
