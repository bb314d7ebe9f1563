/**
 * Fit from sources, against NumPy + pandas in the same run: a 1M × 32 CSV (`%.6f`, fixed seed),
 * the same data as Parquet, and 10M × 32 as Parquet (memory flat from 1M to 10M). Then the CSV
 * with a Yeo–Johnson transform on every fourth column, whose λ must be fitted before the moments:
 * its second pass over a staged copy (the CSV parsed once) against reading the CSV again (DuckDB's
 * SQL sample, then the moments: parsed twice), and a 300,000-row demo ledger of payment records
 * with the demo spec (Yeo–Johnson on shippingShare) derived once and staged against derived
 * twice. Each fit runs in its own process; the 1M fits and
 * the baseline alternate over rounds (best time, worst memory of each). Figures: bench/results/sources.json
 * and bench/results/fit-passes.json (the Yeo–Johnson pair). Usage: node bin/run-ts.js bench/sources.ts
 * [--no-10m] [--rounds=N] [--passes-only] (only the Yeo–Johnson pair).
 */
import { execFileSync } from "node:child_process";
import { appendFileSync, existsSync, mkdirSync, readFileSync, renameSync, writeFileSync } from "node:fs";
import { cpus, loadavg, tmpdir } from "node:os";
import { join } from "node:path";
import { DuckEngine, sqlString } from "../cli/sources/duckdb-engine";
import { ledgerCsvLines } from "../demo-ledger/generate";
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
const records = join(work, "records-300k.csv");
if (!existsSync(records)) {
  writeFileSync(`${records}.partial`, "");
  let lines: string[] = [];
  for (const line of ledgerCsvLines({ rows: 300_000 })) {
    lines.push(line);
    if (lines.length === 10_000) {
      appendFileSync(`${records}.partial`, lines.join("\n") + "\n");
      lines = [];
    }
  }
  appendFileSync(`${records}.partial`, lines.length > 0 ? lines.join("\n") + "\n" : "");
  renameSync(`${records}.partial`, records);
}
const engine = await DuckEngine.open();
if (!existsSync(parquet)) await engine.execute(`COPY (SELECT * FROM read_csv(${sqlString(csv)}, header = true)) TO ${sqlString(parquet)} (FORMAT parquet)`);
const passesOnly = process.argv.includes("--passes-only");
const with10m = !passesOnly && !process.argv.includes("--no-10m");
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

/** A fit with a Yeo–Johnson feature (the 1M CSV, or the records ledger), its second pass over the staged copy or the source read again. */
function fitWithPower(mode: "staged" | "reread", ledger: "csv" | "records"): Run {
  const args = ledger === "csv" ? [csv, mode] : [records, mode, "--records"];
  const out = execFileSync(process.execPath, [CLI_V8_FLAG, "bin/run-ts.js", "bench/fit-passes-child.ts", ...args], { cwd: root, encoding: "utf8" });
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
const stagedRuns: Run[] = [];
const rereadRuns: Run[] = [];
const recordsStagedRuns: Run[] = [];
const recordsRereadRuns: Run[] = [];
const show = (round: number, what: string, run: Run) => console.log(`  round ${round}: ${what}: ${run.seconds} s (CPU ${run.cpuSeconds} s), peak RSS ${run.peakRssMiB} MiB`);
for (let round = 1; round <= rounds; round++) {
  if (!passesOnly) fitFromEverySource(round);
  // Which of the two goes first alternates too: a neighbour's burst should not always fall on one side.
  for (const mode of round % 2 === 1 ? (["reread", "staged"] as const) : (["staged", "reread"] as const)) {
    const run = fitWithPower(mode, "csv");
    (mode === "staged" ? stagedRuns : rereadRuns).push(run);
    show(round, `isodense fit, 1M CSV, Yeo–Johnson on 8 columns, ${mode === "staged" ? "staged copy (CSV parsed once)" : "CSV read again (parsed twice)"}`, run);
    const derived = fitWithPower(mode, "records");
    (mode === "staged" ? recordsStagedRuns : recordsRereadRuns).push(derived);
    show(round, `isodense fit, 300k payment records, demo spec, ${mode === "staged" ? "staged copy (derived once)" : "derived twice"}`, derived);
  }
}

/** One round of the baseline and the fits without a fitted parameter, CSV then Parquet. */
function fitFromEverySource(round: number): void {
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
const stagedFit = summarise(stagedRuns);
const rereadFit = summarise(rereadRuns);
const recordsStagedFit = summarise(recordsStagedRuns);
const recordsRereadFit = summarise(recordsRereadRuns);
const parquet10Fit = with10m ? fit(parquet10) : null;
if (parquet10Fit) console.log(`  isodense fit, 10M Parquet: ${parquet10Fit.seconds} s, peak RSS ${parquet10Fit.peakRssMiB} MiB`);
const loadAfter = loadavg()[0];
const ratio = (a: number, b: number | undefined) => (b === undefined ? null : Number((a / b).toFixed(3)));
const machine = {
  cpus: cpus().length,
  model: cpus()[0]?.model ?? "unknown",
  node: process.version,
  loadAverage1m: Number(load.toFixed(2)),
  loadAverage1mAfter: Number(loadAfter.toFixed(2)),
};
mkdirSync(new URL("bench/results/", root), { recursive: true });
const ratios = (a: Run, b: Run) => ({ seconds: ratio(a.seconds, b.seconds), cpuSeconds: ratio(a.cpuSeconds, b.cpuSeconds), peakRssMiB: ratio(a.peakRssMiB, b.peakRssMiB) });
const passes = {
  measuredAt: new Date().toISOString(),
  machine,
  method: `${rounds} rounds, the two sides alternating (which goes first too); each side's best time and worst peak RSS`,
  csv: {
    ledger: "1M × 32 CSV (%.6f), Yeo–Johnson on f0, f4, … f28, classical full covariance",
    staged: stagedFit,
    reread: rereadFit,
    stagedToReread: ratios(stagedFit, rereadFit),
  },
  records: {
    ledger: "300,000 demo payment records, demo spec (9 features, Yeo–Johnson on shippingShare), segments by channel",
    staged: recordsStagedFit,
    reread: recordsRereadFit,
    stagedToReread: ratios(recordsStagedFit, recordsRereadFit),
  },
};
console.log(
  `  Yeo–Johnson fits, staged to read again: CSV ${JSON.stringify(passes.csv.stagedToReread)}, records ${JSON.stringify(passes.records.stagedToReread)} (load average ${loadAfter.toFixed(1)} at the end)`,
);
writeFileSync(new URL("bench/results/fit-passes.json", root), JSON.stringify(passes, null, 2) + "\n");
console.log("written bench/results/fit-passes.json");
if (!passesOnly) {
  const baseline = pandasRuns.length > 0 ? summarise(pandasRuns) : null;
  const csvFit = summarise(csvRuns);
  const parquetFit = summarise(parquetRuns);
  const summary = {
    measuredAt: new Date().toISOString(),
    machine,
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
  console.log(`  ratios: ${JSON.stringify(summary.targets)}; CPU time: ${JSON.stringify(summary.cpuTimeRatios)}`);
  writeFileSync(new URL("bench/results/sources.json", root), JSON.stringify(summary, null, 2) + "\n");
  console.log("written bench/results/sources.json");
}
