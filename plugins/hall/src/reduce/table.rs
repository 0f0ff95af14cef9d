//! The reduction's result as typed columns: one buffer per output column, sized once for
//! every row, filled a stretch of rows at a time (in parallel, each task into its own
//! stretch of every column), so that the table glue hands the buffers to the output table
//! without another pass.

use super::cells::NoiseEvidence;
use super::contract::{float_column, CalibrationUsed, ReducedRow};
use super::row::{finish_row, FlagSet, ResolvedCalibration, RowRecord, SeriesBudget};

/// One float column: its values (0 where null) and a validity bit per row.
pub use mobilis_sdk::sdk::{FloatColumn, VALIDITY_WORD_ROWS};

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
                let value = |column: usize| self.floats[column].values()[row];
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

/// One task's stretch of every column: whole validity words, so that no two tasks write
/// to one word.
struct TaskColumns<'a> {
    /// The task's first row in the table, a multiple of [`VALIDITY_WORD_ROWS`].
    first_row: usize,
    values: Vec<&'a mut [f64]>,
    validity: Vec<&'a mut [u64]>,
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

/// Rows finished at a time before they are written out column by column: one validity
/// word of each column; 64 rows of 43 values, 22 KiB, stay in the first-level cache.
const FILL_BLOCK_ROWS: usize = VALIDITY_WORD_ROWS;

/// Rows one task finishes and writes: 32 blocks.
const TASK_ROWS: usize = 32 * FILL_BLOCK_ROWS;

/// Below this many rows the tasks run one after the other.
const PARALLEL_ROWS: usize = 2_000;

/// The columns of the reduced samples, joined in sample order: every row's uncertainties
/// are finished with its sample's pooled noise and written straight into the columns, the
/// validity a word (64 rows) at a time. The table is cut into tasks of whole words, not into
/// samples, so that a word never holds the rows of two writers.
pub(super) fn build_columns(
    samples: &[SampleReduction],
    resolved_hall_factor: impl Fn(usize) -> f64 + Sync,
) -> BuiltColumns {
    // Each sample's first row, and what its rows are finished with.
    let mut first_rows: Vec<usize> = Vec::with_capacity(samples.len() + 1);
    let mut height = 0usize;
    for sample in samples {
        first_rows.push(height);
        height += sample.records.len();
    }
    first_rows.push(height);
    let finishing: Vec<(f64, SeriesBudget)> = samples
        .iter()
        .enumerate()
        .map(|(index, sample)| {
            (
                resolved_hall_factor(index),
                SeriesBudget::new(&sample.series_evidence, &sample.calibration_resolved),
            )
        })
        .collect();
    // Zeroed memory, written once below. The allocator may hand back memory of an earlier
    // call, which it then clears: a large table clears its columns in parallel.
    let parallel = height >= PARALLEL_ROWS;
    let mut floats: Vec<FloatColumn> = if parallel {
        use rayon::prelude::*;
        (0..float_column::COUNT)
            .into_par_iter()
            .map(|_| FloatColumn::nulls(height))
            .collect()
    } else {
        (0..float_column::COUNT).map(|_| FloatColumn::nulls(height)).collect()
    };
    let mut reading_count = vec![0i64; height];
    let mut drift_corrected = vec![false; height];
    let mut carrier = vec![0u8; height];
    let mut flags = vec![FlagSet::default(); height];

    let row_lengths: Vec<usize> = (0..height)
        .step_by(TASK_ROWS)
        .map(|first| TASK_ROWS.min(height - first))
        .collect();
    let word_lengths: Vec<usize> = row_lengths
        .iter()
        .map(|rows| rows.div_ceil(VALIDITY_WORD_ROWS))
        .collect();
    let mut tasks: Vec<TaskColumns<'_>> = {
        let mut value_stretches: Vec<std::vec::IntoIter<&mut [f64]>> = Vec::new();
        let mut validity_stretches: Vec<std::vec::IntoIter<&mut [u64]>> = Vec::new();
        for column in floats.iter_mut() {
            let (values, validity) = column.parts_mut();
            value_stretches.push(stretches(values, &row_lengths).into_iter());
            validity_stretches.push(stretches(validity, &word_lengths).into_iter());
        }
        let counts = stretches(&mut reading_count, &row_lengths);
        let drifts = stretches(&mut drift_corrected, &row_lengths);
        let carriers = stretches(&mut carrier, &row_lengths);
        let flag_stretches = stretches(&mut flags, &row_lengths);
        counts
            .into_iter()
            .zip(drifts)
            .zip(carriers)
            .zip(flag_stretches)
            .enumerate()
            .map(
                |(index, (((reading_count, drift_corrected), carrier), flags))| TaskColumns {
                    first_row: index * TASK_ROWS,
                    values: value_stretches
                        .iter_mut()
                        .map(|it| it.next().expect("one per task"))
                        .collect(),
                    validity: validity_stretches
                        .iter_mut()
                        .map(|it| it.next().expect("one per task"))
                        .collect(),
                    reading_count,
                    drift_corrected,
                    carrier,
                    flags,
                },
            )
            .collect()
    };

    let fill = |out: &mut TaskColumns<'_>| {
        let task_rows = out.reading_count.len();
        // The sample of the task's first row; later rows move it on.
        let mut sample = first_rows.partition_point(|&first| first <= out.first_row) - 1;
        // Rows are finished a block at a time and the block is written column by column:
        // each column's stretch is then written contiguously and its validity as one word,
        // instead of one value into each of the 43 columns per row.
        let mut block = [([0.0; float_column::COUNT], 0u64); FILL_BLOCK_ROWS];
        for (word, block_start) in (0..task_rows).step_by(FILL_BLOCK_ROWS).enumerate() {
            let block_rows = FILL_BLOCK_ROWS.min(task_rows - block_start);
            for (offset, finished) in block[..block_rows].iter_mut().enumerate() {
                let row = out.first_row + block_start + offset;
                while row >= first_rows[sample + 1] {
                    sample += 1;
                }
                let record = &samples[sample].records[row - first_rows[sample]];
                let (hall_factor, series) = &finishing[sample];
                *finished = finish_row(record, *hall_factor, series);
                write_scalars(out, block_start + offset, record);
            }
            let finished = &block[..block_rows];
            for (column, (values_out, validity_out)) in out.values.iter_mut().zip(out.validity.iter_mut()).enumerate() {
                let mut bits = 0u64;
                for (bit, (value_out, (values, present))) in values_out[block_start..block_start + block_rows]
                    .iter_mut()
                    .zip(finished)
                    .enumerate()
                {
                    *value_out = values[column];
                    bits |= ((present >> column) & 1) << bit;
                }
                validity_out[word] = bits;
            }
        }
    };
    if parallel && tasks.len() > 1 {
        use rayon::prelude::*;
        tasks.par_iter_mut().for_each(fill);
    } else {
        tasks.iter_mut().for_each(fill);
    }
    drop(tasks);
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
fn write_scalars(out: &mut TaskColumns<'_>, row: usize, record: &RowRecord) {
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
    /// The sample's own warnings: readings taken as zero field, drifting groups left as
    /// measured.
    pub(super) warnings: Vec<String>,
    pub(super) calibration: CalibrationUsed,
}
