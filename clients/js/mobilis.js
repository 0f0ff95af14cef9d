// @ts-check
/**
 * JavaScript client of the mobilis daemon (`mobilisd`): JSON-RPC 2.0 over WebSocket or
 * HTTP, with progress and cancellation of analyses. One ES module without dependencies; it
 * runs unchanged in browsers, in Deno and in Node (20 or later).
 *
 * ```js
 * import { connect } from "./mobilis.js";
 * const client = await connect("http://127.0.0.1:8470");
 * const result = await client.run(
 *   { analysis: "hall.reduce", inputs: { readings: "run17" }, output: "run17-hall", group_by: "sample" },
 *   { onProgress: (event) => console.log(event), signal: AbortSignal.timeout(60_000) },
 * );
 * client.close();
 * ```
 *
 * Transports. `websocket` (the default where a WebSocket constructor exists) keeps one
 * connection, routes answers by request id and subscription notifications by subscription
 * id, and rejects every pending call when the connection closes. `http` sends each call as
 * one POST with the global `fetch`. Node 20 has a global WebSocket only with
 * `--experimental-websocket` (Node 22 has it always); a constructor may also be passed as
 * `options.WebSocket`.
 *
 * Tokens. A daemon listening beyond loopback requires `Authorization: Bearer <token>`.
 * Over HTTP the client sends that header. The daemon accepts the token in no other way (no
 * query parameter, no subprotocol), and the browser WebSocket API cannot set headers, so
 * over WebSocket the token works only where the constructor takes a non-standard
 * `{headers}` option: Node's built-in WebSocket does, Deno's only in recent versions. A
 * browser page (always of another origin than the daemon, which must be started with
 * `--allow-origin <page origin>`) uses either transport without a token, and `transport:
 * "http"` with one: the daemon answers the page's CORS preflight and names the origin in its
 * answers.
 *
 * @module mobilis
 */

/** Default address of a local daemon. */
export const DEFAULT_URL = "http://127.0.0.1:8470";

/**
 * Error codes: those of the daemon (listed in `protocol/src/errors.rs` and in each method of `rpc.discover`) and `transport`, this
 * client's code for a daemon that could not be reached or a connection that broke.
 */
export const ERROR_CODES = Object.freeze({
  transport: -1,
  methodNotFound: -32601,
  invalidParams: 4001,
  unknownDataset: 4002,
  unknownAnalysis: 4003,
  columnProblem: 4004,
  datasetExists: 4005,
  pathRefused: 4006,
  invalidData: 4007,
  fileProblem: 4008,
  resourceLimit: 4009,
  pluginFailure: 5001,
  numericalFailure: 5002,
  cancelled: 5003,
  storageFailure: 5004,
  deadlineExceeded: 5005,
});

/** How often the HTTP transport polls `analysis.progress` while a call runs, ms. */
export const POLL_INTERVAL_MS = 200;

/** How long a finished call waits for the daemon's `end` progress event, ms. */
const END_EVENT_GRACE_MS = 1000;

/** How often a cancellation is repeated while the daemon does not yet know the call, ms. */
const CANCEL_RETRY_MS = 50;

/** How long to wait before repeating an unsubscribe that found no subscription, ms. */
const UNSUBSCRIBE_RETRY_MS = 50;

// ---------------------------------------------------------------------------------------
// Types
// ---------------------------------------------------------------------------------------

/**
 * @typedef {"websocket" | "http"} TransportName
 */

/**
 * Options of {@link connect}.
 * @typedef {object} ConnectOptions
 * @property {string} [token] Bearer token of a daemon started with `--token`.
 * @property {TransportName} [transport] Default: `websocket` when a WebSocket constructor
 *   is available, else `http`.
 * @property {WebSocketConstructor} [WebSocket] WebSocket constructor to use instead of
 *   `globalThis.WebSocket`.
 * @property {typeof fetch} [fetch] fetch implementation to use instead of `globalThis.fetch`.
 */

/**
 * A WebSocket constructor as browsers, Deno and Node provide it. The second argument is
 * either subprotocols or, in Node and Deno, an options object with `headers`.
 * @typedef {new (url: string, protocolsOrOptions?: string | string[] | {headers: Record<string, string>}) => WebSocket} WebSocketConstructor
 */

/** @typedef {"rpc" | "transport"} ErrorKind */

/**
 * `data` of a daemon error: `kind` names the error (for example `unknown_dataset`), `help`
 * says what to do.
 * @typedef {{kind?: string, help?: string, [key: string]: unknown}} ErrorData
 */

