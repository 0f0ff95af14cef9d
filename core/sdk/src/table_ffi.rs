//! DataFrames across the Arrow C Data Interface, one struct array per table.
//!
//! Used on both sides of the plugin boundary: the host exports inputs and imports the
//! output; the SDK imports inputs and exports the output. Numeric and boolean columns cross
//! without a copy. Text columns cross as Arrow string views (format `vu`), which is how
//! polars holds them, so they cross without a copy too: the views buffer and the variadic
//! data buffers are handed over as they are, followed by the buffer of variadic sizes
//! (Arrow Columnar Format, "Variable-size Binary View Layout"; Arrow C Data Interface,
//! "Binary view arrays"). A plugin that has not declared
//! [`crate::abi::FEATURE_STRING_VIEWS`] gets the classic large UTF-8 layout (`U`) instead,
//! which costs one copy of the text each way ([`TextLayout::LargeUtf8`]). Import accepts
//! both, and views are taken over without a copy.
//!
//! Categorical and enum columns would be sent as plain text (a cast, hence a copy): the
//! ABI's column types have no dictionary type. The daemon's polars is built without
//! categoricals, so Parquet and IPC dictionary columns are already decoded to plain text
//! when a file is read into the store, and the cast does not happen in practice.

use polars::prelude::{Column, CompatLevel, DataFrame, DataType, IntoColumn, PlSmallStr, Series};
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

/// How text columns are laid out when a table is exported.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum TextLayout {
    /// Arrow string views (`vu`): the column's own buffers, without a copy. For peers that
    /// declared [`crate::abi::FEATURE_STRING_VIEWS`].
    #[default]
    Views,
    /// Classic large UTF-8 (`U`, int64 offsets): what ABI 1.0 promised every plugin. The
    /// text is copied into one contiguous buffer.
    LargeUtf8,
}

impl TextLayout {
    /// The layout for a peer that declared these features.
    pub fn for_features<S: AsRef<str>>(features: &[S]) -> TextLayout {
        if features
            .iter()
            .any(|feature| feature.as_ref() == crate::abi::FEATURE_STRING_VIEWS)
        {
            TextLayout::Views
        } else {
            TextLayout::LargeUtf8
        }
    }

    fn compat(self) -> CompatLevel {
        // In polars, the compatibility level decides exactly this: the oldest level writes
        // large UTF-8 (and large binary), the newest the view layouts.
        match self {
            TextLayout::Views => CompatLevel::newest(),
            TextLayout::LargeUtf8 => CompatLevel::oldest(),
        }
    }
}

/// Exports a DataFrame as an Arrow struct array (schema and array), ready to hand over,
/// with text as string views (see [`export_frame_as`]).
pub fn export_frame(frame: &DataFrame) -> Result<(ArrowSchema, ArrowArray), TableError> {
    export_frame_as(frame, TextLayout::Views)
}

