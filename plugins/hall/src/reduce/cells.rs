//! The statistics of one cell: the readings of one configuration at one field sign within a
//! temperature group and field magnitude.
//!
//! A cell's readings are contiguous after sorting by [`cell_key`], so each statistic is a pass
//! over a slice and nothing is allocated per reading. Sums are centred on the cell means (two
//! passes) because a thermoelectric offset can be many times the resistive voltage, and
//! uncentred sums of I V would then lose the slope to cancellation.
//!
//! Beside the scatter-based standard error, every estimate carries its *noise coefficient*:
//! the standard uncertainty it would have if each reading's voltage carried independent
//! noise of 1 V (for a line fit 1 / sqrt(sum (I - mean I)^2), for a mean of V/I
//! sqrt(sum 1/I^2) / n). Multiplied by the pooled voltage noise of the sample's series it
//! gives the pooled evaluation of the statistical uncertainty (see the parent module). Each
//! cell also hands over its evidence about that noise: the residual sum of squares of its
//! fit, in V^2, with its degrees of freedom.

/// A validated reading in canonical orientation (see `mobilis_physics::contacts`): `current_a`
/// and `voltage_v` already carry the configuration's current and voltage signs.
#[derive(Debug, Clone, Copy)]
pub(super) struct Prepared {
    /// Rank of the sample name in sorted order, so rows come out sorted by sample.
    pub sample_rank: u32,
    /// Position of the configuration in the geometry's configuration list.
    pub slot: u8,
    pub temperature_k: f64,
    pub field_t: f64,
    pub current_a: f64,
    pub voltage_v: f64,
}

impl Prepared {
    /// A reading that failed validation, as the parallel preparation marks it.
    pub const INVALID: Prepared = Prepared {
        sample_rank: u32::MAX,
        slot: u8::MAX,
        temperature_k: f64::NAN,
        field_t: f64::NAN,
        current_a: f64::NAN,
        voltage_v: f64::NAN,
    };

    pub fn is_invalid(&self) -> bool {
        self.slot == u8::MAX
    }
}

/// The largest number of configurations a geometry has (van der Pauw: 4 resistance + 2 Hall).
pub(super) const MAX_SLOTS: usize = 6;

/// Sort key grouping a field cluster by configuration, then field sign, then current
/// polarity. At zero field the field sign is ignored: a residual field within the zero-field
/// tolerance does not split the cell.
pub(super) fn cell_key(reading: &Prepared, split_by_field_sign: bool) -> u8 {
    let field_sign = u8::from(split_by_field_sign && reading.field_t < 0.0);
    let polarity = u8::from(reading.current_a < 0.0);
    reading.slot * 4 + field_sign * 2 + polarity
}

/// A value with its standard uncertainty, when the data allow one to be estimated.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub(super) struct Estimate {
    pub value: f64,
    /// From the scatter of this estimate's own readings (and redundant configurations).
    pub standard_error: Option<f64>,
    /// The standard uncertainty per volt of independent reading noise (see the module
    /// documentation).
    pub noise_coefficient: f64,
}

impl Estimate {
    /// The estimate multiplied by a known constant.
    pub fn scaled(self, factor: f64) -> Estimate {
        Estimate {
            value: self.value * factor,
            standard_error: self.standard_error.map(|u| u * factor.abs()),
            noise_coefficient: self.noise_coefficient * factor.abs(),
        }
    }
}

/// What the readings say about their voltage noise: a residual sum of squares, V^2, and its
/// degrees of freedom. Evidence from independent contrasts adds.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub(super) struct NoiseEvidence {
    pub sum_of_squares_v2: f64,
    pub degrees_of_freedom: usize,
}

impl NoiseEvidence {
    pub fn add(&mut self, other: NoiseEvidence) {
        self.sum_of_squares_v2 += other.sum_of_squares_v2;
        self.degrees_of_freedom += other.degrees_of_freedom;
    }

    /// The pooled standard deviation of one reading's voltage, V; `None` without degrees of
    /// freedom.
    pub fn pooled_noise_v(&self) -> Option<f64> {
        (self.degrees_of_freedom > 0).then(|| (self.sum_of_squares_v2 / self.degrees_of_freedom as f64).sqrt())
    }
}

