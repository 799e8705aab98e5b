//! Reading the time series of `sdeck fit`: CSV with a header row (comma or semicolon), a
//! time column `date` (ISO 8601, converted with the model clock's day count) or `t` (clock
//! units), and value columns named after factors; cells may carry `%` or `bp`; empty and
//! `NA` cells are skipped and counted.

use chrono::{Datelike, NaiveDate, Weekday};
use sdeck_semantics::Model;

/// The series as read, before fitting.
#[derive(Clone, Debug, PartialEq)]
pub struct Table {
    /// Clock units, strictly increasing.
    pub times: Vec<f64>,
    /// The time cells as written (for `from` and `to`).
    pub time_text: Vec<String>,
    /// 1-based line of each data row in the file.
    pub lines: Vec<u64>,
    /// Per requested column: the values (in the cell's unit: `%` and `bp` applied).
    pub values: Vec<Vec<Option<f64>>>,
    /// Empty and `NA` cells met in the requested columns.
    pub skipped: usize,
}

/// The time column found.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum TimeColumn {
    Date(usize),
    Clock(usize),
}

/// A problem with the data, at a line and column when there is one.
#[derive(Clone, Debug, PartialEq)]
pub struct DataError {
    pub line: Option<u64>,
    pub column: Option<String>,
    pub message: String,
}

impl DataError {
    fn at(line: u64, column: &str, message: String) -> DataError {
        DataError {
            line: Some(line),
            column: Some(column.to_string()),
            message,
        }
    }

    fn whole(message: String) -> DataError {
        DataError {
            line: None,
            column: None,
            message,
        }
    }

    /// `path:line, column `c`: message`.
    pub fn render(&self, path: &str) -> String {
        match (&self.line, &self.column) {
            (Some(line), Some(column)) => {
                format!("{path}:{line}, column `{column}`: {}", self.message)
            }
            (Some(line), None) => format!("{path}:{line}: {}", self.message),
            _ => format!("{path}: {}", self.message),
        }
    }
}

/// The header's names, trimmed; comma unless the header has semicolons and no comma.
pub fn header(text: &str) -> (u8, Vec<String>) {
    let first = text.lines().next().unwrap_or("");
    let delimiter = if first.contains(';') && !first.contains(',') {
        b';'
    } else {
        b','
    };
    let names = first
        .split(delimiter as char)
        .map(|s| s.trim().trim_matches('"').trim().to_string())
        .collect();
    (delimiter, names)
}

/// Parses a value cell: `3.2`, `3.2%`, `25bp`, `-1e-3`. `Ok(None)` for empty or `NA`.
pub fn cell(text: &str) -> Result<Option<f64>, String> {
    let t = text.trim();
    if t.is_empty() || t.eq_ignore_ascii_case("na") {
        return Ok(None);
    }
    // The language's own reading: `3.3%` is the double nearest 0.033.
    sdeck_syntax::numbers::scaled_number(t)
        .map(Some)
        .map_err(|error| {
            format!(
                "{}; write a decimal number with `.` as the decimal point, \
             optionally followed by `%` or `bp`, or leave the cell empty or `NA`",
                error.describe(t)
            )
        })
}

/// Monday-to-Friday days in (from, to], negative when `to` is before `from`.
fn business_days(from: NaiveDate, to: NaiveDate) -> i64 {
    if to < from {
        return -business_days(to, from);
    }
    let weekday = |d: NaiveDate| !matches!(d.weekday(), Weekday::Sat | Weekday::Sun);
    let days = (to - from).num_days();
    let (weeks, rest) = (days / 7, days % 7);
    let mut count = weeks * 5;
    let mut d = from + chrono::Duration::days(weeks * 7);
    for _ in 0..rest {
        d = d.succ_opt().unwrap_or(d);
        if weekday(d) {
            count += 1;
        }
    }
    count
}

