//! The daemon's errors in the words of the command line.
//!
//! The daemon speaks to every client in JSON-RPC terms ("pass overwrite: true", "see
//! dataset.list") and names the request parameter at fault in the error's `data.param`
//! (`overwrite`, `inputs.readings`, `params.temperature_tolerance_K`, `group_by`). Here that
//! parameter becomes the option that sets it (`--overwrite`, `--input readings=DATASET`,
//! `--params '{"temperature_tolerance_K": ...}'`, `--group-by`), or the key of a pipeline
//! file, and the remaining method names become the commands that call them.
//!
//! `dataset.list` becomes `mobilis datasets`, and so on; `mobilis call` keeps the daemon's
//! words. A new JSON phrase in a daemon help line gets a row in `PHRASES`;
//! `tests/tests/suite/cli.rs` runs each through a real daemon.

use mobilis_client::ClientError;
use serde_json::Value;

/// Whose words an error is put in.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Words {
    /// A command with options (`mobilis run`, `import`, `show`, ...).
    Options,
    /// A pipeline file's keys (`mobilis pipeline`, `mobilis demo`).
    PipelineFile,
    /// `mobilis call`: the user wrote the JSON, so the daemon's words stand.
    Json,
}

/// Method names and JSON phrases that remain in a daemon's message or help, and what a
/// command-line user types instead. Longer phrases first.
const PHRASES: &[(&str, &str)] = &[
    (
        "rename a column at import (dataset.import rename, units)",
        "rename a column at import (`mobilis import --rename SRC=DST`, `--unit COL=UNIT`)",
    ),
    ("pass overwrite: true", "add --overwrite"),
    ("pass a longer deadline_s", "pass a longer --deadline"),
    (
        "import it with dataset.import or list the stored ones with dataset.list",
        "import it with `mobilis import NAME PATH`, or list the stored ones with `mobilis datasets`",
    ),
    ("pass format: csv, parquet or ipc", "pass --format csv, parquet or ipc"),
    ("with offset and limit", "with --offset and --limit"),
    ("dataset.import", "`mobilis import`"),
    ("dataset.export", "`mobilis export`"),
    ("dataset.list", "`mobilis datasets`"),
    ("dataset.rows", "`mobilis show`"),
    ("analysis.list", "`mobilis analyses`"),
    ("plot.kinds", "`mobilis plot DATASET --list`"),
    ("report.samples", "`mobilis report`"),
    ("series_by names", "--series-by names"),
];

fn replace_phrases(text: &str) -> String {
    PHRASES
        .iter()
        .fold(text.to_owned(), |text, (json, cli)| text.replace(json, cli))
}

/// The analysis a run's message starts with (`hall.reduce: params.x ...`,
/// `hall.reduce needs input role ...`).
fn analysis_of(message: &str) -> &str {
    message
        .split([':', ' '])
        .next()
        .filter(|name| name.contains('.'))
        .unwrap_or("ANALYSIS")
}

/// The message and help of a daemon error as the command line says them.
pub fn translate(
    message: &str,
    help: Option<&str>,
    kind: &str,
    param: Option<&str>,
    words: Words,
) -> (String, Option<String>) {
    if words == Words::Json {
        return (message.to_owned(), help.map(str::to_owned));
    }
    let options = words == Words::Options;
    let mut message = message.to_owned();
    let mut help = help.map(str::to_owned);
    match (kind, param) {
        ("dataset_exists", Some("output")) if options => {
            help = Some("choose another --output name, or add --overwrite to replace the stored one".into());
        }
        ("dataset_exists", Some("summary_output")) if options => {
            help = Some("choose another --summary-output name, or add --overwrite to replace the stored one".into());
        }
        ("dataset_exists", _) if options => {
            help = Some("choose another name, or add --overwrite to replace the stored one".into());
        }
        ("dataset_exists", _) => {
            help = Some("choose another name, or set overwrite = true in the step".into());
        }
        ("unknown_dataset", _) if options => {
            help = Some("`mobilis datasets` lists the stored datasets; `mobilis import NAME PATH` adds one".into());
        }
        ("unknown_dataset", _) => {
            help = Some(
                "import it in an [[import]] table of the pipeline file, or use a stored one (`mobilis datasets`)"
                    .into(),
            );
        }
        (_, Some(path)) if path.starts_with("inputs.") && message.contains("needs input role") => {
            let role = &path["inputs.".len()..];
            help = Some(if options {
                format!("add --input {role}=DATASET (`mobilis datasets` lists the stored ones)")
            } else {
                format!("add {role} = \"DATASET\" to the step's inputs")
            });
        }
        (_, Some(path)) if path.starts_with("inputs.") => {
            let roles = help.clone().unwrap_or_default();
            help = Some(if options {
                format!("--input takes ROLE=DATASET; {roles}")
            } else {
                format!("the step's inputs name roles; {roles}")
            });
        }
        (_, Some(path)) if path == "params" || path.starts_with("params.") => {
            let analysis = analysis_of(&message).to_owned();
            let name = path.strip_prefix("params.").unwrap_or("");
            if options {
                if !name.is_empty() {
                    message = message.replacen(path, &format!("--params key `{name}`"), 1);
                }
                let example = if name.is_empty() { "NAME" } else { name };
                help = Some(format!(
                    "`mobilis describe {analysis}` lists its parameters; pass them as --params '{{\"{example}\": VALUE}}'"
                ));
            } else {
                if !name.is_empty() {
                    message = message.replacen(path, &format!("params key `{name}`"), 1);
                }
                help = Some(format!(
                    "`mobilis describe {analysis}` lists its parameters; set them in the step's params table"
                ));
            }
        }
        (_, Some("group_by")) if options => {
            message = message.replacen("group_by column", "--group-by column", 1);
        }
        (_, Some("group_tolerance")) if options => {
            message = message
                .replace("group_tolerance", "--group-tolerance")
                .replace("group_by", "--group-by");
            help = help.map(|help| {
                let help = grouping_options(&help)
                    .replace("add `", "add --group-by `")
                    .replace("` to group_by", "`")
                    .replace("the run groups by", "the run has --group-by");
                bare_word_as_option(&help, "group_tolerance", "--group-tolerance")
            });
        }
        (_, Some("summary_output")) if options => {
            message = message
                .replace("summary_output", "--summary-output")
                .replace("from output", "from --output");
        }
        _ => {}
    }
    if options {
        message = grouping_options(&message);
        help = help.map(|help| grouping_options(&help));
    }
    (replace_phrases(&message), help.map(|h| replace_phrases(&h)))
}

