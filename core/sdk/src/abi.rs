//! The C ABI between the daemon and plugin libraries, version 1.1.
//!
//! **API Boundary.** Everything here is `#[repr(C)]` and mirrored field by field in
//! `core/sdk/include/mobilis_plugin.h`; change both or neither, and bump [`ABI_MAJOR`] for any
//! change that an older host or plugin would misread. Adding a status code, a declaration
//! feature or a field at the *end* of [`PluginDescriptor`] is a minor change, under the
//! rule below.
//!
//! A plugin exports one function, [`ENTRY_SYMBOL`], returning a pointer to a static
//! [`PluginDescriptor`]. The first two fields of the descriptor (`abi_major`, `abi_minor`)
//! keep their place in every ABI version, so a host can read them before trusting the rest.
//!
//! # Appended fields and minor versions
//!
//! The same rule stands in the header's comments; the two texts say the same.
//!
//! 1. Fields are only ever appended to the end of the descriptor. No field is removed,
//!    moved, resized or given another type or meaning.
//! 2. A field appended in minor version M is read only from a plugin whose `abi_minor` is
//!    at least M. [`DESCRIPTOR_FIELDS`] lists every field with the minor that added it.
//! 3. A host reads `abi_major` first and nothing else unless it is the host's own major;
//!    then `abi_minor`; then only the fields the plugin's minor declares. It never reads
//!    past the end of that prefix ([`readable_prefix`]), so an older plugin's shorter
//!    static descriptor is never overrun.
//! 4. Any other change (removing, reordering or retyping a field, changing a function's
//!    signature or what a field means) bumps the major version.
//! 5. The function fields are nullable pointers; a host checks each one at load and refuses
//!    a library that leaves a required one NULL, naming the field.
//!
//! [`read_descriptor`] is the one reader that follows this rule.
//!
//! Ownership follows the rule "whoever allocated it frees it":
//! - strings returned by `describe` and written by `invoke` belong to the plugin and are
//!   given back through `release_string`;
//! - input tables are exported by the host; a plugin may take ownership of one by moving
//!   the structs out (copying them and setting `release` to NULL in the host's copy, as
//!   the Arrow C Data Interface describes); whatever still has a `release` callback when
//!   `invoke` returns is released by the host;
//! - the output table is exported by the plugin into [`InvokeOutput`] and released by the
//!   host through the Arrow release callbacks (which run plugin code: a host never unloads a
//!   library while it runs).
//!
//! Tables are Arrow struct arrays, one child per column: float64 `g`, int64 `l`, boolean
//! `b`, and text as large UTF-8 `U` or, for a plugin that declared
//! [`FEATURE_STRING_VIEWS`], as string views `vu`. A plugin written in C reads either with
//! the Arrow specification alone.
//!
//! Panics and other unwinding never cross the boundary: unwinding out of an `extern "C"`
//! function aborts the process. A plugin catches its own panics and returns
//! [`STATUS_PANIC`] (the SDK does, which is why it refuses to build with
//! `panic = "abort"`); a host cannot catch them for it.
//!
//! Minor versions (each is read by every host of the same major):
//! - 1.0: the descriptor, `describe`, `invoke`, `release_string`; text crosses as `U`.
//! - 1.1: no new descriptor field. The declaration's `features` may name
//!   [`FEATURE_STRING_VIEWS`]: the host then sends text columns as string views, the
//!   layout polars keeps them in, so they cross without a copy. Plugins that do not name it
//!   (every 1.0 plugin) still get `U`. Outputs may use `U`, `u` or `vu` in every version
//!   (a 1.0 daemon already read all three). The capability travels in the declaration, the
//!   existing place for optional capabilities, rather than in a field appended to the
//!   descriptor: a host would have to read such a field through a pointer to a shorter
//!   static in every 1.0 plugin, and the declaration already reaches isolated workers'
//!   supervisors as it is.

