//! Tables in the customary units of the trade, for people who open them in a spreadsheet:
//! densities per cm^3 and cm^2, mobilities in cm^2/(V s), resistivities in ohm cm, lengths in
//! um; temperatures, fields, currents, voltages and resistances stay in SI. Each converted
//! column is renamed after its unit (`density_m3` -> `density_cm3`,
//! `hall_mobility_m2_per_Vs_unc` -> `hall_mobility_cm2_per_Vs_unc`), as `show` and the reports
//! label them ([`mobilis_physics::units::customary_display`]). Stored tables stay in SI.

use crate::errors::{ErrorKind, ServiceError, ServiceResult};
use mobilis_physics::units::customary_display;
use polars::prelude::*;

/// The units a table is written in: a member of `dataset.export`'s params.
pub use mobilis_protocol::params::ExportUnits;

/// `frame` with every SI quantity column in its customary unit and named after it.
pub fn to_customary(frame: &DataFrame) -> ServiceResult<DataFrame> {
    let failure = |e: PolarsError| ServiceError::new(ErrorKind::InvalidData, e.to_string());
    let names: Vec<String> = frame.get_column_names().iter().map(|n| n.to_string()).collect();
    let mut columns = Vec::with_capacity(names.len());
    for column in frame.columns() {
        let name = column.name().to_string();
        let display = customary_display(&name).filter(|_| column.dtype().is_primitive_numeric());
        let Some(display) = display else {
            columns.push(column.clone());
            continue;
        };
        if display.label != name && names.contains(&display.label) {
            return Err(ServiceError::new(
                ErrorKind::ColumnProblem,
                format!(
                    "the table has both `{name}` and `{}`; in customary units both would be `{}`",
                    display.label, display.label
                ),
            )
            .with_help("export it in SI (units: si), or drop one of the two columns"));
        }
        let values = column.cast(&DataType::Float64).map_err(failure)?;
        let converted: Float64Chunked = values.f64().map_err(failure)?.apply_values(|si| display.from_si(si));
        columns.push(converted.with_name(PlSmallStr::from_str(&display.label)).into_column());
    }
    DataFrame::new(frame.height(), columns).map_err(failure)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quantities_take_their_customary_unit_and_name() {
        let frame = df!(
            "sample" => ["a", "b"],
            "temperature_K" => [300.0, 77.0],
            "density_m3" => [1.0e21, 2.5e22],
            "density_m3_unc" => [1.0e19, 5.0e20],
            "hall_mobility_m2_per_Vs" => [0.1, 1.5],
            "resistivity_ohm_m" => [0.01, 2.0e-4],
            "sheet_density_m2" => [1.0e16, 9.0e15],
            "thickness_m" => [5.0e-4, 1.0e-6],
            "points" => [3i64, 4]
        )
        .unwrap();
        let converted = to_customary(&frame).unwrap();
        let names: Vec<&str> = converted.get_column_names().iter().map(|n| n.as_str()).collect();
        assert_eq!(
            names,
            [
                "sample",
                "temperature_K",
                "density_cm3",
                "density_cm3_unc",
                "hall_mobility_cm2_per_Vs",
                "resistivity_ohm_cm",
                "sheet_density_cm2",
                "thickness_um",
                "points"
            ]
        );
        // (column, expected values): 1e21 m^-3 = 1e15 cm^-3; 0.1 m^2/(V s) = 1000 cm^2/(V s);
        // 0.01 ohm m = 1 ohm cm; 1e16 m^-2 = 1e12 cm^-2; 5e-4 m = 500 um (SI prefixes).
        let expected: &[(&str, [f64; 2])] = &[
            ("temperature_K", [300.0, 77.0]),
            ("density_cm3", [1.0e15, 2.5e16]),
            ("density_cm3_unc", [1.0e13, 5.0e14]),
            ("hall_mobility_cm2_per_Vs", [1000.0, 15000.0]),
            ("resistivity_ohm_cm", [1.0, 0.02]),
            ("sheet_density_cm2", [1.0e12, 9.0e11]),
            ("thickness_um", [500.0, 1.0]),
        ];
        for (name, values) in expected {
            let got: Vec<f64> = converted
                .column(name)
                .unwrap()
                .f64()
                .unwrap()
                .into_no_null_iter()
                .collect();
            for (got, want) in got.iter().zip(values) {
                assert!((got - want).abs() <= 1e-12 * want.abs(), "{name}: {got} != {want}");
            }
        }
        assert_eq!(converted.column("points").unwrap().dtype(), &DataType::Int64);
    }

    #[test]
    fn a_name_clash_is_refused() {
        let frame = df!("density_m3" => [1.0e21], "density_cm3" => [1.0e15]).unwrap();
        let error = to_customary(&frame).unwrap_err();
        assert!(error.message.contains("both `density_m3` and `density_cm3`"), "{error}");
    }
}
