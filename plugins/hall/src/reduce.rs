//! `hall.reduce`: raw four-terminal readings to sheet resistance, resistivity, Hall
//! coefficient, carrier type, density and mobility, with uncertainties and quality flags.
//!
//! Pure computation: no DataFrames, no I/O. The plugin's table glue turns the `readings` and
//! `samples` roles into [`RawReading`]s (or borrowed [`ReadingColumns`]) and [`SampleInfo`]s
//! and the [`Reduction`] back into a table.
//!
//! # Steps and the choices made
//!
//! 1. **Validation.** Every reading needs a finite temperature above 0 K, a finite field,
//!    current and voltage, a nonzero current, and contacts that form a configuration of its
//!    sample's geometry (`mobilis_physics::contacts`); an empty contact cell
//!    ([`EMPTY_CONTACT`], [`EMPTY_CONTACTS_CELL`]) is an invalid reading like the others.
//!    Magnitudes beyond [`LARGEST_READING_MAGNITUDE`] (1e30 A, V, T or K) and currents below
//!    [`SMALLEST_CURRENT_A`] are refused too: no laboratory gives them, and their squares,
//!    sums or V/I would overflow. An invalid reading is an error naming its
//!    0-based index; with [`ReduceSettings::skip_invalid_readings`] it is dropped, counted and
//!    reported as a warning instead (the first [`DETAILED_WARNINGS`] individually, the rest in
//!    one summary line, so a bad million-row import does not produce a million warnings; the
//!    warnings about single rows are capped the same way, since every affected row also
//!    carries its flag). When no reading is left, the error names the first few invalid
//!    ones with their reasons, since a refused call returns no warnings. A sample with
//!    readings but no sheet row is an error listing every such name.
//!    Without a sheet every sample is a 2D van der Pauw sample with Hall factor 1.
//! 2. **Temperature groups.** Per sample, readings are sorted by temperature and consecutive
//!    temperatures closer than `temperature_tolerance_K` (0.5 K) and than 5 % of the temperature
//!    share a group (the second limit keeps a sub-kelvin series apart: 0.3, 0.4, 0.5 K are three
//!    groups). Chains are allowed, so a slow drift stays one group; the row reports the group's
//!    mean and its spread (max - min) so that a drift is visible.
//! 3. **Zero field and field setpoints.** Within a group, |B| <= `zero_field_tolerance_t`
//!    (default 10 mT) is zero field: an electromagnet keeps a few mT at a nominal zero, and a
//!    gaussmeter records it, so the window is wide enough for that remanence and far below any
//!    Hall field (common practice; lower it for a Hall field below 10 mT); readings above 1e-4 T
//!    taken as zero field are named in a warning with the parameter. The other readings are
//!    grouped by |B| around setpoints: a row starts at the smallest |B| not yet placed and takes
//!    every reading within `field_tolerance_t` (5 mT) of it, so a row is never wider than that
//!    and a densely logged ramp is cut into setpoints instead of being chained into one. A field
//!    that wanders by tenths of a mT between readings stays one row, and each polarity's
//!    field-odd part is divided by its own fields (step 6). Each setpoint gives one row; a group
//!    without field readings gives one row with null Hall quantities and the flag
//!    `no_field_data`. A row with a missing configuration or field sign warns, naming each
//!    configuration in pair notation ("32,41"), what it leaves null and what to measure
//!    (the same configuration at the other field sign, for a Hall configuration seen at one
//!    sign only: the field-odd part needs both); when the sample has such readings in other
//!    rows, the warning also names `field_tolerance_T`, `zero_field_tolerance_T` and
//!    `temperature_tolerance_K`, the parameters that decide which readings share a row.
//! 4. **Canonical readings and fits.** Each reading is put in the canonical orientation of its
//!    configuration (I_c = current_sign * current_A, V_c = voltage_sign * voltage_V), so a
//!    current reversed by the source sign and one reversed by swapping the leads are the same
//!    measurement. Per configuration and field sign, V_c = R I_c + V_offset is fitted by least
//!    squares whenever two distinct currents exist, which removes a thermoelectric offset; R's
//!    standard error comes from the residuals when there are more than two readings. With a
//!    single current, R is the mean of V_c / I_c (its error the standard error of that mean)
//!    and the offset is unknown. A configuration seen at one current polarity raises
//!    `no_current_reversal`.
//! 5. **Resistances.** From the zero-field readings; when a temperature group has none of the
//!    resistance configurations at zero field, from the field-even part (R(+B) + R(-B)) / 2 of
//!    each row's field readings (or the one field sign measured), which includes the
//!    magnetoresistance at that field
//!    (`resistance_from_field_readings`, and a warning). R_A is the mean of the direct and
//!    reciprocal configurations present (R_21,34 and R_43,12), R_B likewise (R_32,41 and
//!    R_14,23); their uncertainty combines in quadrature the standard error of that mean
//!    (which sees inhomogeneity and contact effects) and the configurations' own standard
//!    errors over the number averaged (which see noise). The reciprocity mismatch is
//!    |direct - reciprocal| / mean, the larger of the two families. When one family is
//!    absent its column is null, and so are the resistance ratio, the geometry factor, the
//!    sheet resistance, the resistivity and the mobilities (`missing_configurations`): van
//!    der Pauw's equation needs both R_A and R_B (L. J. van der Pauw, Philips Res. Rep. 13,
//!    1 (1958)), and R_s = pi R / ln 2 from one of them holds only for a sample symmetric
//!    under a 90-degree rotation, which the readings cannot show. The Hall quantities need
//!    no R_s and are reported. A lab that knows its samples are so symmetric says so with
//!    [`ReduceSettings::assume_symmetric_sample`]: such a row then gets R_s = pi R / ln 2
//!    from the family measured, with that family's uncertainty (which cannot see an
//!    asymmetry) and the flag `assumed_symmetric`; the missing family, the ratio and the
//!    geometry factor stay null. The sheet resistance solves van der Pauw's
//!    equation exactly (`mobilis_physics::van_der_pauw`; geometry factor f from the same
//!    solution) and its uncertainty uses the exact gradient. A resistance that is not
//!    positive, which no uniform sample gives in canonical orientation, nulls the sheet
//!    resistance and mobility and raises `nonpositive_resistance` with a warning rather than
//!    failing the whole data set.
//!    Hall bar: R_xx is the mean over the two longitudinal pairs (same uncertainty rule),
//!    R_s = R_xx W / L with L the distance between the longitudinal voltage contacts; there
//!    is no geometry factor, no R_B and no reciprocity. Reported in `resistance_a_ohm`.
//! 6. **Hall.** Per Hall configuration (van der Pauw diagonals, Hall-bar transverse pairs) and
//!    current polarity, the field-odd part rho_k = (V_c/I_c at +B - V_c/I_c at -B) / 2, each
//!    side the mean of its repeats: these are the four NIST Hall voltages V_C..V_F over 2I.
//!    Thermoelectric offsets (even in B) and misalignment (even in B) cancel; averaging the
//!    two current polarities also cancels voltages odd in B but independent of the current.
//!    When the fields at +B and -B differ (a wandering setpoint), each rho_k is
//!    (V/I at +B1 - V/I at -B2) / (B1 + B2) times the row's |B|, each B the mean |B| of that
//!    polarity's readings, so that R_Hs B1 and R_Hs B2 are divided by their own fields.
//!    R_xy is the mean of the rho_k. With one Hall configuration only
//!    (`missing_configurations`) the rho_k are its two current polarities, so `hall_spread`
//!    and the scatter-based uncertainty see the noise and the polarities but not the
//!    difference between the configurations, which the warning says. R_Hs = R_xy / |B| with |B| the mean of the mean
//!    |B| at +B and at -B (positive for holes, the sign convention of the NIST Hall-effect
//!    pages); n_s = r_H / (e |R_Hs|); n = n_s / t; R_H = R_Hs t; mu_H = |R_Hs| / R_s (free of
//!    the Hall factor and of the thickness); drift mobility mu_H / r_H. A magnitude with no
//!    Hall configuration at both field signs has null Hall quantities (`no_field_reversal`).
//!    Quality numbers: the misalignment ratio is the largest |field-even part| of a Hall
//!    configuration (averaged over the polarities, which removes the offset's V_offset / I)
//!    over |R_xy|; the thermoelectric offset ratio is the largest |V_offset| / |R I_max| over
//!    the fits the row uses (resistance configurations at the field the resistance came from,
//!    Hall configurations at nonzero field); the current-reversal mismatch is the largest
//!    |R(+I) - R(-I)| / |mean| of the raw V/I of a resistance configuration, as in the NIST
//!    comparison of R_21,34 with R_12,43. With a single current magnitude that comparison
//!    also sees the thermoelectric offset (mismatch = 2 x offset ratio).
//! 7. **Flags.** See [`flags`]; a row lists its flags in the order of [`flags::ALL`] and
//!    `quality_ok` is true when there is none.
//! 8. **A drifting stage.** Each reading records its own temperature. When the readings of a
//!    group drift and the series has neighbouring temperatures, the group is reduced again
//!    with every reading brought to the group's mean temperature T: V x exp(s (T - T_k)),
//!    with s = d ln R_s / dT on the resistance configurations and d ln |R_Hs| / dT on the
//!    Hall ones, both from the series itself (the derivative in 1/T of the parabola through
//!    the group and its two nearest groups, in which a thermally activated density is a
//!    straight line). The slopes come from the previous pass, whose values the drift
//!    biased a little, so the correction is made twice. What remains is second order. A
//!    group whose correction would change a reading by more than 10 % (a Hall coefficient
//!    crossing zero, a transition, a steep freeze-out) is left as measured. The row says
//!    `drift_corrected`. A drifting group left as measured (refused, or without slopes) is
//!    flagged `drift_uncorrected`: its resistance readings and its Hall readings refer to
//!    their own mean temperatures, so each quantity's `_unc_stat` takes its slope times the
//!    offset of those temperatures from the row's (the series' steepest slopes for a group
//!    without its own), and the sample's warning names the rows.
//!
//! # The uncertainty budget
//!
//! Every `_unc` is a total standard uncertainty (one sigma). For the sheet resistance,
//! resistivity, sheet density, density and Hall mobility it is split into `_unc_stat` and
//! `_unc_sys`, with `_unc` their quadrature sum (JCGM 100:2008, the GUM: Type A and Type B
//! evaluations, first-order propagation, 5.1.2 and 5.1.6).
//!
//! - **Statistical (Type A).** All readings of a sample share one voltmeter, so the noise of
//!   a reading is modelled as one standard deviation sigma_V in volts. Every estimate carries
//!   its noise coefficient (its standard uncertainty per volt of that noise, propagated
//!   through the same formulas as the value), and every row collects its evidence about
//!   sigma_V: the residuals of the cell fits and the spread of its redundant estimates (the
//!   direct and reciprocal configurations of a family, the Hall values of the diagonals and
//!   polarities), each weighted by its noise coefficient, with its degrees of freedom (the
//!   usual van der Pauw protocol gives 5). The statistical part is the noise coefficient
//!   times the row's pooled sigma_V times sqrt(nu / (nu - 2)), the standard deviation of the
//!   Student t distribution that a Type A evaluation on nu degrees of freedom is assigned
//!   (JCGM 101:2008, 6.4.9.4). With fewer than 3 degrees of freedom a row borrows sigma_V
//!   pooled over its sample's whole series (JCGM 100:2008, 4.2.8); with fewer there too, it
//!   keeps the standard error of its own scatter. Autoranged currents are handled by the
//!   coefficients (a reading at I carries sigma_V / I in V/I). The statistical part is never
//!   below 1e-12 of the value, the resolution of the arithmetic: never zero.
//! - **Systematic (Type B).** The calibrations, each one error common to every row of the
//!   sample: thickness (`thickness_m_unc`), field scale (`field_calibration_rel`), current
//!   scale (`current_calibration_rel`), voltmeter gain (`voltage_calibration_rel`). To first
//!   order, relative: R_s and R_xy depend on V and I; R_Hs and n_s on V, I and B; rho on V, I
//!   and t; R_H and n on V, I, B and t; mu_H = R_Hs / R_s on B only (the voltmeter's gain and
//!   the source's scale cancel, since one voltmeter and one source measure both). A fit over
//!   the series weights its points by `_unc_stat` and applies `_unc_sys / X` once, after the
//!   fit, as a common scale (never as per-point noise).
//! - **Temperature.** `temperature_K_unc` is the stated thermometer accuracy
//!   (`temperature_accuracy_K`), in quadrature with the standard deviation of the readings'
//!   temperatures when a drift could not be corrected (a single temperature). A
//!   temperature-series fit propagates it through its model's slope (effective variance).
//! - **Stated or assumed.** Each calibration comes from the sample sheet (a column of the
//!   parameter's name, or `thickness_m_unc`), else from the call's parameter, else from its
//!   default (0.5 % field, 0.1 % current, 0.01 % voltage, 0.02 K; 0 for an unstated
//!   thickness uncertainty), common practice; the assumed ones are listed per sample and
//!   named in a warning.
//!
//! The scatter-based standard errors described in steps 5 and 6 are the fallback of the
//! statistical part. Uncertainties are `None` when no statistical part could be estimated
//! (a single configuration with one reading per polarity and no repeat, in a series with no
//! other evidence, has nothing to estimate a scatter from).
//!
//! # Performance
//!
//! The work is linear in the readings apart from one sort per sample, which is skipped
//! when the sample's readings arrive in temperature order (the usual export order).
//! Measured with `cargo bench -p mobilis-tests --bench hall_reduce` (its module docs say
//! what each figure measures).
//!
//! - The sample column arrives run-length encoded ([`SampleRun`]: the table glue compares
//!   consecutive Arrow string views, 16 bytes, eight at a time, and the texts only where
//!   the views differ; a long column in two halves at once, as the walk waits on memory),
//!   so names are interned once per run, not once per reading, and no per-reading name or
//!   sample number is stored.
//! - Samples are independent: each is validated, sorted and reduced in one task (in
//!   parallel above 20,000 readings), into a buffer of 40-byte records reused from sample
//!   to sample, so that a sample's readings stay in cache from validation to its rows and
//!   no buffer of the whole call is written, faulted in and read back. The results are
//!   joined in sample order, so that they do not depend on the number of threads.
//! - A reading's contacts are classified by one look-up in a table of every contact
//!   assignment, built per call by the classifiers of `mobilis_physics::contacts`; only a
//!   refused assignment asks the classifier again, for its message. Readings are read
//!   straight from the input columns and validated independently (a single sample of more
//!   than 20,000 readings on both threads); an invalid one is marked and dropped, and its
//!   index is kept, so that the call reports the problems in reading order.
//! - Grouping is by sorting those records (by temperature, with a stable sort, so that the
//!   readings of one temperature keep their input order and the result does not depend on
//!   the sorting algorithm; then within a group by |B|, then within a cell by
//!   configuration, field sign and polarity) and walking contiguous slices; nothing is
//!   allocated per reading, per cell, per field setpoint or per row in the statistics
//!   (short lists live on the stack; a setpoint's end is found when it is reached).
//! - A row is drafted as a compact record (`row::RowRecord`: plain values with a presence
//!   mask, the estimates its uncertainties are finished from, the flags as a bit set; no
//!   text or list per row).
//! - A group at one temperature is reduced once. A drifting group is reduced in full
//!   once, with the correction of the last pass that touched it. The passes before only
//!   feed the drift slopes, which read the first row's sheet resistance and sheet Hall
//!   coefficient: there the group is drafted (`cells::Detail::Values`), by the same code
//!   as the full row without what the slopes do not read (standard errors, noise
//!   evidence, flags, quality numbers, the rows of the other field setpoints), so the
//!   values are the same to the bit. The corrected copies of a group's readings live in a
//!   buffer reused from group to group.
//! - The result is columnar (`table`): every output column is one buffer sized once for all
//!   rows (values, and validity words of 64 rows: `mobilis_sdk::sdk::FloatColumn`). The
//!   rows are finished (the uncertainty budgets, with the noise scales and systematic
//!   factors shared by a row or a sample computed once) by tasks of 2,048 rows in
//!   parallel, a block of 64 rows at a time written column by column: each column's
//!   stretch contiguously and its validity as one word, so no two tasks share a word. The
//!   table glue moves the buffers into the output table, with the words as the Arrow
//!   validity bitmap; the text columns (sample, geometry, carrier type, flags) are built
//!   from their runs, each run's text stored once; the columns are independent, so a large
//!   table builds them (and clears the float buffers first) in parallel.
//!   [`reduce`] and [`reduce_columns`] turn the same columns into [`ReducedRow`]s.
//! - Van der Pauw's equation is solved once per row, by Newton's iteration from a start
//!   that is exact for a symmetric sample (five or six steps for ordinary ratios); the
//!   factor f and the gradient are derived from that solution and its terms.
//! - Two uncertainties in quadrature are sqrt(x^2 + y^2) where the squares cannot overflow
//!   or underflow, `hypot` outside that range (`cells::quadrature_sum`): within a unit in
//!   the last place of `hypot` at a fraction of its cost.
//! - Warnings are formatted only for the rows that raise them.
//!
//! Every result is the same as the straightforward version to the last bit or two: the
//! arithmetic and its order are unchanged, apart from the van der Pauw solution and the
//! quadrature sums, each within a few units in the last place (largest relative change of
//! the benchmark's output 5.6e-16).

