//! One output row: resistances, sheet resistance, Hall quantities, derived densities and
//! mobilities with their uncertainties, and the quality flags, from the cell statistics of one
//! temperature group (zero-field cells) and one field magnitude (field cells).
//!
//! The physics and the choices behind it are documented in the parent module.

use mobilis_physics::constants::ELEMENTARY_CHARGE_C;
use mobilis_physics::contacts::Configuration;
use mobilis_physics::van_der_pauw;

use super::cells::Prepared;
use super::cells::{
    combine_redundant, mean_with_standard_error, quadrature, quadrature_of, quadrature_sum, redundancy_evidence,
    CellSummary, Detail, Estimate, NoiseEvidence, MAX_SLOTS,
};
use super::contract::{Geometry, ReduceSettings};
use super::flags;

/// The calibrations of one sample as resolved from the sheet, the call and the defaults:
/// relative standard uncertainties of the scales, the thermometer's accuracy in K.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct ResolvedCalibration {
    pub thickness_rel: f64,
    pub field_rel: f64,
    pub current_rel: f64,
    pub voltage_rel: f64,
    pub temperature_accuracy_k: f64,
}

/// The quantities whose uncertainty is split into statistical and systematic parts, and
/// the scales each one depends on (first order, relative): R = V / I, R_Hs = R_xy / B,
/// rho = R_s t, n = n_s / t, mu_H = R_Hs / R_s (voltage and current cancel: one voltmeter
/// and one source measure both).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[repr(usize)]
pub(super) enum Quantity {
    SheetResistance,
    Resistivity,
    HallResistance,
    SheetHallCoefficient,
    HallCoefficient,
    SheetDensity,
    Density,
    HallMobility,
    DriftMobility,
}

impl Quantity {
    /// Which scales enter: (voltage and current, field, thickness).
    fn scales(self) -> (bool, bool, bool) {
        match self {
            Quantity::SheetResistance | Quantity::HallResistance => (true, false, false),
            Quantity::Resistivity => (true, false, true),
            Quantity::SheetHallCoefficient | Quantity::SheetDensity => (true, true, false),
            Quantity::HallCoefficient | Quantity::Density => (true, true, true),
            Quantity::HallMobility | Quantity::DriftMobility => (false, true, false),
        }
    }

    /// The relative systematic standard uncertainty: the calibrations in quadrature.
    pub fn systematic_relative(self, calibration: &ResolvedCalibration) -> f64 {
        let (electrical, field, thickness) = self.scales();
        let mut sum = 0.0;
        if electrical {
            sum += calibration.voltage_rel.powi(2) + calibration.current_rel.powi(2);
        }
        if field {
            sum += calibration.field_rel.powi(2);
        }
        if thickness {
            sum += calibration.thickness_rel.powi(2);
        }
        sum.sqrt()
    }
}

/// Indices of the optional scalar values of a [`RowRecord`].
pub(super) mod optional {
    pub const FIELD: usize = 0;
    pub const RESISTANCE_A: usize = 1;
    pub const RESISTANCE_B: usize = 2;
    pub const RESISTANCE_RATIO: usize = 3;
    pub const GEOMETRY_FACTOR: usize = 4;
    pub const RECIPROCITY: usize = 5;
    pub const CURRENT_REVERSAL: usize = 6;
    pub const HALL_SPREAD: usize = 7;
    pub const OFFSET_RATIO: usize = 8;
    pub const MISALIGNMENT: usize = 9;
    pub const COUNT: usize = 10;
}

/// The bit of `present` of the first estimate: the optional values take the bits below.
const ESTIMATE_BIT: u32 = 16;

/// One row as the reduction drafts it: plain values with a presence mask instead of a
/// record of `Option`s, the estimates (scatter-based standard error and noise coefficient)
/// that the uncertainties are finished from once the sample's pooled noise is known, and
/// the flags as a bit set. No heap memory: a sample's rows are one contiguous block.
#[derive(Debug, Clone, Copy)]
pub(super) struct RowRecord {
    pub temperature_k: f64,
    pub temperature_k_unc: f64,
    pub temperature_spread_k: f64,
    optional: [f64; optional::COUNT],
    /// By [`Quantity`] (its discriminant): the estimate of each quantity, whose value is the row's value.
    estimates: [Estimate; 9],
    /// Bit i (i < 16): `optional[i]` is present; bit 16 + q: `estimates[q]` is present.
    present: u32,
    /// The row's evidence about the reading noise.
    pub evidence: NoiseEvidence,
    pub reading_count: usize,
    pub flags: FlagSet,
    /// 0: no carrier type, 1: "n", 2: "p".
    pub carrier: u8,
    pub drift_corrected: bool,
    /// What the temperatures of the readings of a drifting group left as measured add to the
    /// statistical parts (zero otherwise).
    drift_relative: DriftTerms,
}

impl RowRecord {
    #[inline]
    pub fn optional(&self, index: usize) -> Option<f64> {
        (self.present & (1 << index) != 0).then(|| self.optional[index])
    }

    #[inline]
    fn set_optional(&mut self, index: usize, value: Option<f64>) {
        if let Some(value) = value {
            self.optional[index] = value;
            self.present |= 1 << index;
        }
    }

    #[inline]
    pub fn estimate(&self, quantity: Quantity) -> Option<Estimate> {
        let index = quantity as usize;
        (self.present & (1 << (ESTIMATE_BIT + index as u32)) != 0).then(|| self.estimates[index])
    }

    /// What the drift slopes read of this row.
    pub fn draft(&self) -> RowDraft {
        RowDraft {
            temperature_k: self.temperature_k,
            sheet_resistance: self.estimate(Quantity::SheetResistance).map(|estimate| estimate.value),
            sheet_hall_coefficient: self
                .estimate(Quantity::SheetHallCoefficient)
                .map(|estimate| estimate.value),
        }
    }
}

/// The values of a row that the drift slopes read ([`Detail::Values`]), the same to the bit
/// as those of the full row ([`RowRecord::draft`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct RowDraft {
    pub temperature_k: f64,
    pub sheet_resistance: Option<f64>,
    pub sheet_hall_coefficient: Option<f64>,
}

/// Raised flags as bits in the order of [`flags::ALL`].
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct FlagSet(pub u16);

impl FlagSet {
    /// The bit of a flag, its position in [`flags::ALL`].
    pub fn bit(flag: &str) -> u16 {
        let index = flags::ALL
            .iter()
            .position(|known| *known == flag)
            .expect("every raised flag is listed in flags::ALL");
        1 << index
    }

    pub fn contains(self, flag: &str) -> bool {
        self.0 & Self::bit(flag) != 0
    }

    pub fn is_empty(self) -> bool {
        self.0 == 0
    }

    /// The raised flags in the order of [`flags::ALL`].
    pub fn iter(self) -> impl Iterator<Item = &'static str> {
        flags::ALL
            .iter()
            .enumerate()
            .filter(move |(index, _)| self.0 & (1 << index) != 0)
            .map(|(_, flag)| *flag)
    }
}

/// The logarithmic temperature slopes of one group, per K, that bring its readings to the
/// group's mean temperature: of the resistances (d ln R_s / dT) and of the Hall
/// configurations (d ln |R_Hs| / dT).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct DriftSlopes {
    pub resistance_per_k: f64,
    pub hall_per_k: f64,
}

/// How a drifting group left as measured enters its rows' uncertainties: the logarithmic
/// temperature slopes its readings' offsets are multiplied by (`None` when the series has
/// none at all), and whether they are borrowed (the series' steepest, for a group without
/// slopes of its own).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct UncorrectedDrift {
    pub slopes: Option<DriftSlopes>,
    pub borrowed: bool,
}

