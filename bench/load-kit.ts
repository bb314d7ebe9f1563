/**
 * What the load benchmarks (bench/worker-load.ts, bench/soak.ts) share: autocannon's typed slice,
 * invented correlated-Gaussian payments, and running `wrangler dev` quietly on a free loopback port.
 */
import { spawn, type ChildProcess } from "node:child_process";
import { once } from "node:events";
import { existsSync, readdirSync, readFileSync } from "node:fs";
import { createRequire } from "node:module";
import { createServer, type AddressInfo } from "node:net";
import { dirname, join, resolve } from "node:path";
import { fileURLToPath } from "node:url";
import { mulberry32 } from "../shared-model/src/seeded-stream";
import { missingAssetsDirectory } from "../scripts/missing-assets";
import { buildUi } from "../test/e2e/stack";

export const root = resolve(dirname(fileURLToPath(import.meta.url)), "..");

// --- autocannon (no bundled types): the slice the benchmarks use ---------------------------

export interface AutocannonRequest {
  method: string;
  path: string;
  headers: Record<string, string>;
  body?: string;
}
export interface AutocannonResult {
  requests: { average: number; total: number };
  latency: { p50: number; p99: number; average: number };
  duration: number;
  non2xx: number;
  errors: number;
  timeouts: number;
}
export interface AutocannonInstance extends Promise<AutocannonResult> {
  on(event: "response", listener: (client: unknown, statusCode: number, bytes: number, responseTimeMs: number) => void): void;
}
/** Either a fixed `duration` (seconds) or a fixed `amount` of requests. */
export type Autocannon = (options: {
  url: string;
  connections: number;
  duration?: number;
  amount?: number;
  timeout?: number;
  requests: {
    method: string;
    path: string;
    headers: Record<string, string>;
    setupRequest: (req: AutocannonRequest) => AutocannonRequest;
    /** Called with each answer's status and body. */
    onResponse?: (status: number, body: string) => void;
  }[];
}) => AutocannonInstance;
export const autocannon = createRequire(import.meta.url)("autocannon") as Autocannon;

// --- invented data ---------------------------------------------------------------------------

/**
 * A correlated Gaussian over `features` columns named signal01, signal02, …: x = μ + L z with a fixed
 * lower-triangular L (unit diagonal, off-diagonal `spread`·N(0,1)), so every feature correlates
 * with the earlier ones; μ_i = `firstMean` + i.
 */
export function correlatedGaussian(features: number, seed: number, spread: number, firstMean: number): { names: string[]; sample: () => number[] } {
  const names = Array.from({ length: features }, (_, i) => `signal${String(i + 1).padStart(2, "0")}`);
  const normal = mulberry32(seed).normal;
  const loadings = names.map((_, i) => Array.from({ length: i + 1 }, (_, j) => (j === i ? 1 : spread * normal())));
  const sample = () => {
    const z = names.map(() => normal());
    return loadings.map((row, i) => firstMean + i + row.reduce((s, l, j) => s + l * z[j], 0));
  };
  return { names, sample };
}

/**
 * Score request bodies in the features form, numbered by the caller (so another body form can share
 * the numbering): body `n` carries transactionId `${idPrefix}-${n}` (fresh for each n, so no answer
 * comes from the idempotency memory), accountRef `acct-${n % accounts}` and the features of one of
 * `count` invented payments drawn once from `sample` (rounded to 4 decimals, cycled through).
 */
export function featureBodies(names: string[], sample: () => number[], options: { idPrefix: string; accounts: number; count?: number }): (n: number) => string {
  const payloads = Array.from({ length: options.count ?? 4096 }, () => sample().map((v) => Number(v.toFixed(4))));
  return (n) => {
    const values = payloads[(n - 1) % payloads.length];
    const features: Record<string, number> = {};
    for (let i = 0; i < names.length; i++) features[names[i]] = values[i];
    return JSON.stringify({ transactionId: `${options.idPrefix}-${n}`, features, accountRef: `acct-${n % options.accounts}` });
  };
}