mod cells;
mod contract;
#[cfg(test)]
mod coverage_tests;
pub mod error;
pub mod flags;
mod row;
mod table;
#[cfg(test)]
mod tests;

use std::borrow::Cow;
use std::collections::HashMap;
use std::ops::Range;
use std::sync::atomic::{AtomicBool, Ordering};

use mobilis_physics::contacts::{classify_hall_bar, classify_van_der_pauw, Classified, Configuration, ContactError};
use mobilis_physics::readings::RawReading;

use cells::{
    cell_key, gap_clusters, runs_by_key, setpoint_end, summarize_cell, summarize_cell_values, CellSummary, Detail,
    NoiseEvidence, Prepared, MAX_SLOTS,
};
pub use contract::{
    calibration_names, float_column, Calibration, CalibrationUsed, Geometry, QualityThresholds, ReduceSettings,
    ReducedRow, Reduction, SampleInfo,
};
pub use error::{ReadingProblem, ReduceError, LARGEST_READING_MAGNITUDE, SMALLEST_CURRENT_A};
pub use row::FlagSet;
use row::{
    build_row, draft_row, DriftSlopes, FieldCells, ReadingTemperatures, ResolvedCalibration, ResolvedSample, RowDraft,
    RowRecord, SlotsSeen, TemperatureGroup, UncorrectedDrift, ZeroFieldCells,
};
use table::SampleReduction;
pub use table::{FloatColumn, ReductionTable};

/// How many skipped readings, and separately how many rows, get a warning of their own
/// before the rest are summarized in one line.
pub const DETAILED_WARNINGS: usize = 20;

/// How many invalid readings the error of a call without a valid one names, with reasons.
const FIRST_PROBLEMS_IN_ERROR: usize = 3;

/// A contact number that was not given: an empty cell of a contact column (`i_in`,
/// `i_out`, `v_pos`, `v_neg`). The reading is invalid and says which cell is empty.
pub const EMPTY_CONTACT: i64 = i64::MIN;

/// The four contact numbers of a reading whose `contacts` cell (pair notation) is empty.
pub const EMPTY_CONTACTS_CELL: i64 = i64::MIN + 1;

/// The values assumed when a calibration is not stated (common practice, shared by every
/// analysis that applies calibrations).
pub use mobilis_physics::calibration::{
    DEFAULT_CURRENT_CALIBRATION_REL, DEFAULT_FIELD_CALIBRATION_REL, DEFAULT_TEMPERATURE_ACCURACY_K,
    DEFAULT_VOLTAGE_CALIBRATION_REL,
};

/// The readings as borrowed columns, one entry per reading, so that a table can be reduced
/// without building a [`RawReading`] (and its `String`) per row.
#[derive(Debug, Clone, Copy)]
pub struct ReadingColumns<'a> {
    /// The sample column, run-length encoded: the runs cover the readings in order.
    pub sample_runs: &'a [SampleRun<'a>],
    pub temperature_k: &'a [f64],
    pub field_t: &'a [f64],
    pub i_in: &'a [i64],
    pub i_out: &'a [i64],
    pub v_pos: &'a [i64],
    pub v_neg: &'a [i64],
    pub current_a: &'a [f64],
    pub voltage_v: &'a [f64],
}

