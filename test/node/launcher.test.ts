/**
 * The launcher (`bin/isodense.js`) runs every command with the V8 flag of its shebang
 * (`--max-semi-space-size=1`, which keeps a DuckDB fit's memory near its floor, docs/scaling.md),
 * also when it is started as `node bin/isodense.js …`, where the shebang is not read: it then starts
 * itself once more with the flag and passes output, exit code and signals through. ISODENSE_DEBUG
 * makes the command name the node flags it runs with.
 */
import { spawn } from "node:child_process";
import { mkdtemp, rm } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { fileURLToPath } from "node:url";
import { afterAll, beforeAll, describe, expect, it } from "vitest";

const bin = fileURLToPath(new URL("../../bin/isodense.js", import.meta.url));
const FLAG_LINE = /^isodense: pid (\d+), node flags: (.*)$/m;
let dir: string;

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), "isodense-launcher-"));
});
afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

interface Launch {
  pid: number;
  /** Resolves when the launcher ends: its exit code or the signal that ended it, and its output. */
  ended: Promise<{ code: number | null; signal: NodeJS.Signals | null; stdout: string; stderr: string }>;
  /** Resolves with the line in which the command names its pid and node flags. */
  flagLine: Promise<RegExpExecArray>;
}

function launch(args: string[], env: Record<string, string> = {}): Launch {
  const child = spawn(process.execPath, [bin, ...args], {
    cwd: dir,
    stdio: ["ignore", "pipe", "pipe"],
    env: { ...process.env, ISODENSE_RELAUNCHED: "", ISODENSE_DEBUG: "1", ...env },
  });
  let stdout = "";
  let stderr = "";
  let onFlagLine: (match: RegExpExecArray) => void = () => {};
  const flagLine = new Promise<RegExpExecArray>((resolve) => (onFlagLine = resolve));
  child.stdout.setEncoding("utf8").on("data", (d: string) => (stdout += d));
  child.stderr.setEncoding("utf8").on("data", (d: string) => {
    stderr += d;
    const match = FLAG_LINE.exec(stderr);
    if (match) onFlagLine(match);
  });
  const ended = new Promise<{ code: number | null; signal: NodeJS.Signals | null; stdout: string; stderr: string }>((resolve, reject) => {
    child.on("error", reject);
    child.on("close", (code, signal) => resolve({ code, signal, stdout, stderr }));
  });
  return { pid: child.pid!, ended, flagLine };
}

describe("node bin/isodense.js", () => {
  it("runs the command with the shebang's V8 flag, in a process of its own, and passes its output and exit code through", async () => {
    const help = launch(["--help"]);
    const { code, stdout } = await help.ended;
    const [, pid, flags] = await help.flagLine;
    expect(flags.split(" ")).toContain("--max-semi-space-size=1");
    expect(Number(pid)).not.toBe(help.pid);
    expect(stdout).toContain("usage: isodense <command>");
    expect(code).toBe(0);

    const missing = launch(["fit", "missing.csv", "--features", "amount", "--out", "m.json"]);
    const failed = await missing.ended;
    expect(failed.stderr).toContain("isodense fit: <ledger> missing.csv: file not found");
    expect(failed.code).toBe(2);
  });

  it("starts itself only once: already relaunched, it runs the command as it was started", async () => {
    const run = launch(["--help"], { ISODENSE_RELAUNCHED: "1" });
    const [, pid, flags] = await run.flagLine;
    expect(flags).toBe("(none)");
    expect(Number(pid)).toBe(run.pid);
    expect((await run.ended).code).toBe(0);
  });

  it("keeps a semi-space size given to node, without starting again", async () => {
    const run = launch(["--help"], { NODE_OPTIONS: "--max-semi-space-size=2" });
    const [, pid] = await run.flagLine;
    expect(Number(pid)).toBe(run.pid);
    expect((await run.ended).code).toBe(0);
  });

  it("hands a signal sent to it on to the command and ends by the same signal", async () => {
    const run = launch(["demo-ledger", "--out", join(dir, "long.csv"), "--rows", "2000000"]);
    const [, pid] = await run.flagLine;
    process.kill(run.pid, "SIGTERM");
    const { signal } = await run.ended;
    expect(signal).toBe("SIGTERM");
    // The command ended before the launcher did.
    expect(() => process.kill(Number(pid), 0)).toThrow(/ESRCH/);
  });
});