/// Exports a DataFrame as an Arrow struct array with text columns in the given layout.
/// Columns of several chunks are joined into one first (a copy only for those).
pub fn export_frame_as(frame: &DataFrame, layout: TextLayout) -> Result<(ArrowSchema, ArrowArray), TableError> {
    if frame.width() == 0 {
        return Err(TableError::NoColumns);
    }
    let compat = layout.compat();
    let mut fields: Vec<Field> = Vec::with_capacity(frame.width());
    let mut arrays: Vec<Box<dyn Array>> = Vec::with_capacity(frame.width());
    for column in frame.columns() {
        let plain;
        let column = if column.dtype().is_categorical() || column.dtype().is_enum() {
            plain = column
                .cast(&DataType::String)
                .map_err(|error| TableError::Arrow(error.to_string()))?;
            &plain
        } else {
            column
        };
        fields.push(column.field().to_arrow(compat));
        arrays.push(column.clone().rechunk_to_arrow(compat));
    }
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

    /// The Arrow type of each column as the exported schema describes it.
    fn exported_types(schema: &ffi::ArrowSchema) -> Vec<ArrowDataType> {
        let field = unsafe { ffi::import_field_from_c(schema) }.unwrap();
        match field.dtype {
            ArrowDataType::Struct(fields) => fields.into_iter().map(|field| field.dtype).collect(),
            other => panic!("not a struct: {other:?}"),
        }
    }

    fn round_trip(frame: &DataFrame, layout: TextLayout) -> DataFrame {
        let (schema, array) = export_frame_as(frame, layout).unwrap();
        let text = if layout == TextLayout::Views {
            ArrowDataType::Utf8View
        } else {
            ArrowDataType::LargeUtf8
        };
        for (column, dtype) in frame.columns().iter().zip(exported_types(&schema)) {
            if column.dtype().is_string() {
                assert_eq!(dtype, text, "column {}", column.name());
            }
        }
        unsafe { import_frame(&schema, array) }.unwrap()
    }

    /// The views buffer and data buffers of a single-chunk text column.
    fn text_buffers(frame: &DataFrame, name: &str) -> (*const u8, Vec<*const u8>) {
        let text = frame.column(name).unwrap().str().unwrap();
        assert_eq!(text.chunks().len(), 1);
        let array = text.downcast_iter().next().unwrap();
        let data = array.data_buffers().iter().map(|buffer| buffer.as_ptr()).collect();
        (array.views().as_ptr().cast(), data)
    }

    /// Short strings (at most 12 bytes) live inside their view; longer ones in a data buffer.
    fn mixed_text() -> DataFrame {
        df!(
            "sample" => [
                Some("a"),
                None,
                Some("exactly12byt"),
                Some("thirteen byte"),
                Some(""),
                Some("a sample name long enough to be stored out of line, with ünïcödé"),
                None,
            ],
            "x" => [1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0],
        )
        .unwrap()
    }

    #[test]
    fn text_crosses_as_views_without_a_copy() {
        let frame = mixed_text();
        let before = text_buffers(&frame, "sample");
        assert!(!before.1.is_empty(), "the long string needs a data buffer");
        let back = round_trip(&frame, TextLayout::Views);
        assert!(back.equals_missing(&frame), "{back:?}");
        assert_eq!(text_buffers(&back, "sample"), before);
        // The default export is the view layout.
        let (schema, array) = export_frame(&frame).unwrap();
        assert_eq!(exported_types(&schema)[0], ArrowDataType::Utf8View);
        drop(unsafe { import_frame(&schema, array) }.unwrap());
    }

    #[test]
    fn text_crosses_as_large_utf8_for_older_peers() {
        let frame = mixed_text();
        let back = round_trip(&frame, TextLayout::LargeUtf8);
        assert!(back.equals_missing(&frame), "{back:?}");
    }

    #[test]
    fn the_layout_follows_the_declared_features() {
        assert_eq!(TextLayout::for_features::<&str>(&[]), TextLayout::LargeUtf8);
        assert_eq!(TextLayout::for_features(&["something_else"]), TextLayout::LargeUtf8);
        assert_eq!(
            TextLayout::for_features(&["x".to_owned(), crate::abi::FEATURE_STRING_VIEWS.to_owned()]),
            TextLayout::Views
        );
    }

    #[test]
    fn frames_without_rows_cross_in_both_layouts() {
        let frame = mixed_text().head(Some(0));
        assert_eq!(frame.height(), 0);
        for layout in [TextLayout::Views, TextLayout::LargeUtf8] {
            let back = round_trip(&frame, layout);
            assert_eq!(back.height(), 0);
            assert_eq!(back.schema(), frame.schema());
        }
        let nulls_only = df!("sample" => [None::<&str>, None]).unwrap();
        for layout in [TextLayout::Views, TextLayout::LargeUtf8] {
            assert!(round_trip(&nulls_only, layout).equals_missing(&nulls_only));
        }
    }

    #[test]
    fn sliced_frames_cross_without_a_copy() {
        let frame = mixed_text();
        // Offsets 1..=5 leave the validity bitmap and the views at unaligned offsets.
        for offset in 1..=5i64 {
            let slice = frame.slice(offset, 2);
            for layout in [TextLayout::Views, TextLayout::LargeUtf8] {
                let back = round_trip(&slice, layout);
                assert!(back.equals_missing(&slice), "offset {offset}, {layout:?}: {back:?}");
            }
            let back = round_trip(&slice, TextLayout::Views);
            assert_eq!(text_buffers(&back, "sample").1, text_buffers(&slice, "sample").1);
        }
    }

    #[test]
    fn text_in_many_data_buffers_crosses_as_it_is() {
        use polars_arrow::array::MutableBinaryViewArray;
        // The builder starts a new data buffer each time one fills, so 2 MB of long
        // strings end up in several buffers.
        let mut builder = MutableBinaryViewArray::<str>::with_capacity(20_000);
        for index in 0..20_000 {
            if index % 7 == 0 {
                builder.push::<&str>(None);
            } else if index % 3 == 0 {
                builder.push(Some(format!("s{index}")));
            } else {
                builder.push(Some(format!("{index:>100}")));
            }
        }
        let array: polars_arrow::array::Utf8ViewArray = builder.into();
        assert!(array.data_buffers().len() > 3, "{}", array.data_buffers().len());
        let sample = Series::from_arrow("sample".into(), array.boxed()).unwrap();
        let frame = DataFrame::new(sample.len(), vec![sample.into_column()]).unwrap();
        let before = text_buffers(&frame, "sample");
        let back = round_trip(&frame, TextLayout::Views);
        assert!(back.equals_missing(&frame));
        assert_eq!(text_buffers(&back, "sample"), before);
        assert!(round_trip(&frame, TextLayout::LargeUtf8).equals_missing(&frame));
        // A slice that starts inside the second buffer.
        let slice = frame.slice(9_999, 5_000);
        assert!(round_trip(&slice, TextLayout::Views).equals_missing(&slice));
    }

    #[test]
    fn columns_of_several_chunks_cross() {
        let mut frame = mixed_text();
        frame.vstack_mut(&mixed_text()).unwrap();
        assert!(frame.column("sample").unwrap().n_chunks() > 1);
        for layout in [TextLayout::Views, TextLayout::LargeUtf8] {
            assert!(round_trip(&frame, layout).equals_missing(&frame));
        }
    }

    #[test]
    fn an_empty_frame_is_refused() {
        assert!(matches!(export_frame(&DataFrame::empty()), Err(TableError::NoColumns)));
    }
}
