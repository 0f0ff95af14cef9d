//! Physical quantities, the units labs write them in, and the `quantity_unit` column convention.
//!
//! Every table mobilis holds stores SI values in columns named `quantity_unit`
//! (`temperature_K`, `field_T`, `density_m3`, `hall_mobility_m2_per_Vs`, `resistivity_ohm_m`;
//! an uncertainty column adds `_unc`). Lab files use the units of the trade instead (°C, kG, Oe,
//! mA, µV, µm, cm^-3, cm^2/(V s), ohm cm), and reports must show those units again. This module
//! is the one place that knows them, so that imports, plugins and clients cannot disagree:
//!
//! - [`parse_unit`] reads a unit the way people type it and returns a [`Unit`]: its [`Quantity`]
//!   and its affine map to SI, `si = value * factor + offset`.
//! - [`to_si`], [`convert_to_si`] convert values; [`uncertainty_to_si`] and
//!   [`convert_uncertainty_to_si`] convert uncertainties and differences, which take the factor
//!   but never the offset (an uncertainty of 0.5 degC is 0.5 K, not 273.65 K); [`convert`] goes
//!   between two units of one quantity.
//! - [`si_column_name`] renames an imported column to the convention, [`unit_from_column_name`]
//!   reads the unit a lab column name already carries (`field_kG`, `density_cm3`) and
//!   [`check_column_unit`] refuses a unit of another quantity than the name says.
//! - [`customary_display`] goes the other way for clients and reports: from an SI column to the
//!   label, unit and factor the trade reads (`density_m3` is shown as `density_cm3` in cm^-3).
//!
//! # Accepted units
//!
//! The unit table of this module (`ENTRIES`) is the list; [`Quantity::accepted_units`] prints
//! it in error messages. In short: K, degC, mK; T, mT, G, kG, Oe, kOe; A, mA, uA, nA, pA; V,
//! mV, uV, nV; m, cm, mm, um, nm; m^-3, cm^-3; m^-2, cm^-2; m^2/(V s), cm^2/(V s); ohm m, ohm
//! cm and its milli-, micro- and kilo- forms; ohm/sq, kohm/sq; ohm, mohm, kohm, Mohm; and
//! dimensionless. The uncertainty of a column is the column's name plus `_unc`: a standard
//! uncertainty (one sigma) in the same unit.
//!
//! # Normalisation
//!
//! Before matching, a unit string is normalised, so that the many ways one unit is typed meet:
//! surrounding and inner white space, `·`, `⋅`, `*`, `×`, `.` and `_` separate words and are
//! dropped; a `-` before a digit is an exponent sign (`cm-3`, `s^-1`) and elsewhere a separator
//! (`ohm-cm`, `V-s`); `^` and parentheses are dropped (`cm^2/(V s)` meets `cm2/Vs`); superscript
//! digits and minus become plain ones (`cm⁻³`); a leading `1/` becomes `/`; the micro signs `µ`
//! (U+00B5) and `μ` (U+03BC) become `u`; `Ω` and any capitalisation of `ohm` or `ohms` become
//! `ohm`, keeping the prefix before it; `°` and `℃` spell `deg`/`degC`; the words `per`, `square`,
//! `kelvin`, `celsius`, `degrees`, `tesla`, `gauss`, `oersted`, `micron` and `dimensionless` are
//! read in any capitalisation. Everything else keeps its case, because SI prefixes depend on it:
//! `mohm` is a milliohm and `Mohm` a megaohm, `mK` is a millikelvin and `MK` is refused. An empty
//! string (or `1`, `-`, `dimensionless`) is a dimensionless number.
//!
//! A bare `C` is refused as a unit, because in SI it is the coulomb; write `degC`. In a column
//! name, though, `temperature_C` is a lab habit and reads as degrees Celsius (see
//! [`si_column_name`]). Likewise `cm3` in a unit field would be cubic centimetres and is refused,
//! while `density_cm3` in a column name means cm^-3, as the contract's `density_m3` means m^-3.
//!
//! # Conventions of the trade
//!
//! - Magnet fields are quoted in oersted by many lab instruments although what they set is the
//!   flux density in the gap. Common practice, followed here, is 1 Oe <-> 1e-4 T in vacuum: the
//!   oersted is the CGS unit of H, 1 Oe = 1000/(4 pi) A/m, and mu0 times that is 1e-4 T (exactly
//!   so before the 2019 SI; since then mu0 = 4 pi x 1.00000000055e-7 N/A^2, a difference of
//!   5.5e-10 that no Hall measurement resolves).
//! - Temperatures in degrees Celsius are offset by the ice point, 0 degC = 273.15 K.
//! - Number densities are per volume or per area; their column suffixes `m3`/`m2` (and the lab
//!   habits `cm3`/`cm2`) mean m^-3/m^-2, following the contract.
//!
//! Conversions by a power of ten divide by the exact power instead of multiplying by its inexact
//! reciprocal, so that 3 kG becomes 0.3 T, the double nearest the exact value, where 3 * 0.1
//! would give 0.30000000000000004.

use std::collections::HashMap;
use std::fmt;
use std::sync::OnceLock;

/// The physical quantities that measurement tables hold.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Quantity {
    Temperature,
    MagneticField,
    Current,
    Voltage,
    Length,
    /// Carriers per volume (m^-3).
    VolumeDensity,
    /// Carriers per area (m^-2).
    SheetDensity,
    Mobility,
    Resistivity,
    SheetResistance,
    Resistance,
    /// A pure number (Hall factor, ratios); no column suffix.
    Dimensionless,
}

impl Quantity {
    /// Every quantity, in the order used by error messages.
    pub const ALL: [Quantity; 12] = [
        Quantity::Temperature,
        Quantity::MagneticField,
        Quantity::Current,
        Quantity::Voltage,
        Quantity::Length,
        Quantity::VolumeDensity,
        Quantity::SheetDensity,
        Quantity::Mobility,
        Quantity::Resistivity,
        Quantity::SheetResistance,
        Quantity::Resistance,
        Quantity::Dimensionless,
    ];

    /// The SI column suffix of the contract (`K`, `T`, `A`, `V`, `m`, `m3`, `m2`, `m2_per_Vs`,
    /// `ohm_m`, `ohm_sq`, `ohm`); `None` for a dimensionless column, which carries no suffix.
    pub fn si_suffix(self) -> Option<&'static str> {
        match self {
            Quantity::Temperature => Some("K"),
            Quantity::MagneticField => Some("T"),
            Quantity::Current => Some("A"),
            Quantity::Voltage => Some("V"),
            Quantity::Length => Some("m"),
            Quantity::VolumeDensity => Some("m3"),
            Quantity::SheetDensity => Some("m2"),
            Quantity::Mobility => Some("m2_per_Vs"),
            Quantity::Resistivity => Some("ohm_m"),
            Quantity::SheetResistance => Some("ohm_sq"),
            Quantity::Resistance => Some("ohm"),
            Quantity::Dimensionless => None,
        }
    }

    /// The name used in messages ("magnetic field", "volume density", ...).
    pub fn name(self) -> &'static str {
        match self {
            Quantity::Temperature => "temperature",
            Quantity::MagneticField => "magnetic field",
            Quantity::Current => "current",
            Quantity::Voltage => "voltage",
            Quantity::Length => "length",
            Quantity::VolumeDensity => "volume density",
            Quantity::SheetDensity => "sheet density",
            Quantity::Mobility => "mobility",
            Quantity::Resistivity => "resistivity",
            Quantity::SheetResistance => "sheet resistance",
            Quantity::Resistance => "resistance",
            Quantity::Dimensionless => "dimensionless",
        }
    }

    /// The SI unit of the quantity (factor 1, offset 0).
    pub fn si_unit(self) -> Unit {
        ENTRIES
            .iter()
            .map(|entry| entry.unit)
            .find(|unit| unit.quantity == self && unit.is_si())
            .expect("the unit table lists the SI unit of every quantity")
    }

    /// The accepted spellings of this quantity's units, as error messages list them:
    /// `K (also kelvin), degC (also °C, celsius, deg C), mK`.
    pub fn accepted_units(self) -> String {
        ENTRIES
            .iter()
            .filter(|entry| entry.unit.quantity == self)
            .map(|entry| {
                if entry.aliases.is_empty() {
                    entry.unit.symbol.to_string()
                } else {
                    format!("{} (also {})", entry.unit.symbol, entry.aliases.join(", "))
                }
            })
            .collect::<Vec<_>>()
            .join(", ")
    }
}

impl fmt::Display for Quantity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// A unit of one quantity and its affine map to SI: `si = value * factor + offset`.
///
/// The factor is kept as a ratio `num / den` of exact powers of ten, so that conversions divide
/// by an exact power where the factor itself (1e-6, 1e-4) has no exact binary form.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Unit {
    quantity: Quantity,
    symbol: &'static str,
    num: f64,
    den: f64,
    offset: f64,
}

