import type { CommandIO } from "./io";

/**
 * A CommandIO that records what a command writes, for tests: `out()` and `err()` return everything
 * written so far to stdout and stderr (stderr reports no TTY, so no progress bar is drawn).
 * @example const c = captureIO(); await main(["--help"], c.io); c.out() // "isodense …"
 */
export function captureIO(): { io: CommandIO; out: () => string; err: () => string } {
  let out = "";
  let err = "";
  return {
    io: { stdout: { write: (t: string) => (out += t) }, stderr: { isTTY: false, write: (t: string) => (err += t) } },
    out: () => out,
    err: () => err,
  };
}