/// Consecutive readings of one sample: the sample column, run-length encoded. An export
/// lists a sample's readings together, so a million readings are typically a hundred runs,
/// and names are compared and interned once per run rather than once per reading.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct SampleRun<'a> {
    pub name: &'a str,
    /// How many consecutive readings belong to `name`.
    pub length: usize,
}

/// The runs of a sample column given as one name per reading.
pub fn sample_runs<'a>(names: impl IntoIterator<Item = &'a str>) -> Vec<SampleRun<'a>> {
    let mut runs: Vec<SampleRun<'a>> = Vec::new();
    for name in names {
        match runs.last_mut() {
            Some(run) if run.name == name => run.length += 1,
            _ => runs.push(SampleRun { name, length: 1 }),
        }
    }
    runs
}

/// Reduces readings given as [`RawReading`]s. `samples` is the sample sheet; without one every
/// sample is a 2D van der Pauw sample with Hall factor 1.
pub fn reduce(
    readings: &[RawReading],
    samples: Option<&[SampleInfo]>,
    settings: &ReduceSettings,
) -> Result<Reduction, ReduceError> {
    reduce_source(&readings, samples, settings).map(ReductionTable::into_reduction)
}

/// Reduces readings given as columns; see [`reduce`].
pub fn reduce_columns(
    columns: &ReadingColumns<'_>,
    samples: Option<&[SampleInfo]>,
    settings: &ReduceSettings,
) -> Result<Reduction, ReduceError> {
    reduce_to_table(columns, samples, settings).map(ReductionTable::into_reduction)
}

/// Reduces readings given as columns into output columns: the same result as
/// [`reduce_columns`], without a record per row.
pub fn reduce_to_table(
    columns: &ReadingColumns<'_>,
    samples: Option<&[SampleInfo]>,
    settings: &ReduceSettings,
) -> Result<ReductionTable, ReduceError> {
    let expected = columns.sample_runs.iter().map(|run| run.length).sum();
    let lengths = [
        ("temperature_K", columns.temperature_k.len()),
        ("field_T", columns.field_t.len()),
        ("i_in", columns.i_in.len()),
        ("i_out", columns.i_out.len()),
        ("v_pos", columns.v_pos.len()),
        ("v_neg", columns.v_neg.len()),
        ("current_A", columns.current_a.len()),
        ("voltage_V", columns.voltage_v.len()),
    ];
    for (column, length) in lengths {
        if length != expected {
            return Err(ReduceError::ColumnLengthMismatch {
                column,
                length,
                expected,
            });
        }
    }
    reduce_source(columns, samples, settings)
}

/// One reading, borrowed from either input form.
#[derive(Clone, Copy)]
struct ReadingView {
    temperature_k: f64,
    field_t: f64,
    i_in: i64,
    i_out: i64,
    v_pos: i64,
    v_neg: i64,
    current_a: f64,
    voltage_v: f64,
}

trait ReadingSource: Sync {
    fn reading_count(&self) -> usize;
    fn reading(&self, index: usize) -> ReadingView;
    /// The readings of `range`, in order.
    fn readings(&self, range: Range<usize>) -> impl Iterator<Item = ReadingView> + '_ {
        range.map(|index| self.reading(index))
    }
    /// The sample column as runs covering the readings in order.
    fn sample_runs(&self) -> Cow<'_, [SampleRun<'_>]>;
    /// Appends the readings of `range` to `buffer`, each as [`prepare_valid`] gives it with
    /// `table` or, where that declines, as `otherwise` gives it.
    fn extend_prepared(
        &self,
        range: Range<usize>,
        sample_rank: u32,
        table: &[u8; 4096],
        otherwise: impl Fn(&ReadingView) -> Prepared,
        buffer: &mut Vec<Prepared>,
    ) {
        buffer.extend(
            self.readings(range)
                .map(|view| prepare_valid(&view, sample_rank, table).unwrap_or_else(|| otherwise(&view))),
        );
    }
}

impl ReadingSource for &[RawReading] {
    fn reading_count(&self) -> usize {
        self.len()
    }

    fn sample_runs(&self) -> Cow<'_, [SampleRun<'_>]> {
        Cow::Owned(sample_runs(self.iter().map(|reading| reading.sample.as_str())))
    }

    #[inline]
    fn reading(&self, index: usize) -> ReadingView {
        let reading = &self[index];
        ReadingView {
            temperature_k: reading.temperature_k,
            field_t: reading.field_t,
            i_in: reading.i_in,
            i_out: reading.i_out,
            v_pos: reading.v_pos,
            v_neg: reading.v_neg,
            current_a: reading.current_a,
            voltage_v: reading.voltage_v,
        }
    }
}

impl ReadingSource for ReadingColumns<'_> {
    fn reading_count(&self) -> usize {
        self.temperature_k.len()
    }

    /// The columns are sliced to `range` once and walked together, so that a reading is
    /// eight loads without a bounds check and the iterator's length is known in advance.
    fn readings(&self, range: Range<usize>) -> impl Iterator<Item = ReadingView> + '_ {
        let temperature_k = &self.temperature_k[range.clone()];
        let field_t = &self.field_t[range.clone()];
        let i_in = &self.i_in[range.clone()];
        let i_out = &self.i_out[range.clone()];
        let v_pos = &self.v_pos[range.clone()];
        let v_neg = &self.v_neg[range.clone()];
        let current_a = &self.current_a[range.clone()];
        let voltage_v = &self.voltage_v[range];
        temperature_k
            .iter()
            .zip(field_t)
            .zip(i_in)
            .zip(i_out)
            .zip(v_pos)
            .zip(v_neg)
            .zip(current_a)
            .zip(voltage_v)
            .map(
                |(((((((&temperature_k, &field_t), &i_in), &i_out), &v_pos), &v_neg), &current_a), &voltage_v)| {
                    ReadingView {
                        temperature_k,
                        field_t,
                        i_in,
                        i_out,
                        v_pos,
                        v_neg,
                        current_a,
                        voltage_v,
                    }
                },
            )
    }

    fn sample_runs(&self) -> Cow<'_, [SampleRun<'_>]> {
        Cow::Borrowed(self.sample_runs)
    }

    /// Column by column, a block at a time: first each reading's contact-table entry from
    /// the four contact columns, then the checks and the canonical reading from the four
    /// value columns. Walking all eight columns in one loop kept more pointers than there
    /// are registers, and the loop reloaded them from the stack for every reading. The
    /// readings and their checks are those of [`prepare_valid`], so the results are too.
    fn extend_prepared(
        &self,
        range: Range<usize>,
        sample_rank: u32,
        table: &[u8; 4096],
        otherwise: impl Fn(&ReadingView) -> Prepared,
        buffer: &mut Vec<Prepared>,
    ) {
        const BLOCK: usize = 256;
        let mut entries = [ContactTables::INVALID; BLOCK];
        let mut start = range.start;
        while start < range.end {
            let end = range.end.min(start + BLOCK);
            let block = start..end;
            let contacts = self.i_in[block.clone()]
                .iter()
                .zip(&self.i_out[block.clone()])
                .zip(&self.v_pos[block.clone()])
                .zip(&self.v_neg[block.clone()]);
            for (entry, (((&i_in, &i_out), &v_pos), &v_neg)) in entries.iter_mut().zip(contacts) {
                *entry = ContactTables::index(i_in, i_out, v_pos, v_neg)
                    .map_or(ContactTables::INVALID, |index| table[index]);
            }
            let values = self.temperature_k[block.clone()]
                .iter()
                .zip(&self.field_t[block.clone()])
                .zip(&self.current_a[block.clone()])
                .zip(&self.voltage_v[block.clone()]);
            buffer.extend(values.zip(&entries).enumerate().map(
                |(offset, ((((&temperature_k, &field_t), &current_a), &voltage_v), &entry))| {
                    canonical_reading(temperature_k, field_t, current_a, voltage_v, entry, sample_rank)
                        .unwrap_or_else(|| otherwise(&self.reading(start + offset)))
                },
            ));
            start = end;
        }
    }

    #[inline]
    fn reading(&self, index: usize) -> ReadingView {
        ReadingView {
            temperature_k: self.temperature_k[index],
            field_t: self.field_t[index],
            i_in: self.i_in[index],
            i_out: self.i_out[index],
            v_pos: self.v_pos[index],
            v_neg: self.v_neg[index],
            current_a: self.current_a[index],
            voltage_v: self.voltage_v[index],
        }
    }
}

