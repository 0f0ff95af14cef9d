/*
 * cfixture: a mobilis plugin written in plain C99 against core/sdk/include/mobilis_plugin.h
 * and the Arrow C Data Interface specification alone, with no Rust and no Arrow library.
 * It proves that the plugin boundary is a C ABI, not a Rust one.
 *
 * Analysis `cfixture.sum`: input role `values`, a table with a float64 column `x` (nulls
 * allowed); output a one-row table with `total` (float64, the sum of the non-null x) and
 * `count` (int64, how many x were summed); summary {"total": ...}.
 *
 * The tests build several libraries from this one file with preprocessor defines:
 *   FIXTURE_ABI_MAJOR=N     declare ABI major N instead of the header's (a "wrong ABI" build)
 *   FIXTURE_PLUGIN_NAME=id  another plugin name, same analysis (a duplicate to be refused)
 *   FIXTURE_NO_ENTRY        export the descriptor under a misspelled symbol, as a plugin with
 *                           a typo would, so the library has no entry symbol
 *   FIXTURE_FAULT=N         misbehave when the `values` table has exactly FIXTURE_FAULT_ROWS (13)
 *                           rows, and sum every other table as usual: 1 dereferences NULL
 *                           (SIGSEGV), 2 calls exit(3), 3 spins for ever without looking at
 *                           the cancel flag; the plugin-isolation tests use these
 *   FIXTURE_ABORT_ON_LOAD   call abort() from a library constructor, before any entry point
 *   FIXTURE_ABI_MINOR=N     declare ABI minor N instead of the header's (an "older plugin" build)
 *   FIXTURE_NULL_FUNCTION=f leave the descriptor's function f (describe, invoke or
 *                           release_string) NULL, as a C plugin with a missing function would
 *   FIXTURE_VERSIONS_ONLY   return a descriptor that holds only the two version fields
 *                           (ABI 2.0 here), so a host that read past them would read
 *                           whatever follows it in the library
 *   FIXTURE_STRING_VIEWS    declare the "string_views" feature (ABI 1.1) and a text column x,
 *                           read as string views "vu" or large UTF-8 "U": total is then the
 *                           byte length of its non-null strings, after every view was checked
 *                           against its data buffer (a C reader of the view layout)
 */
#include "mobilis_plugin.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#ifndef FIXTURE_ABI_MAJOR
#define FIXTURE_ABI_MAJOR MOBILIS_ABI_MAJOR
#endif
#ifndef FIXTURE_ABI_MINOR
#define FIXTURE_ABI_MINOR MOBILIS_ABI_MINOR
#endif
#ifdef FIXTURE_STRING_VIEWS
#define FIXTURE_FEATURES "[\"" MOBILIS_FEATURE_STRING_VIEWS "\"]"
#define FIXTURE_X_DTYPE "str"
#else
#define FIXTURE_FEATURES "[]"
#define FIXTURE_X_DTYPE "f64"
#endif

/* Two steps, so that the define's value, not its name, becomes the string. */
#define FIXTURE_STRINGIFY_VALUE(x) #x
#define FIXTURE_STRINGIFY(x) FIXTURE_STRINGIFY_VALUE(x)
#ifdef FIXTURE_PLUGIN_NAME
#define FIXTURE_NAME_TEXT FIXTURE_STRINGIFY(FIXTURE_PLUGIN_NAME)
#else
#define FIXTURE_NAME_TEXT "cfixture"
#endif

#ifdef FIXTURE_NO_ENTRY
#define FIXTURE_ENTRY_FUNCTION mobilis_plugin_entry_misspelled
#else
#define FIXTURE_ENTRY_FUNCTION mobilis_plugin_entry
#endif

#if defined(_WIN32)
#define FIXTURE_EXPORT __declspec(dllexport)
#else
#define FIXTURE_EXPORT __attribute__((visibility("default")))
#endif

#ifndef FIXTURE_FAULT
#define FIXTURE_FAULT 0
#endif
#define FIXTURE_FAULT_ROWS 13

#ifdef FIXTURE_ABORT_ON_LOAD
/* Runs when the loader maps the library (a GCC and Clang extension), as a broken static
 * initialiser of a real plugin would. */
__attribute__((constructor)) static void abort_on_load(void) { abort(); }
#endif

#define SUM_ANALYSIS "cfixture.sum"
#define VALUES_ROLE "values"