impl UncorrectedDrift {
    /// The relative standard uncertainties a row takes from the temperatures of its
    /// readings (GUM, JCGM 100:2008, 5.1.2 and 5.1.3: a sensitivity coefficient times an
    /// input's standard uncertainty, a Type B evaluation). The input is the offset
    /// T_R - T of the mean temperature of the resistance readings from the row's temperature
    /// T, and T_H - T of the Hall readings: left as measured, R_s refers to T_R and R_Hs to
    /// T_H. Its standard uncertainty is taken as the offset's magnitude, as the correction
    /// that would remove it is not trusted. The sensitivities are the slopes:
    /// s_R = d ln R_s / dT for R_s and rho; s_H = d ln |R_Hs| / dT (in magnitude) for R_xy,
    /// R_Hs, R_H, n_s and n; for mu_H = |R_Hs| / R_s and the drift mobility both offsets at
    /// once, s_H (T_H - T) - s_R (T_R - T), the two being one drift (fully correlated); with
    /// borrowed slopes, whose signs need not be the group's, |s_H (T_H - T)| + |s_R (T_R - T)|.
    pub fn relative_uncertainties(self, row_k: f64, temperatures: ReadingTemperatures) -> DriftTerms {
        let Some(slopes) = self.slopes else {
            return DriftTerms::default();
        };
        let resistance = slopes.resistance_per_k * temperatures.resistance_k.map_or(0.0, |mean_k| mean_k - row_k);
        let hall = slopes.hall_per_k * temperatures.hall_k.map_or(0.0, |mean_k| mean_k - row_k);
        DriftTerms {
            resistance: resistance.abs(),
            hall: hall.abs(),
            mobility: if self.borrowed {
                resistance.abs() + hall.abs()
            } else {
                (hall - resistance).abs()
            },
        }
    }
}

/// The relative standard uncertainties a row's quantities take from the temperatures of its
/// readings when a drifting group is left as measured (`UncorrectedDrift`): of R_s and rho;
/// of R_xy, R_Hs, R_H, n_s and n; of mu_H and the drift mobility. Zero for other rows.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub(super) struct DriftTerms {
    pub resistance: f64,
    pub hall: f64,
    pub mobility: f64,
}

impl DriftTerms {
    fn of(self, quantity: Quantity) -> f64 {
        match quantity {
            Quantity::SheetResistance | Quantity::Resistivity => self.resistance,
            Quantity::HallResistance
            | Quantity::SheetHallCoefficient
            | Quantity::HallCoefficient
            | Quantity::SheetDensity
            | Quantity::Density => self.hall,
            Quantity::HallMobility | Quantity::DriftMobility => self.mobility,
        }
    }
}

/// The mean temperatures of the resistance and of the Hall readings among some readings of
/// one temperature group (`None` for a kind without readings there): what a row of a
/// drifting group left as measured refers to.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub(super) struct ReadingTemperatures {
    pub resistance_k: Option<f64>,
    pub hall_k: Option<f64>,
}

impl ReadingTemperatures {
    pub fn of(readings: &[Prepared], geometry: Geometry) -> Self {
        let mut sums = [(0.0, 0usize); 2];
        for reading in readings {
            let sum = &mut sums[usize::from(is_hall_slot(geometry, reading.slot as usize))];
            sum.0 += reading.temperature_k;
            sum.1 += 1;
        }
        let mean = |(sum, count): (f64, usize)| (count > 0).then(|| sum / count as f64);
        ReadingTemperatures {
            resistance_k: mean(sums[0]),
            hall_k: mean(sums[1]),
        }
    }
}

/// The smallest relative statistical uncertainty reported: the resolution of the
/// double-precision arithmetic of the reduction, so that no uncertainty comes out zero.
pub(super) const ARITHMETIC_RELATIVE_RESOLUTION: f64 = 1e-12;

/// A standard uncertainty split into its parts; `None` where it cannot be evaluated.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub(super) struct Budget {
    pub total: Option<f64>,
    pub statistical: Option<f64>,
    pub systematic: Option<f64>,
}

/// The standard deviation of a Student t variable with `degrees_of_freedom` over its scale,
/// sqrt(nu / (nu - 2)): the factor that turns a scatter evaluated on few degrees of freedom
/// into a standard uncertainty (JCGM 101:2008, 6.4.9.4, where a Type A evaluation is
/// assigned a scaled and shifted t distribution). `None` below 3 degrees of freedom, where
/// that variance is infinite.
pub(super) fn student_factor(degrees_of_freedom: usize) -> Option<f64> {
    (degrees_of_freedom >= 3).then(|| {
        let nu = degrees_of_freedom as f64;
        (nu / (nu - 2.0)).sqrt()
    })
}

/// The pooled noise of some evidence times [`student_factor`] of its degrees of freedom:
/// what a noise coefficient is multiplied by to give a statistical uncertainty. `None`
/// below 3 degrees of freedom. Computed once per row (and once per series) for all its
/// quantities, with the same arithmetic as one quantity at a time.
pub(super) fn noise_scale(evidence: &NoiseEvidence) -> Option<f64> {
    let factor = student_factor(evidence.degrees_of_freedom)?;
    Some(evidence.pooled_noise_v()? * factor)
}

/// What the budgets of one sample's rows share: the series' noise scale and, per quantity,
/// the relative systematic uncertainty of its calibrations.
pub(super) struct SeriesBudget {
    pub noise_scale: Option<f64>,
    pub systematic_relative: [f64; 9],
}

impl SeriesBudget {
    pub fn new(series_evidence: &NoiseEvidence, calibration: &ResolvedCalibration) -> Self {
        let quantities = [
            Quantity::SheetResistance,
            Quantity::Resistivity,
            Quantity::HallResistance,
            Quantity::SheetHallCoefficient,
            Quantity::HallCoefficient,
            Quantity::SheetDensity,
            Quantity::Density,
            Quantity::HallMobility,
            Quantity::DriftMobility,
        ];
        SeriesBudget {
            noise_scale: noise_scale(series_evidence),
            systematic_relative: quantities.map(|quantity| quantity.systematic_relative(calibration)),
        }
    }
}

impl RowRecord {
    /// The budget of one quantity. The statistical part is the noise coefficient times the
    /// row's own pooled reading noise, widened by [`student_factor`] of its degrees of
    /// freedom (`row_scale`, from [`noise_scale`]); a row with fewer than 3 degrees of
    /// freedom borrows the noise pooled over its sample's whole series, and with fewer
    /// than 3 there as well keeps its own scatter-based standard error. The systematic
    /// part is the calibrations; the total their quadrature sum.
    pub fn budget(&self, quantity: Quantity, row_scale: Option<f64>, series: &SeriesBudget) -> Budget {
        let Some(estimate) = self.estimate(quantity) else {
            return Budget::default();
        };
        let statistical = row_scale
            .map(|scale| scale * estimate.noise_coefficient)
            .or_else(|| series.noise_scale.map(|scale| scale * estimate.noise_coefficient))
            .or(estimate.standard_error)
            .map(|u| u.max(ARITHMETIC_RELATIVE_RESOLUTION * estimate.value.abs()))
            .map(|u| match self.drift_relative.of(quantity) {
                // Specific to the row's readings, so statistical (never common to the series).
                drift if drift > 0.0 => quadrature_sum(u, drift * estimate.value.abs()),
                _ => u,
            });
        let systematic_value = series.systematic_relative[quantity as usize] * estimate.value.abs();
        let systematic = Some(systematic_value);
        let total = statistical.map(|stat| quadrature_sum(stat, systematic_value));
        Budget {
            total,
            statistical,
            systematic,
        }
    }
}

