/**
 * `npm run bench:worker`: load on the scoring service under `wrangler dev` (local simulator) on
 * 127.0.0.1, with a 32-feature model fitted by the model core to invented data.
 *
 * Measures `POST /v1/score` against the trivial `POST /v1/echo` route of the same worker (same
 * authentication, body checks and JSON parse; no scoring), in the same run, with autocannon at
 * 32 connections and at 1: requests/s and p50/p99 latency. Absolute figures on a small machine are
 * the simulator's, so the targets are ratios: score throughput ≥ 0.9 × echo at 32 connections, and
 * at 1 connection a score median no more than 0.5 ms above echo's.
 *
 * Latency percentiles are computed from every response time autocannon reports (float ms),
 * because its own histogram has 1 ms resolution, too coarse for a 0.5 ms target.
 * Each request carries a fresh transactionId, so no answer comes from the idempotency memory.
 * The two routes alternate in short rounds so that changes in the machine's load hit both alike.
 *
 * A second phase publishes a model fitted from invented payment records (record spec carried in the
 * artifact) and measures `/v1/score` with the `payment` form against `/v1/echo` given the same
 * bodies: each request then also derives and records the payment at its account's Durable Object
 * (2,000 accounts). Targets: payment throughput ≥ 0.8 × echo at 32 connections, median ≤ echo + 2 ms
 * at 1 connection. It also reports the storage one account's history takes (the Durable Objects'
 * SQLite files under the local state, and the history JSON itself).
 *
 * Environment: BENCH_SECONDS (per case, default 10), PORT (default: a free port), BENCH_PHASE
 * (`all`, default, or `payment`: only the payment-form phase, written to worker-load-payment.json).
 * Writes bench/results/worker-load.json, with the machine's load average before and after.
 */
import { spawn, type ChildProcess } from "node:child_process";
import { once } from "node:events";
import { mkdirSync, mkdtempSync, readdirSync, rmSync, statSync, writeFileSync } from "node:fs";
import { cpus, loadavg, tmpdir } from "node:os";
import { join } from "node:path";
import { randomBytes } from "node:crypto";
import { publishCommand } from "../cli/commands/publish";
import type { CommandIO } from "../cli/io";
import { emptyHistory, fitModel, recordFromFields, recordPayment, type AccountHistory, type FeatureDeclaration, type FitRow } from "../shared-model/src";
import { fitRecordModel, SHOP_RECORD_SPEC, shopLedger } from "../worker/test/record-fixtures";
import { autocannon, correlatedGaussian, featureBodies, freePort, percentile, quietEnv, root, runToEnd, waitForHealth, wranglerBin } from "./load-kit";

const seconds = Number(process.env.BENCH_SECONDS ?? 10);
const PHASE = process.env.BENCH_PHASE ?? "all";
if (PHASE !== "all" && PHASE !== "payment") throw new Error(`BENCH_PHASE must be all or payment. Actual: ${PHASE}`);
const loadBefore = loadavg();
const FEATURES = 32;
const TRAINING_ROWS = 20_000;
/** Alternating echo/score rounds per connection count. */
const ROUNDS = 4;

// Invented data: a correlated 32-dimensional Gaussian.
const { names, sample } = correlatedGaussian(FEATURES, 32, 0.25, 10);

async function fitBenchModel() {
  const rows: FitRow[] = Array.from({ length: TRAINING_ROWS }, () => ({ values: Float64Array.from(sample()), segment: null }));
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
      version: "mbench-32",
      createdAt: "2026-03-02T09:00:00.000Z",
      source: "bench (invented data)",
    },
  );
  return artifact;
}

// ---------------------------------------------------------------------------------------------
// wrangler dev
// ---------------------------------------------------------------------------------------------

// ---------------------------------------------------------------------------------------------
// Load cases
// ---------------------------------------------------------------------------------------------

interface CaseResult {
  route: string;
  /** What the score requests carried: ready features, or a payment record. */
  form: "features" | "payment";
  connections: number;
  seconds: number;
  requests: number;
  requestsPerSecond: number;
  latencyMs: { p50: number; p99: number; mean: number };
  non2xx: number;
  errors: number;
}

let counter = 0;
const runId = randomBytes(4).toString("hex");
const scoreBody = featureBodies(names, sample, { idPrefix: `bench-${runId}`, accounts: 997 });

/** A score body with a fresh transactionId (bodies cycle through 4,096 invented payments). */
function nextBody(): string {
  return scoreBody(++counter);
}

/** Accounts the payment-form bodies spread over (one Durable Object each). */
const PAYMENT_ACCOUNTS = 2000;
const paymentAmounts = Array.from({ length: 4096 }, (_, i) => Number((20 + 80 * ((i * 0.618034) % 1)).toFixed(2)));
/** Every payment-form body sent, for the offline size of the histories it builds. */
const sentPayments: Record<string, string | number>[] = [];