fn reduce_source<S: ReadingSource>(
    source: &S,
    samples: Option<&[SampleInfo]>,
    settings: &ReduceSettings,
) -> Result<ReductionTable, ReduceError> {
    settings.validate()?;
    let total = source.reading_count();
    let mut warnings = Vec::new();

    // Intern sample names, once per run; rank them so that rows come out sorted by name.
    let runs = source.sample_runs();
    let mut ids: HashMap<&str, u32> = HashMap::new();
    let mut names: Vec<&str> = Vec::new();
    let run_ids: Vec<u32> = runs
        .iter()
        .map(|run| {
            *ids.entry(run.name).or_insert_with(|| {
                names.push(run.name);
                (names.len() - 1) as u32
            })
        })
        .collect();
    let mut order: Vec<u32> = (0..names.len() as u32).collect();
    order.sort_unstable_by(|a, b| names[*a as usize].cmp(names[*b as usize]));
    let mut rank_of_id = vec![0u32; names.len()];
    for (rank, id) in order.iter().enumerate() {
        rank_of_id[*id as usize] = rank as u32;
    }
    let sorted_names: Vec<&str> = order.iter().map(|id| names[*id as usize]).collect();
    let resolved = resolve_samples(&sorted_names, samples, &settings.calibration, &mut warnings)?;
    // Each sample's readings: index ranges in reading order.
    let mut ranges_of_rank: Vec<Vec<Range<usize>>> = vec![Vec::new(); names.len()];
    let mut start = 0usize;
    for (run, id) in runs.iter().zip(&run_ids) {
        if run.length > 0 {
            ranges_of_rank[rank_of_id[*id as usize] as usize].push(start..start + run.length);
        }
        start += run.length;
    }
    drop(run_ids);

    // Samples are independent: each is validated, sorted and reduced on its own (in
    // parallel where there are several), in a buffer reused from sample to sample, and the
    // results are joined in sample order, so that rows, warnings and calibrations come out
    // exactly as a sequential pass would give them.
    let contact_tables = ContactTables::new();
    let parallel = total >= PARALLEL_READINGS;
    let refused = AtomicBool::new(false);
    let reduce_one = |buffer: &mut Vec<Prepared>, rank: usize| -> SampleOutcome {
        let sample = &resolved[rank];
        let ranges = &ranges_of_rank[rank];
        let invalid = prepare_sample(
            source,
            ranges,
            rank as u32,
            sample.geometry,
            &contact_tables,
            parallel,
            buffer,
        );
        if !invalid.is_empty() && !settings.skip_invalid_readings {
            refused.store(true, Ordering::Relaxed);
        }
        if buffer.is_empty() || refused.load(Ordering::Relaxed) {
            return SampleOutcome {
                reduction: None,
                invalid,
            };
        }
        // Ties keep reading order, so the result does not depend on the sorting algorithm.
        // An export ordered by temperature is checked and left as it is.
        if !buffer.is_sorted_by(|a, b| a.temperature_k <= b.temperature_k) {
            buffer.sort_by(|a, b| a.temperature_k.total_cmp(&b.temperature_k));
        }
        SampleOutcome {
            reduction: Some(reduce_sample(buffer, sample, settings)),
            invalid,
        }
    };
    let outcomes: Vec<SampleOutcome> = if parallel && resolved.len() > 1 {
        use rayon::prelude::*;
        (0..resolved.len())
            .into_par_iter()
            .map_init(Vec::new, reduce_one)
            .collect()
    } else {
        let mut buffer = Vec::new();
        (0..resolved.len()).map(|rank| reduce_one(&mut buffer, rank)).collect()
    };

    // Invalid readings are reported in reading order: the first as the error, or, when
    // they are skipped, the first few as warnings.
    let mut invalid: Vec<(usize, u32)> = outcomes
        .iter()
        .flat_map(|outcome| outcome.invalid.iter().copied())
        .collect();
    invalid.sort_unstable();
    let problem_at = |index: usize, rank: u32| {
        let geometry = resolved[rank as usize].geometry;
        prepare(&source.reading(index), rank, geometry, &contact_tables).expect_err("a marked reading is invalid")
    };
    if let Some(&(index, rank)) = invalid.first() {
        if !settings.skip_invalid_readings {
            return Err(ReduceError::InvalidReading {
                row: index,
                sample: resolved[rank as usize].name.to_owned(),
                problem: problem_at(index, rank),
            });
        }
    }
    let skipped = invalid.len();
    let mut warnings_of_skipped = Vec::new();
    for &(index, rank) in invalid.iter().take(DETAILED_WARNINGS) {
        let sample = resolved[rank as usize].name;
        let problem = problem_at(index, rank);
        warnings_of_skipped.push(format!(
            "reading in {}, sample {sample:?}, skipped: {problem}",
            mobilis_sdk::sdk::data_row(index)
        ));
    }
    if skipped > DETAILED_WARNINGS {
        warnings_of_skipped.push(format!(
            "{} further invalid readings skipped ({skipped} in all)",
            skipped - DETAILED_WARNINGS
        ));
    }
    let mut reduced: Vec<SampleReduction> = outcomes.into_iter().filter_map(|outcome| outcome.reduction).collect();
    if reduced.is_empty() {
        // A refused call returns no warnings: the error carries the first reasons itself.
        let first_problems = warnings_of_skipped.into_iter().take(FIRST_PROBLEMS_IN_ERROR).collect();
        return Err(ReduceError::NoValidReadings {
            total,
            skipped,
            first_problems,
        });
    }
    warnings.extend(warnings_of_skipped);
    let table::BuiltColumns {
        height,
        floats,
        reading_count,
        drift_corrected,
        carrier,
        flags,
    } = table::build_columns(&reduced, |index| resolved[reduced_rank(&reduced, index)].hall_factor);
    // Nulls are stored as 0 and do not raise it.
    let largest_field_t = floats[contract::float_column::FIELD_T]
        .values()
        .iter()
        .fold(0.0_f64, |largest, field| largest.max(field.abs()));
    warnings.extend(mobilis_physics::units::implausible_field_warning(
        "field_T",
        largest_field_t,
    ));
    let mut row_warnings = Vec::new();
    let mut calibrations = Vec::with_capacity(reduced.len());
    let mut sample_list = Vec::with_capacity(reduced.len());
    for sample in &mut reduced {
        let resolved_sample = &resolved[sample.rank as usize];
        sample_list.push((
            resolved_sample.name.to_owned(),
            resolved_sample.geometry.name(),
            sample.records.len(),
        ));
        // The records are finished: give their memory back before the next sample's.
        sample.records = Vec::new();
        row_warnings.append(&mut sample.row_warnings);
        warnings.append(&mut sample.warnings);
    }
    for sample in reduced {
        calibrations.push(sample.calibration);
    }
    let mut not_stated: Vec<(&'static str, usize)> = Vec::new();
    for used in &calibrations {
        for name in &used.not_stated {
            match not_stated.iter_mut().find(|(known, _)| known == name) {
                Some((_, count)) => *count += 1,
                None => not_stated.push((name, 1)),
            }
        }
    }
    if !not_stated.is_empty() {
        let listed: Vec<String> = not_stated
            .iter()
            .map(|(name, count)| {
                format!(
                    "{name} (assumed {}; {count} of {} samples)",
                    assumed_value(name),
                    calibrations.len()
                )
            })
            .collect();
        warnings.push(format!(
            "calibrations not stated: {}; the *_unc_sys columns rest on these assumptions (common practice); state them as parameters or sample-sheet columns",
            listed.join(", ")
        ));
    }
    let row_warning_count = row_warnings.len();
    warnings.extend(row_warnings.into_iter().take(DETAILED_WARNINGS));
    if row_warning_count > DETAILED_WARNINGS {
        warnings.push(format!(
            "{} further row warnings not listed; the flags column marks every affected row",
            row_warning_count - DETAILED_WARNINGS
        ));
    }
    Ok(ReductionTable {
        height,
        samples: sample_list,
        floats,
        reading_count,
        drift_corrected,
        carrier,
        flags,
        warnings,
        skipped_readings: skipped,
        calibrations,
    })
}

/// What the pass over one sample gives: its reduction (none when it has no valid reading,
/// or when an invalid reading stops the call), and its invalid readings as (index, rank).
struct SampleOutcome {
    reduction: Option<SampleReduction>,
    invalid: Vec<(usize, u32)>,
}

/// Validates and canonicalizes the readings of one sample (`ranges` of reading indices, in
/// reading order) into `buffer`, which is cleared first. A long range of a large call is
/// prepared in parallel, each thread writing its stretch of the buffer. Returns the invalid
/// readings as (index, rank); they are not in the buffer.
fn prepare_sample<S: ReadingSource>(
    source: &S,
    ranges: &[Range<usize>],
    rank: u32,
    geometry: Geometry,
    tables: &ContactTables,
    parallel: bool,
    buffer: &mut Vec<Prepared>,
) -> Vec<(usize, u32)> {
    let table = tables.of(geometry);
    // A reading the table's quick checks decline: valid after all (contacts outside the
    // table), or marked invalid for its reason to be asked again.
    let checked = |view: &ReadingView| prepare(view, rank, geometry, tables).unwrap_or(Prepared::INVALID);
    let mark = |view: &ReadingView| prepare_valid(view, rank, table).unwrap_or_else(|| checked(view));
    buffer.clear();
    buffer.reserve(ranges.iter().map(|range| range.len()).sum());
    for range in ranges {
        if parallel && range.len() >= PARALLEL_READINGS {
            use rayon::prelude::*;
            buffer.par_extend(range.clone().into_par_iter().map(|index| mark(&source.reading(index))));
        } else {
            source.extend_prepared(range.clone(), rank, table, checked, buffer);
        }
    }
    if !buffer.iter().any(Prepared::is_invalid) {
        return Vec::new();
    }
    let mut invalid = Vec::new();
    let mut kept = 0usize;
    let indices = ranges.iter().flat_map(|range| range.clone());
    for (position, index) in indices.enumerate() {
        if buffer[position].is_invalid() {
            invalid.push((index, rank));
        } else {
            buffer[kept] = buffer[position];
            kept += 1;
        }
    }
    buffer.truncate(kept);
    invalid
}

/// The rank of the sample whose reduction is `index`.
fn reduced_rank(reduced: &[SampleReduction], index: usize) -> usize {
    reduced[index].rank as usize
}

impl ReductionTable {
    /// The result as rows.
    fn into_reduction(self) -> Reduction {
        let warnings = self.warnings.clone();
        let skipped_readings = self.skipped_readings;
        let calibrations = self.calibrations.clone();
        Reduction {
            rows: self.into_rows(),
            warnings,
            skipped_readings,
            calibrations,
        }
    }
}

/// Below this many readings the samples are reduced one after the other: spreading a small
/// call over threads costs more than it saves.
const PARALLEL_READINGS: usize = 20_000;

/// Reduces the readings of one sample, sorted by temperature: every temperature group, the
/// drift corrections, the pooled noise and the rows' uncertainties.
fn reduce_sample(
    sample_readings: &mut [Prepared],
    sample: &ResolvedSample<'_>,
    settings: &ReduceSettings,
) -> SampleReduction {
    let temperature_ranges = gap_clusters(
        sample_readings.iter().map(|reading| reading.temperature_k),
        settings.temperature_tolerance_k,
    );
    let group_count = temperature_ranges.len();
    // Which configurations the series has at all, so that a row's warning about a missing
    // one can tell a reading never taken from one grouped into another row.
    let seen = sample_readings.iter().fold(SlotsSeen::default(), |seen, reading| {
        let bit = 1u8 << reading.slot;
        let in_field = reading.field_t.abs() > settings.zero_field_tolerance_t;
        SlotsSeen {
            any: seen.any | bit,
            plus_field: seen.plus_field | if in_field && reading.field_t > 0.0 { bit } else { 0 },
            minus_field: seen.minus_field | if in_field && reading.field_t < 0.0 { bit } else { 0 },
        }
    });
    // A group's rows are final only after the last pass that touches it, and until then
    // the drift slopes read only its first row's sheet resistance and sheet Hall
    // coefficient. So a group whose readings drift is first drafted (`Detail::Values`) in
    // every pass, and reduced in full once, at the end, with its last correction; a group
    // at one temperature is never corrected and is reduced in full in the first pass.
    //
    // First pass: every group as measured. It sorts each group's readings in place, as
    // every later pass and the final reduction of a corrected group start from that order;
    // a drifting group's readings are kept as they came for its final reduction, should it
    // stay as measured.
    let mut largest_zero_field_t = 0.0_f64;
    // The drafts of the drifting groups only: a steady group's draft is its first row's,
    // read from the finished rows once a drifting group calls for slopes at all.
    let mut drifting_drafts: Vec<Option<RowDraft>> = Vec::with_capacity(group_count);
    let mut drifted: Vec<bool> = Vec::with_capacity(group_count);
    let mut as_measured: Vec<Prepared> = Vec::new();
    let mut final_rows: Vec<RowRecord> = Vec::with_capacity(group_count);
    let mut final_bounds: Vec<std::ops::Range<usize>> = Vec::with_capacity(group_count);
    let mut final_warnings: Vec<Vec<String>> = Vec::with_capacity(group_count);
    for temperature_range in &temperature_ranges {
        let readings = &mut sample_readings[temperature_range.clone()];
        let drifts = readings
            .iter()
            .any(|reading| reading.temperature_k != readings[0].temperature_k);
        drifted.push(drifts);
        let mut warnings_of_group = Vec::new();
        let start = final_rows.len();
        let largest = if drifts {
            as_measured.extend_from_slice(readings);
            let (draft, largest) = draft_temperature_group(readings, sample, seen, settings, None);
            drifting_drafts.push(Some(draft));
            largest
        } else {
            let largest = reduce_temperature_group(
                readings,
                sample,
                seen,
                settings,
                GroupDrift::default(),
                &mut final_rows,
                &mut warnings_of_group,
            );
            drifting_drafts.push(None);
            largest
        };
        final_bounds.push(start..final_rows.len());
        final_warnings.push(warnings_of_group);
        largest_zero_field_t = largest_zero_field_t.max(largest);
    }
    if !drifted.iter().any(|drifts| *drifts) {
        // A series at steady temperatures: the first pass's rows are the sample's rows as
        // they stand, and no slope is needed.
        let row_warnings = final_warnings.into_iter().flatten().collect();
        return finish_sample(
            sample,
            sample_readings,
            final_rows,
            row_warnings,
            largest_zero_field_t,
            settings,
            None,
        );
    }
    let mut drafts: Vec<RowDraft> = drifting_drafts
        .into_iter()
        .zip(&final_bounds)
        .map(|(draft, bounds)| draft.unwrap_or_else(|| final_rows[bounds.start].draft()))
        .collect();
    // Further passes for the groups whose readings drifted: each reading brought to the
    // group's mean temperature with the series' own slopes, taken from the previous
    // pass (whose values the drift biased a little; a second correction removes what
    // the first left). The slopes a group is finally corrected with are those of the last
    // pass that corrected it; a pass before the last drafts the corrected group for the
    // next pass's slopes. The corrected copy of a group's readings lives in a buffer
    // reused from group to group.
    let mut corrections: Vec<Option<DriftSlopes>> = vec![None; group_count];
    // The largest change a refused correction would have made to a reading, per group.
    let mut refused_corrections: Vec<f64> = vec![0.0; group_count];
    let mut corrected: Vec<Prepared> = Vec::new();
    let mut slopes: Vec<Option<DriftSlopes>> = Vec::new();
    for pass in 0..DRIFT_CORRECTION_PASSES {
        slopes = drift_slopes(&drafts);
        let mut any = false;
        for (index, temperature_range) in temperature_ranges.iter().enumerate() {
            let Some(group_slopes) = slopes[index].filter(|_| drifted[index]) else {
                continue;
            };
            let readings = &sample_readings[temperature_range.clone()];
            let largest = largest_drift_correction(readings, group_slopes, sample.geometry);
            if largest > LARGEST_DRIFT_CORRECTION {
                // Beyond first order (a Hall coefficient crossing zero, a transition, a
                // steep freeze-out): the group stays as measured, with its readings' spread
                // in u(T) and their temperature offsets in its quantities' uncertainties.
                refused_corrections[index] = refused_corrections[index].max(largest);
                continue;
            }
            any = true;
            corrections[index] = Some(group_slopes);
            if pass + 1 < DRIFT_CORRECTION_PASSES {
                corrected.clear();
                corrected.extend_from_slice(readings);
                correct_drift(&mut corrected, group_slopes, sample.geometry);
                drafts[index] = draft_temperature_group(&mut corrected, sample, seen, settings, Some(group_slopes)).0;
            }
        }
        if !any {
            break;
        }
    }
    drop(drafts);
    // A drifting group left as measured takes its own slopes of the last pass into its
    // uncertainties or, without any, the steepest of the series (the conservative choice).
    let steepest_slopes = slopes
        .iter()
        .flatten()
        .fold(None, |steepest: Option<DriftSlopes>, group| {
            let steeper = |a: f64, b: f64| if b.abs() > a.abs() { b } else { a };
            Some(match steepest {
                Some(steepest) => DriftSlopes {
                    resistance_per_k: steeper(steepest.resistance_per_k, group.resistance_per_k),
                    hall_per_k: steeper(steepest.hall_per_k, group.hall_per_k),
                },
                None => *group,
            })
        });
    // The rows, group after group: a drifting group reduced in full once, corrected with its
    // last slopes or as measured. Without one (a series at steady temperatures), the first
    // pass's rows are the sample's rows as they stand.
    let mut records: Vec<RowRecord> = Vec::with_capacity(final_rows.len() + group_count);
    let mut row_warnings: Vec<String> = Vec::new();
    {
        let mut as_measured_start = 0usize;
        for (index, temperature_range) in temperature_ranges.iter().enumerate() {
            if !drifted[index] {
                records.extend_from_slice(&final_rows[final_bounds[index].clone()]);
                row_warnings.append(&mut final_warnings[index]);
                continue;
            }
            let readings = match corrections[index] {
                Some(group_slopes) => {
                    corrected.clear();
                    corrected.extend_from_slice(&sample_readings[temperature_range.clone()]);
                    correct_drift(&mut corrected, group_slopes, sample.geometry);
                    &mut corrected[..]
                }
                None => &mut as_measured[as_measured_start..as_measured_start + temperature_range.len()],
            };
            as_measured_start += temperature_range.len();
            let uncorrected_drift = corrections[index].is_none().then(|| match slopes[index] {
                Some(own) => UncorrectedDrift {
                    slopes: Some(own),
                    borrowed: false,
                },
                None => UncorrectedDrift {
                    slopes: steepest_slopes,
                    borrowed: true,
                },
            });
            reduce_temperature_group(
                readings,
                sample,
                seen,
                settings,
                GroupDrift {
                    correction: corrections[index],
                    uncorrected: uncorrected_drift,
                },
                &mut records,
                &mut row_warnings,
            );
        }
    }
    let uncorrected_warning = uncorrected_drift_warning(
        sample.name,
        &records,
        &refused_corrections,
        &slopes,
        &drifted,
        &corrections,
        steepest_slopes.is_some(),
    );
    finish_sample(
        sample,
        sample_readings,
        records,
        row_warnings,
        largest_zero_field_t,
        settings,
        uncorrected_warning,
    )
}

/// A sample's reduction from its rows: its own warnings (a remanent field taken as zero,
/// drifting groups left as measured) and the voltage noise pooled over its series.
fn finish_sample(
    sample: &ResolvedSample<'_>,
    sample_readings: &[Prepared],
    records: Vec<RowRecord>,
    row_warnings: Vec<String>,
    largest_zero_field_t: f64,
    settings: &ReduceSettings,
    uncorrected_drift_warning: Option<String>,
) -> SampleReduction {
    let mut warnings: Vec<String> = (largest_zero_field_t > STRICT_ZERO_FIELD_T)
        .then(|| {
            format!(
                "sample {:?}: readings with |B| up to {:.4} T were taken as zero field (zero_field_tolerance_T = {} T), a remanent field at a nominal zero; if they were meant as a Hall field, lower zero_field_tolerance_T",
                sample.name, largest_zero_field_t, settings.zero_field_tolerance_t
            )
        })
        .into_iter()
        .collect();
    warnings.extend(uncorrected_drift_warning);
    // The sample's voltage noise pooled over every row of its series (JCGM 100:2008,
    // 4.2.8): one voltmeter, so one noise, for the rows with too little evidence of
    // their own.
    let mut evidence = NoiseEvidence::default();
    for record in &records {
        evidence.add(record.evidence);
    }
    let reading_noise_v = evidence.pooled_noise_v();
    SampleReduction {
        rank: sample_readings[0].sample_rank,
        records,
        series_evidence: evidence,
        calibration_resolved: sample.calibration,
        row_warnings,
        warnings,
        calibration: CalibrationUsed {
            sample: sample.name.to_owned(),
            thickness_rel: sample.calibration.thickness_rel,
            field_rel: sample.calibration.field_rel,
            current_rel: sample.calibration.current_rel,
            voltage_rel: sample.calibration.voltage_rel,
            temperature_accuracy_k: sample.calibration.temperature_accuracy_k,
            not_stated: sample.not_stated.clone(),
            reading_noise_v,
        },
    }
}

/// Checks the sheet and returns one resolved sample per name, in the order of `names`.
fn resolve_samples<'a>(
    names: &[&'a str],
    samples: Option<&'a [SampleInfo]>,
    call_calibration: &Calibration,
    warnings: &mut Vec<String>,
) -> Result<Vec<ResolvedSample<'a>>, ReduceError> {
    let Some(sheet) = samples else {
        return Ok(names
            .iter()
            .map(|name| {
                let (calibration, not_stated) =
                    resolve_calibration(None, None, &Calibration::default(), call_calibration);
                ResolvedSample {
                    name,
                    thickness_m: None,
                    hall_factor: 1.0,
                    geometry: Geometry::VanDerPauw,
                    calibration,
                    not_stated,
                }
            })
            .collect());
    };
    let mut by_name: HashMap<&str, &SampleInfo> = HashMap::with_capacity(sheet.len());
    for info in sheet {
        validate_sample(info)?;
        if by_name.insert(info.name.as_str(), info).is_some() {
            return Err(ReduceError::DuplicateSample {
                sample: info.name.clone(),
            });
        }
    }
    let missing: Vec<String> = names
        .iter()
        .filter(|name| !by_name.contains_key(*name))
        .map(|name| (*name).to_owned())
        .collect();
    if !missing.is_empty() {
        return Err(ReduceError::SamplesMissingFromSheet { samples: missing });
    }
    if sheet.len() > names.len() {
        let with_readings: std::collections::HashSet<&str> = names.iter().copied().collect();
        let mut unused: Vec<&str> = sheet
            .iter()
            .map(|info| info.name.as_str())
            .filter(|name| !with_readings.contains(name))
            .collect();
        unused.sort_unstable();
        warnings.push(format!("sample sheet rows without readings: {}", unused.join(", ")));
    }
    Ok(names
        .iter()
        .map(|name| {
            let info = by_name[name];
            let thickness_unc_m = info.thickness_m.and(info.thickness_unc_m);
            let (calibration, not_stated) =
                resolve_calibration(info.thickness_m, thickness_unc_m, &info.calibration, call_calibration);
            ResolvedSample {
                name: info.name.as_str(),
                thickness_m: info.thickness_m,
                hall_factor: info.hall_factor,
                geometry: info.geometry,
                calibration,
                not_stated,
            }
        })
        .collect())
}

