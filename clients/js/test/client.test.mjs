// The client against a real daemon: calls over both transports, inline tables, errors,
// transport failures, closing, and where the token goes.

import assert from "node:assert/strict";
import http from "node:http";
import { test } from "node:test";
import { ERROR_CODES, MobilisError, connect, newCallId } from "../mobilis.js";
import { TRANSPORTS, client, daemonUrl, uniqueName, waitRun, within } from "./helpers.mjs";

test("server.info gives the same answer over WebSocket and HTTP", async () => {
  const ws = await client("websocket");
  const web = await client("http");
  try {
    assert.equal(ws.transport, "websocket");
    assert.equal(web.transport, "http");
    const [overWs, overHttp] = await Promise.all([ws.info(), web.info()]);
    assert.equal(overWs.name, "mobilisd");
    assert.deepEqual(overWs, overHttp);
    assert.ok(
      overWs.plugins.some((plugin) => plugin.name === "fixture"),
      `the test daemon loads the fixture plugin: ${JSON.stringify(overWs.plugins)}`,
    );
  } finally {
    ws.close();
    web.close();
  }
});

for (const transport of TRANSPORTS) {
  test(`an inline table is stored and read back (${transport})`, async () => {
    const c = await client(transport);
    try {
      const name = uniqueName(`inline_${transport}`);
      const columns = { sample: ["a", "b", "c"], temperature_K: [77, 150.5, 300], note: [null, "x", "y"] };
      const stored = await c.importDataset({ name, columns });
      assert.equal(stored.name, name);
      assert.equal(stored.rows, 3);
      assert.deepEqual(
        stored.columns.map((column) => column.name),
        ["sample", "temperature_K", "note"],
      );
      const page = await c.rows(name);
      assert.equal(page.total_rows, 3);
      assert.deepEqual(page.columns, columns);
      const second = await c.rows(name, { offset: 1, limit: 1 });
      assert.deepEqual(second.columns.temperature_K, [150.5]);
      const listed = await c.allDatasets();
      assert.ok(listed.some((dataset) => dataset.name === name && dataset.rows === 3));
      const onePage = await c.listDatasets({ prefix: name, limit: 1 });
      assert.equal(onePage.total, 1);
      assert.deepEqual(onePage.datasets, [{ name, rows: 3, column_count: 3 }]);
    } finally {
      c.close();
    }
  });

  test(`an unknown dataset is a MobilisError with code and help (${transport})`, async () => {
    const c = await client(transport);
    try {
      const error = await c.rows("no_such_dataset_here").then(
        () => assert.fail("dataset.rows of an unknown dataset succeeded"),
        (e) => e,
      );
      assert.ok(error instanceof MobilisError, String(error));
      assert.equal(error.kind, "rpc");
      assert.equal(error.code, ERROR_CODES.unknownDataset);
      assert.equal(error.data?.kind, "unknown_dataset");
      assert.equal(error.method, "dataset.rows");
      assert.ok(error.help && error.help.length > 0, `a help line: ${JSON.stringify(error.data)}`);
      assert.ok(error.message.includes("no_such_dataset_here"), error.message);
      assert.ok(error.message.includes(error.help), `the message includes the help: ${error.message}`);
      const described = await c.describe("fixture.wait");
      assert.equal(described.name, "fixture.wait");
      assert.ok(described.outputs.some((column) => column.name === "waited_s"));
    } finally {
      c.close();
    }
  });
}

/** An address where nothing listens (a port just freed). */
async function deadAddress() {
  const server = http.createServer();
  await new Promise((resolve) => server.listen(0, "127.0.0.1", () => resolve(undefined)));
  const { port } = /** @type {import("node:net").AddressInfo} */ (server.address());
  await new Promise((resolve) => server.close(() => resolve(undefined)));
  return `http://127.0.0.1:${port}`;
}

test("an unreachable daemon is a transport error", async () => {
  const url = await deadAddress();
  const refused = await connect(url, { transport: "websocket" }).then(
    () => assert.fail("connected to a closed port"),
    (e) => e,
  );
  assert.ok(refused instanceof MobilisError, String(refused));
  assert.equal(refused.kind, "transport");
  assert.equal(refused.code, ERROR_CODES.transport);
  const web = await connect(url, { transport: "http" });
  const failed = await web.info().then(
    () => assert.fail("called a closed port"),
    (e) => e,
  );
  assert.ok(failed instanceof MobilisError, String(failed));
  assert.equal(failed.kind, "transport");
  assert.equal(failed.code, ERROR_CODES.transport);
});

test("closing the WebSocket client rejects pending calls; the daemon serves on", async () => {
  const c = await client("websocket");
  const callId = newCallId();
  const running = c.call("analysis.run", { ...waitRun(60, uniqueName("closed")), call_id: callId });
  // Wait until the daemon runs the call, so that closing is what ends it for the client.
  const other = await client("http");
  try {
    await within(
      (async () => {
        while (!(await other.progress(callId)).running) await new Promise((r) => setTimeout(r, 20));
      })(),
      30_000,
      "the call starting",
    );
    c.close();
    const error = await running.then(
      () => assert.fail("the call succeeded after close"),
      (e) => e,
    );
    assert.ok(error instanceof MobilisError, String(error));
    assert.equal(error.kind, "transport");
    await assert.rejects(c.info(), (e) => e instanceof MobilisError && e.kind === "transport");
    // The daemon goes on running the call until told to stop.
    await other.cancel(callId);
    assert.equal((await other.info()).name, "mobilisd");
  } finally {
    other.close();
  }
});

test("the token goes in the Authorization header over HTTP and WebSocket", async () => {
  /** @type {(string | undefined)[]} */
  const seen = [];
  const server = http.createServer((request, response) => {
    seen.push(request.headers.authorization);
    request.resume();
    request.on("end", () => {
      response.setHeader("content-type", "application/json");
      response.end(JSON.stringify({ jsonrpc: "2.0", id: 1, result: { name: "stand-in" } }));
    });
  });
  server.on("upgrade", (request, socket) => {
    seen.push(request.headers.authorization);
    socket.destroy();
  });
  await new Promise((resolve) => server.listen(0, "127.0.0.1", () => resolve(undefined)));
  const { port } = /** @type {import("node:net").AddressInfo} */ (server.address());
  try {
    const web = await connect(`http://127.0.0.1:${port}`, { transport: "http", token: "s3cret" });
    assert.deepEqual(await web.call("server.info"), { name: "stand-in" });
    await assert.rejects(
      connect(`ws://127.0.0.1:${port}`, { transport: "websocket", token: "s3cret" }),
      (e) => e instanceof MobilisError && e.kind === "transport",
    );
    assert.deepEqual(seen, ["Bearer s3cret", "Bearer s3cret"]);
  } finally {
    server.closeAllConnections();
    await new Promise((resolve) => server.close(() => resolve(undefined)));
  }
});

test("the daemon address is checked", async () => {
  await assert.rejects(connect("127.0.0.1:8470"), /must start with http/);
  assert.ok(daemonUrl().startsWith("http"));
});
