//! The reduction's result as typed columns: one buffer per output column, sized once for
//! every row, filled sample by sample (in parallel, each sample into its own stretch of
//! every column), so that no per-row record outlives its sample and the table glue hands
//! the buffers to the output table without another pass.

use super::cells::NoiseEvidence;
use super::contract::{float_column, CalibrationUsed, ReducedRow};
use super::row::{finish_row, FlagSet, ResolvedCalibration, RowRecord, SeriesBudget};

/// One float column: its values (0 where null) and, per row, whether the value is present.
pub use mobilis_sdk::sdk::FloatColumn;

/// The result of [`super::reduce_to_table`]: the output columns, rows sorted by sample,
/// temperature and field, and the warnings and calibrations of [`super::Reduction`].
#[derive(Debug, Clone)]
pub struct ReductionTable {
    pub height: usize,
    /// The samples in row order, each with its geometry's name ("van_der_pauw" or
    /// "hall_bar") and its number of rows.
    pub samples: Vec<(String, &'static str, usize)>,
    /// By [`float_column`].
    pub floats: Vec<FloatColumn>,
    pub reading_count: Vec<i64>,
    pub drift_corrected: Vec<bool>,
    /// 0: no carrier type, 1: "n", 2: "p".
    pub carrier: Vec<u8>,
    /// The raised flags of each row, bit i for `flags::ALL[i]`; none raised is `quality_ok`.
    pub flags: Vec<FlagSet>,
    pub warnings: Vec<String>,
    pub skipped_readings: usize,
    pub calibrations: Vec<CalibrationUsed>,
}

impl ReductionTable {
    /// The carrier type of a row: "n", "p" or none.
    pub fn carrier_type(&self, row: usize) -> Option<&'static str> {
        match self.carrier[row] {
            1 => Some("n"),
            2 => Some("p"),
            _ => None,
        }
    }

    /// The same result as rows.
    pub fn into_rows(self) -> Vec<ReducedRow> {
        use float_column as c;
        let mut rows = Vec::with_capacity(self.height);
        let mut row = 0usize;
        for (name, geometry, count) in &self.samples {
            for _ in 0..*count {
                let f = |column: usize| self.floats[column].get(row);
                let value = |column: usize| self.floats[column].values[row];
                let flags = self.flags[row];
                rows.push(ReducedRow {
                    sample: name.clone(),
                    geometry,
                    temperature_k: value(c::TEMPERATURE_K),
                    temperature_k_unc: value(c::TEMPERATURE_K_UNC),
                    drift_corrected: self.drift_corrected[row],
                    temperature_spread_k: value(c::TEMPERATURE_SPREAD_K),
                    field_t: f(c::FIELD_T),
                    reading_count: self.reading_count[row] as usize,
                    resistance_a_ohm: f(c::RESISTANCE_A),
                    resistance_b_ohm: f(c::RESISTANCE_B),
                    resistance_ratio: f(c::RESISTANCE_RATIO),
                    geometry_factor: f(c::GEOMETRY_FACTOR),
                    sheet_resistance_ohm_sq: f(c::SHEET_RESISTANCE),
                    sheet_resistance_ohm_sq_unc: f(c::SHEET_RESISTANCE_UNC),
                    sheet_resistance_ohm_sq_unc_stat: f(c::SHEET_RESISTANCE_UNC_STAT),
                    sheet_resistance_ohm_sq_unc_sys: f(c::SHEET_RESISTANCE_UNC_SYS),
                    resistivity_ohm_m: f(c::RESISTIVITY),
                    resistivity_ohm_m_unc: f(c::RESISTIVITY_UNC),
                    resistivity_ohm_m_unc_stat: f(c::RESISTIVITY_UNC_STAT),
                    resistivity_ohm_m_unc_sys: f(c::RESISTIVITY_UNC_SYS),
                    hall_resistance_ohm: f(c::HALL_RESISTANCE),
                    hall_resistance_ohm_unc: f(c::HALL_RESISTANCE_UNC),
                    sheet_hall_coefficient_m2_per_c: f(c::SHEET_HALL_COEFFICIENT),
                    sheet_hall_coefficient_m2_per_c_unc: f(c::SHEET_HALL_COEFFICIENT_UNC),
                    hall_coefficient_m3_per_c: f(c::HALL_COEFFICIENT),
                    hall_coefficient_m3_per_c_unc: f(c::HALL_COEFFICIENT_UNC),
                    carrier_type: self.carrier_type(row),
                    sheet_density_m2: f(c::SHEET_DENSITY),
                    sheet_density_m2_unc: f(c::SHEET_DENSITY_UNC),
                    sheet_density_m2_unc_stat: f(c::SHEET_DENSITY_UNC_STAT),
                    sheet_density_m2_unc_sys: f(c::SHEET_DENSITY_UNC_SYS),
                    density_m3: f(c::DENSITY),
                    density_m3_unc: f(c::DENSITY_UNC),
                    density_m3_unc_stat: f(c::DENSITY_UNC_STAT),
                    density_m3_unc_sys: f(c::DENSITY_UNC_SYS),
                    hall_mobility_m2_per_vs: f(c::HALL_MOBILITY),
                    hall_mobility_m2_per_vs_unc: f(c::HALL_MOBILITY_UNC),
                    hall_mobility_m2_per_vs_unc_stat: f(c::HALL_MOBILITY_UNC_STAT),
                    hall_mobility_m2_per_vs_unc_sys: f(c::HALL_MOBILITY_UNC_SYS),
                    drift_mobility_m2_per_vs: f(c::DRIFT_MOBILITY),
                    drift_mobility_m2_per_vs_unc: f(c::DRIFT_MOBILITY_UNC),
                    hall_factor: value(c::HALL_FACTOR),
                    reciprocity_mismatch: f(c::RECIPROCITY_MISMATCH),
                    current_reversal_mismatch: f(c::CURRENT_REVERSAL_MISMATCH),
                    hall_spread: f(c::HALL_SPREAD),
                    thermoelectric_offset_ratio: f(c::THERMOELECTRIC_OFFSET_RATIO),
                    misalignment_ratio: f(c::MISALIGNMENT_RATIO),
                    reading_noise_v: f(c::READING_NOISE_V),
                    flags: flags.iter().collect(),
                    quality_ok: flags.is_empty(),
                });
                row += 1;
            }
        }
        rows
    }
}