/**
 * Parameters of `analysis.run`.
 * @typedef {object} RunParams
 * @property {string} analysis Analysis name, for example `hall.reduce`.
 * @property {Record<string, string>} inputs `{role: dataset}`.
 * @property {Record<string, unknown>} [params] The analysis's parameters (see `describe`).
 * @property {string} output Name of the dataset that stores the output table.
 * @property {string | string[]} [group_by] Column(s) of the first input to group by.
 * @property {Record<string, number>} [group_tolerance] Per numeric `group_by` column, the
 *   widest gap between sorted values within one group (`{temperature_K: 0.5}` for a logged
 *   temperature); other columns group by exact values.
 * @property {boolean} [overwrite] Replace an existing output dataset.
 * @property {string} [call_id] Id for cancellation and progress; generated when missing.
 * @property {string} [summary_output] Also store the summary as a dataset.
 */

/**
 * A column of a stored dataset.
 * @typedef {{name: string, dtype: string, [key: string]: unknown}} ColumnInfo
 */

/**
 * Result of `analysis.run`.
 * @typedef {object} RunResult
 * @property {string} output
 * @property {number} rows
 * @property {ColumnInfo[]} [columns]
 * @property {Record<string, unknown>} summary With `group_by`: `{groups: [...]}`.
 * @property {string[]} warnings
 * @property {string} [summary_output]
 * @property {number} [summary_rows]
 */

/**
 * Result of `pipeline.run`.
 * @typedef {{steps: RunResult[], [key: string]: unknown}} PipelineResult
 */

/**
 * Progress: the call began.
 * @typedef {{call_id: string, kind: "begin", title: string}} ProgressBegin
 */
/**
 * Progress: a report, `fraction` in [0, 1].
 * @typedef {{call_id: string, kind: "report", fraction: number, message: string}} ProgressReport
 */
/**
 * Progress: the call ended; nothing follows.
 * @typedef {{call_id: string, kind: "end", outcome: "done" | "failed" | "cancelled", message?: string}} ProgressEnd
 */
/** @typedef {ProgressBegin | ProgressReport | ProgressEnd} ProgressEvent */

/**
 * Answer of `analysis.progress`.
 * @typedef {{call_id: string, running: boolean, fraction?: number, message?: string}} ProgressState
 */

/**
 * Options of {@link MobilisClient#run} and {@link MobilisClient#runPipeline}.
 * @typedef {object} RunOptions
 * @property {(event: ProgressEvent) => void} [onProgress] Receives `begin`, then `report`s,
 *   then exactly one `end`, all before the returned promise settles.
 * @property {AbortSignal} [signal] Cancels the call (`analysis.cancel`); the promise then
 *   rejects with the daemon's cancelled error (code 5003).
 * @property {string} [callId] The call id (for `run`, `params.call_id` also does);
 *   generated when missing.
 */

/**
 * Parameters of `dataset.import`: a file inside the daemon's data roots (`path`) or an
 * inline table (`columns`).
 * @typedef {object} ImportParams
 * @property {string} name
 * @property {string} [path]
 * @property {Record<string, unknown[]>} [columns] `{column: [values]}`.
 * @property {"csv" | "parquet" | "ipc"} [format]
 * @property {Record<string, string | {unit: string, to: string}>} [units]
 * @property {boolean} [overwrite]
 */

/**
 * A stored dataset (result of `dataset.import`).
 * @typedef {{name: string, rows: number, columns: ColumnInfo[], [key: string]: unknown}} DatasetSummary
 */

/**
 * An entry of `dataset.list`: lean; `dataset.info` has the columns and provenance.
 * @typedef {{name: string, rows: number, column_count: number}} DatasetEntry
 */

/**
 * A page of `dataset.list`: `total` counts every dataset matching the prefix, over all pages.
 * @typedef {{total: number, offset: number, datasets: DatasetEntry[]}} DatasetPage
 */

/**
 * A page of `dataset.rows`: values by column, SI units, NaN as null.
 * @typedef {{total_rows: number, offset: number, columns: Record<string, unknown[]>}} RowsPage
 */

/**
 * A declared column of an analysis.
 * @typedef {{name: string, dtype: "f64" | "i64" | "str" | "bool", unit: string | null, required: boolean, description: string}} ColumnSpec
 */

/**
 * Result of `analysis.describe`.
 * @typedef {object} AnalysisDescription
 * @property {string} name
 * @property {string} summary
 * @property {string} description
 * @property {Record<string, unknown>} params JSON Schema of the parameters.
 * @property {{role: string, required: boolean, description: string, columns: ColumnSpec[]}[]} inputs
 * @property {ColumnSpec[]} outputs
 * @property {ColumnSpec[]} summary_keys
 * @property {{name: string, version: string}} [plugin]
 */

/**
 * Result of `server.info`.
 * @typedef {object} ServerInfo
 * @property {string} name
 * @property {string} version
 * @property {{major: number, minor: number}} abi
 * @property {string} workspace
 * @property {string[]} data_roots
 * @property {{name: string, version: string}[]} plugins
 * @property {unknown[]} refused_plugins
 * @property {unknown[]} damaged_files
 */