use crate::figure_spec::FigureSpec;
use polars_arrow::ffi::{ArrowArray, ArrowSchema};
use serde::{Deserialize, Serialize};
use std::os::raw::{c_char, c_void};

/// Incompatible changes bump the major version; hosts refuse any other major.
pub const ABI_MAJOR: u32 = 1;
/// Compatible additions bump the minor version.
pub const ABI_MINOR: u32 = 1;
/// Declaration feature (ABI 1.1): the plugin reads text columns as Arrow string views
/// (format `vu`: a views buffer of 16-byte views, variadic data buffers, then a buffer of
/// their int64 sizes; Arrow Columnar Format, "Variable-size Binary View Layout"). Hosts
/// send such a plugin its text without copying it.
pub const FEATURE_STRING_VIEWS: &str = "string_views";
/// Name of the exported entry function, `const MobilisPluginDescriptor *mobilis_plugin_entry(void)`.
pub const ENTRY_SYMBOL: &str = "mobilis_plugin_entry";

/// `invoke` succeeded; `output` holds a table and a result JSON.
pub const STATUS_OK: i32 = 0;
/// The parameters or input tables are unusable; the error message says what to change.
pub const STATUS_INVALID_INPUT: i32 = 1;
/// The computation failed on valid input (no convergence, singular system, ...).
pub const STATUS_NUMERICAL_FAILURE: i32 = 2;
/// The host's cancel check returned true and the plugin stopped.
pub const STATUS_CANCELLED: i32 = 3;
/// The plugin caught a panic (or its C equivalent, an internal bug).
pub const STATUS_PANIC: i32 = 4;
/// The plugin has no analysis of that name.
pub const STATUS_UNKNOWN_ANALYSIS: i32 = 5;

/// Services the host offers to a running analysis.
#[repr(C)]
pub struct HostContext {
    /// Opaque host state, passed back to the callbacks.
    pub host_data: *mut c_void,
    /// Reports progress: `fraction` in [0, 1] and an optional NUL-terminated UTF-8 message
    /// (may be NULL). Safe to call from the invoking thread only; cheap; may be called often.
    pub report_progress: Option<unsafe extern "C" fn(host_data: *mut c_void, fraction: f64, message: *const c_char)>,
    /// Returns nonzero once the client has asked to cancel. Long loops should poll it and
    /// return [`STATUS_CANCELLED`].
    pub is_cancelled: Option<unsafe extern "C" fn(host_data: *mut c_void) -> i32>,
}

/// One named input table.
#[repr(C)]
pub struct InputTable {
    /// The input role, NUL-terminated UTF-8 (for example `readings`).
    pub role: *const c_char,
    /// Schema of the struct array (one child field per column).
    pub schema: *mut ArrowSchema,
    /// The struct array itself.
    pub array: *mut ArrowArray,
}

/// What `invoke` writes back. The host zero-initialises it (empty Arrow structs, NULL strings).
#[repr(C)]
pub struct InvokeOutput {
    /// Schema of the output struct array (set on success).
    pub schema: ArrowSchema,
    /// The output struct array (set on success).
    pub array: ArrowArray,
    /// On success: JSON object `{"summary": {...}, "warnings": [...]}`; plugin-owned.
    pub result_json: *mut c_char,
    /// On failure: a message that says what to change; plugin-owned.
    pub error_message: *mut c_char,
}

impl InvokeOutput {
    pub fn empty() -> Self {
        InvokeOutput {
            schema: ArrowSchema::empty(),
            array: ArrowArray::empty(),
            result_json: std::ptr::null_mut(),
            error_message: std::ptr::null_mut(),
        }
    }
}

/// `describe`: returns a plugin-owned NUL-terminated JSON [`PluginDeclaration`], or NULL on failure.
pub type DescribeFn = unsafe extern "C" fn() -> *mut c_char;

