/**
 * Runs the real worker on workerd (Miniflare, the simulator inside wrangler) with the bindings of
 * wrangler.toml: real local KV, D1 (migrations from worker/migrations applied), Queues, with both
 * consumers, and Durable Objects (SQLite-backed, persisted beside KV and D1 when `persistDir` is set). Nothing is faked: tests talk HTTP to the worker and read KV/D1 through
 * Miniflare's own binding proxies.
 *
 * The worker is bundled once per test run with esbuild, as wrangler would bundle it
 * (worker/test/global-setup.ts).
 */
import { randomBytes } from "node:crypto";
import { dirname, join, resolve } from "node:path";
import type { Readable } from "node:stream";
import { fileURLToPath } from "node:url";
import { stripVTControlCharacters } from "node:util";
import { Log, LogLevel, Miniflare } from "miniflare";
import { inject } from "vitest";
import type { HistoryFootprint, HistoryResult } from "../src/history/contract";
import { d1RelayWorker, relayedD1 } from "./d1-relay";
import { UNUSUAL_PAYMENT } from "./fixtures";
import { type PreparedMigration, type PreparedWorker, prepareWorker } from "./worker-build";

export const repoRoot = resolve(dirname(fileURLToPath(import.meta.url)), "../..");

let preparedHere: Promise<PreparedWorker> | undefined;

/**
 * The bundle, wrangler.toml's Miniflare options and the migrations: from the global setup when the
 * worker project runs, else prepared in this process (a test file run on its own).
 */
export function preparedWorker(): Promise<PreparedWorker> {
  const provided = inject("isodenseWorker");
  if (provided) return Promise.resolve(provided);
  preparedHere ??= prepareWorker(repoRoot, join(repoRoot, "test-output", "worker-bundle"));
  return preparedHere;
}

/** Bearer tokens of one test run (random, never the demo ones). */
export interface TestTokens {
  flow: string;
  analyst: string;
  admin: string;
  /** A second flow user, to check per-user identities. */
  flow2: string;
}

/** Fresh random tokens. */
export function makeTokens(): TestTokens {
  const t = (role: string) => `test-${role}-${randomBytes(20).toString("hex")}`;
  return { flow: t("flow"), analyst: t("analyst"), admin: t("admin"), flow2: t("flow2") };
}

/** A log line written by the simulator (queue moves, retries) or by the worker's console. */
export interface CapturedLog {
  level: LogLevel | "stdout" | "stderr";
  message: string;
}

/** Miniflare log sink that keeps every line for assertions. */
class CapturingLog extends Log {
  constructor(private readonly lines: CapturedLog[]) {
    super(LogLevel.DEBUG);
  }
  override logWithLevel(level: LogLevel, message: string): void {
    this.lines.push({ level, message });
  }
}

/** A running worker. */
export interface RunningWorker {
  mf: Miniflare;
  tokens: TestTokens;
  logs: CapturedLog[];
  /** HTTP request to the worker (`path` like "/v1/score"). */
  fetch(path: string, init?: RequestInit & { token?: string | null }): Promise<Response>;
  /** POST JSON with a bearer token. */
  post(path: string, body: unknown, token: string | null): Promise<Response>;
  kv(): Promise<KVNamespaceLike>;
  db(): Promise<D1Like>;
  /** The account-history Durable Object of one account, for looking at what it holds. */
  history(account: string): Promise<AccountHistoryLike>;
  dispose(): Promise<void>;
}

/** The slice of the KV binding the tests use. */
export interface KVNamespaceLike {
  get(key: string, type: "text"): Promise<string | null>;
  put(key: string, value: string): Promise<void>;
  delete(key: string): Promise<void>;
}

/** The account-history Durable Object's methods, as the tests call them over RPC. */
export interface AccountHistoryLike {
  footprint(): Promise<HistoryFootprint>;
  deriveAndRecord(specKey: string, spec: unknown, records: unknown[]): Promise<HistoryResult[]>;
  erase(): Promise<HistoryFootprint>;
}