/**
 * Parameters of `plot.render`: the dataset, optionally the kind of figure, its axes and the
 * output format; further parameters as `rpc.discover` documents them.
 * @typedef {{dataset: string, kind?: string, x?: string, y?: string | string[], format?: string, [key: string]: unknown}} PlotParams
 */

/**
 * Result of `plot.render`.
 * @typedef {{kind: string, title: string, svg?: string, vega_lite?: Record<string, unknown>, [key: string]: unknown}} PlotResult
 */

/**
 * JSON-RPC params: by name or by position.
 * @typedef {Record<string, unknown> | unknown[]} Params
 */

// ---------------------------------------------------------------------------------------
// Errors
// ---------------------------------------------------------------------------------------

/**
 * A failed call. `kind` is `rpc` when the daemon answered with an error (`code` is the
 * daemon's, `data.help` says what to do, and the message includes it) and `transport`
 * when the daemon could not be reached or the connection broke (`code` is
 * `ERROR_CODES.transport`).
 */
export class MobilisError extends Error {
  /**
   * @param {string} message The message as the daemon gave it (or this client's).
   * @param {{code: number, kind?: ErrorKind, data?: ErrorData | null, method?: string, status?: number, cause?: unknown}} details
   */
  constructor(message, details) {
    const data = details.data ?? null;
    const help = typeof data?.help === "string" ? data.help : undefined;
    const kind = details.kind ?? "rpc";
    const text = kind === "rpc" ? `${message} (error ${details.code})` : message;
    super(help ? `${text}; ${help}` : text, details.cause === undefined ? undefined : { cause: details.cause });
    this.name = "MobilisError";
    /** @type {number} */
    this.code = details.code;
    /** @type {ErrorKind} */
    this.kind = kind;
    /** @type {ErrorData | null} */
    this.data = data;
    /** The daemon's message without code and help. @type {string} */
    this.rpcMessage = message;
    /** The help line of the daemon, if any. @type {string | undefined} */
    this.help = help;
    /** The method called. @type {string | undefined} */
    this.method = details.method;
    /** HTTP status when the HTTP transport got a non-200 answer. @type {number | undefined} */
    this.status = details.status;
  }

  /** True when the call was cancelled (code 5003). @returns {boolean} */
  get cancelled() {
    return this.code === ERROR_CODES.cancelled;
  }
}

/**
 * @param {string} message
 * @param {unknown} [cause]
 * @param {string} [method]
 * @returns {MobilisError}
 */
function transportError(message, cause, method) {
  return new MobilisError(message, { code: ERROR_CODES.transport, kind: "transport", cause, method });
}

/**
 * @param {unknown} error The `error` member of a JSON-RPC response.
 * @param {string} method
 * @param {number} [status]
 * @returns {MobilisError}
 */
function rpcError(error, method, status) {
  const e = /** @type {{code?: unknown, message?: unknown, data?: unknown}} */ (error ?? {});
  const data = e.data && typeof e.data === "object" ? /** @type {ErrorData} */ (e.data) : null;
  return new MobilisError(String(e.message ?? "error without a message"), {
    code: typeof e.code === "number" ? e.code : 0,
    data,
    method,
    status,
  });
}

// ---------------------------------------------------------------------------------------
// Helpers
// ---------------------------------------------------------------------------------------

let callIdCounter = 0;

/**
 * A new call id: a random UUID where `crypto.randomUUID` exists, else time, counter and
 * random digits.
 * @returns {string}
 */
export function newCallId() {
  const crypto = /** @type {{randomUUID?: () => string} | undefined} */ (globalThis.crypto);
  if (typeof crypto?.randomUUID === "function") return crypto.randomUUID();
  callIdCounter += 1;
  return `call-${Date.now().toString(36)}-${callIdCounter}-${Math.random().toString(36).slice(2, 10)}`;
}

/**
 * @param {number} ms
 * @returns {Promise<void>}
 */
function sleep(ms) {
  return new Promise((resolve) => setTimeout(resolve, ms));
}

/**
 * Runs a user callback; an exception in it is rethrown outside the client (as an uncaught
 * error) so that it is seen but cannot break the client's bookkeeping.
 * @template T
 * @param {(value: T) => void} handler
 * @param {T} value
 */
function deliver(handler, value) {
  try {
    handler(value);
  } catch (error) {
    setTimeout(() => {
      throw error;
    }, 0);
  }
}

/**
 * The `http(s)://` and `ws(s)://` forms of a daemon address.
 * @param {string} url
 * @returns {{http: string, ws: string}}
 */