/// The weighted spread of redundant estimates of one quantity, in V^2: sum (x_k - x_w)^2 /
/// c_k^2 with weights 1 / c_k^2 (c_k the noise coefficients), on K - 1 degrees of freedom.
/// Under the noise model it is a chi-square times the voltage variance.
#[allow(
    clippy::neg_cmp_op_on_partial_ord,
    reason = "`!(x > y)` refuses NaN too, in one test"
)]
pub(super) fn redundancy_evidence(estimates: &[Estimate]) -> NoiseEvidence {
    if estimates.len() < 2 || estimates.iter().any(|estimate| !(estimate.noise_coefficient > 0.0)) {
        return NoiseEvidence::default();
    }
    // The weights are recomputed in each pass rather than kept in a vector: this runs for
    // every row, and the arithmetic (hence every bit of the result) is the same.
    let weight = |e: &Estimate| 1.0 / (e.noise_coefficient * e.noise_coefficient);
    let total: f64 = estimates.iter().map(weight).sum();
    let mean = estimates.iter().map(|e| e.value * weight(e)).sum::<f64>() / total;
    let sum_of_squares_v2 = estimates.iter().map(|e| (e.value - mean).powi(2) * weight(e)).sum();
    NoiseEvidence {
        sum_of_squares_v2,
        degrees_of_freedom: estimates.len() - 1,
    }
}

/// sqrt(x^2 + y^2): two uncertainties in quadrature. `f64::hypot` guards the squares
/// against overflow and underflow at the cost of tens of cycles, and a row takes a dozen
/// such sums; quantities in SI units lie far inside the range where the squares are safe,
/// so the plain formula is used there (it differs from `hypot` by a unit in the last place
/// at most) and `hypot` outside it.
#[inline]
pub(super) fn quadrature_sum(x: f64, y: f64) -> f64 {
    let larger = x.abs().max(y.abs());
    if larger > 1e-150 && larger < 1e150 {
        (x * x + y * y).sqrt()
    } else {
        x.hypot(y)
    }
}

/// Root sum of squares of the components that could be estimated; `None` when none could.
pub(super) fn quadrature(components: &[Option<f64>]) -> Option<f64> {
    quadrature_of(components.iter().copied())
}

/// [`quadrature`] over an iterator, so that callers need not collect the components.
pub(super) fn quadrature_of(components: impl Iterator<Item = Option<f64>>) -> Option<f64> {
    let mut any = false;
    let mut sum = 0.0;
    for component in components.flatten() {
        any = true;
        sum += component * component;
    }
    any.then(|| sum.sqrt())
}

/// Mean of values and the standard error of that mean (sample standard deviation over
/// sqrt(n)); the error is `None` for a single value.
pub(super) fn mean_with_standard_error(values: &[f64]) -> Option<Estimate> {
    mean_with_standard_error_of(values.iter().copied())
}

/// [`mean_with_standard_error`] over values that can be iterated twice, without collecting
/// them.
pub(super) fn mean_with_standard_error_of(values: impl Iterator<Item = f64> + Clone) -> Option<Estimate> {
    let length = values.clone().count();
    if length == 0 {
        return None;
    }
    let count = length as f64;
    let mean = values.clone().sum::<f64>() / count;
    let standard_error = (length >= 2).then(|| {
        let sum_of_squares: f64 = values.map(|value| (value - mean).powi(2)).sum();
        (sum_of_squares / (count - 1.0) / count).sqrt()
    });
    Some(Estimate {
        value: mean,
        standard_error,
        noise_coefficient: 0.0,
    })
}

/// The mean of redundant estimates of one quantity (the configurations of a family): its
/// uncertainty combines the standard error of the mean of the estimates, which sees
/// inhomogeneity and contact effects, with their own standard errors, which see the noise.
pub(super) fn combine_redundant(estimates: &[Estimate]) -> Option<Estimate> {
    let spread = mean_with_standard_error_of(estimates.iter().map(|estimate| estimate.value))?;
    let own_of_mean = quadrature_of(estimates.iter().map(|estimate| estimate.standard_error))
        .map(|combined| combined / estimates.len() as f64);
    let noise_coefficient = estimates
        .iter()
        .map(|estimate| estimate.noise_coefficient.powi(2))
        .sum::<f64>()
        .sqrt()
        / estimates.len() as f64;
    Some(Estimate {
        value: spread.value,
        standard_error: quadrature(&[spread.standard_error, own_of_mean]),
        noise_coefficient,
    })
}