/** The slice of the D1 binding the tests use. */
export interface D1Like {
  prepare(sql: string): { bind(...values: unknown[]): D1StatementLike } & D1StatementLike;
  exec(sql: string): Promise<unknown>;
  batch(statements: D1StatementLike[]): Promise<unknown>;
}
interface D1StatementLike {
  all<T = Record<string, unknown>>(): Promise<{ results: T[] }>;
  first<T = Record<string, unknown>>(): Promise<T | null>;
  run(): Promise<unknown>;
}

/** Options of {@link startWorker}. */
export interface StartOptions {
  /** Overrides of the `[vars]` of wrangler.toml (e.g. MODEL_REFRESH_SECONDS: "0"). */
  vars?: Record<string, string>;
  /** Overrides or removals (undefined) of the credential secrets. */
  secrets?: Record<string, string | undefined>;
  /** Directory for persisted KV/D1 state (default: in memory). */
  persistDir?: string;
  /** Keep this worker's tokens (to restart on the same state). */
  tokens?: TestTokens;
  /** Skip applying migrations (when reusing persisted state). */
  skipMigrations?: boolean;
  /**
   * Fault injection: a worker script (ES module) whose exported `AccountHistoryObject` takes the
   * place of the real account-history Durable Object (one that throws, or never answers).
   */
  historyStandIn?: string;
}

/** Name of the worker that hosts a {@link StartOptions.historyStandIn}. */
const HISTORY_STAND_IN = "history-stand-in";

/** A Miniflare running the bundled worker, before anyone talks to it. */
export interface LaunchedWorker {
  mf: Miniflare;
  tokens: TestTokens;
  logs: CapturedLog[];
}

/**
 * Starts Miniflare with the bundled worker and wrangler.toml's bindings, the test's vars and
 * secrets laid over them. Shared by {@link startWorker} (HTTP into workerd) and
 * `startApp` in ./in-process.ts (the app in this process, the same bindings from this Miniflare).
 */
export async function launchMiniflare(options: StartOptions = {}): Promise<LaunchedWorker> {
  const { scriptPath, workerOptions } = await preparedWorker();
  const tokens = options.tokens ?? makeTokens();
  const secrets: Record<string, string> = {
    FLOW_CREDENTIALS: `checkout:${tokens.flow},replayer:${tokens.flow2}`,
    ANALYST_CREDENTIALS: `rosa:${tokens.analyst}`,
    ADMIN_CREDENTIALS: `ops-ana:${tokens.admin}`,
  };
  for (const [name, value] of Object.entries(options.secrets ?? {})) {
    if (value === undefined) delete secrets[name];
    else secrets[name] = value;
  }
  const logs: CapturedLog[] = [];
  const persist = options.persistDir
    ? { kvPersist: join(options.persistDir, "kv"), d1Persist: join(options.persistDir, "d1"), durableObjectsPersist: join(options.persistDir, "do") }
    : { kvPersist: false, d1Persist: false, durableObjectsPersist: false };
  const isodense = {
    ...(workerOptions as object),
    name: "isodense",
    modules: true,
    scriptPath,
    bindings: { ...((workerOptions.bindings as Record<string, string> | undefined) ?? {}), ...(options.vars ?? {}), ...secrets },
    ...(options.historyStandIn
      ? {
          durableObjects: {
            ...((workerOptions.durableObjects as Record<string, unknown> | undefined) ?? {}),
            ACCOUNT_HISTORY: { className: "AccountHistoryObject", scriptName: HISTORY_STAND_IN, useSQLite: true },
          },
        }
      : {}),
  };
  const shared = {
    cf: false,
    log: new CapturingLog(logs),
    handleRuntimeStdio(stdout: Readable, stderr: Readable) {
      stdout.on("data", (chunk: Buffer) => logs.push({ level: "stdout", message: chunk.toString() }));
      stderr.on("data", (chunk: Buffer) => logs.push({ level: "stderr", message: chunk.toString() }));
    },
    ...persist,
  };
  const compatibilityDate = (workerOptions as { compatibilityDate?: string }).compatibilityDate;
  const beside = [
    ...(options.historyStandIn ? [{ name: HISTORY_STAND_IN, modules: true, script: options.historyStandIn, compatibilityDate }] : []),
    // The tests' own D1 queries, and the in-process app's, go through it (./d1-relay.ts).
    d1RelayWorker(workerOptions.d1Databases, compatibilityDate),
  ];
  const mf = new Miniflare({ ...shared, workers: [isodense, ...beside] } as ConstructorParameters<typeof Miniflare>[0]);
  await mf.ready;
  return { mf, tokens, logs };
}

