/**
 * Two ways for the CLI suites to run isodense: as people do, a child process of `bin/isodense.js`
 * (exit code and streams of a real process), or in this process through `main()` with captured
 * streams, for the many cases about messages and exit codes, where a process start (about 2 s of
 * CPU to load the TypeScript sources) would cost far more than the command itself.
 */
import { spawn } from "node:child_process";
import { join } from "node:path";
import { fileURLToPath } from "node:url";
import { captureIO } from "../../cli/capture-io";
import { main } from "../../cli/main";

export const repoRoot = fileURLToPath(new URL("../../", import.meta.url));
const bin = join(repoRoot, "bin", "isodense.js");
/** The V8 flag bin/isodense.js would start itself again to add (launcher.test.ts covers that relaunch). */
const LAUNCHER_FLAGS = ["--max-semi-space-size=1"];

/** What one run of the CLI ended with. */
export interface CliRun {
  code: number | null;
  stdout: string;
  stderr: string;
}

/** Runs `node bin/isodense.js ARGS` in `cwd` and collects its exit code and output. */
export function spawnIsodense(args: string[], cwd: string): Promise<CliRun> {
  return new Promise((resolve, reject) => {
    const child = spawn(process.execPath, [...LAUNCHER_FLAGS, bin, ...args], { cwd, stdio: ["ignore", "pipe", "pipe"], env: { ...process.env, ISODENSE_DEBUG: "" } });
    let stdout = "";
    let stderr = "";
    child.stdout.setEncoding("utf8").on("data", (d: string) => (stdout += d));
    child.stderr.setEncoding("utf8").on("data", (d: string) => (stderr += d));
    child.on("error", reject);
    child.on("close", (code) => resolve({ code, stdout, stderr }));
  });
}

/**
 * Runs the command in this process, as bin/isodense.js would after its start. Paths in ARGS are
 * taken from the test process's working folder, so give them absolute.
 */
export async function runIsodense(args: string[]): Promise<CliRun> {
  const captured = captureIO();
  const code = await main(args, captured.io);
  return { code, stdout: captured.out(), stderr: captured.err() };
}
