//! Dimensions with exact rational exponents (placeholder: being written).

/// A physical dimension: base names with rational exponents.
#[derive(Clone, Debug, PartialEq, Eq, Default, Hash)]
pub struct Dimension {
    /// `(base, numerator, denominator)`, sorted by base; denominators positive, no zeros.
    pub exponents: Vec<(String, i64, i64)>,
}
