//! Durations as the reader thinks of them: a half-life in the time unit the model's author
//! wrote the speed in (`[1/day]` gives days), else in the most readable of year, month and
//! day, four significant digits (`27.7 day`, not `0.0758904 year`).

use crate::analysis::{Analyzed, Role};
use sdeck_semantics::{FactorId, Model, Param};

/// A time unit and its length in clock units.
pub(crate) struct TimeUnit {
    name: String,
    clock_units: f64,
}

impl TimeUnit {
    pub(crate) fn of(model: &Model, name: &str) -> Option<TimeUnit> {
        let years = sdeck_units::time_unit_years(name)?;
        (years > 0.0 && model.clock.years > 0.0).then(|| TimeUnit {
            name: name.to_string(),
            clock_units: years / model.clock.years,
        })
    }

    pub(crate) fn clock(model: &Model) -> TimeUnit {
        TimeUnit {
            name: model.clock.unit.clone(),
            clock_units: 1.0,
        }
    }

    /// The most readable of year, month and day for a duration of `clock_value` clock
    /// units; the clock's own unit when the clock is not a time unit we know.
    pub(crate) fn readable(model: &Model, clock_value: f64) -> TimeUnit {
        let years = clock_value * model.clock.years;
        TimeUnit::of(model, sdeck_units::time_units::readable_time_unit(years))
            .unwrap_or_else(|| TimeUnit::clock(model))
    }

    /// A duration in clock units, written in this unit to four significant digits.
    pub(crate) fn show(&self, clock_value: f64) -> String {
        sdeck_units::number::duration(clock_value / self.clock_units, &self.name)
    }
}

/// The unit for the half-life `half_life` (clock units) of factor `state`: the time unit
/// of its speed as written when that is not the clock's (`[1/day]` on a yearly clock gives
/// days), else the most readable of year, month and day.
pub(crate) fn half_life_unit(a: &Analyzed, state: FactorId, half_life: f64) -> TimeUnit {
    let model = &a.check.analysis.model;
    model
        .params
        .iter_ids()
        .filter(|(i, _)| {
            a.roles_of_param(*i)
                .iter()
                .any(|r| matches!(r, Role::Speed { state: s, .. } if *s == state))
        })
        .find_map(|(_, p)| written_time_unit(model, p))
        .unwrap_or_else(|| TimeUnit::readable(model, half_life))
}

/// The unit for the half-life `half_life` of the factor whose speed is `speed`: as
/// [`half_life_unit`], for a caller that holds the speed already (one parameter, not a
/// search over all of them).
pub(crate) fn half_life_unit_of_speed(model: &Model, speed: &Param, half_life: f64) -> TimeUnit {
    written_time_unit(model, speed).unwrap_or_else(|| TimeUnit::readable(model, half_life))
}

/// The time unit of a rate written `[1/UNIT]`, when it is not the clock's.
fn written_time_unit(model: &Model, p: &Param) -> Option<TimeUnit> {
    let unit = p.unit_text.as_deref().unwrap_or("").replace(' ', "");
    let written = unit.strip_prefix("1/").filter(|u| *u != model.clock.unit)?;
    TimeUnit::of(model, written)
}