/**
 * A {@link RunningWorker} over a launched Miniflare whose requests go through `send` (workerd's
 * HTTP entry for {@link startWorker}, the app's `request()` for in-process tests), with the
 * migrations applied unless told otherwise.
 */
export async function runningWorker(
  launched: LaunchedWorker,
  send: (url: string, init: RequestInit) => Promise<Response>,
  options: Pick<StartOptions, "skipMigrations"> & { dispose?: () => Promise<void> } = {},
): Promise<RunningWorker> {
  const { mf, tokens, logs } = launched;
  const worker: RunningWorker = {
    mf,
    tokens,
    logs,
    fetch(path, init = {}) {
      const { token, ...rest } = init;
      const headers = new Headers(rest.headers as HeadersInit | undefined);
      if (token) headers.set("authorization", `Bearer ${token}`);
      return send(`http://isodense.test${path}`, { ...rest, headers });
    },
    post(path, body, token) {
      return worker.fetch(path, {
        method: "POST",
        headers: { "content-type": "application/json" },
        body: typeof body === "string" ? body : JSON.stringify(body),
        token,
      });
    },
    async kv() {
      return (await mf.getKVNamespace("MODELS")) as unknown as KVNamespaceLike;
    },
    async db() {
      return relayedD1(mf) as unknown as D1Like;
    },
    async history(account) {
      const namespace = (await mf.getDurableObjectNamespace("ACCOUNT_HISTORY", "isodense")) as unknown as {
        idFromName(name: string): unknown;
        get(id: unknown): AccountHistoryLike;
      };
      return namespace.get(namespace.idFromName(account));
    },
    dispose: options.dispose ?? (() => mf.dispose()),
  };
  if (!options.skipMigrations) await applyMigrations(await worker.db());
  return worker;
}

/**
 * Starts the bundled worker on workerd with wrangler.toml's bindings and applies the D1
 * migrations. Tests talk HTTP to it through Miniflare's `dispatchFetch`.
 *
 * @example
 * const worker = await startWorker({ vars: { MODEL_REFRESH_SECONDS: "0" } });
 */
export async function startWorker(options: StartOptions = {}): Promise<RunningWorker> {
  const launched = await launchMiniflare(options);
  return runningWorker(launched, async (url, init) => buffered((await launched.mf.dispatchFetch(url, init as never)) as unknown as Response), options);
}

/** Statuses whose answers carry no body (the Response constructor refuses one). */
const NULL_BODY_STATUSES = new Set([101, 204, 205, 304]);

/**
 * The answer with its body read to the end. A body left unread keeps its connection paused, and
 * Miniflare's `dispose()` then waits on that connection for ever (an `afterAll` that hung once a
 * test had not read a large static file); reading every body here means no test can cause that.
 */
async function buffered(response: Response): Promise<Response> {
  const body = await response.arrayBuffer();
  return new Response(NULL_BODY_STATUSES.has(response.status) ? null : body, { status: response.status, statusText: response.statusText, headers: response.headers });
}

/** Applies the migrations of worker/migrations in name order, one D1 batch per file. */
export async function applyMigrations(db: D1Like, migrations?: PreparedMigration[]): Promise<string[]> {
  const list = migrations ?? (await preparedWorker()).migrations;
  for (const migration of list) await db.batch(migration.statements.map((sql) => db.prepare(sql)));
  return list.map((m) => m.name);
}