export function daemonUrls(url) {
  const trimmed = url.trim();
  const match = /^(https?|wss?):\/\/(.*)$/i.exec(trimmed);
  if (!match) throw transportError(`the daemon address must start with http://, https://, ws:// or wss://: ${url}`);
  const scheme = match[1].toLowerCase();
  const secure = scheme === "https" || scheme === "wss";
  return {
    http: `${secure ? "https" : "http"}://${match[2]}`,
    ws: `${secure ? "wss" : "ws"}://${match[2]}`,
  };
}

/**
 * @param {unknown} data A WebSocket message's data.
 * @returns {string | null}
 */
function messageText(data) {
  if (typeof data === "string") return data;
  if (data instanceof ArrayBuffer) return new TextDecoder().decode(data);
  if (ArrayBuffer.isView(data)) return new TextDecoder().decode(data);
  return null;
}

// ---------------------------------------------------------------------------------------
// Transports
// ---------------------------------------------------------------------------------------

/** JSON-RPC over HTTP: one POST per call. */
class HttpTransport {
  /**
   * @param {string} url
   * @param {string | undefined} token
   * @param {typeof fetch} fetchImpl
   */
  constructor(url, token, fetchImpl) {
    this.url = url;
    this.token = token;
    this.fetch = fetchImpl;
    this.nextId = 1;
    this.closed = false;
  }

  /**
   * @param {string} method
   * @param {Params} [params]
   * @returns {Promise<any>}
   */
  async request(method, params) {
    if (this.closed) throw transportError(`the client is closed; cannot call ${method}`, undefined, method);
    /** @type {Record<string, unknown>} */
    const message = { jsonrpc: "2.0", id: this.nextId++, method };
    if (params !== undefined) message.params = params;
    /** @type {Record<string, string>} */
    const headers = { "Content-Type": "application/json" };
    if (this.token) headers.Authorization = `Bearer ${this.token}`;
    /** @type {Response} */
    let response;
    try {
      response = await this.fetch(this.url, { method: "POST", headers, body: JSON.stringify(message) });
    } catch (cause) {
      const hint =
        typeof document !== "undefined"
          ? " (from a browser page: was the daemon started with --allow-origin naming this page's origin?)"
          : "";
      throw transportError(`cannot reach the daemon at ${this.url}${hint}: ${String(cause)}`, cause, method);
    }
    const text = await response.text().catch(() => "");
    /** @type {any} */
    let body;
    try {
      body = JSON.parse(text);
    } catch (cause) {
      throw transportError(
        `the daemon at ${this.url} answered ${method} with HTTP ${response.status} and no JSON: ${text.slice(0, 200)}`,
        cause,
        method,
      );
    }
    if (body && typeof body === "object" && "error" in body) throw rpcError(body.error, method, response.status);
    if (!response.ok || !body || typeof body !== "object" || !("result" in body)) {
      throw transportError(`unexpected answer to ${method} (HTTP ${response.status}): ${text.slice(0, 200)}`, undefined, method);
    }
    return body.result;
  }

  close() {
    this.closed = true;
  }
}

/**
 * @typedef {{resolve: (value: any) => void, reject: (error: MobilisError) => void, method: string, onResult?: (result: any) => void}} Pending
 */

/** How many notifications of not-yet-known subscriptions are kept. */
const MAX_EARLY_NOTIFICATIONS = 256;

/** JSON-RPC over one WebSocket: answers by id, notifications by subscription id. */
class WebSocketTransport {
  /**
   * Opens the connection.
   * @param {string} url
   * @param {string | undefined} token
   * @param {WebSocketConstructor} WebSocketImpl
   * @returns {Promise<WebSocketTransport>}
   */
  static open(url, token, WebSocketImpl) {
    return new Promise((resolve, reject) => {
      /** @type {WebSocket} */
      let socket;
      try {
        socket = token
          ? new WebSocketImpl(url, { headers: { Authorization: `Bearer ${token}` } })
          : new WebSocketImpl(url);
      } catch (cause) {
        reject(
          transportError(
            token
              ? `this WebSocket cannot send the token (browsers cannot set headers on a WebSocket); use transport: "http": ${String(cause)}`
              : `cannot open a WebSocket to ${url}: ${String(cause)}`,
            cause,
          ),
        );
        return;
      }
      let settled = false;
      /** @param {string} detail */
      const fail = (detail) => {
        if (settled) return;
        settled = true;
        reject(
          transportError(
            `cannot connect to ${url} (${detail}); ` +
              "is the daemon running, and does it allow this Origin (--allow-origin) and token?",
          ),
        );
        try {
          socket.close();
        } catch {
          // Not open.
        }
      };
      socket.addEventListener("open", () => {
        if (settled) return;
        settled = true;
        resolve(new WebSocketTransport(url, socket));
      });
      // Browsers fire "error" then "close" when the handshake fails; Node 20 fires only "error".
      socket.addEventListener("error", (event) => {
        const message = /** @type {{message?: unknown}} */ (event).message;
        fail(typeof message === "string" && message ? message : "connection failed");
      });
      socket.addEventListener("close", (event) => {
        fail(`close code ${event.code}${event.reason ? `: ${event.reason}` : ""}`);
      });
    });
  }

