/**
 * One measurement of the offline derivation in its own process, so peak memory belongs to it alone.
 * Usage: node bin/run-ts.js bench/derive-child.ts <read|derive> <ledger.csv> <spec.json>. Prints one JSON line.
 * `read` streams the ledger through the CSV reader and does nothing else (the baseline); `derive`
 * reads it the same way and derives every feature with the CLI's RecordDeriver (what
 * `isodense derive` does before writing), then reports the account histories' size as JSON.
 */
import { readFileSync } from "node:fs";
import { openCsvTable } from "../cli/csv";
import { RecordDeriver, type RecordsSpec } from "../cli/records";
import { parseRecordSpec } from "../shared-model/src/records/spec";

const [mode, ledger, specPath] = process.argv.slice(2);
const spec = parseRecordSpec(JSON.parse(readFileSync(specPath, "utf8"))) as RecordsSpec;
const started = performance.now();
const table = await openCsvTable(ledger);
const deriver = mode === "derive" ? new RecordDeriver(spec, table.file, table.header) : null;
const out = new Float64Array(spec.features.length);
let rows = 0;
let checksum = 0;
for await (const row of table.rows) {
  if (deriver !== null) {
    deriver.derive(row.cells, row.line, out);
    checksum += out[out.length - 1];
  } else {
    checksum += row.cells.length;
  }
  rows++;
}
const seconds = (performance.now() - started) / 1000;
const held = deriver?.heldBytes() ?? null;
console.log(
  JSON.stringify({
    mode,
    rows,
    seconds: Number(seconds.toFixed(3)),
    rowsPerSecond: Math.round(rows / seconds),
    peakRssMiB: Number((process.resourceUsage().maxRSS / 1024).toFixed(1)),
    accounts: deriver?.accounts ?? null,
    historyJsonBytesPerAccount: held && deriver ? Number((held.total / deriver.accounts).toFixed(1)) : null,
    largestHistoryJsonBytes: held?.largest ?? null,
    checksum,
  }),
);