/// `invoke`: runs one analysis. Returns one of the `STATUS_*` codes.
///
/// # Safety
/// `analysis` and `params_json` are valid NUL-terminated UTF-8 for the duration of the call;
/// `inputs` points to `input_count` valid [`InputTable`]s whose Arrow structs are valid
/// (possibly released by the plugin as described in the module documentation); `context`
/// is valid for the duration of the call; `output` points to an [`InvokeOutput`] the host
/// initialised with [`InvokeOutput::empty`].
pub type InvokeFn = unsafe extern "C" fn(
    analysis: *const c_char,
    params_json: *const c_char,
    inputs: *const InputTable,
    input_count: usize,
    context: *const HostContext,
    output: *mut InvokeOutput,
) -> i32;

/// `release_string`: frees a string the plugin returned. NULL is allowed.
pub type ReleaseStringFn = unsafe extern "C" fn(text: *mut c_char);

/// The static descriptor a plugin's entry function returns.
///
/// A host never takes a reference to a whole descriptor: it reads the fields one by one
/// through [`read_descriptor`], as the minor-version rule of the module documentation says.
#[repr(C)]
pub struct PluginDescriptor {
    /// Must stay the first field in every ABI version.
    pub abi_major: u32,
    /// Must stay the second field in every ABI version.
    pub abi_minor: u32,
    /// Plugin name, NUL-terminated UTF-8, static (for example `hall`).
    pub plugin_name: *const c_char,
    /// The plugin's own version (not the ABI's), NUL-terminated UTF-8, static.
    pub plugin_version: *const c_char,
    /// Required; nullable only because a C function pointer is (the host refuses NULL).
    pub describe: Option<DescribeFn>,
    /// Required, as `describe`.
    pub invoke: Option<InvokeFn>,
    /// Required, as `describe`.
    pub release_string: Option<ReleaseStringFn>,
}

// SAFETY: the descriptor is immutable and its pointers refer to static, read-only data
// (string literals and functions), so sharing it between threads is sound.
unsafe impl Sync for PluginDescriptor {}

/// One field of [`PluginDescriptor`]: where it lies and the minor version that appended it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct DescriptorField {
    /// The field's name, as in the header.
    pub name: &'static str,
    /// The minor version that appended the field: it is read only from plugins whose
    /// `abi_minor` is at least this.
    pub since_minor: u32,
    /// Byte offset from the start of the descriptor.
    pub offset: usize,
    /// Size in bytes.
    pub size: usize,
}

const fn field(name: &'static str, since_minor: u32, offset: usize, size: usize) -> DescriptorField {
    DescriptorField {
        name,
        since_minor,
        offset,
        size,
    }
}

/// Every field of [`PluginDescriptor`], in order, with the minor version that added it. A
/// field appended in a later minor goes at the end of the struct, the header and this table.
pub const DESCRIPTOR_FIELDS: [DescriptorField; 7] = {
    use std::mem::{offset_of, size_of};
    type D = PluginDescriptor;
    [
        field("abi_major", 0, offset_of!(D, abi_major), size_of::<u32>()),
        field("abi_minor", 0, offset_of!(D, abi_minor), size_of::<u32>()),
        field("plugin_name", 0, offset_of!(D, plugin_name), size_of::<*const c_char>()),
        field(
            "plugin_version",
            0,
            offset_of!(D, plugin_version),
            size_of::<*const c_char>(),
        ),
        field("describe", 0, offset_of!(D, describe), size_of::<Option<DescribeFn>>()),
        field("invoke", 0, offset_of!(D, invoke), size_of::<Option<InvokeFn>>()),
        field(
            "release_string",
            0,
            offset_of!(D, release_string),
            size_of::<Option<ReleaseStringFn>>(),
        ),
    ]
};

// Positions in DESCRIPTOR_FIELDS, for the reader.
const ABI_MAJOR_FIELD: usize = 0;
const ABI_MINOR_FIELD: usize = 1;
const PLUGIN_NAME_FIELD: usize = 2;
const PLUGIN_VERSION_FIELD: usize = 3;
const DESCRIBE_FIELD: usize = 4;
const INVOKE_FIELD: usize = 5;
const RELEASE_STRING_FIELD: usize = 6;