  /**
   * @param {string} url
   * @param {WebSocket} socket An open socket.
   */
  constructor(url, socket) {
    this.url = url;
    this.socket = socket;
    this.nextId = 1;
    /** @type {Map<number, Pending>} */
    this.pending = new Map();
    /** @type {Map<unknown, (result: unknown, id: unknown) => void>} */
    this.subscriptions = new Map();
    /** @type {Map<unknown, unknown[]>} Notifications that came before their subscription was known. */
    this.early = new Map();
    this.earlyCount = 0;
    /** @type {string | null} Why the connection is closed, once it is. */
    this.closedReason = null;
    socket.addEventListener("message", (event) => this.onMessage(event.data));
    socket.addEventListener("close", (event) =>
      this.onClose(`the connection to ${url} closed (code ${event.code}${event.reason ? `: ${event.reason}` : ""})`),
    );
    socket.addEventListener("error", (event) => {
      const message = /** @type {{message?: unknown}} */ (event).message;
      this.onClose(`the connection to ${url} failed${typeof message === "string" && message ? `: ${message}` : ""}`);
    });
  }

  /**
   * @param {unknown} data
   */
  onMessage(data) {
    const text = messageText(data);
    if (text === null) return;
    /** @type {any} */
    let message;
    try {
      message = JSON.parse(text);
    } catch {
      return;
    }
    for (const item of Array.isArray(message) ? message : [message]) this.dispatch(item);
  }

  /**
   * @param {any} message
   */
  dispatch(message) {
    if (!message || typeof message !== "object") return;
    if ("id" in message && message.id !== null && ("result" in message || "error" in message)) {
      const pending = this.pending.get(message.id);
      if (!pending) return;
      this.pending.delete(message.id);
      if ("error" in message) {
        pending.reject(rpcError(message.error, pending.method));
      } else {
        // Registers a subscription before any later message is read.
        pending.onResult?.(message.result);
        pending.resolve(message.result);
      }
      return;
    }
    if (typeof message.method === "string" && message.params && typeof message.params === "object") {
      const { subscription, result } = message.params;
      const handler = this.subscriptions.get(subscription);
      if (handler) {
        handler(result, subscription);
      } else if (subscription !== undefined && this.earlyCount < MAX_EARLY_NOTIFICATIONS) {
        const list = this.early.get(subscription) ?? [];
        list.push(result);
        this.early.set(subscription, list);
        this.earlyCount += 1;
      }
    }
  }

  /**
   * @param {string} reason
   */
  onClose(reason) {
    if (this.closedReason !== null) return;
    this.closedReason = reason;
    const pending = [...this.pending.values()];
    this.pending.clear();
    this.subscriptions.clear();
    this.early.clear();
    for (const call of pending) call.reject(transportError(`${reason}; ${call.method} got no answer`, undefined, call.method));
  }

  /**
   * @param {string} method
   * @param {Params} [params]
   * @param {(result: any) => void} [onResult] Runs synchronously when the answer arrives.
   * @returns {Promise<any>}
   */
  request(method, params, onResult) {
    if (this.closedReason !== null) {
      return Promise.reject(transportError(`${this.closedReason}; cannot call ${method}`, undefined, method));
    }
    const id = this.nextId++;
    /** @type {Record<string, unknown>} */
    const message = { jsonrpc: "2.0", id, method };
    if (params !== undefined) message.params = params;
    return new Promise((resolve, reject) => {
      this.pending.set(id, { resolve, reject, method, onResult });
      try {
        this.socket.send(JSON.stringify(message));
      } catch (cause) {
        this.pending.delete(id);
        reject(transportError(`cannot send ${method} to ${this.url}: ${String(cause)}`, cause, method));
      }
    });
  }

  /**
   * Calls a subscribing method; `handler` receives each notification's `result` from the
   * moment the answer (the subscription id) arrives.
   * @param {string} method
   * @param {Params} params
   * @param {(result: unknown, id: unknown) => void} handler Also gets the subscription id.
   * @returns {Promise<unknown>} The subscription id.
   */
  subscribe(method, params, handler) {
    return this.request(method, params, (id) => {
      this.subscriptions.set(id, handler);
      const early = this.early.get(id);
      if (early) {
        this.early.delete(id);
        this.earlyCount -= early.length;
        for (const result of early) handler(result, id);
      }
    });
  }