/* The declaration describe returns: the same JSON a Rust plugin's SDK would write. */
static const char DECLARATION[] =
    "{\"features\":" FIXTURE_FEATURES ",\"analyses\":[{"
    "\"name\":\"" SUM_ANALYSIS "\","
    "\"summary\":\"Sum and count of the non-null values of column x\","
    "\"description\":\"A plugin written in C99 against the C header, to test the plugin boundary.\","
    "\"params\":{\"type\":\"object\",\"additionalProperties\":false,\"properties\":{}},"
    "\"inputs\":[{\"role\":\"" VALUES_ROLE "\",\"required\":true,\"description\":\"the values to sum\","
    "\"columns\":[{\"name\":\"x\",\"dtype\":\"" FIXTURE_X_DTYPE "\",\"unit\":null,\"required\":true,"
    "\"description\":\"values; nulls are skipped\"}]}],"
    "\"outputs\":["
    "{\"name\":\"total\",\"dtype\":\"f64\",\"unit\":null,\"required\":true,\"description\":\"sum of the non-null x\"},"
    "{\"name\":\"count\",\"dtype\":\"i64\",\"unit\":null,\"required\":true,\"description\":\"number of non-null x\"}],"
    "\"summary_keys\":["
    "{\"name\":\"total\",\"dtype\":\"f64\",\"unit\":null,\"required\":true,\"description\":\"sum of the non-null x\"}]"
    "}]}";

/* A heap copy of a string, released by the host through release_string (free). strdup is
 * POSIX, not C99. */
static char *copy_string(const char *text) {
  size_t length = strlen(text);
  char *copy = malloc(length + 1);
  if (copy != NULL) {
    memcpy(copy, text, length + 1);
  }
  return copy;
}

/* A heap string built like printf; NULL if memory ran out (the host then reports the status
 * without a message). */
static char *format_string(const char *format, ...) {
  va_list arguments;
  va_start(arguments, format);
  int length = vsnprintf(NULL, 0, format, arguments);
  va_end(arguments);
  if (length < 0) {
    return NULL;
  }
  char *text = malloc((size_t)length + 1);
  if (text == NULL) {
    return NULL;
  }
  va_start(arguments, format);
  vsnprintf(text, (size_t)length + 1, format, arguments);
  va_end(arguments);
  return text;
}

static char *describe(void) { return copy_string(DECLARATION); }

static void release_string(char *text) { free(text); }

/* ---- The output table: a struct array with two one-row children, owned by this library
 * until the host calls the release callbacks. Every allocation an array or schema owns
 * hangs off its private_data, so that the structs themselves may be moved (copied
 * bitwise) by the host, as the C Data Interface allows. */

#define OUTPUT_COLUMNS 2

typedef struct ArrayPrivate {
  const void *buffers[2];                      /* validity (always NULL here), values */
  struct ArrowArray *children[OUTPUT_COLUMNS]; /* used by the table only */
  void *values;                                /* the values buffer of a column */
} ArrayPrivate;

typedef struct SchemaPrivate {
  struct ArrowSchema *children[OUTPUT_COLUMNS];
} SchemaPrivate;

static void release_array(struct ArrowArray *array) {
  if (array == NULL || array->release == NULL) {
    return;
  }
  ArrayPrivate *owned = array->private_data;
  /* A parent releases its children: the consumer calls only the top-level callback. */
  for (int64_t index = 0; index < array->n_children; index++) {
    struct ArrowArray *child = array->children[index];
    if (child != NULL) {
      if (child->release != NULL) {
        child->release(child);
      }
      free(child);
    }
  }
  if (owned != NULL) {
    free(owned->values);
    free(owned);
  }
  array->release = NULL;
}

static void release_schema(struct ArrowSchema *schema) {
  if (schema == NULL || schema->release == NULL) {
    return;
  }
  for (int64_t index = 0; index < schema->n_children; index++) {
    struct ArrowSchema *child = schema->children[index];
    if (child != NULL) {
      if (child->release != NULL) {
        child->release(child);
      }
      free(child);
    }
  }
  free(schema->private_data);
  schema->release = NULL;
}

/* A one-row primitive column; takes ownership of `values` (freed on failure too). */
static struct ArrowArray *column_array(void *values) {
  struct ArrowArray *array = malloc(sizeof *array);
  ArrayPrivate *owned = calloc(1, sizeof *owned);
  if (array == NULL || owned == NULL) {
    free(array);
    free(owned);
    free(values);
    return NULL;
  }
  owned->values = values;
  owned->buffers[0] = NULL; /* no validity bitmap: no nulls */
  owned->buffers[1] = values;
  array->length = 1;
  array->null_count = 0;
  array->offset = 0;
  array->n_buffers = 2;
  array->n_children = 0;
  array->buffers = owned->buffers;
  array->children = NULL;
  array->dictionary = NULL;
  array->release = release_array;
  array->private_data = owned;
  return array;
}

