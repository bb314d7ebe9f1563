import { mkdtemp, rm } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { captureIO } from "../capture-io";
import { renewCommand } from "./renew";

// The service side (live model, labels, shadow, the gate on real data) is exercised end to end in
// worker/test/demo-loop.test.ts; these cases stop before the first call.
const ledger = "demo-ledger/sample.csv";
let dir: string;

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), "isodense-renew-"));
});
afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

async function run(args: string[]): Promise<{ code: number; out: string; err: string }> {
  const c = captureIO();
  const code = await renewCommand(args, c.io);
  return { code, out: c.out(), err: c.err() };
}

describe("isodense renew", () => {
  it("prints its help with the gate's defaults and the exit codes", async () => {
    const { code, out } = await run(["--help"]);
    expect(code).toBe(0);
    for (const text of ["--window <length>", "(default: 28d)", "--max-pr-auc-drop <d>", "(default: 0.02)", "(default: 0.5,2)", "1 held back by the gate"]) {
      expect(out).toContain(text);
    }
  });

  it.each([
    [["--url", "http://127.0.0.1:9", "--token", "t"], "option --ledger is required"],
    [["--ledger", ledger, "--token", "t"], "option --url is required"],
    [["--ledger", ledger, "--url", "http://127.0.0.1:9", "--token", "t", "--window", "3w"], "option --window must be a duration of at least one day, such as 28d or 36h; got '3w'"],
    [["--ledger", ledger, "--url", "http://127.0.0.1:9", "--token", "t", "--window", "12h"], "at least one day"],
    [["--ledger", ledger, "--url", "http://127.0.0.1:9", "--token", "t", "--until", "last monday"], "option --until must be a time such as 2026-11-30T00:00:00Z"],
    [["--ledger", ledger, "--url", "http://127.0.0.1:9", "--token", "t", "--flag-rate-band", "2,0.5"], "low ≤ high"],
    [["--ledger", "missing.csv", "--url", "http://127.0.0.1:9", "--token", "t"], "--ledger missing.csv: file not found"],
  ])("refuses %j before calling the service (exit 2), naming the option", async (args, message) => {
    const { code, err } = await run(args);
    expect(err).toContain(message);
    expect(code).toBe(2);
  });

  it("says so when the service cannot be reached (exit 3)", async () => {
    const { code, err } = await run(["--ledger", ledger, "--url", "http://127.0.0.1:9", "--token", "t", "--keep", join(dir, "keep")]);
    expect(err).toContain("isodense renew: cannot reach http://127.0.0.1:9");
    expect(code).toBe(3);
  });
});
