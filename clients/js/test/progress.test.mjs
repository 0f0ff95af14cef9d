// Progress and cancellation against a real daemon, with the fixture plugin's
// `fixture.wait` (reports progress every 10 ms and honours cancellation): the
// `progress.subscribe` contract itself, `run` with `onProgress` over WebSocket
// (subscription) and HTTP (polling `analysis.progress`), `runPipeline`, and cancelling with
// an AbortSignal.

import assert from "node:assert/strict";
import { test } from "node:test";
import { ERROR_CODES, MobilisError, newCallId } from "../mobilis.js";
import { TRANSPORTS, checkProgressEvents, client, uniqueName, waitRun, within } from "./helpers.mjs";

/** @typedef {import("../mobilis.js").ProgressEvent} ProgressEvent */

test("progress.subscribe sends begin, reports and end; a late subscriber gets the end", { timeout: 120_000 }, async () => {
  const c = await client("websocket");
  try {
    const callId = newCallId();
    /** @type {ProgressEvent[]} */
    const events = [];
    /** @type {() => void} */
    let ended = () => {};
    const end = new Promise((resolve) => {
      ended = () => resolve(undefined);
    });
    await c.subscribeProgress(callId, (event) => {
      events.push(event);
      if (event.kind === "end") ended();
    });
    const result = await c.call("analysis.run", { ...waitRun(1, uniqueName("subscribed")), call_id: callId });
    assert.equal(result.rows, 1);
    await within(end, 30_000, "the end event");
    const reports = checkProgressEvents(events, callId, "done");
    assert.ok(reports.length >= 1, `fixture.wait reports progress: ${JSON.stringify(events)}`);

    /** @type {ProgressEvent[]} */
    const late = [];
    const lateEnd = new Promise((resolve) => {
      c.subscribeProgress(callId, (event) => {
        late.push(event);
        if (event.kind === "end") resolve(undefined);
      });
    });
    await within(lateEnd, 10_000, "the end event for a late subscriber");
    assert.equal(late.length, 1, JSON.stringify(late));
    assert.equal(late[0].kind, "end");
    assert.equal(/** @type {any} */ (late[0]).outcome, "done");

    // Ending a subscription early (by the raw protocol: positional subscription id). The
    // pause: jsonrpsee sends the id just before it registers the subscription, so an
    // unsubscribe sent at once can find nothing (and answer false).
    const id = await c.call("progress.subscribe", { call_id: newCallId() });
    await new Promise((resolve) => setTimeout(resolve, 100));
    assert.equal(await c.call("progress.unsubscribe", [id]), true);
  } finally {
    c.close();
  }
});

for (const transport of TRANSPORTS) {
  test(`run reports begin, reports and end in order (${transport})`, { timeout: 120_000 }, async () => {
    const c = await client(transport);
    try {
      const callId = newCallId();
      /** @type {ProgressEvent[]} */
      const events = [];
      const output = uniqueName(`progress_${transport}`);
      const result = await c.run(
        { ...waitRun(1.5, output), call_id: callId },
        { onProgress: (event) => events.push(event) },
      );
      assert.equal(result.output, output);
      assert.equal(result.rows, 1);
      const reports = checkProgressEvents(events, callId, "done");
      assert.ok(reports.length >= 1, `at least one report during 1.5 s: ${JSON.stringify(events)}`);
      assert.ok(reports.some((report) => report.message === "waiting"), `the plugin's message: ${JSON.stringify(reports)}`);
    } finally {
      c.close();
    }
  });

  test(`an AbortSignal cancels a run with code 5003 and the daemon serves on (${transport})`, { timeout: 120_000 }, async () => {
    const c = await client(transport);
    try {
      const controller = new AbortController();
      /** @type {ProgressEvent[]} */
      const events = [];
      const output = uniqueName(`cancelled_${transport}`);
      const error = await c
        .run(waitRun(60, output), {
          signal: controller.signal,
          onProgress: (event) => {
            events.push(event);
            // Cancel once the plugin is inside its loop.
            if (event.kind === "report") controller.abort();
          },
        })
        .then(
          () => assert.fail("the run was not cancelled"),
          (e) => e,
        );
      assert.ok(error instanceof MobilisError, String(error));
      assert.equal(error.kind, "rpc");
      assert.equal(error.code, ERROR_CODES.cancelled);
      assert.ok(error.cancelled);
      assert.ok(error.message.includes("fixture.wait"), error.message);
      const last = events[events.length - 1];
      assert.equal(last.kind, "end", JSON.stringify(events));
      assert.equal(/** @type {any} */ (last).outcome, "cancelled");
      assert.ok(!(await c.allDatasets()).some((dataset) => dataset.name === output), "a cancelled run stores nothing");

      const short = await c.run(waitRun(0.05, uniqueName(`after_${transport}`)));
      assert.equal(short.rows, 1);
    } finally {
      c.close();
    }
  });

  test(`a run aborted before it starts is cancelled without a call (${transport})`, async () => {
    const c = await client(transport);
    try {
      const output = uniqueName(`never_${transport}`);
      await assert.rejects(
        c.run(waitRun(0.05, output), { signal: AbortSignal.abort() }),
        (e) => e instanceof MobilisError && e.code === ERROR_CODES.cancelled,
      );
      assert.ok(!(await c.allDatasets()).some((dataset) => dataset.name === output));
    } finally {
      c.close();
    }
  });

  test(`runPipeline reports progress and can be cancelled (${transport})`, { timeout: 120_000 }, async () => {
    const c = await client(transport);
    try {
      const callId = newCallId();
      /** @type {ProgressEvent[]} */
      const events = [];
      const result = await c.runPipeline(
        [waitRun(0.5, uniqueName("step_one")), waitRun(0.5, uniqueName("step_two"))],
        { callId, onProgress: (event) => events.push(event) },
      );
      assert.equal(result.steps.length, 2, JSON.stringify(result));
      checkProgressEvents(events, callId, "done");

      const controller = new AbortController();
      const error = await c
        .runPipeline([waitRun(60, uniqueName("long_step"))], {
          signal: controller.signal,
          // Cancelling before the daemon knows the call is repeated until it does.
          onProgress: (event) => {
            if (event.kind === "begin") setTimeout(() => controller.abort(), 300);
          },
        })
        .then(
          () => assert.fail("the pipeline was not cancelled"),
          (e) => e,
        );
      assert.ok(error instanceof MobilisError, String(error));
      assert.equal(error.code, ERROR_CODES.cancelled, error.message);
    } finally {
      c.close();
    }
  });
}
