/**
 * Soak: a bounded, long run of `POST /v1/score` against `wrangler dev` on 127.0.0.1, with review
 * traffic (list, claim, decide) from a second process at the same time.
 *
 * - SOAK_REQUESTS scoring calls (default 200,000) at SOAK_CONNECTIONS (default 48) with autocannon's
 *   `amount`, each with a fresh transactionId, so every call is scored and every flag handed off.
 * - Zero errors required: any non-2xx, socket error or timeout fails the run (exit code 1).
 * - Worker memory: the V8 heap of the worker's isolate after a full collection (bench/isolate-heap.ts,
 *   over `--inspector-port`), read after a warm-up and again after the soak; the difference must
 *   stay within 10 % of the warmed-up figure. The heap without collection is sampled every 10 s.
 * - Process memory: resident set size of each workerd process wrangler starts (/proc/<pid>/status),
 *   before, after and every 5 s, reported beside the heap. It also holds the simulator's own state
 *   (local D1/KV SQLite caches, in-memory queues, allocator arenas); `SOAK_ROUTE=echo` runs the same
 *   load against `/v1/echo`, which stores nothing, to show how much of its growth is the simulator.
 * - Review traffic: bench/soak-review.ts in its own Node process works the queue as an analyst for
 *   as long as the soak runs; its counts and latencies are part of the summary (`SOAK_REVIEW=off`
 *   leaves it out, for diagnosis).
 *
 * Writes bench/results/soak.json (soak-echo.json for the echo route). Environment: SOAK_REQUESTS,
 * SOAK_CONNECTIONS, SOAK_WARM_UP, SOAK_ROUTE (score | echo), SOAK_REVIEW (on | off), PORT.
 */
import { spawn, type ChildProcess } from "node:child_process";
import { once } from "node:events";
import { cpSync, mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from "node:fs";
import { cpus, tmpdir } from "node:os";
import { join } from "node:path";
import { randomBytes } from "node:crypto";
import { publishCommand } from "../cli/commands/publish";
import { bundleWorker } from "../scripts/bundle-worker";
import type { CommandIO } from "../cli/io";
import { fitModel, type FeatureDeclaration, type FitRow } from "../shared-model/src";
import { isolateHeap } from "./isolate-heap";
import { autocannon, correlatedGaussian, ensureReviewBuild, featureBodies, freePort, percentile, quietEnv, root, runToEnd, waitForHealth, wranglerBin } from "./load-kit";

const TOTAL = Number(process.env.SOAK_REQUESTS ?? 200_000);
const CONNECTIONS = Number(process.env.SOAK_CONNECTIONS ?? 48);
const FEATURES = 16;
const MEMORY_TOLERANCE = 0.1;
const WARM_UP = Number(process.env.SOAK_WARM_UP ?? 20_000);
const ROUTE = process.env.SOAK_ROUTE ?? "score";
const REVIEW = (process.env.SOAK_REVIEW ?? "on") !== "off";
if (ROUTE !== "score" && ROUTE !== "echo") throw new Error(`SOAK_ROUTE must be score or echo. Actual: ${ROUTE}`);

// Invented data: a correlated Gaussian in 16 dimensions.
const { names, sample } = correlatedGaussian(FEATURES, 16, 0.3, 5);

// --- processes -----------------------------------------------------------------------------

/**
 * Bundles the worker once into `dir` and writes a copy of wrangler.toml that runs that bundle
 * as it is (`--no-bundle`), with absolute paths, so that edits to the sources during the soak
 * (wrangler dev watches them) cannot reload the worker half-way through the measurement.
 */
async function frozenConfig(dir: string): Promise<string> {
  // Its own folder: wrangler dev watches the entry's folder, and the state folder changes constantly.
  mkdirSync(join(dir, "frozen"), { recursive: true });
  const bundle = join(dir, "frozen", "worker.js");
  await bundleWorker(root, bundle);
  const original = readFileSync(join(root, "wrangler.toml"), "utf8");
  // The review app's files too: a rebuild of review-ui/dist during the soak would restart workerd.
  const assets = join(dir, "frozen-assets");
  const frozen = original
    .replace(/^main\s*=.*$/m, `main = ${JSON.stringify(bundle)}`)
    .replace(/^directory\s*=\s*"([^"]+)"/m, (_m, d: string) => {
      cpSync(join(root, d), assets, { recursive: true });
      return `directory = ${JSON.stringify(assets)}`;
    })
    .replace(/^migrations_dir\s*=\s*"([^"]+)"/m, (_m, d: string) => `migrations_dir = ${JSON.stringify(join(root, d))}`);
  const config = join(dir, "frozen", "wrangler.toml");
  writeFileSync(config, frozen);
  return config;
}