// The table is the struct: fields in order, without overlap, and the last one ending
// where the struct does (so no field is missing from the table).
const _: () = {
    let mut index = 1;
    while index < DESCRIPTOR_FIELDS.len() {
        let before = DESCRIPTOR_FIELDS[index - 1];
        let this = DESCRIPTOR_FIELDS[index];
        assert!(
            before.offset + before.size <= this.offset,
            "descriptor fields overlap or are out of order"
        );
        assert!(
            before.since_minor <= this.since_minor,
            "a later field cannot predate an earlier one"
        );
        index += 1;
    }
    let last = DESCRIPTOR_FIELDS[DESCRIPTOR_FIELDS.len() - 1];
    assert!(last.offset + last.size == std::mem::size_of::<PluginDescriptor>());
    assert!(last.since_minor <= ABI_MINOR);
    assert!(DESCRIPTOR_FIELDS[ABI_MAJOR_FIELD].offset == 0);
};

/// How many leading bytes of a descriptor a host may read from a plugin of minor version
/// `abi_minor`: the end of the last field that minor declares (fields of minors newer than
/// this host's are unknown to it and never read).
pub const fn readable_prefix(abi_minor: u32) -> usize {
    let mut end = 0;
    let mut index = 0;
    while index < DESCRIPTOR_FIELDS.len() {
        let field = DESCRIPTOR_FIELDS[index];
        if field.since_minor <= abi_minor && field.offset + field.size > end {
            end = field.offset + field.size;
        }
        index += 1;
    }
    end
}

/// The three functions of a plugin, checked non-NULL at load.
#[derive(Clone, Copy)]
pub struct PluginFunctions {
    pub describe: DescribeFn,
    pub invoke: InvokeFn,
    pub release_string: ReleaseStringFn,
}

/// A descriptor as [`read_descriptor`] copied it out of the plugin.
#[derive(Clone, Copy)]
pub struct DescriptorFields {
    pub abi_minor: u32,
    /// As the plugin wrote it: NULL or a static NUL-terminated string, not yet checked.
    pub plugin_name: *const c_char,
    /// As `plugin_name`.
    pub plugin_version: *const c_char,
    pub functions: PluginFunctions,
}

/// Why a descriptor is refused.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum DescriptorError {
    #[error("the entry function returned no descriptor")]
    Null,
    #[error("the entry function returned a descriptor at a misaligned address; return a pointer to a static MobilisPluginDescriptor")]
    Misaligned,
    #[error(
        "built for plugin ABI {major}.{minor}, this daemon speaks ABI {ABI_MAJOR}.{ABI_MINOR}; rebuild the plugin against this version"
    )]
    OtherMajor { major: u32, minor: u32 },
    /// `plugin` is the descriptor's plugin name (lossy), for the host's message.
    #[error("`{field}` is NULL; a plugin must set describe, invoke and release_string in its descriptor")]
    NullFunction { field: &'static str, plugin: String },
}

/// Reads the field at `index` of [`DESCRIPTOR_FIELDS`] as a `T`.
///
/// # Safety
/// `base` is aligned for the field's type at its offset, and the plugin's descriptor holds
/// that field (its minor declares it).
unsafe fn read_field<T: Copy>(base: *const PluginDescriptor, index: usize) -> T {
    let field = DESCRIPTOR_FIELDS[index];
    debug_assert_eq!(field.size, std::mem::size_of::<T>());
    // SAFETY: per the caller (the offset comes from `offset_of!`, so the field is aligned
    // for `T` whenever `base` is aligned for the descriptor).
    unsafe { std::ptr::read(base.cast::<u8>().add(field.offset).cast::<T>()) }
}

