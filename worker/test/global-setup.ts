/**
 * Vitest global setup of the worker project: bundles the worker and reads wrangler.toml and the
 * migrations once, and hands the result to every test file (`inject("isodenseWorker")`). First it
 * checks that Miniflare carries the fix of scripts/patch-miniflare-sync.js.
 */
import { execFileSync } from "node:child_process";
import { rm } from "node:fs/promises";
import { dirname, join, resolve } from "node:path";
import { fileURLToPath } from "node:url";
import type { TestProject } from "vitest/node";
import { prepareWorker } from "./worker-build";

const repoRoot = resolve(dirname(fileURLToPath(import.meta.url)), "../..");

export default async function setup(project: TestProject): Promise<() => Promise<void>> {
  // Miniflare's binding proxy has a race the postinstall script fixes; refuse to run without it.
  execFileSync(process.execPath, [join(repoRoot, "scripts", "patch-miniflare-sync.js"), "--check"], { stdio: "inherit" });
  const prepared = await prepareWorker(repoRoot, join(repoRoot, "test-output", "worker-bundle"));
  project.provide("isodenseWorker", prepared);
  return async () => {
    await rm(prepared.scriptPath, { force: true });
  };
}