/// One sample's stretch of every column.
struct SampleColumns<'a> {
    values: Vec<&'a mut [f64]>,
    present: Vec<&'a mut [bool]>,
    reading_count: &'a mut [i64],
    drift_corrected: &'a mut [bool],
    carrier: &'a mut [u8],
    flags: &'a mut [FlagSet],
}

/// Splits a column into consecutive stretches of the given lengths.
fn stretches<'a, T>(mut column: &'a mut [T], lengths: &[usize]) -> Vec<&'a mut [T]> {
    lengths
        .iter()
        .map(|&length| {
            let (head, tail) = std::mem::take(&mut column).split_at_mut(length);
            column = tail;
            head
        })
        .collect()
}

/// The columns [`build_columns`] fills, before the warnings and calibrations join them.
pub(super) struct BuiltColumns {
    pub height: usize,
    pub floats: Vec<FloatColumn>,
    pub reading_count: Vec<i64>,
    pub drift_corrected: Vec<bool>,
    pub carrier: Vec<u8>,
    pub flags: Vec<FlagSet>,
}

/// Rows finished at a time before they are written out column by column: 64 rows of 43
/// values, 22 KiB, stay in the first-level cache.
const FILL_BLOCK_ROWS: usize = 64;

/// Below this many rows the samples are finished one after the other.
const PARALLEL_ROWS: usize = 2_000;

