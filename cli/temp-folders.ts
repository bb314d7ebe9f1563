/**
 * Private temporary folders of a running command (a fit's staged rows, DuckDB's spill folder),
 * removed when the command is interrupted too. Node's default answer to SIGINT, SIGTERM and SIGHUP
 * ends the process at once, without running `finally` blocks, which left a staged fit's file behind
 * (8 bytes per value: 256 MB for 1M × 32). While a folder is held, one handler removes every held
 * folder and then ends the process by the same signal, so the caller still sees which signal ended
 * it (exit status 128 + its number in a shell).
 */
import { mkdtempSync, rmSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";

const HANDLED_SIGNALS = ["SIGINT", "SIGTERM", "SIGHUP"] as const;

const held = new Set<string>();

/**
 * Creates a private folder `<root>/<prefix>XXXXXX`, removed by {@link removeTempFolder} or when the
 * process is interrupted by a signal, whichever comes first.
 *
 * @example
 * const folder = makeTempFolder("isodense-stage-");
 * try { … } finally { removeTempFolder(folder); }
 */
export function makeTempFolder(prefix: string, root: string = tmpdir()): string {
  const folder = mkdtempSync(join(root, prefix));
  if (held.size === 0) for (const signal of HANDLED_SIGNALS) process.on(signal, removeAllAndEnd);
  held.add(folder);
  return folder;
}

/** Removes a folder made by {@link makeTempFolder} with everything in it; safe to call twice. */
export function removeTempFolder(folder: string): void {
  rmSync(folder, { recursive: true, force: true });
  held.delete(folder);
  if (held.size === 0) for (const signal of HANDLED_SIGNALS) process.off(signal, removeAllAndEnd);
}

/** Folders held right now (tests). */
export function heldTempFolders(): readonly string[] {
  return [...held];
}

function removeAllAndEnd(signal: NodeJS.Signals): void {
  for (const folder of held) rmSync(folder, { recursive: true, force: true });
  held.clear();
  for (const s of HANDLED_SIGNALS) process.off(s, removeAllAndEnd);
  // With no listener left, the signal's default action ends the process as it would have.
  process.kill(process.pid, signal);
}