impl Unit {
    const fn new(quantity: Quantity, symbol: &'static str, num: f64, den: f64, offset: f64) -> Unit {
        Unit {
            quantity,
            symbol,
            num,
            den,
            offset,
        }
    }

    /// The quantity this unit measures.
    pub fn quantity(&self) -> Quantity {
        self.quantity
    }

    /// The canonical spelling (`degC`, `cm^-3`, `cm^2/(V s)`, `ohm cm`, ...).
    pub fn symbol(&self) -> &'static str {
        self.symbol
    }

    /// The multiplicative part of the map to SI.
    pub fn factor(&self) -> f64 {
        self.num / self.den
    }

    /// The additive part of the map to SI (273.15 for degC, zero for every other unit).
    pub fn offset(&self) -> f64 {
        self.offset
    }

    /// Whether the unit is the SI unit of its quantity.
    pub fn is_si(&self) -> bool {
        self.num == 1.0 && self.den == 1.0 && self.offset == 0.0
    }

    /// A value in this unit, in SI.
    pub fn to_si(&self, value: f64) -> f64 {
        value * self.num / self.den + self.offset
    }

    /// An SI value, in this unit.
    pub fn from_si(&self, si: f64) -> f64 {
        (si - self.offset) * self.den / self.num
    }

    /// A difference or an uncertainty in this unit, in SI: the factor applies, the offset
    /// cancels.
    pub fn difference_to_si(&self, difference: f64) -> f64 {
        difference * self.num / self.den
    }
}

impl fmt::Display for Unit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.symbol)
    }
}

/// Why a unit could not be read or used.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum UnitError {
    /// The text is no unit this module knows. `suggestions` holds the canonical spellings of
    /// near matches (same letters in another case, one or two edits away, or the unit a column
    /// token such as `cm3` stands for); `quantities` the quantities whose units the message lists
    /// (all of them when nothing is near).
    #[error("unknown unit `{input}`; {}", unknown_help(.suggestions, .quantities))]
    Unknown {
        input: String,
        suggestions: Vec<&'static str>,
        quantities: Vec<Quantity>,
    },
    /// A unit of one quantity where another is needed. `context` says where, e.g.
    /// "for column `field_kG`" (empty when the caller gave none).
    #[error(
        "`{unit}` is a {found} unit where a {expected} unit is needed{}; use one of the {expected} units: {}",
        context_phrase(.context),
        accepted_units_of(.expected)
    )]
    WrongQuantity {
        unit: String,
        found: Quantity,
        expected: Quantity,
        context: String,
    },
}

fn unknown_help(suggestions: &[&'static str], quantities: &[Quantity]) -> String {
    let mut help = String::new();
    if !suggestions.is_empty() {
        let quoted: Vec<String> = suggestions.iter().map(|s| format!("`{s}`")).collect();
        help.push_str(&format!("did you mean {}? ", quoted.join(" or ")));
    }
    if let [quantity] = quantities {
        help.push_str(&format!("accepted {quantity} units: {}", quantity.accepted_units()));
    } else {
        let lists: Vec<String> = quantities
            .iter()
            .map(|quantity| format!("{quantity}: {}", quantity.accepted_units()))
            .collect();
        help.push_str(&format!("accepted units, by quantity: {}", lists.join("; ")));
    }
    help
}

fn accepted_units_of(quantity: &Quantity) -> String {
    quantity.accepted_units()
}

fn context_phrase(context: &str) -> String {
    if context.is_empty() {
        String::new()
    } else {
        format!(" {context}")
    }
}

// ---------------------------------------------------------------------------------------------
// The unit table
// ---------------------------------------------------------------------------------------------

use Quantity::*;

// Units that other tables of this module refer to by name.
const KELVIN: Unit = Unit::new(Temperature, "K", 1.0, 1.0, 0.0);
const DEGREE_CELSIUS: Unit = Unit::new(Temperature, "degC", 1.0, 1.0, 273.15);
const TESLA: Unit = Unit::new(MagneticField, "T", 1.0, 1.0, 0.0);
const AMPERE: Unit = Unit::new(Current, "A", 1.0, 1.0, 0.0);
const VOLT: Unit = Unit::new(Voltage, "V", 1.0, 1.0, 0.0);
const METRE: Unit = Unit::new(Length, "m", 1.0, 1.0, 0.0);
const MICROMETRE: Unit = Unit::new(Length, "um", 1.0, 1e6, 0.0);
const PER_CUBIC_METRE: Unit = Unit::new(VolumeDensity, "m^-3", 1.0, 1.0, 0.0);
// (1e-2 m)^-3 = 1e6 m^-3.
const PER_CUBIC_CENTIMETRE: Unit = Unit::new(VolumeDensity, "cm^-3", 1e6, 1.0, 0.0);
const PER_SQUARE_METRE: Unit = Unit::new(SheetDensity, "m^-2", 1.0, 1.0, 0.0);
// (1e-2 m)^-2 = 1e4 m^-2.
const PER_SQUARE_CENTIMETRE: Unit = Unit::new(SheetDensity, "cm^-2", 1e4, 1.0, 0.0);
const SQUARE_METRE_PER_VOLT_SECOND: Unit = Unit::new(Mobility, "m^2/(V s)", 1.0, 1.0, 0.0);
const SQUARE_CENTIMETRE_PER_VOLT_SECOND: Unit = Unit::new(Mobility, "cm^2/(V s)", 1.0, 1e4, 0.0);
const OHM_METRE: Unit = Unit::new(Resistivity, "ohm m", 1.0, 1.0, 0.0);
const OHM_CENTIMETRE: Unit = Unit::new(Resistivity, "ohm cm", 1.0, 100.0, 0.0);
const OHM_PER_SQUARE: Unit = Unit::new(SheetResistance, "ohm/sq", 1.0, 1.0, 0.0);
const OHM: Unit = Unit::new(Resistance, "ohm", 1.0, 1.0, 0.0);
const NUMBER: Unit = Unit::new(Dimensionless, "1", 1.0, 1.0, 0.0);

/// One accepted unit: its canonical spelling (in `unit.symbol`) and the other spellings error
/// messages list. Every spelling that normalises like one of these is accepted too.
struct Entry {
    unit: Unit,
    aliases: &'static [&'static str],
}

const fn entry(unit: Unit, aliases: &'static [&'static str]) -> Entry {
    Entry { unit, aliases }
}

const fn scaled(quantity: Quantity, symbol: &'static str, num: f64, den: f64) -> Unit {
    Unit::new(quantity, symbol, num, den, 0.0)
}

