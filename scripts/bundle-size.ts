/**
 * `npm run bundle:size` (run by .ci/run): builds the production bundle exactly as `wrangler deploy`
 * would (`wrangler deploy --dry-run --outdir <tmp>`, no network needed), measures it the way
 * wrangler reports it (gzip of the concatenated modules; source maps and the README wrangler writes
 * beside them are not uploaded as code), prints both sizes, and fails when the compressed size
 * passes the Workers Paid plan's limit. The review app's static assets do not count: they are
 * uploaded as assets, not as part of the Worker. The app must be built first (`npm run build:ui`).
 */
import { spawnSync } from "node:child_process";
import { mkdtempSync, readdirSync, readFileSync, rmSync } from "node:fs";
import { tmpdir } from "node:os";
import { dirname, join, resolve } from "node:path";
import { fileURLToPath } from "node:url";
import { gzipSync } from "node:zlib";

/**
 * Largest Worker after compression on the Workers Paid plan: 10 MB. Source: Cloudflare Workers
 * docs, "Limits" → "Worker size" (https://developers.cloudflare.com/workers/platform/limits/#worker-size:
 * "Worker size | 3 MB | 10 MB", free | paid) and "Errors" → "Worker exceeded the upload size limit"
 * ("up to 10 MB in size after compression on the Workers Paid plan"). Counted in binary megabytes,
 * as wrangler 4.86.0 counts the free plan's 3 MB (`MAX_GZIP_SIZE_BYTES = 3 * 1024 * 1024`).
 */
export const PAID_PLAN_COMPRESSED_LIMIT_BYTES = 10 * 1024 * 1024;

/** Uncompressed and gzip-compressed size of a Worker's modules, in bytes. */
export interface BundleSize {
  uncompressed: number;
  compressed: number;
}

/**
 * Measures modules as wrangler's bundle reporter does: one gzip (default level) over their
 * concatenation.
 *
 * @example measureModules([new TextEncoder().encode("export default {}")]).uncompressed // → 17
 */
export function measureModules(modules: readonly Uint8Array[]): BundleSize {
  const joined = Buffer.concat(modules);
  return { uncompressed: joined.byteLength, compressed: gzipSync(joined).byteLength };
}

/** Whether a file of wrangler's `--outdir` is uploaded as Worker code. */
export function isUploadedModule(fileName: string): boolean {
  return !fileName.endsWith(".map") && fileName !== "README.md";
}

/** One line for CI's log: both sizes and the limit, in KiB/MiB. */
export function describeBundleSize(size: BundleSize, limit: number): string {
  const kib = (bytes: number) => `${(bytes / 1024).toFixed(1)} KiB`;
  const share = ((100 * size.compressed) / limit).toFixed(1);
  return `worker bundle: ${kib(size.uncompressed)} uncompressed, ${kib(size.compressed)} gzip (${share} % of the Workers Paid plan's ${limit / 1024 / 1024} MiB limit after compression)`;
}

function main(): number {
  const root = resolve(dirname(fileURLToPath(import.meta.url)), "..");
  const outdir = mkdtempSync(join(tmpdir(), "isodense-bundle-"));
  try {
    const build = spawnSync(join(root, "node_modules/.bin/wrangler"), ["deploy", "--dry-run", "--outdir", outdir], {
      cwd: root,
      env: { ...process.env, WRANGLER_SEND_METRICS: "false", CLOUDFLARE_CF_FETCH_ENABLED: "false", WRANGLER_HIDE_BANNER: "true" },
      encoding: "utf8",
    });
    if (build.status !== 0) {
      process.stderr.write(`bundle size: wrangler deploy --dry-run failed\n${build.stdout}${build.stderr}`);
      return 1;
    }
    const modules = readdirSync(outdir, { recursive: true, withFileTypes: true })
      .filter((entry) => entry.isFile() && isUploadedModule(entry.name))
      .map((entry) => readFileSync(join(entry.parentPath, entry.name)));
    const size = measureModules(modules);
    process.stdout.write(`${describeBundleSize(size, PAID_PLAN_COMPRESSED_LIMIT_BYTES)}\n`);
    if (size.compressed > PAID_PLAN_COMPRESSED_LIMIT_BYTES) {
      process.stderr.write("bundle size: the compressed Worker is over the Workers Paid plan's limit; Cloudflare would refuse the upload\n");
      return 1;
    }
    return 0;
  } finally {
    rmSync(outdir, { recursive: true, force: true });
  }
}

if (process.argv[1] && resolve(process.argv[1]) === fileURLToPath(import.meta.url)) process.exitCode = main();
