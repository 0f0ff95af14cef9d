//! Figure declarations: how the output table of an analysis is drawn, stated by the plugin that
//! makes the table, so that the host draws a lab's own analysis as it draws the built-in ones.
//!
//! A [`FigureSpec`] is part of an [`crate::abi::AnalysisDeclaration`] and crosses the ABI as
//! JSON like the rest of it; the field is optional (`figures` defaults to none), so a plugin
//! written before figures were declared still loads and gets the generic `columns` figure.
//!
//! The vocabulary is small and says nothing of any one analysis: panels with an x column and
//! layers of y columns, axis scales (linear, logarithmic, reciprocal such as 1000/T), series
//! grouping, row selection by the `kind` column or a boolean column, error bars from the `_unc`
//! companions and a few value transforms (absolute value, percent, per another column, relative
//! to the zero-x row). Fit overlays are layers drawn as lines from the model columns (or model
//! rows) of the same table. Displayed units are not declared: the host takes them from the
//! column-name unit convention (`temperature_K`, `density_m3`, ...), so a declaration names the
//! quantity ("Carrier density n") and the host adds "cm^-3".
//!
//! Axis and legend text use the figure markup: `^{...}` for a superscript, `_{...}` for a
//! subscript.

use serde::{Deserialize, Deserializer, Serialize};

/// One figure ("plot kind") of an analysis's output table.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FigureSpec {
    /// The kind's name as clients ask for it (`plot.render` `kind`), for example
    /// `hall_density`. The first figure of an analysis is the one drawn by default.
    pub name: String,
    /// The default title; the dataset's name is appended.
    pub title: String,
    /// What the figure shows, for `plot.kinds`.
    #[serde(default)]
    pub description: String,
    /// The values of the table's `kind` column whose rows the figure draws, in the order their
    /// rows are read into series; empty: every row (and no `kind` column is needed).
    #[serde(default)]
    pub row_kinds: Vec<String>,
    /// A row kind without which the figure cannot be drawn, and why it can be missing.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub requires: Option<RequiredRows>,
    /// The columns whose values split the rows into series (or panels), used when the caller
    /// gives no `series_by`; a column that is absent or takes one value is left out.
    #[serde(default)]
    pub series_by: Vec<SeriesKey>,
    /// One panel per series group (the panels of `panels[0]` repeated), instead of the groups
    /// as series within each panel.
    #[serde(default)]
    pub panel_per_series: bool,
    /// Limits the x range to the part where the first layer has visible values.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub trim_x: Option<TrimX>,
    pub panels: Vec<PanelSpec>,
    /// Drawn instead of this figure when the first layer's column of this figure holds no
    /// finite value (or is absent) and the first layer's column of the fallback is present:
    /// for example the sheet density of a two-dimensional sample where the volume density is
    /// empty.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fallback: Option<Box<FigureSpec>>,
}

/// Rows of a `kind` the figure needs, with a hint for the message when there are none.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RequiredRows {
    pub kind: String,
    /// Why the rows can be missing and what to do, for example "run x.y with z: true".
    pub hint: String,
}

/// A series grouping column. Temperatures (`temperature_K`) and fields (`field_T`) group by
/// their setpoint (values within a setpoint's tolerance form one series, named by the roundest
/// value within it); other columns by their text. Written as a plain column name when the
/// defaults serve.
#[derive(Debug, Clone, PartialEq)]
pub struct SeriesKey {
    pub column: String,
    /// Text before the value in the series name, for example "B_{eff} = ".
    pub prefix: String,
    /// Name the series by the first row's exact value rather than the setpoint's round one.
    pub exact: bool,
    /// Name the series by this column even when it takes one value.
    pub always: bool,
}