/// A sample-sheet row checked and ready for use.
#[derive(Debug, Clone)]
pub(super) struct ResolvedSample<'a> {
    pub name: &'a str,
    pub thickness_m: Option<f64>,
    pub hall_factor: f64,
    pub geometry: Geometry,
    pub calibration: ResolvedCalibration,
    /// The calibrations assumed because nobody stated them.
    pub not_stated: Vec<&'static str>,
}

/// Which configuration slots play which role for a geometry (slot = position in
/// `Configuration::VAN_DER_PAUW` or `Configuration::HALL_BAR`).
struct Layout {
    /// Redundant estimates of each resistance: van der Pauw `[A: direct, reciprocal]`,
    /// `[B: direct, reciprocal]`; Hall bar one family of the two longitudinal pairs.
    families: &'static [[usize; 2]],
    hall_slots: [usize; 2],
}

const VAN_DER_PAUW_LAYOUT: Layout = Layout {
    families: &[[0, 1], [2, 3]],
    hall_slots: [4, 5],
};

const HALL_BAR_LAYOUT: Layout = Layout {
    families: &[[0, 1]],
    hall_slots: [2, 3],
};

/// Whether a configuration slot of the geometry is a Hall configuration.
pub(super) fn is_hall_slot(geometry: Geometry, slot: usize) -> bool {
    layout(geometry).hall_slots.contains(&slot)
}

fn layout(geometry: Geometry) -> &'static Layout {
    match geometry {
        Geometry::VanDerPauw => &VAN_DER_PAUW_LAYOUT,
        Geometry::HallBar { .. } => &HALL_BAR_LAYOUT,
    }
}

/// The cells of one temperature group at zero field, by slot.
pub(super) struct ZeroFieldCells {
    pub cells: [Option<CellSummary>; MAX_SLOTS],
    pub count: usize,
    /// Filled for a drifting group left as measured only.
    pub mean_temperatures: ReadingTemperatures,
}

/// The cells of one field magnitude, by slot and field sign (`[+B, -B]`).
pub(super) struct FieldCells {
    pub cells: [[Option<CellSummary>; 2]; MAX_SLOTS],
    /// The |B| the Hall resistance is divided by: the mean of the mean |B| at +B and at -B, so
    /// that (R(+B1) - R(-B2)) / 2 = R_Hs (B1 + B2) / 2 is divided by the right field.
    pub field_t: f64,
    pub count: usize,
    /// Filled for a drifting group left as measured only.
    pub mean_temperatures: ReadingTemperatures,
}

/// The temperature group a row belongs to.
pub(super) struct TemperatureGroup<'a> {
    pub sample: &'a ResolvedSample<'a>,
    pub temperature_k: f64,
    pub temperature_spread_k: f64,
    /// The part of the temperature uncertainty from the readings' spread, K (0 when the
    /// drift was corrected).
    pub temperature_reading_unc_k: f64,
    /// Whether the readings were brought to the mean temperature (second pass).
    pub drift_corrected: bool,
    /// For a drifting group left as measured: how its readings' temperatures enter its
    /// rows' uncertainties.
    pub uncorrected_drift: Option<UncorrectedDrift>,
    /// The configurations the sample has readings of anywhere in its series.
    pub seen: SlotsSeen,
    /// `assume_symmetric_sample`: one van der Pauw family gives the sheet resistance.
    pub assume_symmetric: bool,
}

/// The raised flags of a row, kept in the order of [`flags::ALL`].
#[derive(Default)]
struct RaisedFlags(FlagSet);

impl RaisedFlags {
    fn raise(&mut self, flag: &'static str) {
        self.0 .0 |= FlagSet::bit(flag);
    }
}

/// Everything the resistance step yields.
#[derive(Default)]
struct ResistancePart {
    resistance_a_ohm: Option<f64>,
    resistance_b_ohm: Option<f64>,
    resistance_ratio: Option<f64>,
    geometry_factor: Option<f64>,
    sheet_resistance: Option<Estimate>,
    reciprocity_mismatch: Option<f64>,
    /// Spread of the redundant configurations, in the noise model's units.
    evidence: NoiseEvidence,
}

/// Everything the Hall step yields.
#[derive(Default)]
struct HallPart {
    hall_resistance: Option<Estimate>,
    hall_spread: Option<f64>,
    misalignment_ratio: Option<f64>,
    evidence: NoiseEvidence,
    /// The Hall configurations without a reading at this field, and those with one field
    /// sign only, by slot.
    gaps: ConfigurationGaps,
}

/// Which configurations of a row lack readings, by slot bit, so that a warning can name
/// them and say what to measure.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub(super) struct ConfigurationGaps {
    /// Configurations with no reading in the row.
    pub missing: u8,
    /// Hall configurations measured at +B only.
    pub plus_field_only: u8,
    /// Hall configurations measured at -B only.
    pub minus_field_only: u8,
}

impl ConfigurationGaps {
    fn add(&mut self, other: ConfigurationGaps) {
        self.missing |= other.missing;
        self.plus_field_only |= other.plus_field_only;
        self.minus_field_only |= other.minus_field_only;
    }
}

/// Relative uncertainty of a product or quotient of independent factors.
fn relative_quadrature(terms: &[(f64, Option<f64>)]) -> Option<f64> {
    quadrature_of(
        terms
            .iter()
            .map(|(value, uncertainty)| uncertainty.map(|u| u / value.abs())),
    )
}

/// A short list kept on the stack: the configurations, cells and redundant estimates of one
/// row number a dozen at most, and a heap allocation for each would cost more than the
/// arithmetic they feed.
#[derive(Clone, Copy)]
pub(super) struct Few<T: Copy, const N: usize> {
    items: [Option<T>; N],
    len: usize,
}

impl<T: Copy, const N: usize> Few<T, N> {
    pub fn new() -> Self {
        Few {
            items: [None; N],
            len: 0,
        }
    }

    pub fn push(&mut self, item: T) {
        self.items[self.len] = Some(item);
        self.len += 1;
    }

    pub fn len(&self) -> usize {
        self.len
    }

    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    pub fn iter(&self) -> impl Iterator<Item = T> + Clone + '_ {
        self.items[..self.len].iter().map(|item| item.expect("pushed"))
    }
}

/// The estimates of a [`Few`] as a slice on the stack, for the functions that take one.
fn estimates<const N: usize>(few: &Few<Estimate, N>, storage: &mut [Estimate; N]) -> usize {
    for (slot, estimate) in storage.iter_mut().zip(few.iter()) {
        *slot = estimate;
    }
    few.len()
}

/// Cells whose fits enter a row, with whether each is a resistance configuration: at most
/// 4 resistance configurations at two field signs and 2 Hall configurations at two.
type UsedCells<'a> = Few<(&'a CellSummary, bool), 12>;

