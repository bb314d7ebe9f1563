/**
 * `npm start`: brings up the scoring service locally with the demo model, in one command.
 *
 * 1. writes the demo ledger (demo-ledger/data/ledger.csv) if it is missing;
 * 2. fits the demo model (demo-ledger/data/model.json) if it is missing or older than the ledger
 *    or the feature spec;
 * 3. applies the D1 migrations to the local state (.state/);
 * 4. creates .dev.vars from .dev.vars.example if it does not exist (demo credentials), and builds
 *    the review UI if wrangler.toml serves it as assets and its build folder is missing;
 * 5. starts `wrangler dev` on 127.0.0.1:8787 (PORT overrides) with local KV, D1 and Queues;
 * 6. waits for /v1/health, publishes and activates the demo model over HTTP as the demo admin;
 * 7. fills the review queue on first start: when the review store holds no open item, replays the
 *    first DEMO_REPLAY_PAYMENTS (default 8,000) payments of the demo ledger through the scoring API;
 * 8. prints the URL, the demo credentials and a curl that scores a payment.
 * Ctrl-C stops wrangler dev (the local state in .state/ is kept; local queues are in memory).
 */
import { spawn, type ChildProcess } from "node:child_process";
import { copyFileSync, existsSync, mkdirSync, readFileSync, statSync } from "node:fs";
import { dirname, join, relative, resolve } from "node:path";
import { fileURLToPath } from "node:url";
import { publishCommand } from "../cli/commands/publish";
import { ledgerPayments } from "./ledger-payments";
import { demoLedgerCommand } from "../demo-ledger/cli";
import { credentialsOf, readDevVars } from "./dev-vars";
import { missingAssetsDirectory } from "./missing-assets";

const root = resolve(dirname(fileURLToPath(import.meta.url)), "..");
const paths = {
  ledger: join(root, "demo-ledger/data/ledger.csv"),
  spec: join(root, "demo-ledger/spec.json"),
  model: join(root, "demo-ledger/data/model.json"),
  state: join(root, ".state"),
  devVars: join(root, ".dev.vars"),
  devVarsExample: join(root, ".dev.vars.example"),
  wrangler: join(root, "node_modules/.bin/wrangler"),
};
const port = Number(process.env.PORT ?? 8787);
const url = `http://127.0.0.1:${port}`;
/** Quiet, offline wrangler: no telemetry, no Request.cf download, no banner or update check. */
const quietEnv = { ...process.env, WRANGLER_SEND_METRICS: "false", CLOUDFLARE_CF_FETCH_ENABLED: "false", WRANGLER_HIDE_BANNER: "true" };

function step(text: string): void {
  process.stdout.write(`\n▸ ${text}\n`);
}

function fail(text: string): never {
  process.stderr.write(`\nnpm start: ${text}\n`);
  process.exit(1);
}

/** Runs a command to completion with inherited output; fails the start on a non-zero exit. */
function run(command: string, args: string[], what: string): Promise<void> {
  return new Promise((resolvePromise) => {
    const child = spawn(command, args, { cwd: root, env: quietEnv, stdio: ["ignore", "inherit", "inherit"] });
    child.on("error", (error) => fail(`${what}: ${error.message}`));
    child.on("exit", (code, signal) => {
      if (code === 0) resolvePromise();
      else fail(`${what} failed (${signal ?? `exit code ${code}`})`);
    });
  });
}

function isOlder(target: string, ...sources: string[]): boolean {
  const t = statSync(target).mtimeMs;
  return sources.some((s) => existsSync(s) && statSync(s).mtimeMs > t);
}

async function ensureLedger(): Promise<void> {
  if (existsSync(paths.ledger)) return;
  step(`writing the demo ledger to ${relative(root, paths.ledger)}`);
  mkdirSync(dirname(paths.ledger), { recursive: true });
  const code = await demoLedgerCommand(["--out", paths.ledger]);
  if (code !== 0) fail(`the demo ledger could not be written (exit code ${code})`);
}

