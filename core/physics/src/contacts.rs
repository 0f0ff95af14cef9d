//! Contact configurations of a four-terminal reading and their canonical orientation.
//!
//! A raw reading names the contact the current enters (`i_in`), the one it leaves
//! (`i_out`), and the two voltage contacts (`voltage_V` = V(`v_pos`) - V(`v_neg`)).
//! Labs reverse the current either by the source sign or by swapping the current leads,
//! and wire the voltmeter either way round. Every reading is mapped here onto one
//! canonical orientation of its configuration, so that `current_sign * current_A` and
//! `voltage_sign * voltage_V` mean the same thing for every reading of that configuration.
//!
//! ## Van der Pauw (contacts 1 to 4, counterclockwise seen from the +B side)
//!
//! | configuration | canonical in, out, +, - | NIST name |
//! |---|---|---|
//! | `Resistance(A, direct)` | 2, 1, 3, 4 | R_21,34 |
//! | `Resistance(A, reciprocal)` | 4, 3, 1, 2 | R_43,12 |
//! | `Resistance(B, direct)` | 3, 2, 4, 1 | R_32,41 |
//! | `Resistance(B, reciprocal)` | 1, 4, 2, 3 | R_14,23 |
//! | `Hall(diagonal 1-3)` | 1, 3, 2, 4 | V_24 with I_13 |
//! | `Hall(diagonal 2-4)` | 2, 4, 3, 1 | V_31 with I_24 |
//!
//! In canonical orientation a resistance configuration gives V/I > 0, and the odd-in-field
//! part of a Hall configuration's V/I is positive for holes at positive field (the sign
//! convention of the NIST Hall-effect pages: a positive sum of the Hall voltages means
//! p-type). Reciprocity: R_21,34(B) = R_43,12(-B) (van der Pauw 1958).
//! Current along one edge with the voltage taken on the opposite edge is a resistance
//! configuration; current and voltage on the two diagonals is a Hall configuration.
//!
//! ## Hall bar (contacts 1 to 6)
//!
//! ```text
//!          3       4            +y
//!      ┌───┴───────┴───┐         ^
//!    1 ┤  current 1->2 ├ 2       |   B along +z (towards the viewer)
//!      └───┬───────┬───┘         +--> +x
//!          5       6
//! ```
//!
//! Current flows between 1 and 2 (canonical: in at 1, out at 2). Contacts 3 and 4 sit on
//! the +y edge (left of the current direction seen from the +B side), 5 and 6 opposite
//! them. `BarLongitudinal(0)` is + at 3, - at 4; `BarLongitudinal(1)` is + at 5, - at 6;
//! `BarTransverse(0)` is + at 5, - at 3; `BarTransverse(1)` is + at 6, - at 4: holes
//! driven along +x at +B are pushed towards -y, so the canonical transverse voltage is
//! positive for holes, as for the van der Pauw Hall configurations.
//!
//! ## Pair notation
//!
//! A table may give each reading's configuration as one cell instead of four contact columns,
//! in the pair notation of ASTM F76 and van der Pauw (1958): the current pair, then the voltage
//! pair. `"21,34"` is current entering at 2 and leaving at 1, with the voltage V3 - V4
//! ([`parse_pair_notation`]: digits 1 to 6, blanks around the pairs allowed). A CSV file
//! separated by commas must quote such a cell (`"21,34"`); the import leaves a column named
//! `contacts` alone when it turns decimal commas into points.

/// The two characteristic resistances of van der Pauw's method.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum ResistanceFamily {
    /// Current along the edge 1-2 (direct) or 3-4 (reciprocal).
    A,
    /// Current along the edge 2-3 (direct) or 4-1 (reciprocal).
    B,
}

/// The canonical configuration a reading belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Configuration {
    /// Van der Pauw resistance: current on one edge, voltage on the opposite edge.
    Resistance { family: ResistanceFamily, reciprocal: bool },
    /// Van der Pauw Hall: current on one diagonal, voltage on the other. `diagonal` is 0 for
    /// current on 1-3 and 1 for current on 2-4.
    Hall { diagonal: u8 },
    /// Hall bar, voltage along the bar on one edge (0: contacts 3-4, 1: contacts 5-6).
    BarLongitudinal { pair: u8 },
    /// Hall bar, voltage across the bar (0: contacts 5-3, 1: contacts 6-4).
    BarTransverse { pair: u8 },
}