/// `word` replaced by `option` where it stands alone (not already part of an option).
fn bare_word_as_option(text: &str, word: &str, option: &str) -> String {
    let mut out = String::with_capacity(text.len());
    let mut rest = text;
    while let Some(position) = rest.find(word) {
        let before = &rest[..position];
        out.push_str(before);
        let preceded = out.ends_with("--") || out.ends_with('-');
        out.push_str(if preceded { word } else { option });
        rest = &rest[position + word.len()..];
    }
    out.push_str(rest);
    out
}

/// A daemon's grouping advice in options: `group_by ["a", "b"]` becomes `--group-by a
/// --group-by b`, and `group_tolerance {"c": X}` becomes `--group-tolerance c=X`.
fn grouping_options(text: &str) -> String {
    let mut text = text.to_owned();
    while let Some(start) = text.find("group_by [\"") {
        let Some(length) = text[start..].find(']') else { break };
        let columns: Vec<String> = text[start + "group_by [".len()..start + length]
            .split(',')
            .map(|column| format!("--group-by {}", column.trim().trim_matches('"')))
            .collect();
        text.replace_range(start..=start + length, &columns.join(" "));
    }
    while let Some(start) = text.find("group_tolerance {\"") {
        let Some(length) = text[start..].find('}') else { break };
        let inside = &text[start + "group_tolerance {".len()..start + length];
        let Some((column, value)) = inside.split_once(':') else {
            break;
        };
        let option = format!("--group-tolerance {}={}", column.trim().trim_matches('"'), value.trim());
        text.replace_range(start..=start + length, &option);
    }
    text
}

/// The text after `error: ` for an error of a command: a daemon's error in the command's own
/// words, anything else as it is.
pub fn describe(error: &anyhow::Error, words: Words) -> String {
    let rpc = error
        .chain()
        .find_map(|cause| match cause.downcast_ref::<ClientError>() {
            Some(ClientError::Rpc { message, data, .. }) => Some((message, data)),
            _ => None,
        });
    let Some((message, data)) = rpc else {
        return format!("{error:#}");
    };
    let text = |key: &str| data.as_ref().and_then(|d| d.get(key)).and_then(Value::as_str);
    let (message, help) = translate(message, text("help"), text("kind").unwrap_or(""), text("param"), words);
    // Context added on the way up (`--params must be ...`) stays in front.
    let outer: Vec<String> = error
        .chain()
        .take_while(|cause| cause.downcast_ref::<ClientError>().is_none())
        .map(ToString::to_string)
        .collect();
    let mut line = outer.into_iter().chain([message]).collect::<Vec<_>>().join(": ");
    if let Some(help) = help {
        line.push_str("\n  ");
        line.push_str(&help);
    }
    line
}

#[cfg(test)]
mod tests {
    use super::*;