/// A sheet value, else the call's, else the default (and the name goes on the not-stated
/// list).
fn resolve_calibration(
    thickness_m: Option<f64>,
    thickness_unc_m: Option<f64>,
    sample: &Calibration,
    call: &Calibration,
) -> (ResolvedCalibration, Vec<&'static str>) {
    let mut not_stated = Vec::new();
    let mut pick = |name: &'static str, sheet: Option<f64>, call: Option<f64>, default: f64| {
        sheet.or(call).unwrap_or_else(|| {
            not_stated.push(name);
            default
        })
    };
    let field_rel = pick(
        calibration_names::FIELD,
        sample.field_rel,
        call.field_rel,
        DEFAULT_FIELD_CALIBRATION_REL,
    );
    let current_rel = pick(
        calibration_names::CURRENT,
        sample.current_rel,
        call.current_rel,
        DEFAULT_CURRENT_CALIBRATION_REL,
    );
    let voltage_rel = pick(
        calibration_names::VOLTAGE,
        sample.voltage_rel,
        call.voltage_rel,
        DEFAULT_VOLTAGE_CALIBRATION_REL,
    );
    let temperature_accuracy_k = pick(
        calibration_names::TEMPERATURE,
        sample.temperature_accuracy_k,
        call.temperature_accuracy_k,
        DEFAULT_TEMPERATURE_ACCURACY_K,
    );
    let thickness_rel = match (thickness_m, thickness_unc_m) {
        (Some(thickness), Some(unc)) => unc / thickness,
        (Some(_), None) => {
            not_stated.push(calibration_names::THICKNESS);
            0.0
        }
        (None, _) => 0.0,
    };
    (
        ResolvedCalibration {
            thickness_rel,
            field_rel,
            current_rel,
            voltage_rel,
            temperature_accuracy_k,
        },
        not_stated,
    )
}