/// Reads the table. `columns` are the value columns wanted, by header name.
pub fn read(text: &str, model: &Model, columns: &[String]) -> Result<Table, DataError> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let (delimiter, names) = header(text);
    if names.iter().all(|n| n.is_empty()) {
        return Err(DataError::whole(
            "the file is empty; it needs a header row naming a `date` or `t` column and \
             the value columns"
                .to_string(),
        ));
    }
    let mut clock = Times::new(time_column(&names, model)?, &names, model);
    let wanted = wanted_columns(&names, columns)?;
    let mut reader = csv::ReaderBuilder::new()
        .delimiter(delimiter)
        .has_headers(true)
        .flexible(false)
        .trim(csv::Trim::All)
        .from_reader(text.as_bytes());
    let mut table = Table {
        times: Vec::new(),
        time_text: Vec::new(),
        lines: Vec::new(),
        values: vec![Vec::new(); wanted.len()],
        skipped: 0,
    };
    for record in reader.records() {
        let record = record.map_err(record_error)?;
        let line = record.position().map(|p| p.line()).unwrap_or(0);
        if record.iter().all(|c| c.trim().is_empty()) {
            continue;
        }
        let time_cell = record.get(clock.index).unwrap_or("").trim();
        let t = clock.read(line, time_cell)?;
        for (j, &column) in wanted.iter().enumerate() {
            let value = cell(record.get(column).unwrap_or(""))
                .map_err(|message| DataError::at(line, &names[column], message))?;
            if value.is_none() {
                table.skipped += 1;
            }
            table.values[j].push(value);
        }
        table.times.push(t);
        table.time_text.push(time_cell.to_string());
        table.lines.push(line);
    }
    Ok(table)
}

/// The time column of the header: `date`, else `t`.
fn time_column(names: &[String], model: &Model) -> Result<TimeColumn, DataError> {
    let find = |wanted: &str| names.iter().position(|n| n.eq_ignore_ascii_case(wanted));
    match (find("date"), find("t")) {
        (Some(i), _) => Ok(TimeColumn::Date(i)),
        (None, Some(i)) => Ok(TimeColumn::Clock(i)),
        (None, None) => Err(DataError {
            line: Some(1),
            column: None,
            message: format!(
                "the header ({}) has no time column: name one `date` (ISO 8601 dates, \
                 2024-03-28) or `t` (times in clock units, {})",
                names.join(", "),
                model.clock.unit
            ),
        }),
    }
}

/// The place in the header of each wanted value column.
fn wanted_columns(names: &[String], columns: &[String]) -> Result<Vec<usize>, DataError> {
    columns
        .iter()
        .map(|c| {
            names.iter().position(|n| n == c).ok_or_else(|| DataError {
                line: Some(1),
                column: Some(c.clone()),
                message: format!(
                    "no such column; the header has {}",
                    names
                        .iter()
                        .map(|n| format!("`{n}`"))
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            })
        })
        .collect()
}

/// A row the CSV reader refused, explained.
fn record_error(e: csv::Error) -> DataError {
    match e.kind() {
        csv::ErrorKind::UnequalLengths {
            pos,
            len,
            expected_len,
        } => DataError {
            line: pos.as_ref().map(|p| p.line()),
            column: None,
            message: format!(
                "the row has {len} cells and the header {expected_len}; a decimal \
                 comma in a comma-separated file splits a number (use `.` or `;` as \
                 the separator)"
            ),
        },
        _ => DataError::whole(format!("cannot read the CSV: {e}")),
    }
}

/// The time column as it is read row by row: each cell in clock units, the times
/// strictly increasing.
struct Times<'a> {
    column: TimeColumn,
    /// Its place in the header, and its name.
    index: usize,
    name: String,
    model: &'a Model,
    /// The first date, from which dates count.
    first_date: Option<NaiveDate>,
    /// The previous row's time, line and cell.
    previous: Option<(f64, u64, String)>,
}

