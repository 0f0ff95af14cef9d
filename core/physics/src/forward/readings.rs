//! Raw four-terminal readings generated from known sample parameters, as an instrument
//! would record them: the van der Pauw and Hall-bar configurations of [`crate::contacts`],
//! both current polarities, both field signs, thermoelectric offsets, misalignment, noise
//! and the wiring habits of real labs.
//!
//! The model works in each configuration's canonical orientation (the table in
//! [`crate::contacts`]): for a canonical current I_c (+I or -I),
//!
//! V_c = R_cfg(B) I_c + offset_cfg + noise,
//!
//! where R_cfg(B) is
//! - R_A or R_B (from the sheet resistance and the ratio R_B/R_A through the van der Pauw
//!   relation) plus an optional field-odd part k B on the direct and -k B on the reciprocal
//!   configuration, which keeps reciprocity R_direct(B) = R_reciprocal(-B);
//! - R_Hs B + misalignment on the Hall configurations, with R_Hs the signed sheet Hall
//!   coefficient (m^2/C, positive for holes) and the misalignment even in field;
//! - R_s L / w along a Hall bar and R_Hs B + misalignment across it.
//!
//! The thermoelectric offset belongs to the voltage leads and does not follow the current,
//! so it cancels in the difference of the two polarities. The noise is Gaussian with
//! standard deviation `absolute_v + relative * |V_c|`. The recorded reading then follows
//! the physical wiring: `current_A = current_sign * I_c` and
//! `voltage_V = voltage_sign * V_c`, with the signs of [`crate::contacts::Classified`].
//!
//! Readings come out in a fixed order (field, then configuration, then polarity), and the
//! noise is drawn in that order, so a seed fixes every value.
//!
//! # A lab's conditions
//!
//! [`lab_van_der_pauw_series`] generates a whole temperature series as a real setup records
//! it ([`LabConditions`]): a current autoranged per temperature on a 1-2-5 ladder, voltmeter
//! noise in volts (the protocol's [`VoltageNoise`]), a stage temperature that drifts between
//! readings (each reading records its own moment's temperature, and the sample follows it),
//! a remanent field at nominal zero, field setpoints that wander, and calibration errors of
//! thickness, field, current, voltage and thermometer drawn once per series
//! ([`CalibrationErrors`]). It is the generator for coverage tests: draw many series, reduce
//! and fit each, and count how often the truth lies within the reported uncertainties.

use super::{require_finite, require_non_negative, require_positive, ForwardError};
use crate::contacts::{Configuration, ResistanceFamily};
use crate::readings::RawReading;
use crate::van_der_pauw::resistances_for;
use mobilis_numerics::noise::Rng;

/// How the lab reverses the current.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CurrentReversal {
    /// The leads stay on the canonical contacts; the source changes sign
    /// (`current_A` negative for the reversed polarity).
    SourceSign,
    /// The source stays positive; the two current leads are exchanged
    /// (`i_in` and `i_out` swap, `current_A` always positive).
    SwapLeads,
}

/// How the voltmeter is wired.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum VoltmeterWiring {
    /// `v_pos` and `v_neg` on the canonical + and - contacts.
    Canonical,
    /// Always the other way round from canonical.
    Reversed,
    /// Reversed exactly when the current leads are swapped, as a switch matrix that rotates
    /// all four leads together does (the NIST R_12,43 after R_21,34).
    FollowsCurrentLeads,
}

/// Gaussian voltage noise with standard deviation `absolute_v + relative * |V|`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct VoltageNoise {
    /// Field-independent floor, V.
    pub absolute_v: f64,
    /// Fraction of the reading's magnitude.
    pub relative: f64,
}

impl VoltageNoise {
    /// No noise: readings equal the model exactly.
    pub const NONE: VoltageNoise = VoltageNoise {
        absolute_v: 0.0,
        relative: 0.0,
    };

    fn standard_deviation_v(&self, voltage_v: f64) -> f64 {
        self.absolute_v + self.relative * voltage_v.abs()
    }
}

/// What is measured and how: current, fields, configurations, wiring, noise.
#[derive(Debug, Clone, PartialEq)]
pub struct MeasurementProtocol {
    /// Current magnitude, A.
    pub current_a: f64,
    /// Field magnitudes, T; each is measured at +B and then -B.
    pub field_magnitudes_t: Vec<f64>,
    /// Whether readings at B = 0 are taken (before the in-field ones).
    pub include_zero_field: bool,
    /// Configurations measured at B = 0.
    pub zero_field_configurations: Vec<Configuration>,
    /// Configurations measured at +B and -B.
    pub in_field_configurations: Vec<Configuration>,
    /// Both current polarities (true) or the canonical one only.
    pub both_current_polarities: bool,
    pub current_reversal: CurrentReversal,
    pub voltmeter_wiring: VoltmeterWiring,
    pub noise: VoltageNoise,
}

impl MeasurementProtocol {
    /// Every van der Pauw configuration (the eight resistance and eight Hall readings of the
    /// NIST procedure at each field), at B = 0 and at +-B for each magnitude, both
    /// polarities, source-sign reversal, canonical voltmeter, no noise.
    pub fn van_der_pauw(current_a: f64, field_magnitudes_t: Vec<f64>) -> Self {
        MeasurementProtocol {
            current_a,
            field_magnitudes_t,
            include_zero_field: true,
            zero_field_configurations: Configuration::VAN_DER_PAUW.to_vec(),
            in_field_configurations: Configuration::VAN_DER_PAUW.to_vec(),
            both_current_polarities: true,
            current_reversal: CurrentReversal::SourceSign,
            voltmeter_wiring: VoltmeterWiring::Canonical,
            noise: VoltageNoise::NONE,
        }
    }

    /// Every Hall-bar configuration, otherwise as [`MeasurementProtocol::van_der_pauw`].
    pub fn hall_bar(current_a: f64, field_magnitudes_t: Vec<f64>) -> Self {
        MeasurementProtocol {
            zero_field_configurations: Configuration::HALL_BAR.to_vec(),
            in_field_configurations: Configuration::HALL_BAR.to_vec(),
            ..MeasurementProtocol::van_der_pauw(current_a, field_magnitudes_t)
        }
    }

    /// The usual split: resistance configurations at zero field only, Hall configurations
    /// in field only.
    pub fn with_resistance_at_zero_and_hall_in_field(self) -> Self {
        let all: Vec<Configuration> = self
            .zero_field_configurations
            .iter()
            .chain(self.in_field_configurations.iter())
            .copied()
            .collect();
        let mut resistance: Vec<Configuration> = Vec::new();
        let mut hall: Vec<Configuration> = Vec::new();
        for configuration in all {
            let list = if configuration.is_hall() {
                &mut hall
            } else {
                &mut resistance
            };
            if !list.contains(&configuration) {
                list.push(configuration);
            }
        }
        MeasurementProtocol {
            include_zero_field: true,
            zero_field_configurations: resistance,
            in_field_configurations: hall,
            ..self
        }
    }