/// The value assumed for a calibration that was not stated, for messages.
fn assumed_value(name: &str) -> String {
    match name {
        calibration_names::FIELD => format!("{DEFAULT_FIELD_CALIBRATION_REL}"),
        calibration_names::CURRENT => format!("{DEFAULT_CURRENT_CALIBRATION_REL}"),
        calibration_names::VOLTAGE => format!("{DEFAULT_VOLTAGE_CALIBRATION_REL}"),
        calibration_names::TEMPERATURE => format!("{DEFAULT_TEMPERATURE_ACCURACY_K} K"),
        _ => "0".to_owned(),
    }
}

fn validate_sample(info: &SampleInfo) -> Result<(), ReduceError> {
    let sample = || info.name.clone();
    let calibration_columns = [
        (calibration_names::FIELD, info.calibration.field_rel),
        (calibration_names::CURRENT, info.calibration.current_rel),
        (calibration_names::VOLTAGE, info.calibration.voltage_rel),
        (calibration_names::TEMPERATURE, info.calibration.temperature_accuracy_k),
    ];
    for (column, value) in calibration_columns {
        if let Some(value) = value {
            if !(value >= 0.0 && value.is_finite()) {
                return Err(ReduceError::InvalidSampleCalibration {
                    sample: sample(),
                    column,
                    value,
                });
            }
        }
    }
    if let Some(thickness_m) = info.thickness_m {
        if !(thickness_m > 0.0 && thickness_m.is_finite()) {
            return Err(ReduceError::InvalidThickness {
                sample: sample(),
                thickness_m,
            });
        }
        if let Some(thickness_unc_m) = info.thickness_unc_m {
            if !(thickness_unc_m >= 0.0 && thickness_unc_m.is_finite()) {
                return Err(ReduceError::InvalidThicknessUncertainty {
                    sample: sample(),
                    thickness_unc_m,
                });
            }
        }
    }
    if !(info.hall_factor > 0.0 && info.hall_factor.is_finite()) {
        return Err(ReduceError::InvalidHallFactor {
            sample: sample(),
            hall_factor: info.hall_factor,
        });
    }
    if let Geometry::HallBar { length_m, width_m } = info.geometry {
        let valid = |value: f64| value > 0.0 && value.is_finite();
        if !(valid(length_m) && valid(width_m)) {
            return Err(ReduceError::InvalidHallBarDimensions {
                sample: sample(),
                length_m,
                width_m,
            });
        }
    }
    Ok(())
}

/// The classification of every contact assignment with contacts 1 to 6, per geometry, made
/// once per call by the classifiers of `mobilis_physics::contacts` themselves: a reading then
/// costs one table look-up instead of a search over the configurations. An entry is the
/// slot (bits 0-2), a reversed current (bit 3) and a reversed voltmeter (bit 4), or
/// [`ContactTables::INVALID`], for which the classifier is asked again for its error.
struct ContactTables {
    van_der_pauw: [u8; 4096],
    hall_bar: [u8; 4096],
}

impl ContactTables {
    const INVALID: u8 = 0xFF;

    fn new() -> Self {
        let mut tables = ContactTables {
            van_der_pauw: [Self::INVALID; 4096],
            hall_bar: [Self::INVALID; 4096],
        };
        for i_in in 1..=6 {
            for i_out in 1..=6 {
                for v_pos in 1..=6 {
                    for v_neg in 1..=6 {
                        let index = Self::index(i_in, i_out, v_pos, v_neg).expect("1 to 6");
                        tables.van_der_pauw[index] = Self::entry(
                            classify_van_der_pauw(i_in, i_out, v_pos, v_neg),
                            &Configuration::VAN_DER_PAUW,
                        );
                        tables.hall_bar[index] =
                            Self::entry(classify_hall_bar(i_in, i_out, v_pos, v_neg), &Configuration::HALL_BAR);
                    }
                }
            }
        }
        tables
    }

    #[inline]
    fn index(i_in: i64, i_out: i64, v_pos: i64, v_neg: i64) -> Option<usize> {
        let in_range = |contact: i64| (0..8).contains(&contact);
        (in_range(i_in) && in_range(i_out) && in_range(v_pos) && in_range(v_neg))
            .then_some(((i_in as usize) << 9) | ((i_out as usize) << 6) | ((v_pos as usize) << 3) | v_neg as usize)
    }

    fn entry(classified: Result<Classified, ContactError>, configurations: &[Configuration]) -> u8 {
        let Ok(classified) = classified else {
            return Self::INVALID;
        };
        let slot = configurations
            .iter()
            .position(|configuration| *configuration == classified.configuration)
            .expect("the classifier returns a configuration of its own geometry") as u8;
        slot | (u8::from(classified.current_sign < 0.0) << 3) | (u8::from(classified.voltage_sign < 0.0) << 4)
    }

    /// The table of one geometry.
    #[inline]
    fn of(&self, geometry: Geometry) -> &[u8; 4096] {
        match geometry {
            Geometry::VanDerPauw => &self.van_der_pauw,
            Geometry::HallBar { .. } => &self.hall_bar,
        }
    }

    /// The slot and the current and voltage signs of a reading; `None` when the classifier
    /// refuses the contacts.
    #[inline]
    fn classify(&self, geometry: Geometry, view: &ReadingView) -> Option<(u8, f64, f64)> {
        let index = Self::index(view.i_in, view.i_out, view.v_pos, view.v_neg)?;
        let entry = self.of(geometry)[index];
        let sign = |negative: bool| if negative { -1.0 } else { 1.0 };
        (entry != Self::INVALID).then(|| (entry & 0b111, sign(entry & 0b1000 != 0), sign(entry & 0b1_0000 != 0)))
    }
}

/// A valid reading in canonical orientation, by the checks of [`prepare`] folded into one
/// test and one look-up in its geometry's `table`; `None` for any reading [`prepare`] must
/// look at (to refuse it with its reason, or to classify contacts outside the table).
#[inline]
fn prepare_valid(view: &ReadingView, sample_rank: u32, table: &[u8; 4096]) -> Option<Prepared> {
    let entry = ContactTables::index(view.i_in, view.i_out, view.v_pos, view.v_neg)
        .map_or(ContactTables::INVALID, |index| table[index]);
    canonical_reading(
        view.temperature_k,
        view.field_t,
        view.current_a,
        view.voltage_v,
        entry,
        sample_rank,
    )
}