pub(super) fn build_row(
    group: &TemperatureGroup<'_>,
    zero: &ZeroFieldCells,
    field: Option<&FieldCells>,
    settings: &ReduceSettings,
    warnings: &mut Vec<String>,
) -> RowRecord {
    let thresholds = &settings.thresholds;
    let sample = group.sample;
    let layout = layout(sample.geometry);
    let mut raised = RaisedFlags::default();
    // Cells whose fits enter the row: (cell, is a resistance configuration).
    let mut used_cells = UsedCells::new();

    let (from_field, slot_resistance) = resistance_estimates(layout, zero, field, &mut used_cells);
    if from_field {
        raised.raise(flags::RESISTANCE_FROM_FIELD_READINGS);
        warnings.push(format!(
            "sample {:?} at {:.3} K: no zero-field resistance readings; the resistances at |B| = {} T are the field-even part of the readings at +B and -B and include magnetoresistance",
            sample.name,
            group.temperature_k,
            field.map_or(0.0, |cells| cells.field_t)
        ));
    }

    let mut gaps = ConfigurationGaps::default();
    for slot in resistance_slots(layout) {
        if slot_resistance[slot].is_none() {
            raised.raise(flags::MISSING_CONFIGURATIONS);
            gaps.missing |= 1 << slot;
        }
    }

    let resistance = sheet_resistance(&slot_resistance, group, Detail::Full, &mut raised, warnings);

    let hall = match field {
        Some(field) => hall_resistance(field, layout, Detail::Full, &mut used_cells, &mut raised),
        None => {
            raised.raise(flags::NO_FIELD_DATA);
            HallPart::default()
        }
    };

    // Offsets, current reversal and polarity coverage over every fit the row rests on.
    let mut thermoelectric_offset_ratio: Option<f64> = None;
    let mut current_reversal_mismatch: Option<f64> = None;
    for (cell, is_resistance) in used_cells.iter() {
        if !cell.has_both_polarities() {
            raised.raise(flags::NO_CURRENT_REVERSAL);
        }
        if let Some(ratio) = cell.offset_ratio() {
            thermoelectric_offset_ratio = Some(thermoelectric_offset_ratio.map_or(ratio, |max| max.max(ratio)));
        }
        if is_resistance {
            if let Some(mismatch) = cell.current_reversal_mismatch() {
                current_reversal_mismatch = Some(current_reversal_mismatch.map_or(mismatch, |max| max.max(mismatch)));
            }
        }
    }

    if exceeds(resistance.reciprocity_mismatch, thresholds.reciprocity_tolerance) {
        raised.raise(flags::RECIPROCITY);
    }
    if exceeds(resistance.resistance_ratio, thresholds.max_resistance_ratio) {
        raised.raise(flags::RESISTANCE_RATIO);
    }
    if exceeds(hall.hall_spread, thresholds.hall_spread_tolerance) {
        raised.raise(flags::HALL_INCONSISTENT);
    }
    if exceeds(thermoelectric_offset_ratio, thresholds.thermoelectric_offset_ratio)
        || exceeds(hall.misalignment_ratio, thresholds.misalignment_ratio)
    {
        raised.raise(flags::LARGE_OFFSET);
    }
    if exceeds(current_reversal_mismatch, thresholds.current_reversal_tolerance) {
        raised.raise(flags::CURRENT_REVERSAL);
    }

    // Derived quantities. The thickness is a calibration, common to the whole series: it
    // enters the systematic part only (see `Quantity`), never the statistical one.
    let thickness = sample.thickness_m;
    let sheet = resistance.sheet_resistance;
    let resistivity = match (sheet, thickness) {
        (Some(sheet), Some(thickness)) => Some(sheet.scaled(thickness)),
        _ => None,
    };

    let field_t = field.map(|cells| cells.field_t);
    let sheet_hall_coefficient = sheet_hall_coefficient(hall.hall_resistance, field);
    // A Hall resistance of exactly zero has no carrier type and no finite density.
    let usable_hall = sheet_hall_coefficient.filter(|coefficient| coefficient.value != 0.0);
    let carrier_type = usable_hall.map(|coefficient| if coefficient.value > 0.0 { "p" } else { "n" });
    let hall_coefficient = match (sheet_hall_coefficient, thickness) {
        (Some(coefficient), Some(thickness)) => Some(coefficient.scaled(thickness)),
        _ => None,
    };
    // n_s = r_H / (e |R_Hs|): the relative uncertainty of R_Hs carries over.
    let sheet_density = usable_hall.map(|coefficient| {
        let value = sample.hall_factor / (ELEMENTARY_CHARGE_C * coefficient.value.abs());
        let relative = value / coefficient.value.abs();
        Estimate {
            value,
            standard_error: coefficient.standard_error.map(|u| relative * u),
            noise_coefficient: relative * coefficient.noise_coefficient,
        }
    });
    let density = match (sheet_density, thickness) {
        (Some(sheet_density), Some(thickness)) => Some(sheet_density.scaled(1.0 / thickness)),
        _ => None,
    };
    // mu_H = |R_Hs| / R_s: the Hall and resistance readings are different readings, so
    // their relative uncertainties add in quadrature.
    let hall_mobility = match (usable_hall, sheet.filter(|sheet| sheet.value > 0.0)) {
        (Some(coefficient), Some(sheet)) => {
            let value = coefficient.value.abs() / sheet.value;
            let relative = relative_quadrature(&[
                (coefficient.value, coefficient.standard_error),
                (sheet.value, sheet.standard_error),
            ]);
            let noise_relative = quadrature_sum(
                coefficient.noise_coefficient / coefficient.value,
                sheet.noise_coefficient / sheet.value,
            );
            Some(Estimate {
                value,
                standard_error: relative.map(|r| r * value),
                noise_coefficient: noise_relative * value,
            })
        }
        _ => None,
    };
    let drift_mobility = hall_mobility.map(|mobility| mobility.scaled(1.0 / sample.hall_factor));

    let mut evidence = resistance.evidence;
    evidence.add(hall.evidence);
    for (cell, _) in used_cells.iter() {
        evidence.add(cell.noise);
    }
    let estimates = [
        sheet,
        resistivity,
        hall.hall_resistance,
        sheet_hall_coefficient,
        hall_coefficient,
        sheet_density,
        density,
        hall_mobility,
        drift_mobility,
    ];

    // A drifting group left as measured: its resistance readings (at zero field, or the
    // field readings they came from) and its Hall readings refer to their own temperatures.
    let drift_relative = group.uncorrected_drift.map_or(DriftTerms::default(), |drift| {
        raised.raise(flags::DRIFT_UNCORRECTED);
        let field_temperatures = field.map_or(ReadingTemperatures::default(), |cells| cells.mean_temperatures);
        let temperatures = ReadingTemperatures {
            resistance_k: if from_field {
                field_temperatures.resistance_k
            } else {
                zero.mean_temperatures.resistance_k
            },
            hall_k: field_temperatures.hall_k,
        };
        drift.relative_uncertainties(group.temperature_k, temperatures)
    });

    gaps.add(hall.gaps);
    let flags = raised.0;
    if let Some(warning) = grouping_warning(group, field, flags, gaps, settings) {
        warnings.push(warning);
    }
    let reading_count = zero.count + field.map_or(0, |cells| cells.count);
    let mut record = RowRecord {
        temperature_k: group.temperature_k,
        temperature_k_unc: quadrature_sum(
            group.temperature_reading_unc_k,
            sample.calibration.temperature_accuracy_k,
        ),
        temperature_spread_k: group.temperature_spread_k,
        optional: [0.0; optional::COUNT],
        estimates: [Estimate::default(); 9],
        present: 0,
        evidence,
        reading_count,
        flags,
        carrier: match carrier_type {
            Some("n") => 1,
            Some(_) => 2,
            None => 0,
        },
        drift_corrected: group.drift_corrected,
        drift_relative,
    };
    record.set_optional(optional::FIELD, field_t);
    record.set_optional(optional::RESISTANCE_A, resistance.resistance_a_ohm);
    record.set_optional(optional::RESISTANCE_B, resistance.resistance_b_ohm);
    record.set_optional(optional::RESISTANCE_RATIO, resistance.resistance_ratio);
    record.set_optional(optional::GEOMETRY_FACTOR, resistance.geometry_factor);
    record.set_optional(optional::RECIPROCITY, resistance.reciprocity_mismatch);
    record.set_optional(optional::CURRENT_REVERSAL, current_reversal_mismatch);
    record.set_optional(optional::HALL_SPREAD, hall.hall_spread);
    record.set_optional(optional::OFFSET_RATIO, thermoelectric_offset_ratio);
    record.set_optional(optional::MISALIGNMENT, hall.misalignment_ratio);
    for (index, estimate) in estimates.into_iter().enumerate() {
        if let Some(estimate) = estimate {
            record.estimates[index] = estimate;
            record.present |= 1 << (ESTIMATE_BIT + index as u32);
        }
    }
    record
}