/// The SI unit of each quantity comes first among its units.
static ENTRIES: &[Entry] = &[
    entry(KELVIN, &["kelvin"]),
    entry(DEGREE_CELSIUS, &["°C", "celsius", "deg C"]),
    entry(scaled(Temperature, "mK", 1.0, 1e3), &[]),
    entry(TESLA, &["tesla"]),
    entry(scaled(MagneticField, "mT", 1.0, 1e3), &[]),
    // The gauss is the CGS unit of flux density, 1 G = 1e-4 T.
    entry(scaled(MagneticField, "G", 1.0, 1e4), &["gauss"]),
    entry(scaled(MagneticField, "kG", 1.0, 10.0), &[]),
    // 1 Oe <-> 1e-4 T in vacuum, common practice (see the module documentation).
    entry(scaled(MagneticField, "Oe", 1.0, 1e4), &["oersted"]),
    entry(scaled(MagneticField, "kOe", 1.0, 10.0), &[]),
    entry(AMPERE, &[]),
    entry(scaled(Current, "mA", 1.0, 1e3), &[]),
    entry(scaled(Current, "uA", 1.0, 1e6), &["µA", "μA"]),
    entry(scaled(Current, "nA", 1.0, 1e9), &[]),
    entry(scaled(Current, "pA", 1.0, 1e12), &[]),
    entry(VOLT, &[]),
    entry(scaled(Voltage, "mV", 1.0, 1e3), &[]),
    entry(scaled(Voltage, "uV", 1.0, 1e6), &["µV", "μV"]),
    entry(scaled(Voltage, "nV", 1.0, 1e9), &[]),
    entry(METRE, &[]),
    entry(scaled(Length, "cm", 1.0, 100.0), &[]),
    entry(scaled(Length, "mm", 1.0, 1e3), &[]),
    entry(MICROMETRE, &["µm", "μm", "micron"]),
    entry(scaled(Length, "nm", 1.0, 1e9), &[]),
    entry(PER_CUBIC_METRE, &["m-3", "1/m^3", "/m3"]),
    entry(PER_CUBIC_CENTIMETRE, &["cm-3", "1/cm^3", "1/cm3", "/cm3"]),
    entry(PER_SQUARE_METRE, &["m-2", "1/m^2", "/m2"]),
    entry(PER_SQUARE_CENTIMETRE, &["cm-2", "1/cm^2", "1/cm2", "/cm2"]),
    entry(
        SQUARE_METRE_PER_VOLT_SECOND,
        &["m^2/Vs", "m2/Vs", "m^2 V^-1 s^-1", "m2/V/s"],
    ),
    entry(
        SQUARE_CENTIMETRE_PER_VOLT_SECOND,
        &["cm^2/Vs", "cm2/Vs", "cm^2 V^-1 s^-1", "cm2/V/s"],
    ),
    entry(OHM_METRE, &["Ω·m", "ohm_m"]),
    entry(OHM_CENTIMETRE, &["Ω·cm", "ohm*cm", "ohm-cm", "Ohm cm", "ohm_cm"]),
    entry(scaled(Resistivity, "mohm cm", 1.0, 1e5), &["mΩ·cm"]),
    // Metals and degenerate layers are quoted in micro-ohm centimetres.
    entry(scaled(Resistivity, "uohm cm", 1.0, 1e8), &["µΩ·cm"]),
    // High-resistivity float-zone silicon is quoted in kilo-ohm centimetres.
    entry(scaled(Resistivity, "kohm cm", 10.0, 1.0), &["kΩ·cm"]),
    entry(OHM_PER_SQUARE, &["ohm/square", "Ω/□", "ohms per square", "ohm_sq"]),
    entry(scaled(SheetResistance, "kohm/sq", 1e3, 1.0), &["kΩ/□"]),
    entry(OHM, &["Ω", "ohms"]),
    entry(scaled(Resistance, "mohm", 1.0, 1e3), &["mΩ"]),
    entry(scaled(Resistance, "kohm", 1e3, 1.0), &["kΩ"]),
    entry(scaled(Resistance, "Mohm", 1e6, 1.0), &["MΩ"]),
    entry(NUMBER, &["dimensionless"]),
];

/// Column-name tokens that are lab habits rather than units: `temperature_C`, `density_cm3`,
/// `sheet_density_cm2`, and the contract's own `m3`/`m2` suffixes.
static COLUMN_TOKENS: &[(&str, Unit)] = &[
    ("C", DEGREE_CELSIUS),
    ("cm3", PER_CUBIC_CENTIMETRE),
    ("cm2", PER_SQUARE_CENTIMETRE),
    ("m3", PER_CUBIC_METRE),
    ("m2", PER_SQUARE_METRE),
];

/// Normalised spelling -> index into [`ENTRIES`].
fn lookup_table() -> &'static HashMap<String, usize> {
    static TABLE: OnceLock<HashMap<String, usize>> = OnceLock::new();
    TABLE.get_or_init(|| {
        let mut table = HashMap::new();
        for (index, entry) in ENTRIES.iter().enumerate() {
            for spelling in std::iter::once(&entry.unit.symbol).chain(entry.aliases) {
                table.insert(normalize(spelling), index);
            }
        }
        table
    })
}

// ---------------------------------------------------------------------------------------------
// Parsing
// ---------------------------------------------------------------------------------------------

/// Replaces the first `ohm`/`ohms` in any capitalisation by `ohm`, keeping what precedes it, so
/// that `kOhm`, `MOhms` and `OHM` meet `kohm`, `Mohm` and `ohm` while the prefix keeps its case.
fn fold_ohm(word: &str) -> String {
    // ASCII lowercasing keeps byte offsets, so a position found in `lower` is valid in `word`.
    let lower = word.to_ascii_lowercase();
    match lower.find("ohm") {
        None => word.to_string(),
        Some(at) => {
            let rest = &word[at + 3..];
            let rest = if rest == "s" || rest == "S" { "" } else { rest };
            format!("{}ohm{}", &word[..at], rest)
        }
    }
}

/// The matching key of a unit string; see the module documentation for the rules.
fn normalize(text: &str) -> String {
    let mut spaced = String::with_capacity(text.len() + 8);
    let mut chars = text.chars().peekable();
    while let Some(c) = chars.next() {
        match c {
            'µ' | 'μ' => spaced.push('u'),
            // The Greek capital omega and the ohm sign U+2126 are both typed for the ohm.
            '\u{3a9}' | '\u{2126}' => spaced.push_str("ohm"),
            '℃' => spaced.push_str(" degC "),
            '°' | 'º' => spaced.push_str(" deg "),
            '□' => spaced.push_str(" sq "),
            '/' | '(' | ')' => {
                spaced.push(' ');
                spaced.push(c);
                spaced.push(' ');
            }
            '-' | '−' | '⁻' => {
                let exponent = chars
                    .peek()
                    .is_some_and(|&next| next.is_ascii_digit() || superscript_digit(next).is_some());
                spaced.push(if exponent { '-' } else { ' ' });
            }
            '^' => {}
            '·' | '⋅' | '•' | '*' | '×' | '.' | '_' => spaced.push(' '),
            c if c.is_whitespace() => spaced.push(' '),
            c => spaced.push(superscript_digit(c).unwrap_or(c)),
        }
    }

    let mut key = String::with_capacity(spaced.len());
    for word in spaced.split_whitespace() {
        match word.to_lowercase().as_str() {
            "per" => key.push('/'),
            "sq" | "square" | "squares" => key.push_str("sq"),
            "kelvin" | "kelvins" => key.push('K'),
            "celsius" => key.push_str("degC"),
            "deg" | "degree" | "degrees" => key.push_str("deg"),
            "tesla" => key.push('T'),
            "gauss" => key.push('G'),
            "oersted" | "oersteds" => key.push_str("Oe"),
            "micron" | "microns" => key.push_str("um"),
            "dimensionless" | "unitless" | "none" => {}
            _ => key.push_str(&fold_ohm(word)),
        }
    }
    // `°Celsius` and `degrees celsius` say "degree" twice.
    let key = key.replace("degdeg", "deg").replace(['(', ')'], "");
    let key = match key.strip_prefix("1/") {
        Some(rest) => format!("/{rest}"),
        None => key,
    };
    if key.is_empty() {
        "1".to_string()
    } else {
        key
    }
}

fn levenshtein(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut previous: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut current = vec![i + 1; b.len() + 1];
        for (j, &cb) in b.iter().enumerate() {
            let substitution = previous[j] + usize::from(ca != cb);
            current[j + 1] = substitution.min(previous[j + 1] + 1).min(current[j] + 1);
        }
        previous = current;
    }
    previous[b.len()]
}

/// Units near an unknown key, nearest first: the same letters in another case, a column token
/// (`cm3`, `C`), or for keys of three or more characters one edit away (two from six on). Short
/// keys get no edit-distance matches because every one-letter unit is one edit from every other.
fn near_units(key: &str) -> Vec<Unit> {
    let length = key.chars().count();
    let allowed = match length {
        0..=2 => 0,
        3..=5 => 1,
        _ => 2,
    };
    let mut near: Vec<(usize, usize, Unit)> = Vec::new();
    for (token, unit) in COLUMN_TOKENS {
        if *token == key {
            near.push((0, 0, *unit));
        }
    }
    for (spelling, &index) in lookup_table() {
        let distance = if spelling.eq_ignore_ascii_case(key) {
            0
        } else if allowed > 0 {
            levenshtein(spelling, key)
        } else {
            continue;
        };
        if distance <= allowed {
            near.push((distance, index + 1, ENTRIES[index].unit));
        }
    }
    // Only the nearest matches count (`cm3` is the lab's cm^-3 before it is one edit from cm);
    // ties go to the table order, so the result does not depend on hash order.
    near.sort_by_key(|&(distance, order, _)| (distance, order));
    let nearest = near.first().map_or(0, |&(distance, _, _)| distance);
    let mut units: Vec<Unit> = Vec::new();
    for (_, _, unit) in near.into_iter().take_while(|&(distance, _, _)| distance == nearest) {
        if !units.iter().any(|u| u.symbol == unit.symbol) {
            units.push(unit);
        }
    }
    units.truncate(3);
    units
}

/// Reads a unit as labs write it. See the module documentation for the spellings that meet.
///
/// An unknown unit gives [`UnitError::Unknown`], which names near matches and lists the
/// accepted spellings of their quantity, or of every quantity when nothing is near.
pub fn parse_unit(text: &str) -> Result<Unit, UnitError> {
    let key = normalize(text);
    if let Some(&index) = lookup_table().get(&key) {
        return Ok(ENTRIES[index].unit);
    }
    let near = near_units(&key);
    let mut quantities: Vec<Quantity> = Vec::new();
    for unit in &near {
        if !quantities.contains(&unit.quantity) {
            quantities.push(unit.quantity);
        }
    }
    if quantities.is_empty() {
        quantities = Quantity::ALL.to_vec();
    }
    Err(UnitError::Unknown {
        input: text.to_string(),
        suggestions: near.iter().map(|unit| unit.symbol).collect(),
        quantities,
    })
}