impl Serialize for SeriesKey {
    fn serialize<S: serde::Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeMap;
        if self.prefix.is_empty() && !self.exact && !self.always {
            return serializer.serialize_str(&self.column);
        }
        let mut map = serializer.serialize_map(None)?;
        map.serialize_entry("column", &self.column)?;
        if !self.prefix.is_empty() {
            map.serialize_entry("prefix", &self.prefix)?;
        }
        if self.exact {
            map.serialize_entry("exact", &true)?;
        }
        if self.always {
            map.serialize_entry("always", &true)?;
        }
        map.end()
    }
}

fn is_false(value: &bool) -> bool {
    !*value
}

impl SeriesKey {
    /// A grouping column with the default naming.
    pub fn column(column: &str) -> SeriesKey {
        SeriesKey {
            column: column.to_owned(),
            prefix: String::new(),
            exact: false,
            always: false,
        }
    }
}

impl<'de> Deserialize<'de> for SeriesKey {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        #[derive(Deserialize)]
        #[serde(deny_unknown_fields)]
        struct Full {
            column: String,
            #[serde(default)]
            prefix: String,
            #[serde(default)]
            exact: bool,
            #[serde(default)]
            always: bool,
        }
        #[derive(Deserialize)]
        #[serde(untagged)]
        enum Written {
            Name(String),
            Full(Full),
        }
        Ok(match Written::deserialize(deserializer)? {
            Written::Name(column) => SeriesKey::column(&column),
            Written::Full(full) => SeriesKey {
                column: full.column,
                prefix: full.prefix,
                exact: full.exact,
                always: full.always,
            },
        })
    }
}

/// Keeps the x range up to `margin` times the largest x where the first layer's |y| reaches
/// `fraction` of its largest value: a spectrum computed to its Nyquist frequency would
/// otherwise crowd its lines against the left edge.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TrimX {
    pub fraction: f64,
    pub margin: f64,
}

/// One panel: an x column, axis texts and the layers drawn on it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PanelSpec {
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub title: Option<String>,
    pub x: AxisSpec,
    pub y: AxisSpec,
    pub layers: Vec<LayerSpec>,
}

/// An axis: its quantity's name (the unit comes from the column name), its scale, and for x the
/// column drawn along it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AxisSpec {
    /// The x column; unused on y, whose columns are the layers'.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub column: Option<String>,
    /// The quantity, for example "Temperature T"; `{choice}` is replaced by `choice`'s text.
    pub label: String,
    #[serde(default)]
    pub scale: AxisScale,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub choice: Option<LabelChoice>,
}

/// How values are placed along an axis.
#[derive(Debug, Clone, Copy, PartialEq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum AxisScale {
    #[default]
    Linear,
    Log,
    /// `numerator / value` on a linear axis, in the reciprocal unit: 1000/T of an Arrhenius
    /// plot is `{"reciprocal": 1000}`.
    Reciprocal(f64),
}

/// Part of an axis label chosen by a column's first finite value, for example the exponent of
/// T a fit used.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LabelChoice {
    pub column: String,
    /// (value, text): the text of the first value within 1e-9 of the column's.
    pub cases: Vec<(f64, String)>,
    /// The text when no case matches or the column is absent.
    pub otherwise: String,
}

/// One y column drawn for every series group: as points or as a line.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LayerSpec {
    /// The y column.
    pub y: String,
    /// The legend text; `{dataset}` is replaced by the dataset's name and `{slope}` by the slope
    /// of the drawn line between its end points.
    pub name: String,
    #[serde(default)]
    pub naming: Naming,
    /// Appended to the series name, for example " (outside the fitted range)".
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub name_suffix: String,
    /// The legend text when `name` holds `{slope}` and the line has fewer than two points.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub name_without_slope: Option<String>,
    pub mark: MarkSpec,
    #[serde(default)]
    pub rows: RowSelection,
    #[serde(default)]
    pub errors: ErrorBars,
    /// Applied in order to the displayed y values (and their errors).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub transforms: Vec<Transform>,
    /// A fixed palette index; default: the series group's index.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub colour: Option<usize>,
    /// The palette index when the figure has one series group (each layer its own colour).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub colour_alone: Option<usize>,
    /// Left out when the column is absent or holds no finite value.
    #[serde(default, skip_serializing_if = "is_false")]
    pub optional: bool,
    /// A line that sets the axis range as points do (by default lines follow the data).
    #[serde(default, skip_serializing_if = "is_false")]
    pub sets_range: bool,
}