/** The q-quantile of ascending values (nearest rank); NaN when empty. */
export function percentile(sorted: Float64Array, q: number): number {
  if (sorted.length === 0) return Number.NaN;
  return sorted[Math.min(sorted.length - 1, Math.max(0, Math.ceil(q * sorted.length) - 1))];
}

// --- wrangler ----------------------------------------------------------------------------------

/** Quiet, offline wrangler: no telemetry, no Request.cf download, no banner. */
export const quietEnv = { ...process.env, WRANGLER_SEND_METRICS: "false", CLOUDFLARE_CF_FETCH_ENABLED: "false", WRANGLER_HIDE_BANNER: "true" };
export const wranglerBin = join(root, "node_modules/.bin/wrangler");

/** Builds the review app when wrangler.toml's assets folder is missing, as on a fresh clone. */
export async function ensureReviewBuild(): Promise<void> {
  if (missingAssetsDirectory(root)) await buildUi();
}

/** A loopback port nothing listens on right now. */
export async function freePort(): Promise<number> {
  const server = createServer().listen(0, "127.0.0.1");
  await once(server, "listening");
  const port = (server.address() as AddressInfo).port;
  server.close();
  await once(server, "close");
  return port;
}

/** Runs a wrangler command to completion; rejects on a non-zero exit. */
export function runToEnd(args: string[]): Promise<void> {
  return new Promise((ok, fail) => {
    const child = spawn(wranglerBin, args, { cwd: root, env: quietEnv, stdio: ["ignore", "ignore", "inherit"] });
    child.on("exit", (code) => (code === 0 ? ok() : fail(new Error(`wrangler ${args.slice(0, 3).join(" ")} exited with ${code}`))));
  });
}

/** Waits until `wrangler dev` answers /v1/health (any status), for at most 90 s. */
export async function waitForHealth(url: string, child: ChildProcess): Promise<void> {
  const deadline = Date.now() + 90_000;
  while (Date.now() < deadline) {
    if (child.exitCode !== null) throw new Error(`wrangler dev exited with ${child.exitCode}`);
    try {
      await (await fetch(`${url}/v1/health`)).arrayBuffer();
      return;
    } catch {
      await new Promise((r) => setTimeout(r, 300));
    }
  }
  throw new Error("wrangler dev did not answer within 90 s");
}

/** Clock ticks per second of /proc's CPU times (USER_HZ; 100 on Linux for x86 and arm). */
const CLOCK_TICKS_PER_SECOND = 100;

/**
 * CPU time (user + system, ms) used so far by the processes named `name` among `rootPid`'s
 * descendants (wrangler starts workerd as a grandchild); 0 where /proc is missing. Read from
 * /proc/<pid>/stat (proc(5): fields 14 utime and 15 stime, in clock ticks).
 */
export function processTreeCpuMs(rootPid: number, name: string): number {
  if (!existsSync("/proc")) return 0;
  const stats = new Map<number, { parent: number; name: string; ticks: number }>();
  for (const entry of readdirSync("/proc")) {
    if (!/^\d+$/.test(entry)) continue;
    let text: string;
    try {
      text = readFileSync(`/proc/${entry}/stat`, "utf8");
    } catch {
      continue; // gone since the listing
    }
    // "pid (comm) state ppid …": comm may hold spaces and parentheses, so split after the last ")".
    const close = text.lastIndexOf(")");
    const fields = text.slice(close + 2).split(" ");
    stats.set(Number(entry), { parent: Number(fields[1]), name: text.slice(text.indexOf("(") + 1, close), ticks: Number(fields[11]) + Number(fields[12]) });
  }
  const inTree = (pid: number): boolean => {
    for (let p = pid, hops = 0; p > 1 && hops < 16; p = stats.get(p)?.parent ?? 0, hops++) if (p === rootPid) return true;
    return false;
  };
  let ticks = 0;
  for (const [pid, stat] of stats) if (stat.name === name && inTree(pid)) ticks += stat.ticks;
  return (ticks * 1000) / CLOCK_TICKS_PER_SECOND;
}
