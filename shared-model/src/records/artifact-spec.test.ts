import { describe, expect, it } from "vitest";
import { parseArtifact } from "../artifact";
import { fitModel, type RowSource } from "../fit";
import { createRandom } from "../random";
import { recordSpecFromArtifact } from "./artifact-spec";
import { parseRecordSpec } from "./spec";

describe("the record spec in a fitted model", () => {
  it("is written by the fit and read back from the verified artifact as the same spec", async () => {
    const spec = parseRecordSpec({
      record: { id: "paymentId", time: "createdAt", account: "accountRef", retention: "90d" },
      features: [
        { name: "amount", transform: "log" },
        { name: "paymentsLast24h", transform: "log1p", count: { within: "24h" } },
        { name: "gapHours", transform: "log1p", sincePrevious: { unit: "hours", none: 8760 } },
      ],
    });
    const random = createRandom(7);
    const rows = Array.from({ length: 400 }, () => Float64Array.of(5 + 100 * random.next(), random.int(4), 1 + 500 * random.next()));
    const source: RowSource = {
      async *pass() {
        for (const values of rows) yield { values, segment: null };
      },
    };
    const { artifact } = await fitModel(source, {
      features: spec.features,
      recordSpec: spec,
      shape: "full",
      estimator: "classical",
      segmentBy: null,
      cutoffRate: 0.01,
      createdAt: "2026-12-04T12:00:00Z",
    });
    expect(artifact.record).toEqual({ id: "paymentId", time: "createdAt", account: "accountRef", lateness: "1h", retention: "90d" });
    expect(artifact.features.map((f) => f.derive)).toEqual([undefined, { count: { within: "1d" } }, { sincePrevious: { unit: "hours", none: 8760 } }]);
    const read = recordSpecFromArtifact(await parseArtifact(JSON.stringify(artifact)));
    expect(read).toEqual(spec);
  });
});