/// How a layer's series is named within its group.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Naming {
    /// "A, 300 K: fit" when there are several groups, "fit" when there is one.
    #[default]
    WithGroup,
    /// The group's name ("A, 300 K"), or the layer's name when the group has none.
    GroupOrName,
    /// "A, 300 K: fit" whenever the group has a name, even alone.
    AfterGroup,
}

/// Points or a line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MarkSpec {
    /// Markers, one shape per group; open markers for rows a fit left out.
    Points {
        filled: bool,
    },
    Line {
        dash: DashSpec,
    },
}

/// Line dashes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DashSpec {
    #[default]
    Solid,
    Dashed,
    Dotted,
    Chain,
    Long,
}

/// Which of the figure's rows a layer draws.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RowSelection {
    /// Rows whose `kind` column holds this value.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub kind: Option<String>,
    /// Rows of this kind instead, in a group with no rows of `kind` (a model drawn at the data
    /// points of a table stored without its curve rows).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub kind_fallback: Option<String>,
    /// Rows whose boolean column holds `value`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub flag: Option<FlagSelection>,
    /// Rows whose y value is a whole number (true) or not (false).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub whole_y: Option<bool>,
}

/// Rows by a boolean column (nulls count as false). Without the column, a selection of true
/// keeps every row and one of false none, unless the column is `required`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FlagSelection {
    pub column: String,
    pub value: bool,
    #[serde(default, skip_serializing_if = "is_false")]
    pub required: bool,
}

/// Error bars of a layer (one standard deviation).
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ErrorBars {
    #[default]
    None,
    /// The y column's `_unc` companion, when the table has it.
    Companion,
    /// |sigma_c / c| of another column c and its `_unc` companion: the error of a logarithm
    /// of c.
    RelativeOf(String),
}

/// A change of the displayed y values.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Transform {
    /// |y|.
    Abs,
    /// 100 y, in %.
    Percent,
    /// y divided by another column's stored value, in the unit of y per the column's unit.
    Per(String),
    /// y plus a constant (errors unchanged).
    Shift(f64),
    /// (y - y0) / y0 in each series group, y0 the row with the x closest to zero within
    /// `within`; in percent when `percent`. A group without such a row is refused with `hint`.
    RelativeToZeroX { within: f64, percent: bool, hint: String },
}

impl FigureSpec {
    /// The columns the figure draws, for messages: x columns and required layer columns.
    pub fn needed_columns(&self) -> Vec<String> {
        let mut needed: Vec<String> = Vec::new();
        if !self.row_kinds.is_empty() {
            needed.push("kind".to_owned());
        }
        for panel in &self.panels {
            let columns = panel
                .x
                .column
                .iter()
                .chain(panel.layers.iter().filter(|l| !l.optional).map(|l| &l.y));
            for column in columns {
                if !needed.contains(column) {
                    needed.push(column.clone());
                }
            }
        }
        needed
    }
}

/// Builders, so that a declaration reads as the figure it describes.
impl FigureSpec {
    /// A figure of no panels yet, drawing every row, grouped by nothing.
    pub fn new(name: &str, title: &str, description: &str) -> FigureSpec {
        FigureSpec {
            name: name.to_owned(),
            title: title.to_owned(),
            description: description.to_owned(),
            row_kinds: Vec::new(),
            requires: None,
            series_by: Vec::new(),
            panel_per_series: false,
            trim_x: None,
            panels: Vec::new(),
            fallback: None,
        }
    }