  /**
   * Stops routing notifications of a subscription (the daemon is not told).
   * @param {unknown} id
   */
  forget(id) {
    this.subscriptions.delete(id);
  }

  close() {
    this.onClose(`the client closed the connection to ${this.url}`);
    try {
      this.socket.close(1000, "client closed");
    } catch {
      // Already closing.
    }
  }
}

// ---------------------------------------------------------------------------------------
// Progress tracking
// ---------------------------------------------------------------------------------------

/**
 * Delivers the progress of one call to a handler: at most one `begin`, then reports, then
 * exactly one `end`, with nothing after the end.
 */
class ProgressRelay {
  /**
   * @param {(event: ProgressEvent) => void} handler
   */
  constructor(handler) {
    this.handler = handler;
    this.begun = false;
    this.ended = false;
    /** @type {(() => void) | null} */
    this.onEnd = null;
  }

  /**
   * @param {ProgressEvent} event
   */
  push(event) {
    if (this.ended || !event || typeof event !== "object") return;
    if (event.kind === "begin") {
      if (this.begun) return;
      this.begun = true;
    }
    if (event.kind === "end") this.ended = true;
    deliver(this.handler, event);
    if (this.ended) this.onEnd?.();
  }

  /**
   * Resolves once the end was delivered, or after `ms`.
   * @param {number} ms
   * @returns {Promise<void>}
   */
  waitForEnd(ms) {
    if (this.ended) return Promise.resolve();
    return new Promise((resolve) => {
      const timer = setTimeout(resolve, ms);
      this.onEnd = () => {
        clearTimeout(timer);
        resolve();
      };
    });
  }
}

/**
 * @typedef {object} Tracker
 * @property {(outcome: ProgressEnd) => Promise<void>} finish Ends tracking after the call
 *   settled: the end event is delivered (the daemon's if it comes soon, else `outcome`).
 */

// ---------------------------------------------------------------------------------------
// The client
// ---------------------------------------------------------------------------------------

/**
 * Connects to a daemon.
 * @param {string} [url] `http://host:port` or `ws://host:port`; default {@link DEFAULT_URL}.
 * @param {ConnectOptions} [options]
 * @returns {Promise<MobilisClient>}
 */
export async function connect(url = DEFAULT_URL, options = {}) {
  const urls = daemonUrls(url);
  const WebSocketImpl = options.WebSocket ?? /** @type {WebSocketConstructor | undefined} */ (globalThis.WebSocket);
  const transport = options.transport ?? (WebSocketImpl ? "websocket" : "http");
  if (transport === "websocket") {
    if (!WebSocketImpl) {
      throw transportError(
        "no WebSocket constructor: run Node 20 with --experimental-websocket, pass options.WebSocket, or use transport: \"http\"",
      );
    }
    return new MobilisClient(await WebSocketTransport.open(urls.ws, options.token, WebSocketImpl), urls.http);
  }
  if (transport !== "http") throw transportError(`unknown transport ${JSON.stringify(transport)}: use "websocket" or "http"`);
  const fetchImpl = options.fetch ?? globalThis.fetch;
  if (typeof fetchImpl !== "function") throw transportError("no fetch function: pass options.fetch");
  return new MobilisClient(new HttpTransport(urls.http, options.token, fetchImpl.bind(globalThis)), urls.http);
}

/** A connection to a daemon; made by {@link connect}. */
export class MobilisClient {
  /**
   * @param {HttpTransport | WebSocketTransport} transport
   * @param {string} url
   */
  constructor(transport, url) {
    /** @private */
    this.link = transport;
    /** The daemon's address (`http://...`). @type {string} */
    this.url = url;
    /** @type {TransportName} */
    this.transport = transport instanceof WebSocketTransport ? "websocket" : "http";
  }

  /**
   * Calls any method.
   * @param {string} method
   * @param {Params} [params] By-name parameters (or positional ones where a method takes them).
   * @returns {Promise<any>} The result; rejects with a {@link MobilisError}.
   */
  call(method, params) {
    return this.link.request(method, params);
  }

  /**
   * Closes the connection; pending calls reject with a transport error.
   * @returns {void}
   */
  close() {
    this.link.close();
  }

  // ----- progress and cancellation -----

  /**
   * Asks the daemon to stop a running call (`analysis.cancel`).
   * @param {string} callId
   * @returns {Promise<{call_id: string, cancelled: boolean, reason?: string}>} `cancelled`
   *   is false when no call of that id is running.
   */
  cancel(callId) {
    return this.call("analysis.cancel", { call_id: callId });
  }

  /**
   * The progress last reported by a running call (`analysis.progress`).
   * @param {string} callId
   * @returns {Promise<ProgressState>}
   */
  progress(callId) {
    return this.call("analysis.progress", { call_id: callId });
  }