/** A payment-form body: a fresh payment of one of the accounts, at the present time. */
function nextPaymentBody(): string {
  counter++;
  const payment = {
    createdAt: new Date().toISOString(),
    accountRef: `acct-b${counter % PAYMENT_ACCOUNTS}`,
    channel: counter % 3 === 0 ? "app" : "web",
    amount: paymentAmounts[counter % paymentAmounts.length],
    accountCreatedAt: "2025-06-01T00:00:00Z",
  };
  sentPayments.push({ paymentId: `bench-${runId}-${counter}`, ...payment });
  return JSON.stringify({ transactionId: `bench-${runId}-${counter}`, payment });
}

/** One autocannon run; returns the 2xx response times (ms) and the counts. */
async function load(url: string, route: string, connections: number, duration: number, token: string, body: () => string = nextBody) {
  const times: number[] = [];
  const instance = autocannon({
    url,
    connections,
    duration,
    requests: [
      {
        method: "POST",
        path: route,
        headers: { "content-type": "application/json", authorization: `Bearer ${token}` },
        setupRequest: (req) => ({ ...req, body: body() }),
      },
    ],
  });
  instance.on("response", (_client, statusCode, _bytes, responseTimeMs) => {
    if (statusCode >= 200 && statusCode < 300) times.push(responseTimeMs);
  });
  const result = await instance;
  return { times, requests: result.requests.total, non2xx: result.non2xx, errors: result.errors + result.timeouts };
}

/**
 * Measures echo and score at one connection count, alternating the two routes in `rounds` short
 * runs so that drift in the machine's load (other processes, the simulator's own housekeeping)
 * falls on both routes alike.
 */
async function measurePair(url: string, connections: number, duration: number, rounds: number, token: string, form: CaseResult["form"] = "features"): Promise<CaseResult[]> {
  const body = form === "payment" ? nextPaymentBody : nextBody;
  const routes = ["/v1/echo", "/v1/score"];
  const acc = routes.map(() => ({ times: [] as number[], requests: 0, non2xx: 0, errors: 0, seconds: 0 }));
  const slice = Math.max(1, duration / rounds);
  for (let round = 0; round < rounds; round++) {
    // Alternate which route goes first, so neither always follows the other.
    const order = round % 2 === 0 ? [0, 1] : [1, 0];
    for (const r of order) {
      const run = await load(url, routes[r], connections, slice, token, body);
      acc[r].times.push(...run.times);
      acc[r].requests += run.requests;
      acc[r].non2xx += run.non2xx;
      acc[r].errors += run.errors;
      acc[r].seconds += slice;
    }
  }
  return routes.map((route, r) => {
    const sorted = Float64Array.from(acc[r].times).sort();
    const mean = acc[r].times.reduce((a, b) => a + b, 0) / Math.max(1, acc[r].times.length);
    return {
      route,
      form,
      connections,
      seconds: acc[r].seconds,
      requests: acc[r].requests,
      requestsPerSecond: Number((acc[r].times.length / acc[r].seconds).toFixed(1)),
      latencyMs: { p50: round3(percentile(sorted, 0.5)), p99: round3(percentile(sorted, 0.99)), mean: round3(mean) },
      non2xx: acc[r].non2xx,
      errors: acc[r].errors,
    };
  });
}

/**
 * Storage of the account histories the payment phase built: the local simulator's SQLite file per
 * Durable Object (page-granular: SQLite allocates 4 KiB pages), and the history JSON the objects
 * store, rebuilt offline from the payments sent (only the score route records; echo bodies are
 * counted too, so this is an upper bound on payments per account).
 */
function historyStorage(stateDir: string) {
  const files: string[] = [];
  const walk = (dir: string) => {
    for (const entry of readdirSync(dir, { withFileTypes: true })) {
      const path = join(dir, entry.name);
      if (entry.isDirectory()) walk(path);
      else if (dir.includes("AccountHistoryObject") && /\.sqlite(-wal|-shm)?$/.test(entry.name)) files.push(path);
    }
  };
  walk(stateDir);
  const objects = new Set(files.map((f) => f.replace(/-(wal|shm)$/, ""))).size;
  const sqliteBytes = files.reduce((total, f) => total + statSync(f).size, 0);
  const histories = new Map<string, AccountHistory>();
  for (const fields of sentPayments) {
    const record = recordFromFields(SHOP_RECORD_SPEC, fields);
    const history = histories.get(record.account) ?? emptyHistory();
    histories.set(record.account, history);
    recordPayment(SHOP_RECORD_SPEC, history, record);
  }
  const jsonBytes = [...histories.values()].reduce((total, h) => total + Buffer.byteLength(JSON.stringify(h)), 0);
  return {
    accounts: objects,
    sqliteBytesPerAccount: objects > 0 ? Math.round(sqliteBytes / objects) : 0,
    historyJsonBytesPerAccount: Math.round(jsonBytes / Math.max(1, histories.size)),
    paymentsPerAccount: Number((sentPayments.length / Math.max(1, histories.size)).toFixed(1)),
  };
}