impl<'a> Times<'a> {
    fn new(column: TimeColumn, names: &[String], model: &'a Model) -> Times<'a> {
        let index = match column {
            TimeColumn::Date(i) | TimeColumn::Clock(i) => i,
        };
        Times {
            column,
            index,
            name: names[index].clone(),
            model,
            first_date: None,
            previous: None,
        }
    }

    /// The time of the row at `line` whose time cell is `cell`, in clock units.
    fn read(&mut self, line: u64, cell_text: &str) -> Result<f64, DataError> {
        if cell_text.is_empty() {
            return Err(DataError::at(
                line,
                &self.name,
                "the time is missing; every row needs one (drop the row instead)".to_string(),
            ));
        }
        let t = self.value(line, cell_text)?;
        if let Some((before, before_line, before_text)) = &self.previous {
            if t == *before {
                return Err(DataError::at(
                    line,
                    &self.name,
                    format!(
                        "`{cell_text}` repeats the time of line {before_line}; keep one \
                         observation per time"
                    ),
                ));
            }
            if t < *before {
                return Err(DataError::at(
                    line,
                    &self.name,
                    format!(
                        "`{cell_text}` comes before `{before_text}` on line {before_line}; \
                         sort the rows by time"
                    ),
                ));
            }
        }
        self.previous = Some((t, line, cell_text.to_string()));
        Ok(t)
    }

    /// A time cell in clock units: a date counted from the first, or a number.
    fn value(&mut self, line: u64, cell_text: &str) -> Result<f64, DataError> {
        match self.column {
            TimeColumn::Date(_) => {
                let date = NaiveDate::parse_from_str(cell_text, "%Y-%m-%d").map_err(|_| {
                    DataError::at(
                        line,
                        &self.name,
                        format!("`{cell_text}` is not an ISO 8601 date; write YYYY-MM-DD"),
                    )
                })?;
                let start = *self.first_date.get_or_insert(date);
                Ok(clock_between(start, date, self.model))
            }
            TimeColumn::Clock(_) => match cell(cell_text) {
                Ok(Some(t)) => Ok(t),
                _ => Err(DataError::at(
                    line,
                    &self.name,
                    format!(
                        "`{cell_text}` is not a time in clock units ({})",
                        self.model.clock.unit
                    ),
                )),
            },
        }
    }
}

/// Clock units between two dates: calendar days / 365 years, or Monday-to-Friday days
/// when the clock counts business days (`bday`).
pub fn clock_between(from: NaiveDate, to: NaiveDate, model: &Model) -> f64 {
    if model.clock.unit == "bday" {
        business_days(from, to) as f64
    } else {
        (to - from).num_days() as f64 / 365.0 / model.clock.years
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn date(text: &str) -> NaiveDate {
        NaiveDate::parse_from_str(text, "%Y-%m-%d").expect("a test date")
    }

    #[test]
    fn business_days_skip_weekends() {
        // 2024-03-01 is a Friday: the next Monday is one business day later.
        assert_eq!(business_days(date("2024-03-01"), date("2024-03-04")), 1);
        assert_eq!(business_days(date("2024-03-01"), date("2024-03-02")), 0);
        assert_eq!(business_days(date("2024-03-04"), date("2024-03-18")), 10);
        assert_eq!(business_days(date("2024-03-18"), date("2024-03-04")), -10);
        // A whole year 2024 (a leap year starting on a Monday): 262 weekdays, counted by
        // hand from the calendar.
        assert_eq!(business_days(date("2023-12-31"), date("2024-12-31")), 262);
    }

    #[test]
    fn cells_with_percent_and_basis_points() {
        assert_eq!(cell("3.25%"), Ok(Some(0.0325)));
        assert_eq!(cell(" 25bp "), Ok(Some(0.0025)));
        assert_eq!(cell("-1e-3"), Ok(Some(-0.001)));
        assert_eq!(cell("NA"), Ok(None));
        assert_eq!(cell(""), Ok(None));
        assert!(cell("3,2").is_err());
        assert!(cell("nan").is_err());
        assert!(cell("inf").is_err());
        assert!(cell("%").is_err());
    }

    #[test]
    fn header_delimiter() {
        assert_eq!(header("date;r\n").0, b';');
        assert_eq!(header("date,r\n").0, b',');
        assert_eq!(header("t , r \n").1, vec!["t".to_string(), "r".to_string()]);
    }
}