impl Configuration {
    /// The canonical (in, out, +, -) contacts of this configuration.
    pub fn canonical_contacts(self) -> [u8; 4] {
        use Configuration::*;
        use ResistanceFamily::*;
        match self {
            Resistance {
                family: A,
                reciprocal: false,
            } => [2, 1, 3, 4],
            Resistance {
                family: A,
                reciprocal: true,
            } => [4, 3, 1, 2],
            Resistance {
                family: B,
                reciprocal: false,
            } => [3, 2, 4, 1],
            Resistance {
                family: B,
                reciprocal: true,
            } => [1, 4, 2, 3],
            Hall { diagonal: 0 } => [1, 3, 2, 4],
            Hall { .. } => [2, 4, 3, 1],
            BarLongitudinal { pair: 0 } => [1, 2, 3, 4],
            BarLongitudinal { .. } => [1, 2, 5, 6],
            BarTransverse { pair: 0 } => [1, 2, 5, 3],
            BarTransverse { .. } => [1, 2, 6, 4],
        }
    }

    /// All van der Pauw configurations, resistance ones first.
    pub const VAN_DER_PAUW: [Configuration; 6] = [
        Configuration::Resistance {
            family: ResistanceFamily::A,
            reciprocal: false,
        },
        Configuration::Resistance {
            family: ResistanceFamily::A,
            reciprocal: true,
        },
        Configuration::Resistance {
            family: ResistanceFamily::B,
            reciprocal: false,
        },
        Configuration::Resistance {
            family: ResistanceFamily::B,
            reciprocal: true,
        },
        Configuration::Hall { diagonal: 0 },
        Configuration::Hall { diagonal: 1 },
    ];

    /// All Hall-bar configurations, longitudinal ones first.
    pub const HALL_BAR: [Configuration; 4] = [
        Configuration::BarLongitudinal { pair: 0 },
        Configuration::BarLongitudinal { pair: 1 },
        Configuration::BarTransverse { pair: 0 },
        Configuration::BarTransverse { pair: 1 },
    ];

    /// True for the configurations whose odd-in-field part carries the Hall signal.
    pub fn is_hall(self) -> bool {
        matches!(self, Configuration::Hall { .. } | Configuration::BarTransverse { .. })
    }
}

/// A reading mapped onto its canonical configuration. The canonical current is
/// `current_sign * current_A`, the canonical voltage `voltage_sign * voltage_V`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Classified {
    pub configuration: Configuration,
    pub current_sign: f64,
    pub voltage_sign: f64,
}

/// Why a contact assignment is not a measurement the geometry knows.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum ContactError {
    #[error("contact number {contact} is outside 1..={max}; number the {geometry} contacts 1 to {max}")]
    OutOfRange {
        contact: i64,
        max: i64,
        geometry: &'static str,
    },
    #[error("contacts i_in={0}, i_out={1}, v_pos={2}, v_neg={3} are not four distinct contacts")]
    NotDistinct(i64, i64, i64, i64),
    #[error("current between contacts {0} and {1} is not a Hall-bar measurement: the current must flow between contacts 1 and 2")]
    BarCurrentContacts(i64, i64),
    #[error("voltage between contacts {0} and {1} is not a Hall-bar pair: use 3-4 or 5-6 along the bar, 3-5 or 4-6 across it")]
    BarVoltageContacts(i64, i64),
}

fn check_contacts(contacts: [i64; 4], max: i64, geometry: &'static str) -> Result<[u8; 4], ContactError> {
    for &contact in &contacts {
        if !(1..=max).contains(&contact) {
            return Err(ContactError::OutOfRange { contact, max, geometry });
        }
    }
    let [a, b, c, d] = contacts;
    if a == b || a == c || a == d || b == c || b == d || c == d {
        return Err(ContactError::NotDistinct(a, b, c, d));
    }
    Ok(contacts.map(|c| c as u8))
}

fn orient(configuration: Configuration, contacts: [u8; 4]) -> Classified {
    let [canonical_in, _, canonical_pos, _] = configuration.canonical_contacts();
    Classified {
        configuration,
        current_sign: if contacts[0] == canonical_in { 1.0 } else { -1.0 },
        voltage_sign: if contacts[2] == canonical_pos { 1.0 } else { -1.0 },
    }
}

