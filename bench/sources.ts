/**
 * Fit from sources, against NumPy + pandas in the same run: a 1M × 32 CSV (`%.6f`, fixed seed),
 * the same data as Parquet, and 10M × 32 as Parquet (memory flat from 1M to 10M). Each fit runs in
 * its own process; the 1M fits and the baseline alternate over rounds (best time, worst memory of
 * each). Figures: bench/results/sources.json. Usage: node bin/run-ts.js bench/sources.ts [--no-10m] [--rounds=N]
 */
import { execFileSync } from "node:child_process";
import { existsSync, mkdirSync, readFileSync, renameSync, writeFileSync } from "node:fs";
import { cpus, loadavg, tmpdir } from "node:os";
import { join } from "node:path";
import { DuckEngine, sqlString } from "../cli/sources/duckdb-engine";
import { writeBenchLedger } from "./sources-ledger";

const root = new URL("../", import.meta.url);
/** The V8 flag on the shebang line of bin/isodense.js. */
const CLI_V8_FLAG = readFileSync(new URL("bin/isodense.js", root), "utf8").match(/--max-semi-space-size=\d+/)![0];
const work = join(tmpdir(), "isodense-bench-sources");
mkdirSync(work, { recursive: true });
const csv = join(work, "ledger-1m.csv");
const parquet = join(work, "ledger-1m.parquet");
const parquet10 = join(work, "ledger-10m.parquet");
if (!existsSync(csv)) await writeBenchLedger(1_000_000, csv);
const engine = await DuckEngine.open();
if (!existsSync(parquet)) await engine.execute(`COPY (SELECT * FROM read_csv(${sqlString(csv)}, header = true)) TO ${sqlString(parquet)} (FORMAT parquet)`);
const with10m = !process.argv.includes("--no-10m");
// 10M rows: the 1M rows ten times over, ids renumbered (the fit's memory, not the data, is measured).
if (with10m && !existsSync(parquet10)) {
  // Order does not matter here, and keeping it would hold rows past the memory limit.
  await engine.execute("SET preserve_insertion_order = false");
  await engine.execute(
    `COPY (SELECT (copy - 1) * 1000000 + id AS id, * EXCLUDE (id) FROM read_parquet(${sqlString(parquet)}), range(1, 11) AS t(copy)) TO ${sqlString(`${parquet10}.partial`)} (FORMAT parquet)`,
  );
  renameSync(`${parquet10}.partial`, parquet10);
}
engine.close();

/** One run: wall time, CPU time of all threads, peak RSS. */
interface Run {
  seconds: number;
  cpuSeconds: number;
  peakRssMiB: number;
}

function fit(ledger: string): Run {
  // With the launcher's V8 flag (bin/isodense.js), so the figures are those of the command as users run it.
  const out = execFileSync(process.execPath, [CLI_V8_FLAG, "bin/run-ts.js", "bench/fit-source-child.ts", ledger, join(work, "model.json")], { cwd: root, encoding: "utf8" });
  return JSON.parse(out.trim().split("\n").pop()!);
}

function pandas(): Run | null {
  try {
    // Debian's interpreter, where python3-pandas installs (a python3 earlier on PATH may lack it).
    const python = existsSync("/usr/bin/python3") ? "/usr/bin/python3" : "python3";
    const out = execFileSync(python, ["bench/pandas-fit.py", csv], { cwd: root, encoding: "utf8" });
    return JSON.parse(out.trim().split("\n").pop()!);
  } catch {
    console.log("  NumPy + pandas baseline not run (apt-get install -y python3-pandas)");
    return null;
  }
}

/** Best time and worst peak memory over the rounds (neighbours on this shared machine slow single runs). */
function summarise(runs: Run[]): Run & { rounds: Run[] } {
  return {
    seconds: Math.min(...runs.map((r) => r.seconds)),
    cpuSeconds: Math.min(...runs.map((r) => r.cpuSeconds)),
    peakRssMiB: Math.max(...runs.map((r) => r.peakRssMiB)),
    rounds: runs,
  };
}