/// Reads the field at `index` if the plugin's minor version declares it, else `None`.
///
/// # Safety
/// `base` is aligned and points to a descriptor of minor version `abi_minor`.
unsafe fn read_declared<T: Copy>(base: *const PluginDescriptor, abi_minor: u32, index: usize) -> Option<T> {
    let field = DESCRIPTOR_FIELDS[index];
    // SAFETY: the field lies inside the prefix minor `abi_minor` declares.
    (field.since_minor <= abi_minor).then(|| unsafe { read_field(base, index) })
}

/// Reads a plugin's descriptor under the minor-version rule: `abi_major` through a raw
/// pointer first, nothing more unless it is [`ABI_MAJOR`]; then `abi_minor`; then each
/// field the plugin's minor declares, never past [`readable_prefix`]. No reference to the
/// whole descriptor is made, and a NULL function is refused with its field's name.
///
/// # Safety
/// `base` is what a plugin's entry function returned: NULL, or a pointer to a static
/// descriptor whose first two fields are readable and which holds every field its
/// `abi_minor` declares.
pub unsafe fn read_descriptor(base: *const PluginDescriptor) -> Result<DescriptorFields, DescriptorError> {
    if base.is_null() {
        return Err(DescriptorError::Null);
    }
    // The version fields need only their own alignment: a descriptor of another major
    // version may be no more than them.
    if !base.cast::<u32>().is_aligned() {
        return Err(DescriptorError::Misaligned);
    }
    // SAFETY (this function): the version fields lead every descriptor of every version;
    // the others are read only where the plugin's minor declares them.
    let major: u32 = unsafe { read_field(base, ABI_MAJOR_FIELD) };
    let minor: u32 = unsafe { read_field(base, ABI_MINOR_FIELD) };
    if major != ABI_MAJOR {
        return Err(DescriptorError::OtherMajor { major, minor });
    }
    if !base.is_aligned() {
        return Err(DescriptorError::Misaligned);
    }
    let text = |index| unsafe { read_declared::<*const c_char>(base, minor, index) }.unwrap_or(std::ptr::null());
    let plugin_name = text(PLUGIN_NAME_FIELD);
    let plugin_version = text(PLUGIN_VERSION_FIELD);
    // A function field the plugin's minor predates reads as missing, like a NULL one.
    fn required<F>(value: Option<Option<F>>, index: usize, plugin_name: *const c_char) -> Result<F, DescriptorError> {
        value.flatten().ok_or_else(|| DescriptorError::NullFunction {
            field: DESCRIPTOR_FIELDS[index].name,
            plugin: if plugin_name.is_null() {
                "(unnamed)".to_owned()
            } else {
                // SAFETY: a static NUL-terminated string, as the ABI requires of the name.
                unsafe { std::ffi::CStr::from_ptr(plugin_name) }
                    .to_string_lossy()
                    .into_owned()
            },
        })
    }
    let functions = PluginFunctions {
        describe: required(
            unsafe { read_declared(base, minor, DESCRIBE_FIELD) },
            DESCRIBE_FIELD,
            plugin_name,
        )?,
        invoke: required(
            unsafe { read_declared(base, minor, INVOKE_FIELD) },
            INVOKE_FIELD,
            plugin_name,
        )?,
        release_string: required(
            unsafe { read_declared(base, minor, RELEASE_STRING_FIELD) },
            RELEASE_STRING_FIELD,
            plugin_name,
        )?,
    };
    Ok(DescriptorFields {
        abi_minor: minor,
        plugin_name,
        plugin_version,
        functions,
    })
}

/// Type of the entry function named [`ENTRY_SYMBOL`].
pub type EntryFn = unsafe extern "C" fn() -> *const PluginDescriptor;

/// What `describe` returns, as JSON. This is part of the ABI, not of the JSON-RPC wire
/// format: the host turns it into its own wire types.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct PluginDeclaration {
    /// Optional capabilities beyond ABI 1.0 (for example [`FEATURE_STRING_VIEWS`]); hosts
    /// ignore names they do not know.
    #[serde(default)]
    pub features: Vec<String>,
    pub analyses: Vec<AnalysisDeclaration>,
}

