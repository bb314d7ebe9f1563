/**
 * In-process route tests: the worker's Hono app runs in the test's own Node process and answers
 * through `app.request()`, with real local bindings. Miniflare runs the bundled worker beside it
 * (wrangler.toml's KV, D1, Queues and Durable Objects, as in ./harness.ts) and hands its bindings
 * to the app over its binding proxy: KV reads, D1 queries, queue sends and Durable Object calls
 * are the simulator's own, and what the app sends to the queue is consumed by the worker's real
 * `queue()` handler on workerd. D1 queries go to the same D1 through a relay worker in that
 * Miniflare, one request per query (./d1-relay.ts: the proxy's synchronous round trips blocked
 * the test's thread). Nothing is mocked; only the HTTP hop into workerd is left out, which is
 * what makes these suites fast.
 *
 * Each {@link startApp} imports the app afresh (`vi.resetModules()`), so its module-level state
 * (model cache, credential table, failure limiter, traffic tally) starts empty, as in a new isolate.
 *
 * What needs the real runtime stays on workerd through {@link startWorker}: raw-socket body
 * draining, the static assets path, queues and cron end to end, restarts on persisted state, the
 * demo and parity tests.
 */
import { format } from "node:util";
import { vi } from "vitest";
import type { Env } from "../src/env";
import { relayedD1 } from "./d1-relay";
import { type CapturedLog, launchMiniflare, type RunningWorker, runningWorker, type StartOptions } from "./harness";

/** A {@link RunningWorker} whose app runs in this process. */
export interface InProcessWorker extends RunningWorker {
  /** Resolves once every promise the app handed to `waitUntil` so far has settled. */
  settle(): Promise<void>;
}

/** Logs of the live in-process apps; console output goes to all of them while any is alive. */
const consoleSinks = new Set<CapturedLog[]>();
const CONSOLE_LEVELS = { log: "stdout", info: "stdout", debug: "stdout", warn: "stderr", error: "stderr" } as const;
let restoreConsole: (() => void) | null = null;

/**
 * Keeps what the app writes to the console in `logs` (tests read it, as they read workerd's), and
 * still prints it: vitest shows it for failing tests only (`silent: "passed-only"`), so a 5xx comes
 * with its cause.
 */
function captureConsole(logs: CapturedLog[]): () => void {
  consoleSinks.add(logs);
  if (!restoreConsole) {
    const spies = Object.entries(CONSOLE_LEVELS).map(([method, level]) => {
      const original = console[method as keyof typeof CONSOLE_LEVELS].bind(console);
      return vi.spyOn(console, method as keyof typeof CONSOLE_LEVELS).mockImplementation((...args: unknown[]) => {
        for (const sink of consoleSinks) sink.push({ level, message: format(...args) });
        original(...args);
      });
    });
    restoreConsole = () => {
      for (const spy of spies) spy.mockRestore();
    };
  }
  return () => {
    consoleSinks.delete(logs);
    if (consoleSinks.size === 0 && restoreConsole) {
      restoreConsole();
      restoreConsole = null;
    }
  };
}

/** Bytes of a body a client would declare in Content-Length (strings and byte arrays). */
function declaredLength(body: RequestInit["body"]): number | null {
  if (typeof body === "string") return Buffer.byteLength(body);
  if (body instanceof Uint8Array || body instanceof ArrayBuffer) return body.byteLength;
  return null;
}

/**
 * Starts Miniflare with wrangler.toml's bindings (migrations applied) and the app in this process.
 * Same options and interface as {@link startWorker}; the app's console output is kept in `logs`.
 *
 * @example
 * const worker = await startApp({ vars: { MODEL_REFRESH_SECONDS: "0" } });
 * const answer = await worker.post("/v1/score", body, worker.tokens.flow);
 */
export async function startApp(options: StartOptions = {}): Promise<InProcessWorker> {
  const launched = await launchMiniflare(options);
  const env: Env = { ...(await launched.mf.getBindings<Env>("isodense")), DB: relayedD1(launched.mf) };
  vi.resetModules();
  const { app } = await import("../src/app");
  const pending = new Set<Promise<unknown>>();
  const ctx: ExecutionContext = {
    waitUntil(promise) {
      const tracked = Promise.resolve(promise).then(
        () => undefined,
        (error: unknown) => void launched.logs.push({ level: "stderr", message: `waitUntil rejected: ${String(error)}` }),
      );
      pending.add(tracked);
      void tracked.finally(() => pending.delete(tracked));
    },
    passThroughOnException() {},
    props: {},
  };
  const releaseConsole = captureConsole(launched.logs);
  const settle = async (): Promise<void> => {
    while (pending.size > 0) await Promise.all([...pending]);
  };
  const send = async (url: string, init: RequestInit): Promise<Response> => {
    const headers = new Headers(init.headers);
    // A client sending a whole string or byte array declares its length, as fetch does on the wire.
    const length = declaredLength(init.body);
    if (length !== null && !headers.has("content-length")) headers.set("content-length", String(length));
    return app.request(url, { ...init, headers }, env, ctx);
  };
  const worker = await runningWorker(launched, send, {
    skipMigrations: options.skipMigrations,
    async dispose() {
      await settle();
      releaseConsole();
      await launched.mf.dispose();
    },
  });
  return { ...worker, settle };
}
