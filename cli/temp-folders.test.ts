/**
 * A command's temporary folders are removed when a signal interrupts it, and the process still ends
 * by that signal. The interrupted command is a child process (a signal would end the test runner),
 * started with tsx like bin/isodense.js, that holds a folder and waits until it is killed.
 */
import { spawn } from "node:child_process";
import { existsSync, mkdtempSync, readdirSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { fileURLToPath } from "node:url";
import { afterAll, describe, expect, test } from "vitest";
import { DuckEngine } from "./sources/duckdb-engine";
import { RowStage } from "./sources/row-stage";
import { heldTempFolders, makeTempFolder, removeTempFolder } from "./temp-folders";

const root = mkdtempSync(join(tmpdir(), "isodense-temp-folders-"));
afterAll(() => rmSync(root, { recursive: true, force: true }));

const moduleUrl = new URL("./temp-folders.ts", import.meta.url).href;

/** Starts a process that holds two folders under `root` (one with a file) and prints their paths. */
function holdingProcess(): { ended: Promise<{ code: number | null; signal: NodeJS.Signals | null }>; folders: Promise<string[]>; kill: (signal: NodeJS.Signals) => void } {
  const script = join(root, `hold-${Math.random().toString(36).slice(2)}.ts`);
  writeFileSync(
    script,
    `import { writeFileSync } from "node:fs";
import { makeTempFolder } from ${JSON.stringify(moduleUrl)};
const a = makeTempFolder("isodense-stage-", ${JSON.stringify(root)});
writeFileSync(a + "/rows.f64", new Uint8Array(4096));
const b = makeTempFolder("isodense-duckdb-", ${JSON.stringify(root)});
process.stdout.write(JSON.stringify([a, b]) + "\\n");
setInterval(() => {}, 60_000);
`,
  );
  const child = spawn(process.execPath, ["--import", "tsx", script], { cwd: fileURLToPath(new URL("..", import.meta.url)), stdio: ["ignore", "pipe", "inherit"] });
  let out = "";
  const folders = new Promise<string[]>((resolve, reject) => {
    child.stdout.setEncoding("utf8").on("data", (d: string) => {
      out += d;
      if (out.includes("\n")) resolve(JSON.parse(out) as string[]);
    });
    child.on("error", reject);
    child.on("close", () => reject(new Error(`the holding process ended before naming its folders; it printed ${JSON.stringify(out)}`)));
  });
  const ended = new Promise<{ code: number | null; signal: NodeJS.Signals | null }>((resolve) => child.on("close", (code, signal) => resolve({ code, signal })));
  const kill = (signal: NodeJS.Signals) => {
    child.kill(signal);
    // A process that outlives its signal fails the test and is not left running.
    setTimeout(() => child.kill("SIGKILL"), 20_000).unref();
  };
  return { ended, folders, kill };
}

describe("temporary folders of a command", () => {
  test.each(["SIGTERM", "SIGINT", "SIGHUP"] as const)("are removed when %s interrupts the command, which still ends by that signal", async (signal) => {
    const holder = holdingProcess();
    const folders = await holder.folders;
    for (const folder of folders) expect(existsSync(folder)).toBe(true);
    holder.kill(signal);
    expect(await holder.ended).toEqual({ code: null, signal });
    for (const folder of folders) expect(existsSync(folder), folder).toBe(false);
  });

  test("are held from creation to removal, and the signal handlers only while one is held", () => {
    const listenersBefore = process.listenerCount("SIGTERM");
    const folder = makeTempFolder("isodense-test-", root);
    expect(heldTempFolders()).toContain(folder);
    expect(process.listenerCount("SIGTERM")).toBe(listenersBefore + 1);
    removeTempFolder(folder);
    removeTempFolder(folder);
    expect(existsSync(folder)).toBe(false);
    expect(heldTempFolders()).not.toContain(folder);
    expect(process.listenerCount("SIGTERM")).toBe(listenersBefore);
  });

  test("a fit's staged rows and DuckDB's spill folder are among them", async () => {
    const stage = RowStage.open(3, null, 1, root);
    const engine = await DuckEngine.open();
    const held = heldTempFolders();
    expect(held.some((f) => f.startsWith(join(root, "isodense-stage-")))).toBe(true);
    expect(held.some((f) => f.startsWith(join(tmpdir(), "isodense-duckdb-")))).toBe(true);
    stage.remove();
    engine.close();
    expect(heldTempFolders()).toEqual([]);
    expect(readdirSync(root).filter((name) => name.startsWith("isodense-stage-"))).toEqual([]);
  });
});