/** Parent pid of a process, from /proc/<pid>/stat (field 4, after the parenthesised name). */
function parentOf(pid: number): number | null {
  try {
    const stat = readFileSync(`/proc/${pid}/stat`, "utf8");
    return Number(stat.slice(stat.lastIndexOf(")") + 2).split(" ")[1]);
  } catch {
    return null;
  }
}

/** The workerd processes descending from `ancestor` (wrangler starts one). */
function workerdDescendants(ancestor: number): number[] {
  const found: number[] = [];
  for (const entry of readdirSync("/proc")) {
    if (!/^\d+$/.test(entry)) continue;
    const pid = Number(entry);
    let comm = "";
    try {
      comm = readFileSync(`/proc/${pid}/comm`, "utf8").trim();
    } catch {
      continue;
    }
    if (comm !== "workerd") continue;
    for (let p: number | null = pid, hops = 0; p !== null && p > 1 && hops < 10; p = parentOf(p), hops++) {
      if (p === ancestor) {
        found.push(pid);
        break;
      }
    }
  }
  return found;
}

/** Resident set size in MiB (VmRSS) of one process. */
function rssMiB(pid: number): number {
  const match = /VmRSS:\s+(\d+) kB/.exec(readFileSync(`/proc/${pid}/status`, "utf8"));
  if (!match) throw new Error(`no VmRSS for pid ${pid}`);
  return Number(match[1]) / 1024;
}

// --- load ------------------------------------------------------------------------------------

const scoreBody = featureBodies(names, sample, { idPrefix: `soak-${randomBytes(4).toString("hex")}`, accounts: 1499 });
let counter = 0;
function nextBody(): string {
  return scoreBody(++counter);
}

async function score(url: string, token: string, amount: number, onTime?: (ms: number) => void) {
  const instance = autocannon({
    url,
    connections: CONNECTIONS,
    amount,
    timeout: 30,
    requests: [
      {
        method: "POST",
        path: `/v1/${ROUTE}`,
        headers: { "content-type": "application/json", authorization: `Bearer ${token}` },
        setupRequest: (req) => ({ ...req, body: nextBody() }),
        onResponse: (status, body) => {
          if ((status < 200 || status >= 300) && refusals.length < 5) refusals.push(`${status} ${body.slice(0, 300)}`);
        },
      },
    ],
  });
  const statuses = new Map<number, number>();
  const refusals: string[] = [];
  instance.on("response", (_c, status, _b, ms) => {
    statuses.set(status, (statuses.get(status) ?? 0) + 1);
    if (status >= 200 && status < 300) onTime?.(ms);
  });
  const result = await instance;
  return { result, statuses: Object.fromEntries(statuses), refusals };
}

const r2 = (x: number) => Math.round(x * 100) / 100;

// --- run -------------------------------------------------------------------------------------

const work = mkdtempSync(join(tmpdir(), "isodense-soak-"));
const state = join(work, "state");
mkdirSync(state);
const flowToken = `soak-flow-${randomBytes(20).toString("hex")}`;
const analystToken = `soak-analyst-${randomBytes(20).toString("hex")}`;
const adminToken = `soak-admin-${randomBytes(20).toString("hex")}`;
const envFile = join(work, "soak.env");
writeFileSync(envFile, `FLOW_CREDENTIALS="soak:${flowToken}"\nANALYST_CREDENTIALS="soak-analyst:${analystToken}"\nADMIN_CREDENTIALS="soak-admin:${adminToken}"\n`);
let wrangler: ChildProcess | undefined;
let reviewer: ChildProcess | undefined;
let failed = false;