    fn validate(&self) -> Result<(), ForwardError> {
        require_positive("current_a", self.current_a)?;
        for &field in &self.field_magnitudes_t {
            require_non_negative("field_magnitudes_t", field)?;
        }
        require_non_negative("noise.absolute_v", self.noise.absolute_v)?;
        require_non_negative("noise.relative", self.noise.relative)?;
        Ok(())
    }

    /// The (field, configuration) pairs in measurement order.
    fn schedule(&self) -> Vec<(f64, Configuration)> {
        let mut schedule = Vec::new();
        if self.include_zero_field {
            for &configuration in &self.zero_field_configurations {
                schedule.push((0.0, configuration));
            }
        }
        for &magnitude in &self.field_magnitudes_t {
            for field in [magnitude, -magnitude] {
                for &configuration in &self.in_field_configurations {
                    schedule.push((field, configuration));
                }
            }
        }
        schedule
    }
}

/// A van der Pauw sample at one temperature, as the generator sees it.
#[derive(Debug, Clone, PartialEq)]
pub struct VanDerPauwSample {
    pub sample: String,
    pub temperature_k: f64,
    /// Sheet resistance R_s, ohm per square.
    pub sheet_resistance_ohm_sq: f64,
    /// R_B / R_A (1 for a symmetric square).
    pub resistance_ratio_b_over_a: f64,
    /// Signed sheet Hall coefficient R_Hs = R_H / t, m^2/C, positive for holes.
    pub sheet_hall_coefficient_m2_per_c: f64,
    /// Field-odd part k of the resistance configurations, ohm/T, for families A and B: the
    /// direct configuration reads R + k B, the reciprocal one R - k B.
    pub resistance_field_odd_ohm_per_t: [f64; 2],
    /// Thermoelectric offsets of the voltage leads in canonical orientation, V, in the order
    /// of [`Configuration::VAN_DER_PAUW`].
    pub thermoelectric_offsets_v: [f64; 6],
    /// Misalignment resistance of the two Hall configurations, ohm (even in field). A
    /// reciprocal linear sample has equal and opposite values on the two diagonals.
    pub hall_misalignment_ohm: [f64; 2],
}

impl VanDerPauwSample {
    /// An ideal sample: no offsets, no misalignment, no field-odd resistance.
    pub fn ideal(
        sample: impl Into<String>,
        temperature_k: f64,
        sheet_resistance_ohm_sq: f64,
        resistance_ratio_b_over_a: f64,
        sheet_hall_coefficient_m2_per_c: f64,
    ) -> Self {
        VanDerPauwSample {
            sample: sample.into(),
            temperature_k,
            sheet_resistance_ohm_sq,
            resistance_ratio_b_over_a,
            sheet_hall_coefficient_m2_per_c,
            resistance_field_odd_ohm_per_t: [0.0; 2],
            thermoelectric_offsets_v: [0.0; 6],
            hall_misalignment_ohm: [0.0; 2],
        }
    }

    fn validate(&self) -> Result<(), ForwardError> {
        require_positive("temperature_k", self.temperature_k)?;
        require_finite("sheet_hall_coefficient_m2_per_c", self.sheet_hall_coefficient_m2_per_c)?;
        for value in self
            .resistance_field_odd_ohm_per_t
            .iter()
            .chain(&self.thermoelectric_offsets_v)
            .chain(&self.hall_misalignment_ohm)
        {
            require_finite("offset, misalignment or field-odd term", *value)?;
        }
        Ok(())
    }

    /// The characteristic resistances (R_A, R_B), ohm.
    pub fn characteristic_resistances_ohm(&self) -> Result<(f64, f64), ForwardError> {
        Ok(resistances_for(
            self.sheet_resistance_ohm_sq,
            self.resistance_ratio_b_over_a,
        )?)
    }

    /// The exact canonical V/I of `configuration` at `field_t`, ohm, without offsets or
    /// noise.
    pub fn canonical_resistance_ohm(&self, configuration: Configuration, field_t: f64) -> Result<f64, ForwardError> {
        let (resistance_a, resistance_b) = self.characteristic_resistances_ohm()?;
        match configuration {
            Configuration::Resistance { family, reciprocal } => {
                let (base, odd) = match family {
                    ResistanceFamily::A => (resistance_a, self.resistance_field_odd_ohm_per_t[0]),
                    ResistanceFamily::B => (resistance_b, self.resistance_field_odd_ohm_per_t[1]),
                };
                let sign = if reciprocal { -1.0 } else { 1.0 };
                Ok(base + sign * odd * field_t)
            }
            Configuration::Hall { diagonal } => Ok(self.sheet_hall_coefficient_m2_per_c * field_t
                + self.hall_misalignment_ohm[usize::from(diagonal.min(1))]),
            other => Err(ForwardError::ForeignConfiguration(other, "van der Pauw")),
        }
    }

    /// The thermoelectric offset of `configuration`, V (canonical orientation).
    pub fn thermoelectric_offset_v(&self, configuration: Configuration) -> Result<f64, ForwardError> {
        Configuration::VAN_DER_PAUW
            .iter()
            .position(|&c| c == configuration)
            .map(|index| self.thermoelectric_offsets_v[index])
            .ok_or(ForwardError::ForeignConfiguration(configuration, "van der Pauw"))
    }
}

/// A Hall bar at one temperature, contacts as in [`crate::contacts`].
#[derive(Debug, Clone, PartialEq)]
pub struct HallBarSample {
    pub sample: String,
    pub temperature_k: f64,
    /// Sheet resistance R_s, ohm per square.
    pub sheet_resistance_ohm_sq: f64,
    /// Distance between the longitudinal voltage probes (3-4 and 5-6), m.
    pub probe_spacing_m: f64,
    /// Width of the bar, m.
    pub width_m: f64,
    /// Signed sheet Hall coefficient, m^2/C, positive for holes.
    pub sheet_hall_coefficient_m2_per_c: f64,
    /// Thermoelectric offsets in canonical orientation, V, in the order of
    /// [`Configuration::HALL_BAR`].
    pub thermoelectric_offsets_v: [f64; 4],
    /// Misalignment of the two transverse pairs, ohm (even in field).
    pub transverse_misalignment_ohm: [f64; 2],
}

impl HallBarSample {
    /// An ideal bar: no offsets and no misalignment.
    pub fn ideal(
        sample: impl Into<String>,
        temperature_k: f64,
        sheet_resistance_ohm_sq: f64,
        probe_spacing_m: f64,
        width_m: f64,
        sheet_hall_coefficient_m2_per_c: f64,
    ) -> Self {
        HallBarSample {
            sample: sample.into(),
            temperature_k,
            sheet_resistance_ohm_sq,
            probe_spacing_m,
            width_m,
            sheet_hall_coefficient_m2_per_c,
            thermoelectric_offsets_v: [0.0; 4],
            transverse_misalignment_ohm: [0.0; 2],
        }
    }