/// The checks of [`prepare_valid`] on a reading's values, with its contact-table `entry`
/// ([`ContactTables::INVALID`] for contacts outside the table).
#[inline(always)]
fn canonical_reading(
    temperature_k: f64,
    field_t: f64,
    current_a: f64,
    voltage_v: f64,
    entry: u8,
    sample_rank: u32,
) -> Option<Prepared> {
    // Each bound is false for NaN, so the finite tests are folded into them.
    let valid = (temperature_k > 0.0)
        & (temperature_k <= LARGEST_READING_MAGNITUDE)
        & (field_t.abs() <= LARGEST_READING_MAGNITUDE)
        & (current_a.abs() >= SMALLEST_CURRENT_A)
        & (current_a.abs() <= LARGEST_READING_MAGNITUDE)
        & (voltage_v.abs() <= LARGEST_READING_MAGNITUDE)
        & (entry != ContactTables::INVALID);
    if !valid {
        return None;
    }
    // The entry's sign bits (3: current, 4: voltage) moved onto the values' sign bits: the
    // same bits as multiplying by -1.0 or 1.0.
    let flip = |value: f64, bit: u32| f64::from_bits(value.to_bits() ^ ((u64::from(entry) >> bit & 1) << 63));
    Some(Prepared {
        sample_rank,
        slot: entry & 0b111,
        temperature_k,
        field_t,
        current_a: flip(current_a, 3),
        voltage_v: flip(voltage_v, 4),
    })
}

/// Validates one reading and puts it in canonical orientation.
#[inline]
fn prepare(
    view: &ReadingView,
    sample_rank: u32,
    geometry: Geometry,
    tables: &ContactTables,
) -> Result<Prepared, ReadingProblem> {
    if !view.temperature_k.is_finite() {
        return Err(ReadingProblem::NonFiniteTemperature(view.temperature_k));
    }
    if view.temperature_k <= 0.0 {
        return Err(ReadingProblem::NonPositiveTemperature(view.temperature_k));
    }
    if !view.field_t.is_finite() {
        return Err(ReadingProblem::NonFiniteField(view.field_t));
    }
    if !view.current_a.is_finite() {
        return Err(ReadingProblem::NonFiniteCurrent(view.current_a));
    }
    if view.current_a == 0.0 {
        return Err(ReadingProblem::ZeroCurrent);
    }
    if !view.voltage_v.is_finite() {
        return Err(ReadingProblem::NonFiniteVoltage(view.voltage_v));
    }
    let beyond = |column: &'static str, value: f64, unit: &'static str| {
        (value.abs() > LARGEST_READING_MAGNITUDE).then_some(ReadingProblem::BeyondRange { column, value, unit })
    };
    if let Some(problem) = beyond("temperature_K", view.temperature_k, "K")
        .or_else(|| beyond("field_T", view.field_t, "T"))
        .or_else(|| beyond("current_A", view.current_a, "A"))
        .or_else(|| beyond("voltage_V", view.voltage_v, "V"))
    {
        return Err(problem);
    }
    if view.current_a.abs() < SMALLEST_CURRENT_A {
        return Err(ReadingProblem::CurrentTooSmall(view.current_a));
    }
    let contacts = [
        ("i_in", view.i_in),
        ("i_out", view.i_out),
        ("v_pos", view.v_pos),
        ("v_neg", view.v_neg),
    ];
    if contacts.iter().any(|(_, contact)| *contact == EMPTY_CONTACTS_CELL) {
        return Err(ReadingProblem::EmptyContacts(vec!["contacts"]));
    }
    let empty: Vec<&'static str> = contacts
        .iter()
        .filter(|(_, contact)| *contact == EMPTY_CONTACT)
        .map(|(name, _)| *name)
        .collect();
    if !empty.is_empty() {
        return Err(ReadingProblem::EmptyContacts(empty));
    }
    if let Some((slot, current_sign, voltage_sign)) = tables.classify(geometry, view) {
        return Ok(Prepared {
            sample_rank,
            slot,
            temperature_k: view.temperature_k,
            field_t: view.field_t,
            current_a: current_sign * view.current_a,
            voltage_v: voltage_sign * view.voltage_v,
        });
    }
    // Refused contacts: the classifier says why.
    let (classified, configurations) = match geometry {
        Geometry::VanDerPauw => (
            classify_van_der_pauw(view.i_in, view.i_out, view.v_pos, view.v_neg),
            &Configuration::VAN_DER_PAUW[..],
        ),
        Geometry::HallBar { .. } => (
            classify_hall_bar(view.i_in, view.i_out, view.v_pos, view.v_neg),
            &Configuration::HALL_BAR[..],
        ),
    };
    let classified = classified.map_err(|error| ReadingProblem::Contacts {
        error,
        geometry: geometry.name(),
    })?;
    let slot = configurations
        .iter()
        .position(|configuration| *configuration == classified.configuration)
        .expect("the classifier returns a configuration of its own geometry") as u8;
    Ok(Prepared {
        sample_rank,
        slot,
        temperature_k: view.temperature_k,
        field_t: view.field_t,
        current_a: classified.current_sign * view.current_a,
        voltage_v: classified.voltage_sign * view.voltage_v,
    })
}

/// How many times the readings of a drifting series are brought to their groups' mean
/// temperatures, each time with the slopes of the previous pass.
const DRIFT_CORRECTION_PASSES: usize = 2;

/// The slopes of each temperature group from the previous pass over the series: the
/// derivative of the parabola in 1/T through ln R_s (or ln |R_Hs|) of the group and of its
/// two nearest groups that have one (a neighbour on each side, or the two next ones at an
/// end). In 1/T a thermally activated density is a straight line, which the parabola follows
/// exactly; a power law in T is followed to second order. `None` for a group without a resistance slope, or without a
/// Hall slope when it has Hall quantities, and for a series of one temperature.
fn drift_slopes(first_rows: &[RowDraft]) -> Vec<Option<DriftSlopes>> {
    let points = |value: fn(&RowDraft) -> Option<f64>| -> Vec<Option<(f64, f64)>> {
        first_rows
            .iter()
            .map(|row| {
                let value = value(row)?.abs();
                (value > 0.0 && value.is_finite()).then(|| (1.0 / row.temperature_k, value.ln()))
            })
            .collect()
    };
    let resistance = points(|row| row.sheet_resistance);
    let hall = points(|row| row.sheet_hall_coefficient);
    let slope_at = |series: &[Option<(f64, f64)>], index: usize| -> Option<f64> {
        let centre = series[index]?;
        let mut before = series[..index].iter().rev().flatten();
        let mut after = series[index + 1..].iter().flatten();
        // The two nearest neighbours, one on each side where there is one, so that the
        // derivative of the parabola through the three points is second-order accurate.
        let (first, second) = match (before.next(), after.next()) {
            (Some(low), Some(high)) => (*low, *high),
            (Some(low), None) => (*low, *before.next()?),
            (None, Some(high)) => (*high, *after.next()?),
            (None, None) => return None,
        };
        // In x = 1/T, where a thermally activated quantity is a straight line: d/dT = -x^2 d/dx.
        let slope = -centre.0 * centre.0 * parabola_slope(centre, first, second);
        slope.is_finite().then_some(slope)
    };
    (0..first_rows.len())
        .map(|index| {
            let resistance_per_k = slope_at(&resistance, index)?;
            let hall_per_k = match hall[index] {
                Some(_) => slope_at(&hall, index)?,
                None => 0.0,
            };
            Some(DriftSlopes {
                resistance_per_k,
                hall_per_k,
            })
        })
        .collect()
}

/// The derivative at `centre.0` of the parabola through three points (x, y) (Lagrange
/// interpolation, differentiated).
fn parabola_slope(centre: (f64, f64), first: (f64, f64), second: (f64, f64)) -> f64 {
    let (x0, y0) = centre;
    let (xa, ya) = first;
    let (xb, yb) = second;
    y0 * (2.0 * x0 - xa - xb) / ((x0 - xa) * (x0 - xb))
        + ya * (x0 - xb) / ((xa - x0) * (xa - xb))
        + yb * (x0 - xa) / ((xb - x0) * (xb - xa))
}

/// The largest relative change a drift correction may make to a reading (10 %); beyond it
/// the first-order correction is not trusted and the group is reduced as measured.
const LARGEST_DRIFT_CORRECTION: f64 = 0.1;

/// The largest |s (T - T_k)| the correction of a group would apply.
fn largest_drift_correction(readings: &[Prepared], slopes: DriftSlopes, geometry: Geometry) -> f64 {
    let mean_k = readings.iter().map(|reading| reading.temperature_k).sum::<f64>() / readings.len() as f64;
    readings
        .iter()
        .map(|reading| {
            let slope = if row::is_hall_slot(geometry, reading.slot as usize) {
                slopes.hall_per_k
            } else {
                slopes.resistance_per_k
            };
            (slope * (mean_k - reading.temperature_k)).abs()
        })
        .fold(0.0, f64::max)
}

/// The sample's warning about its drifting groups left as measured: how many rows, at which
/// temperatures, the largest correction refused, how their uncertainties account for it,
/// and what to measure instead. `None` when every drifting group was corrected.
fn uncorrected_drift_warning(
    sample: &str,
    records: &[RowRecord],
    refused_corrections: &[f64],
    slopes: &[Option<DriftSlopes>],
    drifted: &[bool],
    corrections: &[Option<DriftSlopes>],
    series_has_slopes: bool,
) -> Option<String> {
    let uncorrected: Vec<&RowRecord> = records
        .iter()
        .filter(|record| record.flags.contains(flags::DRIFT_UNCORRECTED))
        .collect();
    let (coldest, warmest) = uncorrected
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(low, high), row| {
            (low.min(row.temperature_k), high.max(row.temperature_k))
        });
    let widest_spread_k = uncorrected
        .iter()
        .map(|row| row.temperature_spread_k)
        .fold(0.0, f64::max);
    let first = uncorrected.first()?;
    let at = if coldest == warmest {
        format!("at {:.3} K", first.temperature_k)
    } else {
        format!("at {coldest:.3} to {warmest:.3} K")
    };
    let left = |index: usize| drifted[index] && corrections[index].is_none();
    let largest_refused = (0..drifted.len())
        .filter(|index| left(*index))
        .map(|index| refused_corrections[index])
        .fold(0.0, f64::max);
    let without_slopes = (0..drifted.len())
        .filter(|index| left(*index) && slopes[*index].is_none())
        .count();
    let mut reasons = Vec::new();
    if largest_refused > 0.0 {
        reasons.push(format!(
            "correcting them would change a reading by up to {:.1} %, more than the {:.0} % a first-order correction is trusted with",
            100.0 * largest_refused,
            100.0 * LARGEST_DRIFT_CORRECTION
        ));
    }
    if without_slopes > 0 {
        reasons.push(format!(
            "{without_slopes} temperature groups have too few neighbouring temperatures to take a slope from"
        ));
    }
    let accounted = if without_slopes == 0 {
        "their _unc_stat (and so _unc) includes each quantity's temperature slope times the offset of its readings' mean temperature from the row's"
    } else if series_has_slopes {
        "their _unc_stat (and so _unc) includes each quantity's temperature slope (the series' steepest where a group has none) times the offset of its readings' mean temperature from the row's"
    } else {
        "the series has no temperature slope, so their uncertainties do not include the drift beyond temperature_K_unc"
    };
    Some(format!(
        "sample {sample:?}: {} of {} rows {at} left as measured although their readings drift (over up to {widest_spread_k:.3} K; flag drift_uncorrected): {}; resistance and Hall readings taken at different temperatures are mixed in one row, and {accounted}; hold the stage steadier, take the resistance and Hall readings interleaved, or measure more temperatures so that the slopes are known",
        uncorrected.len(),
        records.len(),
        reasons.join("; ")
    ))
}