/// The values of the first row of a group that the drift slopes read, by the code of
/// [`build_row`] at [`Detail::Values`]: the same values to the bit, without the rest of the
/// row. The cells may be [`Detail::Values`] summaries.
pub(super) fn draft_row(group: &TemperatureGroup<'_>, zero: &ZeroFieldCells, field: Option<&FieldCells>) -> RowDraft {
    let layout = layout(group.sample.geometry);
    // Flags, warnings and the cells used are what the full row reports: not kept here.
    let mut raised = RaisedFlags::default();
    let mut warnings = Vec::new();
    let mut used_cells = UsedCells::new();
    let (_, slot_resistance) = resistance_estimates(layout, zero, field, &mut used_cells);
    let resistance = sheet_resistance(&slot_resistance, group, Detail::Values, &mut raised, &mut warnings);
    let hall_resistance = field
        .and_then(|field| hall_resistance(field, layout, Detail::Values, &mut used_cells, &mut raised).hall_resistance);
    RowDraft {
        temperature_k: group.temperature_k,
        sheet_resistance: resistance.sheet_resistance.map(|estimate| estimate.value),
        sheet_hall_coefficient: sheet_hall_coefficient(hall_resistance, field).map(|estimate| estimate.value),
    }
}

/// The resistance configurations' slots of a geometry.
fn resistance_slots(layout: &Layout) -> impl Iterator<Item = usize> + '_ {
    layout.families.iter().flat_map(|family| family.iter().copied())
}

/// Whether a row's resistances come from its field readings (no resistance configuration
/// at zero field), and each resistance configuration's estimate from that source.
fn resistance_estimates<'a>(
    layout: &Layout,
    zero: &'a ZeroFieldCells,
    field: Option<&'a FieldCells>,
    used_cells: &mut UsedCells<'a>,
) -> (bool, [Option<Estimate>; MAX_SLOTS]) {
    let zero_has_resistance = resistance_slots(layout).any(|slot| zero.cells[slot].is_some());
    let from_field = !zero_has_resistance && field.is_some();
    let mut slot_resistance: [Option<Estimate>; MAX_SLOTS] = [None; MAX_SLOTS];
    for slot in resistance_slots(layout) {
        slot_resistance[slot] = match (from_field, field) {
            (true, Some(field)) => field_even_resistance(&field.cells[slot], used_cells),
            _ => zero.cells[slot].as_ref().map(|cell| {
                used_cells.push((cell, true));
                cell.fit.resistance
            }),
        };
    }
    (from_field, slot_resistance)
}

/// The resistance step of the sample's geometry.
// Inlined into both callers, `build_row` and `draft_row`, with the van der Pauw and Hall
// steps: a call that returns its parts through memory costs more per row than the code.
#[inline(always)]
fn sheet_resistance(
    slot_resistance: &[Option<Estimate>; MAX_SLOTS],
    group: &TemperatureGroup<'_>,
    detail: Detail,
    raised: &mut RaisedFlags,
    warnings: &mut Vec<String>,
) -> ResistancePart {
    match group.sample.geometry {
        Geometry::VanDerPauw => van_der_pauw_resistance(slot_resistance, group, detail, raised, warnings),
        Geometry::HallBar { length_m, width_m } => {
            hall_bar_resistance(slot_resistance, length_m, width_m, group, detail, raised, warnings)
        }
    }
}

/// R_Hs = R_xy / |B|.
fn sheet_hall_coefficient(hall_resistance: Option<Estimate>, field: Option<&FieldCells>) -> Option<Estimate> {
    match (hall_resistance, field) {
        (Some(hall_resistance), Some(field)) => Some(hall_resistance.scaled(1.0 / field.field_t)),
        _ => None,
    }
}

/// The float columns of a finished row, in the order of [`super::contract::float_column`], and a
/// mask of the present ones (bit i for column i).
pub(super) type FinishedFloats = ([f64; super::contract::float_column::COUNT], u64);

/// A row's float columns once the pooled voltage noise of its sample is known: the values
/// and their uncertainty budgets.
pub(super) fn finish_row(record: &RowRecord, hall_factor: f64, series: &SeriesBudget) -> FinishedFloats {
    use super::contract::float_column as column;
    let mut values = [0.0; column::COUNT];
    let mut present = 0u64;
    let mut put = |index: usize, value: Option<f64>| {
        if let Some(value) = value {
            values[index] = value;
            present |= 1 << index;
        }
    };
    put(column::TEMPERATURE_K, Some(record.temperature_k));
    put(column::TEMPERATURE_K_UNC, Some(record.temperature_k_unc));
    put(column::TEMPERATURE_SPREAD_K, Some(record.temperature_spread_k));
    put(column::FIELD_T, record.optional(optional::FIELD));
    put(column::RESISTANCE_A, record.optional(optional::RESISTANCE_A));
    put(column::RESISTANCE_B, record.optional(optional::RESISTANCE_B));
    put(column::RESISTANCE_RATIO, record.optional(optional::RESISTANCE_RATIO));
    put(column::GEOMETRY_FACTOR, record.optional(optional::GEOMETRY_FACTOR));
    let value = |quantity| record.estimate(quantity).map(|estimate: Estimate| estimate.value);
    let row_scale = noise_scale(&record.evidence);
    let budget = |quantity| record.budget(quantity, row_scale, series);
    put(column::SHEET_RESISTANCE, value(Quantity::SheetResistance));
    let sheet = budget(Quantity::SheetResistance);
    put(column::SHEET_RESISTANCE_UNC, sheet.total);
    put(column::SHEET_RESISTANCE_UNC_STAT, sheet.statistical);
    put(column::SHEET_RESISTANCE_UNC_SYS, sheet.systematic);
    put(column::RESISTIVITY, value(Quantity::Resistivity));
    let resistivity = budget(Quantity::Resistivity);
    put(column::RESISTIVITY_UNC, resistivity.total);
    put(column::RESISTIVITY_UNC_STAT, resistivity.statistical);
    put(column::RESISTIVITY_UNC_SYS, resistivity.systematic);
    put(column::HALL_RESISTANCE, value(Quantity::HallResistance));
    put(column::HALL_RESISTANCE_UNC, budget(Quantity::HallResistance).total);
    put(column::SHEET_HALL_COEFFICIENT, value(Quantity::SheetHallCoefficient));
    put(
        column::SHEET_HALL_COEFFICIENT_UNC,
        budget(Quantity::SheetHallCoefficient).total,
    );
    put(column::HALL_COEFFICIENT, value(Quantity::HallCoefficient));
    put(column::HALL_COEFFICIENT_UNC, budget(Quantity::HallCoefficient).total);
    put(column::SHEET_DENSITY, value(Quantity::SheetDensity));
    let sheet_density = budget(Quantity::SheetDensity);
    put(column::SHEET_DENSITY_UNC, sheet_density.total);
    put(column::SHEET_DENSITY_UNC_STAT, sheet_density.statistical);
    put(column::SHEET_DENSITY_UNC_SYS, sheet_density.systematic);
    put(column::DENSITY, value(Quantity::Density));
    let density = budget(Quantity::Density);
    put(column::DENSITY_UNC, density.total);
    put(column::DENSITY_UNC_STAT, density.statistical);
    put(column::DENSITY_UNC_SYS, density.systematic);
    put(column::HALL_MOBILITY, value(Quantity::HallMobility));
    let mobility = budget(Quantity::HallMobility);
    put(column::HALL_MOBILITY_UNC, mobility.total);
    put(column::HALL_MOBILITY_UNC_STAT, mobility.statistical);
    put(column::HALL_MOBILITY_UNC_SYS, mobility.systematic);
    put(column::DRIFT_MOBILITY, value(Quantity::DriftMobility));
    put(column::DRIFT_MOBILITY_UNC, budget(Quantity::DriftMobility).total);
    put(column::HALL_FACTOR, Some(hall_factor));
    put(column::RECIPROCITY_MISMATCH, record.optional(optional::RECIPROCITY));
    put(
        column::CURRENT_REVERSAL_MISMATCH,
        record.optional(optional::CURRENT_REVERSAL),
    );
    put(column::HALL_SPREAD, record.optional(optional::HALL_SPREAD));
    put(
        column::THERMOELECTRIC_OFFSET_RATIO,
        record.optional(optional::OFFSET_RATIO),
    );
    put(column::MISALIGNMENT_RATIO, record.optional(optional::MISALIGNMENT));
    put(column::READING_NOISE_V, record.evidence.pooled_noise_v());
    (values, present)
}

