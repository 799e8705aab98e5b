//! The functions of the language and the values of the schedules `step` and `ramp`.

/// A function of the language.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Function {
    Exp,
    Log,
    Sqrt,
    Abs,
    Min,
    Max,
    Sin,
    Cos,
    /// `step(t, v0, t1, v1, ..., tn, vn)`: v0 before t1, vk from tk until t(k+1).
    Step,
    /// `ramp(t, t0, v0, ..., tn, vn)`: linear between the knots, flat outside them.
    Ramp,
}

impl Function {
    pub const ALL: [Function; 10] = [
        Function::Exp,
        Function::Log,
        Function::Sqrt,
        Function::Abs,
        Function::Min,
        Function::Max,
        Function::Sin,
        Function::Cos,
        Function::Step,
        Function::Ramp,
    ];

    /// The function's name, from the language's one table of function names.
    pub fn name(self) -> &'static str {
        sdeck_syntax::vocabulary::FUNCTION_NAMES[self as usize]
    }

    pub fn from_name(name: &str) -> Option<Function> {
        Function::ALL.into_iter().find(|f| f.name() == name)
    }

    /// How many arguments the function takes; `None` for the schedules, which take a
    /// time and then knots and values (see [`Function::accepts`]).
    pub fn arity(self) -> Option<usize> {
        match self {
            Function::Min | Function::Max => Some(2),
            Function::Step | Function::Ramp => None,
            _ => Some(1),
        }
    }

    /// Whether the function takes `count` arguments: `step` takes a time, a value, and
    /// one or more knot-value pairs (4, 6, 8, ...); `ramp` a time and two or more
    /// knot-value pairs (5, 7, 9, ...).
    pub fn accepts(self, count: usize) -> bool {
        match self {
            Function::Step => count >= 4 && count.is_multiple_of(2),
            Function::Ramp => count >= 5 && !count.is_multiple_of(2),
            _ => self.arity() == Some(count),
        }
    }

    /// Whether the function is a schedule of time (`step`, `ramp`).
    pub fn is_schedule(self) -> bool {
        matches!(self, Function::Step | Function::Ramp)
    }

    /// The argument positions of a schedule's knots (times), for `count` arguments.
    pub fn knot_positions(self, count: usize) -> impl Iterator<Item = usize> {
        let first = match self {
            Function::Step => 2,
            Function::Ramp => 1,
            _ => count,
        };
        (first..count).step_by(2)
    }
}

/// `step(x, v0, k1, v1, ..., kn, vn)` with `rest` = `[k1, v1, ..., kn, vn]`: the value
/// of the last knot at or before `x` (right-continuous), `v0` before the first.
pub fn step_value(x: f64, v0: f64, rest: &[f64]) -> f64 {
    let mut value = v0;
    for pair in rest.chunks_exact(2) {
        if x >= pair[0] {
            value = pair[1];
        } else {
            break;
        }
    }
    value
}

/// `ramp(x, k0, v0, ..., kn, vn)` with `pairs` = `[k0, v0, ..., kn, vn]`: linear
/// interpolation between the knots, the first value before the first knot and the last
/// after the last.
pub fn ramp_value(x: f64, pairs: &[f64]) -> f64 {
    let mut previous: Option<(f64, f64)> = None;
    for pair in pairs.chunks_exact(2) {
        let (knot, value) = (pair[0], pair[1]);
        if x < knot {
            return match previous {
                None => value,
                Some((k0, v0)) => {
                    let weight = (x - k0) / (knot - k0);
                    v0 + weight * (value - v0)
                }
            };
        }
        previous = Some((knot, value));
    }
    previous.map_or(f64::NAN, |(_, value)| value)
}
