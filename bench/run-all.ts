/**
 * `npm run bench`: the model core's figures — scoring kernel vectors/s against C, fit throughput and
 * peak memory for 100k and 1M rows of 32 columns, offline derive throughput and memory per account
 * on 1M payment records — printed and written to bench/results/core.json.
 * The service benchmarks (worker load, review UI, the soak) run after it; `--core` leaves them out.
 */
import { execFileSync } from "node:child_process";
import { existsSync, mkdirSync, writeFileSync } from "node:fs";
import { cpus } from "node:os";
import { benchDerive } from "./derive";
import { benchKernel } from "./kernel";

const root = new URL("../", import.meta.url);
const resultsDir = new URL("bench/results/", root);
mkdirSync(resultsDir, { recursive: true });

console.log("scoring kernel (d² over the symmetric half of the precision matrix), best of 3 alternating 1 s rounds per side and size");
const kernel = benchKernel();
for (const k of kernel) {
  const c = k.cVectorsPerSecond === null ? "C compiler unavailable" : `C -O3 ${k.cVectorsPerSecond.toLocaleString("en")} /s, ratio ${k.ratioToC}`;
  console.log(`  n=${String(k.n).padStart(2)}  TypeScript ${k.typescriptVectorsPerSecond.toLocaleString("en")} vectors/s   ${c}`);
}

console.log("fit throughput, classical full covariance, 32 columns (each size in its own process)");
const fit = [100_000, 1_000_000].map((rows) => {
  const out = execFileSync(process.execPath, ["bin/run-ts.js", "bench/fit-child.ts", String(rows), "32"], {
    cwd: root,
    encoding: "utf8",
    maxBuffer: 1 << 20,
  });
  const figure = JSON.parse(out.trim().split("\n").pop() ?? "{}");
  console.log(`  ${rows.toLocaleString("en")} rows: ${figure.rowsPerSecond.toLocaleString("en")} rows/s, ${figure.seconds} s, peak RSS ${figure.peakRssMiB} MiB`);
  return figure;
});

console.log("offline derive: payment records to features (isodense derive's reading and derivation; each in its own process)");
const derive = await benchDerive();

const summary = {
  measuredAt: new Date().toISOString(),
  machine: { cpus: cpus().length, model: cpus()[0]?.model ?? "unknown", node: process.version },
  kernel,
  fit,
  derive,
  targets: {
    kernelAtLeastHalfOfC: kernel.find((k) => k.n === 32)?.ratioToC ?? null,
    fitMemoryRatio1MTo100k: Number((fit[1].peakRssMiB / fit[0].peakRssMiB).toFixed(3)),
  },
};
writeFileSync(new URL("core.json", resultsDir), JSON.stringify(summary, null, 2) + "\n");
console.log(`written bench/results/core.json`);

// Service benchmarks live beside this one; run them when present.
// `npm run bench -- --core` stops here: the model core's figures only, in about a minute.
const coreOnly = process.argv.includes("--core");
// The soak runs twice: on /v1/echo first, a control that shows the local simulator's own memory
// growth under the same load, then the measured soak on /v1/score with review traffic.
const serviceRuns: { script: string; env?: Record<string, string> }[] = [
  { script: "sources.ts" },
  { script: "worker-load.ts" },
  { script: "review-ui.ts" },
  { script: "soak.ts", env: { SOAK_ROUTE: "echo", SOAK_REVIEW: "off" } },
  { script: "soak.ts" },
];
for (const { script, env } of coreOnly ? [] : serviceRuns) {
  if (existsSync(new URL(script, import.meta.url))) {
    console.log(
      `\n— ${script}${
        env
          ? ` ${Object.entries(env)
              .map(([k, v]) => `${k}=${v}`)
              .join(" ")}`
          : ""
      } —`,
    );
    execFileSync(process.execPath, ["bin/run-ts.js", `bench/${script}`], { cwd: root, stdio: "inherit", env: { ...process.env, ...env } });
  }
}
