//! Import recipes: how one station writes its files, written once.
//!
//! A recipe is a TOML file with the keys of `dataset.import` that describe a file's layout:
//!
//! ```toml
//! format = "csv"
//! csv = { separator = ";", decimal_comma = true, comment_prefix = "#" }
//!
//! [rename]                       # source header = new name; applied first
//! "Sample ID" = "sample"
//! "T (C)" = "temperature_C"
//!
//! [units]                        # column (after rename) = unit
//! temperature_C = "degC"
//! ```
//!
//! `mobilis import NAME PATH --recipe station.toml` reads it; flags given beside it add to
//! it and win over it (`--rename`, `--unit`, `--separator`, `--decimal-comma`,
//! `--comment-prefix`, `--skip-rows`, `--no-header`, `--null-value`, `--format`). The
//! `[[import]]` tables of a pipeline file take the same keys, and `recipe = "station.toml"`
//! (relative to the pipeline file) beside them.

use anyhow::{bail, Context};
use mobilis_protocol::params::{CsvDialect, ImportParams, TableFormat, UnitSpec};
use serde::Deserialize;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// The layout of a lab's file: the keys of `dataset.import` besides name and path.
#[derive(Debug, Default, Clone, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct ImportRecipe {
    /// csv, parquet or ipc.
    #[serde(default)]
    pub format: Option<String>,
    /// Source column name = new name.
    #[serde(default)]
    pub rename: BTreeMap<String, String>,
    /// Column (after rename) = unit, or = { unit, to }.
    #[serde(default)]
    pub units: BTreeMap<String, toml::Value>,
    #[serde(default)]
    pub csv: CsvOptions,
}

/// The CSV dialect; a member left out keeps the daemon's default.
#[derive(Debug, Default, Clone, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct CsvOptions {
    #[serde(default)]
    pub separator: Option<String>,
    #[serde(default)]
    pub decimal_comma: Option<bool>,
    #[serde(default)]
    pub comment_prefix: Option<String>,
    #[serde(default)]
    pub skip_rows: Option<u32>,
    #[serde(default)]
    pub header: Option<bool>,
    #[serde(default)]
    pub null_values: Option<Vec<String>>,
}

/// The import flags of `mobilis import`.
#[derive(clap::Args, Debug, Default, Clone)]
pub struct ImportFlags {
    /// A TOML file with the keys format, rename, units and csv = {...}, so that a station's
    /// layout is written once; the flags below add to it and win over it.
    #[arg(long, value_name = "FILE.toml")]
    pub recipe: Option<PathBuf>,
    /// csv, parquet or ipc; default: from the file's extension.
    #[arg(long)]
    pub format: Option<String>,
    /// Rename a column before units apply, any column, text ones too (repeatable). Split at
    /// the first `=`: --rename 'T (C)=temperature_C' --rename 'Sample ID=sample'.
    #[arg(long = "rename", value_name = "SOURCE=NEW", value_parser = parse_pair)]
    pub rename: Vec<(String, String)>,
    /// Convert a column into SI, named as after --rename (repeatable), e.g. --unit
    /// temperature_C=degC; split at the first `=`.
    #[arg(long = "unit", value_name = "COLUMN=UNIT", value_parser = parse_pair)]
    pub units: Vec<(String, String)>,
    /// CSV: the character between fields, e.g. --separator ';' (or tab); default `,`.
    #[arg(long, value_name = "CHAR")]
    pub separator: Option<String>,
    /// CSV: numbers are written with a decimal comma (1,5); needs a separator other than `,`.
    #[arg(long)]
    pub decimal_comma: bool,
    /// CSV: lines starting with this text are comments, e.g. --comment-prefix '#'.
    #[arg(long, value_name = "TEXT")]
    pub comment_prefix: Option<String>,
    /// CSV: lines to skip at the top of the file, before the header.
    #[arg(long, value_name = "N")]
    pub skip_rows: Option<u32>,
    /// CSV: the file has no header line; the columns are then column_1, column_2, ...
    #[arg(long)]
    pub no_header: bool,
    /// CSV: a text that means a missing value in this file, read as an empty cell is
    /// (repeatable), e.g. --null-value 'n/a' --null-value '--'.
    #[arg(long = "null-value", value_name = "TEXT")]
    pub null_values: Vec<String>,
}

