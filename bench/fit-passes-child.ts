/**
 * One fit whose transforms have a parameter to fit, in its own process, its second pass over the
 * staged copy or over the source read again (`FitPasses`): the benchmark ledger with a Yeo–Johnson
 * transform on every fourth column, or (with `--records`) a demo ledger of payment records with
 * the demo spec, derived on the way.
 * Usage: node bin/run-ts.js bench/fit-passes-child.ts <ledger> <staged|reread> [--records]. Prints one JSON line.
 */
import { readFileSync } from "node:fs";
import { LedgerRowSource } from "../cli/ledger";
import type { RecordsSpec } from "../cli/records";
import { fitRowSource, fitSource } from "../cli/sources/fit-source";
import { resolveSource } from "../cli/sources/source";
import type { FitOptions } from "../shared-model/src/fit";
import { parseRecordSpec } from "../shared-model/src/records/spec";

const [ledger, mode] = process.argv.slice(2);
if (mode !== "staged" && mode !== "reread") throw new Error("usage: fit-passes-child.ts <ledger> <staged|reread> [--records]");
const records = process.argv.includes("--records");
const started = process.hrtime.bigint();
const source = resolveSource(ledger, {});
let lambdas: (number | undefined)[];
if (records) {
  const spec = parseRecordSpec(JSON.parse(readFileSync(new URL("../demo-ledger/spec.json", import.meta.url), "utf8"))) as RecordsSpec;
  const features = spec.features.map(({ name, transform }) => ({ name, transform }));
  const rows = new LedgerRowSource(source, { features, segmentColumn: "channel", records: spec });
  const options: FitOptions = { features, shape: "full", estimator: "classical", segmentBy: "channel", cutoffRate: 0.01, seed: 1 };
  const { artifact } = await fitRowSource(rows, () => rows.counts, options, "derived from records", { mode });
  lambdas = artifact.features.map((f) => f.lambda);
} else {
  // Columns f0, f4, … f28 Yeo–Johnson, the others as they are.
  const features = Array.from({ length: 32 }, (_, i) => ({ name: `f${i}`, transform: i % 4 === 0 ? ("yeo-johnson" as const) : ("none" as const) }));
  const options: FitOptions = { features, shape: "full", estimator: "classical", segmentBy: null, cutoffRate: 0.01, seed: 1 };
  const { artifact } = await fitSource(source, { features }, options, { mode });
  lambdas = artifact.features.map((f) => f.lambda);
}
const seconds = Number(process.hrtime.bigint() - started) / 1e9;
const usage = process.resourceUsage();
const cpuSeconds = (usage.userCPUTime + usage.systemCPUTime) / 1e6;
console.log(
  JSON.stringify({
    seconds: Number(seconds.toFixed(3)),
    cpuSeconds: Number(cpuSeconds.toFixed(3)),
    peakRssMiB: Number((usage.maxRSS / 1024).toFixed(1)),
    firstLambda: lambdas.find((l) => l !== undefined),
  }),
);
