//! Numbers as the language writes them: a decimal with an optional exponent and an optional
//! `%` (hundredths) or `bp` (basis points, ten-thousandths). One definition for the parser
//! and for every command-line option and setting that takes such a number, so that `3.25%`
//! is the same double wherever it is written.

use std::num::IntErrorKind;

/// Why a text is not a number of the language.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum NumberError {
    /// Not a decimal number (a word, `inf`, `nan`, a hexadecimal or an empty text).
    NotANumber,
    /// An exponent beyond what a 64-bit integer holds.
    ExponentOutOfRange,
    /// A value beyond the largest double (about 1.8e308).
    TooLarge,
}

impl NumberError {
    /// What is wrong with `text`, for a message.
    pub fn describe(self, text: &str) -> String {
        match self {
            NumberError::NotANumber => format!("`{text}` is not a number"),
            NumberError::ExponentOutOfRange => {
                format!("the exponent of `{text}` is out of range")
            }
            NumberError::TooLarge => format!("`{text}` is too large to be a number"),
        }
    }
}

/// The value of `0.5`, `-1e-3`, `+2`, `3.25%` or `25bp`; space around the text and before
/// the suffix is allowed. The suffix shifts the decimal exponent instead of dividing, so
/// `0.07%` is the double nearest 0.0007 and `25bp` the double nearest 0.0025 (0.07 / 100
/// rounds twice and gives 0.0007000000000000001). Only digits, a point, signs and an exponent are read: `inf`,
/// `nan` and hexadecimal are refused, as is a value that is not finite.
pub fn scaled_number(text: &str) -> Result<f64, NumberError> {
    let text = text.trim();
    let (body, shift) = if let Some(b) = text.strip_suffix('%') {
        (b.trim_end(), 2)
    } else if let Some(b) = text.strip_suffix("bp") {
        (b.trim_end(), 4)
    } else {
        (text, 0)
    };
    let plain = body
        .chars()
        .all(|c| c.is_ascii_digit() || matches!(c, '.' | '-' | '+' | 'e' | 'E'));
    if body.is_empty() || !plain {
        return Err(NumberError::NotANumber);
    }
    let (mantissa, exponent) = match body.find(['e', 'E']) {
        Some(i) => (&body[..i], &body[i + 1..]),
        None => (body, "0"),
    };
    let exponent: i64 = exponent
        .parse()
        .map_err(|e: std::num::ParseIntError| match e.kind() {
            IntErrorKind::PosOverflow | IntErrorKind::NegOverflow => {
                NumberError::ExponentOutOfRange
            }
            _ => NumberError::NotANumber,
        })?;
    let value: f64 = format!("{mantissa}e{}", exponent.saturating_sub(shift))
        .parse()
        .map_err(|_| NumberError::NotANumber)?;
    if value.is_finite() {
        Ok(value)
    } else {
        Err(NumberError::TooLarge)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn suffixes_shift_the_exponent_and_give_the_nearest_double() {
        // 0.07 / 100 and 0.14 * 0.01 round twice and land one unit in the last place
        // away (0.0007000000000000001, 0.0014000000000000002; Python's float agrees).
        assert_eq!(scaled_number("0.07%"), Ok(0.0007));
        assert_eq!(scaled_number("0.14%"), Ok(0.0014));
        assert_eq!(scaled_number("3.25%"), Ok(0.0325));
        assert_eq!(scaled_number("25bp"), Ok(0.0025));
        assert_eq!(scaled_number(" 7 % "), Ok(0.07));
        assert_eq!(scaled_number("1e2%"), Ok(1.0));
        assert_eq!(scaled_number("-1e-3"), Ok(-0.001));
        assert_eq!(scaled_number("+2"), Ok(2.0));
        assert_eq!(scaled_number(".5"), Ok(0.5));
    }

    #[test]
    fn words_and_overflows_are_refused_with_their_reason() {
        for text in [
            "", "%", "inf", "nan", "NaN%", "0x10", "1.5.3", "e5", "5e", "-", "1 2",
        ] {
            assert_eq!(
                scaled_number(text),
                Err(NumberError::NotANumber),
                "{text:?}"
            );
        }
        assert_eq!(
            scaled_number("1e99999999999999999999"),
            Err(NumberError::ExponentOutOfRange)
        );
        assert_eq!(scaled_number("1e309"), Err(NumberError::TooLarge));
        assert_eq!(scaled_number("1e-400"), Ok(0.0));
    }
}