  /**
   * Subscribes to the progress events of a call (WebSocket transport only): `begin`,
   * `report`s, then `end`, after which the subscription is finished. Subscribing to a call
   * that ended recently yields its end event at once.
   * @param {string} callId
   * @param {(event: ProgressEvent) => void} handler
   * @returns {Promise<() => Promise<void>>} Unsubscribes (a no-op after the end event).
   */
  async subscribeProgress(callId, handler) {
    const link = this.link;
    if (!(link instanceof WebSocketTransport)) {
      throw transportError(
        "progress subscriptions need the WebSocket transport; over HTTP, run() and runPipeline() poll analysis.progress",
        undefined,
        "progress.subscribe",
      );
    }
    let finished = false;
    const id = await link.subscribe("progress.subscribe", { call_id: callId }, (result, subscription) => {
      if (finished) return;
      const event = /** @type {ProgressEvent} */ (result);
      if (event && typeof event === "object" && event.kind === "end") {
        finished = true;
        link.forget(subscription);
      }
      deliver(handler, event);
    });
    return async () => {
      if (finished) return;
      finished = true;
      link.forget(id);
      try {
        // jsonrpsee sends the subscription id a moment before it registers the subscription,
        // so an unsubscribe right after subscribing can find nothing: then try once more.
        if ((await link.request("progress.unsubscribe", [id])) === false) {
          await sleep(UNSUBSCRIBE_RETRY_MS);
          await link.request("progress.unsubscribe", [id]);
        }
      } catch (error) {
        if (!(error instanceof MobilisError && error.kind === "transport")) throw error;
      }
    };
  }

  /**
   * Runs an analysis (`analysis.run`), with progress and cancellation.
   * @param {RunParams} params
   * @param {RunOptions} [options]
   * @returns {Promise<RunResult>}
   */
  run(params, options = {}) {
    const callId = params.call_id ?? options.callId ?? newCallId();
    return this.tracked("analysis.run", { ...params, call_id: callId }, callId, params.analysis, options);
  }

  /**
   * Runs `analysis.run` steps in order (`pipeline.run`), with progress and cancellation.
   * @param {RunParams[]} steps
   * @param {RunOptions} [options]
   * @returns {Promise<PipelineResult>}
   */
  runPipeline(steps, options = {}) {
    const callId = options.callId ?? newCallId();
    return this.tracked("pipeline.run", { steps, call_id: callId }, callId, "pipeline.run", options);
  }

  /**
   * @private
   * @param {string} method
   * @param {Record<string, unknown>} params
   * @param {string} callId
   * @param {string} title
   * @param {RunOptions} options
   * @returns {Promise<any>}
   */
  async tracked(method, params, callId, title, options) {
    const { onProgress, signal } = options;
    const cancelledBeforeStart = () =>
      new MobilisError(`${title}: cancelled before it was sent`, {
        code: ERROR_CODES.cancelled,
        data: { kind: "cancelled" },
        method,
      });
    if (signal?.aborted) throw cancelledBeforeStart();
    const tracker = onProgress ? await this.track(callId, title, onProgress) : null;
    if (signal?.aborted) {
      await tracker?.finish({ call_id: callId, kind: "end", outcome: "cancelled" });
      throw cancelledBeforeStart();
    }
    let settled = false;
    const onAbort = () => {
      this.cancelUntilSettled(callId, () => settled);
    };
    signal?.addEventListener("abort", onAbort, { once: true });
    try {
      const result = await this.call(method, params);
      settled = true;
      await tracker?.finish({ call_id: callId, kind: "end", outcome: "done" });
      return result;
    } catch (error) {
      settled = true;
      const cancelled = error instanceof MobilisError && error.code === ERROR_CODES.cancelled;
      const message = error instanceof MobilisError ? error.rpcMessage : String(error);
      await tracker?.finish({ call_id: callId, kind: "end", outcome: cancelled ? "cancelled" : "failed", message });
      throw error;
    } finally {
      signal?.removeEventListener("abort", onAbort);
    }
  }

  /**
   * Cancels a call, repeating while the daemon does not know it yet (a call is known once
   * its inputs are checked) until it settles.
   * @private
   * @param {string} callId
   * @param {() => boolean} settled
   * @returns {Promise<void>}
   */
  async cancelUntilSettled(callId, settled) {
    while (!settled()) {
      try {
        const answer = await this.cancel(callId);
        if (answer?.cancelled) return;
      } catch {
        return;
      }
      await sleep(CANCEL_RETRY_MS);
    }
  }

