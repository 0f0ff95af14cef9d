//! The raw reading: one row of the `readings` input role of `hall.reduce`, as a Rust value.
//!
//! Column names and meaning are fixed by the table convention (SI values, `quantity_unit`
//! names, [`crate::units`]): `sample`, `temperature_K`, `field_T`, `i_in` (the contact the
//! current enters), `i_out`, `v_pos`, `v_neg`, `current_A` (entering at `i_in`; negative for a
//! reversed source) and `voltage_V` (V(`v_pos`) - V(`v_neg`)). Instead of the four contact
//! columns a table may give a `contacts` column in pair notation (`"21,34"`,
//! [`crate::contacts::parse_pair_notation`]). Contact numbering and orientation are in
//! [`crate::contacts`].

/// One four-terminal reading in SI units.
#[derive(Debug, Clone, PartialEq)]
pub struct RawReading {
    pub sample: String,
    pub temperature_k: f64,
    pub field_t: f64,
    /// Contact the current enters (the source's positive terminal).
    pub i_in: i64,
    /// Contact the current leaves.
    pub i_out: i64,
    /// Voltmeter positive contact.
    pub v_pos: i64,
    /// Voltmeter negative contact.
    pub v_neg: i64,
    /// Current entering at `i_in`, A; negative for a reversed source.
    pub current_a: f64,
    /// V(`v_pos`) - V(`v_neg`), V.
    pub voltage_v: f64,
}

/// Column names of the `readings` role, in their conventional order.
pub const READING_COLUMNS: [&str; 9] = [
    "sample",
    "temperature_K",
    "field_T",
    "i_in",
    "i_out",
    "v_pos",
    "v_neg",
    "current_A",
    "voltage_V",
];
