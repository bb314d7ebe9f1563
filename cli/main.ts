/**
 * The `isodense` command: dispatches to one command module, loaded on demand, so a command whose
 * module is missing or broken fails alone and `isodense --help` always works.
 */
import { readFileSync } from "node:fs";
import { processIO, writeLines, type CommandIO } from "./io";

/** A command's entry point: the words after its name → exit code. */
export type CommandRunner = (argv: string[], io?: CommandIO) => Promise<number>;

/** One entry of the command table. */
export interface CommandEntry {
  name: string;
  summary: string;
  /** Loads the command module and returns its runner. */
  load: () => Promise<CommandRunner>;
}

/**
 * Loads an optional command that another part of the project provides, by file URL so that the
 * type checker does not require the file to exist yet.
 */
async function loadOptional(relativePath: string, exportName: string): Promise<CommandRunner> {
  const url = new URL(relativePath, import.meta.url).href;
  const module = (await import(url)) as Record<string, unknown>;
  const runner = module[exportName];
  if (typeof runner !== "function") {
    throw new Error(`${relativePath} does not export a function named ${exportName}`);
  }
  return runner as CommandRunner;
}

/** Every command, in the order `isodense --help` lists them. New commands (tune, refit) go here. */
export const COMMANDS: readonly CommandEntry[] = [
  {
    name: "derive",
    summary: "derive the features of a record spec from a ledger of payment records (the same code the edge runs)",
    load: async () => (await import("./commands/derive")).deriveCommand,
  },
  {
    name: "fit",
    summary: "fit a model to the normal payments of a ledger and write the model file",
    load: async () => (await import("./commands/fit")).fitCommand,
  },
  {
    name: "score",
    summary: "score a ledger with a model file (backtest: precision, recall, flag rate)",
    load: async () => (await import("./commands/score")).scoreCommand,
  },
  {
    name: "tune",
    summary: "choose a new cutoff from labelled payments and write a new model version",
    load: async () => (await import("./commands/tune")).tuneCommand,
  },
  {
    name: "refit",
    summary: "fit a candidate on a ledger without the confirmed fraud and compare it with the live model",
    load: async () => (await import("./commands/refit")).refitCommand,
  },
  {
    name: "renew",
    summary: "the weekly refit for a scheduler: refit on the latest window, check it against live, publish it as the shadow",
    load: async () => (await import("./commands/renew")).renewCommand,
  },
  {
    name: "drift",
    summary: "compare a ledger with a model's training traffic (PSI per column and for the score, flag rate)",
    load: async () => (await import("./commands/drift")).driftCommand,
  },
  {
    name: "sql",
    summary: "print the SQL that computes a fit's moments or sample on your own engine (PostgreSQL, DuckDB, ANSI)",
    load: async () => (await import("./commands/sql")).sqlCommand,
  },
  {
    name: "publish",
    summary: "publish a model file to the scoring service",
    load: () => loadOptional("./commands/publish.ts", "publishCommand"),
  },
  {
    name: "demo-ledger",
    summary: "write a fictional demo ledger to try the other commands on",
    load: () => loadOptional("../demo-ledger/cli.ts", "demoLedgerCommand"),
  },
];

/** The text of `isodense --help`. */
export function topLevelHelp(): string {
  const width = Math.max(...COMMANDS.map((c) => c.name.length)) + 2;
  return [
    "usage: isodense <command> [arguments] [options]",
    "",
    "Screens card-not-present payments with a multivariate Gaussian: fit on normal traffic, flag the",
    "payments that lie far from it for human review.",
    "",
    "commands:",
    ...COMMANDS.map((c) => `  ${c.name.padEnd(width)}${c.summary}`),
    "",
    "Run 'isodense <command> --help' for a command's arguments and options.",
    "Exit codes: 0 done; 1 refused by diagnostics; 2 usage or input error; 3 internal error.",
    "",
  ].join("\n");
}

function packageVersion(): string {
  const text = readFileSync(new URL("../package.json", import.meta.url), "utf8");
  return (JSON.parse(text) as { version: string }).version;
}

/**
 * Runs the CLI with the process arguments after `node bin/isodense.js`.
 * @returns the exit code
 * @example process.exitCode = await main(["fit", "ledger.csv", "--out", "model.json", "--features", "amount"])
 */
export async function main(argv: string[], io: CommandIO = processIO()): Promise<number> {
  const [first, ...rest] = argv;
  if (first === undefined) {
    io.stderr.write(topLevelHelp());
    return 2;
  }
  if (first === "--help" || first === "-h") {
    io.stdout.write(topLevelHelp());
    return 0;
  }
  if (first === "--version") {
    io.stdout.write(`isodense ${packageVersion()}\n`);
    return 0;
  }
  let name = first;
  let args = rest;
  if (first === "help") {
    if (rest.length === 0) {
      io.stdout.write(topLevelHelp());
      return 0;
    }
    name = rest[0];
    args = ["--help"];
  }
  const entry = COMMANDS.find((c) => c.name === name);
  if (entry === undefined) {
    writeLines(io.stderr, [`isodense: unknown command '${name}'; commands are: ${COMMANDS.map((c) => c.name).join(", ")}`, "run 'isodense --help' for usage"]);
    return 2;
  }
  let runner: CommandRunner;
  try {
    runner = await entry.load();
  } catch (error) {
    writeLines(io.stderr, [`isodense ${entry.name} is not available: cannot load its module (${(error as Error).message})`]);
    return 3;
  }
  return runner(args, io);
}
