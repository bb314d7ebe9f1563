/**
 * The whole product on this machine, as an analyst would reach it: the review app built with Vite,
 * the worker under `wrangler dev` (local D1, KV and Queues persisted in a fresh folder, migrations
 * applied with wrangler), and Debian's Chromium driven by playwright-core. Loopback only.
 */
import { spawn, type ChildProcess } from "node:child_process";
import { randomBytes } from "node:crypto";
import { existsSync } from "node:fs";
import { mkdir, rm, writeFile } from "node:fs/promises";
import { createServer } from "node:net";
import { join, resolve } from "node:path";
import { fileURLToPath } from "node:url";
import { chromium, type Browser } from "playwright-core";

export const repoRoot = resolve(fileURLToPath(new URL("../..", import.meta.url)));
const wranglerBin = join(repoRoot, "node_modules/.bin/wrangler");
const viteBin = join(repoRoot, "node_modules/.bin/vite");

/** Quiet, offline wrangler (platform notes): no telemetry, no `cf` fetch, no banner. */
const QUIET = { WRANGLER_SEND_METRICS: "false", CLOUDFLARE_CF_FETCH_ENABLED: "false", WRANGLER_HIDE_BANNER: "true", NO_COLOR: "1" };

export interface StackTokens {
  flow: string;
  admin: string;
  /** Analyst "rosa" (the demo users of .dev.vars.example, so screenshots and README agree). */
  analyst: string;
  /** Analyst "tomas". */
  analyst2: string;
}

export interface Stack {
  base: string;
  tokens: StackTokens;
  /** Folder of the persisted state (`<stateDir>/state`) and the logs. */
  stateDir: string;
  stop(): Promise<void>;
}

function run(command: string, args: string[], env: Record<string, string> = {}): Promise<string> {
  return new Promise((resolvePromise, reject) => {
    const child = spawn(command, args, { cwd: repoRoot, env: { ...process.env, ...QUIET, ...env }, stdio: ["ignore", "pipe", "pipe"] });
    let output = "";
    child.stdout.on("data", (d: Buffer) => (output += d.toString()));
    child.stderr.on("data", (d: Buffer) => (output += d.toString()));
    child.on("error", reject);
    child.on("close", (code) => (code === 0 ? resolvePromise(output) : reject(new Error(`${command} ${args.join(" ")} exited ${code}:\n${output.slice(-3000)}`))));
  });
}

/** Runs a wrangler command with the quiet settings; resolves with its output. */
export function wrangler(args: string[]): Promise<string> {
  return run(wranglerBin, args);
}

/** A free loopback port. */
export function freePort(): Promise<number> {
  return new Promise((resolvePromise, reject) => {
    const server = createServer();
    server.on("error", reject);
    server.listen(0, "127.0.0.1", () => {
      const address = server.address();
      server.close(() => (typeof address === "object" && address ? resolvePromise(address.port) : reject(new Error("no port"))));
    });
  });
}

/**
 * Builds review-ui/dist (the worker serves it as static assets). Once, before any stack starts: for
 * the browser tests the e2e project's global setup does it, before any test file of the run starts.
 */
export async function buildUi(): Promise<void> {
  await run(viteBin, ["build", "--config", "review-ui/vite.config.ts", "--logLevel", "warn"]);
}

/**
 * Prepares a fresh state folder, starts `wrangler dev` on the built app ({@link buildUi}) and waits
 * until it answers.
 * @param name folder name under test-output/ for the state and logs
 */
export async function startStack(
  name: string,
  vars: Record<string, string> = {},
  /** Runs after the migrations and before `wrangler dev` opens the state (one process at a time). */
  prepare?: (persistTo: string) => Promise<void>,
): Promise<Stack> {
  const stateDir = join(repoRoot, "test-output", name);
  await rm(stateDir, { recursive: true, force: true });
  await mkdir(stateDir, { recursive: true });
  if (!existsSync(join(repoRoot, "review-ui/dist/index.html"))) throw new Error("review-ui/dist/index.html is missing: call buildUi() once before starting a stack");
  await wrangler(["d1", "migrations", "apply", "isodense-review", "--local", "--persist-to", join(stateDir, "state")]);
  if (prepare) await prepare(join(stateDir, "state"));

  const t = (who: string) => `e2e-${who}-${randomBytes(18).toString("hex")}`;
  const tokens: StackTokens = { flow: t("flow"), admin: t("admin"), analyst: t("rosa"), analyst2: t("tomas") };
  return launchDev(stateDir, tokens, vars);
}

/**
 * Starts `wrangler dev` on the state prepared by {@link startStack} (or left by an earlier run of
 * it, after `stop()`), and waits until it answers.
 */
export async function launchDev(stateDir: string, tokens: StackTokens, vars: Record<string, string> = {}): Promise<Stack> {
  const envFile = join(stateDir, "dev.env");
  const lines = {
    FLOW_CREDENTIALS: `checkout:${tokens.flow}`,
    ANALYST_CREDENTIALS: `rosa:${tokens.analyst},tomas:${tokens.analyst2}`,
    ADMIN_CREDENTIALS: `ops-ana:${tokens.admin}`,
    MODEL_REFRESH_SECONDS: "0",
    ...vars,
  };
  await writeFile(
    envFile,
    Object.entries(lines)
      .map(([k, v]) => `${k}=${v}`)
      .join("\n") + "\n",
  );

  const port = await freePort();
  const inspector = await freePort();
  const args = ["dev", "--ip", "127.0.0.1", "--port", String(port), "--inspector-port", String(inspector), "--persist-to", join(stateDir, "state")];
  args.push("--env-file", envFile, "--show-interactive-dev-session=false", "--log-level", "warn");
  const child: ChildProcess = spawn(wranglerBin, args, { cwd: repoRoot, env: { ...process.env, ...QUIET }, stdio: ["ignore", "pipe", "pipe"], detached: true });
  let log = "";
  child.stdout?.on("data", (d: Buffer) => (log += d.toString()));
  child.stderr?.on("data", (d: Buffer) => (log += d.toString()));
  const base = `http://127.0.0.1:${port}`;
  const stop = async () => {
    if (child.exitCode === null && child.pid) {
      process.kill(-child.pid, "SIGTERM");
      await new Promise((r) => child.once("exit", r));
    }
    await writeFile(join(stateDir, "wrangler-dev.log"), log);
  };
  const deadline = Date.now() + 90_000;
  for (;;) {
    if (child.exitCode !== null) throw new Error(`wrangler dev exited ${child.exitCode}:\n${log.slice(-3000)}`);
    try {
      const res = await fetch(`${base}/v1/health`);
      if (res.status < 500 || res.status === 503) break;
    } catch {
      // not listening yet
    }
    if (Date.now() > deadline) {
      await stop();
      throw new Error(`wrangler dev did not answer within 90 s:\n${log.slice(-3000)}`);
    }
    await new Promise((r) => setTimeout(r, 300));
  }
  return { base, tokens, stateDir, stop };
}

/** Debian's Chromium (apt-get install chromium), headless, with outside DNS blocked. */
export function launchChromium(): Promise<Browser> {
  return chromium.launch({
    executablePath: process.env.CHROMIUM_PATH ?? "/usr/bin/chromium",
    headless: true,
    args: [
      "--no-sandbox",
      "--disable-gpu",
      "--disable-quic",
      "--no-first-run",
      "--disable-background-networking",
      "--disable-component-update",
      "--disable-sync",
      "--host-resolver-rules=MAP * ~NOTFOUND , EXCLUDE 127.0.0.1",
    ],
  });
}
