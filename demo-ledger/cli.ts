/**
 * `isodense demo-ledger`: writes the fictional shop's payment ledger as CSV, streaming row by row
 * (memory stays flat however many rows are asked for). Importable by the main CLI and runnable on
 * its own: `node bin/run-ts.js demo-ledger/cli.ts --out demo-ledger/data/ledger.csv`.
 */

import { createWriteStream } from "node:fs";
import { mkdir, rename, rm } from "node:fs/promises";
import { once } from "node:events";
import { dirname, resolve } from "node:path";
import { pathToFileURL } from "node:url";
import {
  CHANNELS,
  DEFAULT_ROWS,
  DEFAULT_SEED,
  DEFAULT_START,
  FRAUD_PATTERNS,
  LedgerOptionError,
  MAX_ROWS,
  csvHeader,
  formatCsvRow,
  generateLedger,
  type LedgerOptions,
} from "./generate";

const USAGE = `Usage: isodense demo-ledger --out <path> [--rows N] [--seed S] [--start YYYY-MM-DD] [--price-rise R --rise-from YYYY-MM-DD]

Writes the demo ledger: card-not-present payments of Orvenna Housewares, an invented online
shop, over eight weeks, labelled fraud/legitimate. The same seed always gives the same file.

Options:
  --out <path>     CSV file to write (parent folders are created; written via a temporary file)
  --rows <N>       number of payments, 1 to ${MAX_ROWS} (default ${DEFAULT_ROWS})
  --seed <S>       random seed, integer 0 to 4294967295 (default ${DEFAULT_SEED})
  --start <date>   first day, YYYY-MM-DD or a UTC timestamp ending in Z (default ${DEFAULT_START})
  --price-rise <R> a drifted period: prices R times higher on top (0.25 = a quarter dearer) from
                   --rise-from on, payment for payment the same ledger otherwise (both or neither)
  --rise-from <date> first day of the price rise, same forms as --start
  -h, --help       show this help
`;

/** Lines are gathered into chunks of about this many characters before each write. */
const CHUNK_CHARS = 1 << 16;

interface ParsedArgs {
  help: boolean;
  out?: string;
  options: LedgerOptions;
}

/** A command-line mistake: names the flag and the rule. */
class DemoLedgerUsageError extends Error {
  constructor(
    readonly flag: string,
    readonly rule: string,
  ) {
    super(`${flag}: ${rule}`);
    this.name = "DemoLedgerUsageError";
  }
}

const FLAG_OF_OPTION: Record<string, string> = { rows: "--rows", seed: "--seed", start: "--start", "priceRise.rise": "--price-rise", "priceRise.from": "--rise-from" };
const FLAGS = ["--out", "--rows", "--seed", "--start", "--price-rise", "--rise-from"];

function parseArgs(argv: readonly string[]): ParsedArgs {
  const parsed: ParsedArgs = { help: false, options: {} };
  const seen = new Set<string>();
  let riseText: string | undefined;
  let riseFrom: string | undefined;
  for (let i = 0; i < argv.length; i++) {
    const arg = argv[i];
    if (arg === "-h" || arg === "--help") {
      parsed.help = true;
      continue;
    }
    if (!arg.startsWith("--")) {
      throw new DemoLedgerUsageError(arg, `unexpected argument; demo-ledger takes only options (${FLAGS.join(", ")})`);
    }
    const eq = arg.indexOf("=");
    const flag = eq >= 0 ? arg.slice(0, eq) : arg;
    if (!FLAGS.includes(flag)) {
      throw new DemoLedgerUsageError(flag, `unknown option; expected ${FLAGS.join(", ")} or --help`);
    }
    if (seen.has(flag)) throw new DemoLedgerUsageError(flag, "given more than once");
    seen.add(flag);
    let value: string;
    if (eq >= 0) {
      value = arg.slice(eq + 1);
    } else {
      if (i + 1 >= argv.length) throw new DemoLedgerUsageError(flag, "needs a value");
      value = argv[++i];
    }
    if (value === "") throw new DemoLedgerUsageError(flag, "needs a non-empty value");
    switch (flag) {
      case "--out":
        parsed.out = value;
        break;
      case "--rows":
        parsed.options.rows = wholeNumber(flag, value, `must be an integer from 1 to ${MAX_ROWS}`);
        break;
      case "--seed":
        parsed.options.seed = wholeNumber(flag, value, "must be an integer from 0 to 4294967295");
        break;
      case "--start":
        parsed.options.start = value;
        break;
      case "--price-rise": {
        if (!/^-?\d{1,3}(\.\d{1,6})?$/.test(value)) throw new DemoLedgerUsageError(flag, `must be a decimal number such as 0.25 (received ${JSON.stringify(value)})`);
        riseText = value;
        break;
      }
      case "--rise-from":
        riseFrom = value;
        break;
    }
  }
  if ((riseText === undefined) !== (riseFrom === undefined)) {
    throw new DemoLedgerUsageError(riseText === undefined ? "--price-rise" : "--rise-from", "--price-rise and --rise-from go together: how much dearer, and from which day");
  }
  if (riseText !== undefined && riseFrom !== undefined) parsed.options.priceRise = { rise: Number(riseText), from: riseFrom };
  return parsed;
}