fn same_pair(x: u8, y: u8, pair: (u8, u8)) -> bool {
    (x, y) == pair || (y, x) == pair
}

/// Classifies a van der Pauw reading (contacts 1 to 4, four distinct).
pub fn classify_van_der_pauw(i_in: i64, i_out: i64, v_pos: i64, v_neg: i64) -> Result<Classified, ContactError> {
    let contacts = check_contacts([i_in, i_out, v_pos, v_neg], 4, "van der Pauw")?;
    let configuration = Configuration::VAN_DER_PAUW
        .into_iter()
        .find(|cfg| {
            let [cin, cout, _, _] = cfg.canonical_contacts();
            same_pair(contacts[0], contacts[1], (cin, cout))
        })
        .expect("four distinct contacts among 1..4 put the current on an edge or a diagonal");
    Ok(orient(configuration, contacts))
}

/// Classifies a Hall-bar reading (contacts 1 to 6, see the module documentation).
pub fn classify_hall_bar(i_in: i64, i_out: i64, v_pos: i64, v_neg: i64) -> Result<Classified, ContactError> {
    let contacts = check_contacts([i_in, i_out, v_pos, v_neg], 6, "Hall-bar")?;
    if !same_pair(contacts[0], contacts[1], (1, 2)) {
        return Err(ContactError::BarCurrentContacts(i_in, i_out));
    }
    let configuration = Configuration::HALL_BAR
        .into_iter()
        .find(|cfg| {
            let [_, _, pos, neg] = cfg.canonical_contacts();
            same_pair(contacts[2], contacts[3], (pos, neg))
        })
        .ok_or(ContactError::BarVoltageContacts(v_pos, v_neg))?;
    Ok(orient(configuration, contacts))
}

/// A configuration written in the pair notation of the standard methods: the current pair,
/// then the voltage pair. `"21,34"` is current entering at contact 2 and leaving at 1, with
/// the voltage V3 - V4 (the R_21,34 of ASTM F76 and of van der Pauw's method), so
/// (i_in, i_out, v_pos, v_neg) = (2, 1, 3, 4). Contacts are single digits 1 to 6 (Hall bars
/// use 5 and 6); blanks around the pairs are allowed. Whether the four contacts make a
/// measurement of the geometry is checked by [`classify_van_der_pauw`] and
/// [`classify_hall_bar`], not here.
pub fn parse_pair_notation(text: &str) -> Result<[i64; 4], NotationError> {
    let malformed = || NotationError(text.to_owned());
    let (current, voltage) = text.split_once(',').ok_or_else(malformed)?;
    let pair = |part: &str| -> Result<[i64; 2], NotationError> {
        let digits: Vec<char> = part.trim().chars().collect();
        match digits[..] {
            [a, b] if ('1'..='6').contains(&a) && ('1'..='6').contains(&b) => {
                Ok([a as i64 - '0' as i64, b as i64 - '0' as i64])
            }
            _ => Err(malformed()),
        }
    };
    let [i_in, i_out] = pair(current)?;
    let [v_pos, v_neg] = pair(voltage)?;
    Ok([i_in, i_out, v_pos, v_neg])
}

/// A cell that is not a configuration in the pair notation.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("`{0}` is not a contact configuration; write the current pair and the voltage pair as in \"21,34\" (current in at 2, out at 1; voltage V3 - V4), contacts 1 to 6")]
pub struct NotationError(pub String);

#[cfg(test)]
mod tests {
    use super::*;
    use Configuration::*;
    use ResistanceFamily::*;

    // The eight resistance configurations of the NIST averaging (R_A from R21,34, R12,43,
    // R43,12, R34,21; R_B from R32,41, R23,14, R14,23, R41,32) all map onto R_A or R_B with
    // a positive canonical resistance when V_kl / I_ij > 0 (NIST Hall-effect pages, from memory).
    #[test]
    fn nist_resistance_configurations_classify_with_positive_orientation() {
        let nist = [
            ([2, 1, 3, 4], A, false),
            ([1, 2, 4, 3], A, false),
            ([4, 3, 1, 2], A, true),
            ([3, 4, 2, 1], A, true),
            ([3, 2, 4, 1], B, false),
            ([2, 3, 1, 4], B, false),
            ([1, 4, 2, 3], B, true),
            ([4, 1, 3, 2], B, true),
        ];
        for (c, family, reciprocal) in nist {
            let got = classify_van_der_pauw(c[0], c[1], c[2], c[3]).unwrap();
            assert_eq!(got.configuration, Resistance { family, reciprocal }, "{c:?}");
            // R_ij,kl = V_kl / I_ij: both signs flip together under current reversal.
            assert_eq!(got.current_sign * got.voltage_sign, 1.0, "{c:?}");
        }
    }