/// Splits `key=value` at the first `=` (column names may hold spaces and parentheses;
/// a name holding `=` itself cannot be given this way, use a recipe file).
pub fn parse_pair(text: &str) -> Result<(String, String), String> {
    match text.split_once('=') {
        Some((key, value)) if !key.trim().is_empty() && !value.trim().is_empty() => {
            Ok((key.trim().to_owned(), value.trim().to_owned()))
        }
        _ => Err(format!("expected NAME=VALUE, got `{text}`")),
    }
}

impl ImportRecipe {
    /// Reads a recipe file.
    pub fn load(file: &Path) -> anyhow::Result<ImportRecipe> {
        let text =
            std::fs::read_to_string(file).with_context(|| format!("cannot read the recipe {}", file.display()))?;
        toml::from_str(&text).with_context(|| {
            format!(
                "{} is not a valid import recipe (keys: format, rename, units, csv)",
                file.display()
            )
        })
    }

    /// Reads a recipe from a pipeline file's `[[import]]` table without its `name`, `path`
    /// and `recipe` keys.
    pub fn from_table(table: toml::Table) -> anyhow::Result<ImportRecipe> {
        ImportRecipe::deserialize(toml::Value::Table(table)).map_err(|error| {
            anyhow::anyhow!(
                "{} (an [[import]] takes name, path, recipe, format, rename, units, csv)",
                error.message()
            )
        })
    }

    /// This recipe with `other` laid over it: maps merge (other wins per key), set
    /// options of other replace ours.
    pub fn overridden_by(mut self, other: ImportRecipe) -> ImportRecipe {
        if other.format.is_some() {
            self.format = other.format;
        }
        self.rename.extend(other.rename);
        self.units.extend(other.units);
        let csv = other.csv;
        self.csv = CsvOptions {
            separator: csv.separator.or(self.csv.separator),
            decimal_comma: csv.decimal_comma.or(self.csv.decimal_comma),
            comment_prefix: csv.comment_prefix.or(self.csv.comment_prefix),
            skip_rows: csv.skip_rows.or(self.csv.skip_rows),
            header: csv.header.or(self.csv.header),
            null_values: csv.null_values.or(self.csv.null_values),
        };
        self
    }

    /// The recipe as `dataset.import` params (without name, path and overwrite), built as
    /// the protocol's own type so that the CLI names no member of it by hand.
    pub fn to_params(&self) -> anyhow::Result<ImportParams> {
        let format = match &self.format {
            None => None,
            Some(name) => Some(
                TableFormat::deserialize(toml::Value::String(name.clone()))
                    .map_err(|error| anyhow::anyhow!("format: {}", error.message()))?,
            ),
        };
        let units = self
            .units
            .iter()
            .map(|(column, unit)| {
                let spec = UnitSpec::deserialize(unit.clone()).map_err(|error| {
                    anyhow::anyhow!(
                        "units.{column}: {} (give a unit name, or {{unit, to}})",
                        error.message()
                    )
                })?;
                Ok((column.clone(), spec))
            })
            .collect::<anyhow::Result<_>>()?;
        let c = &self.csv;
        let stated = c.separator.is_some()
            || c.decimal_comma.is_some()
            || c.comment_prefix.is_some()
            || c.skip_rows.is_some()
            || c.header.is_some()
            || c.null_values.is_some();
        // A member the recipe leaves out keeps the protocol's default.
        let csv = stated.then(|| {
            let default = CsvDialect::default();
            CsvDialect {
                separator: c.separator.clone().unwrap_or(default.separator),
                decimal_comma: c.decimal_comma.unwrap_or(default.decimal_comma),
                comment_prefix: c.comment_prefix.clone().or(default.comment_prefix),
                skip_rows: c.skip_rows.unwrap_or(default.skip_rows),
                header: c.header.unwrap_or(default.header),
                null_values: c.null_values.clone().unwrap_or(default.null_values),
            }
        });
        Ok(ImportParams {
            format,
            rename: self.rename.clone(),
            units,
            csv,
            ..ImportParams::default()
        })
    }
}