try {
  const rows: FitRow[] = Array.from({ length: 20_000 }, () => ({ values: Float64Array.from(sample()), segment: null }));
  const features: FeatureDeclaration[] = names.map((name) => ({ name, transform: "none" }));
  const { artifact } = await fitModel(
    {
      async *pass() {
        yield* rows;
      },
    },
    {
      features,
      shape: "full",
      estimator: "classical",
      segmentBy: null,
      cutoffRate: 0.01,
      version: "msoak-16",
      createdAt: "2026-03-02T09:00:00.000Z",
      source: "soak (invented data)",
    },
  );
  const modelFile = join(work, "model.json");
  writeFileSync(modelFile, JSON.stringify(artifact));
  await ensureReviewBuild();
  const config = await frozenConfig(work);
  await runToEnd(["d1", "migrations", "apply", "isodense-review", "--local", "--persist-to", state, "--config", config]);

  const port = Number(process.env.PORT ?? (await freePort()));
  const inspectorPort = await freePort();
  const url = `http://127.0.0.1:${port}`;
  console.log(`starting wrangler dev on ${url}`);
  wrangler = spawn(
    wranglerBin,
    [
      "dev",
      "--config",
      config,
      "--no-bundle",
      "--ip",
      "127.0.0.1",
      "--port",
      String(port),
      "--inspector-port",
      String(inspectorPort),
      "--persist-to",
      state,
      "--env-file",
      envFile,
      "--show-interactive-dev-session=false",
      "--log-level",
      "warn",
    ],
    { cwd: root, env: quietEnv, stdio: ["ignore", "ignore", "inherit"] },
  );
  await waitForHealth(url, wrangler);
  const quiet: CommandIO = { stdout: { write: () => true }, stderr: { write: (t: string) => process.stderr.write(t), isTTY: false } as never };
  if ((await publishCommand([modelFile, "--url", url, "--token", adminToken, "--activate"], quiet)) !== 0) throw new Error("publishing the soak model failed");

  const wranglerPid = wrangler.pid!;
  const workerds = new Set<number>();
  /** VmRSS in MiB per live workerd process under wrangler (found afresh on each read). */
  function rssByPid(): Record<number, number> {
    const byPid: Record<number, number> = {};
    for (const pid of workerdDescendants(wranglerPid)) {
      try {
        byPid[pid] = r2(rssMiB(pid));
        workerds.add(pid);
      } catch {
        /* exited between listing and reading */
      }
    }
    return byPid;
  }
  /** Total of one {@link rssByPid} reading. */
  const totalOf = (byPid: Record<number, number>) => {
    const total = Object.values(byPid).reduce((a, b) => a + b, 0);
    if (total === 0) throw new Error("no workerd process found under wrangler dev");
    return total;
  };
  const rssAll = () => totalOf(rssByPid());
  rssAll();
  /** The workerd pids, to tell a restart (new processes) between two reads. */
  const pidsKey = () =>
    workerdDescendants(wranglerPid)
      .sort((a, b) => a - b)
      .join(",");

  // Warm-up: fills the per-isolate answer memory (5,000 entries) several times over and lets V8's
  // heap and SQLite's page cache reach their working size, so "before" is the steady state.
  console.log(`warming up with ${WARM_UP.toLocaleString("en")} calls`);
  const warm = await score(url, flowToken, WARM_UP);
  console.log(`warm-up statuses: ${JSON.stringify(warm.statuses)}${warm.refusals.length ? `; first refusals: ${warm.refusals.join(" | ")}` : ""}`);
  await new Promise((r) => setTimeout(r, 2000));
  // RSS first: the heap snapshot that forces the collection costs workerd memory of its own.
  const rssBeforeByPid = rssByPid();
  const rssBefore = totalOf(rssBeforeByPid);
  const heapBefore = await isolateHeap(inspectorPort, true);
  const pidsBefore = pidsKey();

  const reviewOut = join(work, "review.json");
  if (REVIEW) reviewer = spawn(process.execPath, ["bin/run-ts.js", "bench/soak-review.ts", url, analystToken, reviewOut], { cwd: root, stdio: ["ignore", "inherit", "inherit"] });

  let rssPeak = rssBefore;
  // RSS per workerd process every 5 s, to tell a plateau (V8 and SQLite growing to their working
  // size) from steady growth, and which process grows.
  const timeline: { seconds: number; rssMiBByPid: Record<number, number>; heapUsedMiB?: number }[] = [];
  const soakStart = Date.now();
  let ticks = 0;
  const sampler = setInterval(() => {
    try {
      rssPeak = Math.max(rssPeak, rssAll());
      if (ticks++ % 5 === 0) {
        const point: (typeof timeline)[number] = { seconds: Math.round((Date.now() - soakStart) / 1000), rssMiBByPid: rssByPid() };
        timeline.push(point);
        // The isolate's heap as it is (no collection, which would pause the worker under load).
        if (ticks % 10 === 1)
          void isolateHeap(inspectorPort, false, 5000).then(
            (h) => (point.heapUsedMiB = h.usedMiB),
            () => undefined,
          );
      }
    } catch {
      /* the process may be between reads */
    }
  }, 1000);
  console.log(`soaking: ${TOTAL.toLocaleString("en")} /v1/${ROUTE} calls at ${CONNECTIONS} connections (RSS before ${r2(rssBefore)} MiB)`);
  const times: number[] = [];
  const started = Date.now();
  const soak = await score(url, flowToken, TOTAL, (ms) => times.push(ms));
  const seconds = (Date.now() - started) / 1000;
  clearInterval(sampler);

  if (reviewer && reviewer.exitCode === null) {
    reviewer.kill("SIGTERM");
    await once(reviewer, "exit");
  }
  const review = reviewer ? (JSON.parse(readFileSync(reviewOut, "utf8")) as { errors: number } & Record<string, unknown>) : { errors: 0, skipped: "SOAK_REVIEW=off" };
  await new Promise((r) => setTimeout(r, 3000));
  const rssAfterByPid = rssByPid();
  const rssAfter = totalOf(rssAfterByPid);
  const heapAfter = await isolateHeap(inspectorPort, true);
  // A workerd restart (wrangler restarts it on a crash or a reload) makes before/after meaningless.
  const restarted = pidsKey() !== pidsBefore;

  const sorted = Float64Array.from(times).sort();
  const errors = soak.result.non2xx + soak.result.errors + soak.result.timeouts;
  const heapChange = (heapAfter.usedMiB - heapBefore.usedMiB) / heapBefore.usedMiB;
  const rssChange = (rssAfter - rssBefore) / rssBefore;
  const summary = {
    measuredAt: new Date().toISOString(),
    machine: { cpus: cpus().length, model: cpus()[0]?.model ?? "unknown", node: process.version },
    setup: {
      warmUpCalls: WARM_UP,
      warmUpStatuses: warm.statuses,
      warmUpRefusals: warm.refusals,
      server: "wrangler dev (local simulator) on 127.0.0.1; autocannon and the review process on the same machine",
      route: `/v1/${ROUTE}`,
      reviewTraffic: REVIEW,
      model: { version: artifact.version, features: FEATURES, covarianceShape: artifact.covarianceShape },
      connections: CONNECTIONS,
      body: `${FEATURES} features, fresh transactionId per call`,
    },
    score: {
      requested: TOTAL,
      answered2xx: times.length,
      errors,
      statuses: soak.statuses,
      seconds: r2(seconds),
      requestsPerSecond: r2(times.length / seconds),
      latencyMs: { p50: r2(percentile(sorted, 0.5)), p90: r2(percentile(sorted, 0.9)), p99: r2(percentile(sorted, 0.99)), max: r2(sorted[sorted.length - 1]) },
    },
    memory: {
      tolerance: MEMORY_TOLERANCE,
      isolateHeap: {
        what: "V8 heap in use by the worker's isolate after a full collection (DevTools protocol over --inspector-port)",
        beforeMiB: heapBefore.usedMiB,
        afterMiB: heapAfter.usedMiB,
        change: Number(heapChange.toFixed(4)),
      },
      processRss: {
        what: "VmRSS of the workerd processes under wrangler dev (/proc): the worker and wrangler's proxy, with the simulator's state",
        pids: [...workerds],
        beforeMiB: r2(rssBefore),
        afterMiB: r2(rssAfter),
        beforeMiBByPid: rssBeforeByPid,
        afterMiBByPid: rssAfterByPid,
        peakMiB: r2(rssPeak),
        change: Number(rssChange.toFixed(4)),
      },
      workerdRestarted: restarted,
      timeline,
    },
    review,
    met: { allScored: times.length === TOTAL && errors === 0, memory: !restarted && Math.abs(heapChange) <= MEMORY_TOLERANCE, reviewErrors: review.errors === 0 },
  };
  mkdirSync(join(root, "bench/results"), { recursive: true });
  const resultFile = ROUTE === "score" ? "soak.json" : `soak-${ROUTE}.json`;
  writeFileSync(join(root, "bench/results", resultFile), JSON.stringify(summary, null, 2) + "\n");
  console.log(
    `scored ${times.length.toLocaleString("en")} / ${TOTAL.toLocaleString("en")} in ${r2(seconds)} s (${summary.score.requestsPerSecond} req/s), errors ${errors}, ` +
      `p50 ${summary.score.latencyMs.p50} ms, p99 ${summary.score.latencyMs.p99} ms; isolate heap ${heapBefore.usedMiB} → ${heapAfter.usedMiB} MiB ` +
      `(${(heapChange * 100).toFixed(1)} %); workerd RSS ${r2(rssBefore)} → ${r2(rssAfter)} MiB (${(rssChange * 100).toFixed(1)} %, peak ${r2(rssPeak)}); ` +
      `review: ${JSON.stringify(review)}`,
  );
  console.log(`written bench/results/${resultFile}`);
  failed = !(summary.met.allScored && summary.met.memory && summary.met.reviewErrors);
  if (failed) console.error(`soak targets NOT met: ${JSON.stringify(summary.met)}`);
} finally {
  if (reviewer && reviewer.exitCode === null) reviewer.kill("SIGTERM");
  if (wrangler && wrangler.exitCode === null) {
    wrangler.kill("SIGTERM");
    await Promise.race([once(wrangler, "exit"), new Promise((r) => setTimeout(r, 5000))]);
  }
  rmSync(work, { recursive: true, force: true });
}
if (failed) process.exitCode = 1;
