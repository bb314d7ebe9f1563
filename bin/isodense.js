#!/usr/bin/env -S node --max-semi-space-size=1
// Launcher: registers tsx so the CLI runs from its TypeScript sources, the same files the worker bundles.
// A small young generation (1 MB semi-spaces): DuckDB frees a result chunk only when its JavaScript
// wrapper is collected, so frequent minor collections keep a streaming fit's memory near its floor
// (1M × 32 CSV: about 270 MiB peak instead of 350; bench/sources.ts runs the fit the same way).
// Run as `node bin/isodense.js …` the shebang's flag is skipped, so the launcher starts itself once
// more with it (the heap's size is fixed when V8 starts; it cannot be set from inside).
import { spawn } from "node:child_process";
import { fileURLToPath } from "node:url";

const V8_FLAG = "--max-semi-space-size=1";
/** Set in the relaunched process, so a flag that fails to show up cannot start an endless chain. */
const RELAUNCHED = "ISODENSE_RELAUNCHED";

const flagGiven = [...process.execArgv, ...(process.env.NODE_OPTIONS ?? "").split(/\s+/)].some((arg) => arg.startsWith("--max-semi-space-size"));
if (!flagGiven && process.env[RELAUNCHED] !== "1") {
  const child = spawn(process.execPath, [...process.execArgv, V8_FLAG, fileURLToPath(import.meta.url), ...process.argv.slice(2)], {
    stdio: "inherit",
    env: { ...process.env, [RELAUNCHED]: "1" },
  });
  // A signal meant for the command reaches it; the command's own end (code or signal) is ours.
  const forwarded = ["SIGINT", "SIGTERM", "SIGHUP"];
  for (const signal of forwarded) process.on(signal, () => child.kill(signal));
  child.on("exit", (code, signal) => {
    if (signal === null) {
      process.exitCode = code ?? 1;
      return;
    }
    for (const s of forwarded) process.removeAllListeners(s);
    process.kill(process.pid, signal);
  });
} else {
  // The mark guards this one start only: a command that runs isodense again gets the flag anew.
  delete process.env[RELAUNCHED];
  // ISODENSE_DEBUG also names the V8 flags the command runs with (tested in test/node/launcher.test.ts).
  if (process.env.ISODENSE_DEBUG) process.stderr.write(`isodense: pid ${process.pid}, node flags: ${process.execArgv.join(" ") || "(none)"}\n`);
  const { register } = await import("tsx/esm/api");
  register();
  const { main } = await import("../cli/main.ts");
  process.exitCode = await main(process.argv.slice(2));
}
