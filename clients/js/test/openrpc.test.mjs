// The daemon's `rpc.discover` document is a valid OpenRPC document: validated with Ajv
// against the meta-schema of the @open-rpc/meta-schema package.

import assert from "node:assert/strict";
import { createRequire } from "node:module";
import { test } from "node:test";
import { client } from "./helpers.mjs";

const require = createRequire(import.meta.url);
// The default Ajv class implements JSON Schema draft-07, the dialect both meta-schemas
// below are written in (their `$schema` names the json-schema-tools draft-07 meta-schema).
const Ajv = require("ajv").default;
// The OpenRPC meta-schema (the package's index.js exports it as `openrpcDocument`).
const { openrpcDocument } = /** @type {any} */ (require("@open-rpc/meta-schema"));
// The OpenRPC meta-schema describes every schema in a document by `$ref` to
// https://meta.json-schema.tools, which @open-rpc/meta-schema does not ship: it is the
// package @json-schema-tools/meta-schema.
const { jsonSchema } = /** @type {any} */ (require("@json-schema-tools/meta-schema"));

/** A validator of OpenRPC documents. */
function openrpcValidator() {
  // strict: false because the meta-schema itself fails Ajv's strict mode ("additionalItems"
  // beside a non-array "items", which draft-07 ignores). allErrors: report everything.
  const ajv = new Ajv({ strict: false, allErrors: true });
  // The two formats the meta-schemas use, checked with the WHATWG URL parser (Ajv ships no
  // formats; ajv-formats would be a further dependency for two lines).
  ajv.addFormat("uri", (text) => URL.canParse(text));
  ajv.addFormat("uri-reference", (text) => URL.canParse(text, "http://base.invalid/"));
  ajv.addMetaSchema(jsonSchema);
  // The OpenRPC meta-schema refers to it both as "https://meta.json-schema.tools/" (its $id)
  // and "https://meta.json-schema.tools" (the same URI for HTTP, not for Ajv's lookup).
  ajv.addSchema({ $id: "https://meta.json-schema.tools", $ref: "https://meta.json-schema.tools/" });
  return ajv.compile(openrpcDocument);
}

/**
 * @param {unknown} errors Ajv's errors.
 * @returns {string}
 */
function describeErrors(errors) {
  return (/** @type {{instancePath: string, message?: string, params: unknown}[]} */ (errors ?? []))
    .map((error) => `${error.instancePath || "/"}: ${error.message} ${JSON.stringify(error.params)}`)
    .join("\n");
}

test("rpc.discover validates against the OpenRPC meta-schema", async () => {
  const validate = openrpcValidator();
  const c = await client("http");
  let document;
  try {
    document = await c.discover();
  } finally {
    c.close();
  }
  const valid = validate(document);
  assert.ok(valid, `rpc.discover is not a valid OpenRPC document; Ajv says:\n${describeErrors(validate.errors)}`);
  assert.ok(
    Object.keys(document.components.schemas).includes("fixture.wait.params"),
    "the analyses' parameter schemas are in components.schemas",
  );

  // The validator is not vacuous: a broken copy fails.
  const broken = structuredClone(document);
  delete broken.methods[0].name;
  broken.components.schemas["fixture.wait.params"].type = 5;
  assert.equal(validate(broken), false, "a document with a nameless method and a bad schema must fail");
});