    fn validate(&self) -> Result<(), ForwardError> {
        require_positive("temperature_k", self.temperature_k)?;
        require_positive("sheet_resistance_ohm_sq", self.sheet_resistance_ohm_sq)?;
        require_positive("probe_spacing_m", self.probe_spacing_m)?;
        require_positive("width_m", self.width_m)?;
        require_finite("sheet_hall_coefficient_m2_per_c", self.sheet_hall_coefficient_m2_per_c)?;
        for value in self
            .thermoelectric_offsets_v
            .iter()
            .chain(&self.transverse_misalignment_ohm)
        {
            require_finite("offset or misalignment", *value)?;
        }
        Ok(())
    }

    /// The exact canonical V/I of `configuration` at `field_t`, ohm: R_s L / w along the
    /// bar, R_Hs B + misalignment across it.
    pub fn canonical_resistance_ohm(&self, configuration: Configuration, field_t: f64) -> Result<f64, ForwardError> {
        match configuration {
            Configuration::BarLongitudinal { .. } => {
                Ok(self.sheet_resistance_ohm_sq * self.probe_spacing_m / self.width_m)
            }
            Configuration::BarTransverse { pair } => Ok(self.sheet_hall_coefficient_m2_per_c * field_t
                + self.transverse_misalignment_ohm[usize::from(pair.min(1))]),
            other => Err(ForwardError::ForeignConfiguration(other, "Hall-bar")),
        }
    }

    /// The thermoelectric offset of `configuration`, V (canonical orientation).
    pub fn thermoelectric_offset_v(&self, configuration: Configuration) -> Result<f64, ForwardError> {
        Configuration::HALL_BAR
            .iter()
            .position(|&c| c == configuration)
            .map(|index| self.thermoelectric_offsets_v[index])
            .ok_or(ForwardError::ForeignConfiguration(configuration, "Hall-bar"))
    }
}

/// The physical contacts and signs of one reading: (i_in, i_out, v_pos, v_neg),
/// current_sign, voltage_sign.
fn physical_wiring(
    configuration: Configuration,
    canonical_current_positive: bool,
    protocol: &MeasurementProtocol,
) -> ([i64; 4], f64, f64) {
    let [canonical_in, canonical_out, canonical_pos, canonical_neg] = configuration.canonical_contacts().map(i64::from);
    let leads_swapped = protocol.current_reversal == CurrentReversal::SwapLeads && !canonical_current_positive;
    let (i_in, i_out) = if leads_swapped {
        (canonical_out, canonical_in)
    } else {
        (canonical_in, canonical_out)
    };
    let voltmeter_reversed = match protocol.voltmeter_wiring {
        VoltmeterWiring::Canonical => false,
        VoltmeterWiring::Reversed => true,
        VoltmeterWiring::FollowsCurrentLeads => leads_swapped,
    };
    let (v_pos, v_neg) = if voltmeter_reversed {
        (canonical_neg, canonical_pos)
    } else {
        (canonical_pos, canonical_neg)
    };
    let current_sign = if leads_swapped { -1.0 } else { 1.0 };
    let voltage_sign = if voltmeter_reversed { -1.0 } else { 1.0 };
    ([i_in, i_out, v_pos, v_neg], current_sign, voltage_sign)
}

/// The common loop of both geometries.
fn generate(
    sample: &str,
    temperature_k: f64,
    protocol: &MeasurementProtocol,
    rng: &mut Rng,
    resistance: impl Fn(Configuration, f64) -> Result<f64, ForwardError>,
    offset: impl Fn(Configuration) -> Result<f64, ForwardError>,
) -> Result<Vec<RawReading>, ForwardError> {
    protocol.validate()?;
    let polarities: &[bool] = if protocol.both_current_polarities {
        &[true, false]
    } else {
        &[true]
    };
    let schedule = protocol.schedule();
    let mut readings = Vec::with_capacity(schedule.len() * polarities.len());
    for (field_t, configuration) in schedule {
        let resistance_ohm = resistance(configuration, field_t)?;
        let offset_v = offset(configuration)?;
        for &positive in polarities {
            let canonical_current_a = if positive {
                protocol.current_a
            } else {
                -protocol.current_a
            };
            let exact_voltage_v = resistance_ohm * canonical_current_a + offset_v;
            let sigma_v = protocol.noise.standard_deviation_v(exact_voltage_v);
            let canonical_voltage_v = if sigma_v > 0.0 {
                exact_voltage_v + sigma_v * rng.standard_normal()
            } else {
                exact_voltage_v
            };
            let (contacts, current_sign, voltage_sign) = physical_wiring(configuration, positive, protocol);
            readings.push(RawReading {
                sample: sample.to_owned(),
                temperature_k,
                field_t,
                i_in: contacts[0],
                i_out: contacts[1],
                v_pos: contacts[2],
                v_neg: contacts[3],
                current_a: current_sign * canonical_current_a,
                voltage_v: voltage_sign * canonical_voltage_v,
            });
        }
    }
    Ok(readings)
}

/// Raw readings of a van der Pauw sample under `protocol`; the noise comes from `rng`.
pub fn van_der_pauw_readings(
    sample: &VanDerPauwSample,
    protocol: &MeasurementProtocol,
    rng: &mut Rng,
) -> Result<Vec<RawReading>, ForwardError> {
    sample.validate()?;
    // Fail early, before any noise is drawn, on a bad sheet resistance or ratio.
    sample.characteristic_resistances_ohm()?;
    generate(
        &sample.sample,
        sample.temperature_k,
        protocol,
        rng,
        |configuration, field| sample.canonical_resistance_ohm(configuration, field),
        |configuration| sample.thermoelectric_offset_v(configuration),
    )
}

/// Raw readings of a Hall bar under `protocol`; the noise comes from `rng`.
pub fn hall_bar_readings(
    sample: &HallBarSample,
    protocol: &MeasurementProtocol,
    rng: &mut Rng,
) -> Result<Vec<RawReading>, ForwardError> {
    sample.validate()?;
    generate(
        &sample.sample,
        sample.temperature_k,
        protocol,
        rng,
        |configuration, field| sample.canonical_resistance_ohm(configuration, field),
        |configuration| sample.thermoelectric_offset_v(configuration),
    )
}

// ------------------------------------------------------------ a lab's conditions

/// Errors of a lab's calibrations, one value per series. As drawn values (from
/// [`CalibrationErrors::draw`]) they say how the instruments of one series are off; as a
/// spread (the argument of `draw`, and [`LabConditions::calibration_spread`]) they are the
/// standard deviations the errors are drawn from.
///
/// - recorded field = actual field x (1 + `field_rel`)
/// - recorded current = actual current x (1 + `current_rel`)
/// - recorded voltage = actual voltage x (1 + `voltage_rel`)
/// - recorded temperature = actual temperature + `thermometer_offset_k`
/// - stated thickness = true thickness x (1 + `thickness_rel`)
///
/// The thickness does not enter a reading; it enters the sample sheet, through
/// [`CalibrationErrors::stated_thickness_m`].
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct CalibrationErrors {
    pub thickness_rel: f64,
    pub field_rel: f64,
    pub current_rel: f64,
    pub voltage_rel: f64,
    pub thermometer_offset_k: f64,
}

