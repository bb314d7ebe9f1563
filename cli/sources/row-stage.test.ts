/** The staged row source that lets a multi-pass fit read its ledger once. Data: invented rows. */
import { mkdtempSync, readdirSync, rmSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, describe, expect, test } from "vitest";
import type { FitRow, RowSource } from "../../shared-model/src/fit";
import { createRandom } from "../../shared-model/src/random";
import { StagedRowSource } from "./row-stage";

const root = mkdtempSync(join(tmpdir(), "isodense-row-stage-"));
afterAll(() => rmSync(root, { recursive: true, force: true }));

/** 5,000 invented rows of three values (one a negative zero, one tiny), every third without a segment, counting its passes. */
function invented(): RowSource & { passes: number } {
  const random = createRandom(9);
  const rows: FitRow[] = Array.from({ length: 5000 }, (_, r) => ({
    values: Float64Array.of(random.next() * 1e6 - 5e5, r === 7 ? -0 : random.next() * 1e-300, r),
    segment: r % 3 === 0 ? null : ["web", "app"][r % 2],
  }));
  return {
    passes: 0,
    async *pass() {
      this.passes++;
      yield* rows;
    },
  };
}

async function collect(source: RowSource): Promise<{ values: number[]; segment: string | null }[]> {
  const out: { values: number[]; segment: string | null }[] = [];
  for await (const row of source.pass()) out.push({ values: [...row.values], segment: row.segment });
  return out;
}

describe("StagedRowSource", () => {
  test("reads its source once and gives every later pass the same rows, bit for bit and in order, then leaves nothing behind", async () => {
    const inner = invented();
    const staged = new StagedRowSource(inner, 3, "channel", root);
    const first = await collect(staged);
    expect(readdirSync(root)).toHaveLength(1);
    const second = await collect(staged);
    const third = await collect(staged);
    expect(inner.passes).toBe(1);
    expect(first).toHaveLength(5000);
    expect(second).toEqual(first);
    expect(third).toEqual(first);
    expect(Object.is(second[7].values[1], -0)).toBe(true);
    staged.remove();
    staged.remove();
    expect(readdirSync(root)).toEqual([]);
  });

  test("a first pass left unfinished is read again from the source", async () => {
    const inner = invented();
    const staged = new StagedRowSource(inner, 3, null, root);
    for await (const row of staged.pass()) if (row.values[2] === 100) break;
    const whole = await collect(staged);
    expect(inner.passes).toBe(2);
    expect(whole).toHaveLength(5000);
    // Without a segment column the fit reads no segment, from the source as from the staged copy.
    expect(whole.every((row) => row.segment === null)).toBe(true);
    expect(await collect(staged)).toEqual(whole);
    expect(inner.passes).toBe(2);
    staged.remove();
    expect(readdirSync(root)).toEqual([]);
  });
});