/// V_c = R I_c + V_offset over the readings of one cell.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct LineFit {
    /// The slope R, ohm, with its standard error from the residuals (needs more than two
    /// readings), or, without distinct currents, the standard error of the mean of V/I.
    pub resistance: Estimate,
    /// The intercept, V; `None` when all readings share one current and it cannot be
    /// separated from R.
    pub offset_v: Option<f64>,
    /// The largest |I| of the cell, A: the scale against which the offset is judged.
    pub max_abs_current_a: f64,
}

/// Everything the row computation needs from one cell.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct CellSummary {
    pub fit: LineFit,
    /// Mean of V_c / I_c per current polarity: `[positive, negative]` canonical current.
    pub polarity: [Option<Estimate>; 2],
    /// Mean |B| of the readings of each polarity, T (0 when the polarity is absent): the
    /// Hall step divides each polarity's field-odd part by its own field, so that a setpoint
    /// that wanders between readings neither biases R_Hs nor passes for voltage noise.
    pub polarity_field_t: [f64; 2],
    /// The residuals of the cell's fit: what its readings say about their noise.
    pub noise: NoiseEvidence,
}

impl CellSummary {
    pub fn has_both_polarities(&self) -> bool {
        self.polarity.iter().all(Option::is_some)
    }

    /// |R(+I) - R(-I)| / |mean| from the raw V/I of each polarity, as in the NIST check of
    /// R_21,34 against R_12,43; `None` with one polarity.
    pub fn current_reversal_mismatch(&self) -> Option<f64> {
        let positive = self.polarity[0]?.value;
        let negative = self.polarity[1]?.value;
        let mean = 0.5 * (positive + negative);
        Some((positive - negative).abs() / mean.abs())
    }

    /// |V_offset| / |R I_max|; `None` when the offset is unknown or R is zero.
    pub fn offset_ratio(&self) -> Option<f64> {
        let offset = self.fit.offset_v?;
        let signal = (self.fit.resistance.value * self.fit.max_abs_current_a).abs();
        (signal > 0.0).then(|| offset.abs() / signal)
    }
}

/// Relative width below which currents count as one current: a least-squares line through
/// them would be ill-conditioned, and repeats at one set current agree to far better than this.
const DISTINCT_CURRENT_RELATIVE: f64 = 1e-9;

/// How much of a temperature group a reduction computes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Detail {
    /// Everything a row reports.
    Full,
    /// Only the values that the drift slopes read (the first row's sheet resistance and
    /// sheet Hall coefficient), for a drift-correction pass whose rows the next pass
    /// supersedes. Each value is computed by the same code, hence the same arithmetic, as
    /// in [`Detail::Full`], so it is the same to the bit; the standard errors, noise
    /// coefficients, evidence, flags and quality numbers are left out.
    Values,
}

/// The statistics of one cell, every one of them.
#[inline]
pub(super) fn summarize_cell(readings: &[Prepared]) -> CellSummary {
    summarize::<true>(readings)
}

/// The values of one cell's statistics (see [`Detail::Values`]): the fitted resistance and
/// offset, the polarities' mean V/I and mean |B|; no standard error, noise coefficient or
/// residuals (`None`, 0 and no evidence).
#[inline]
pub(super) fn summarize_cell_values(readings: &[Prepared]) -> CellSummary {
    summarize::<false>(readings)
}