static struct ArrowSchema *column_schema(const char *format, const char *name) {
  struct ArrowSchema *schema = malloc(sizeof *schema);
  if (schema == NULL) {
    return NULL;
  }
  schema->format = format; /* static literals: nothing to free */
  schema->name = name;
  schema->metadata = NULL;
  schema->flags = 0;
  schema->n_children = 0;
  schema->children = NULL;
  schema->dictionary = NULL;
  schema->release = release_schema;
  schema->private_data = NULL;
  return schema;
}

/* Writes the one-row table {total, count} into `output`; 0 on success, -1 if memory ran
 * out (then nothing is left allocated and the output structs stay released). */
static int export_result(double total, int64_t count, MobilisInvokeOutput *output) {
  double *total_value = malloc(sizeof *total_value);
  int64_t *count_value = malloc(sizeof *count_value);
  if (total_value == NULL || count_value == NULL) {
    free(total_value);
    free(count_value);
    return -1;
  }
  *total_value = total;
  *count_value = count;

  ArrayPrivate *table = calloc(1, sizeof *table);
  SchemaPrivate *table_schema = calloc(1, sizeof *table_schema);
  struct ArrowArray *total_array = column_array(total_value);
  struct ArrowArray *count_array = column_array(count_value);
  struct ArrowSchema *total_schema = column_schema("g", "total");
  struct ArrowSchema *count_schema = column_schema("l", "count");
  if (table == NULL || table_schema == NULL || total_array == NULL || count_array == NULL ||
      total_schema == NULL || count_schema == NULL) {
    free(table);
    free(table_schema);
    if (total_array != NULL) {
      release_array(total_array);
      free(total_array);
    }
    if (count_array != NULL) {
      release_array(count_array);
      free(count_array);
    }
    free(total_schema);
    free(count_schema);
    return -1;
  }

  table->buffers[0] = NULL; /* a struct array has only its validity buffer */
  table->children[0] = total_array;
  table->children[1] = count_array;
  table->values = NULL;
  output->array.length = 1;
  output->array.null_count = 0;
  output->array.offset = 0;
  output->array.n_buffers = 1;
  output->array.n_children = OUTPUT_COLUMNS;
  output->array.buffers = table->buffers;
  output->array.children = table->children;
  output->array.dictionary = NULL;
  output->array.release = release_array;
  output->array.private_data = table;

  table_schema->children[0] = total_schema;
  table_schema->children[1] = count_schema;
  output->schema.format = "+s";
  output->schema.name = "table";
  output->schema.metadata = NULL;
  output->schema.flags = 0;
  output->schema.n_children = OUTPUT_COLUMNS;
  output->schema.children = table_schema->children;
  output->schema.dictionary = NULL;
  output->schema.release = release_schema;
  output->schema.private_data = table_schema;
  return 0;
}

/* ---- Reading the input. */

static int bit_is_set(const uint8_t *bitmap, int64_t index) {
  return (bitmap[index / 8] >> (index % 8)) & 1;
}

static int32_t fail(MobilisInvokeOutput *output, int32_t status, char *message) {
  output->error_message = message;
  return status;
}

static int32_t finish(double total, int64_t count, const MobilisHostContext *context, MobilisInvokeOutput *output);

#ifdef FIXTURE_STRING_VIEWS
/* Column x as text: the sum of the byte lengths of its non-null strings. With views
 * ("vu"), every view is checked as the Arrow columnar format describes it: 16 bytes, an
 * int32 length, then up to 12 inline bytes or a 4-byte prefix, an int32 index into the
 * variadic data buffers and an int32 offset into that buffer; the last buffer holds the
 * int64 sizes of the data buffers. */
