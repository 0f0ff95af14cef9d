// Every figure the daemon draws of real analysis outputs is usable in both forms: the SVG
// is an SVG document, and the Vega-Lite specification is valid against the Vega-Lite JSON
// schema (Ajv) and renders — compiled by vega-lite and drawn to SVG by vega in Node, as a
// notebook front end would.
//
// The outputs come from the demo data (MOBILIS_DEMO_DATA, a data root of the test daemon):
// the silicon wafer's Hall reduction and carrier analyses, the heterostructure's carriers,
// spectrum and oscillations, the InAs film's two-band fit and the thin film's weak
// localization, plus the magnetoresistance tables of the InAs film.

import assert from "node:assert/strict";
import { createRequire } from "node:module";
import { test } from "node:test";
import { client } from "./helpers.mjs";

const require = createRequire(import.meta.url);
const Ajv = require("ajv").default;
const vegaLiteSchema = require("vega-lite/build/vega-lite-schema.json");
const vegaLiteVersion = require("vega-lite/package.json").version;
const vegaLitePeers = require("vega-lite/package.json").peerDependencies;
const vegaVersion = require("vega/package.json").version;

/** The major version of a version text (`5.23.0`, `^5.24.0`). */
const major = (/** @type {string} */ version) => Number(/(\d+)/.exec(version)?.[1]);

const demoData = process.env.MOBILIS_DEMO_DATA;

/** The analyses whose outputs are drawn, as pipeline steps. */
const STEPS = [
  { analysis: "hall.reduce", inputs: { readings: "fig-si-readings", samples: "fig-si-samples" }, output: "fig-si-hall",
    group_by: ["sample"], params: { temperature_tolerance_K: 0.5 } },
  { analysis: "carriers.freeze_out_fit", inputs: { hall: "fig-si-hall" }, output: "fig-si-freeze-out",
    summary_output: "fig-si-freeze-out-summary", group_by: ["sample"], params: { material: "Si" } },
  { analysis: "carriers.arrhenius", inputs: { hall: "fig-si-hall" }, output: "fig-si-arrhenius", group_by: ["sample"] },
  { analysis: "carriers.mobility_scattering", inputs: { hall: "fig-si-hall", freeze_out: "fig-si-freeze-out-summary" },
    output: "fig-si-scattering", group_by: ["sample"],
    params: { material: "Si", mobility_column: "drift_mobility_m2_per_Vs", ionized_density: "carriers_plus_compensation" } },
  { analysis: "spectrum.multi_carrier_fit", inputs: { sweep: "fig-hemt-sweeps" }, output: "fig-hemt-carriers",
    group_by: ["sample", "temperature_K"] },
  { analysis: "spectrum.mobility", inputs: { sweep: "fig-hemt-sweeps" }, output: "fig-hemt-spectrum",
    group_by: ["sample", "temperature_K"] },
  { analysis: "mr.oscillations", inputs: { sweep: "fig-hemt-sdh" }, output: "fig-hemt-oscillations", group_by: ["sample"],
    params: { landau_fan: true } },
  { analysis: "mr.two_band_fit", inputs: { sweep: "fig-inas-sweeps" }, output: "fig-inas-two-band",
    group_by: ["sample", "temperature_K"] },
  { analysis: "mr.symmetrize", inputs: { sweep: "fig-inas-sweeps" }, output: "fig-inas-symmetrized",
    group_by: ["sample", "temperature_K"] },
  { analysis: "mr.ratio", inputs: { sweep: "fig-inas-sweeps" }, output: "fig-inas-ratio",
    group_by: ["sample", "temperature_K"] },
  { analysis: "mr.kohler", inputs: { sweep: "fig-inas-sweeps" }, output: "fig-inas-kohler" },
  { analysis: "mr.weak_localization", inputs: { sweep: "fig-film-wl" }, output: "fig-film-wl-fit",
    group_by: ["sample", "temperature_K"] },
].map((step) => ({ ...step, overwrite: true }));

const IMPORTS = {
  "fig-si-readings": "si-wafer/readings.csv",
  "fig-si-samples": "si-wafer/samples.csv",
  "fig-hemt-sweeps": "heterostructure/sweeps.csv",
  "fig-hemt-sdh": "heterostructure/sdh-sweeps.csv",
  "fig-inas-sweeps": "inas-film/sweeps.csv",
  "fig-film-wl": "thin-film/wl-sweep.csv",
};

/**
 * Draws a Vega-Lite specification to SVG with the reference libraries.
 * @param {object} spec
 * @returns {Promise<string>}
 */
async function renderVegaLite(spec) {
  const vega = await import("vega");
  const vegaLite = await import("vega-lite");
  const compiled = vegaLite.compile(/** @type {any} */ (spec)).spec;
  const view = new vega.View(vega.parse(compiled), { renderer: "none" });
  const svg = await view.toSVG();
  view.finalize();
  return svg;
}