/// One analysis a plugin offers.
///
/// The declaration is the analysis's contract: the host validates parameters against
/// `params` before a call and checks the returned table and summary against `outputs` and
/// `summary_keys` after it ([`AnalysisDeclaration::check_output`]), so a plugin that emits
/// an undeclared column or key fails the call instead of surprising a client.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
pub struct AnalysisDeclaration {
    /// Globally unique, `plugin.analysis` by convention (for example `hall.reduce`).
    pub name: String,
    /// One line.
    pub summary: String,
    /// Method, conventions, references.
    #[serde(default)]
    pub description: String,
    /// JSON Schema (the subset the host validates) of the parameters object.
    pub params: serde_json::Value,
    /// The input tables, by role.
    pub inputs: Vec<InputRole>,
    /// The columns of the output table.
    pub outputs: Vec<ColumnSpec>,
    /// The keys of the result's `summary` object. A declared `f64` key `x` also admits its
    /// standard uncertainty `x_unc` and the parts of its budget `x_unc_<part>` (`_unc_stat`,
    /// `_unc_sys`, ...; same unit), so the companions are not listed one by one.
    #[serde(default)]
    pub summary_keys: Vec<ColumnSpec>,
    /// The output table carries the input's own columns as well as `outputs` (an analysis
    /// that passes a table through); the declared columns are still checked.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub open_outputs: bool,
    /// The figures of the output table, the default first (see [`crate::figure_spec`]).
    /// Optional: a declaration without it (every plugin older than the field) has none, and
    /// its tables get the generic `columns` figure. JSON only, so the C-side structs and the
    /// ABI version do not change.
    #[serde(default)]
    pub figures: Vec<FigureSpec>,
}

/// Suffix of a summary key's standard uncertainty (and, followed by `_<part>`, of a part
/// of its budget), admitted for every declared `f64` key.
pub const UNCERTAINTY_SUFFIX: &str = "_unc";

/// How an output breaks its analysis's declaration; the text names the column or key.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("{0}")]
pub struct ContractViolation(pub String);

impl AnalysisDeclaration {
    /// The declared output column of that name.
    pub fn output(&self, name: &str) -> Option<&ColumnSpec> {
        self.outputs.iter().find(|spec| spec.name == name)
    }

    /// The declared summary key of that name, with the `_unc` companion rule applied.
    pub fn summary_key(&self, name: &str) -> Option<&ColumnSpec> {
        self.summary_keys.iter().find(|spec| spec.name == name).or_else(|| {
            // `x_unc`, or a part of its budget such as `x_unc_stat`, `x_unc_sys`.
            let at = name.rfind(UNCERTAINTY_SUFFIX)?;
            let part = &name[at + UNCERTAINTY_SUFFIX.len()..];
            if !(part.is_empty() || part.starts_with('_')) {
                return None;
            }
            let base = &name[..at];
            self.summary_keys
                .iter()
                .find(|spec| spec.name == base && spec.dtype == ColumnType::F64)
        })
    }

    /// Checks one output column: declared (unless the outputs are open) and of its dtype.
    /// `dtype` is `None` for a column whose type no [`ColumnType`] covers.
    pub fn check_column(&self, name: &str, dtype: Option<ColumnType>) -> Result<(), ContractViolation> {
        match self.output(name) {
            Some(spec) => match dtype {
                Some(found) if found == spec.dtype => Ok(()),
                found => Err(ContractViolation(format!(
                    "output column `{name}` is declared {} but holds {}",
                    spec.dtype.as_str(),
                    found.map_or("another type", ColumnType::as_str)
                ))),
            },
            None if self.open_outputs => Ok(()),
            None => Err(ContractViolation(format!("output column `{name}` is not declared"))),
        }
    }

