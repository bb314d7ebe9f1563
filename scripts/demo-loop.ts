/**
 * `npm run demo:loop`: runs the loop once on the demo against the running service (`npm start`):
 * decisions from the demo ledger's labels → `isodense renew` (label export, refit on the latest
 * 28 days, backtest, gate, shadow), printing each step's output (docs/loop.md walks through it).
 *
 * Options: --url (default http://127.0.0.1:8787), --ledger (default demo-ledger/data/ledger.csv),
 * --out folder renew keeps its files in (default test-output/demo-loop). Credentials: the first admin and
 * analyst users of .dev.vars.
 */
import { mkdirSync } from "node:fs";
import { dirname, join, resolve } from "node:path";
import { fileURLToPath } from "node:url";
import { stringOption, type CommandSpec } from "../cli/args";
import { parseScriptArgs } from "./script-args";
import { DemoLoopError, runDemoLoop } from "./demo-loop-core";
import { credentialsOf, readDevVars } from "./dev-vars";

const root = resolve(dirname(fileURLToPath(import.meta.url)), "..");

const spec: CommandSpec = {
  command: "npm run demo:loop --",
  summary: "Runs decisions → isodense renew (refit, gate, shadow) on the demo against the running service.",
  positionals: [],
  options: [
    { name: "url", kind: "string", valueName: "url", description: "service base URL", defaultText: "http://127.0.0.1:8787" },
    { name: "ledger", kind: "string", valueName: "ledger.csv", description: "the demo ledger", defaultText: "demo-ledger/data/ledger.csv" },
    {
      name: "out",
      kind: "string",
      valueName: "folder",
      description: "where renew keeps labels.csv, live.json, the candidate and its report",
      defaultText: "test-output/demo-loop",
    },
  ],
};

async function main(): Promise<number> {
  const args = parseScriptArgs(process.argv.slice(2), spec, "demo:loop");
  if (typeof args === "number") return args;
  const vars = readDevVars(join(root, ".dev.vars"));
  const admin = credentialsOf(vars, "ADMIN_CREDENTIALS")[0];
  const analyst = credentialsOf(vars, "ANALYST_CREDENTIALS")[0];
  if (!admin || !analyst) {
    process.stderr.write("demo:loop: .dev.vars needs an ADMIN_CREDENTIALS and an ANALYST_CREDENTIALS entry (run npm start once)\n");
    return 2;
  }
  const workDir = resolve(stringOption(args, "out") ?? join(root, "test-output/demo-loop"));
  mkdirSync(workDir, { recursive: true });
  try {
    const figures = await runDemoLoop({
      url: stringOption(args, "url") ?? "http://127.0.0.1:8787",
      adminToken: admin.token,
      analystToken: analyst.token,
      ledgerPath: resolve(stringOption(args, "ledger") ?? join(root, "demo-ledger/data/ledger.csv")),
      workDir,
      write: (t) => process.stdout.write(t),
    });
    process.stdout.write(`${JSON.stringify(figures, null, 2)}\n`);
    return 0;
  } catch (error) {
    if (error instanceof DemoLoopError) {
      process.stderr.write(`demo:loop: ${error.message}\n`);
      return 1;
    }
    throw error;
  }
}

process.exitCode = await main();