test("every figure of every analysis output is a valid, renderable Vega-Lite spec and an SVG", { timeout: 900_000 }, async () => {
  assert.ok(demoData, "set MOBILIS_DEMO_DATA to the demo-data directory (a data root of the daemon)");
  // Vega-Lite's schema is draft-07; strict mode off as for the OpenRPC meta-schema. Its three
  // formats are checked here (Ajv ships none).
  const ajv = new Ajv({ strict: false, allErrors: true });
  ajv.addFormat("uri", (text) => URL.canParse(text));
  ajv.addFormat("uri-reference", (text) => URL.canParse(text, "http://base.invalid/"));
  ajv.addFormat("color-hex", /^#([0-9a-f]{3,4}|[0-9a-f]{6}|[0-9a-f]{8})$/i);
  const validate = ajv.compile(vegaLiteSchema);
  // The validator is not vacuous: an unknown mark type fails.
  assert.equal(validate({ mark: "no-such-mark", data: { values: [] } }), false);
  const c = await client("websocket");
  try {
    for (const [name, file] of Object.entries(IMPORTS)) {
      await c.importDataset({ name, path: `${demoData}/${file}`, overwrite: true });
    }
    await c.runPipeline(STEPS);
    const drawnKinds = new Set();
    for (const step of STEPS) {
      const kinds = /** @type {{name: string, analyses: string[]}[]} */ (await c.call("plot.kinds", { dataset: step.output }));
      const ownKinds = kinds.filter((kind) => kind.analyses.includes(step.analysis));
      assert.ok(ownKinds.length > 0, `${step.analysis} has no figure kind`);
      for (const kind of ownKinds) {
        const figure = await c.plot({ dataset: step.output, kind: kind.name });
        const where = `${step.output} as ${kind.name}`;
        assert.match(figure.svg ?? "", /^<svg[\s\S]*<\/svg>\s*$/, `${where}: not an SVG document`);
        assert.doesNotMatch(figure.svg ?? "", /NaN|Infinity/, `${where}: the SVG holds non-numbers`);
        const declared = /\/vega-lite\/v(\d+)\.json$/.exec(figure.vega_lite?.$schema ?? "");
        assert.ok(declared, `${where}: no Vega-Lite $schema URL: ${figure.vega_lite?.$schema}`);
        assert.equal(Number(declared[1]), major(vegaLiteVersion), `${where}: declares v${declared[1]}, validated with vega-lite ${vegaLiteVersion}`);
        const valid = validate(figure.vega_lite);
        assert.ok(valid, `${where}: invalid Vega-Lite:\n${JSON.stringify(validate.errors?.slice(0, 5), null, 1)}`);
        const drawn = await renderVegaLite(figure.vega_lite);
        assert.match(drawn, /<svg/, `${where}: vega drew nothing`);
        assert.match(drawn, /class="mark-(symbol|line|rule)/, `${where}: vega drew no marks`);
        drawnKinds.add(kind.name);
      }
    }
    // The figures the trade asks for are all among them.
    for (const kind of [
      "hall_density", "hall_mobility", "hall_resistivity", "arrhenius", "mobility_scattering",
      "mobility_spectrum", "magnetoresistance", "kohler", "oscillation_fft", "oscillation_mass",
      "dingle", "landau_fan",
    ]) {
      assert.ok(drawnKinds.has(kind), `no ${kind} figure was drawn; drawn: ${[...drawnKinds].join(", ")}`);
    }
  } finally {
    c.close();
  }
});

// One Vega-Lite version everywhere: the figures' $schema (checked per figure above), the
// notebook's display MIME type, the vega-lite package that validates and compiles them, and
// the vega that draws them (the one vega-lite is made for).
test("the declared Vega-Lite version is the one the tests validate and draw with", async () => {
  const fs = await import("node:fs");
  const notebook = fs.readFileSync(new URL("../../../notebooks/demo-deno.ipynb", import.meta.url), "utf8");
  const mimeTypes = [...notebook.matchAll(/application\/vnd\.vegalite\.v(\d+)\+json/g)];
  assert.ok(mimeTypes.length > 0, "the Deno notebook displays no Vega-Lite figure");
  for (const [mime, version] of mimeTypes) {
    assert.equal(Number(version), major(vegaLiteVersion), `the notebook shows ${mime}, the tests use vega-lite ${vegaLiteVersion}`);
  }
  assert.equal(major(vegaVersion), major(vegaLitePeers.vega), `vega ${vegaVersion} draws, vega-lite ${vegaLiteVersion} wants vega ${vegaLitePeers.vega}`);
});