    pub fn panel(mut self, panel: PanelSpec) -> FigureSpec {
        self.panels.push(panel);
        self
    }

    /// Series grouping columns with the default naming.
    pub fn series_by(mut self, columns: &[&str]) -> FigureSpec {
        self.series_by = columns.iter().map(|c| SeriesKey::column(c)).collect();
        self
    }

    pub fn series_key(mut self, key: SeriesKey) -> FigureSpec {
        self.series_by.push(key);
        self
    }

    pub fn row_kinds(mut self, kinds: &[&str]) -> FigureSpec {
        self.row_kinds = kinds.iter().map(|k| (*k).to_owned()).collect();
        self
    }

    pub fn requires(mut self, kind: &str, hint: &str) -> FigureSpec {
        self.requires = Some(RequiredRows {
            kind: kind.to_owned(),
            hint: hint.to_owned(),
        });
        self
    }

    pub fn panel_per_series(mut self) -> FigureSpec {
        self.panel_per_series = true;
        self
    }

    pub fn trim_x(mut self, fraction: f64, margin: f64) -> FigureSpec {
        self.trim_x = Some(TrimX { fraction, margin });
        self
    }

    pub fn fallback(mut self, fallback: FigureSpec) -> FigureSpec {
        self.fallback = Some(Box::new(fallback));
        self
    }
}

impl PanelSpec {
    pub fn new(x: AxisSpec, y: AxisSpec) -> PanelSpec {
        PanelSpec {
            title: None,
            x,
            y,
            layers: Vec::new(),
        }
    }

    pub fn titled(mut self, title: &str) -> PanelSpec {
        self.title = Some(title.to_owned());
        self
    }

    pub fn layer(mut self, layer: LayerSpec) -> PanelSpec {
        self.layers.push(layer);
        self
    }
}

impl AxisSpec {
    /// The x axis: `column` along it.
    pub fn x(column: &str, label: &str, scale: AxisScale) -> AxisSpec {
        AxisSpec {
            column: Some(column.to_owned()),
            label: label.to_owned(),
            scale,
            choice: None,
        }
    }

    /// A y axis (its columns are the layers').
    pub fn y(label: &str, scale: AxisScale) -> AxisSpec {
        AxisSpec {
            column: None,
            label: label.to_owned(),
            scale,
            choice: None,
        }
    }

    /// Fills `{choice}` in the label by `column`'s value.
    pub fn choice(mut self, column: &str, cases: &[(f64, &str)], otherwise: &str) -> AxisSpec {
        self.choice = Some(LabelChoice {
            column: column.to_owned(),
            cases: cases.iter().map(|(v, t)| (*v, (*t).to_owned())).collect(),
            otherwise: otherwise.to_owned(),
        });
        self
    }
}

impl LayerSpec {
    fn new(y: &str, name: &str, mark: MarkSpec) -> LayerSpec {
        LayerSpec {
            y: y.to_owned(),
            name: name.to_owned(),
            naming: Naming::WithGroup,
            name_suffix: String::new(),
            name_without_slope: None,
            mark,
            rows: RowSelection::default(),
            errors: ErrorBars::None,
            transforms: Vec::new(),
            colour: None,
            colour_alone: None,
            optional: false,
            sets_range: false,
        }
    }

    /// Filled markers.
    pub fn points(y: &str, name: &str) -> LayerSpec {
        LayerSpec::new(y, name, MarkSpec::Points { filled: true })
    }

    /// Open markers: rows a fit left out.
    pub fn open_points(y: &str, name: &str) -> LayerSpec {
        LayerSpec::new(y, name, MarkSpec::Points { filled: false })
    }

    pub fn line(y: &str, name: &str, dash: DashSpec) -> LayerSpec {
        LayerSpec::new(y, name, MarkSpec::Line { dash })
    }

    pub fn naming(mut self, naming: Naming) -> LayerSpec {
        self.naming = naming;
        self
    }

