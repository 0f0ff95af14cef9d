//! The recipes: which figure each kind draws from a dataset, and the shared reading of
//! columns, series grouping and unit conversion they use.
//!
//! A recipe knows the output table of the analysis it serves (its columns, and for tables
//! with several row kinds the `kind` values) and draws what the trade draws from it. Values
//! enter the figure already in displayed units (`crate::units`), so the renderers never
//! convert.

mod carriers;
mod columns;
pub(crate) mod context;
mod sweeps;

pub use context::MAX_SERIES;
pub(crate) use context::{Context, Recipe, FIELD_SETPOINT_T};

/// Every recipe, `columns` first; for an analysis the first recipe listing it is its default.
pub(crate) static RECIPES: &[Recipe] = &[
    Recipe {
        name: "columns",
        description: "Any dataset: the columns `y` against `x`, one series per combination of `series_by`, with error bars from `y_error` or the columns' `_unc` companions; axes in the units of the trade.",
        analyses: &[],
        needs: "the columns named by x and y",
        build: columns::build,
    },
    Recipe {
        name: "hall_density",
        description: "Carrier density against temperature, log density axis, one series per sample (and field): the volume density in cm^-3, or the sheet density in cm^-2 for 2D samples.",
        analyses: &["hall.reduce"],
        needs: "temperature_K and density_m3 (or sheet_density_m2)",
        build: carriers::hall_density,
    },
    Recipe {
        name: "hall_mobility",
        description: "Hall mobility in cm^2/(V s) against temperature, log-log, one series per sample (and field).",
        analyses: &["hall.reduce"],
        needs: "temperature_K and hall_mobility_m2_per_Vs",
        build: carriers::hall_mobility,
    },
    Recipe {
        name: "hall_resistivity",
        description: "Resistivity in ohm cm (sheet resistance in ohm/sq for 2D samples) against temperature, log resistivity axis, one series per sample.",
        analyses: &["hall.reduce"],
        needs: "temperature_K and resistivity_ohm_m (or sheet_resistance_ohm_sq)",
        build: carriers::hall_resistivity,
    },
    Recipe {
        name: "freeze_out",
        description: "Freeze-out: measured density (points with error bars) and the fitted charge-neutrality model (line) against 1000/T, log density axis, one colour per sample.",
        analyses: &["carriers.freeze_out_fit"],
        needs: "kind, temperature_K, density_m3 and fitted_density_m3",
        build: carriers::freeze_out,
    },
    Recipe {
        name: "arrhenius",
        description: "Arrhenius plot: ln(n T^-3/2) (or ln(n T^-3/4), as the fit used) with n in cm^-3 against 1000/T; points on the fitted line filled, the others open, and the fitted line over its range.",
        analyses: &["carriers.arrhenius"],
        needs: "temperature_K, ln_reduced_density_m3, ln_reduced_density_fit_m3 and used",
        build: carriers::arrhenius,
    },
    Recipe {
        name: "mobility_scattering",
        description: "Mobility against temperature, log-log: measured points with error bars (open when outside the fitted range), the fitted total (Matthiessen) and each scattering term as dashed lines.",
        analyses: &["carriers.mobility_scattering"],
        needs: "temperature_K, mobility_m2_per_Vs and fitted_mobility_m2_per_Vs",
        build: carriers::mobility_scattering,
    },
    Recipe {
        name: "mobility_spectrum",
        description: "Mobility spectrum: d sigma / d ln mu against mobility (log axis), electrons and holes in their own colours, the regularized spectrum solid and the Beck-Anderson envelope dashed; one panel per sample and temperature.",
        analyses: &["spectrum.mobility"],
        needs: "mobility_m2_per_Vs, electron_spectrum_S, hole_spectrum_S (envelopes optional)",
        build: sweeps::mobility_spectrum,
    },
    Recipe {
        name: "conductivity_fit",
        description: "Multi-carrier fit in conductivity space: measured sigma_xx and sigma_xy (points) and the fitted model (lines) against field, one panel each.",
        analyses: &["spectrum.multi_carrier_fit"],
        needs: "field_T, sigma_xx_S, sigma_xy_S, sigma_xx_fit_S and sigma_xy_fit_S",
        build: sweeps::conductivity_fit,
    },
    Recipe {
        name: "resistivity_fit",
        description: "Fit in resistivity space: measured rho_xx and rho_xy (points) and the fitted model (lines) against field, one panel each.",
        analyses: &["mr.two_band_fit", "spectrum.multi_carrier_fit"],
        needs: "field_T, rho_xx_ohm_sq, rho_xy_ohm, rho_xx_fit_ohm_sq and rho_xy_fit_ohm",
        build: sweeps::resistivity_fit,
    },
    Recipe {
        name: "magnetoresistance",
        description: "Magnetoresistance (rho(B) - rho(0)) / rho(0) in percent against field, one series per sample and temperature, with error bars; from mr.symmetrize output rho(0) is the zero-field row.",
        analyses: &["mr.ratio", "mr.symmetrize"],
        needs: "field_T and magnetoresistance (or rho_xx_ohm_sq with a zero-field row)",
        build: sweeps::magnetoresistance,
    },
    Recipe {
        name: "symmetrized",
        description: "The symmetrized sweep: even rho_xx and odd rho_xy against field, one panel each, with error bars.",
        analyses: &["mr.symmetrize"],
        needs: "field_T, rho_xx_ohm_sq and rho_xy_ohm",
        build: sweeps::symmetrized,
    },
    Recipe {
        name: "kohler",
        description: "Kohler plot: Delta rho / rho0 against B / rho0, log-log, one series per temperature; points outside the range common to all curves open.",
        analyses: &["mr.kohler"],
        needs: "temperature_K, x_T_per_ohm and magnetoresistance",
        build: sweeps::kohler,
    },
    Recipe {
        name: "oscillation_fft",
        description: "Shubnikov-de Haas spectrum: FFT amplitude against frequency (T), one line per temperature (rows of kind fft).",
        analyses: &["mr.oscillations"],
        needs: "kind, temperature_K, frequency_T and value_ohm_sq",
        build: sweeps::oscillation_fft,
    },
    Recipe {
        name: "oscillation_mass",
        description: "Mass plot: oscillation amplitude / T against T (log amplitude axis) for each narrow 1/B window, with the window's Lifshitz-Kosevich fit as a line (rows of kind mass and mass_fit).",
        analyses: &["mr.oscillations"],
        needs: "kind, temperature_K, field_T, value_ohm_sq (rows of kind mass)",
        build: sweeps::oscillation_mass,
    },
    Recipe {
        name: "oscillation_curves",
        description: "The oscillatory part of rho_xx (background removed) against 1/B, one line per temperature (rows of kind oscillation).",
        analyses: &["mr.oscillations"],
        needs: "kind, temperature_K, inverse_field_per_T and value_ohm_sq",
        build: sweeps::oscillation_curves,
    },
    Recipe {
        name: "dingle",
        description: "Dingle plot: ln(A sinh X / X) against 1/B at the reference temperature, with error bars (rows of kind dingle), and the fitted line whose slope gives T_D (rows of kind dingle_fit).",
        analyses: &["mr.oscillations"],
        needs: "kind, inverse_field_per_T and dingle_ordinate",
        build: sweeps::dingle,
    },
    Recipe {
        name: "landau_fan",
        description: "Landau fan: the Landau level index of each extremum of rho_xx against 1/B (minima filled at integers, maxima open at half-integers, rows of kind landau) and the fitted line from 1/B = 0, slope F and intercept beta (rows of kind landau_fit); needs mr.oscillations with landau_fan: true.",
        analyses: &["mr.oscillations"],
        needs: "kind, inverse_field_per_T and landau_index",
        build: sweeps::landau_fan,
    },
    Recipe {
        name: "weak_localization",
        description: "Weak localization: Delta sigma against field (points with error bars, open outside the fitted range) and the Hikami-Larkin-Nagaoka fit (line).",
        analyses: &["mr.weak_localization"],
        needs: "field_T, delta_sigma_S and model_S",
        build: sweeps::weak_localization,
    },
];

pub(crate) fn find(name: &str) -> Option<&'static Recipe> {
    RECIPES.iter().find(|r| r.name == name)
}