  /**
   * Starts delivering a call's progress: by subscription over WebSocket (falling back to
   * polling when the daemon has no `progress.subscribe`), by polling over HTTP.
   * @private
   * @param {string} callId
   * @param {string} title
   * @param {(event: ProgressEvent) => void} handler
   * @returns {Promise<Tracker>}
   */
  async track(callId, title, handler) {
    const relay = new ProgressRelay(handler);
    if (this.link instanceof WebSocketTransport) {
      try {
        const unsubscribe = await this.subscribeProgress(callId, (event) => relay.push(event));
        return {
          finish: async (outcome) => {
            await relay.waitForEnd(END_EVENT_GRACE_MS);
            await unsubscribe().catch(() => {});
            relay.push(outcome);
          },
        };
      } catch (error) {
        if (!(error instanceof MobilisError && error.code === ERROR_CODES.methodNotFound)) throw error;
      }
    }
    return this.poll(callId, title, relay);
  }

  /**
   * Polls `analysis.progress` every {@link POLL_INTERVAL_MS} and turns the answers into events.
   * @private
   * @param {string} callId
   * @param {string} title
   * @param {ProgressRelay} relay
   * @returns {Tracker}
   */
  poll(callId, title, relay) {
    relay.push({ call_id: callId, kind: "begin", title });
    let stopped = false;
    /** @type {(() => void) | null} */
    let wake = null;
    /** @type {{fraction?: number, message?: string}} */
    let last = {};
    const loop = (async () => {
      while (!stopped) {
        await new Promise((resolve) => {
          const timer = setTimeout(resolve, POLL_INTERVAL_MS);
          wake = () => {
            clearTimeout(timer);
            resolve(undefined);
          };
        });
        if (stopped) break;
        try {
          const state = await this.progress(callId);
          if (!stopped && state.running && typeof state.fraction === "number") {
            if (state.fraction !== last.fraction || state.message !== last.message) {
              last = { fraction: state.fraction, message: state.message };
              relay.push({ call_id: callId, kind: "report", fraction: state.fraction, message: state.message ?? "" });
            }
          }
        } catch {
          // A failed poll is skipped; the call itself reports what went wrong.
        }
      }
    })();
    return {
      finish: async (outcome) => {
        stopped = true;
        /** @type {(() => void) | null} */ (wake)?.();
        await loop;
        relay.push(outcome);
      },
    };
  }

  // ----- thin typed wrappers -----

  /**
   * `server.info`: name, version, ABI, workspace, data roots, plugins.
   * @returns {Promise<ServerInfo>}
   */
  info() {
    return this.call("server.info");
  }

  /**
   * `rpc.discover`: the OpenRPC document of every method and analysis.
   * @returns {Promise<Record<string, any>>}
   */
  discover() {
    return this.call("rpc.discover");
  }

  /**
   * `analysis.describe`: an analysis's parameters, inputs, outputs and summary keys.
   * @param {string} analysis
   * @returns {Promise<AnalysisDescription>}
   */
  describe(analysis) {
    return this.call("analysis.describe", { analysis });
  }

  /**
   * `dataset.import`: a file inside the data roots or an inline table.
   * @param {ImportParams} params
   * @returns {Promise<DatasetSummary>}
   */
  importDataset(params) {
    return this.call("dataset.import", { ...params });
  }

  /**
   * `dataset.list`: one page of the stored datasets, in name order (at most 5000 a page).
   * @param {{offset?: number, limit?: number, prefix?: string}} [page]
   * @returns {Promise<DatasetPage>}
   */
  listDatasets(page = {}) {
    return this.call("dataset.list", { ...page });
  }

  /**
   * Every stored dataset (optionally those whose name starts with `prefix`), walking the
   * pages of `dataset.list` until `total` is reached.
   * @param {{prefix?: string, pageSize?: number}} [options]
   * @returns {Promise<DatasetEntry[]>}
   */
  async allDatasets({ prefix, pageSize = 1000 } = {}) {
    /** @type {DatasetEntry[]} */
    const all = [];
    for (;;) {
      /** @type {{offset: number, limit: number, prefix?: string}} */
      const page = { offset: all.length, limit: pageSize };
      if (prefix !== undefined) page.prefix = prefix;
      const answer = await this.listDatasets(page);
      all.push(...answer.datasets);
      // A dataset dropped meanwhile can make a page short; an empty page ends the walk.
      if (answer.datasets.length === 0 || all.length >= answer.total) return all;
    }
  }

  /**
   * `dataset.rows`: a page of rows as `{columns: {name: [values]}}`.
   * @param {string} name
   * @param {{offset?: number, limit?: number}} [page]
   * @returns {Promise<RowsPage>}
   */
  rows(name, page = {}) {
    return this.call("dataset.rows", { name, ...page });
  }

  /**
   * `plot.render`: a figure of a dataset.
   * @param {PlotParams} params
   * @returns {Promise<PlotResult>}
   */
  plot(params) {
    return this.call("plot.render", { ...params });
  }
}