    // NIST Hall voltages: V_C = V24 with I_13, V_D = V42 with I_31, V_E = V13 with I_42,
    // V_F = V31 with I_24; the sum is positive for p-type (NIST pages, from memory).
    #[test]
    fn nist_hall_configurations_share_the_sign_convention() {
        for (c, diagonal) in [
            ([1, 3, 2, 4], 0),
            ([3, 1, 4, 2], 0),
            ([4, 2, 1, 3], 1),
            ([2, 4, 3, 1], 1),
        ] {
            let got = classify_van_der_pauw(c[0], c[1], c[2], c[3]).unwrap();
            assert_eq!(got.configuration, Hall { diagonal }, "{c:?}");
            assert_eq!(got.current_sign * got.voltage_sign, 1.0, "{c:?}");
        }
        // Swapping only the voltmeter leads flips the sign.
        let swapped = classify_van_der_pauw(1, 3, 4, 2).unwrap();
        assert_eq!(swapped.current_sign * swapped.voltage_sign, -1.0);
    }

    #[test]
    fn bad_contacts_are_refused_with_a_reason() {
        assert!(matches!(
            classify_van_der_pauw(1, 2, 3, 5),
            Err(ContactError::OutOfRange { contact: 5, .. })
        ));
        assert!(matches!(
            classify_van_der_pauw(0, 2, 3, 4),
            Err(ContactError::OutOfRange { contact: 0, .. })
        ));
        assert!(matches!(
            classify_van_der_pauw(1, 1, 3, 4),
            Err(ContactError::NotDistinct(..))
        ));
        assert!(matches!(
            classify_hall_bar(1, 3, 4, 5),
            Err(ContactError::BarCurrentContacts(..))
        ));
        assert!(matches!(
            classify_hall_bar(1, 2, 3, 6),
            Err(ContactError::BarVoltageContacts(..))
        ));
    }

    #[test]
    fn hall_bar_configurations() {
        let l = classify_hall_bar(2, 1, 4, 3).unwrap();
        assert_eq!(l.configuration, BarLongitudinal { pair: 0 });
        assert_eq!((l.current_sign, l.voltage_sign), (-1.0, -1.0));
        let t = classify_hall_bar(1, 2, 4, 6).unwrap();
        assert_eq!(t.configuration, BarTransverse { pair: 1 });
        assert_eq!((t.current_sign, t.voltage_sign), (1.0, -1.0));
    }

    // The pair notation of ASTM F76 and van der Pauw's method: R_ij,kl = V_kl / I_ij with
    // the current entering at i and leaving at j, and V_kl = V_k - V_l.
    #[test]
    fn pair_notation_reads_current_pair_then_voltage_pair() {
        assert_eq!(parse_pair_notation("21,34"), Ok([2, 1, 3, 4]));
        assert_eq!(parse_pair_notation(" 13, 24 "), Ok([1, 3, 2, 4]));
        assert_eq!(parse_pair_notation("12,56"), Ok([1, 2, 5, 6]));
        // Every canonical configuration round-trips through its written name.
        for configuration in Configuration::VAN_DER_PAUW {
            let [a, b, c, d] = configuration.canonical_contacts();
            let text = format!("{a}{b},{c}{d}");
            let contacts = parse_pair_notation(&text).unwrap();
            let classified = classify_van_der_pauw(contacts[0], contacts[1], contacts[2], contacts[3]).unwrap();
            assert_eq!(classified.configuration, configuration, "{text}");
            assert_eq!((classified.current_sign, classified.voltage_sign), (1.0, 1.0), "{text}");
        }
        for bad in [
            "21;34", "2134", "21,3", "21,345", "71,34", "a1,34", "", ",", "21,34,", "2 1,34",
        ] {
            let error = parse_pair_notation(bad).unwrap_err();
            assert_eq!(error.0, bad);
            assert!(error.to_string().contains("\"21,34\""), "{error}");
        }
    }
}