static int32_t sum_text_lengths(const struct ArrowArray *table, int64_t column, int views,
                                const MobilisHostContext *context, MobilisInvokeOutput *output) {
  const struct ArrowArray *x = table->children[column];
  const int64_t start = table->offset + x->offset;
  const uint8_t *validity = x->null_count != 0 ? x->buffers[0] : NULL;
  if (views && x->n_buffers < 3) {
    return fail(output, MOBILIS_STATUS_INVALID_INPUT,
                format_string("a string view column has at least 3 buffers, got %lld", (long long)x->n_buffers));
  }
  const int64_t data_count = views ? x->n_buffers - 3 : 0;
  const int64_t *sizes = views ? x->buffers[x->n_buffers - 1] : NULL;
  double total = 0.0;
  int64_t count = 0;
  for (int64_t row = 0; row < table->length; row++) {
    if (validity != NULL && !bit_is_set(validity, start + row)) {
      continue;
    }
    int64_t length;
    if (views) {
      const uint8_t *view = (const uint8_t *)x->buffers[1] + 16 * (start + row);
      int32_t view_length, index, offset;
      memcpy(&view_length, view, 4);
      length = view_length;
      if (view_length > 12) {
        memcpy(&index, view + 8, 4);
        memcpy(&offset, view + 12, 4);
        if (index < 0 || index >= data_count || offset < 0 || (int64_t)offset + view_length > sizes[index]) {
          return fail(output, MOBILIS_STATUS_INVALID_INPUT,
                      format_string("row %lld: the view points outside its data buffer", (long long)row));
        }
        const uint8_t *data = (const uint8_t *)x->buffers[2 + index] + offset;
        if (memcmp(data, view + 4, 4) != 0) {
          return fail(output, MOBILIS_STATUS_INVALID_INPUT,
                      format_string("row %lld: the view's prefix differs from its data", (long long)row));
        }
      }
    } else {
      const int64_t *offsets = x->buffers[1];
      length = offsets[start + row + 1] - offsets[start + row];
    }
    total += (double)length;
    count++;
  }
  return finish(total, count, context, output);
}
#endif

static int32_t sum_values(const MobilisInputTable *input, const MobilisHostContext *context,
                          MobilisInvokeOutput *output) {
  const struct ArrowSchema *schema = input->schema;
  const struct ArrowArray *array = input->array;
  if (schema == NULL || array == NULL || schema->release == NULL || array->release == NULL) {
    return fail(output, MOBILIS_STATUS_INVALID_INPUT,
                copy_string("input `" VALUES_ROLE "` holds no table"));
  }
  if (strcmp(schema->format, "+s") != 0) {
    return fail(output, MOBILIS_STATUS_INVALID_INPUT,
                format_string("input `" VALUES_ROLE "` must be an Arrow struct array (format \"+s\"), got \"%s\"",
                              schema->format));
  }
  int64_t column = -1;
  for (int64_t index = 0; index < schema->n_children; index++) {
    const char *name = schema->children[index]->name;
    if (name != NULL && strcmp(name, "x") == 0) {
      column = index;
      break;
    }
  }
  if (column < 0 || column >= array->n_children) {
    return fail(output, MOBILIS_STATUS_INVALID_INPUT,
                copy_string("input `" VALUES_ROLE "` has no column `x`; add a float64 column named x"));
  }
  const char *format = schema->children[column]->format;
#ifdef FIXTURE_STRING_VIEWS
  if (strcmp(format, "vu") == 0 || strcmp(format, "U") == 0) {
    return sum_text_lengths(array, column, format[0] == 'v', context, output);
  }
#endif
  if (strcmp(format, "g") != 0) {
    return fail(output, MOBILIS_STATUS_INVALID_INPUT,
                format_string("column `x` of input `" VALUES_ROLE "` must be float64 (Arrow format \"g\"), got \"%s\"",
                              format));
  }

  const struct ArrowArray *x = array->children[column];
  /* A struct's offset applies to its children as well as their own offsets. */
  const int64_t start = array->offset + x->offset;
  const uint8_t *table_validity = array->n_buffers > 0 && array->null_count != 0 ? array->buffers[0] : NULL;
  const uint8_t *validity = x->n_buffers > 0 && x->null_count != 0 ? x->buffers[0] : NULL;
  const double *values = x->n_buffers > 1 ? x->buffers[1] : NULL;
  if (values == NULL && array->length > 0) {
    return fail(output, MOBILIS_STATUS_INVALID_INPUT, copy_string("column `x` has no values buffer"));
  }

  double total = 0.0;
  int64_t count = 0;
  for (int64_t row = 0; row < array->length; row++) {
    /* Polled every 64 Ki rows: cheap enough, and a long sum still stops soon when asked. */
    if ((row & 0xFFFF) == 0 && context != NULL && context->is_cancelled != NULL &&
        context->is_cancelled(context->host_data)) {
      return fail(output, MOBILIS_STATUS_CANCELLED, copy_string("cancelled by the client"));
    }
    if (table_validity != NULL && !bit_is_set(table_validity, array->offset + row)) {
      continue;
    }
    if (validity != NULL && !bit_is_set(validity, start + row)) {
      continue;
    }
    total += values[start + row];
    count++;
  }
  return finish(total, count, context, output);
}

