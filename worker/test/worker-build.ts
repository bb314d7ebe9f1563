/**
 * What every integration test needs before it can start the worker: the esbuild bundle of
 * worker/src/index.ts, the Miniflare options wrangler derives from wrangler.toml, and the D1
 * migrations split into statements the way wrangler splits them. Prepared once per test run by
 * the global setup (wrangler's module is large: importing it in every test file costs seconds).
 */
import { mkdir, readdir, readFile } from "node:fs/promises";
import { join } from "node:path";
import { bundleWorker } from "../../scripts/bundle-worker";

/** A migration file and its statements. */
export interface PreparedMigration {
  name: string;
  statements: string[];
}

/** Everything needed to start the worker, JSON-serialisable (handed from the global setup). */
export interface PreparedWorker {
  scriptPath: string;
  workerOptions: Record<string, unknown>;
  migrations: PreparedMigration[];
}

declare module "vitest" {
  /** Handed from the global setup to the test files. */
  export interface ProvidedContext {
    isodenseWorker: PreparedWorker;
  }
}

/**
 * Bundles the worker and reads wrangler.toml and the migrations.
 *
 * @param outDir folder for the bundle (created if needed).
 */
export async function prepareWorker(repoRoot: string, outDir: string): Promise<PreparedWorker> {
  const wrangler = await import("wrangler");
  await mkdir(outDir, { recursive: true });
  const scriptPath = join(outDir, `index-${process.pid}-${Date.now()}.js`);
  await bundleWorker(repoRoot, scriptPath);
  const config = join(repoRoot, "wrangler.toml");
  let workerOptions: Record<string, unknown>;
  try {
    workerOptions = wrangler.unstable_getMiniflareWorkerOptions(config).workerOptions as Record<string, unknown>;
  } catch (error) {
    // wrangler.toml serves the review UI's build as assets; on a fresh clone that folder does not
    // exist yet. The API tests do not need its files, only the same routing, so use an empty one.
    if (!/assets\.directory/.test((error as Error).message)) throw error;
    const empty = join(outDir, "empty-assets");
    await mkdir(empty, { recursive: true });
    console.warn(`worker tests: the assets folder of wrangler.toml is missing (npm run build:ui builds it); serving an empty ${empty} instead`);
    workerOptions = wrangler.unstable_getMiniflareWorkerOptions(config, undefined, { overrides: { assets: { directory: empty } } }).workerOptions as Record<string, unknown>;
  }
  // wrangler also reads .dev.vars (demo credentials) into the bindings; tests bring their own.
  const bindings = { ...((workerOptions.bindings as Record<string, unknown> | undefined) ?? {}) };
  for (const secret of ["FLOW_CREDENTIALS", "ANALYST_CREDENTIALS", "ADMIN_CREDENTIALS"]) delete bindings[secret];
  workerOptions = { ...workerOptions, bindings };
  const dir = join(repoRoot, "worker/migrations");
  const files = (await readdir(dir)).filter((f) => /^\d{4}_.+\.sql$/.test(f)).sort();
  const migrations = await Promise.all(files.map(async (name) => ({ name, statements: wrangler.unstable_splitSqlQuery(await readFile(join(dir, name), "utf8")) })));
  return { scriptPath, workerOptions: JSON.parse(JSON.stringify(workerOptions)) as Record<string, unknown>, migrations };
}