    /// Checks a whole output: every column as in [`Self::check_column`], every required
    /// declared column present, and every summary key declared with a value of its dtype
    /// (or null, or a list of such values).
    pub fn check_output<'a>(
        &self,
        columns: impl IntoIterator<Item = (&'a str, Option<ColumnType>)>,
        summary: &serde_json::Map<String, serde_json::Value>,
    ) -> Result<(), ContractViolation> {
        let mut present = Vec::new();
        for (name, dtype) in columns {
            self.check_column(name, dtype)?;
            present.push(name);
        }
        if let Some(missing) = self
            .outputs
            .iter()
            .find(|spec| spec.required && !present.contains(&spec.name.as_str()))
        {
            return Err(ContractViolation(format!(
                "required output column `{}` is missing",
                missing.name
            )));
        }
        for (key, value) in summary {
            let spec = self
                .summary_key(key)
                .ok_or_else(|| ContractViolation(format!("summary key `{key}` is not declared")))?;
            if !spec.dtype.admits(value) {
                return Err(ContractViolation(format!(
                    "summary key `{key}` is declared {} but holds {value}",
                    spec.dtype.as_str()
                )));
            }
        }
        Ok(())
    }
}

/// One input table of an analysis.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct InputRole {
    pub role: String,
    pub required: bool,
    #[serde(default)]
    pub description: String,
    pub columns: Vec<ColumnSpec>,
}

/// The data type of a column as plugins see it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum ColumnType {
    F64,
    I64,
    Str,
    Bool,
}

impl ColumnType {
    /// The name used in declarations.
    pub fn as_str(self) -> &'static str {
        match self {
            ColumnType::F64 => "f64",
            ColumnType::I64 => "i64",
            ColumnType::Str => "str",
            ColumnType::Bool => "bool",
        }
    }

    /// Whether a summary value fits this type: null, one value of it, or a list of them.
    /// Integers fit `f64` (JSON does not tell 2.0 from 2). A JSON object (a breakdown, for
    /// example by sample) is declared `str` and described in the key's description; its
    /// contents are not checked.
    pub fn admits(self, value: &serde_json::Value) -> bool {
        use serde_json::Value;
        match value {
            Value::Null => true,
            Value::Array(items) => items.iter().all(|item| !item.is_array() && self.admits(item)),
            Value::Bool(_) => self == ColumnType::Bool,
            Value::String(_) => self == ColumnType::Str,
            Value::Number(number) => match self {
                ColumnType::F64 => true,
                ColumnType::I64 => number.is_i64() || number.is_u64(),
                _ => false,
            },
            Value::Object(_) => self == ColumnType::Str,
        }
    }
}

/// One column (or summary value) with its type, unit and meaning.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ColumnSpec {
    pub name: String,
    pub dtype: ColumnType,
    /// SI unit as written in the column name convention (`K`, `m2_per_Vs`, ...), if any.
    #[serde(default)]
    pub unit: Option<String>,
    /// For inputs: must be present. For outputs: always present (may hold nulls).
    #[serde(default = "default_true")]
    pub required: bool,
    #[serde(default)]
    pub description: String,
}

fn default_true() -> bool {
    true
}

impl ColumnSpec {
    /// A required column.
    pub fn new(name: &str, dtype: ColumnType, unit: Option<&str>, description: &str) -> Self {
        ColumnSpec {
            name: name.to_owned(),
            dtype,
            unit: unit.map(str::to_owned),
            required: true,
            description: description.to_owned(),
        }
    }