/// Reads a unit that must measure `expected`; a unit of another quantity gives
/// [`UnitError::WrongQuantity`].
pub fn parse_unit_as(text: &str, expected: Quantity) -> Result<Unit, UnitError> {
    let unit = parse_unit(text)?;
    if unit.quantity == expected {
        Ok(unit)
    } else {
        Err(UnitError::WrongQuantity {
            unit: text.to_string(),
            found: unit.quantity,
            expected,
            context: String::new(),
        })
    }
}

// ---------------------------------------------------------------------------------------------
// Conversion
// ---------------------------------------------------------------------------------------------

/// A value in `unit`, in SI.
pub fn to_si(value: f64, unit: &Unit) -> f64 {
    unit.to_si(value)
}

/// Converts values in `unit` to SI in place. NaN (a missing reading) stays NaN.
pub fn convert_to_si(values: &mut [f64], unit: &Unit) {
    if unit.is_si() {
        return;
    }
    for value in values {
        *value = unit.to_si(*value);
    }
}

/// An uncertainty (or any difference) in `unit`, in SI: scaled by the factor, never offset.
pub fn uncertainty_to_si(value: f64, unit: &Unit) -> f64 {
    unit.difference_to_si(value)
}

/// Converts uncertainties in `unit` to SI in place, as [`uncertainty_to_si`]. NaN stays NaN.
pub fn convert_uncertainty_to_si(values: &mut [f64], unit: &Unit) {
    if unit.num == unit.den {
        return;
    }
    for value in values {
        *value = unit.difference_to_si(*value);
    }
}

/// A value in `from`, in `to`. Both must measure the same quantity.
pub fn convert(value: f64, from: &Unit, to: &Unit) -> Result<f64, UnitError> {
    if from.quantity != to.quantity {
        return Err(UnitError::WrongQuantity {
            unit: from.symbol.to_string(),
            found: from.quantity,
            expected: to.quantity,
            context: format!("to convert to `{}`", to.symbol),
        });
    }
    Ok(to.from_si(from.to_si(value)))
}

// ---------------------------------------------------------------------------------------------
// Column names
// ---------------------------------------------------------------------------------------------

/// The longest unit token is made of this many `_`-separated words (`cm2_per_Vs`).
const MAX_TOKEN_WORDS: usize = 3;

fn split_uncertainty(column: &str) -> (&str, bool) {
    match column.strip_suffix("_unc") {
        Some(stem) if !stem.is_empty() => (stem, true),
        _ => (column, false),
    }
}

/// The unit a column-name token stands for: a lab habit of [`COLUMN_TOKENS`], or any unit
/// [`parse_unit`] reads except a dimensionless one (so `sample_1` keeps its `_1`).
fn token_unit(token: &str) -> Option<Unit> {
    if let Some((_, unit)) = COLUMN_TOKENS.iter().find(|(t, _)| *t == token) {
        return Some(*unit);
    }
    parse_unit(token).ok().filter(|unit| unit.quantity != Dimensionless)
}

/// Splits `stem` into the name before its unit token and the unit. The longest token wins, so
/// that `resistivity_ohm_m` reads as ohm m rather than as metres after `resistivity_ohm`.
fn split_unit_token(stem: &str) -> Option<(&str, Unit)> {
    let underscores: Vec<usize> = stem.match_indices('_').map(|(at, _)| at).collect();
    let first = underscores.len().saturating_sub(MAX_TOKEN_WORDS);
    underscores[first..]
        .iter()
        .filter(|&&at| at > 0)
        .find_map(|&at| token_unit(&stem[at + 1..]).map(|unit| (&stem[..at], unit)))
}

/// The SI column name for a column whose values are in `unit`.
///
/// Rule: a trailing `_unc` is set aside and put back at the end. If the rest ends with
/// `_<token>`, where the token (up to three `_`-separated words) is unit-looking, that suffix
/// is replaced by `_<SI suffix>` of the unit's quantity; otherwise `_<SI suffix>` is appended.
/// A token is unit-looking when [`parse_unit`] reads it as a unit of any quantity other than
/// a dimensionless number, or when it is one of the lab's column habits `C` (degC), `cm3`,
/// `cm2` (cm^-3, cm^-2) or the contract's `m3`, `m2`. A dimensionless unit has no suffix, so
/// only a unit token is removed.
///
/// The unit given wins over the token: `voltage_V` with unit `uV` holds microvolts and becomes
/// `voltage_V` in volts. Use [`check_column_unit`] to refuse a token of another quantity.
///
/// `temperature_C` + degC -> `temperature_K`; `density_cm3` + cm^-3 -> `density_m3`;
/// `hall_mobility_cm2_per_Vs` + cm^2/Vs -> `hall_mobility_m2_per_Vs`; `temperature` + K ->
/// `temperature_K`; `thickness_um_unc` + um -> `thickness_m_unc`.
pub fn si_column_name(column: &str, unit: &Unit) -> String {
    let (stem, uncertainty) = split_uncertainty(column);
    let base = split_unit_token(stem).map_or(stem, |(base, _)| base);
    let mut name = base.to_string();
    if let Some(suffix) = unit.quantity.si_suffix() {
        name.push('_');
        name.push_str(suffix);
    }
    if uncertainty {
        name.push_str("_unc");
    }
    name
}

/// The unit a column name carries in its unit token (see [`si_column_name`]), if any:
/// `field_kG` -> kG, `temperature_C` -> degC, `density_m3_unc` -> m^-3, `sample` -> none.
pub fn unit_from_column_name(column: &str) -> Option<Unit> {
    let (stem, _) = split_uncertainty(column);
    split_unit_token(stem).map(|(_, unit)| unit)
}

/// Refuses a unit whose quantity differs from the one the column's unit token names
/// (`field_kG` given in mA). A column without a unit token accepts any unit.
pub fn check_column_unit(column: &str, unit: &Unit) -> Result<(), UnitError> {
    match unit_from_column_name(column) {
        Some(named) if named.quantity != unit.quantity => Err(UnitError::WrongQuantity {
            unit: unit.symbol.to_string(),
            found: unit.quantity,
            expected: named.quantity,
            context: format!("for column `{column}`"),
        }),
        _ => Ok(()),
    }
}

// ---------------------------------------------------------------------------------------------
// Customary display
// ---------------------------------------------------------------------------------------------

/// How clients and reports show an SI column in the customary unit of the trade.
#[derive(Debug, Clone, PartialEq)]
pub struct Display {
    /// The displayed column label (`density_cm3`, `hall_mobility_cm2_per_Vs_unc`).
    pub label: String,
    /// The displayed unit.
    pub unit: Unit,
    /// The human unit label (`cm^-3`, `cm^2/(V s)`, `ohm cm`, `um`).
    pub unit_label: &'static str,
    /// Displayed value = SI value * factor + offset (factor 1e-6 for m^-3 -> cm^-3). The
    /// factor alone converts an uncertainty or a difference.
    pub factor: f64,
    /// Zero except for the logarithm of a density (`ln_..._m3`), which changes unit by a
    /// shift: ln(n / cm^-3) = ln(n / m^-3) - ln(1e6). Its uncertainty has no offset.
    pub offset: f64,
}

impl Display {
    /// An SI value as displayed. Divides by the exact power of ten where the factor has none.
    pub fn from_si(&self, si: f64) -> f64 {
        self.unit.from_si(si)
    }

    /// A displayed value back in SI.
    pub fn to_si(&self, displayed: f64) -> f64 {
        self.unit.to_si(displayed)
    }
}

/// The strongest fields of laboratory magnets: about 100 T, reached by non-destructive
/// pulsed magnets (continuous fields stop near 45 T); common practice, from memory. A larger
/// field in a lab's file is almost always millitesla or gauss read as tesla.
pub const LARGEST_LABORATORY_FIELD_T: f64 = 100.0;

/// A warning when a field column's largest magnitude goes beyond any laboratory magnet,
/// naming the import that converts a millitesla or gauss column into tesla.
pub fn implausible_field_warning(column: &str, largest_t: f64) -> Option<String> {
    (largest_t > LARGEST_LABORATORY_FIELD_T).then(|| {
        format!(
            "{column} reaches {} T, beyond the {LARGEST_LABORATORY_FIELD_T} T of the strongest laboratory magnets: if the column holds millitesla or gauss, import the file again with its unit (units {{\"{column}\": \"mT\"}} or \"G\"; mobilis import --unit {column}=mT) so that it is converted to tesla",
            format_number(largest_t)
        )
    })
}