/** Digits only (no sign, exponent, separators or decimals), so "1e3" or "10.0" are refused. */
function wholeNumber(flag: string, text: string, rule: string): number {
  if (!/^\d{1,16}$/.test(text)) throw new DemoLedgerUsageError(flag, `${rule} (received ${JSON.stringify(text)})`);
  return Number(text);
}

/** Counts kept while streaming, for the closing summary. */
interface Tally {
  rows: number;
  fraud: number;
  byPattern: Map<string, number>;
  byChannel: Map<string, number>;
}

/** Writes the ledger to `target` through a temporary sibling file, honouring back-pressure. */
async function writeLedger(target: string, options: LedgerOptions): Promise<Tally> {
  const rows = generateLedger(options); // validates the options before any file is touched
  await mkdir(dirname(target), { recursive: true });
  const partial = `${target}.partial`;
  const stream = createWriteStream(partial, { encoding: "utf8" });
  const tally: Tally = { rows: 0, fraud: 0, byPattern: new Map(), byChannel: new Map() };
  const failed = new Promise<never>((_, reject) => stream.once("error", reject));
  failed.catch(() => undefined); // observed below; keeps an early error from going unhandled
  const write = async (chunk: string): Promise<void> => {
    if (!stream.write(chunk)) await Promise.race([once(stream, "drain"), failed]);
  };
  try {
    let chunk = csvHeader() + "\n";
    for (const row of rows) {
      chunk += formatCsvRow(row) + "\n";
      tally.rows += 1;
      tally.byChannel.set(row.channel, (tally.byChannel.get(row.channel) ?? 0) + 1);
      if (row.label === "fraud") {
        tally.fraud += 1;
        tally.byPattern.set(row.fraudPattern, (tally.byPattern.get(row.fraudPattern) ?? 0) + 1);
      }
      if (chunk.length >= CHUNK_CHARS) {
        await write(chunk);
        chunk = "";
      }
    }
    if (chunk.length > 0) await write(chunk);
    stream.end();
    await Promise.race([once(stream, "finish"), failed]);
    await rename(partial, target);
    return tally;
  } catch (error) {
    stream.destroy();
    await rm(partial, { force: true });
    throw error;
  }
}

const count = (n: number): string => n.toLocaleString("en-US");

function summary(target: string, tally: Tally): string {
  const percent = ((100 * tally.fraud) / tally.rows).toFixed(2);
  const patterns = FRAUD_PATTERNS.map((p) => `${p} ${count(tally.byPattern.get(p) ?? 0)}`).join(", ");
  const channels = CHANNELS.map((c) => `${c} ${count(tally.byChannel.get(c) ?? 0)}`).join(", ");
  return [`Wrote ${count(tally.rows)} payments to ${target}`, `  fraud: ${count(tally.fraud)} (${percent} %): ${patterns}`, `  channels: ${channels}`].join("\n");
}

/**
 * Runs `isodense demo-ledger` with the arguments after the command name.
 * @param argv e.g. `["--out", "demo-ledger/data/ledger.csv", "--rows", "60000"]`
 * @returns exit code: 0 written (or help shown), 2 usage error (flag and rule on stderr),
 *   1 the file could not be written
 * @example await demoLedgerCommand(["--out", "/tmp/ledger.csv", "--rows", "2000"]) // 0
 */
export async function demoLedgerCommand(argv: string[]): Promise<number> {
  let parsed: ParsedArgs;
  try {
    parsed = parseArgs(argv);
    if (parsed.help) {
      process.stdout.write(USAGE);
      return 0;
    }
    if (parsed.out === undefined) throw new DemoLedgerUsageError("--out", "is required: the CSV file to write");
  } catch (error) {
    return usageFailure(error);
  }
  const target = parsed.out;
  try {
    const tally = await writeLedger(target, parsed.options);
    process.stdout.write(summary(target, tally) + "\n");
    return 0;
  } catch (error) {
    if (error instanceof LedgerOptionError) {
      return usageFailure(new DemoLedgerUsageError(FLAG_OF_OPTION[error.field] ?? error.field, `${error.rule} (received ${error.received})`));
    }
    const reason = error instanceof Error ? error.message : String(error);
    process.stderr.write(`demo-ledger: could not write ${target}: ${reason}\n`);
    return 1;
  }
}

function usageFailure(error: unknown): number {
  if (!(error instanceof DemoLedgerUsageError)) throw error;
  process.stderr.write(`demo-ledger: ${error.message}\nRun "isodense demo-ledger --help" for usage.\n`);
  return 2;
}

// Run directly (`node bin/run-ts.js demo-ledger/cli.ts …`), not when imported by the main CLI.
if (process.argv[1] && import.meta.url === pathToFileURL(resolve(process.argv[1])).href) {
  process.exitCode = await demoLedgerCommand(process.argv.slice(2));
}