/// The columns of the reduced samples, joined in sample order: every row's uncertainties
/// are finished with its sample's pooled noise and written straight into the columns.
pub(super) fn build_columns(
    samples: &[SampleReduction],
    resolved_hall_factor: impl Fn(usize) -> f64 + Sync,
) -> BuiltColumns {
    let lengths: Vec<usize> = samples.iter().map(|sample| sample.records.len()).collect();
    let height: usize = lengths.iter().sum();
    // Zeroed memory, written once below. The allocator may hand back memory of an earlier
    // call, which it then clears: a large table clears its columns in parallel.
    let zeroed_column = |_| FloatColumn {
        values: vec![0.0; height],
        present: vec![false; height],
    };
    let mut floats: Vec<FloatColumn> = if height >= PARALLEL_ROWS {
        use rayon::prelude::*;
        (0..float_column::COUNT).into_par_iter().map(zeroed_column).collect()
    } else {
        (0..float_column::COUNT).map(zeroed_column).collect()
    };
    let mut reading_count = vec![0i64; height];
    let mut drift_corrected = vec![false; height];
    let mut carrier = vec![0u8; height];
    let mut flags = vec![FlagSet::default(); height];

    let mut per_sample: Vec<SampleColumns<'_>> = {
        let mut value_stretches: Vec<std::vec::IntoIter<&mut [f64]>> = Vec::new();
        let mut present_stretches: Vec<std::vec::IntoIter<&mut [bool]>> = Vec::new();
        for column in floats.iter_mut() {
            value_stretches.push(stretches(&mut column.values, &lengths).into_iter());
            present_stretches.push(stretches(&mut column.present, &lengths).into_iter());
        }
        let counts = stretches(&mut reading_count, &lengths);
        let drifts = stretches(&mut drift_corrected, &lengths);
        let carriers = stretches(&mut carrier, &lengths);
        let flag_stretches = stretches(&mut flags, &lengths);
        counts
            .into_iter()
            .zip(drifts)
            .zip(carriers)
            .zip(flag_stretches)
            .map(|(((reading_count, drift_corrected), carrier), flags)| SampleColumns {
                values: value_stretches
                    .iter_mut()
                    .map(|it| it.next().expect("one per sample"))
                    .collect(),
                present: present_stretches
                    .iter_mut()
                    .map(|it| it.next().expect("one per sample"))
                    .collect(),
                reading_count,
                drift_corrected,
                carrier,
                flags,
            })
            .collect()
    };

    let fill = |(index, out): (usize, &mut SampleColumns<'_>)| {
        let sample = &samples[index];
        let hall_factor = resolved_hall_factor(index);
        let series = SeriesBudget::new(&sample.series_evidence, &sample.calibration_resolved);
        // Rows are finished a block at a time and the block is written column by column:
        // each column's stretch is then written contiguously, without an index check per
        // value, instead of one value into each of the 43 columns per row.
        let mut block = [([0.0; float_column::COUNT], 0u64); FILL_BLOCK_ROWS];
        for (block_index, records) in sample.records.chunks(FILL_BLOCK_ROWS).enumerate() {
            let first_row = block_index * FILL_BLOCK_ROWS;
            for (finished, record) in block.iter_mut().zip(records) {
                *finished = finish_row(record, hall_factor, &series);
            }
            let finished = &block[..records.len()];
            for (column, (values_out, present_out)) in out.values.iter_mut().zip(out.present.iter_mut()).enumerate() {
                let rows = first_row..first_row + records.len();
                for ((value_out, present_out), (values, present)) in values_out[rows.clone()]
                    .iter_mut()
                    .zip(&mut present_out[rows])
                    .zip(finished)
                {
                    *value_out = values[column];
                    *present_out = present & (1 << column) != 0;
                }
            }
            for (offset, record) in records.iter().enumerate() {
                write_scalars(out, first_row + offset, record);
            }
        }
    };
    if height >= PARALLEL_ROWS && samples.len() > 1 {
        use rayon::prelude::*;
        per_sample.par_iter_mut().enumerate().for_each(fill);
    } else {
        per_sample.iter_mut().enumerate().for_each(fill);
    }
    drop(per_sample);
    BuiltColumns {
        height,
        floats,
        reading_count,
        drift_corrected,
        carrier,
        flags,
    }
}

#[inline]
fn write_scalars(out: &mut SampleColumns<'_>, row: usize, record: &RowRecord) {
    out.reading_count[row] = record.reading_count as i64;
    out.drift_corrected[row] = record.drift_corrected;
    out.carrier[row] = record.carrier;
    out.flags[row] = record.flags;
}

/// What one sample's series gives.
pub(super) struct SampleReduction {
    /// Rank of the sample (its index among the resolved samples).
    pub(super) rank: u32,
    /// The rows, to be finished with `series_evidence`.
    pub(super) records: Vec<RowRecord>,
    /// The sample's voltage-noise evidence pooled over every row of its series.
    pub(super) series_evidence: NoiseEvidence,
    pub(super) calibration_resolved: ResolvedCalibration,
    /// Warnings about single rows, in row order (the caller caps them).
    pub(super) row_warnings: Vec<String>,
    /// The sample's warning about readings taken as zero field, if any.
    pub(super) warning: Option<String>,
    pub(super) calibration: CalibrationUsed,
}
