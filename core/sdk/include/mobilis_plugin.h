/*
 * mobilis plugin ABI, version 1.1: the C view of core/sdk/src/abi.rs.
 *
 * A plugin is a shared library exporting one function:
 *
 *     const MobilisPluginDescriptor *mobilis_plugin_entry(void);
 *
 * returning a pointer to a static descriptor. The host reads abi_major and abi_minor
 * first (they keep their place in every version) and refuses any other major version.
 *
 * Ownership: whoever allocates a thing frees it.
 *  - Strings the plugin returns (from describe, and result_json / error_message written by
 *    invoke) are freed by the host through release_string.
 *  - Input tables belong to the host. A plugin may take one over by copying the structs and
 *    setting release to NULL in the host's copy ("moving" in the Arrow C Data Interface);
 *    whatever still has a release callback when invoke returns is released by the host.
 *  - The output table is written by the plugin into output->schema / output->array with
 *    release callbacks of its own; the host calls them when done.
 *
 * Tables are Arrow struct arrays, one child per column. Hosts send "g" float64, "l" int64,
 * "b" boolean, and text as "U" large UTF-8 (int64 offsets) or, to a plugin that declared
 * the feature MOBILIS_FEATURE_STRING_VIEWS, as "vu" string views; nulls through the
 * validity bitmap. A plugin's output may use any layout the Arrow C Data Interface defines
 * that the host understands ("g", "l", "b", "U", "u" and "vu" are always fine).
 *
 * String views ("vu"; Arrow Columnar Format, "Variable-size Binary View Layout", and the
 * C Data Interface, "Binary view arrays"): buffers[0] is the validity bitmap, buffers[1]
 * holds one 16-byte view per row, buffers[2 .. n_buffers-2] are the variadic data buffers
 * and buffers[n_buffers-1] holds their sizes as int64. A view starts with an int32 length;
 * a string of at most 12 bytes follows inline, a longer one is given by a 4-byte prefix,
 * an int32 index into the data buffers and an int32 offset into that buffer. Text crosses
 * as views without a copy, because that is how the host keeps it.
 *
 * Versions. A host accepts every plugin of its major version, whatever its minor; a minor
 * version only adds things an older peer may ignore:
 *  1.0  the descriptor below, describe, invoke, release_string; text sent as "U".
 *  1.1  the declaration's "features" may list MOBILIS_FEATURE_STRING_VIEWS, and the host
 *       then sends text as "vu". No descriptor field was added: a plugin that does not
 *       list the feature (every 1.0 plugin) keeps receiving "U".
 *
 * Appended fields and minor versions (the same rule stands in core/sdk/src/abi.rs):
 *  1. Fields are only ever appended to the end of the descriptor. No field is removed,
 *     moved, resized or given another type or meaning.
 *  2. A field appended in minor version M is read only from a plugin whose abi_minor is at
 *     least M. DESCRIPTOR_FIELDS in core/sdk/src/abi.rs lists every field with the minor that
 *     added it; every field below dates from 1.0.
 *  3. A host reads abi_major first and nothing else unless it is the host's own major;
 *     then abi_minor; then only the fields the plugin's minor declares. It never reads past
 *     the end of that prefix, so an older plugin's shorter static descriptor is never
 *     overrun.
 *  4. Any other change (removing, reordering or retyping a field, changing a function's
 *     signature or what a field means) bumps the major version.
 *  5. The function fields are nullable pointers; a host checks each one at load and refuses
 *     a library that leaves a required one NULL, naming the field.
 *
 * Threads: invoke may be called from several host threads at once, for different calls.
 * Never longjmp, throw or unwind across these functions: the host cannot catch anything
 * that leaves them. A plugin catches its own failures and returns MOBILIS_STATUS_PANIC.
 */
#ifndef MOBILIS_PLUGIN_H
#define MOBILIS_PLUGIN_H

#include <stddef.h>
#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