impl CalibrationErrors {
    /// Perfect instruments.
    pub const NONE: CalibrationErrors = CalibrationErrors {
        thickness_rel: 0.0,
        field_rel: 0.0,
        current_rel: 0.0,
        voltage_rel: 0.0,
        thermometer_offset_k: 0.0,
    };

    /// One series' errors, each drawn from a normal distribution with mean 0 and the
    /// standard deviation given in `spread` (in the order thickness, field, current, voltage,
    /// thermometer, so that a seed fixes them).
    pub fn draw(spread: &CalibrationErrors, rng: &mut Rng) -> CalibrationErrors {
        // A zero spread draws nothing, so that an ideal series uses the noise sequence of the
        // ideal generator.
        let mut draw = |standard_deviation: f64| {
            if standard_deviation > 0.0 {
                rng.normal(0.0, standard_deviation)
            } else {
                0.0
            }
        };
        CalibrationErrors {
            thickness_rel: draw(spread.thickness_rel),
            field_rel: draw(spread.field_rel),
            current_rel: draw(spread.current_rel),
            voltage_rel: draw(spread.voltage_rel),
            thermometer_offset_k: draw(spread.thermometer_offset_k),
        }
    }

    /// The thickness a lab with this calibration error writes into its sample sheet.
    pub fn stated_thickness_m(&self, true_thickness_m: f64) -> f64 {
        true_thickness_m * (1.0 + self.thickness_rel)
    }

    fn validate_as_spread(&self) -> Result<(), ForwardError> {
        require_non_negative("calibration_spread.thickness_rel", self.thickness_rel)?;
        require_non_negative("calibration_spread.field_rel", self.field_rel)?;
        require_non_negative("calibration_spread.current_rel", self.current_rel)?;
        require_non_negative("calibration_spread.voltage_rel", self.voltage_rel)?;
        require_non_negative("calibration_spread.thermometer_offset_k", self.thermometer_offset_k)?;
        Ok(())
    }
}

/// A current source that picks, per temperature, the largest current of a 1-2-5 ladder
/// (`smallest_current_a` up to `largest_current_a`) that keeps the largest expected voltage
/// of the protocol at or below `target_voltage_v`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Autorange {
    pub target_voltage_v: f64,
    pub smallest_current_a: f64,
    pub largest_current_a: f64,
}

impl Autorange {
    /// 10 mV target between 1 nA and 10 mA (common practice for a resistivity and Hall setup).
    pub const TYPICAL: Autorange = Autorange {
        target_voltage_v: 1e-2,
        smallest_current_a: 1e-9,
        largest_current_a: 1e-2,
    };

    /// The current for a sample whose largest |V/I| is `largest_resistance_ohm`, A.
    pub fn current_a(&self, largest_resistance_ohm: f64) -> f64 {
        let wanted = self.target_voltage_v / largest_resistance_ohm;
        let mut chosen = self.smallest_current_a;
        let mut decade = 10f64.powf(self.smallest_current_a.log10().floor());
        while decade <= self.largest_current_a * 1.000_001 {
            for step in [1.0, 2.0, 5.0] {
                let current = decade * step;
                if current >= self.smallest_current_a * 0.999_999
                    && current <= self.largest_current_a * 1.000_001
                    && current <= wanted
                {
                    chosen = current;
                }
            }
            decade *= 10.0;
        }
        chosen
    }

    fn validate(&self) -> Result<(), ForwardError> {
        require_positive("autorange.target_voltage_v", self.target_voltage_v)?;
        require_positive("autorange.smallest_current_a", self.smallest_current_a)?;
        require_positive("autorange.largest_current_a", self.largest_current_a)?;
        if self.largest_current_a < self.smallest_current_a {
            return Err(ForwardError::InvalidParameter {
                name: "autorange.largest_current_a",
                value: self.largest_current_a,
                requirement: "give a largest current of at least the smallest current",
            });
        }
        Ok(())
    }
}

/// How a real series departs from the ideal protocol. Every field is optional in effect:
/// [`LabConditions::IDEAL`] reproduces the ideal generator (one fixed temperature per
/// setpoint, exact fields, the protocol's current, no calibration error).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LabConditions {
    /// Current chosen per temperature; `None` uses the protocol's `current_a` throughout.
    pub autorange: Option<Autorange>,
    /// Standard deviation of the stage temperature's step between consecutive readings, K:
    /// the actual temperature is a random walk that starts at the setpoint. Each reading
    /// records the temperature of its own moment.
    pub stage_drift_k: f64,
    /// The actual field at a nominal zero, T (signed): the remanence of an electromagnet. The
    /// gaussmeter records it.
    pub remanent_field_t: f64,
    /// Standard deviation of the actual field around a nonzero setpoint, per reading, T. The
    /// gaussmeter records it.
    pub field_wander_t: f64,
    /// Standard deviations of the calibration errors, drawn once per series.
    pub calibration_spread: CalibrationErrors,
}

impl LabConditions {
    /// No departure from the protocol.
    pub const IDEAL: LabConditions = LabConditions {
        autorange: None,
        stage_drift_k: 0.0,
        remanent_field_t: 0.0,
        field_wander_t: 0.0,
        calibration_spread: CalibrationErrors::NONE,
    };

    /// A realistic cryostat with an electromagnet: autoranged current (10 mV target), 30 mK
    /// of stage drift between readings, 3 mT of remanence, 0.3 mT of field wander, and
    /// calibrations known to 3 % (thickness), 0.5 % (field), 0.1 % (current), 0.01 %
    /// (voltage) and 20 mK (thermometer). Invented to resemble a lab, not taken from one.
    pub const TYPICAL: LabConditions = LabConditions {
        autorange: Some(Autorange::TYPICAL),
        stage_drift_k: 0.03,
        remanent_field_t: 3e-3,
        field_wander_t: 3e-4,
        calibration_spread: CalibrationErrors {
            thickness_rel: 0.03,
            field_rel: 5e-3,
            current_rel: 1e-3,
            voltage_rel: 1e-4,
            thermometer_offset_k: 0.02,
        },
    };

    fn validate(&self) -> Result<(), ForwardError> {
        if let Some(autorange) = &self.autorange {
            autorange.validate()?;
        }
        require_non_negative("stage_drift_k", self.stage_drift_k)?;
        require_finite("remanent_field_t", self.remanent_field_t)?;
        require_non_negative("field_wander_t", self.field_wander_t)?;
        self.calibration_spread.validate_as_spread()
    }
}

/// What was measured at one setpoint of a [`LabSeries`].
#[derive(Debug, Clone, PartialEq)]
pub struct SetpointRecord {
    pub setpoint_k: f64,
    /// The current the source was set to (and recorded), A.
    pub current_a: f64,
    /// Mean of the actual stage temperatures over the setpoint's readings, K.
    pub mean_actual_temperature_k: f64,
    /// Mean of the recorded temperatures (actual plus the thermometer's offset), K.
    pub mean_recorded_temperature_k: f64,
}