/// Brings every reading of a group to the group's mean temperature T: V x exp(s (T - T_k))
/// with s the Hall slope on a Hall configuration and the resistance slope on the others.
/// The offsets and the misalignment are scaled with it, which is harmless: both cancel in
/// the fits and the field-odd parts, and the factor differs from 1 by s (T - T_k), a few
/// parts in a thousand at most.
fn correct_drift(readings: &mut [Prepared], slopes: DriftSlopes, geometry: Geometry) {
    let mean_k = readings.iter().map(|reading| reading.temperature_k).sum::<f64>() / readings.len() as f64;
    for reading in readings {
        let slope = if row::is_hall_slot(geometry, reading.slot as usize) {
            slopes.hall_per_k
        } else {
            slopes.resistance_per_k
        };
        reading.voltage_v *= (slope * (mean_k - reading.temperature_k)).exp();
    }
}

/// |B| up to which a reading is zero field for certain, whatever `zero_field_tolerance_T`
/// says: readings above it that are taken as zero field are reported in a warning.
const STRICT_ZERO_FIELD_T: f64 = 1e-4;

/// How a temperature group stands against a drifting stage: the slopes its readings were
/// brought to the group's mean temperature with, or, for a drifting group left as measured,
/// how its rows take the drift into their uncertainties. Neither for a steady group.
#[derive(Debug, Clone, Copy, Default)]
struct GroupDrift {
    correction: Option<DriftSlopes>,
    uncorrected: Option<UncorrectedDrift>,
}

/// Rows of one sample's temperature group: one per field setpoint, or one without Hall
/// quantities when the group has no field readings. Returns the largest |B| taken as zero
/// field.
fn reduce_temperature_group(
    readings: &mut [Prepared],
    sample: &ResolvedSample<'_>,
    seen: SlotsSeen,
    settings: &ReduceSettings,
    drift: GroupDrift,
    rows: &mut Vec<RowRecord>,
    warnings: &mut Vec<String>,
) -> f64 {
    walk_temperature_group(
        readings,
        sample,
        seen,
        settings,
        drift,
        Detail::Full,
        |group, zero, field| {
            rows.push(build_row(group, zero, field, settings, warnings));
            true
        },
    )
}

/// What the drift slopes read of the first row of a temperature group ([`Detail::Values`]),
/// and the largest |B| taken as zero field: the group's cells are summarized by their
/// values only, and the other field setpoints not at all.
fn draft_temperature_group(
    readings: &mut [Prepared],
    sample: &ResolvedSample<'_>,
    seen: SlotsSeen,
    settings: &ReduceSettings,
    drift_correction: Option<DriftSlopes>,
) -> (RowDraft, f64) {
    let mut draft = None;
    let largest_zero_field_t = walk_temperature_group(
        readings,
        sample,
        seen,
        settings,
        GroupDrift {
            correction: drift_correction,
            uncorrected: None,
        },
        Detail::Values,
        |group, zero, field| {
            draft = Some(draft_row(group, zero, field));
            false
        },
    );
    (
        draft.expect("a temperature group has a first row"),
        largest_zero_field_t,
    )
}

/// Sorts a temperature group's readings into its cells and hands each row's cells to `row`
/// (one per field setpoint, or one at zero field only), until it returns false. The cells
/// are summarized at `detail`. Returns the largest |B| taken as zero field.
#[inline(always)]
fn walk_temperature_group(
    readings: &mut [Prepared],
    sample: &ResolvedSample<'_>,
    seen: SlotsSeen,
    settings: &ReduceSettings,
    drift: GroupDrift,
    detail: Detail,
    mut row: impl FnMut(&TemperatureGroup<'_>, &ZeroFieldCells, Option<&FieldCells>) -> bool,
) -> f64 {
    // A closure, not a function pointer: `detail` is a constant where this is inlined, so
    // the summary is inlined too and built in place.
    let summarize = |cell: &[Prepared]| match detail {
        Detail::Full => summarize_cell(cell),
        Detail::Values => summarize_cell_values(cell),
    };
    let count = readings.len() as f64;
    let temperature_k = readings.iter().map(|reading| reading.temperature_k).sum::<f64>() / count;
    let (coldest_k, warmest_k) = readings
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(low, high), reading| {
            (low.min(reading.temperature_k), high.max(reading.temperature_k))
        });
    let temperature_spread_k = warmest_k - coldest_k;
    // A drift the second pass corrected no longer enters to first order. Without a
    // correction (one temperature, or no slope to correct with), the row's quantities refer
    // to some temperature within the readings' spread: their standard deviation.
    let temperature_reading_unc_k = if drift.correction.is_some() || readings.len() < 2 || detail == Detail::Values {
        0.0
    } else {
        let squares: f64 = readings
            .iter()
            .map(|reading| (reading.temperature_k - temperature_k).powi(2))
            .sum();
        (squares / (count - 1.0)).sqrt()
    };
    let group = TemperatureGroup {
        sample,
        temperature_k,
        temperature_spread_k,
        temperature_reading_unc_k,
        drift_corrected: drift.correction.is_some(),
        uncorrected_drift: drift.uncorrected,
        seen,
        assume_symmetric: settings.assume_symmetric_sample,
    };

    readings.sort_unstable_by(|a, b| a.field_t.abs().total_cmp(&b.field_t.abs()));
    let zero_count = readings.partition_point(|reading| reading.field_t.abs() <= settings.zero_field_tolerance_t);
    let (zero_readings, field_readings) = readings.split_at_mut(zero_count);
    let largest_zero_field_t = zero_readings.last().map_or(0.0, |reading| reading.field_t.abs());

    zero_readings.sort_unstable_by_key(|reading| cell_key(reading, false));
    // Only a drifting group left as measured asks where its readings' temperatures lie:
    // a steady or corrected group does no work per reading for it.
    let mean_temperatures = |readings: &[Prepared]| match drift.uncorrected {
        Some(_) => ReadingTemperatures::of(readings, sample.geometry),
        None => ReadingTemperatures::default(),
    };
    let mut zero = ZeroFieldCells {
        cells: [None; MAX_SLOTS],
        count: zero_readings.len(),
        mean_temperatures: mean_temperatures(zero_readings),
    };
    for range in runs_by_key(zero_readings, |reading| reading.slot) {
        let slot = zero_readings[range.start].slot as usize;
        zero.cells[slot] = Some(summarize(&zero_readings[range]));
    }

    if field_readings.is_empty() {
        row(&group, &zero, None);
        return largest_zero_field_t;
    }
    let mut wanted = true;
    let mut start = 0usize;
    // One setpoint's cells at a time, filled in place: returned by value, their 1.8 kB
    // were copied once more per setpoint.
    let mut field = FieldCells {
        cells: [[None; 2]; MAX_SLOTS],
        field_t: 0.0,
        count: 0,
        mean_temperatures: ReadingTemperatures::default(),
    };
    while start < field_readings.len() {
        // Each setpoint's end is found as it is reached: sorting a cluster reorders only
        // its own readings, so the |B| order of the rest is untouched.
        let end = setpoint_end(field_readings, start, settings.field_tolerance_t);
        let cluster = &mut field_readings[start..end];
        start = end;
        // Every cluster is sorted, wanted or not: a later pass starts from this order, and
        // the order of a cell's readings is the order of its sums, so a draft must leave
        // the readings as the full reduction does for the results to stay the same to the bit.
        cluster.sort_unstable_by_key(|reading| cell_key(reading, true));
        if wanted {
            summarize_field_cluster(cluster, summarize, &mut field);
            field.mean_temperatures = mean_temperatures(cluster);
            wanted = row(&group, &zero, Some(&field));
        }
    }
    largest_zero_field_t
}

/// Fills `field` with the cells of one field setpoint's readings (`cluster`), sorted by
/// [`cell_key`]; its `mean_temperatures` are left to the caller.
#[inline(always)]
fn summarize_field_cluster(
    cluster: &[Prepared],
    summarize: impl Fn(&[Prepared]) -> CellSummary,
    field: &mut FieldCells,
) {
    for signs in &mut field.cells {
        *signs = [None; 2];
    }
    for range in runs_by_key(cluster, |reading| (reading.slot, reading.field_t < 0.0)) {
        let first = cluster[range.start];
        let sign = usize::from(first.field_t < 0.0);
        field.cells[first.slot as usize][sign] = Some(summarize(&cluster[range]));
    }
    let mean_abs = |negative: bool| {
        let (sum, count) = cluster
            .iter()
            .filter(|reading| (reading.field_t < 0.0) == negative)
            .fold((0.0, 0usize), |(sum, count), reading| {
                (sum + reading.field_t.abs(), count + 1)
            });
        (count > 0).then(|| sum / count as f64)
    };
    let field_t = match (mean_abs(false), mean_abs(true)) {
        (Some(plus), Some(minus)) => 0.5 * (plus + minus),
        (Some(only), None) | (None, Some(only)) => only,
        (None, None) => unreachable!("a field cluster holds at least one reading"),
    };
    field.field_t = field_t;
    field.count = cluster.len();
    field.mean_temperatures = ReadingTemperatures::default();
}
