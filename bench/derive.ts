/**
 * Offline `derive` on 1,000,000 payment records of 100,000 accounts (generated here, fixed seed,
 * time order): rows per second against the CSV reader alone on the same file (the baseline, same
 * run); peak memory over that baseline's, per account (what holding the histories costs); and the
 * histories' size as the JSON a store keeps. Each measurement runs in its own process. Figures
 * printed and returned; `run-all.ts` writes them to bench/results/core.json.
 * Alone: node bin/run-ts.js bench/derive.ts
 */
import { execFileSync } from "node:child_process";
import { createWriteStream, mkdtempSync, rmSync, writeFileSync } from "node:fs";
import { cpus, tmpdir } from "node:os";
import { join } from "node:path";
import { once } from "node:events";
import { xorshift32 } from "./xorshift";

const ROWS = 1_000_000;

/** Every derivation kind, with windows of 24 h, 7 d and 30 d. */
const SPEC = {
  record: { id: "id", time: "at", account: "account", segment: "channel", retention: "365d" },
  features: [
    { name: "amount", transform: "log" },
    { name: "shippingShare", transform: "yeo-johnson", ratio: ["shipping", "amount"] },
    { name: "accountAgeDays", transform: "log1p", since: { column: "openedAt", unit: "days" } },
    { name: "paymentsLast24h", transform: "log1p", count: { within: "24h" } },
    { name: "spent7d", transform: "log1p", sum: { column: "amount", within: "7d" } },
    { name: "destinations30d", transform: "log1p", distinct: { column: "shipTo", within: "30d" } },
    { name: "hoursSincePrevious", transform: "log1p", sincePrevious: { unit: "hours", none: 8760 } },
    { name: "amountVsAccountAverage", transform: "log", vsMean: { column: "amount", none: 1 } },
    { name: "hourOfDay", transform: "cyclic-hour", hourOfDay: { timeZone: "Europe/Berlin" } },
  ],
};

/** Writes `ROWS` invented payments over 90 days on `accounts` accounts, in time order. */
async function writeLedger(path: string, accounts: number): Promise<void> {
  const next = xorshift32(20261204);
  const uniform = () => (next() + 0.5) / 4294967296;
  const out = createWriteStream(path);
  out.write("id,at,account,channel,amount,shipping,openedAt,shipTo\n");
  const start = Date.UTC(2026, 6, 1);
  const meanGapMs = (90 * 86_400_000) / ROWS;
  let t = start;
  let chunk = "";
  for (let i = 0; i < ROWS; i++) {
    t += Math.floor(-Math.log(uniform()) * meanGapMs);
    const account = next() % accounts;
    const amount = (5 + 200 * uniform() ** 2).toFixed(2);
    const shipping = (3 + (next() % 600) / 100).toFixed(2);
    const opened = new Date(start - (account % 997) * 86_400_000).toISOString();
    chunk += `p${i},${new Date(t).toISOString()},a${account},${next() % 3 === 0 ? "app" : "web"},${amount},${shipping},${opened},d${account}-${next() % 4}\n`;
    if (chunk.length > 1 << 16) {
      if (!out.write(chunk)) await once(out, "drain");
      chunk = "";
    }
  }
  out.end(chunk);
  await once(out, "finish");
}

function child(mode: string, ledger: string, spec: string): Record<string, number | string | null> {
  const out = execFileSync(process.execPath, ["bin/run-ts.js", "bench/derive-child.ts", mode, ledger, spec], {
    cwd: new URL("../", import.meta.url),
    encoding: "utf8",
    maxBuffer: 1 << 20,
  });
  return JSON.parse(out.trim().split("\n").pop() ?? "{}");
}

/**
 * Runs the derive benchmark.
 * @returns the figures (throughput, its ratio to reading alone, memory per account)
 */
export async function benchDerive(): Promise<Record<string, unknown>> {
  const dir = mkdtempSync(join(tmpdir(), "isodense-bench-derive-"));
  try {
    const spec = join(dir, "spec.json");
    writeFileSync(spec, JSON.stringify(SPEC));
    const ledger = join(dir, "ledger.csv");
    await writeLedger(ledger, 100_000);
    const read = child("read", ledger, spec);
    const derived = child("derive", ledger, spec);
    const rssPerAccountBytes = ((Number(derived.peakRssMiB) - Number(read.peakRssMiB)) * 1024 * 1024) / Number(derived.accounts);
    const figures = {
      rows: ROWS,
      readRowsPerSecond: read.rowsPerSecond,
      deriveRowsPerSecond: derived.rowsPerSecond,
      deriveToReadRatio: Number((Number(derived.rowsPerSecond) / Number(read.rowsPerSecond)).toFixed(3)),
      accounts: derived.accounts,
      peakRssMiB: derived.peakRssMiB,
      readPeakRssMiB: read.peakRssMiB,
      peakRssBytesPerAccount: Math.round(rssPerAccountBytes),
      historyJsonBytesPerAccount: derived.historyJsonBytesPerAccount,
      largestHistoryJsonBytes: derived.largestHistoryJsonBytes,
    };
    console.log(
      `  1,000,000 records, 9 features: derive ${Number(derived.rowsPerSecond).toLocaleString("en")} rows/s against ${Number(read.rowsPerSecond).toLocaleString("en")} rows/s reading alone (ratio ${figures.deriveToReadRatio})`,
    );
    console.log(
      `  memory: peak RSS ${derived.peakRssMiB} MiB with ${Number(derived.accounts).toLocaleString("en")} accounts against ${read.peakRssMiB} MiB reading alone: ` +
        `${figures.peakRssBytesPerAccount.toLocaleString("en")} bytes per account; history as JSON ${derived.historyJsonBytesPerAccount} bytes per account (largest ${derived.largestHistoryJsonBytes})`,
    );
    return figures;
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

// Run alone, it writes its own file; `run-all.ts` puts the same figures in core.json.
if (process.argv.some((arg) => arg.endsWith("bench/derive.ts"))) {
  const figures = await benchDerive();
  writeFileSync(
    new URL("results/derive.json", import.meta.url),
    JSON.stringify(
      { measuredAt: new Date().toISOString(), machine: { cpus: cpus().length, model: cpus()[0]?.model ?? "unknown", node: process.version }, derive: figures },
      null,
      2,
    ) + "\n",
  );
  console.log("written bench/results/derive.json");
}
