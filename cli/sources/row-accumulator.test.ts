import { describe, expect, test } from "vitest";
import { createRandom } from "../../shared-model/src/random";
import type { FittedFeature } from "../../shared-model/src/types";
import { BLOCK_ROWS, RowAccumulator } from "./row-accumulator";

const features: FittedFeature[] = ["a", "b", "c"].map((name) => ({ name, transform: "none" }) as FittedFeature);

/** Blocks of invented rows: whole blocks, then a short one, one row of the third block labelled fraud. */
function blocks(): { values: Float64Array[]; size: number; labels: ("fraud" | null)[] }[] {
  const random = createRandom(5);
  const sizes = [BLOCK_ROWS, BLOCK_ROWS, BLOCK_ROWS, BLOCK_ROWS, 700];
  return sizes.map((size, b) => ({
    size,
    values: features.map((_, j) => Float64Array.from({ length: size }, () => random.next() * (j + 1) - 0.5)),
    labels: Array.from({ length: size }, (_, r) => (b === 2 && r === 9 ? "fraud" : null)),
  }));
}

describe("RowAccumulator.addBlock", () => {
  test("a block added whole gives the same moments, ranges and sample to the last bit as its rows added one by one", () => {
    const whole = new RowAccumulator(features, null, 11);
    const byRow = new RowAccumulator(features, null, 11);
    let first = 1;
    for (const block of blocks()) {
      whole.addBlock(block.values, block.size, block.labels, new Array(block.size).fill(null), first);
      for (let r = 0; r < block.size; r++) {
        if (block.labels[r] === "fraud") byRow.fraudRows++;
        else
          byRow.add(
            Float64Array.from(block.values, (column) => column[r]),
            null,
            first + r,
          );
      }
      first += block.size;
    }
    expect(whole.rowsUsed).toBe(byRow.rowsUsed);
    expect(whole.fraudRows).toBe(1);
    const a = whole.finish();
    const b = byRow.finish();
    expect(a.result).toEqual(b.result);
    expect(a.sample).toEqual(b.sample);
  });
});
