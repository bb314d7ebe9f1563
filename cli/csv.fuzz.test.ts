/**
 * Fuzzing the CLI's CSV reader in-process with fast-check: FUZZ_RUNS (10,000) malformed tables —
 * ragged rows, quotes never closed, text after a closing quote, stray quotes, empty or duplicate
 * header names, empty files, header-only files, each with or without a byte-order mark, LF or CRLF
 * line ends and hostile Unicode in the cells — read through `openCsvTable` from real files in
 * random chunk sizes. Every one must fail with a CsvError that names the file, the line where there
 * is one, and the rule; nothing else may be thrown and nothing may hang. Well-formed tables with the
 * same ingredients must read back cell for cell (so the reader is not simply refusing everything).
 */
import fc from "fast-check";
import { mkdtempSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, describe, expect, test } from "vitest";
import { CsvError, formatCsvRow, openCsvTable } from "./csv";
import { byTestDepth } from "../shared-model/src/test-support";

const RUNS = Number(process.env.FUZZ_RUNS ?? byTestDepth({ quick: 1_000, thorough: 10_000 }));
const SEED = Number(process.env.FUZZ_SEED ?? 20261201);
const dir = mkdtempSync(join(tmpdir(), "isodense-csv-fuzz-"));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

/** Cell text: plain, with separators and quotes, or hostile Unicode (lone surrogates aside: files are UTF-8). */
const cell = fc.oneof(
  fc.stringMatching(/^[a-z0-9.]{1,8}$/),
  fc.string({ maxLength: 12 }).map((s) => s.replace(/[\uD800-\uDFFF]/g, "?")),
  fc.constantFrom("a,b", 'say "hi"', "two\nlines", "\u202Eevil", "💳", "' OR 1=1 --", "<script>", "\u0000", " ", "=cmd|' /C calc'!A0"),
);

interface Table {
  header: string[];
  rows: string[][];
}

const table: fc.Arbitrary<Table> = fc
  .integer({ min: 1, max: 6 })
  .chain((width) =>
    fc.record({
      header: fc.uniqueArray(fc.stringMatching(/^[a-z][a-zA-Z0-9_]{0,10}$/), { minLength: width, maxLength: width }),
      rows: fc.array(fc.array(cell, { minLength: width, maxLength: width }), { minLength: 1, maxLength: 8 }),
    }),
  )
  .filter((t) => t.rows.every((r) => r.some((c) => c !== ""))); // a lone empty cell is a blank line, which the reader skips

interface Layout {
  bom: boolean;
  crlf: boolean;
  finalNewline: boolean;
}
const layout: fc.Arbitrary<Layout> = fc.record({ bom: fc.boolean(), crlf: fc.boolean(), finalNewline: fc.boolean() });

function render(header: string[], rows: string[][], l: Layout, rawLines: string[] = []): string {
  const eol = l.crlf ? "\r\n" : "\n";
  const lines = [formatCsvRow(header), ...rows.map((r) => formatCsvRow(r)), ...rawLines];
  return (l.bom ? "\uFEFF" : "") + lines.join(eol) + (l.finalNewline ? eol : "");
}

interface Malformed {
  text: string;
  broke: string;
  /** Rule the error must carry (a substring of `rule`). */
  rule: RegExp;
}