/** Polls `check` until it returns a non-undefined value or `timeoutMs` passes. */
export async function eventually<T>(check: () => Promise<T | undefined>, timeoutMs: number, intervalMs = 200): Promise<T> {
  const deadline = Date.now() + timeoutMs;
  let last: T | undefined;
  for (;;) {
    last = await check();
    if (last !== undefined) return last;
    if (Date.now() > deadline) throw new Error(`condition not met within ${timeoutMs} ms`);
    await new Promise((r) => setTimeout(r, intervalMs));
  }
}

/**
 * Waits until the hand-off queue has delivered everything sent to it before this call: scores a
 * payment the test models flag (`transactionId` names it) and waits for its review row. The local
 * queue delivers in the order it was given messages, so a message sent earlier (a shadow score, a
 * flag that should not exist) has reached D1 by then, or was never sent. In place of a fixed sleep.
 *
 * @example
 * await queueDelivered(worker, "marker-1");
 * expect(await countRows(db, "shadow_scores", "transaction_id = 'shadow-2'")).toBe(0);
 */
export async function queueDelivered(worker: RunningWorker, transactionId: string): Promise<void> {
  const response = await worker.post("/v1/score", { transactionId, features: UNUSUAL_PAYMENT, segment: "web" }, worker.tokens.flow);
  const text = await response.text();
  if (response.status !== 200 || !text.includes('"decision":"review"')) throw new Error(`the queue marker ${transactionId} was not flagged: ${response.status} ${text}`);
  const db = await worker.db();
  await eventually(async () => ((await countRows(db, "review_items", "transaction_id = ?1", transactionId)) === 1 ? true : undefined), 30_000);
}

/**
 * Deliveries the simulator still owes a dead-letter queue, read from its log: messages moved into
 * it, plus messages it scheduled for a retry (with or without a delay), minus the messages of every
 * batch it has delivered (a batch logs `QUEUE <name> acked/total` once its handler has returned).
 * Zero means nothing waits in it, nothing is scheduled for it and no batch of it is in flight. Only
 * for a queue nothing but the simulator sends to: for one the worker sends to, see {@link queueDelivered}.
 *
 * @example
 * await eventually(async () => (deadLetterBacklog(worker.logs, "isodense-flags-dead") === 0 ? true : undefined), 30_000);
 */
export function deadLetterBacklog(logs: CapturedLog[], queue: string): number {
  let owed = 0;
  const delivered = new RegExp(`^QUEUE ${queue.replace(/[.*+?^${}()|[\]\\]/g, "\\$&")} (\\d+)/(\\d+)`);
  for (const { message } of logs) {
    if (message.includes(`to dead letter queue "${queue}"`)) owed++;
    else if (message.startsWith("Retrying message") && message.includes(`on queue "${queue}"`)) owed++;
    else {
      // The simulator colours the counts.
      const batch = delivered.exec(stripVTControlCharacters(message));
      if (batch) owed -= Number(batch[2]);
    }
  }
  return owed;
}

/** Counts rows of a table. */
export async function countRows(db: D1Like, table: string, where = "1 = 1", ...values: unknown[]): Promise<number> {
  const row = await db
    .prepare(`SELECT COUNT(*) AS n FROM ${table} WHERE ${where}`)
    .bind(...values)
    .first<{ n: number }>();
  return Number(row?.n ?? 0);
}

/**
 * Uploads an artifact over HTTP as the admin and, optionally, activates it.
 *
 * @throws when the worker refuses either step (the status and body are in the message).
 */
export async function publishModel(worker: RunningWorker, artifact: { version: string }, activate = true): Promise<void> {
  const upload = await worker.post("/v1/models", artifact, worker.tokens.admin);
  if (upload.status !== 201 && upload.status !== 200) throw new Error(`upload answered ${upload.status}: ${await upload.text()}`);
  if (!activate) return;
  const activation = await worker.post(`/v1/models/${encodeURIComponent(artifact.version)}/activate`, {}, worker.tokens.admin);
  if (activation.status !== 200) throw new Error(`activate answered ${activation.status}: ${await activation.text()}`);
}