/// Formats a number with four significant digits, switching to exponent form outside
/// 1e-3..1e5 where fixed notation would hide the digits.
pub fn format_number(value: f64) -> String {
    if value == 0.0 {
        return "0".into();
    }
    let magnitude = value.abs();
    if (1e-3..1e5).contains(&magnitude) {
        let decimals = (3 - magnitude.log10().floor() as i32).max(0) as usize;
        format!("{value:.decimals$}")
    } else {
        format!("{value:.3e}")
    }
}

/// SI suffix, displayed suffix and displayed unit; longer suffixes first, so that `_ohm_m` is
/// not taken for `_m` nor `_m2_per_Vs` for anything shorter.
static DISPLAYS: &[(&str, &str, Unit)] = &[
    // Hall coefficients are quoted in cm^3/C (cm^2/C for a sheet), as densities in cm^-3.
    ("m3_per_C", "cm3_per_C", CUBIC_CENTIMETRE_PER_COULOMB),
    ("m2_per_C", "cm2_per_C", SQUARE_CENTIMETRE_PER_COULOMB),
    ("m2_per_Vs", "cm2_per_Vs", SQUARE_CENTIMETRE_PER_VOLT_SECOND),
    ("ohm_sq", "ohm_sq", OHM_PER_SQUARE),
    ("ohm_m", "ohm_cm", OHM_CENTIMETRE),
    ("ohm", "ohm", OHM),
    ("m3", "cm3", PER_CUBIC_CENTIMETRE),
    ("m2", "cm2", PER_SQUARE_CENTIMETRE),
    // Film thicknesses and bar dimensions are quoted in micrometres.
    ("m", "um", MICROMETRE),
    ("K", "K", KELVIN),
    ("T", "T", TESLA),
    ("A", "A", AMPERE),
    ("V", "V", VOLT),
];

/// Hall coefficients in cm^3/C and cm^2/C. They have no quantity of the import table (a lab
/// file gives densities, not Hall coefficients), so their units count as dimensionless
/// scalings: 1 cm^3/C = 1e-6 m^3/C, 1 cm^2/C = 1e-4 m^2/C.
const CUBIC_CENTIMETRE_PER_COULOMB: Unit = Unit::new(Dimensionless, "cm^3/C", 1.0, 1e6, 0.0);
const SQUARE_CENTIMETRE_PER_COULOMB: Unit = Unit::new(Dimensionless, "cm^2/C", 1.0, 1e4, 0.0);

/// ln(1e6) and ln(1e4): ln(n / cm^-3) = ln(n / m^-3) - ln(1e6), ln(n / cm^-2) = ln(n / m^-2) -
/// ln(1e4).
const LN_1E6: f64 = 13.815_510_557_964_274;
const LN_1E4: f64 = 9.210_340_371_976_184;
const LN_PER_CUBIC_CENTIMETRE: Unit = Unit::new(Dimensionless, "ln cm^-3", 1.0, 1.0, LN_1E6);
const LN_PER_SQUARE_CENTIMETRE: Unit = Unit::new(Dimensionless, "ln cm^-2", 1.0, 1.0, LN_1E4);

/// The customary display of an SI column (`_m3`, `_m2`, `_m2_per_Vs`, `_ohm_m`, `_ohm_sq`,
/// `_ohm`, `_m`, `_K`, `_T`, `_A`, `_V`, `_m3_per_C`, `_m2_per_C`, each also with `_unc`), or
/// `None` for a column that is not an SI quantity column (`sample`, `hall_factor`,
/// `density_cm3`).
///
/// Number densities are shown per cm^3 and cm^2, mobilities in cm^2/(V s), resistivities in
/// ohm cm, Hall coefficients in cm^3/C (cm^2/C) and lengths in um; temperatures, fields,
/// currents, voltages and (sheet) resistances are shown in SI. The logarithm of a density,
/// a column `ln_..._m3` (or `ln_..._m2`) holding ln(n / m^-3), is shown as `ln_..._cm3`
/// holding ln(n / cm^-3): the same number less ln(1e6) (ln(1e4)), with `offset` set; its
/// `_unc` is unchanged.
pub fn customary_display(column_name: &str) -> Option<Display> {
    // The parts of an uncertainty budget (`_unc_stat`, `_unc_sys`) are in the unit of their
    // value, as `_unc` is.
    let (stem, uncertainty_suffix) = ["_unc_stat", "_unc_sys", "_unc"]
        .iter()
        .find_map(|suffix| {
            column_name
                .strip_suffix(suffix)
                .filter(|stem| !stem.is_empty())
                .map(|stem| (stem, *suffix))
        })
        .unwrap_or((column_name, ""));
    let uncertainty = !uncertainty_suffix.is_empty();
    if let Some(inner) = stem.strip_prefix("ln_") {
        for (si_suffix, display_suffix, unit) in [
            ("_m3", "_cm3", LN_PER_CUBIC_CENTIMETRE),
            ("_m2", "_cm2", LN_PER_SQUARE_CENTIMETRE),
        ] {
            let Some(base) = inner.strip_suffix(si_suffix).filter(|b| !b.is_empty()) else {
                continue;
            };
            let label = format!("ln_{base}{display_suffix}{uncertainty_suffix}");
            return Some(Display {
                label,
                unit: if uncertainty { NUMBER } else { unit },
                unit_label: "",
                factor: 1.0,
                offset: if uncertainty { 0.0 } else { -unit.offset },
            });
        }
        return None;
    }
    DISPLAYS.iter().find_map(|&(si_suffix, display_suffix, unit)| {
        let base = stem.strip_suffix(si_suffix)?.strip_suffix('_')?;
        if base.is_empty() {
            return None;
        }
        let label = format!("{base}_{display_suffix}{uncertainty_suffix}");
        Some(Display {
            label,
            unit,
            unit_label: unit.symbol,
            // den / num is exact or correctly rounded: 1 / 1e6 is the double nearest 1e-6.
            factor: unit.den / unit.num,
            offset: 0.0,
        })
    })
}

/// The Unicode superscript digits 0 to 9: lab unit names write powers with them (`cm⁻³`), and
/// [`crate::quote`] writes powers of ten with them.
pub(crate) const SUPERSCRIPT_DIGITS: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];