const malformed: fc.Arbitrary<Malformed> = fc.oneof(
  // A data row with one cell fewer or more than the header.
  fc.record({ t: table, l: layout, row: fc.nat(), more: fc.boolean(), extra: cell }).map(({ t, l, row, more, extra }) => {
    const k = row % t.rows.length;
    const rows = t.rows.map((r) => [...r]);
    // One cell fewer, unless that leaves a lone empty cell (a blank line, which the reader skips).
    if (!more && rows[k].length > 1 && !(rows[k].length === 2 && rows[k][0] === "")) rows[k].pop();
    else rows[k].push(extra === "" ? "x" : extra);
    return { text: render(t.header, rows, l), broke: "ragged row", rule: /ragged row/ };
  }),
  // A quoted cell that never closes (last row).
  fc.record({ t: table, l: layout, tail: fc.stringMatching(/^[a-z ,\n]{0,10}$/) }).map(({ t, l, tail }) => ({
    text: render(t.header, t.rows, { ...l, finalNewline: false }, [`"open ${tail}`]),
    broke: "unclosed quote",
    rule: /never closed/,
  })),
  // Text after a closing quote.
  fc.record({ t: table, l: layout, after: fc.stringMatching(/^[a-z]{1,4}$/) }).map(({ t, l, after }) => ({
    text: render(t.header, t.rows, l, [['"ok"' + after, ...t.header.slice(1).map(() => "1")].join(",")]),
    broke: "text after closing quote",
    rule: /after a closing quote/,
  })),
  // An empty header name.
  fc.record({ t: table.filter((x) => x.header.length >= 2), l: layout, at: fc.nat() }).map(({ t, l, at }) => {
    const header = [...t.header];
    header[at % header.length] = "";
    return { text: render(header, t.rows, l), broke: "empty header name", rule: /empty column name/ };
  }),
  // A duplicate header name.
  fc.record({ t: table.filter((x) => x.header.length >= 2), l: layout }).map(({ t, l }) => {
    const header = [...t.header];
    header[header.length - 1] = header[0];
    return { text: render(header, t.rows, l), broke: "duplicate header", rule: /duplicate column name/ };
  }),
  // Nothing but a BOM, blank lines or nothing at all.
  fc.constantFrom("", "\uFEFF", "\n\n", "\r\n", "\uFEFF\r\n\r\n").map((text) => ({ text, broke: "empty file", rule: /empty file/ })),
  // A header with no data rows.
  fc.record({ t: table, l: layout }).map(({ t, l }) => ({ text: render(t.header, [], l), broke: "header only", rule: /no data rows/ })),
);

async function readAll(path: string, chunkSize: number): Promise<{ header: string[]; rows: string[][] }> {
  const opened = await openCsvTable(path, { label: "fuzz.csv", chunkSize });
  const rows: string[][] = [];
  for await (const record of opened.rows) rows.push(record.cells);
  return { header: opened.header, rows };
}

describe("fuzzing the CSV reader", { timeout: 300_000 }, () => {
  test(`refuses ${RUNS} malformed tables, each with a CsvError naming the file, the line and the rule`, async () => {
    const cases = fc.sample(fc.tuple(malformed, fc.integer({ min: 1, max: 64 })), { numRuns: RUNS, seed: SEED });
    const failures: string[] = [];
    let k = 0;
    for (const [c, chunkSize] of cases) {
      const path = join(dir, `bad-${k++ % 64}.csv`);
      writeFileSync(path, c.text, "utf8");
      try {
        await readAll(path, chunkSize);
        failures.push(`${c.broke}: accepted ${JSON.stringify(c.text.slice(0, 120))}`);
      } catch (error) {
        if (!(error instanceof CsvError)) failures.push(`${c.broke}: threw ${String(error)} for ${JSON.stringify(c.text.slice(0, 120))}`);
        else if (!c.rule.test(error.rule) || !error.message.startsWith("fuzz.csv") || error.rule === "")
          failures.push(`${c.broke}: CsvError ${JSON.stringify(error.message)} does not name the file and the rule ${c.rule}`);
        else if (!["empty file", "no data rows"].includes(error.rule) && (error.line === null || error.line < 1))
          failures.push(`${c.broke}: CsvError without a line: ${error.message}`);
      }
      if (failures.length >= 5) break;
    }
    expect(failures).toEqual([]);
    expect(cases.length).toBe(RUNS);
  });

  test("reads well-formed tables with the same ingredients back cell for cell, whatever the chunk size", async () => {
    const cases = fc.sample(fc.tuple(table, layout, fc.integer({ min: 1, max: 64 })), { numRuns: Math.min(RUNS, 2000), seed: SEED + 1 });
    let k = 0;
    for (const [t, l, chunkSize] of cases) {
      const path = join(dir, `good-${k++ % 64}.csv`);
      writeFileSync(path, render(t.header, t.rows, l), "utf8");
      const back = await readAll(path, chunkSize);
      expect(back).toEqual({ header: t.header, rows: t.rows });
    }
  });
});
