import { describe, expect, it } from "vitest";
import { bucketIndex } from "../../../shared-model/src/drift";
import type { CountsMessage } from "./counts-message";
import { countsMessageSchema, MAX_BUCKET_ENTRIES } from "./counts-message";
import { TrafficTally, type TallyModel } from "./tally";

// An invented two-feature model: amount (log) and items (none); decile edges made up for the test.
const model: TallyModel = {
  version: "m-test-1",
  artifact: {
    columns: ["amount", "items"],
    features: [
      { name: "amount", transform: "log", columns: ["amount"] },
      { name: "items", transform: "none", columns: ["items"] },
    ],
    reference: {
      columnEdges: [
        [2, 2.5, 3, 3.3, 3.6, 3.9, 4.2, 4.6, 5.2],
        [1, 1, 1, 2, 2, 2, 3, 3, 4],
      ],
      scoreEdges: [0.5, 1, 1.5, 2, 2.5, 3, 4, 5, 7],
    },
  },
};
let ids = 0;
const newId = () => `flush-test-${String(++ids).padStart(4, "0")}`;

describe("TrafficTally", () => {
  it("counts each payment once per column in the bucket of its transformed value, and the score in its bucket", () => {
    const tally = new TrafficTally();
    tally.record(model, [40, 2], { segment: "web", mahalanobisSq: 1.2, flagged: false }, "2026-12-01T10:00:00Z");
    tally.record(model, [400, 5], { segment: "web", mahalanobisSq: 9.5, flagged: true }, "2026-12-01T11:00:00Z");
    const [message] = tally.drain(newId);
    expect(countsMessageSchema.parse(message)).toEqual(message);
    expect(message.day).toBe("2026-12-01");
    expect(message.volumes).toEqual([["web", 2, 1]]);
    const has = (name: string, bucket: number) => message.buckets.some(([, n, b, c]) => n === name && b === bucket && c === 1);
    expect(has("amount", bucketIndex(model.artifact.reference.columnEdges[0], Math.log(40)))).toBe(true);
    expect(has("amount", bucketIndex(model.artifact.reference.columnEdges[0], Math.log(400)))).toBe(true);
    expect(has("items", 3)).toBe(true); // 2 is in (1, 2], the fourth bucket after three equal edges
    expect(has("mahalanobisSq", 2)).toBe(true);
    expect(has("mahalanobisSq", 9)).toBe(true);
    expect(tally.payments).toBe(0);
  });

  it("keeps days and versions apart and is due after N payments or T milliseconds", () => {
    const tally = new TrafficTally();
    tally.record(model, [40, 2], { segment: "*", mahalanobisSq: 1, flagged: false }, "2026-12-01T23:59:59Z", 1000);
    expect(tally.due(1000, 2, 60_000)).toBe(false);
    expect(tally.due(61_000, 2, 60_000)).toBe(true);
    tally.record(model, [40, 2], { segment: "*", mahalanobisSq: 1, flagged: false }, "2026-12-02T00:00:01Z", 2000);
    expect(tally.due(2000, 2, 60_000)).toBe(true);
    const messages = tally.drain(newId);
    expect(messages.map((m) => m.day).sort()).toEqual(["2026-12-01", "2026-12-02"]);
    expect(new Set(messages.map((m) => m.flushId)).size).toBe(2);
    expect(tally.due(999_999, 1, 0)).toBe(false);
  });

  it("splits a large flush into messages within the entry limit, sending the volumes once", () => {
    const tally = new TrafficTally();
    // 300 segments × up to 3 rows (2 columns + score) of distinct buckets exceeds one message.
    for (let s = 0; s < 900; s++) tally.record(model, [40, 2], { segment: `s${s}`, mahalanobisSq: 1, flagged: false }, "2026-12-01T10:00:00Z");
    const messages = tally.drain(newId);
    expect(messages.length).toBe(Math.ceil((900 * 3) / MAX_BUCKET_ENTRIES));
    expect(messages.every((m) => m.buckets.length <= MAX_BUCKET_ENTRIES)).toBe(true);
    expect(messages.reduce((n, m) => n + m.volumes.length, 0)).toBe(900);
    expect(messages.slice(1).every((m) => m.volumes.length === 0)).toBe(true);
  });

  it("puts back the counts of a failed send so that the next flush carries them", () => {
    const tally = new TrafficTally();
    tally.record(model, [40, 2], { segment: "web", mahalanobisSq: 1.2, flagged: true }, "2026-12-01T10:00:00Z");
    const failed: CountsMessage[] = tally.drain(newId);
    tally.restore(failed, (v) => (v === model.version ? model : null));
    expect(tally.payments).toBe(1);
    const [again] = tally.drain(newId);
    expect(again.volumes).toEqual(failed[0].volumes);
    expect([...again.buckets].sort()).toEqual([...failed[0].buckets].sort());
    expect(again.flushId).not.toBe(failed[0].flushId);
  });
});