function round3(x: number): number {
  return Math.round(x * 1000) / 1000;
}

// ---------------------------------------------------------------------------------------------
// Run
// ---------------------------------------------------------------------------------------------

const state = mkdtempSync(join(tmpdir(), "isodense-bench-"));
const flowToken = `bench-flow-${randomBytes(20).toString("hex")}`;
const adminToken = `bench-admin-${randomBytes(20).toString("hex")}`;
const envFile = join(state, "bench.env");
writeFileSync(envFile, `FLOW_CREDENTIALS="bench:${flowToken}"\nADMIN_CREDENTIALS="bench-admin:${adminToken}"\nANALYST_CREDENTIALS=""\n`);
let wrangler: ChildProcess | undefined;

try {
  console.log(`fitting a ${FEATURES}-feature model on ${TRAINING_ROWS.toLocaleString("en")} invented rows`);
  const artifact = await fitBenchModel();
  const modelFile = join(state, "model.json");
  writeFileSync(modelFile, JSON.stringify(artifact));

  console.log("applying D1 migrations to a fresh local state");
  await runToEnd(["d1", "migrations", "apply", "isodense-review", "--local", "--persist-to", state]);

  const port = Number(process.env.PORT ?? (await freePort()));
  const url = `http://127.0.0.1:${port}`;
  console.log(`starting wrangler dev on ${url}`);
  wrangler = spawn(
    wranglerBin,
    ["dev", "--ip", "127.0.0.1", "--port", String(port), "--persist-to", state, "--env-file", envFile, "--show-interactive-dev-session=false", "--log-level", "warn"],
    { cwd: root, env: quietEnv, stdio: ["ignore", "ignore", "inherit"] },
  );
  await waitForHealth(url, wrangler);

  const quiet: CommandIO = { stdout: { write: () => true }, stderr: { write: (t: string) => process.stderr.write(t), isTTY: false } as never };
  const published = await publishCommand([modelFile, "--url", url, "--token", adminToken, "--activate"], quiet);
  if (published !== 0) throw new Error(`publishing the bench model failed (exit ${published})`);

  const cases: CaseResult[] = [];
  for (const connections of PHASE === "all" ? [32, 1] : []) {
    if (connections === 32) {
      console.log("warming up (3 s per route)");
      await load(url, "/v1/echo", 32, 3, flowToken);
      await load(url, "/v1/score", 32, 3, flowToken);
      console.log(`measuring ${seconds} s per route and connection count, in ${ROUNDS} alternating rounds`);
    }
    for (const result of await measurePair(url, connections, seconds, ROUNDS, flowToken)) {
      cases.push(result);
      console.log(
        `  ${result.route.padEnd(10)} ${String(connections).padStart(2)} conn: ${result.requestsPerSecond.toFixed(0).padStart(6)} req/s  ` +
          `p50 ${result.latencyMs.p50.toFixed(2)} ms  p99 ${result.latencyMs.p99.toFixed(2)} ms  non-2xx ${result.non2xx}  errors ${result.errors}`,
      );
    }
  }
  console.log("publishing a model fitted from invented payment records; measuring the payment form");
  const recordModel = await fitRecordModel(shopLedger({ accounts: 400, payments: 8000, startMs: Date.UTC(2026, 0, 5), days: 30, seed: 23 }), "mbench-records");
  const recordModelFile = join(state, "record-model.json");
  writeFileSync(recordModelFile, JSON.stringify(recordModel));
  if ((await publishCommand([recordModelFile, "--url", url, "--token", adminToken, "--activate"], quiet)) !== 0) throw new Error("publishing the record model failed");
  await load(url, "/v1/echo", 32, 3, flowToken, nextPaymentBody);
  await load(url, "/v1/score", 32, 3, flowToken, nextPaymentBody);
  for (const connections of [32, 1]) {
    for (const result of await measurePair(url, connections, seconds, ROUNDS, flowToken, "payment")) {
      cases.push(result);
      console.log(
        `  ${`${result.route} (${result.form})`.padEnd(20)} ${String(connections).padStart(2)} conn: ${result.requestsPerSecond.toFixed(0).padStart(6)} req/s  ` +
          `p50 ${result.latencyMs.p50.toFixed(2)} ms  p99 ${result.latencyMs.p99.toFixed(2)} ms  non-2xx ${result.non2xx}  errors ${result.errors}`,
      );
    }
  }

  const find = (route: string, connections: number, form: CaseResult["form"] = "features") =>
    cases.find((c) => c.route === route && c.connections === connections && c.form === form)!;
  const throughputRatio = PHASE === "all" ? find("/v1/score", 32).requestsPerSecond / find("/v1/echo", 32).requestsPerSecond : Number.NaN;
  const medianDeltaMs = PHASE === "all" ? find("/v1/score", 1).latencyMs.p50 - find("/v1/echo", 1).latencyMs.p50 : Number.NaN;
  const paymentThroughputRatio = find("/v1/score", 32, "payment").requestsPerSecond / find("/v1/echo", 32, "payment").requestsPerSecond;
  const paymentMedianDeltaMs = find("/v1/score", 1, "payment").latencyMs.p50 - find("/v1/echo", 1, "payment").latencyMs.p50;
  const storage = historyStorage(state);
  console.log(
    `account history: ${storage.accounts} accounts, ${storage.sqliteBytesPerAccount} bytes of SQLite file each (local simulator), ` +
      `history JSON ${storage.historyJsonBytesPerAccount} bytes on average for ${storage.paymentsPerAccount} payments each`,
  );
  const summary = {
    measuredAt: new Date().toISOString(),
    machine: { cpus: cpus().length, model: cpus()[0]?.model ?? "unknown", node: process.version, loadAverageBefore: loadBefore, loadAverageAfter: loadavg() },
    phase: PHASE,
    setup: {
      server: "wrangler dev (local simulator) on 127.0.0.1, load generator autocannon in the same machine",
      model: { version: artifact.version, features: FEATURES, covarianceShape: artifact.covarianceShape, trainingRows: TRAINING_ROWS },
      recordModel: { version: recordModel.version, features: recordModel.features.length, accounts: PAYMENT_ACCOUNTS },
      secondsPerCase: seconds,
      rounds: ROUNDS,
      requestsPerSecond: "2xx answers / seconds of load, summed over the rounds",
      body: "features form: 32 features, fresh transactionId per request; payment form: a payment record of one of 2,000 accounts at the present time; echo and score get the same bodies in each phase",
    },
    cases,
    ratios: {
      scoreOverEchoThroughputAt32: Number(throughputRatio.toFixed(3)),
      scoreMinusEchoMedianMsAt1: Number(medianDeltaMs.toFixed(3)),
      paymentOverEchoThroughputAt32: Number(paymentThroughputRatio.toFixed(3)),
      paymentMinusEchoMedianMsAt1: Number(paymentMedianDeltaMs.toFixed(3)),
    },
    targets: { scoreOverEchoThroughputAt32: ">= 0.9", scoreMinusEchoMedianMsAt1: "<= 0.5", paymentOverEchoThroughputAt32: ">= 0.8", paymentMinusEchoMedianMsAt1: "<= 2" },
    met: {
      throughput: PHASE === "all" ? throughputRatio >= 0.9 : null,
      median: PHASE === "all" ? medianDeltaMs <= 0.5 : null,
      paymentThroughput: paymentThroughputRatio >= 0.8,
      paymentMedian: paymentMedianDeltaMs <= 2,
    },
    accountHistoryStorage: storage,
  };
  mkdirSync(join(root, "bench/results"), { recursive: true });
  writeFileSync(join(root, `bench/results/${PHASE === "all" ? "worker-load" : "worker-load-payment"}.json`), JSON.stringify(summary, null, 2) + "\n");
  console.log(
    `score/echo throughput at 32 connections: ${summary.ratios.scoreOverEchoThroughputAt32} (target ≥ 0.9, ${summary.met.throughput ? "met" : "NOT met"}); ` +
      `median difference at 1 connection: ${summary.ratios.scoreMinusEchoMedianMsAt1} ms (target ≤ 0.5, ${summary.met.median ? "met" : "NOT met"})`,
  );
  console.log(
    `payment form: throughput ${summary.ratios.paymentOverEchoThroughputAt32} of echo at 32 connections (target ≥ 0.8, ${summary.met.paymentThroughput ? "met" : "NOT met"}); ` +
      `median +${summary.ratios.paymentMinusEchoMedianMsAt1} ms at 1 connection (target ≤ 2, ${summary.met.paymentMedian ? "met" : "NOT met"})`,
  );
  console.log(`written bench/results/${PHASE === "all" ? "worker-load" : "worker-load-payment"}.json`);
} finally {
  if (wrangler && wrangler.exitCode === null) {
    wrangler.kill("SIGTERM");
    await Promise.race([once(wrangler, "exit"), new Promise((r) => setTimeout(r, 5000))]);
  }
  rmSync(state, { recursive: true, force: true });
}
