import { spawnSync } from "node:child_process";
import { existsSync } from "node:fs";
import { mkdtemp, readFile, readdir, rm, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join, resolve } from "node:path";
import { fileURLToPath } from "node:url";
import { afterAll, afterEach, beforeAll, describe, expect, it, vi } from "vitest";
import { demoLedgerCommand } from "./cli";
import { ledgerCsvLines } from "./generate";

const repoRoot = resolve(fileURLToPath(new URL(".", import.meta.url)), "..");
let workDir: string;

beforeAll(async () => {
  workDir = await mkdtemp(join(tmpdir(), "isodense-demo-ledger-"));
});

afterAll(async () => {
  await rm(workDir, { recursive: true, force: true });
});

afterEach(() => {
  vi.restoreAllMocks();
});

/** Runs the command in-process, collecting what it prints. */
async function run(argv: string[]): Promise<{ code: number; stdout: string; stderr: string }> {
  let stdout = "";
  let stderr = "";
  vi.spyOn(process.stdout, "write").mockImplementation((chunk: string | Uint8Array) => {
    stdout += String(chunk);
    return true;
  });
  vi.spyOn(process.stderr, "write").mockImplementation((chunk: string | Uint8Array) => {
    stderr += String(chunk);
    return true;
  });
  const code = await demoLedgerCommand(argv);
  vi.restoreAllMocks();
  return { code, stdout, stderr };
}

const expectedCsv = (options: { rows: number; seed?: number; start?: string }): string => [...ledgerCsvLines(options)].join("\n") + "\n";

describe("demo-ledger command", () => {
  it("writes exactly the generator's CSV, creating missing folders and leaving no temporary file", async () => {
    const out = join(workDir, "nested", "deeper", "ledger.csv");
    const result = await run(["--out", out, "--rows", "3000", "--seed", "9", "--start=2026-11-02"]);
    expect(result.stderr).toBe("");
    expect(result.code).toBe(0);
    expect(await readFile(out, "utf8")).toBe(expectedCsv({ rows: 3000, seed: 9, start: "2026-11-02" }));
    expect(await readdir(join(workDir, "nested", "deeper"))).toEqual(["ledger.csv"]);
    expect(result.stdout).toContain("Wrote 3,000 payments");
    expect(result.stdout).toMatch(/fraud: \d+ \(\d+\.\d{2} %\): test-burst \d+, takeover-spike \d+, reship-haul \d+, ordinary-parts \d+/);
  });

  it("streams a ledger larger than one write chunk without losing or reordering rows", async () => {
    const out = join(workDir, "big.csv");
    expect((await run(["--out", out, "--rows", "20000"])).code).toBe(0);
    const text = await readFile(out, "utf8");
    expect(text.length).toBeGreaterThan(4 * (1 << 16));
    expect(text).toBe(expectedCsv({ rows: 20_000 }));
  });

  it.each([
    [[], "--out: is required"],
    [["--out"], "--out: needs a value"],
    [["--out", "x.csv", "--rows", "1e3"], '--rows: must be an integer from 1 to 2000000 (received "1e3")'],
    [["--out", "x.csv", "--rows", "0"], "--rows: must be an integer from 1 to 2000000 (received 0)"],
    [["--out", "x.csv", "--seed", "-4"], '--seed: must be an integer from 0 to 4294967295 (received "-4")'],
    [["--out", "x.csv", "--seed", "4294967296"], "--seed: must be an integer from 0 to 4294967295 (received 4294967296)"],
    [["--out", "x.csv", "--start", "2026-13-01"], "--start: must be a calendar date YYYY-MM-DD"],
    [["--out", "x.csv", "--days", "3"], "--days: unknown option"],
    [["--out", "x.csv", "--rows", "5", "--rows", "6"], "--rows: given more than once"],
    [["--out", "x.csv", "ledger"], "ledger: unexpected argument"],
  ])("refuses %j with exit code 2 and names the flag and the rule", async (argv, message) => {
    const cwdFile = join(workDir, "x.csv");
    const result = await run(argv.map((a) => (a === "x.csv" ? cwdFile : a)));
    expect(result.code).toBe(2);
    expect(result.stderr).toContain(message);
    expect(result.stderr).toContain("--help");
    expect(existsSync(cwdFile)).toBe(false);
  });

  it("reports a path that cannot be written with exit code 1 and leaves no partial file", async () => {
    const blocker = join(workDir, "not-a-folder");
    await writeFile(blocker, "a file where a folder is expected\n");
    const result = await run(["--out", join(blocker, "ledger.csv"), "--rows", "10"]);
    expect(result.code).toBe(1);
    expect(result.stderr).toContain(`could not write ${join(blocker, "ledger.csv")}`);
    expect(existsSync(join(blocker, "ledger.csv.partial"))).toBe(false);
  });

  it("prints its usage for --help and exits 0 without writing", async () => {
    const result = await run(["--help"]);
    expect(result.code).toBe(0);
    expect(result.stdout).toContain("Usage: isodense demo-ledger --out <path>");
    expect(result.stdout).toContain("--seed");
  });

  it("runs on its own through bin/run-ts.js, as the README's regeneration command does", () => {
    const out = join(workDir, "direct.csv");
    const child = spawnSync(process.execPath, ["bin/run-ts.js", "demo-ledger/cli.ts", "--out", out, "--rows", "400"], {
      cwd: repoRoot,
      encoding: "utf8",
      timeout: 60_000,
    });
    expect(child.stderr).toBe("");
    expect(child.status).toBe(0);
    expect(child.stdout).toContain("Wrote 400 payments");
    return readFile(out, "utf8").then((text) => expect(text).toBe(expectedCsv({ rows: 400 })));
  });
});