async function ensureModel(): Promise<void> {
  if (!existsSync(paths.spec)) fail(`${relative(root, paths.spec)} is missing: it declares the demo model's features`);
  if (existsSync(paths.model) && !isOlder(paths.model, paths.ledger, paths.spec)) return;
  step(`fitting the demo model to ${relative(root, paths.model)}`);
  await run(
    process.execPath,
    [
      "bin/isodense.js",
      "fit",
      relative(root, paths.ledger),
      "--spec",
      relative(root, paths.spec),
      "--segment-by",
      "channel",
      "--label-column",
      "label",
      "--id-column",
      "paymentId",
      "--out",
      relative(root, paths.model),
    ],
    "isodense fit",
  );
}

/** Builds the review UI first when wrangler.toml's assets folder is missing, as on a fresh clone. */
async function ensureAssets(): Promise<void> {
  const directory = missingAssetsDirectory(root);
  if (!directory) return;
  const scripts = (JSON.parse(readFileSync(join(root, "package.json"), "utf8")) as { scripts?: Record<string, string> }).scripts ?? {};
  if (!scripts["build:ui"]) fail(`wrangler.toml serves assets from ${directory}, which does not exist, and there is no build:ui script to build it`);
  step(`building the review UI into ${directory}`);
  await run("npm", ["run", "build:ui"], "npm run build:ui");
}

/**
 * On first start the review queue is empty; an analyst opening the app should find work in it, so
 * score part of the demo ledger through the public API (the same path the payment flow takes).
 */
async function fillDemoQueue(readerToken: string): Promise<void> {
  const answer = await fetch(`${url}/v1/review/summary`, { headers: { authorization: `Bearer ${readerToken}` } });
  if (!answer.ok) fail(`GET /v1/review/summary answered ${answer.status}`);
  const summary = (await answer.json()) as { open: number; claimed: number };
  if (summary.open + summary.claimed > 0) return;
  const limit = String(Number(process.env.DEMO_REPLAY_PAYMENTS ?? 8000));
  step(`filling the review queue: replaying the first ${limit} demo payments`);
  await run(process.execPath, [join(root, "bin/run-ts.js"), join(root, "scripts/replay.ts"), "--url", url, "--limit", limit], "npm run replay");
}

function ensureDevVars(): void {
  if (existsSync(paths.devVars)) return;
  copyFileSync(paths.devVarsExample, paths.devVars);
  step("created .dev.vars from .dev.vars.example (demo credentials, local use only)");
}

function startWrangler(): ChildProcess {
  step(`starting wrangler dev on ${url}`);
  const child = spawn(
    paths.wrangler,
    // The demo ledger's payments lie in the past: no clock check on payment times (replays).
    [
      "dev",
      "--ip",
      "127.0.0.1",
      "--port",
      String(port),
      "--persist-to",
      relative(root, paths.state),
      "--test-scheduled",
      "--show-interactive-dev-session=false",
      "--var",
      "PAYMENT_CLOCK_TOLERANCE_SECONDS:0",
    ],
    { cwd: root, env: quietEnv, stdio: ["ignore", "inherit", "inherit"] },
  );
  child.on("error", (error) => fail(`wrangler dev: ${error.message}`));
  return child;
}

async function waitForHealth(child: ChildProcess, timeoutMs: number): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  while (Date.now() < deadline) {
    if (child.exitCode !== null) fail(`wrangler dev exited (code ${child.exitCode}) before the service answered`);
    try {
      const response = await fetch(`${url}/v1/health`);
      await response.arrayBuffer();
      if (response.status === 200 || response.status === 503) return;
    } catch {
      // not listening yet
    }
    await new Promise((r) => setTimeout(r, 300));
  }
  fail(`the service did not answer ${url}/v1/health within ${timeoutMs / 1000} s`);
}