    pub fn name_suffix(mut self, suffix: &str) -> LayerSpec {
        self.name_suffix = suffix.to_owned();
        self
    }

    pub fn name_without_slope(mut self, name: &str) -> LayerSpec {
        self.name_without_slope = Some(name.to_owned());
        self
    }

    /// Error bars from the y column's `_unc` companion.
    pub fn with_errors(mut self) -> LayerSpec {
        self.errors = ErrorBars::Companion;
        self
    }

    pub fn errors(mut self, errors: ErrorBars) -> LayerSpec {
        self.errors = errors;
        self
    }

    pub fn kind(mut self, kind: &str) -> LayerSpec {
        self.rows.kind = Some(kind.to_owned());
        self
    }

    pub fn kind_fallback(mut self, kind: &str) -> LayerSpec {
        self.rows.kind_fallback = Some(kind.to_owned());
        self
    }

    /// Rows whose boolean `column` is `value`.
    pub fn flag(mut self, column: &str, value: bool) -> LayerSpec {
        self.rows.flag = Some(FlagSelection {
            column: column.to_owned(),
            value,
            required: false,
        });
        self
    }

    /// As [`LayerSpec::flag`], refusing a table without the column.
    pub fn required_flag(mut self, column: &str, value: bool) -> LayerSpec {
        self.rows.flag = Some(FlagSelection {
            column: column.to_owned(),
            value,
            required: true,
        });
        self
    }

    pub fn whole_y(mut self, whole: bool) -> LayerSpec {
        self.rows.whole_y = Some(whole);
        self
    }

    pub fn transform(mut self, transform: Transform) -> LayerSpec {
        self.transforms.push(transform);
        self
    }

    pub fn colour(mut self, index: usize) -> LayerSpec {
        self.colour = Some(index);
        self
    }

    pub fn colour_alone(mut self, index: usize) -> LayerSpec {
        self.colour_alone = Some(index);
        self
    }

    pub fn optional(mut self) -> LayerSpec {
        self.optional = true;
        self
    }

    pub fn sets_range(mut self) -> LayerSpec {
        self.sets_range = true;
        self
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_declaration_survives_json_and_series_keys_read_as_names() {
        let figure = FigureSpec::new("n", "Density", "d")
            .series_by(&["sample"])
            .series_key(SeriesKey {
                column: "field_T".into(),
                prefix: "B = ".into(),
                exact: true,
                always: true,
            })
            .panel(
                PanelSpec::new(
                    AxisSpec::x("temperature_K", "Temperature T", AxisScale::Reciprocal(1000.0)),
                    AxisSpec::y("n", AxisScale::Log),
                )
                .layer(
                    LayerSpec::points("density_m3", "measured")
                        .with_errors()
                        .flag("used", true),
                )
                .layer(LayerSpec::line("fit_m3", "fit", DashSpec::Dashed).transform(Transform::Shift(-13.8))),
            );
        let json = serde_json::to_value(&figure).unwrap();
        assert_eq!(json["series_by"][0], "sample");
        assert_eq!(json["series_by"][1]["prefix"], "B = ");
        assert_eq!(
            json["panels"][0]["x"]["scale"],
            serde_json::json!({"reciprocal": 1000.0})
        );
        let back: FigureSpec = serde_json::from_value(json).unwrap();
        assert_eq!(back, figure);
        let short: FigureSpec = serde_json::from_value(serde_json::json!({
            "name": "k", "title": "t", "series_by": ["sample"],
            "panels": [{"x": {"column": "a", "label": "A"}, "y": {"label": "B"},
                        "layers": [{"y": "b", "name": "b", "mark": {"points": {"filled": true}}}]}]
        }))
        .unwrap();
        assert_eq!(short.series_by, vec![SeriesKey::column("sample")]);
        assert!(serde_json::from_value::<FigureSpec>(
            serde_json::json!({"name": "k", "title": "t", "panels": [], "colour": 1})
        )
        .is_err());
    }
}