/// [`summarize_cell`] with `UNCERTAINTIES`, [`summarize_cell_values`] without: one body, so
/// that the values are the same to the bit in both.
#[inline(always)]
fn summarize<const UNCERTAINTIES: bool>(readings: &[Prepared]) -> CellSummary {
    debug_assert!(!readings.is_empty());
    let count = readings.len();
    let n = count as f64;
    let mut sum_current = 0.0;
    let mut sum_voltage = 0.0;
    let mut min_current = f64::INFINITY;
    let mut max_current = f64::NEG_INFINITY;
    let mut max_abs_current = 0.0_f64;
    // The first pass also gathers, per current polarity, the sums of the means of V/I and
    // of |B| (index 0: positive current, 1: negative), each in reading order as its own
    // pass would: one walk over the cell instead of five.
    let mut polarity_sums = [RatioSums::default(); 2];
    let mut field_sums = [(0.0_f64, 0usize); 2];
    for reading in readings {
        sum_current += reading.current_a;
        sum_voltage += reading.voltage_v;
        min_current = min_current.min(reading.current_a);
        max_current = max_current.max(reading.current_a);
        max_abs_current = max_abs_current.max(reading.current_a.abs());
        if reading.current_a > 0.0 {
            polarity_sums[0].add::<UNCERTAINTIES>(reading);
        } else if reading.current_a < 0.0 {
            polarity_sums[1].add::<UNCERTAINTIES>(reading);
        }
        let side = if reading.current_a > 0.0 { 0 } else { 1 };
        field_sums[side] = (field_sums[side].0 + reading.field_t.abs(), field_sums[side].1 + 1);
    }
    let mean_current = sum_current / n;
    let mean_voltage = sum_voltage / n;
    let distinct_currents = max_current - min_current > DISTINCT_CURRENT_RELATIVE * max_abs_current;
    let noise;
    let fit = if distinct_currents {
        let mut sxx = 0.0;
        let mut sxy = 0.0;
        for reading in readings {
            let dx = reading.current_a - mean_current;
            sxx += dx * dx;
            sxy += dx * (reading.voltage_v - mean_voltage);
        }
        let slope = sxy / sxx;
        let offset = mean_voltage - slope * mean_current;
        let (standard_error, noise_coefficient) = if UNCERTAINTIES {
            let residual_sum: f64 = readings
                .iter()
                .map(|reading| (reading.voltage_v - offset - slope * reading.current_a).powi(2))
                .sum();
            noise = NoiseEvidence {
                sum_of_squares_v2: residual_sum,
                degrees_of_freedom: count - 2,
            };
            (
                (count > 2).then(|| (residual_sum / (n - 2.0) / sxx).sqrt()),
                1.0 / sxx.sqrt(),
            )
        } else {
            noise = NoiseEvidence::default();
            (None, 0.0)
        };
        LineFit {
            resistance: Estimate {
                value: slope,
                standard_error,
                noise_coefficient,
            },
            offset_v: Some(offset),
            max_abs_current_a: max_abs_current,
        }
    } else {
        noise = if UNCERTAINTIES {
            // One current: V = R I through the origin (weights I^2) gives the residuals.
            let (mut sum_iv, mut sum_ii) = (0.0, 0.0);
            for reading in readings {
                sum_iv += reading.current_a * reading.voltage_v;
                sum_ii += reading.current_a * reading.current_a;
            }
            let through_origin = sum_iv / sum_ii;
            NoiseEvidence {
                sum_of_squares_v2: readings
                    .iter()
                    .map(|reading| (reading.voltage_v - through_origin * reading.current_a).powi(2))
                    .sum(),
                degrees_of_freedom: count - 1,
            }
        } else {
            NoiseEvidence::default()
        };
        LineFit {
            resistance: ratio_mean::<UNCERTAINTIES>(readings.iter()).expect("a cell holds at least one reading"),
            offset_v: None,
            max_abs_current_a: max_abs_current,
        }
    };
    let positive = polarity_sums[0].finish::<UNCERTAINTIES>(readings.iter().filter(|reading| reading.current_a > 0.0));
    let negative = polarity_sums[1].finish::<UNCERTAINTIES>(readings.iter().filter(|reading| reading.current_a < 0.0));
    let mean_field = |(sum, count): (f64, usize)| {
        if count > 0 {
            sum / count as f64
        } else {
            0.0
        }
    };
    CellSummary {
        fit,
        polarity: [positive, negative],
        polarity_field_t: [mean_field(field_sums[0]), mean_field(field_sums[1])],
        noise,
    }
}

/// The first-pass sums of [`ratio_mean`], gathered while another pass walks the cell.
#[derive(Clone, Copy, Default)]
struct RatioSums {
    count: usize,
    sum: f64,
    sum_inverse_square_current: f64,
}

impl RatioSums {
    /// Adds a reading; the sum for the noise coefficient only `WITH_UNCERTAINTY`.
    #[inline]
    fn add<const WITH_UNCERTAINTY: bool>(&mut self, reading: &Prepared) {
        self.count += 1;
        self.sum += reading.voltage_v / reading.current_a;
        if WITH_UNCERTAINTY {
            self.sum_inverse_square_current += 1.0 / (reading.current_a * reading.current_a);
        }
    }

