/**
 * One `isodense fit` in its own process, so its peak memory is its own. Usage:
 * node bin/run-ts.js bench/fit-source-child.ts <ledger> <model.json>. Prints one JSON line.
 */
import { main } from "../cli/main";

const [ledger, out] = process.argv.slice(2);
const features = Array.from({ length: 32 }, (_, i) => `f${i}`).join(",");
const started = process.hrtime.bigint();
const code = await main(["fit", ledger, "--features", features, "--covariance", "full", "--out", out], {
  stdout: { write: () => true },
  stderr: { isTTY: false, write: (text: string) => process.stderr.write(text) },
});
const seconds = Number(process.hrtime.bigint() - started) / 1e9;
const usage = process.resourceUsage();
// CPU time of every thread (DuckDB's and JavaScript's), from process start: on a shared machine it moves less than wall time.
const cpuSeconds = (usage.userCPUTime + usage.systemCPUTime) / 1e6;
console.log(JSON.stringify({ code, seconds: Number(seconds.toFixed(3)), cpuSeconds: Number(cpuSeconds.toFixed(3)), peakRssMiB: Number((usage.maxRSS / 1024).toFixed(1)) }));