/// The readings of one sample over a temperature series, with the errors that were drawn.
#[derive(Debug, Clone, PartialEq)]
pub struct LabSeries {
    pub readings: Vec<RawReading>,
    /// This series' calibration errors (use `stated_thickness_m` for the sample sheet).
    pub calibration: CalibrationErrors,
    pub setpoints: Vec<SetpointRecord>,
}

/// Raw readings of one van der Pauw sample over a temperature series, as a real lab records
/// them. `sample_at(T)` gives the sample at actual temperature T (its name, transport,
/// offsets, misalignment); it is called for every reading, so that a drifting stage changes
/// the sample between readings.
///
/// Per series, the calibration errors are drawn first ([`CalibrationErrors::draw`]). Per
/// setpoint, the current is chosen (autorange from the sample at the setpoint, or the
/// protocol's), then the readings follow the protocol's order (zero field, then each
/// magnitude at +B and -B, configurations, polarities). Per reading: the stage takes one
/// step of its random walk; the actual field is the remanence at a nominal zero or the
/// setpoint plus wander; the actual current is the set current / (1 + current_rel);
/// V = R(T, B) I + offset + voltmeter noise, recorded with the voltmeter's gain error; field
/// and temperature are recorded with their calibration errors.
pub fn lab_van_der_pauw_series(
    setpoints_k: &[f64],
    sample_at: impl Fn(f64) -> Result<VanDerPauwSample, ForwardError>,
    protocol: &MeasurementProtocol,
    lab: &LabConditions,
    rng: &mut Rng,
) -> Result<LabSeries, ForwardError> {
    protocol.validate()?;
    lab.validate()?;
    let calibration = CalibrationErrors::draw(&lab.calibration_spread, rng);
    let polarities: &[bool] = if protocol.both_current_polarities {
        &[true, false]
    } else {
        &[true]
    };
    let schedule = protocol.schedule();
    let mut readings = Vec::with_capacity(setpoints_k.len() * schedule.len() * polarities.len());
    let mut setpoints = Vec::with_capacity(setpoints_k.len());
    for &setpoint_k in setpoints_k {
        require_positive("setpoints_k", setpoint_k)?;
        let at_setpoint = sample_at(setpoint_k)?;
        at_setpoint.validate()?;
        let current_a = match &lab.autorange {
            Some(autorange) => {
                let mut largest_ohm = 0.0_f64;
                for &(field_t, configuration) in &schedule {
                    largest_ohm = largest_ohm.max(at_setpoint.canonical_resistance_ohm(configuration, field_t)?.abs());
                }
                autorange.current_a(largest_ohm.max(f64::MIN_POSITIVE))
            }
            None => protocol.current_a,
        };
        let actual_current_a = current_a / (1.0 + calibration.current_rel);
        let mut temperature_k = setpoint_k;
        let mut actual_sum = 0.0;
        let mut count = 0usize;
        for &(nominal_field_t, configuration) in &schedule {
            for &positive in polarities {
                if lab.stage_drift_k > 0.0 {
                    temperature_k += lab.stage_drift_k * rng.standard_normal();
                }
                require_positive("stage temperature (lower stage_drift_k)", temperature_k)?;
                let sample = sample_at(temperature_k)?;
                sample.validate()?;
                let field_t = if nominal_field_t == 0.0 {
                    lab.remanent_field_t
                } else if lab.field_wander_t > 0.0 {
                    nominal_field_t + lab.field_wander_t * rng.standard_normal()
                } else {
                    nominal_field_t
                };
                let resistance_ohm = sample.canonical_resistance_ohm(configuration, field_t)?;
                let offset_v = sample.thermoelectric_offset_v(configuration)?;
                let canonical_current_a = if positive { actual_current_a } else { -actual_current_a };
                let exact_voltage_v = resistance_ohm * canonical_current_a + offset_v;
                let sigma_v = protocol.noise.standard_deviation_v(exact_voltage_v);
                let measured_v = if sigma_v > 0.0 {
                    exact_voltage_v + sigma_v * rng.standard_normal()
                } else {
                    exact_voltage_v
                };
                let (contacts, current_sign, voltage_sign) = physical_wiring(configuration, positive, protocol);
                let recorded_current_a = if positive { current_a } else { -current_a };
                readings.push(RawReading {
                    sample: sample.sample.clone(),
                    temperature_k: temperature_k + calibration.thermometer_offset_k,
                    field_t: field_t * (1.0 + calibration.field_rel),
                    i_in: contacts[0],
                    i_out: contacts[1],
                    v_pos: contacts[2],
                    v_neg: contacts[3],
                    current_a: current_sign * recorded_current_a,
                    voltage_v: voltage_sign * measured_v * (1.0 + calibration.voltage_rel),
                });
                actual_sum += temperature_k;
                count += 1;
            }
        }
        let mean_actual_temperature_k = if count > 0 {
            actual_sum / count as f64
        } else {
            setpoint_k
        };
        setpoints.push(SetpointRecord {
            setpoint_k,
            current_a,
            mean_actual_temperature_k,
            mean_recorded_temperature_k: mean_actual_temperature_k + calibration.thermometer_offset_k,
        });
    }
    Ok(LabSeries {
        readings,
        calibration,
        setpoints,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::constants::ELEMENTARY_CHARGE_C;
    use crate::contacts::{classify_hall_bar, classify_van_der_pauw};
    use crate::van_der_pauw::sheet_resistance;

    fn close(actual: f64, expected: f64, relative: f64) -> bool {
        ((actual - expected) / expected).abs() <= relative
    }

    fn all_wirings() -> Vec<(CurrentReversal, VoltmeterWiring)> {
        let mut wirings = Vec::new();
        for reversal in [CurrentReversal::SourceSign, CurrentReversal::SwapLeads] {
            for wiring in [
                VoltmeterWiring::Canonical,
                VoltmeterWiring::Reversed,
                VoltmeterWiring::FollowsCurrentLeads,
            ] {
                wirings.push((reversal, wiring));
            }
        }
        wirings
    }

    #[test]
    fn noise_free_readings_reproduce_the_canonical_resistances_for_every_wiring() {
        let mut sample = VanDerPauwSample::ideal("piece", 77.0, 250.0, 1.4, -3.2e3);
        sample.resistance_field_odd_ohm_per_t = [0.8, -0.3];
        sample.hall_misalignment_ohm = [4.0, -4.0];
        let (resistance_a, resistance_b) = sample.characteristic_resistances_ohm().unwrap();
        assert!(close(
            sheet_resistance(resistance_a, resistance_b).unwrap(),
            250.0,
            1e-12
        ));
        for (reversal, wiring) in all_wirings() {
            let protocol = MeasurementProtocol {
                current_reversal: reversal,
                voltmeter_wiring: wiring,
                ..MeasurementProtocol::van_der_pauw(1e-4, vec![0.5, 1.0])
            };
            let readings = van_der_pauw_readings(&sample, &protocol, &mut Rng::seeded(1)).unwrap();
            // 6 configurations x 2 polarities at 0, +-0.5 and +-1 T.
            assert_eq!(readings.len(), 6 * 2 * 5);
            for reading in &readings {
                let classified =
                    classify_van_der_pauw(reading.i_in, reading.i_out, reading.v_pos, reading.v_neg).unwrap();
                let canonical_current = classified.current_sign * reading.current_a;
                let canonical_voltage = classified.voltage_sign * reading.voltage_v;
                let expected = match classified.configuration {
                    Configuration::Resistance { family, reciprocal } => {
                        let base = if family == ResistanceFamily::A {
                            resistance_a
                        } else {
                            resistance_b
                        };
                        let odd = if family == ResistanceFamily::A { 0.8 } else { -0.3 };
                        base + if reciprocal { -odd } else { odd } * reading.field_t
                    }
                    Configuration::Hall { diagonal } => {
                        -3.2e3 * reading.field_t + if diagonal == 0 { 4.0 } else { -4.0 }
                    }
                    other => panic!("unexpected {other:?}"),
                };
                assert!(
                    close(canonical_voltage / canonical_current, expected, 1e-14),
                    "{reading:?} with {reversal:?}, {wiring:?}"
                );
                assert!((canonical_current.abs() - 1e-4).abs() < 1e-20);
                if reversal == CurrentReversal::SwapLeads {
                    assert!(reading.current_a > 0.0);
                }
            }
        }
    }

    // Reciprocity R_ij,kl(B) = R_kl,ij(-B) (van der Pauw 1958).
    #[test]
    fn field_odd_resistance_respects_reciprocity() {
        let mut sample = VanDerPauwSample::ideal("piece", 300.0, 100.0, 1.0, 1e3);
        sample.resistance_field_odd_ohm_per_t = [2.0, 0.5];
        for family in [ResistanceFamily::A, ResistanceFamily::B] {
            let direct = Configuration::Resistance {
                family,
                reciprocal: false,
            };
            let reciprocal = Configuration::Resistance {
                family,
                reciprocal: true,
            };
            for field in [0.3, -1.2] {
                assert_eq!(
                    sample.canonical_resistance_ohm(direct, field).unwrap(),
                    sample.canonical_resistance_ohm(reciprocal, -field).unwrap()
                );
            }
        }
    }

    #[test]
    fn offsets_cancel_in_the_current_reversal_difference() {
        let mut sample = VanDerPauwSample::ideal("piece", 300.0, 80.0, 1.0, 0.0);
        sample.thermoelectric_offsets_v = [3e-5, -2e-5, 4e-5, 1e-5, -5e-5, 6e-5];
        let protocol = MeasurementProtocol {
            current_reversal: CurrentReversal::SwapLeads,
            voltmeter_wiring: VoltmeterWiring::FollowsCurrentLeads,
            field_magnitudes_t: vec![],
            ..MeasurementProtocol::van_der_pauw(1e-3, vec![])
        };
        let readings = van_der_pauw_readings(&sample, &protocol, &mut Rng::seeded(1)).unwrap();
        let (resistance_a, _) = sample.characteristic_resistances_ohm().unwrap();
        // NIST R_21,34 and R_12,43: the same configuration with leads swapped.
        let forward = readings
            .iter()
            .find(|r| [r.i_in, r.i_out, r.v_pos, r.v_neg] == [2, 1, 3, 4])
            .unwrap();
        let backward = readings
            .iter()
            .find(|r| [r.i_in, r.i_out, r.v_pos, r.v_neg] == [1, 2, 4, 3])
            .unwrap();
        // Each alone carries the offset, in canonical orientation +3e-5 V ...
        assert!((forward.voltage_v - (resistance_a * 1e-3 + 3e-5)).abs() < 1e-15);
        assert!((backward.voltage_v - (resistance_a * 1e-3 - 3e-5)).abs() < 1e-15);
        // ... and their mean has none.
        let mean = 0.5 * (forward.voltage_v / forward.current_a + backward.voltage_v / backward.current_a);
        assert!(close(mean, resistance_a, 1e-13));
    }

    // NIST Hall-effect pages: V_C = V24P - V24N etc.; n_s = 8 I B / (e |V_C + V_D + V_E + V_F|)
    // (from memory). I = 1 mA, B = 0.5 T, n_s = 1e12 cm^-2 gives V_H = 0.312075 V
    // (computed from V_H = I B / (e n_s)).
    #[test]
    fn nist_hall_voltages_give_back_the_sheet_density() {
        let sheet_density_m2 = 1e12 * 1e4;
        let hall = 1.0 / (ELEMENTARY_CHARGE_C * sheet_density_m2); // holes
        let mut sample = VanDerPauwSample::ideal("nist", 300.0, 1000.0, 1.0, hall);
        sample.hall_misalignment_ohm = [7.0, -7.0];
        sample.thermoelectric_offsets_v[4] = 2e-4;
        sample.thermoelectric_offsets_v[5] = -1e-4;
        let protocol = MeasurementProtocol {
            current_reversal: CurrentReversal::SwapLeads,
            voltmeter_wiring: VoltmeterWiring::FollowsCurrentLeads,
            ..MeasurementProtocol::van_der_pauw(1e-3, vec![0.5])
        };
        let readings = van_der_pauw_readings(&sample, &protocol, &mut Rng::seeded(3)).unwrap();
        let voltage = |contacts: [i64; 4], field: f64| {
            readings
                .iter()
                .find(|r| [r.i_in, r.i_out, r.v_pos, r.v_neg] == contacts && r.field_t == field)
                .map(|r| r.voltage_v)
                .unwrap()
        };
        let v_c = voltage([1, 3, 2, 4], 0.5) - voltage([1, 3, 2, 4], -0.5);
        let v_d = voltage([3, 1, 4, 2], 0.5) - voltage([3, 1, 4, 2], -0.5);
        let v_e = voltage([4, 2, 1, 3], 0.5) - voltage([4, 2, 1, 3], -0.5);
        let v_f = voltage([2, 4, 3, 1], 0.5) - voltage([2, 4, 3, 1], -0.5);
        let sum = v_c + v_d + v_e + v_f;
        assert!(sum > 0.0, "p-type gives a positive sum");
        assert!((sum / 8.0 - 0.312075).abs() <= 0.5e-6, "{}", sum / 8.0);
        let recovered = 8.0 * 1e-3 * 0.5 / (ELEMENTARY_CHARGE_C * sum.abs());
        assert!(close(recovered, sheet_density_m2, 1e-12));
        // With R_s = 1000 ohm/sq: mu_H = 1/(e n_s R_s) = 6241.51 cm^2/Vs (computed from it).
        let mobility_cm2 = 1.0 / (ELEMENTARY_CHARGE_C * recovered * 1000.0) * 1e4;
        assert!(close(mobility_cm2, 6241.51, 1e-6));
    }

    #[test]
    fn noise_has_the_requested_size_and_is_reproducible() {
        let sample = VanDerPauwSample::ideal("noisy", 300.0, 100.0, 1.0, 0.0);
        let protocol = MeasurementProtocol {
            noise: VoltageNoise {
                absolute_v: 1e-6,
                relative: 1e-3,
            },
            zero_field_configurations: vec![Configuration::Resistance {
                family: ResistanceFamily::A,
                reciprocal: false,
            }],
            ..MeasurementProtocol::van_der_pauw(1e-3, vec![])
        };
        let (resistance_a, _) = sample.characteristic_resistances_ohm().unwrap();
        let exact = resistance_a * 1e-3;
        let sigma = 1e-6 + 1e-3 * exact;
        let mut rng = Rng::seeded(11);
        let mut squares = 0.0;
        let rounds = 5000;
        for _ in 0..rounds {
            for reading in van_der_pauw_readings(&sample, &protocol, &mut rng).unwrap() {
                let deviation = reading.voltage_v.abs() - exact;
                squares += deviation * deviation;
            }
        }
        let measured_sigma = (squares / (2 * rounds) as f64).sqrt();
        // 1e4 draws: the standard error of a standard deviation is sigma / sqrt(2 N) = 0.7 %.
        assert!(close(measured_sigma, sigma, 0.035), "{measured_sigma} vs {sigma}");
        let first = van_der_pauw_readings(&sample, &protocol, &mut Rng::seeded(5)).unwrap();
        let second = van_der_pauw_readings(&sample, &protocol, &mut Rng::seeded(5)).unwrap();
        assert_eq!(first, second);
    }

    #[test]
    fn subsets_and_the_usual_split_choose_the_configurations() {
        let sample = VanDerPauwSample::ideal("piece", 300.0, 100.0, 1.0, -50.0);
        let protocol = MeasurementProtocol::van_der_pauw(1e-4, vec![0.5]).with_resistance_at_zero_and_hall_in_field();
        let readings = van_der_pauw_readings(&sample, &protocol, &mut Rng::seeded(1)).unwrap();
        // Eight resistance readings at B = 0, eight Hall readings at +-0.5 T.
        assert_eq!(readings.len(), 16);
        for reading in &readings {
            let classified = classify_van_der_pauw(reading.i_in, reading.i_out, reading.v_pos, reading.v_neg).unwrap();
            assert_eq!(classified.configuration.is_hall(), reading.field_t != 0.0);
        }
        let single_polarity = MeasurementProtocol {
            both_current_polarities: false,
            include_zero_field: false,
            ..protocol
        };
        assert_eq!(
            van_der_pauw_readings(&sample, &single_polarity, &mut Rng::seeded(1))
                .unwrap()
                .len(),
            4
        );
        // A Hall-bar configuration is not part of a van der Pauw protocol.
        let foreign = MeasurementProtocol::hall_bar(1e-4, vec![0.5]);
        assert!(matches!(
            van_der_pauw_readings(&sample, &foreign, &mut Rng::seeded(1)),
            Err(ForwardError::ForeignConfiguration(..))
        ));
    }

    // Hall bar: R_xx = R_s L / w and R_H = V_H t / (I B) (standard texts); n = 1e17 cm^-3,
    // t = 1 um, I = 1 mA, B = 1 T gives V_H = 62.4151 mV (computed from V_H = I B / (e n t)).
    #[test]
    fn hall_bar_readings_follow_the_bar_geometry() {
        let thickness_m = 1e-6;
        let density_m3 = 1e17 * 1e6;
        let sheet_hall = -1.0 / (ELEMENTARY_CHARGE_C * density_m3 * thickness_m); // electrons
        let mut bar = HallBarSample::ideal("bar", 4.2, 30.0, 400e-6, 100e-6, sheet_hall);
        bar.transverse_misalignment_ohm = [0.2, -0.1];
        bar.thermoelectric_offsets_v = [1e-6, -2e-6, 3e-6, -4e-6];
        for (reversal, wiring) in all_wirings() {
            let protocol = MeasurementProtocol {
                current_reversal: reversal,
                voltmeter_wiring: wiring,
                ..MeasurementProtocol::hall_bar(1e-3, vec![1.0])
            };
            let readings = hall_bar_readings(&bar, &protocol, &mut Rng::seeded(1)).unwrap();
            assert_eq!(readings.len(), 4 * 2 * 3);
            let transverse_at = |field: f64, pair: u8| {
                readings
                    .iter()
                    .filter(|r| r.field_t == field)
                    .filter_map(|r| {
                        let c = classify_hall_bar(r.i_in, r.i_out, r.v_pos, r.v_neg).unwrap();
                        (c.configuration == Configuration::BarTransverse { pair })
                            .then(|| c.voltage_sign * r.voltage_v / (c.current_sign * r.current_a))
                    })
                    .sum::<f64>()
                    / 2.0
            };
            // Averaging the two polarities removes the offset; the field difference the
            // misalignment.
            let hall_resistance = 0.5 * (transverse_at(1.0, 0) - transverse_at(-1.0, 0));
            assert!(close(hall_resistance * 1e-3, -62.4151e-3, 1e-6), "{hall_resistance}");
            assert!(close(
                0.5 * (transverse_at(1.0, 1) + transverse_at(-1.0, 1)),
                -0.1,
                1e-9
            ));
            for reading in readings.iter().filter(|r| r.field_t == 0.0) {
                let c = classify_hall_bar(reading.i_in, reading.i_out, reading.v_pos, reading.v_neg).unwrap();
                if let Configuration::BarLongitudinal { pair } = c.configuration {
                    let ratio = c.voltage_sign * reading.voltage_v / (c.current_sign * reading.current_a);
                    let offset = bar.thermoelectric_offsets_v[usize::from(pair)] / (c.current_sign * reading.current_a);
                    assert!(close(ratio - offset, 30.0 * 4.0, 1e-12));
                }
            }
        }
    }

    #[test]
    fn refuses_unphysical_input() {
        let sample = VanDerPauwSample::ideal("piece", 300.0, -1.0, 1.0, 0.0);
        let protocol = MeasurementProtocol::van_der_pauw(1e-4, vec![0.5]);
        assert!(van_der_pauw_readings(&sample, &protocol, &mut Rng::seeded(1)).is_err());
        let sample = VanDerPauwSample::ideal("piece", 300.0, 1.0, 1.0, 0.0);
        let zero_current = MeasurementProtocol::van_der_pauw(0.0, vec![0.5]);
        assert!(van_der_pauw_readings(&sample, &zero_current, &mut Rng::seeded(1)).is_err());
        let bar = HallBarSample::ideal("bar", 300.0, 1.0, 1e-3, 0.0, 0.0);
        let bar_protocol = MeasurementProtocol::hall_bar(1e-4, vec![0.5]);
        assert!(hall_bar_readings(&bar, &bar_protocol, &mut Rng::seeded(1)).is_err());
    }

    fn constant_sample(temperature_k: f64) -> Result<VanDerPauwSample, ForwardError> {
        let mut sample = VanDerPauwSample::ideal("lab", temperature_k, 400.0, 1.2, -2.0e3);
        sample.thermoelectric_offsets_v = [2e-6, -1e-6, 3e-6, 0.5e-6, -4e-6, 1e-6];
        sample.hall_misalignment_ohm = [3.0, -3.0];
        Ok(sample)
    }

    #[test]
    fn ideal_lab_series_is_the_ideal_generator_setpoint_by_setpoint() {
        let protocol = MeasurementProtocol {
            noise: VoltageNoise {
                absolute_v: 1e-6,
                relative: 0.0,
            },
            ..MeasurementProtocol::van_der_pauw(1e-4, vec![0.5]).with_resistance_at_zero_and_hall_in_field()
        };
        let setpoints = [10.0, 20.0];
        let series = lab_van_der_pauw_series(
            &setpoints,
            constant_sample,
            &protocol,
            &LabConditions::IDEAL,
            &mut Rng::seeded(9),
        )
        .unwrap();
        let mut rng = Rng::seeded(9);
        let mut expected = Vec::new();
        for setpoint in setpoints {
            expected.extend(van_der_pauw_readings(&constant_sample(setpoint).unwrap(), &protocol, &mut rng).unwrap());
        }
        assert_eq!(series.readings, expected);
        assert_eq!(series.calibration, CalibrationErrors::NONE);
        assert_eq!(series.setpoints[1].current_a, 1e-4);
    }

    #[test]
    fn calibration_errors_scale_the_recorded_values() {
        let protocol = MeasurementProtocol::van_der_pauw(1e-4, vec![1.0]).with_resistance_at_zero_and_hall_in_field();
        let lab = LabConditions {
            calibration_spread: CalibrationErrors {
                thickness_rel: 0.05,
                field_rel: 0.01,
                current_rel: 0.01,
                voltage_rel: 0.01,
                thermometer_offset_k: 0.1,
            },
            ..LabConditions::IDEAL
        };
        let series = lab_van_der_pauw_series(&[50.0], constant_sample, &protocol, &lab, &mut Rng::seeded(4)).unwrap();
        let errors = series.calibration;
        assert!(errors.field_rel != 0.0 && errors.current_rel != 0.0 && errors.voltage_rel != 0.0);
        let sample = constant_sample(50.0).unwrap();
        let (resistance_a, _) = sample.characteristic_resistances_ohm().unwrap();
        for reading in &series.readings {
            assert!((reading.temperature_k - (50.0 + errors.thermometer_offset_k)).abs() < 1e-12);
            let classified = classify_van_der_pauw(reading.i_in, reading.i_out, reading.v_pos, reading.v_neg).unwrap();
            if reading.field_t != 0.0 {
                assert!((reading.field_t.abs() - (1.0 + errors.field_rel)).abs() < 1e-12);
            }
            if classified.configuration
                == (Configuration::Resistance {
                    family: ResistanceFamily::A,
                    reciprocal: false,
                })
            {
                // Recorded V / recorded I = (R I_actual + offset)(1 + e_V) / (I_actual (1 + e_I)).
                let canonical_current = classified.current_sign * reading.current_a;
                let actual_current = canonical_current / (1.0 + errors.current_rel);
                let expected_v = (resistance_a * actual_current + 2e-6) * (1.0 + errors.voltage_rel);
                assert!(close(classified.voltage_sign * reading.voltage_v, expected_v, 1e-12));
            }
        }
        assert!(close(
            errors.stated_thickness_m(1e-6),
            1e-6 * (1.0 + errors.thickness_rel),
            1e-15
        ));
    }

    #[test]
    fn autorange_takes_the_largest_ladder_current_under_the_target() {
        // 1-2-5 ladder, 10 mV target (the rule of Autorange, computed by hand).
        let cases = [(1000.0, 1e-5), (300.0, 2e-5), (40.0, 2e-4), (1e9, 1e-9), (1e-3, 1e-2)];
        for (resistance_ohm, expected_a) in cases {
            let chosen = Autorange::TYPICAL.current_a(resistance_ohm);
            assert!(close(chosen, expected_a, 1e-12), "{resistance_ohm} ohm: {chosen} A");
        }
    }

    #[test]
    fn typical_lab_drifts_wanders_and_keeps_remanence() {
        let protocol = MeasurementProtocol {
            noise: VoltageNoise {
                absolute_v: 1e-6,
                relative: 0.0,
            },
            ..MeasurementProtocol::van_der_pauw(1e-4, vec![0.5]).with_resistance_at_zero_and_hall_in_field()
        };
        let lab = LabConditions {
            calibration_spread: CalibrationErrors::NONE,
            ..LabConditions::TYPICAL
        };
        let setpoints: Vec<f64> = (0..40).map(|i| 20.0 + 5.0 * i as f64).collect();
        let series =
            lab_van_der_pauw_series(&setpoints, constant_sample, &protocol, &lab, &mut Rng::seeded(2)).unwrap();
        assert_eq!(series.readings.len(), 40 * 16);
        // The Hall diagonal at 0.5 T, 2000 m^2/C x 0.5 T + 3 ohm = 1003 ohm, is the largest
        // |V/I|: 10 mV / 1003 ohm = 9.97 uA, so 5 uA from the 1-2-5 ladder.
        assert!(series
            .setpoints
            .iter()
            .all(|record| close(record.current_a, 5e-6, 1e-12)));
        let mut step_squares = 0.0;
        let mut steps = 0usize;
        for chunk in series.readings.chunks(16) {
            for pair in chunk.windows(2) {
                step_squares += (pair[1].temperature_k - pair[0].temperature_k).powi(2);
                steps += 1;
            }
            for reading in chunk {
                if reading.field_t.abs() < 0.1 {
                    assert_eq!(reading.field_t, 3e-3, "remanence at nominal zero");
                } else {
                    assert!(
                        (reading.field_t.abs() - 0.5).abs() < 5.0 * 3e-4,
                        "wander {}",
                        reading.field_t
                    );
                    assert!(reading.field_t.abs() != 0.5);
                }
            }
        }
        // 600 steps: the standard deviation of a step is known to about 3 %.
        let step_sd = (step_squares / steps as f64).sqrt();
        assert!(close(step_sd, 0.03, 0.12), "{step_sd}");
    }

    #[test]
    fn lab_conditions_refuse_unphysical_values() {
        let protocol = MeasurementProtocol::van_der_pauw(1e-4, vec![0.5]);
        let bad = [
            LabConditions {
                stage_drift_k: -1.0,
                ..LabConditions::IDEAL
            },
            LabConditions {
                field_wander_t: f64::NAN,
                ..LabConditions::IDEAL
            },
            LabConditions {
                autorange: Some(Autorange {
                    largest_current_a: 1e-9,
                    smallest_current_a: 1e-3,
                    target_voltage_v: 1e-2,
                }),
                ..LabConditions::IDEAL
            },
        ];
        for lab in bad {
            assert!(lab_van_der_pauw_series(&[10.0], constant_sample, &protocol, &lab, &mut Rng::seeded(1)).is_err());
        }
    }
}
