/**
 * The review store's D1 for in-process route tests and for every test's own queries (`db()` of
 * ./harness.ts), reached with one request per query.
 *
 * Through Miniflare's binding proxy every D1 call the app makes costs several round trips into
 * workerd, most of them synchronous (`prepare` and `bind` are synchronous methods, and each method
 * is first looked up as a property), and a synchronous round trip blocks the test's thread, so
 * concurrent requests wait on each other: a review fuzz run spent half its time there (CPU profile,
 * 5 Dec). Here the statement is built in this process and run by a small relay worker inside the
 * same Miniflare, bound to the same D1 database: the query, its parameters and its answer travel in
 * one `dispatchFetch`. The database, its SQL engine, `batch` atomicity and its errors stay D1's own.
 */
import type { Miniflare } from "miniflare";

/** Name and host of the relay worker (the host routes `dispatchFetch` to it). */
const D1_RELAY_NAME = "d1-relay";
const RELAY_HOST = "d1-relay.test";

/** One statement as it travels: its SQL and its bound values. */
interface WireStatement {
  sql: string;
  params: unknown[];
}

type StatementMethod = "all" | "first" | "run" | "raw";

interface RelayCall {
  op: StatementMethod | "batch" | "exec";
  statements: WireStatement[];
  /** `first`'s column name or `raw`'s options. */
  arg?: unknown;
}

/** The relay worker (ES module source) that runs each call against its `DB` binding. */
const RELAY_SCRIPT = `
export default {
  async fetch(request, env) {
    const call = await request.json();
    const prepared = (s) => env.DB.prepare(s.sql).bind(...s.params);
    try {
      let value;
      if (call.op === "batch") value = await env.DB.batch(call.statements.map(prepared));
      else if (call.op === "exec") value = await env.DB.exec(call.statements[0].sql);
      else {
        const statement = prepared(call.statements[0]);
        value = call.arg === undefined ? await statement[call.op]() : await statement[call.op](call.arg);
      }
      return Response.json({ value: value ?? null });
    } catch (error) {
      return Response.json({ error: { name: error.name, message: error.message, cause: error.cause ? String(error.cause.message ?? error.cause) : null } });
    }
  },
};
`;

/**
 * Miniflare options of the relay worker, to add beside the app's worker.
 *
 * @param d1Databases the app worker's `d1Databases` (the relay binds the same database as `DB`).
 */
export function d1RelayWorker(d1Databases: unknown, compatibilityDate: string | undefined): Record<string, unknown> {
  const databases = d1Databases as Record<string, unknown>;
  if (databases?.DB === undefined) throw new Error("the app worker has no D1 binding named DB to relay");
  return { name: D1_RELAY_NAME, modules: true, script: RELAY_SCRIPT, compatibilityDate, d1Databases: { DB: databases.DB }, routes: [`${RELAY_HOST}/*`] };
}

/**
 * A `D1Database` for the app whose queries run through the relay worker.
 *
 * @example
 * const env = { ...(await mf.getBindings<Env>("isodense")), DB: relayedD1(mf) };
 */
export function relayedD1(mf: Miniflare): D1Database {
  const send = async (call: RelayCall): Promise<unknown> => {
    for (const statement of call.statements) {
      for (const value of statement.params) {
        if (value !== null && !["string", "number", "boolean"].includes(typeof value)) {
          throw new Error(`d1-relay: only text, numbers, booleans and null travel as parameters; got ${Object.prototype.toString.call(value)} in ${statement.sql}`);
        }
      }
    }
    const response = await mf.dispatchFetch(`http://${RELAY_HOST}/`, { method: "POST", body: JSON.stringify(call), headers: { "content-type": "application/json" } });
    const answer = (await response.json()) as { value?: unknown; error?: { name: string; message: string; cause: string | null } };
    if (answer.error) {
      const error = new Error(answer.error.message, answer.error.cause === null ? undefined : { cause: new Error(answer.error.cause) });
      error.name = answer.error.name;
      throw error;
    }
    return answer.value;
  };

  class RelayedStatement {
    constructor(
      readonly sql: string,
      readonly params: unknown[],
    ) {}
    bind(...params: unknown[]): RelayedStatement {
      return new RelayedStatement(this.sql, params);
    }
    private call(op: StatementMethod, arg?: unknown): Promise<never> {
      return send({ op, statements: [{ sql: this.sql, params: this.params }], arg }) as Promise<never>;
    }
    all() {
      return this.call("all");
    }
    first(column?: string) {
      return this.call("first", column);
    }
    run() {
      return this.call("run");
    }
    raw(options?: unknown) {
      return this.call("raw", options);
    }
  }

  const database = {
    prepare: (sql: string) => new RelayedStatement(sql, []),
    batch: (statements: RelayedStatement[]) => send({ op: "batch", statements: statements.map((s) => ({ sql: s.sql, params: s.params })) }),
    exec: (sql: string) => send({ op: "exec", statements: [{ sql, params: [] }] }),
  };
  return database as unknown as D1Database;
}
