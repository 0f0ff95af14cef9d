//! DataFrames across the Arrow C Data Interface, one struct array per table.
//!
//! Used on both sides of the plugin boundary: the host exports inputs and imports the
//! output; the SDK imports inputs and exports the output. Numeric and boolean columns cross
//! without a copy; string columns are converted to the classic large UTF-8 layout so that
//! a plugin written in C needs no knowledge of string views (see [`crate::abi`]).

use polars::prelude::{Column, CompatLevel, DataFrame, IntoColumn, PlSmallStr, Series};
use polars_arrow::array::{Array, StructArray};
use polars_arrow::datatypes::{ArrowDataType, Field};
use polars_arrow::ffi::{self, ArrowArray, ArrowSchema};

/// Why a table could not cross the boundary.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum TableError {
    #[error("a table must have at least one column to cross the plugin boundary")]
    NoColumns,
    #[error("the table is not an Arrow struct array (format of the top-level schema: {0})")]
    NotAStruct(String),
    #[error("Arrow error: {0}")]
    Arrow(String),
}

fn compat() -> CompatLevel {
    CompatLevel::oldest()
}

/// Exports a DataFrame as an Arrow struct array (schema and array), ready to hand over.
pub fn export_frame(frame: &DataFrame) -> Result<(ArrowSchema, ArrowArray), TableError> {
    if frame.width() == 0 {
        return Err(TableError::NoColumns);
    }
    let fields: Vec<Field> = frame
        .columns()
        .iter()
        .map(|column| column.field().to_arrow(compat()))
        .collect();
    let arrays: Vec<Box<dyn Array>> = frame.rechunk_to_arrow(compat());
    let dtype = ArrowDataType::Struct(fields);
    let table = StructArray::try_new(dtype.clone(), frame.height(), arrays, None)
        .map_err(|error| TableError::Arrow(error.to_string()))?;
    let schema = ffi::export_field_to_c(&Field::new(PlSmallStr::from_static("table"), dtype, false));
    let array = ffi::export_array_to_c(Box::new(table));
    Ok((schema, array))
}

/// Imports a struct array into a DataFrame, taking ownership of `array` (its release
/// callback runs when the last column referring to its buffers is dropped).
///
/// # Safety
/// `schema` and `array` must be valid, unreleased structures of the Arrow C Data Interface
/// that describe each other, and the code behind their release callbacks must stay loaded
/// for as long as the returned DataFrame (or any column cloned from it) lives.
pub unsafe fn import_frame(schema: &ArrowSchema, array: ArrowArray) -> Result<DataFrame, TableError> {
    // SAFETY: the caller guarantees a valid schema.
    let field = unsafe { ffi::import_field_from_c(schema) }.map_err(|error| TableError::Arrow(error.to_string()))?;
    if !matches!(field.dtype, ArrowDataType::Struct(_)) {
        return Err(TableError::NotAStruct(format!("{:?}", field.dtype)));
    }
    // SAFETY: the caller guarantees that `array` is valid and matches `schema`.
    let imported = unsafe { ffi::import_array_from_c(array, field.dtype.clone()) }
        .map_err(|error| TableError::Arrow(error.to_string()))?;
    let table = imported
        .as_any()
        .downcast_ref::<StructArray>()
        .ok_or_else(|| TableError::NotAStruct(format!("{:?}", field.dtype)))?;
    let height = table.len();
    let mut columns: Vec<Column> = Vec::with_capacity(table.fields().len());
    for (child_field, values) in table.fields().iter().zip(table.values()) {
        let series = Series::from_arrow(child_field.name.clone(), values.clone())
            .map_err(|error| TableError::Arrow(error.to_string()))?;
        columns.push(series.into_column());
    }
    DataFrame::new(height, columns).map_err(|error| TableError::Arrow(error.to_string()))
}

/// Moves an Arrow array out of a foreign-owned location, leaving a released (empty)
/// struct behind, as the C Data Interface's "moving an array" prescribes.
///
/// # Safety
/// `location` must point to a valid, initialised `ArrowArray`.
pub unsafe fn take_array(location: *mut ArrowArray) -> ArrowArray {
    // SAFETY: valid by the caller's guarantee; the empty struct has no release callback.
    unsafe { std::ptr::replace(location, ArrowArray::empty()) }
}

/// Moves an Arrow schema out of a foreign-owned location (see [`take_array`]).
///
/// # Safety
/// `location` must point to a valid, initialised `ArrowSchema`.
pub unsafe fn take_schema(location: *mut ArrowSchema) -> ArrowSchema {
    // SAFETY: valid by the caller's guarantee.
    unsafe { std::ptr::replace(location, ArrowSchema::empty()) }
}

#[cfg(test)]
mod tests {
    use super::*;
    use polars::prelude::*;

    #[test]
    fn a_frame_survives_the_round_trip() {
        let frame = df!(
            "sample" => ["a", "b", "c"],
            "temperature_K" => [4.2, 77.0, 300.0],
            "i_in" => [1i64, 2, 3],
            "ok" => [true, false, true],
            "maybe" => [Some(1.0), None, Some(3.0)],
        )
        .unwrap();
        let (schema, array) = export_frame(&frame).unwrap();
        let back = unsafe { import_frame(&schema, array) }.unwrap();
        assert!(back.equals_missing(&frame), "{back:?}");
    }

    #[test]
    fn numeric_columns_cross_without_a_copy() {
        let values: Vec<f64> = (0..1000).map(f64::from).collect();
        let frame = df!("x" => values).unwrap();
        let before = frame.column("x").unwrap().f64().unwrap().cont_slice().unwrap().as_ptr();
        let (schema, array) = export_frame(&frame).unwrap();
        let back = unsafe { import_frame(&schema, array) }.unwrap();
        let after = back.column("x").unwrap().f64().unwrap().cont_slice().unwrap().as_ptr();
        assert_eq!(before, after);
    }

    #[test]
    fn an_empty_frame_is_refused() {
        assert!(matches!(export_frame(&DataFrame::empty()), Err(TableError::NoColumns)));
    }
}