    /// (message, help, kind, param, words, expected message, expected help)
    #[test]
    fn json_words_become_options() {
        type Case = (
            &'static str,
            Option<&'static str>,
            &'static str,
            Option<&'static str>,
            Words,
            &'static str,
            Option<&'static str>,
        );
        let cases: &[Case] = &[
            (
                "hall.reduce needs input role `readings`",
                Some("pass inputs: {\"readings\": \"<dataset>\"}"),
                "invalid_params",
                Some("inputs.readings"),
                Words::Options,
                "hall.reduce needs input role `readings`",
                Some("add --input readings=DATASET (`mobilis datasets` lists the stored ones)"),
            ),
            (
                "a dataset named `x` exists already",
                Some("choose another output name, drop the old dataset, or pass overwrite: true"),
                "dataset_exists",
                Some("output"),
                Words::Options,
                "a dataset named `x` exists already",
                Some("choose another --output name, or add --overwrite to replace the stored one"),
            ),
            (
                "hall.reduce: params.temperature_tolerance_K must be number (got string)",
                Some("see analysis.describe {\"analysis\": \"hall.reduce\"} for the parameters"),
                "invalid_params",
                Some("params.temperature_tolerance_K"),
                Words::Options,
                "hall.reduce: --params key `temperature_tolerance_K` must be number (got string)",
                Some("`mobilis describe hall.reduce` lists its parameters; pass them as --params '{\"temperature_tolerance_K\": VALUE}'"),
            ),
            (
                "no dataset named `run17`",
                Some("import it with dataset.import or list the stored ones with dataset.list"),
                "unknown_dataset",
                None,
                Words::Options,
                "no dataset named `run17`",
                Some("`mobilis datasets` lists the stored datasets; `mobilis import NAME PATH` adds one"),
            ),
            (
                "input role `readings` lacks column `field_T`",
                Some("the dataset has: sample, B (G); rename a column at import (dataset.import rename, units)"),
                "column_problem",
                Some("inputs.readings"),
                Words::Options,
                "input role `readings` lacks column `field_T`",
                Some("--input takes ROLE=DATASET; the dataset has: sample, B (G); rename a column at import (`mobilis import --rename SRC=DST`, `--unit COL=UNIT`)"),
            ),
            (
                "series_by names `wafer`, which dataset `d` does not have; its columns are sample",
                None,
                "column_problem",
                None,
                Words::Options,
                "--series-by names `wafer`, which dataset `d` does not have; its columns are sample",
                None,
            ),
            (
                "spectrum.mobility: the sweep table holds sweeps at 2 K, 10 K; run with group_by [\"sample\", \"temperature_K\"] and group_tolerance {\"temperature_K\": 4} so that each call sees one sweep",
                Some("give group_tolerance {\"temperature_K\": T}, T wider than the gaps"),
                "invalid_data",
                None,
                Words::Options,
                "spectrum.mobility: the sweep table holds sweeps at 2 K, 10 K; run with --group-by sample --group-by temperature_K and --group-tolerance temperature_K=4 so that each call sees one sweep",
                Some("give --group-tolerance temperature_K=T, T wider than the gaps"),
            ),
            (
                "group_tolerance names `field_T`, which is not a group_by column",
                Some("the run groups by sample; add `field_T` to group_by"),
                "invalid_params",
                Some("group_tolerance"),
                Words::Options,
                "--group-tolerance names `field_T`, which is not a --group-by column",
                Some("the run has --group-by sample; add --group-by `field_T`"),
            ),
            (
                "group_by column `wafer` is not in the first input table",
                Some("its columns are: sample, temperature_K"),
                "column_problem",
                Some("group_by"),
                Words::Options,
                "--group-by column `wafer` is not in the first input table",
                Some("its columns are: sample, temperature_K"),
            ),
            (
                "hall.reduce needs input role `readings`",
                Some("pass inputs: {\"readings\": \"<dataset>\"}"),
                "invalid_params",
                Some("inputs.readings"),
                Words::PipelineFile,
                "hall.reduce needs input role `readings`",
                Some("add readings = \"DATASET\" to the step's inputs"),
            ),
            (
                "no dataset named `run17`",
                Some("import it with dataset.import or list the stored ones with dataset.list"),
                "unknown_dataset",
                None,
                Words::Json,
                "no dataset named `run17`",
                Some("import it with dataset.import or list the stored ones with dataset.list"),
            ),
            (
                "cannot tell the format of x.dat",
                Some("pass format: csv, parquet or ipc, or use a .csv, .parquet or .arrow file name"),
                "file_problem",
                None,
                Words::Options,
                "cannot tell the format of x.dat",
                Some("pass --format csv, parquet or ipc, or use a .csv, .parquet or .arrow file name"),
            ),
        ];
        for (message, help, kind, param, words, expected_message, expected_help) in cases {
            let (got_message, got_help) = translate(message, *help, kind, *param, *words);
            assert_eq!(&got_message, expected_message);
            assert_eq!(got_help.as_deref(), *expected_help);
        }
    }
}
