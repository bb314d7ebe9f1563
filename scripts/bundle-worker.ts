/**
 * Bundles worker/src/index.ts into one ES module for workerd, the way the worker tests
 * (worker/test/worker-build.ts) and the soak (bench/soak.ts) run it: esbuild with the conditions
 * workerd resolves packages under, nothing left external but the runtime's `cloudflare:` modules.
 */
import { join } from "node:path";

/** Writes the bundle to `outfile`. */
export async function bundleWorker(repoRoot: string, outfile: string): Promise<void> {
  const { build } = await import("esbuild");
  await build({
    entryPoints: [join(repoRoot, "worker/src/index.ts")],
    bundle: true,
    format: "esm",
    platform: "neutral",
    target: "es2022",
    conditions: ["workerd", "worker", "browser"],
    mainFields: ["module", "main"],
    // The runtime's own modules (Durable Object base class) are provided by workerd.
    external: ["cloudflare:*"],
    outfile,
    logLevel: "silent",
  });
}