/// For a row that lacks configurations, field signs or field readings: what is missing, what
/// it leaves null and what to measure; and, when the sample has such readings in other rows,
/// the grouping parameters that decide which readings share a row.
fn grouping_warning(
    group: &TemperatureGroup<'_>,
    field: Option<&FieldCells>,
    raised: FlagSet,
    gaps: ConfigurationGaps,
    settings: &ReduceSettings,
) -> Option<String> {
    // Most rows warn of nothing: the message is only formatted for those that do.
    let warns = [
        flags::NO_FIELD_DATA,
        flags::MISSING_CONFIGURATIONS,
        flags::NO_FIELD_REVERSAL,
    ]
    .iter()
    .any(|flag| raised.contains(flag));
    if !warns {
        return None;
    }
    let geometry = group.sample.geometry;
    let layout = layout(geometry);
    let at = match field {
        Some(cells) => format!("|B| = {:.4} T", cells.field_t),
        None => "zero field".to_owned(),
    };
    let place = format!("sample {:?} at {:.3} K, {at}", group.sample.name, group.temperature_k);
    let mut parts: Vec<String> = Vec::new();
    if raised.contains(flags::NO_FIELD_DATA) {
        parts.push(format!(
            "no reading above zero_field_tolerance_T = {} T, so no Hall quantities; lower zero_field_tolerance_T if the Hall field is below it, or measure the Hall configurations at +B and -B",
            settings.zero_field_tolerance_t
        ));
    }
    // Pair notation has a comma inside each label, so labels are joined by "and".
    let labels = |mask: u8| -> String {
        (0..MAX_SLOTS)
            .filter(|slot| mask & (1 << slot) != 0)
            .map(|slot| configuration_label(geometry, slot))
            .collect::<Vec<_>>()
            .join(" and ")
    };
    let several = |mask: u8| mask.count_ones() > 1;
    let configurations = |mask: u8| {
        let noun = if several(mask) {
            "configurations"
        } else {
            "configuration"
        };
        format!("{noun} {}", labels(mask))
    };
    let them = |mask: u8| if several(mask) { "them" } else { "it" };
    let family_mask = |family: &[usize; 2]| family.iter().fold(0u8, |mask, slot| mask | (1 << slot));
    // Resistance configurations, family by family (or all at once when none was measured).
    let resistance_bits = resistance_slots(layout).fold(0u8, |mask, slot| mask | (1 << slot));
    let families: &[[usize; 2]] = if geometry == Geometry::VanDerPauw
        && gaps.missing & resistance_bits == resistance_bits
    {
        parts.push(format!(
            "no resistance configuration measured ({}), so resistance_a_ohm, resistance_b_ohm, resistance_ratio, geometry_factor, sheet_resistance_ohm_sq, resistivity_ohm_m and the mobilities are null; measure them",
            labels(resistance_bits)
        ));
        &[]
    } else {
        layout.families
    };
    for (index, family) in families.iter().enumerate() {
        let family_bits = family_mask(family);
        let missing = gaps.missing & family_bits;
        if missing == 0 {
            continue;
        }
        let present = family_bits & !missing;
        let text = match (geometry, present == 0) {
            (Geometry::VanDerPauw, true) => {
                let (name, column, other) = if index == 0 {
                    ("R_A", "resistance_a_ohm", "R_B")
                } else {
                    ("R_B", "resistance_b_ohm", "R_A")
                };
                if raised.contains(flags::ASSUMED_SYMMETRIC) {
                    parts.push(format!(
                        "{name} not measured ({}): sheet_resistance_ohm_sq is pi {other} / ln 2 under assume_symmetric_sample, exact only for a sample symmetric under a 90-degree rotation, and its uncertainty does not include any asymmetry; {column}, resistance_ratio and geometry_factor are null; measure {} to check the symmetry",
                        configurations(missing),
                        labels(missing),
                    ));
                    continue;
                }
                format!(
                    "{name} not measured ({}): van der Pauw's equation needs both R_A and R_B, and {other} alone gives the sheet resistance only for a sample symmetric under a 90-degree rotation, so {column}, resistance_ratio, geometry_factor, sheet_resistance_ohm_sq, resistivity_ohm_m and the mobilities are null; measure {} (either one gives {name}, both check its reciprocity)",
                    configurations(missing),
                    labels(missing),
                )
            }
            (Geometry::VanDerPauw, false) => {
                let name = if index == 0 { "R_A" } else { "R_B" };
                format!(
                    "{} not measured: {name} rests on {} alone and its reciprocity is not checked; measure {} as well",
                    configurations(missing),
                    labels(present),
                    them(missing),
                )
            }
            (Geometry::HallBar { .. }, true) => format!(
                "no longitudinal configuration measured ({}), so resistance_a_ohm (R_xx), sheet_resistance_ohm_sq, resistivity_ohm_m and the mobilities are null; measure {}",
                labels(missing),
                them(missing),
            ),
            (Geometry::HallBar { .. }, false) => format!(
                "longitudinal {} not measured: R_xx rests on {} alone (one edge of the bar); measure {} as well",
                configurations(missing),
                labels(present),
                them(missing),
            ),
        };
        parts.push(text);
    }
    let hall_bits = layout.hall_slots.iter().fold(0u8, |mask, slot| mask | (1 << slot));
    let missing_hall = gaps.missing & hall_bits;
    let reversed_hall = hall_bits & !missing_hall & !gaps.plus_field_only & !gaps.minus_field_only;
    if missing_hall == hall_bits {
        parts.push(format!(
            "no Hall configuration measured at this field ({}), so the Hall quantities are null; measure them at +B and -B",
            labels(missing_hall)
        ));
    } else if missing_hall != 0 {
        parts.push(format!(
            "Hall {} not measured: the Hall resistance rests on {} alone, so hall_spread and the uncertainty compare its current polarities only, not the two configurations; measure {} as well",
            configurations(missing_hall),
            labels(hall_bits & !missing_hall),
            them(missing_hall),
        ));
    }
    let field_t = field.map_or(0.0, |cells| cells.field_t);
    for (mask, measured, other) in [
        (gaps.plus_field_only, "+B", -field_t),
        (gaps.minus_field_only, "-B", field_t),
    ] {
        if mask == 0 {
            continue;
        }
        let consequence = if reversed_hall == 0 {
            "so the Hall quantities are null"
        } else if several(mask) {
            "so they do not enter the Hall resistance"
        } else {
            "so it does not enter the Hall resistance"
        };
        parts.push(format!(
            "Hall {} measured at {measured} only: the Hall voltage is the part odd in the field, which needs readings at both field signs, {consequence}; measure {} at {other:.4} T as well",
            configurations(mask),
            them(mask),
        ));
    }
    // The grouping parameters matter only if the sample has the missing readings elsewhere,
    // in a row they might have been split from.
    let seen = group.seen;
    let split = gaps.missing & seen.any != 0
        || gaps.plus_field_only & seen.minus_field != 0
        || gaps.minus_field_only & seen.plus_field != 0;
    if split {
        parts.push(format!(
            "the sample has such readings in other rows: if one setpoint's readings were split, widen field_tolerance_T (now {} T, the width of a field setpoint) or zero_field_tolerance_T (now {} T), or temperature_tolerance_K (now {} K) for a temperature",
            settings.field_tolerance_t, settings.zero_field_tolerance_t, settings.temperature_tolerance_k
        ));
    }
    Some(format!("{place}: {}", parts.join("; ")))
}

