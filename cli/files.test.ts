import { mkdir, mkdtemp, readdir, readFile, rm, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { InputError } from "./errors";
import { AtomicLineWriter, checkOutputPath, writeFileAtomic } from "./files";

let dir: string;
beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), "isodense-files-"));
});
afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

describe("atomic output files", () => {
  it("replaces a file in one step and leaves no temporary file", async () => {
    const path = join(dir, "model.json");
    await writeFile(path, "old");
    await writeFileAtomic(path, "new content\n");
    expect(await readFile(path, "utf8")).toBe("new content\n");
    expect(await readdir(dir)).toEqual(["model.json"]);
  });

  it("publishes a line-by-line file only on commit, and removes it on abort", async () => {
    const sub = await mkdtemp(join(dir, "lines-"));
    const kept = new AtomicLineWriter(join(sub, "scores.csv"));
    for (let i = 0; i < 20_000; i++) await kept.write(`row-${i},${i * 0.5}\n`);
    expect(await readdir(sub)).not.toContain("scores.csv");
    await kept.commit();
    const text = await readFile(join(sub, "scores.csv"), "utf8");
    expect(text.split("\n")).toHaveLength(20_001);
    expect(text.startsWith("row-0,0\nrow-1,0.5\n")).toBe(true);
    const dropped = new AtomicLineWriter(join(sub, "dropped.csv"));
    await dropped.write("half a file\n");
    await dropped.abort();
    expect(await readdir(sub)).toEqual(["scores.csv"]);
  });

  it("refuses an output path in a missing directory or naming a directory", async () => {
    await expect(checkOutputPath(join(dir, "nowhere", "m.json"), "--out")).rejects.toThrow(InputError);
    await expect(checkOutputPath(join(dir, "nowhere", "m.json"), "--out")).rejects.toThrow("the directory");
    await mkdir(join(dir, "folder"));
    await expect(checkOutputPath(join(dir, "folder"), "--out")).rejects.toThrow("is a directory; give a file name");
    await expect(checkOutputPath(join(dir, "fine.json"), "--out")).resolves.toBeUndefined();
  });
});
