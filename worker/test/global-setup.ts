/**
 * Vitest global setup of the worker project: bundles the worker and reads wrangler.toml and the
 * migrations once, and hands the result to every test file (`inject("isodenseWorker")`).
 */
import { rm } from "node:fs/promises";
import { dirname, join, resolve } from "node:path";
import { fileURLToPath } from "node:url";
import type { TestProject } from "vitest/node";
import { prepareWorker } from "./worker-build";

const repoRoot = resolve(dirname(fileURLToPath(import.meta.url)), "../..");

export default async function setup(project: TestProject): Promise<() => Promise<void>> {
  const prepared = await prepareWorker(repoRoot, join(repoRoot, "test-output", "worker-bundle"));
  project.provide("isodenseWorker", prepared);
  return async () => {
    await rm(prepared.scriptPath, { force: true });
  };
}
