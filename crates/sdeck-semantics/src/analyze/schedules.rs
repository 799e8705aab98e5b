//! Stage 2, units, for the schedules of time `step` and `ramp`: the first argument is a
//! time, the knots are constant increasing times, the values share one dimension.

use super::*;

impl Analyzer<'_> {
    /// Checks the arguments of `step` and `ramp`: the first is a time, the knots are
    /// constant times in strictly increasing order, the values share one dimension.
    /// Returns the dimension of the values.
    pub(super) fn schedule(
        &mut self,
        f: Function,
        args: &[ast::Expr],
        exprs: &[Expr],
        dims: &[Option<Dimension>],
    ) -> Option<Dimension> {
        let name = f.name();
        let mut sound = true;
        if let Some(Some(d)) = dims.first() {
            if *d != Dimension::time() {
                self.diagnostics.push(
                    dimension_error(
                        args[0].span(),
                        format!(
                            "the first argument of `{name}` is the time it follows, but this one is {}",
                            d.describe()
                        ),
                    )
                    .with_help(format!("write `{name}(t, ...)`")),
                );
                sound = false;
            }
        }
        sound &= self.knots(f, args, exprs, dims);
        let (dimension, values_sound) = self.values(f, args, dims);
        sound &= values_sound;
        if sound {
            dimension
        } else {
            None
        }
    }

    /// The knots of a schedule: times, constant, in strictly increasing order. Whether
    /// they are sound.
    fn knots(
        &mut self,
        f: Function,
        args: &[ast::Expr],
        exprs: &[Expr],
        dims: &[Option<Dimension>],
    ) -> bool {
        let name = f.name();
        let mut sound = true;
        let params = self.model.param_values();
        let clock = self.clock_unit().to_string();
        let mut previous: Option<f64> = None;
        for (count, k) in f.knot_positions(args.len()).enumerate() {
            let (Some(arg), Some(expr)) = (args.get(k), exprs.get(k)) else {
                continue;
            };
            match dims.get(k) {
                Some(Some(d)) if *d != Dimension::time() => {
                    self.diagnostics.push(knot_not_a_time(name, arg, d, &clock));
                    sound = false;
                    continue;
                }
                Some(Some(_)) => {}
                _ => {
                    sound = false;
                    continue;
                }
            }
            if contains_state_or_time(expr) {
                self.diagnostics.push(
                    Diagnostic::new(
                        &rules::BOUND_VIOLATED,
                        arg.span(),
                        format!("knot {} of `{name}` moves with time or a factor; a knot is a fixed time", count + 1),
                    )
                    .with_help("write a time such as `6 [month]`, or a constant expression of parameters"),
                );
                sound = false;
                continue;
            }
            let value = expr.eval(&params, &[], 0.0);
            if let Some(before) = previous {
                if value.is_finite() && before.is_finite() && value <= before {
                    self.diagnostics.push(
                        Diagnostic::new(
                            &rules::BOUND_VIOLATED,
                            arg.span(),
                            format!(
                                "knot {} of `{name}` is at {} {clock}, not after the knot before it ({} {clock})",
                                count + 1,
                                number::plain(value),
                                number::plain(before)
                            ),
                        )
                        .with_label("not after the previous knot")
                        .with_help("the knots of a schedule must be strictly increasing times"),
                    );
                    sound = false;
                }
            }
            previous = Some(value);
        }
        sound
    }

    /// The values of a schedule: their one dimension (that of the first value written
    /// with its unit), and whether they all share it.
    fn values(
        &mut self,
        f: Function,
        args: &[ast::Expr],
        dims: &[Option<Dimension>],
    ) -> (Option<Dimension>, bool) {
        let name = f.name();
        let mut sound = true;
        let value_positions: Vec<usize> = {
            let knots: Vec<usize> = f.knot_positions(args.len()).collect();
            (1..args.len()).filter(|k| !knots.contains(k)).collect()
        };
        // The values' dimension is that of the first one written with its unit: a bare
        // `0` among them is then the one reported.
        let dimension: Option<Dimension> = value_positions
            .iter()
            .find(|k| args.get(**k).is_some_and(|a| !is_zero_literal(a)))
            .or(value_positions.first())
            .and_then(|k| dims.get(*k).cloned().flatten());
        for k in value_positions {
            let (Some(arg), Some(found)) = (args.get(k), dims.get(k)) else {
                continue;
            };
            let Some(found) = found else {
                sound = false;
                continue;
            };
            match &dimension {
                None => {}
                Some(first) if first != found => {
                    let d = self.bare_zero(arg, first).unwrap_or_else(|| {
                        dimension_error(
                            arg.span(),
                            format!(
                                "the values of `{name}` share one dimension: the first is {}, this one {}",
                                first.describe(),
                                found.describe()
                            ),
                        )
                        .with_help("write every value in the same unit")
                    });
                    self.diagnostics.push(d);
                    sound = false;
                }
                Some(_) => {}
            }
        }
        (dimension, sound)
    }
}

/// A knot of the schedule `name` whose dimension `d` is not a time, with the fix that
/// writes a bare number in the clock's unit.
fn knot_not_a_time(name: &str, arg: &ast::Expr, d: &Dimension, clock: &str) -> Diagnostic {
    let mut diagnostic = dimension_error(
        arg.span(),
        format!(
            "a knot of `{name}` is a time, but this one is {}",
            d.describe()
        ),
    )
    .with_help(format!(
        "write the knot with a time unit, e.g. `6 [month]` or `1 [{clock}]`"
    ));
    if let ast::Expr::Number(n) = arg {
        let new_text = format!("{} [{clock}]", n.text);
        diagnostic = diagnostic.with_fix(
            format!("Write {new_text}"),
            vec![TextEdit {
                span: n.span.clone(),
                new_text,
            }],
        );
    }
    diagnostic
}