/// The digit a superscript digit stands for (`²` -> `2`).
pub fn superscript_digit(c: char) -> Option<char> {
    let position = SUPERSCRIPT_DIGITS.iter().position(|&digit| digit == c)?;
    char::from_digit(position as u32, 10)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Relative agreement to 1e-12 (absolute near zero).
    fn close(actual: f64, expected: f64) -> bool {
        (actual - expected).abs() <= 1e-12 * expected.abs().max(1e-300)
    }

    /// Parses `input`, converts `value` and compares with `expected_si`; then converts back.
    fn check(input: &str, value: f64, expected_si: f64) {
        let unit = parse_unit(input).unwrap_or_else(|e| panic!("`{input}` should parse: {e}"));
        let si = to_si(value, &unit);
        assert!(
            close(si, expected_si),
            "{value} {input} = {si} SI, expected {expected_si}"
        );
        let back = unit.from_si(si);
        assert!(
            close(back, value),
            "{si} SI back to `{input}` = {back}, expected {value}"
        );
    }

    /// (unit as typed, value, the same value in SI). Every spelling of the unit table appears
    /// here; `every_listed_spelling_has_a_conversion_case` keeps it so.
    const CONVERSIONS: &[(&str, f64, f64)] = &[
        // The kelvin is the SI base unit of temperature.
        ("K", 300.0, 300.0),
        ("kelvin", 77.0, 77.0),
        // t/degC = T/K - 273.15 by definition of the Celsius scale: the ice point 0 degC = 273.15 K,
        // and water boils at 100 degC = 373.15 K at one atmosphere (common practice).
        ("degC", 0.0, 273.15),
        ("°C", 100.0, 373.15),
        ("celsius", -196.0, 77.15),
        ("deg C", 25.0, 298.15),
        // SI prefix milli = 1e-3.
        ("mK", 20.0, 0.02),
        // The tesla is the SI unit of flux density.
        ("T", 9.0, 9.0),
        ("tesla", 1.5, 1.5),
        // SI prefix milli = 1e-3.
        ("mT", 500.0, 0.5),
        // 1 G = 1e-4 T by definition of the gauss (CGS); kG with SI prefix kilo = 1e3.
        ("G", 1.0, 1e-4),
        ("gauss", 5000.0, 0.5),
        ("kG", 10.0, 1.0),
        // 1 Oe <-> 1e-4 T in vacuum (common practice: mu0 H of 1 Oe); kOe with prefix kilo.
        ("Oe", 1.0, 1e-4),
        ("oersted", 2.0e4, 2.0),
        ("kOe", 90.0, 9.0),
        // The ampere is the SI base unit of current; prefixes milli, micro, nano, pico.
        ("A", 1e-3, 1e-3),
        ("mA", 1.0, 1e-3),
        ("uA", 10.0, 1e-5),
        ("µA", 2.5, 2.5e-6),
        ("μA", 100.0, 1e-4),
        ("nA", 1.0, 1e-9),
        ("pA", 50.0, 5e-11),
        // The volt is the SI unit of potential; prefixes milli, micro, nano.
        ("V", 0.25, 0.25),
        ("mV", 1.0, 1e-3),
        ("uV", 1.0, 1e-6),
        ("µV", 250.0, 2.5e-4),
        ("μV", 3.0, 3e-6),
        ("nV", 1.0, 1e-9),
        // The metre is the SI base unit of length; prefixes centi, milli, micro, nano
        // (a micron is the customary name of the micrometre).
        ("m", 5e-7, 5e-7),
        ("cm", 1.0, 0.01),
        ("mm", 0.5, 5e-4),
        ("um", 300.0, 3e-4),
        ("µm", 1.0, 1e-6),
        ("μm", 2.0, 2e-6),
        ("micron", 10.0, 1e-5),
        ("nm", 20.0, 2e-8),
        // 1 cm^-3 = (1e-2 m)^-3 = 1e6 m^-3 by definition of the centimetre.
        ("m^-3", 1e23, 1e23),
        ("m-3", 4e21, 4e21),
        ("1/m^3", 1e20, 1e20),
        ("/m3", 7e24, 7e24),
        ("cm^-3", 1e17, 1e23),
        ("cm-3", 1e15, 1e21),
        ("1/cm^3", 2e16, 2e22),
        ("1/cm3", 5e18, 5e24),
        ("/cm3", 3e14, 3e20),
        // 1 cm^-2 = (1e-2 m)^-2 = 1e4 m^-2 by definition of the centimetre.
        ("m^-2", 1e16, 1e16),
        ("m-2", 8e15, 8e15),
        ("1/m^2", 2e17, 2e17),
        ("/m2", 5e14, 5e14),
        ("cm^-2", 1e12, 1e16),
        ("cm-2", 1e13, 1e17),
        ("1/cm^2", 9e12, 9e16),
        ("1/cm2", 3e11, 3e15),
        ("/cm2", 2e10, 2e14),
        // 1 cm^2/(V s) = (1e-2 m)^2/(V s) = 1e-4 m^2/(V s) by definition of the centimetre.
        ("m^2/(V s)", 0.14, 0.14),
        ("m^2/Vs", 0.045, 0.045),
        ("m2/Vs", 2.0, 2.0),
        ("m^2 V^-1 s^-1", 3.5, 3.5),
        ("m2/V/s", 0.1, 0.1),
        ("cm^2/(V s)", 1000.0, 0.1),
        ("cm^2/Vs", 1400.0, 0.14),
        ("cm2/Vs", 2e4, 2.0),
        ("cm^2 V^-1 s^-1", 450.0, 0.045),
        ("cm2/V/s", 1.0, 1e-4),
        // 1 ohm cm = 1 ohm x 1e-2 m = 0.01 ohm m by definition of the centimetre; prefixes
        // milli, micro, kilo on the ohm.
        ("ohm m", 1.0, 1.0),
        ("Ω·m", 2.5, 2.5),
        ("ohm_m", 0.3, 0.3),
        ("ohm cm", 1.0, 0.01),
        ("Ω·cm", 10.0, 0.1),
        ("ohm*cm", 5.0, 0.05),
        ("ohm-cm", 0.02, 2e-4),
        ("Ohm cm", 1e3, 10.0),
        ("ohm_cm", 1e4, 100.0),
        ("mohm cm", 1.0, 1e-5),
        ("mΩ·cm", 40.0, 4e-4),
        ("uohm cm", 1.7, 1.7e-8),
        ("µΩ·cm", 100.0, 1e-6),
        ("kohm cm", 1.0, 10.0),
        ("kΩ·cm", 20.0, 200.0),
        // The ohm per square is the SI sheet resistance (the square is dimensionless);
        // prefix kilo.
        ("ohm/sq", 350.0, 350.0),
        ("ohm/square", 12.5, 12.5),
        ("Ω/□", 1e4, 1e4),
        ("ohms per square", 60.0, 60.0),
        ("ohm_sq", 0.5, 0.5),
        ("kohm/sq", 1.0, 1e3),
        ("kΩ/□", 25.8128, 25_812.8),
        // The ohm is the SI unit of resistance; prefixes milli, kilo, mega.
        ("ohm", 50.0, 50.0),
        ("Ω", 1.0, 1.0),
        ("ohms", 120.0, 120.0),
        ("mohm", 1.0, 1e-3),
        ("mΩ", 250.0, 0.25),
        ("kohm", 1.0, 1e3),
        ("kΩ", 4.7, 4.7e3),
        ("Mohm", 1.0, 1e6),
        ("MΩ", 10.0, 1e7),
        // A pure number is its own SI value.
        ("1", 1.2, 1.2),
        ("dimensionless", 0.9, 0.9),
    ];

    #[test]
    fn units_convert_known_values_to_si() {
        for &(input, value, expected) in CONVERSIONS {
            check(input, value, expected);
        }
    }

    #[test]
    fn every_listed_spelling_has_a_conversion_case() {
        for entry in ENTRIES {
            for spelling in std::iter::once(&entry.unit.symbol).chain(entry.aliases) {
                assert!(
                    CONVERSIONS.iter().any(|(input, _, _)| input == spelling),
                    "no conversion case for `{spelling}`"
                );
            }
        }
    }

    #[test]
    fn no_two_units_share_a_normalised_spelling() {
        let mut seen: HashMap<String, &str> = HashMap::new();
        for entry in ENTRIES {
            for spelling in std::iter::once(&entry.unit.symbol).chain(entry.aliases) {
                if let Some(other) = seen.insert(normalize(spelling), entry.unit.symbol) {
                    assert_eq!(other, entry.unit.symbol, "`{spelling}` collides with `{other}`");
                }
            }
        }
    }

    #[test]
    fn spelling_variants_normalise_to_the_same_unit() {
        let cases: &[(&str, &str)] = &[
            ("  mT ", "mT"),
            ("° C", "degC"),
            ("℃", "degC"),
            ("degrees C", "degC"),
            ("Celsius", "degC"),
            ("°Celsius", "degC"),
            ("Kelvin", "K"),
            ("Gauss", "G"),
            ("microns", "um"),
            ("cm⁻³", "cm^-3"),
            ("cm^(-3)", "cm^-3"),
            ("1 / cm^3", "cm^-3"),
            ("per cm3", "cm^-3"),
            ("cm−3", "cm^-3"),
            ("cm⁻²", "cm^-2"),
            ("cm²/(V·s)", "cm^2/(V s)"),
            ("cm^2/(V*s)", "cm^2/(V s)"),
            ("cm2·V⁻¹·s⁻¹", "cm^2/(V s)"),
            ("cm^2/V-s", "cm^2/(V s)"),
            ("cm2/V.s", "cm^2/(V s)"),
            ("cm2_per_Vs", "cm^2/(V s)"),
            ("m2_per_Vs", "m^2/(V s)"),
            ("Ω cm", "ohm cm"),
            ("\u{2126}\u{b7}cm", "ohm cm"),
            ("Ω⋅cm", "ohm cm"),
            ("Ohm-cm", "ohm cm"),
            ("OHMS cm", "ohm cm"),
            ("Ohms/Square", "ohm/sq"),
            ("Ω/sq", "ohm/sq"),
            ("ohm per sq", "ohm/sq"),
            ("kOhm", "kohm"),
            ("MOhms", "Mohm"),
            ("mOhm", "mohm"),
            ("", "1"),
            ("-", "1"),
        ];
        for &(input, symbol) in cases {
            match parse_unit(input) {
                Ok(unit) => assert_eq!(unit.symbol(), symbol, "`{input}`"),
                Err(e) => panic!("`{input}` should read as `{symbol}`: {e}"),
            }
        }
    }

    #[test]
    fn prefix_case_matters() {
        // SI prefixes: milli (m) = 1e-3, mega (M) = 1e6.
        check("mohm", 1.0, 1e-3);
        check("Mohm", 1.0, 1e6);
        for refused in ["MT", "MK", "kg", "KG", "C", "cm3", "ohms m2"] {
            assert!(parse_unit(refused).is_err(), "`{refused}` should be refused");
        }
    }

    #[test]
    fn powers_of_ten_convert_to_the_nearest_double() {
        // Exact decimal scalings (SI prefixes and the centimetre); the SI value must be the
        // double nearest the exact product, i.e. the literal.
        let cases: &[(&str, f64, f64)] = &[
            ("um", 300.0, 3e-4),
            ("nm", 7.0, 7e-9),
            ("cm^-3", 1e17, 1e23),
            ("cm^2/Vs", 1000.0, 0.1),
            ("ohm cm", 1.0, 0.01),
            ("kG", 3.0, 0.3),
            ("mA", 1.0, 1e-3),
            ("pA", 3.0, 3e-12),
        ];
        for &(input, value, expected) in cases {
            let unit = parse_unit(input).unwrap();
            assert_eq!(to_si(value, &unit), expected, "{value} {input}");
        }
    }

    #[test]
    fn vector_conversion_keeps_missing_values() {
        // 1 mA = 1e-3 A (SI prefix milli).
        let mut currents = [1.0, f64::NAN, -3.0];
        convert_to_si(&mut currents, &parse_unit("mA").unwrap());
        assert!(close(currents[0], 1e-3) && currents[1].is_nan() && close(currents[2], -3e-3));
        // The ice point 0 degC = 273.15 K; 4.2 K is 4.2 K whatever the array holds.
        let mut temperatures = [0.0, f64::NAN];
        convert_to_si(&mut temperatures, &parse_unit("degC").unwrap());
        assert!(close(temperatures[0], 273.15) && temperatures[1].is_nan());
        let mut kelvins = [4.2, f64::NAN];
        convert_to_si(&mut kelvins, &parse_unit("K").unwrap());
        assert!(kelvins[0] == 4.2 && kelvins[1].is_nan());
    }

    #[test]
    fn uncertainties_take_the_factor_but_not_the_offset() {
        // A kelvin and a degree Celsius are the same size (Celsius scale definition).
        let celsius = parse_unit("degC").unwrap();
        assert_eq!(uncertainty_to_si(0.5, &celsius), 0.5);
        // 1 mK = 1e-3 K (SI prefix milli); 1 cm^-3 = 1e6 m^-3 (centimetre definition).
        assert!(close(uncertainty_to_si(2.0, &parse_unit("mK").unwrap()), 2e-3));
        let mut spread = [1e15, f64::NAN];
        convert_uncertainty_to_si(&mut spread, &parse_unit("cm^-3").unwrap());
        assert!(close(spread[0], 1e21) && spread[1].is_nan());
        let mut spread = [0.1];
        convert_uncertainty_to_si(&mut spread, &celsius);
        assert_eq!(spread[0], 0.1);
    }

    #[test]
    fn conversion_between_units_of_one_quantity() {
        let unit = |text: &str| parse_unit(text).unwrap();
        // 1 kG = 1e3 G (SI prefix kilo on the gauss).
        assert!(close(convert(10.0, &unit("kG"), &unit("G")).unwrap(), 1e4));
        // 1 Oe <-> 1 G in vacuum (common practice, both 1e-4 T).
        assert!(close(convert(250.0, &unit("Oe"), &unit("G")).unwrap(), 250.0));
        // The ice point 0 degC = 273.15 K; 1 mK = 1e-3 K.
        assert!(close(convert(-273.15, &unit("degC"), &unit("mK")).unwrap(), 0.0));
        assert!(close(convert(77.0, &unit("K"), &unit("degC")).unwrap(), -196.15));
        // 1 kohm cm = 1e3 ohm x 1e-2 m = 10 ohm m (SI prefix kilo, centimetre definition).
        assert!(close(convert(2.0, &unit("kohm cm"), &unit("ohm m")).unwrap(), 20.0));
    }

    #[test]
    fn mixing_quantities_is_refused() {
        let milliamp = parse_unit("mA").unwrap();
        let tesla = parse_unit("T").unwrap();
        let error = convert(1.0, &milliamp, &tesla).unwrap_err();
        assert!(matches!(
            error,
            UnitError::WrongQuantity {
                found: Quantity::Current,
                expected: Quantity::MagneticField,
                ..
            }
        ));
        let message = error.to_string();
        assert!(message.contains("`mA` is a current unit where a magnetic field unit is needed to convert to `T`"));
        assert!(message.contains("kG") && message.contains("Oe"), "{message}");

        let error = parse_unit_as("ohm cm", Quantity::SheetResistance).unwrap_err();
        assert!(error.to_string().contains("ohm/sq"), "{error}");
        assert_eq!(
            parse_unit_as("Ω/□", Quantity::SheetResistance).unwrap().symbol(),
            "ohm/sq"
        );

        let error = check_column_unit("field_kG", &milliamp).unwrap_err();
        let message = error.to_string();
        assert!(message.contains("for column `field_kG`"), "{message}");
        assert!(!message.ends_with('.'), "{message}");
        assert!(check_column_unit("voltage_V", &parse_unit("uV").unwrap()).is_ok());
        assert!(check_column_unit("temperature", &milliamp).is_ok());
        assert!(check_column_unit("density_cm3", &parse_unit("cm^-2").unwrap()).is_err());
    }

    #[test]
    fn unknown_units_suggest_and_list_spellings() {
        // (input, a suggestion that must appear, text the accepted list must contain)
        let cases: &[(&str, Option<&str>, &str)] = &[
            (
                "MT",
                Some("`mT`"),
                "accepted magnetic field units: T (also tesla), mT, G (also gauss)",
            ),
            ("mk", Some("`mK`"), "degC (also °C, celsius, deg C)"),
            ("C", Some("`degC`"), "accepted temperature units"),
            ("cm3", Some("`cm^-3`"), "cm^-3 (also cm-3, 1/cm^3, 1/cm3, /cm3)"),
            ("ohm/cm", Some("`ohm cm`"), "accepted resistivity units"),
            ("cm^-4", Some("`cm^-3` or `cm^-2`"), "sheet density: m^-2"),
            ("furlong", None, "mobility: m^2/(V s)"),
        ];
        for &(input, suggestion, listed) in cases {
            let error = parse_unit(input).unwrap_err();
            assert!(matches!(error, UnitError::Unknown { .. }), "{error:?}");
            let message = error.to_string();
            assert!(message.starts_with(&format!("unknown unit `{input}`; ")), "{message}");
            match suggestion {
                Some(s) => assert!(message.contains(&format!("did you mean {s}?")), "{message}"),
                None => assert!(!message.contains("did you mean"), "{message}"),
            }
            assert!(message.contains(listed), "`{listed}` missing from: {message}");
            assert!(!message.ends_with('.'), "{message}");
        }
        // With nothing near, every quantity is listed.
        let message = parse_unit("furlong").unwrap_err().to_string();
        for quantity in Quantity::ALL {
            assert!(
                message.contains(&format!("{quantity}: ")),
                "{quantity} missing: {message}"
            );
        }
    }

    #[test]
    fn si_suffixes_follow_the_contract() {
        let expected = [
            (Quantity::Temperature, Some("K")),
            (Quantity::MagneticField, Some("T")),
            (Quantity::Current, Some("A")),
            (Quantity::Voltage, Some("V")),
            (Quantity::Length, Some("m")),
            (Quantity::VolumeDensity, Some("m3")),
            (Quantity::SheetDensity, Some("m2")),
            (Quantity::Mobility, Some("m2_per_Vs")),
            (Quantity::Resistivity, Some("ohm_m")),
            (Quantity::SheetResistance, Some("ohm_sq")),
            (Quantity::Resistance, Some("ohm")),
            (Quantity::Dimensionless, None),
        ];
        assert_eq!(expected.len(), Quantity::ALL.len());
        for (quantity, suffix) in expected {
            assert_eq!(quantity.si_suffix(), suffix, "{quantity}");
            let si = quantity.si_unit();
            assert!(si.is_si() && si.quantity() == quantity, "{quantity}");
            let name = si_column_name("x", &si);
            match suffix {
                Some(suffix) => {
                    assert_eq!(name, format!("x_{suffix}"));
                    // An SI suffix, read back as a column token, names its own quantity.
                    assert_eq!(unit_from_column_name(&name), Some(si), "{name}");
                }
                None => assert_eq!(name, "x"),
            }
        }
    }

    #[test]
    fn column_names_follow_the_naming_rule() {
        let cases: &[(&str, &str, &str)] = &[
            ("temperature_C", "degC", "temperature_K"),
            ("field_kG", "kG", "field_T"),
            ("current_mA", "mA", "current_A"),
            ("thickness_um", "um", "thickness_m"),
            ("density_cm3", "cm^-3", "density_m3"),
            ("hall_mobility_cm2_per_Vs", "cm^2/Vs", "hall_mobility_m2_per_Vs"),
            ("resistivity_ohm_cm", "ohm cm", "resistivity_ohm_m"),
            ("temperature", "K", "temperature_K"),
            ("voltage_V", "uV", "voltage_V"),
            ("temperature_C_unc", "degC", "temperature_K_unc"),
            ("density_per_cm3", "cm^-3", "density_m3"),
            ("sheet_density_cm2", "cm^-2", "sheet_density_m2"),
            ("rho_xx_ohm_sq", "ohm/sq", "rho_xx_ohm_sq"),
            ("sheet_resistance", "Ω/□", "sheet_resistance_ohm_sq"),
            ("rho_xy", "ohm", "rho_xy_ohm"),
            ("field_Oe", "Oe", "field_T"),
            ("hall_factor", "1", "hall_factor"),
            ("sample_1", "K", "sample_1_K"),
            ("effective_dos_300K_cm3", "cm^-3", "effective_dos_300K_m3"),
        ];
        for &(column, unit, expected) in cases {
            let unit = parse_unit(unit).unwrap();
            assert_eq!(si_column_name(column, &unit), expected, "{column} in {unit}");
        }
    }

    #[test]
    fn column_names_carry_their_unit() {
        let cases: &[(&str, Option<&str>)] = &[
            ("field_kG", Some("kG")),
            ("temperature_C", Some("degC")),
            ("density_cm3", Some("cm^-3")),
            ("density_m3_unc", Some("m^-3")),
            ("hall_mobility_cm2_per_Vs", Some("cm^2/(V s)")),
            ("resistivity_ohm_m", Some("ohm m")),
            ("sheet_resistance_ohm_sq", Some("ohm/sq")),
            ("thickness_um", Some("um")),
            ("sample", None),
            ("hall_factor", None),
            ("i_in", None),
            ("v_pos", None),
            ("carrier_type", None),
        ];
        for &(column, symbol) in cases {
            assert_eq!(unit_from_column_name(column).map(|u| u.symbol()), symbol, "{column}");
        }
    }

    #[test]
    fn customary_display_of_si_columns() {
        // Factors from SI: 1 m^-3 = 1e-6 cm^-3 and 1 m^-2 = 1e-4 cm^-2 (centimetre definition),
        // 1 m^2/(V s) = 1e4 cm^2/(V s), 1 ohm m = 100 ohm cm, 1 m = 1e6 um (SI prefix micro).
        let cases: &[(&str, &str, f64, &str)] = &[
            ("density_m3", "density_cm3", 1e-6, "cm^-3"),
            ("density_m3_unc", "density_cm3_unc", 1e-6, "cm^-3"),
            ("sheet_density_m2", "sheet_density_cm2", 1e-4, "cm^-2"),
            ("hall_mobility_m2_per_Vs", "hall_mobility_cm2_per_Vs", 1e4, "cm^2/(V s)"),
            (
                "hall_mobility_m2_per_Vs_unc",
                "hall_mobility_cm2_per_Vs_unc",
                1e4,
                "cm^2/(V s)",
            ),
            ("resistivity_ohm_m", "resistivity_ohm_cm", 100.0, "ohm cm"),
            ("thickness_m", "thickness_um", 1e6, "um"),
            ("thickness_m_unc", "thickness_um_unc", 1e6, "um"),
            ("sheet_resistance_ohm_sq", "sheet_resistance_ohm_sq", 1.0, "ohm/sq"),
            ("rho_xy_ohm", "rho_xy_ohm", 1.0, "ohm"),
            ("temperature_K", "temperature_K", 1.0, "K"),
            ("temperature_K_unc", "temperature_K_unc", 1.0, "K"),
            ("field_T", "field_T", 1.0, "T"),
            ("current_A", "current_A", 1.0, "A"),
            ("voltage_V", "voltage_V", 1.0, "V"),
            ("dopant_density_m3", "dopant_density_cm3", 1e-6, "cm^-3"),
        ];
        for &(column, label, factor, unit_label) in cases {
            let display = customary_display(column).unwrap_or_else(|| panic!("no display for {column}"));
            assert_eq!(display.label, label, "{column}");
            assert_eq!(display.factor, factor, "{column}");
            assert_eq!(display.unit_label, unit_label, "{column}");
            // The label reads as the displayed unit, and the unit label parses to it.
            assert_eq!(parse_unit(display.unit_label).unwrap(), display.unit);
            assert!(close(display.factor * display.unit.factor(), 1.0), "{column}");
            // Naming and display are inverse: renaming the label in its unit gives the column.
            assert_eq!(si_column_name(&display.label, &display.unit), column);
        }
        for column in [
            "sample",
            "hall_factor",
            "carrier_type",
            "density_cm3",
            "ionization_energy_eV",
            "_m",
        ] {
            assert_eq!(customary_display(column), None, "{column}");
        }
    }

    #[test]
    fn customary_display_round_trips() {
        // SI -> display -> SI within 1e-12 relative, at typical magnitudes of each quantity.
        let cases: &[(&str, f64)] = &[
            ("density_m3", 1.234_567e23),
            ("density_m3", 3.3e15),
            ("sheet_density_m2", 9.87e16),
            ("hall_mobility_m2_per_Vs", 0.1417),
            ("resistivity_ohm_m", 1.1e-4),
            ("thickness_m", 5.25e-7),
            ("sheet_resistance_ohm_sq", 412.5),
            ("temperature_K", 77.35),
            ("field_T", -0.5),
            ("current_A", 1e-6),
            ("voltage_V", 3.2e-5),
        ];
        for &(column, si) in cases {
            let display = customary_display(column).unwrap();
            let shown = display.from_si(si);
            assert!(close(shown, si * display.factor), "{column}: {shown}");
            assert!(close(display.to_si(shown), si), "{column}: {si} -> {shown}");
        }
        // 1e23 m^-3 is shown as 1e17 cm^-3 (centimetre definition).
        assert!(close(customary_display("density_m3").unwrap().from_si(1e23), 1e17));
    }

    #[test]
    fn hall_coefficients_and_log_densities_are_shown_per_centimetre() {
        // 1 m^3/C = 1e6 cm^3/C and 1 m^2/C = 1e4 cm^2/C (centimetre definition).
        let display = customary_display("hall_coefficient_m3_per_C").unwrap();
        assert_eq!(display.label, "hall_coefficient_cm3_per_C");
        assert_eq!(display.unit_label, "cm^3/C");
        assert_eq!((display.factor, display.offset), (1e6, 0.0));
        assert!(close(display.from_si(-6.25e-4), -625.0));
        let display = customary_display("hall_coefficient_m3_per_C_unc").unwrap();
        assert_eq!(display.label, "hall_coefficient_cm3_per_C_unc");
        let display = customary_display("sheet_hall_coefficient_m2_per_C").unwrap();
        assert_eq!(display.label, "sheet_hall_coefficient_cm2_per_C");
        assert!(close(display.from_si(2.5e-3), 25.0));

        // ln(n / cm^-3) = ln(n / m^-3) - ln(1e6): n = 1e21 m^-3 = 1e15 cm^-3.
        let display = customary_display("ln_reduced_density_m3").unwrap();
        assert_eq!(display.label, "ln_reduced_density_cm3");
        let si = 1e21f64.ln();
        assert!(close(display.from_si(si), 1e15f64.ln()), "{}", display.from_si(si));
        assert!(close(si * display.factor + display.offset, 1e15f64.ln()));
        assert!(close(display.to_si(1e15f64.ln()), si));
        // An uncertainty of a logarithm is a relative one and keeps its value.
        let display = customary_display("ln_reduced_density_m3_unc").unwrap();
        assert_eq!(display.label, "ln_reduced_density_cm3_unc");
        assert_eq!(
            (display.factor, display.offset, display.from_si(0.02)),
            (1.0, 0.0, 0.02)
        );
        let display = customary_display("ln_sheet_density_m2").unwrap();
        assert!(close(display.from_si(1e16f64.ln()), 1e12f64.ln()));
        // Not a density: left alone.
        assert_eq!(customary_display("ln_ratio"), None);
    }

    #[test]
    fn the_parts_of_an_uncertainty_budget_are_shown_in_their_values_unit() {
        for (column, label, factor) in [
            ("density_m3_unc_stat", "density_cm3_unc_stat", 1e-6),
            ("density_m3_unc_sys", "density_cm3_unc_sys", 1e-6),
            ("resistivity_ohm_m_unc_stat", "resistivity_ohm_cm_unc_stat", 100.0),
            (
                "hall_mobility_m2_per_Vs_unc_sys",
                "hall_mobility_cm2_per_Vs_unc_sys",
                1e4,
            ),
        ] {
            let display = customary_display(column).unwrap();
            assert_eq!((display.label.as_str(), display.factor), (label, factor), "{column}");
        }
        assert_eq!(customary_display("_unc_stat"), None);
    }
}
