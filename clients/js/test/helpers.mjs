// Shared by the Node tests: the daemon's address and small utilities.
//
// The tests run against a real daemon whose address is in MOBILIS_URL and which loads the
// test fixture plugin (for `fixture.wait`). `cargo test -p mobilis-tests --test suite js_client::`
// starts such a daemon and runs these tests; to run them by hand, start
// `mobilisd --listen 127.0.0.1:0 --plugin-dir DIR` with DIR holding the plugin libraries
// and `libtest_fixture_plugin`, then `MOBILIS_URL=http://127.0.0.1:PORT npm test`.

import assert from "node:assert/strict";
import { connect } from "../mobilis.js";

/** @returns {string} The daemon's address. */
export function daemonUrl() {
  const url = process.env.MOBILIS_URL;
  assert.ok(
    url,
    "set MOBILIS_URL to the address of a running mobilisd that loads the fixture plugin " +
      "(`cargo test -p mobilis-tests --test suite js_client::` does this for you)",
  );
  return url;
}

/** Both transports, for tests that run over each. */
export const TRANSPORTS = /** @type {const} */ (["websocket", "http"]);

/**
 * A client over the given transport.
 * @param {"websocket" | "http"} transport
 */
export function client(transport) {
  return connect(daemonUrl(), { transport });
}

let counter = 0;

/**
 * A dataset name no other test uses.
 * @param {string} prefix
 * @returns {string}
 */
export function uniqueName(prefix) {
  counter += 1;
  return `${prefix}_${process.pid}_${counter}`;
}

/**
 * Parameters of a `fixture.wait` run.
 * @param {number} seconds
 * @param {string} output
 */
export function waitRun(seconds, output) {
  return { analysis: "fixture.wait", inputs: {}, params: { seconds }, output, overwrite: true };
}

/**
 * Checks a sequence of progress events of one call: one begin first, reports with
 * fractions in [0, 1] that never decrease, one end last with the given outcome.
 * @param {import("../mobilis.js").ProgressEvent[]} events
 * @param {string} callId
 * @param {"done" | "failed" | "cancelled"} outcome
 * @returns {import("../mobilis.js").ProgressReport[]} The reports.
 */
export function checkProgressEvents(events, callId, outcome) {
  const shown = JSON.stringify(events);
  assert.ok(events.length >= 2, `expected at least begin and end: ${shown}`);
  assert.equal(events[0].kind, "begin", shown);
  assert.equal(typeof (/** @type {any} */ (events[0]).title), "string", shown);
  const last = events[events.length - 1];
  assert.equal(last.kind, "end", shown);
  assert.equal(/** @type {any} */ (last).outcome, outcome, shown);
  const reports = events.slice(1, -1);
  let previous = 0;
  for (const event of reports) {
    assert.equal(event.kind, "report", `only reports between begin and end: ${shown}`);
    const { fraction, message } = /** @type {import("../mobilis.js").ProgressReport} */ (event);
    assert.ok(fraction >= 0 && fraction <= 1, `fraction ${fraction} outside [0, 1]: ${shown}`);
    assert.ok(fraction >= previous, `fraction went down from ${previous} to ${fraction}: ${shown}`);
    assert.equal(typeof message, "string", shown);
    previous = fraction;
  }
  for (const event of events) assert.equal(event.call_id, callId, shown);
  return /** @type {import("../mobilis.js").ProgressReport[]} */ (reports);
}

/**
 * Waits for a promise, failing after `ms` with `what` in the message.
 * @template T
 * @param {Promise<T>} promise
 * @param {number} ms
 * @param {string} what
 * @returns {Promise<T>}
 */
export async function within(promise, ms, what) {
  /** @type {ReturnType<typeof setTimeout> | undefined} */
  let timer;
  const timeout = new Promise((_, reject) => {
    timer = setTimeout(() => reject(new Error(`${what} did not happen within ${ms} ms`)), ms);
  });
  try {
    return await Promise.race([promise, timeout]);
  } finally {
    clearTimeout(timer);
  }
}