    /// The same column, marked optional.
    pub fn optional(mut self) -> Self {
        self.required = false;
        self
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    unsafe extern "C" fn no_declaration() -> *mut c_char {
        std::ptr::null_mut()
    }

    unsafe extern "C" fn no_analysis(
        _analysis: *const c_char,
        _params_json: *const c_char,
        _inputs: *const InputTable,
        _input_count: usize,
        _context: *const HostContext,
        _output: *mut InvokeOutput,
    ) -> i32 {
        STATUS_UNKNOWN_ANALYSIS
    }

    unsafe extern "C" fn release_nothing(_text: *mut c_char) {}

    fn descriptor() -> PluginDescriptor {
        PluginDescriptor {
            abi_major: ABI_MAJOR,
            abi_minor: 0,
            plugin_name: c"probe".as_ptr(),
            plugin_version: c"0.0.1".as_ptr(),
            describe: Some(no_declaration),
            invoke: Some(no_analysis),
            release_string: Some(release_nothing),
        }
    }

    #[test]
    fn every_minor_so_far_declares_the_whole_descriptor() {
        for minor in 0..=ABI_MINOR {
            assert_eq!(readable_prefix(minor), std::mem::size_of::<PluginDescriptor>());
        }
        // A plugin newer than the host: still only the fields the host knows.
        assert_eq!(readable_prefix(u32::MAX), std::mem::size_of::<PluginDescriptor>());
        // The header's layout on 64-bit targets: two u32, then five pointers.
        if cfg!(target_pointer_width = "64") {
            let offsets: Vec<usize> = DESCRIPTOR_FIELDS.iter().map(|f| f.offset).collect();
            assert_eq!(offsets, [0, 4, 8, 16, 24, 32, 40]);
        }
    }

    #[test]
    fn a_complete_descriptor_is_read_field_by_field() {
        let plugin = descriptor();
        // SAFETY: a valid descriptor of minor 0.
        let fields = unsafe { read_descriptor(&plugin) }.unwrap();
        assert_eq!(fields.abi_minor, 0);
        assert_eq!(fields.plugin_name, plugin.plugin_name);
        // SAFETY: the function reads no argument.
        let status = unsafe {
            (fields.functions.invoke)(
                std::ptr::null(),
                std::ptr::null(),
                std::ptr::null(),
                0,
                std::ptr::null(),
                std::ptr::null_mut(),
            )
        };
        assert_eq!(status, STATUS_UNKNOWN_ANALYSIS);
    }

    #[test]
    fn a_null_function_is_refused_by_its_name() {
        type Clear = fn(&mut PluginDescriptor);
        let cases: [(&str, Clear); 3] = [
            ("describe", |d| d.describe = None),
            ("invoke", |d| d.invoke = None),
            ("release_string", |d| d.release_string = None),
        ];
        for (name, clear) in cases {
            let mut plugin = descriptor();
            clear(&mut plugin);
            // SAFETY: a valid descriptor but for the NULL function.
            let error = unsafe { read_descriptor(&plugin) }.err().unwrap();
            assert_eq!(
                error,
                DescriptorError::NullFunction {
                    field: name,
                    plugin: "probe".into()
                }
            );
            assert!(error.to_string().starts_with(&format!("`{name}` is NULL")), "{error}");
        }
        // SAFETY: NULL is checked before anything is read.
        assert_eq!(
            unsafe { read_descriptor(std::ptr::null()) }.err(),
            Some(DescriptorError::Null)
        );
    }

    #[test]
    fn another_major_is_refused_from_the_version_fields_alone() {
        // Only the two version fields exist, aligned as two u32 are: reading any further
        // would leave this value.
        #[repr(C)]
        struct VersionsOnly {
            major: u32,
            minor: u32,
        }
        let versions = VersionsOnly {
            major: ABI_MAJOR + 1,
            minor: 3,
        };
        let pointer = (&versions as *const VersionsOnly).cast::<PluginDescriptor>();
        // SAFETY: the major differs, so only the first 8 bytes are read.
        let error = unsafe { read_descriptor(pointer) }.err().unwrap();
        assert_eq!(
            error,
            DescriptorError::OtherMajor {
                major: ABI_MAJOR + 1,
                minor: 3
            }
        );
        assert!(
            error.to_string().contains(&format!("ABI {}.3", ABI_MAJOR + 1)),
            "{error}"
        );
    }
}