/* Reports completion and writes the result of a sum. */
static int32_t finish(double total, int64_t count, const MobilisHostContext *context, MobilisInvokeOutput *output) {
  if (context != NULL && context->report_progress != NULL) {
    context->report_progress(context->host_data, 1.0, "summed");
  }

  /* JSON has no infinities or NaN: an overflowing sum is reported as null. */
  char *result = isfinite(total) ? format_string("{\"summary\":{\"total\":%.17g},\"warnings\":[]}", total)
                                 : copy_string("{\"summary\":{\"total\":null},\"warnings\":[\"the sum is not finite\"]}");
  if (result == NULL || export_result(total, count, output) != 0) {
    free(result);
    return fail(output, MOBILIS_STATUS_PANIC, copy_string("out of memory while building the result"));
  }
  output->result_json = result;
  return MOBILIS_STATUS_OK;
}

/* The faults of FIXTURE_FAULT. volatile keeps the compiler from reasoning them away. */
static void misbehave(void) {
  if (FIXTURE_FAULT == 1) {
    volatile int *nowhere = NULL;
    *nowhere = 1;
  } else if (FIXTURE_FAULT == 2) {
    exit(3);
  } else if (FIXTURE_FAULT == 3) {
    volatile unsigned long turns = 0;
    for (;;) {
      turns++;
    }
  }
}

static int32_t invoke(const char *analysis, const char *params_json, const MobilisInputTable *inputs,
                      size_t input_count, const MobilisHostContext *context, MobilisInvokeOutput *output) {
  /* The host validated the parameters against the declared schema, which allows none. */
  (void)params_json;
  if (output == NULL) {
    return MOBILIS_STATUS_INVALID_INPUT;
  }
  if (analysis == NULL || strcmp(analysis, SUM_ANALYSIS) != 0) {
    return fail(output, MOBILIS_STATUS_UNKNOWN_ANALYSIS,
                format_string("plugin " FIXTURE_NAME_TEXT " has no analysis `%s`; it offers " SUM_ANALYSIS,
                              analysis == NULL ? "(null)" : analysis));
  }
  for (size_t index = 0; index < input_count; index++) {
    if (inputs[index].role != NULL && strcmp(inputs[index].role, VALUES_ROLE) == 0) {
      if (FIXTURE_FAULT != 0 && inputs[index].array != NULL && inputs[index].array->length == FIXTURE_FAULT_ROWS) {
        misbehave();
      }
      return sum_values(&inputs[index], context, output);
    }
  }
  return fail(output, MOBILIS_STATUS_INVALID_INPUT,
              copy_string(SUM_ANALYSIS " needs the input role `" VALUES_ROLE "`"));
}

/* FIXTURE_NULL_FUNCTION names one function; the preprocessor compares names only as
 * numbers, so each name is given a number first. */
#define FIXTURE_FUNCTION_describe 1
#define FIXTURE_FUNCTION_invoke 2
#define FIXTURE_FUNCTION_release_string 3
#define FIXTURE_FUNCTION_NUMBER_OF(f) FIXTURE_FUNCTION_##f
#define FIXTURE_FUNCTION_NUMBER(f) FIXTURE_FUNCTION_NUMBER_OF(f)
#ifdef FIXTURE_NULL_FUNCTION
#define FIXTURE_NULL FIXTURE_FUNCTION_NUMBER(FIXTURE_NULL_FUNCTION)
#else
#define FIXTURE_NULL 0
#endif

static const MobilisPluginDescriptor DESCRIPTOR = {
    FIXTURE_ABI_MAJOR,
    FIXTURE_ABI_MINOR,
    FIXTURE_NAME_TEXT,
    "0.1.0",
    FIXTURE_NULL == 1 ? NULL : describe,
    FIXTURE_NULL == 2 ? NULL : invoke,
    FIXTURE_NULL == 3 ? NULL : release_string,
};

FIXTURE_EXPORT const MobilisPluginDescriptor *FIXTURE_ENTRY_FUNCTION(void);

#ifdef FIXTURE_VERSIONS_ONLY
/* A descriptor of another major version may have any layout after its version fields, so
 * this one has none: a host must refuse it from these two numbers alone. */
static const struct {
  uint32_t abi_major;
  uint32_t abi_minor;
} VERSIONS_ONLY = {MOBILIS_ABI_MAJOR + 1, 0};

FIXTURE_EXPORT const MobilisPluginDescriptor *FIXTURE_ENTRY_FUNCTION(void) {
  (void)DESCRIPTOR;
  return (const MobilisPluginDescriptor *)(const void *)&VERSIONS_ONLY;
}
#else
FIXTURE_EXPORT const MobilisPluginDescriptor *FIXTURE_ENTRY_FUNCTION(void) { return &DESCRIPTOR; }
#endif