/**
 * A curl that scores the first legitimate payment of the ledger: as a payment record when the model
 * derives its features (`paymentFields`), else with its features by the model's names.
 */
async function sampleCurl(flowToken: string): Promise<string> {
  const health = (await (await fetch(`${url}/v1/health`)).json()) as {
    model: { features: string[]; segmentBy: string | null; paymentFields?: string[] | null } | null;
  };
  const model = health.model;
  if (!model) return "(no model loaded)";
  const payments = ledgerPayments(paths.ledger, model.features, paths.spec);
  let body: Record<string, unknown> | null = null;
  try {
    for await (const { cell, features } of payments) {
      if (cell("label") !== "legitimate") continue;
      const fields = model.paymentFields;
      body = fields
        ? { transactionId: "demo-curl-0001", payment: Object.fromEntries(fields.slice(1).map((c) => [c, cell(c)])) }
        : { transactionId: "demo-curl-0001", features, ...(model.segmentBy ? { segment: cell(model.segmentBy) } : {}), accountRef: cell("accountRef") };
      break;
    }
  } finally {
    await payments.return(undefined);
  }
  return [`curl -s ${url}/v1/score \\`, `  -H "authorization: Bearer ${flowToken}" \\`, `  -H "content-type: application/json" \\`, `  -d '${JSON.stringify(body)}'`].join("\n");
}

await ensureLedger();
await ensureModel();
step("applying D1 migrations to the local review store");
await run(paths.wrangler, ["d1", "migrations", "apply", "isodense-review", "--local", "--persist-to", relative(root, paths.state)], "wrangler d1 migrations apply");
ensureDevVars();
await ensureAssets();
const vars = readDevVars(paths.devVars);
const admin = credentialsOf(vars, "ADMIN_CREDENTIALS")[0];
const flow = credentialsOf(vars, "FLOW_CREDENTIALS")[0];
const analysts = credentialsOf(vars, "ANALYST_CREDENTIALS");
if (!admin || !flow) fail(".dev.vars needs at least one ADMIN_CREDENTIALS and one FLOW_CREDENTIALS entry (see .dev.vars.example)");

const wrangler = startWrangler();
let stopping = false;
for (const signal of ["SIGINT", "SIGTERM"] as const) {
  process.on(signal, () => {
    stopping = true;
    wrangler.kill(signal);
  });
}
wrangler.on("exit", (code, signal) => {
  if (!stopping) process.stderr.write(`\nwrangler dev stopped (${signal ?? `exit code ${code}`})\n`);
  process.exit(stopping ? 0 : (code ?? 1));
});

await waitForHealth(wrangler, 90_000);
step("publishing the demo model");
const published = await publishCommand([paths.model, "--url", url, "--token", admin.token, "--activate"]);
if (published !== 0) {
  wrangler.kill("SIGTERM");
  fail("publishing the demo model failed (see above)");
}

await fillDemoQueue(analysts[0]?.token ?? admin.token);

const curl = await sampleCurl(flow.token);
process.stdout.write(
  [
    "",
    "────────────────────────────────────────────────────────────────────────",
    `isodense scoring service: ${url}`,
    `  health:   ${url}/v1/health`,
    `  OpenAPI:  ${url}/openapi.json`,
    "",
    "Demo credentials (from .dev.vars; local use only):",
    `  flow    (score)        ${flow.user}: ${flow.token}`,
    ...analysts.map((a) => `  analyst (review)       ${a.user}: ${a.token}`),
    `  admin   (everything)   ${admin.user}: ${admin.token}`,
    "",
    "Score a payment:",
    curl,
    "",
    `Review app (sign in with an analyst credential): ${url}/`,
    "Score the rest of the demo ledger:  npm run replay",
    "Stop with Ctrl-C.",
    "────────────────────────────────────────────────────────────────────────",
    "",
  ].join("\n"),
);