impl ImportFlags {
    /// The recipe the flags describe: the recipe file, if any, with the flags over it.
    pub fn recipe(&self) -> anyhow::Result<ImportRecipe> {
        let base = match &self.recipe {
            Some(file) => ImportRecipe::load(file)?,
            None => ImportRecipe::default(),
        };
        let flags = ImportRecipe {
            format: self.format.clone(),
            rename: self.rename.iter().cloned().collect(),
            units: self
                .units
                .iter()
                .map(|(c, u)| (c.clone(), toml::Value::String(u.clone())))
                .collect(),
            csv: CsvOptions {
                separator: self.separator.clone(),
                decimal_comma: self.decimal_comma.then_some(true),
                comment_prefix: self.comment_prefix.clone(),
                skip_rows: self.skip_rows,
                header: self.no_header.then_some(false),
                null_values: (!self.null_values.is_empty()).then(|| self.null_values.clone()),
            },
        };
        Ok(base.overridden_by(flags))
    }
}

/// The `dataset.import` parameters of a pipeline file's `[[import]]` table, whose paths
/// (`path`, `recipe`) are relative to the pipeline file's directory `base`.
pub fn pipeline_import(mut table: toml::Table, base: &Path) -> anyhow::Result<(String, ImportParams)> {
    let mut take_string = |key: &str| -> anyhow::Result<Option<String>> {
        match table.remove(key) {
            None => Ok(None),
            Some(toml::Value::String(text)) => Ok(Some(text)),
            Some(other) => bail!("`{key}` of an [[import]] must be text, not {}", other.type_str()),
        }
    };
    let Some(name) = take_string("name")? else {
        bail!("an [[import]] lacks `name` (the dataset name)")
    };
    let Some(path) = take_string("path")? else {
        bail!("[[import]] {name} lacks `path` (the file, relative to the pipeline file)")
    };
    let recipe_file = take_string("recipe")?;
    let inline = ImportRecipe::from_table(table).with_context(|| format!("[[import]] {name}"))?;
    let recipe = match recipe_file {
        Some(file) => ImportRecipe::load(&base.join(file))?.overridden_by(inline),
        None => inline,
    };
    let params = ImportParams {
        name: name.clone(),
        path: Some(base.join(&path).display().to_string()),
        overwrite: true,
        ..recipe.to_params()?
    };
    Ok((name, params))
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn pairs_split_at_the_first_equals_sign() {
        assert_eq!(
            parse_pair("T (C)=temperature_C").unwrap(),
            ("T (C)".to_owned(), "temperature_C".to_owned())
        );
        assert_eq!(parse_pair("a=b=c").unwrap(), ("a".to_owned(), "b=c".to_owned()));
        assert!(parse_pair("no-equals").is_err());
        assert!(parse_pair("=x").is_err());
    }

    #[test]
    fn flags_add_to_the_recipe_and_win_over_it() {
        let recipe: ImportRecipe = toml::from_str(
            r##"
            csv = { separator = ";", comment_prefix = "#" }
            [rename]
            "Sample ID" = "sample"
            "T (C)" = "temperature_C"
            [units]
            temperature_C = "degC"
            "##,
        )
        .unwrap();
        let flags = ImportRecipe {
            rename: BTreeMap::from([("T (C)".to_owned(), "temp_C".to_owned())]),
            csv: CsvOptions {
                decimal_comma: Some(true),
                separator: Some("tab".into()),
                ..CsvOptions::default()
            },
            ..ImportRecipe::default()
        };
        let params = serde_json::to_value(recipe.overridden_by(flags).to_params().unwrap()).unwrap();
        assert_eq!(
            params,
            json!({
                "name": "",
                "rename": {"Sample ID": "sample", "T (C)": "temp_C"},
                "units": {"temperature_C": "degC"},
                "csv": {"separator": "tab", "decimal_comma": true, "comment_prefix": "#", "skip_rows": 0, "header": true},
            })
        );
    }

    #[test]
    fn null_values_come_from_the_recipe_or_the_flags() {
        let recipe: ImportRecipe = toml::from_str(r#"csv = { null_values = ["n/a", "--"] }"#).unwrap();
        let params = serde_json::to_value(recipe.clone().to_params().unwrap()).unwrap();
        assert_eq!(params["csv"]["null_values"], json!(["n/a", "--"]));
        let flags = ImportFlags {
            null_values: vec!["NA".into()],
            ..ImportFlags::default()
        };
        let from_flags = recipe.overridden_by(flags.recipe().unwrap());
        let params = serde_json::to_value(from_flags.to_params().unwrap()).unwrap();
        assert_eq!(params["csv"]["null_values"], json!(["NA"]));
    }

    #[test]
    fn a_bad_format_or_unit_names_the_key_and_what_it_takes() {
        let recipe: ImportRecipe = toml::from_str("format = \"xlsx\"").unwrap();
        let error = recipe.to_params().unwrap_err().to_string();
        assert!(error.starts_with("format:") && error.contains("parquet"), "{error}");
        let recipe: ImportRecipe = toml::from_str("[units]\nT = 5").unwrap();
        let error = recipe.to_params().unwrap_err().to_string();
        assert!(error.starts_with("units.T:") && error.contains("{unit, to}"), "{error}");
        let recipe: ImportRecipe =
            toml::from_str("format = \"parquet\"\n[units]\nT = { unit = \"degC\", to = \"temperature_K\" }").unwrap();
        let params = recipe.to_params().unwrap();
        assert_eq!(params.format, Some(TableFormat::Parquet));
        assert_eq!(
            params.units["T"],
            UnitSpec::Renamed {
                unit: "degC".into(),
                to: "temperature_K".into()
            }
        );
        assert!(params.csv.is_none());
    }

    #[test]
    fn unknown_recipe_keys_are_refused() {
        assert!(toml::from_str::<ImportRecipe>("separator = \";\"").is_err());
        assert!(toml::from_str::<ImportRecipe>("csv = { delimiter = \";\" }").is_err());
    }

    #[test]
    fn pipeline_imports_take_the_same_keys_and_a_recipe_file() {
        let directory = tempfile_dir();
        std::fs::write(
            directory.join("station.toml"),
            "csv = { separator = \";\" }\n[units]\nT = \"degC\"\n",
        )
        .unwrap();
        let table: toml::Table =
            toml::from_str("name = \"r\"\npath = \"r.csv\"\nrecipe = \"station.toml\"\ncsv = { skip_rows = 2 }\n")
                .unwrap();
        let (name, params) = pipeline_import(table, &directory).unwrap();
        let params = serde_json::to_value(params).unwrap();
        assert_eq!(name, "r");
        // The dialect goes out whole, the members the files leave out at their defaults.
        assert_eq!(
            params["csv"],
            json!({"separator": ";", "decimal_comma": false, "skip_rows": 2, "header": true})
        );
        assert_eq!(params["units"], json!({"T": "degC"}));
        assert!(params["path"].as_str().unwrap().ends_with("r.csv"));
        let table: toml::Table = toml::from_str("name = \"r\"\npath = \"r.csv\"\ncolour = 1\n").unwrap();
        let error = format!("{:#}", pipeline_import(table, &directory).unwrap_err());
        assert!(error.contains("colour"), "{error}");
        std::fs::remove_dir_all(&directory).unwrap();
    }

    fn tempfile_dir() -> PathBuf {
        let directory = std::env::temp_dir().join(format!("mobilis-recipe-test-{}", std::process::id()));
        std::fs::create_dir_all(&directory).unwrap();
        directory
    }
}