const roundsArg = process.argv.find((a) => a.startsWith("--rounds="));
const rounds = roundsArg === undefined ? 2 : Number(roundsArg.slice("--rounds=".length));
const load = loadavg()[0];
console.log(`fit from sources, 32 columns, classical full covariance (load average ${load.toFixed(1)} on ${cpus().length} cores; ${rounds} alternating rounds)`);
const pandasRuns: Run[] = [];
const csvRuns: Run[] = [];
const parquetRuns: Run[] = [];
for (let round = 1; round <= rounds; round++) {
  const baselineRun = pandas();
  if (baselineRun) {
    pandasRuns.push(baselineRun);
    console.log(`  round ${round}: NumPy + pandas, 1M CSV: ${baselineRun.seconds} s (CPU ${baselineRun.cpuSeconds} s), peak RSS ${baselineRun.peakRssMiB} MiB`);
  }
  csvRuns.push(fit(csv));
  console.log(`  round ${round}: isodense fit, 1M CSV: ${csvRuns.at(-1)!.seconds} s (CPU ${csvRuns.at(-1)!.cpuSeconds} s), peak RSS ${csvRuns.at(-1)!.peakRssMiB} MiB`);
  parquetRuns.push(fit(parquet));
  console.log(
    `  round ${round}: isodense fit, 1M Parquet: ${parquetRuns.at(-1)!.seconds} s (CPU ${parquetRuns.at(-1)!.cpuSeconds} s), peak RSS ${parquetRuns.at(-1)!.peakRssMiB} MiB`,
  );
}
const baseline = pandasRuns.length > 0 ? summarise(pandasRuns) : null;
const csvFit = summarise(csvRuns);
const parquetFit = summarise(parquetRuns);
const parquet10Fit = with10m ? fit(parquet10) : null;
if (parquet10Fit) console.log(`  isodense fit, 10M Parquet: ${parquet10Fit.seconds} s, peak RSS ${parquet10Fit.peakRssMiB} MiB`);
const loadAfter = loadavg()[0];
const ratio = (a: number, b: number | undefined) => (b === undefined ? null : Number((a / b).toFixed(3)));
const summary = {
  measuredAt: new Date().toISOString(),
  machine: {
    cpus: cpus().length,
    model: cpus()[0]?.model ?? "unknown",
    node: process.version,
    loadAverage1m: Number(load.toFixed(2)),
    loadAverage1mAfter: Number(loadAfter.toFixed(2)),
  },
  method: `${rounds} alternating rounds (pandas, CSV, Parquet); each side's best time and worst peak RSS`,
  pandasCsv1M: baseline,
  fitCsv1M: csvFit,
  fitParquet1M: parquetFit,
  fitParquet10M: parquet10Fit,
  targets: {
    csvTimeRatioToPandas: ratio(csvFit.seconds, baseline?.seconds),
    csvPeakRssRatioToPandas: ratio(csvFit.peakRssMiB, baseline?.peakRssMiB),
    parquetTimeRatioToPandasCsv: ratio(parquetFit.seconds, baseline?.seconds),
    peakRssRatio10MTo1M: parquet10Fit ? ratio(parquet10Fit.peakRssMiB, parquetFit.peakRssMiB) : null,
  },
  // Not targets: CPU time of all threads against pandas' (one thread), less moved by neighbours than wall time.
  cpuTimeRatios: {
    csvToPandas: ratio(csvFit.cpuSeconds, baseline?.cpuSeconds),
    parquetToPandasCsv: ratio(parquetFit.cpuSeconds, baseline?.cpuSeconds),
  },
};
console.log(`  ratios: ${JSON.stringify(summary.targets)}; CPU time: ${JSON.stringify(summary.cpuTimeRatios)} (load average ${loadAfter.toFixed(1)} at the end)`);
mkdirSync(new URL("bench/results/", root), { recursive: true });
writeFileSync(new URL("bench/results/sources.json", root), JSON.stringify(summary, null, 2) + "\n");
console.log("written bench/results/sources.json");