#define MOBILIS_ABI_MAJOR 1
#define MOBILIS_ABI_MINOR 1
#define MOBILIS_ENTRY_SYMBOL "mobilis_plugin_entry"

/* Names a plugin may list in its declaration's "features" (ABI 1.1 and later). */
#define MOBILIS_FEATURE_STRING_VIEWS "string_views" /* send text as "vu" string views */

/* Status codes returned by invoke. */
#define MOBILIS_STATUS_OK 0
#define MOBILIS_STATUS_INVALID_INPUT 1     /* parameters or data unusable: say what to change */
#define MOBILIS_STATUS_NUMERICAL_FAILURE 2 /* valid input, computation failed */
#define MOBILIS_STATUS_CANCELLED 3         /* is_cancelled returned nonzero */
#define MOBILIS_STATUS_PANIC 4             /* internal bug in the plugin */
#define MOBILIS_STATUS_UNKNOWN_ANALYSIS 5  /* no analysis of that name */

/* The Arrow C Data Interface (https://arrow.apache.org/docs/format/CDataInterface.html). */
#ifndef ARROW_C_DATA_INTERFACE
#define ARROW_C_DATA_INTERFACE
#define ARROW_FLAG_DICTIONARY_ORDERED 1
#define ARROW_FLAG_NULLABLE 2
#define ARROW_FLAG_MAP_KEYS_SORTED 4

struct ArrowSchema {
  const char *format;
  const char *name;
  const char *metadata;
  int64_t flags;
  int64_t n_children;
  struct ArrowSchema **children;
  struct ArrowSchema *dictionary;
  void (*release)(struct ArrowSchema *);
  void *private_data;
};

struct ArrowArray {
  int64_t length;
  int64_t null_count;
  int64_t offset;
  int64_t n_buffers;
  int64_t n_children;
  const void **buffers;
  struct ArrowArray **children;
  struct ArrowArray *dictionary;
  void (*release)(struct ArrowArray *);
  void *private_data;
};
#endif /* ARROW_C_DATA_INTERFACE */

/* Services the host offers during invoke. Either callback may be NULL. */
typedef struct MobilisHostContext {
  void *host_data;
  /* fraction in [0, 1]; message is NUL-terminated UTF-8 or NULL. */
  void (*report_progress)(void *host_data, double fraction, const char *message);
  /* nonzero once the client asked to cancel: stop and return MOBILIS_STATUS_CANCELLED. */
  int32_t (*is_cancelled)(void *host_data);
} MobilisHostContext;

/* One named input table. */
typedef struct MobilisInputTable {
  const char *role; /* NUL-terminated UTF-8, e.g. "readings" */
  struct ArrowSchema *schema;
  struct ArrowArray *array;
} MobilisInputTable;

/* Written by invoke; the host initialises it to empty structs and NULL strings. */
typedef struct MobilisInvokeOutput {
  struct ArrowSchema schema;
  struct ArrowArray array;
  char *result_json;   /* on success: {"summary": {...}, "warnings": [...]} */
  char *error_message; /* on failure: what to change */
} MobilisInvokeOutput;

typedef struct MobilisPluginDescriptor {
  uint32_t abi_major; /* stays first in every version */
  uint32_t abi_minor; /* stays second in every version */
  const char *plugin_name;
  const char *plugin_version;
  /* The three functions are required: a library that leaves one NULL is refused. */
  /* JSON declaration of the analyses (see DEVELOPERS.md); released with release_string.
   * NULL on failure. */
  char *(*describe)(void);
  int32_t (*invoke)(const char *analysis, const char *params_json, const MobilisInputTable *inputs,
                    size_t input_count, const MobilisHostContext *context, MobilisInvokeOutput *output);
  void (*release_string)(char *text);
} MobilisPluginDescriptor;

typedef const MobilisPluginDescriptor *(*MobilisEntryFn)(void);

#ifdef __cplusplus
}
#endif

#endif /* MOBILIS_PLUGIN_H */
