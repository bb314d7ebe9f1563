import { mkdtemp, rm, writeFile } from "node:fs/promises";
import { tmpdir } from "node:os";
import { join } from "node:path";
import fc from "fast-check";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { CsvError, formatCsvCell, formatCsvRow, numberCell, openCsvTable, parseCsvChunks, readCsvRecords, requireColumn, type CsvRecord } from "./csv";

let dir: string;
beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), "isodense-csv-"));
});
afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

async function file(name: string, content: string | Buffer): Promise<string> {
  const path = join(dir, name);
  await writeFile(path, content);
  return path;
}

async function collect<T>(items: AsyncIterable<T>): Promise<T[]> {
  const out: T[] = [];
  for await (const item of items) out.push(item);
  return out;
}

function thrown(fn: () => unknown): CsvError {
  try {
    fn();
  } catch (error) {
    if (error instanceof CsvError) return error;
    throw error;
  }
  throw new Error("expected a CsvError");
}

async function rejected(promise: Promise<unknown>): Promise<CsvError> {
  try {
    await promise;
  } catch (error) {
    if (error instanceof CsvError) return error;
    throw error;
  }
  throw new Error("expected a CsvError");
}

describe("the CSV parser", () => {
  it("reads quoted cells with commas, doubled quotes and line breaks inside them", () => {
    const records = parseCsvChunks(['id,note\n1,"a, b"\n2,"say ""hi"""\n3,"two\nlines"\n4,plain\n']);
    expect(records.map((r) => r.cells)).toEqual([
      ["id", "note"],
      ["1", "a, b"],
      ["2", 'say "hi"'],
      ["3", "two\nlines"],
      ["4", "plain"],
    ]);
  });

  it("reports the physical line each record starts on, counting line breaks inside quotes", () => {
    const records = parseCsvChunks(['h1,h2\r\n1,"x\r\ny\r\nz"\r\n2,w\r\n']);
    expect(records.map((r) => r.line)).toEqual([1, 2, 5]);
    expect(records[1].cells[1]).toBe("x\r\ny\r\nz");
  });

  it("treats CRLF and LF line ends alike and counts a CRLF once", () => {
    const crlf = parseCsvChunks(["a,b\r\n1,2\r\n3,4\r\n"]);
    const lf = parseCsvChunks(["a,b\n1,2\n3,4\n"]);
    expect(crlf).toEqual(lf);
    expect(crlf.map((r) => r.line)).toEqual([1, 2, 3]);
  });

  it("strips a UTF-8 byte-order mark at the very start only", () => {
    const records = parseCsvChunks(["\uFEFFamount,note\n1,\uFEFFx\n"]);
    expect(records[0].cells).toEqual(["amount", "note"]);
    expect(records[1].cells).toEqual(["1", "\uFEFFx"]);
  });

  it("keeps empty cells, a trailing empty cell and a last record without a line break", () => {
    const records = parseCsvChunks(["a,b,c\n,,\n1,,\n4,5,6"]);
    expect(records.map((r) => r.cells)).toEqual([
      ["a", "b", "c"],
      ["", "", ""],
      ["1", "", ""],
      ["4", "5", "6"],
    ]);
  });

  it("skips entirely empty lines but keeps counting them", () => {
    const records = parseCsvChunks(["a,b\n\n1,2\r\n\r\n3,4\n\n"]);
    expect(records.map((r) => [r.line, ...r.cells])).toEqual([
      [1, "a", "b"],
      [3, "1", "2"],
      [5, "3", "4"],
    ]);
  });

  it("keeps a quoted empty cell alone on a line as a record", () => {
    expect(parseCsvChunks(['a\n""\n']).map((r) => r.cells)).toEqual([["a"], [""]]);
  });

  it("handles a CRLF split between two chunks and a doubled quote split between two chunks", () => {
    const records = parseCsvChunks(["a,b\r", '\n1,"x"', '"y"\r', "\n2,3"]);
    expect(records).toEqual([
      { line: 1, cells: ["a", "b"] },
      { line: 2, cells: ["1", 'x"y'] },
      { line: 3, cells: ["2", "3"] },
    ]);
  });

  it("refuses a quote inside an unquoted cell, naming the line and the cell", () => {
    const error = thrown(() => parseCsvChunks(['a,b\n1,12" screen\n'], "ledger.csv"));
    expect(error.line).toBe(2);
    expect(error.column).toBe("cell 2");
    expect(error.message).toBe("ledger.csv line 2, column 'cell 2': a quote appears inside an unquoted field; quote the whole cell and double the quotes inside it (RFC 4180)");
  });

  it("refuses text after a closing quote", () => {
    const error = thrown(() => parseCsvChunks(['a,b\n1,"x"y\n'], "ledger.csv"));
    expect(error.message).toContain("ledger.csv line 2");
    expect(error.message).toContain("unexpected 'y' after a closing quote");
  });

  it("refuses a quoted cell that is never closed, naming the line where it opened", () => {
    const error = thrown(() => parseCsvChunks(['a,b\n1,2\n3,"open\n\n'], "ledger.csv"));
    expect(error.line).toBe(3);
    expect(error.message).toBe("ledger.csv line 3: a quoted cell opened on line 3 is never closed");
  });

  it("gives the same records however the text is split into chunks (property)", () => {
    const cell = fc.oneof(fc.string({ unit: fc.constantFrom("a", "b", "1", ",", '"', "\r", "\n", " ", "é", "€") }), fc.string());
    const row = fc.array(cell, { minLength: 1, maxLength: 5 }).filter((cells) => !(cells.length === 1 && cells[0] === ""));
    fc.assert(
      fc.property(fc.array(row, { minLength: 1, maxLength: 12 }), fc.boolean(), fc.boolean(), fc.array(fc.nat(), { maxLength: 12 }), (rows, crlf, bom, cutPoints) => {
        let text = rows.map((cells) => formatCsvRow(cells)).join("");
        if (crlf) text = text.replace(/(^|[^\r"])\n/g, "$1\r\n"); // line ends outside quotes only matter for counting
        if (bom) text = "\uFEFF" + text;
        const whole = parseCsvChunks([text]);
        const cuts = [...new Set(cutPoints.map((p) => p % (text.length + 1)))].sort((a, b) => a - b);
        const chunks: string[] = [];
        let at = 0;
        for (const cut of cuts) {
          chunks.push(text.slice(at, cut));
          at = cut;
        }
        chunks.push(text.slice(at));
        const split = parseCsvChunks(chunks);
        expect(split).toEqual(whole);
        if (!crlf) expect(whole.map((r) => r.cells)).toEqual(rows);
      }),
      { numRuns: 400 },
    );
  });

  it("round-trips any table written with formatCsvRow, line numbers included (property)", () => {
    fc.assert(
      fc.property(fc.array(fc.array(fc.string(), { minLength: 2, maxLength: 4 }), { minLength: 1, maxLength: 10 }), (rows) => {
        const text = rows.map((cells) => formatCsvRow(cells)).join("");
        const records = parseCsvChunks([text]);
        expect(records.map((r) => r.cells)).toEqual(rows);
        let line = 1;
        records.forEach((record, k) => {
          expect(record.line).toBe(line);
          line += (formatCsvRow(rows[k]).match(/\r\n|\r|\n/g) ?? []).length;
        });
      }),
      { numRuns: 300 },
    );
  });
});

describe("CSV files", () => {
  it("streams a file in small chunks, multi-byte characters split across chunks included", async () => {
    const path = await file("utf8.csv", '\uFEFFcity,amount\r\nZürich,12.5\r\n"Köln, Süd",€7\r\n');
    const records: CsvRecord[] = await collect(readCsvRecords(path, { chunkSize: 3 }));
    expect(records.map((r) => r.cells)).toEqual([
      ["city", "amount"],
      ["Zürich", "12.5"],
      ["Köln, Süd", "€7"],
    ]);
  });

  it("opens a table: header checked, data rows streamed, ragged rows refused with both counts", async () => {
    const path = await file("ragged.csv", "id,amount,items\n1,10,2\n2,11\n");
    const table = await openCsvTable(path, { label: "ledger.csv" });
    expect(table.header).toEqual(["id", "amount", "items"]);
    const rows = table.rows;
    expect((await rows.next()).value).toEqual({ line: 2, cells: ["1", "10", "2"] });
    const error = await rejected(rows.next());
    expect(error.line).toBe(3);
    expect(error.message).toBe("ledger.csv line 3 has 2 cells; the header has 3");
  });

  it("refuses an empty file and a header without data rows", async () => {
    const empty = await rejected(openCsvTable(await file("empty.csv", ""), { label: "ledger.csv" }));
    expect(empty.message).toBe("ledger.csv is empty; a header row naming the columns is required");
    const headerOnly = await rejected(openCsvTable(await file("header.csv", "id,amount\r\n\r\n"), { label: "ledger.csv" }));
    expect(headerOnly.message).toBe("ledger.csv has a header but no data rows");
  });

  it("refuses duplicate and empty column names in the header", async () => {
    const dup = await rejected(openCsvTable(await file("dup.csv", "id,amount,amount\n1,2,3\n"), { label: "ledger.csv" }));
    expect(dup.column).toBe("amount");
    expect(dup.message).toBe("ledger.csv line 1: column 'amount' appears twice in the header (cells 2 and 3); column names must be unique");
    const blank = await rejected(openCsvTable(await file("blank.csv", "id,,x\n1,2,3\n"), { label: "ledger.csv" }));
    expect(blank.message).toBe("ledger.csv line 1: header cell 2 is empty; every column needs a name");
  });

  it("reports a missing file by name", async () => {
    const error = await rejected(openCsvTable(join(dir, "nope.csv"), { label: "nope.csv" }));
    expect(error.message).toBe("nope.csv: file not found");
  });

  it("closes the file when the reader stops early", async () => {
    const path = await file("many.csv", "a\n" + Array.from({ length: 1000 }, (_, i) => `${i}\n`).join(""));
    const table = await openCsvTable(path, { chunkSize: 16 });
    for await (const record of table.rows) {
      if (record.line > 3) break;
    }
    expect((await table.rows.next()).done).toBe(true);
  });
});

describe("column and cell helpers", () => {
  it("names a missing column and lists the header", () => {
    const error = thrown(() => requireColumn(["id", "amount"], "items", "ledger.csv"));
    expect(error.message).toBe("column 'items' not found in header of ledger.csv; columns are: id, amount");
  });

  it("parses numeric cells strictly and says why a cell is refused", () => {
    expect(numberCell("1e3", "l.csv", 4, "amount")).toBe(1000);
    expect(numberCell("-0.5", "l.csv", 4, "amount")).toBe(-0.5);
    expect(thrown(() => numberCell("abc", "ledger.csv", 42, "amount")).message).toBe("ledger.csv line 42, column 'amount': 'abc' is not a number");
    expect(thrown(() => numberCell("12abc", "l.csv", 2, "a")).rule).toBe("'12abc' is not a number");
    expect(thrown(() => numberCell("0x10", "l.csv", 2, "a")).rule).toBe("'0x10' is not a number");
    expect(thrown(() => numberCell("", "l.csv", 2, "a")).rule).toBe("the cell is empty; a number is required");
    expect(thrown(() => numberCell(" ", "l.csv", 2, "a")).rule).toBe("' ' is blank; a number is required");
    expect(thrown(() => numberCell("NaN", "l.csv", 2, "a")).rule).toBe("'NaN' is not a finite number");
    expect(thrown(() => numberCell("-Infinity", "l.csv", 2, "a")).rule).toBe("'-Infinity' is not a finite number");
    expect(thrown(() => numberCell("1e999", "l.csv", 2, "a")).rule).toBe("'1e999' is too large to be a finite number");
  });

  it("quotes output cells exactly when RFC 4180 requires it", () => {
    expect(formatCsvCell("plain")).toBe("plain");
    expect(formatCsvCell("a,b")).toBe('"a,b"');
    expect(formatCsvCell('say "hi"')).toBe('"say ""hi"""');
    expect(formatCsvCell("two\nlines")).toBe('"two\nlines"');
    expect(formatCsvCell(0.1)).toBe("0.1");
    expect(formatCsvCell(true)).toBe("true");
    expect(formatCsvRow(["amount 1240 (expected 60–140)", 3])).toBe("amount 1240 (expected 60–140),3\n");
  });
});