    /// [`ratio_mean`] from these sums and, `WITH_UNCERTAINTY`, its second pass over the
    /// same readings for the standard error.
    fn finish<'a, const WITH_UNCERTAINTY: bool>(
        self,
        readings: impl Iterator<Item = &'a Prepared>,
    ) -> Option<Estimate> {
        if self.count == 0 {
            return None;
        }
        let n = self.count as f64;
        let mean = self.sum / n;
        if !WITH_UNCERTAINTY {
            return Some(Estimate {
                value: mean,
                standard_error: None,
                noise_coefficient: 0.0,
            });
        }
        let standard_error = (self.count >= 2).then(|| {
            let sum_of_squares: f64 = readings
                .map(|reading| (reading.voltage_v / reading.current_a - mean).powi(2))
                .sum();
            (sum_of_squares / (n - 1.0) / n).sqrt()
        });
        Some(Estimate {
            value: mean,
            standard_error,
            noise_coefficient: self.sum_inverse_square_current.sqrt() / n,
        })
    }
}

/// Mean of V/I and (`WITH_UNCERTAINTY`) its standard error, in two passes over an iterator
/// that can be cloned.
fn ratio_mean<'a, const WITH_UNCERTAINTY: bool>(
    readings: impl Iterator<Item = &'a Prepared> + Clone,
) -> Option<Estimate> {
    let mut sums = RatioSums::default();
    for reading in readings.clone() {
        sums.add::<WITH_UNCERTAINTY>(reading);
    }
    sums.finish::<WITH_UNCERTAINTY>(readings)
}

/// Below this fraction of the temperature, neighbouring readings may share a temperature
/// group whatever `temperature_tolerance_K` says: 5 %, so that sub-kelvin setpoints 0.1 K
/// apart stay apart while a drift of a few percent between readings still chains (common
/// practice).
pub(super) const TEMPERATURE_RELATIVE_GAP: f64 = 0.05;

/// Consecutive runs of sorted temperatures whose neighbours differ by at most `tolerance`
/// and by at most [`TEMPERATURE_RELATIVE_GAP`] of the lower one, as index ranges. Chains are
/// allowed (a slow drift stays one cluster); the caller reports the spread.
pub(super) fn gap_clusters(values: impl Iterator<Item = f64>, tolerance: f64) -> Vec<std::ops::Range<usize>> {
    let mut ranges = Vec::new();
    let mut start = 0usize;
    let mut previous: Option<f64> = None;
    let mut index = 0usize;
    for value in values {
        if let Some(last) = previous {
            if value - last > tolerance.min(TEMPERATURE_RELATIVE_GAP * last.abs()) {
                ranges.push(start..index);
                start = index;
            }
        }
        previous = Some(value);
        index += 1;
    }
    if index > start {
        ranges.push(start..index);
    }
    ranges
}

/// The end of the field setpoint that starts at `start` in readings sorted by |B|: a
/// setpoint starts at its smallest |B| and takes every following reading within `tolerance`
/// of it, so no setpoint is wider than `tolerance`. A densely logged ramp is cut into pieces
/// of that width instead of being chained into one setpoint. Found one at a time, without a
/// list of ranges per temperature group.
pub(super) fn setpoint_end(readings: &[Prepared], start: usize, tolerance: f64) -> usize {
    let first = readings[start].field_t.abs();
    start
        + 1
        + readings[start + 1..]
            .iter()
            .take_while(|reading| reading.field_t.abs() - first <= tolerance)
            .count()
}

/// Index ranges of the runs of equal keys in a slice sorted by that key, in order. An
/// iterator rather than a vector: it runs for every cell of every row.
pub(super) fn runs_by_key<'a, T, K: PartialEq>(
    items: &'a [T],
    key: impl Fn(&T) -> K + 'a,
) -> impl Iterator<Item = std::ops::Range<usize>> + 'a {
    let mut start = 0usize;
    std::iter::from_fn(move || {
        if start >= items.len() {
            return None;
        }
        let first = key(&items[start]);
        let end = start + 1 + items[start + 1..].iter().take_while(|item| key(item) == first).count();
        let range = start..end;
        start = end;
        Some(range)
    })
}