/// A configuration of the geometry by its slot, in pair notation (`mobilis_physics::contacts`:
/// current in and out, then the voltage pair): "21,34".
pub(super) fn configuration_label(geometry: Geometry, slot: usize) -> String {
    let configuration = match geometry {
        Geometry::VanDerPauw => Configuration::VAN_DER_PAUW[slot],
        Geometry::HallBar { .. } => Configuration::HALL_BAR[slot],
    };
    let [i_in, i_out, v_pos, v_neg] = configuration.canonical_contacts();
    format!("{i_in}{i_out},{v_pos}{v_neg}")
}

/// Which configurations a sample has readings of anywhere in its series, by slot bit: at
/// any field, and at positive and negative field beyond `zero_field_tolerance_T`.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub(super) struct SlotsSeen {
    pub any: u8,
    pub plus_field: u8,
    pub minus_field: u8,
}

fn exceeds(value: Option<f64>, limit: f64) -> bool {
    value.is_some_and(|value| value > limit)
}

/// The field-even part (R(+B) + R(-B)) / 2 of a resistance configuration, or the one field
/// sign present.
fn field_even_resistance<'a>(cells: &'a [Option<CellSummary>; 2], used_cells: &mut UsedCells<'a>) -> Option<Estimate> {
    match cells {
        [Some(plus), Some(minus)] => {
            used_cells.push((plus, true));
            used_cells.push((minus, true));
            Some(Estimate {
                value: 0.5 * (plus.fit.resistance.value + minus.fit.resistance.value),
                standard_error: quadrature(&[plus.fit.resistance.standard_error, minus.fit.resistance.standard_error])
                    .map(|u| 0.5 * u),
                noise_coefficient: 0.5
                    * quadrature_sum(
                        plus.fit.resistance.noise_coefficient,
                        minus.fit.resistance.noise_coefficient,
                    ),
            })
        }
        [Some(only), None] | [None, Some(only)] => {
            used_cells.push((only, true));
            Some(only.fit.resistance)
        }
        [None, None] => None,
    }
}

#[inline(always)]
#[allow(
    clippy::neg_cmp_op_on_partial_ord,
    reason = "`!(x > 0.0)` refuses NaN too, in one test"
)]
fn van_der_pauw_resistance(
    slot_resistance: &[Option<Estimate>; MAX_SLOTS],
    group: &TemperatureGroup<'_>,
    detail: Detail,
    raised: &mut RaisedFlags,
    warnings: &mut Vec<String>,
) -> ResistancePart {
    let mut reciprocity_mismatch: Option<f64> = None;
    let mut evidence = NoiseEvidence::default();
    let mut family_estimate = |slots: [usize; 2]| -> Option<Estimate> {
        let mut storage = [Estimate::default(); 2];
        let mut count = 0;
        for estimate in slots.iter().filter_map(|&slot| slot_resistance[slot]) {
            storage[count] = estimate;
            count += 1;
        }
        let present = &storage[..count];
        if detail == Detail::Values {
            return combine_redundant(present);
        }
        evidence.add(redundancy_evidence(present));
        if let [direct, reciprocal] = present[..] {
            let mean = 0.5 * (direct.value + reciprocal.value);
            let mismatch = (direct.value - reciprocal.value).abs() / mean.abs();
            reciprocity_mismatch = Some(reciprocity_mismatch.map_or(mismatch, |max: f64| max.max(mismatch)));
        }
        combine_redundant(present)
    };
    let family_a = family_estimate(VAN_DER_PAUW_LAYOUT.families[0]);
    let family_b = family_estimate(VAN_DER_PAUW_LAYOUT.families[1]);
    // Van der Pauw's equation needs both R_A and R_B (van der Pauw, Philips Res. Rep. 13, 1
    // (1958)); with one family only, R_s = pi R / ln 2 would hold only for a sample
    // symmetric under a 90-degree rotation, which nothing in the readings shows. So the
    // family measured is reported, the other stays null, and so does everything that needs
    // both: the ratio, the factor f and the sheet resistance (`missing_configurations`,
    // whose warning names what to measure).
    let mut part = ResistancePart {
        resistance_a_ohm: family_a.map(|a| a.value),
        resistance_b_ohm: family_b.map(|b| b.value),
        reciprocity_mismatch,
        evidence,
        ..ResistancePart::default()
    };
    if let Some(measured) = [family_a, family_b]
        .into_iter()
        .flatten()
        .find(|family| !(family.value > 0.0))
    {
        // A nonpositive resistance is reported whether or not the other family exists.
        if detail == Detail::Full {
            let values = match (family_a, family_b) {
                (Some(a), Some(b)) => format!("R_A = {} ohm, R_B = {} ohm", a.value, b.value),
                (Some(a), None) => format!("R_A = {} ohm", a.value),
                _ => format!("R_B = {} ohm", measured.value),
            };
            raise_nonpositive(group, &values, raised, warnings);
        }
        return part;
    }
    let (resistance_a, resistance_b) = match (family_a, family_b) {
        (Some(a), Some(b)) => (a, b),
        (Some(only), None) | (None, Some(only)) if group.assume_symmetric => {
            // The lab states R_A = R_B: van der Pauw's equation then gives R_s = pi R / ln 2
            // exactly, and the uncertainty is that of the one family measured (nothing in the
            // readings bounds an asymmetry).
            part.sheet_resistance = Some(only.scaled(std::f64::consts::PI / std::f64::consts::LN_2));
            if detail == Detail::Full {
                raised.raise(flags::ASSUMED_SYMMETRIC);
            }
            return part;
        }
        _ => return part,
    };
    let (a, b) = (resistance_a.value, resistance_b.value);
    if detail == Detail::Values {
        part.sheet_resistance = van_der_pauw::sheet_resistance(a, b).ok().map(|value| Estimate {
            value,
            standard_error: None,
            noise_coefficient: 0.0,
        });
        return part;
    }
    part.resistance_ratio = Some((a / b).max(b / a));
    // Positive finite inputs cannot fail; an error here would be a defect of the solver.
    // One solution serves the sheet resistance, the factor f and the gradient, without
    // solving the equation three times per row.
    let solution = van_der_pauw::solve(a, b).ok();
    let sheet = solution.map(|solution| solution.sheet_resistance);
    let gradient = solution.map(|solution| solution.gradient());
    part.geometry_factor = solution.map(|solution| solution.correction_factor());
    part.sheet_resistance = sheet.map(|value| {
        let standard_error = gradient.and_then(|(gradient_a, gradient_b)| {
            quadrature(&[
                resistance_a.standard_error.map(|u| gradient_a * u),
                resistance_b.standard_error.map(|u| gradient_b * u),
            ])
        });
        let noise_coefficient = gradient.map_or(0.0, |(gradient_a, gradient_b)| {
            quadrature_sum(
                gradient_a * resistance_a.noise_coefficient,
                gradient_b * resistance_b.noise_coefficient,
            )
        });
        Estimate {
            value,
            standard_error,
            noise_coefficient,
        }
    });
    part
}

