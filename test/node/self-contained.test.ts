/**
 * The suite reads nothing outside the repository: a clean clone runs it as it is. Every test file
 * and test helper is scanned for string literals that are paths, and a relative path that leads out
 * of the repository (from the file's folder, as `new URL(path, import.meta.url)` reads it), an
 * absolute path into a home or work folder, or a mention of a sibling checkout's data fails.
 */
import { readdirSync, readFileSync } from "node:fs";
import { dirname, join, relative, resolve, sep } from "node:path";
import { fileURLToPath } from "node:url";
import { describe, expect, it } from "vitest";

const repoRoot = fileURLToPath(new URL("../../", import.meta.url));
const SKIPPED_FOLDERS = new Set(["node_modules", ".git", "dist", ".state", ".wrangler", "test-output", "reference-data"]);

/** Test files and their helpers: `*.test.ts`, `*.e2e.ts`, test support, and everything under a `test/` folder. */
function testSources(dir: string, inTestFolder = false): string[] {
  const found: string[] = [];
  for (const entry of readdirSync(dir, { withFileTypes: true })) {
    const path = join(dir, entry.name);
    if (entry.isDirectory()) {
      if (!SKIPPED_FOLDERS.has(entry.name)) found.push(...testSources(path, inTestFolder || entry.name === "test"));
    } else if (/\.(ts|js|mjs)$/.test(entry.name) && (inTestFolder || /(\.test|\.e2e|test-support|vitest\.config)\.(ts|js|mjs)$/.test(entry.name))) {
      found.push(path);
    }
  }
  return found;
}

/** Paths in `source` (a file at `file`) that lead out of the repository at `root`, with why. */
function pathsLeavingRepository(source: string, file: string, root: string): string[] {
  const offending: string[] = [];
  for (const match of source.matchAll(/(["'`])((?:\.\.\/|\/)[^"'`\s]*)\1/g)) {
    const literal = match[2];
    if (literal.startsWith("../")) {
      const target = resolve(dirname(file), literal.replace(/\$\{[^}]*\}/g, "x"));
      if (target !== root.replace(/\/$/, "") && !target.startsWith(root.endsWith(sep) ? root : root + sep)) offending.push(`${literal} (leads to ${target})`);
    } else if (/^\/(work|home|root|srv|mnt|data)\//.test(literal)) {
      offending.push(`${literal} (absolute path outside the repository)`);
    }
  }
  for (const match of source.matchAll(/\bshared\/reference-data\b/g)) offending.push(`${match[0]} (the data lives in test/reference-data)`);
  return offending;
}

describe("a clean clone runs the suite as it is", () => {
  it("finds no test that reads a path outside the repository", () => {
    // This file itself holds planted examples (the second test), so it is left out.
    const files = testSources(repoRoot).filter((file) => file !== fileURLToPath(import.meta.url));
    expect(files.length).toBeGreaterThan(50);
    const offending = files.flatMap((file) => pathsLeavingRepository(readFileSync(file, "utf8"), file, repoRoot).map((why) => `${relative(repoRoot, file)}: ${why}`));
    expect(offending).toEqual([]);
  });

  it("catches a reference file read from beside the checkout, and lets in-repository paths through", () => {
    const file = join(repoRoot, "shared-model", "src", "x.test.ts");
    const templated = "new URL(`../../../shared/data/$" + "{name}`, import.meta.url)";
    expect(pathsLeavingRepository(templated, file, repoRoot)).toHaveLength(1);
    expect(pathsLeavingRepository('readFileSync("/work/shared/table.csv")', file, repoRoot)).toHaveLength(1);
    expect(pathsLeavingRepository('resolve(root, "../shared/reference-data")', file, repoRoot).length).toBeGreaterThan(0);
    expect(pathsLeavingRepository('import { x } from "../../test/reference-data/files"; new URL("../../README.md", import.meta.url)', file, repoRoot)).toEqual([]);
  });
});