#[allow(
    clippy::neg_cmp_op_on_partial_ord,
    reason = "`!(x > y)` refuses NaN too, in one test"
)]
fn hall_bar_resistance(
    slot_resistance: &[Option<Estimate>; MAX_SLOTS],
    length_m: f64,
    width_m: f64,
    group: &TemperatureGroup<'_>,
    detail: Detail,
    raised: &mut RaisedFlags,
    warnings: &mut Vec<String>,
) -> ResistancePart {
    let mut storage = [Estimate::default(); 2];
    let mut count = 0;
    for estimate in HALL_BAR_LAYOUT.families[0]
        .iter()
        .filter_map(|&slot| slot_resistance[slot])
    {
        storage[count] = estimate;
        count += 1;
    }
    let present = &storage[..count];
    let evidence = redundancy_evidence(present);
    let Some(longitudinal) = combine_redundant(present) else {
        return ResistancePart::default();
    };
    let mut part = ResistancePart {
        resistance_a_ohm: Some(longitudinal.value),
        evidence,
        ..ResistancePart::default()
    };
    if !(longitudinal.value > 0.0) {
        if detail == Detail::Full {
            raise_nonpositive(group, &format!("R_xx = {} ohm", longitudinal.value), raised, warnings);
        }
        return part;
    }
    // rho_s = R_xx W / L: the squares between the voltage contacts.
    let squares = width_m / length_m;
    part.sheet_resistance = Some(longitudinal.scaled(squares));
    part
}

fn raise_nonpositive(group: &TemperatureGroup<'_>, values: &str, raised: &mut RaisedFlags, warnings: &mut Vec<String>) {
    raised.raise(flags::NONPOSITIVE_RESISTANCE);
    warnings.push(format!(
        "sample {:?} at {:.3} K: {values} is not positive; check that the contacts are numbered counterclockwise seen from the +B side and that none is broken",
        group.sample.name, group.temperature_k
    ));
}

/// The Hall resistance from the field-odd part of each Hall configuration and current
/// polarity (the NIST V_C..V_F over 2I), and the field-even (misalignment) part.
#[inline(always)]
fn hall_resistance<'a>(
    field: &'a FieldCells,
    layout: &Layout,
    detail: Detail,
    used_cells: &mut UsedCells<'a>,
    raised: &mut RaisedFlags,
) -> HallPart {
    let mut odd_parts: Few<Estimate, 4> = Few::new();
    let mut misalignment: Few<f64, 2> = Few::new();
    let mut gaps = ConfigurationGaps::default();
    for slot in layout.hall_slots {
        let [plus, minus] = &field.cells[slot];
        for cell in [plus, minus].into_iter().flatten() {
            used_cells.push((cell, false));
        }
        let (plus, minus) = match (plus, minus) {
            (Some(plus), Some(minus)) => (plus, minus),
            (None, None) => {
                raised.raise(flags::MISSING_CONFIGURATIONS);
                gaps.missing |= 1 << slot;
                continue;
            }
            (Some(_), None) => {
                raised.raise(flags::NO_FIELD_REVERSAL);
                gaps.plus_field_only |= 1 << slot;
                continue;
            }
            (None, Some(_)) => {
                raised.raise(flags::NO_FIELD_REVERSAL);
                gaps.minus_field_only |= 1 << slot;
                continue;
            }
        };
        let mut even_parts: Few<f64, 2> = Few::new();
        for polarity in 0..2 {
            if let (Some(at_plus), Some(at_minus)) = (plus.polarity[polarity], minus.polarity[polarity]) {
                // (R(+B1) - R(-B2)) / (B1 + B2) is R_Hs whatever the two fields; times the
                // row's field it is the Hall resistance at that field.
                let field_sum = plus.polarity_field_t[polarity] + minus.polarity_field_t[polarity];
                let scale = if field_sum > 0.0 {
                    field.field_t / field_sum
                } else {
                    0.5
                };
                odd_parts.push(Estimate {
                    value: scale * (at_plus.value - at_minus.value),
                    standard_error: quadrature(&[at_plus.standard_error, at_minus.standard_error]).map(|u| scale * u),
                    noise_coefficient: scale * quadrature_sum(at_plus.noise_coefficient, at_minus.noise_coefficient),
                });
                even_parts.push(0.5 * (at_plus.value + at_minus.value));
            }
        }
        // The thermoelectric offset enters V/I as V_offset / I, odd in the current: averaging
        // the two polarities leaves the misalignment alone.
        if !even_parts.is_empty() {
            misalignment.push(even_parts.iter().sum::<f64>() / even_parts.len() as f64);
        }
    }
    if odd_parts.is_empty() {
        // The flags raised above (missing configuration, one field sign) or the missing
        // polarity found by the caller say why the Hall quantities are null.
        return HallPart {
            gaps,
            ..HallPart::default()
        };
    }
    let mut odd_storage = [Estimate::default(); 4];
    let odd_count = estimates(&odd_parts, &mut odd_storage);
    let odd_parts = &odd_storage[..odd_count];
    let hall_resistance = combine_redundant(odd_parts).expect("at least one odd part");
    if detail == Detail::Values {
        return HallPart {
            hall_resistance: Some(hall_resistance),
            ..HallPart::default()
        };
    }
    let mut value_storage = [0.0; 4];
    for (slot, estimate) in value_storage.iter_mut().zip(odd_parts) {
        *slot = estimate.value;
    }
    let values = &value_storage[..odd_count];
    let mean = mean_with_standard_error(values).expect("at least one odd part").value;
    let mixed_signs = values.iter().any(|value| *value > 0.0) && values.iter().any(|value| *value < 0.0);
    if mixed_signs {
        raised.raise(flags::HALL_INCONSISTENT);
    }
    let hall_spread = (values.len() >= 2 && mean != 0.0).then(|| {
        let max = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let min = values.iter().copied().fold(f64::INFINITY, f64::min);
        (max - min) / mean.abs()
    });
    let misalignment_ratio = (mean != 0.0)
        .then(|| {
            misalignment
                .iter()
                .map(|even| even.abs() / mean.abs())
                .fold(None, |max: Option<f64>, ratio| {
                    Some(max.map_or(ratio, |max| max.max(ratio)))
                })
        })
        .flatten();
    HallPart {
        hall_resistance: Some(hall_resistance),
        hall_spread,
        misalignment_ratio,
        evidence: redundancy_evidence(odd_parts),
        gaps,
    }
}
