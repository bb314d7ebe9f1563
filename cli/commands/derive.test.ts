/**
 * `isodense derive` and the records path of fit, score, tune and refit, in-process on an invented
 * shop's payment records: hand-worked values, the time-order rule, --sort, errors naming file, line
 * and column, and the same model and scores whether a ledger is derived on the way or beforehand.
 */
import { mkdtemp, readFile, rm, writeFile } from "node:fs/promises";
import { existsSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { parseArtifact } from "../../shared-model/src/artifact";
import { createRandom } from "../../shared-model/src/random";
import { captureIO } from "../capture-io";
import { deriveCommand } from "./derive";
import { fitCommand } from "./fit";
import { refitCommand } from "./refit";
import { scoreCommand } from "./score";
import { tuneCommand } from "./tune";

let dir: string;
const at = (name: string): string => join(dir, name);

const SMALL = [
  "paymentId,createdAt,accountRef,channel,amount,shipping,shipTo,label",
  "p1,2026-10-01T10:00:00Z,a,web,20,2,X,legitimate",
  "p2,2026-10-02T10:00:00Z,a,web,40,4,Y,legitimate",
  "p3,2026-10-02T10:00:00Z,b,app,60,6,X,fraud",
  "p4,2026-10-08T10:00:00.001Z,a,web,30,3,Z,",
];

const SPEC = {
  record: { id: "paymentId", time: "createdAt", account: "accountRef", segment: "channel" },
  features: [
    { name: "amount", transform: "log" },
    { name: "share", transform: "yeo-johnson", ratio: ["shipping", "amount"] },
    { name: "n24h", transform: "log1p", count: { within: "24h" } },
    { name: "spent7d", transform: "log1p", sum: { column: "amount", within: "7d" } },
    { name: "places", transform: "log1p", distinct: { column: "shipTo", within: "30d" } },
    { name: "gapHours", transform: "log1p", sincePrevious: { unit: "hours", none: 8760 } },
    { name: "vsAverage", transform: "log", vsMean: { column: "amount", none: 1 } },
    { name: "hour", transform: "cyclic-hour", hourOfDay: { utcOffset: "+01:00" } },
  ],
};
const PLAIN_SPEC = { features: SPEC.features.map(({ name, transform }) => ({ name, transform })) };

async function run(command: (argv: string[], io: ReturnType<typeof captureIO>["io"]) => Promise<number>, argv: string[]) {
  const capture = captureIO();
  const code = await command(argv, capture.io);
  return { code, out: capture.out(), err: capture.err() };
}

/** 1,500 payments of 60 invented accounts over three weeks, in time order, a few labelled fraud. */
function recordsLedger(): string {
  const random = createRandom(1204);
  const lines = [SMALL[0]];
  let t = Date.UTC(2026, 9, 1);
  for (let i = 0; i < 1500; i++) {
    t += Math.floor(-Math.log(1 - random.next()) * 20 * 60_000);
    const fraud = random.next() < 0.02;
    const amount = (Math.exp(3.5 + 0.5 * random.next()) * (fraud ? 6 : 1)).toFixed(2);
    const shipping = (2 + random.int(800) / 100).toFixed(2);
    lines.push(
      `r${i},${new Date(t).toISOString()},acct-${random.int(60)},${random.next() < 0.6 ? "web" : "app"},${amount},${shipping},z${random.int(3)},${fraud ? "fraud" : "legitimate"}`,
    );
  }
  return lines.join("\n") + "\n";
}

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), "isodense-derive-"));
  await writeFile(at("small.csv"), SMALL.join("\n") + "\n");
  await writeFile(at("spec.json"), JSON.stringify(SPEC));
  await writeFile(at("plain-spec.json"), JSON.stringify(PLAIN_SPEC));
  await writeFile(at("records.csv"), recordsLedger());
});

afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

describe("isodense derive", () => {
  it("writes id, segment, time, label and every feature's raw value, worked out by hand", async () => {
    const result = await run(deriveCommand, [at("small.csv"), "--spec", at("spec.json"), "--out", at("small-features.csv")]);
    expect(result.code).toBe(0);
    expect(result.out).toBe(`derived 8 features for 4 payments of 2 accounts; wrote ${at("small-features.csv")}\n`);
    expect((await readFile(at("small-features.csv"), "utf8")).split("\n")).toEqual([
      "paymentId,channel,createdAt,label,amount,share,n24h,spent7d,places,gapHours,vsAverage,hour",
      // First payment of account a: no earlier payment, so `none` for the gap and the mean ratio.
      "p1,web,2026-10-01T10:00:00.000Z,legitimate,20,0.1,0,0,0,8760,1,11",
      // Exactly 24 h later: p1 is inside the window (windows include their start).
      "p2,web,2026-10-02T10:00:00.000Z,legitimate,40,0.1,1,20,1,24,2,11",
      "p3,app,2026-10-02T10:00:00.000Z,fraud,60,0.1,0,0,0,8760,1,11",
      // 7 d + 1 ms after p1: p1 has left the 7-day window; the mean is over p1 and p2 (30 / 30).
      `p4,web,2026-10-08T10:00:00.001Z,,30,0.1,0,40,2,${144 + 1 / 3_600_000},1,${11 + 1 / 3_600_000}`,
      "",
    ]);
  });

  it("refuses a row out of time order, naming file, line and column, and writes nothing", async () => {
    await writeFile(at("shuffled.csv"), [SMALL[0], SMALL[4], SMALL[1], SMALL[2], SMALL[3]].join("\n") + "\n");
    const result = await run(deriveCommand, [at("shuffled.csv"), "--spec", at("spec.json"), "--out", at("never.csv")]);
    expect(result.code).toBe(2);
    expect(result.err).toContain(
      `${at("shuffled.csv")} line 3, column 'createdAt': 2026-10-01T10:00:00.000Z is before line 2 (2026-10-08T10:00:00.001Z): a ledger of payment records must be in time order`,
    );
    expect(existsSync(at("never.csv"))).toBe(false);
  });

  it("sorts by time with --sort, keeping the ledger order of payments at the same instant", async () => {
    const result = await run(deriveCommand, [at("shuffled.csv"), "--spec", at("spec.json"), "--out", at("sorted-features.csv"), "--sort"]);
    expect(result.code).toBe(0);
    expect(await readFile(at("sorted-features.csv"), "utf8")).toBe(await readFile(at("small-features.csv"), "utf8"));
  });

  it("names file, line and column of a bad time, a zero denominator, a repeated id and a missing column", async () => {
    const cases: [string[], string][] = [
      [[SMALL[0], SMALL[1].replace("2026-10-01T10:00:00Z", "2026-10-01 10:00")], "line 2, column 'createdAt': must be an ISO 8601 timestamp"],
      [[SMALL[0], SMALL[1].replace(",20,2,", ",0,2,")], `line 2, column 'amount': must not be 0: it divides shipping in feature "share"`],
      [[SMALL[0], SMALL[1], SMALL[2].replace("p2", "p1")], "line 3, column 'paymentId': repeats payment id 'p1' of an earlier row of account 'a'"],
      [[SMALL[0].replace("shipTo", "destination"), SMALL[1]], "column 'shipTo' (read by the spec) not found in header"],
    ];
    for (const [lines, message] of cases) {
      await writeFile(at("bad.csv"), lines.join("\n") + "\n");
      const result = await run(deriveCommand, [at("bad.csv"), "--spec", at("spec.json"), "--out", at("bad-out.csv")]);
      expect(result.code, message).toBe(2);
      expect(result.err).toContain(message);
    }
  });

  it("refuses a spec without record, and a spec whose derivation key is wrong, naming feature and key", async () => {
    expect((await run(deriveCommand, [at("small.csv"), "--spec", at("plain-spec.json"), "--out", at("x.csv")])).err).toContain('has no "record"');
    await writeFile(at("bad-spec.json"), JSON.stringify({ ...SPEC, features: [{ name: "n24h", transform: "log1p", count: { within: "1 day" } }] }));
    const result = await run(deriveCommand, [at("small.csv"), "--spec", at("bad-spec.json"), "--out", at("x.csv")]);
    expect(result.code).toBe(2);
    expect(result.err).toMatch(/features\[0\]\.count\.within must be a duration.*\(feature "n24h"\)/);
  });
});

describe("fit, score, tune and refit on payment records", () => {
  it("fit derives on the way: the same model as fitting the derived features, and the artifact carries the spec", async () => {
    expect((await run(deriveCommand, [at("records.csv"), "--spec", at("spec.json"), "--out", at("features.csv")])).code).toBe(0);
    const direct = await run(fitCommand, [at("records.csv"), "--spec", at("spec.json"), "--out", at("direct.json"), "--segment-by", "channel"]);
    expect(direct.code, direct.err).toBe(0);
    const twoStep = await run(fitCommand, [
      at("features.csv"),
      "--spec",
      at("plain-spec.json"),
      "--out",
      at("two-step.json"),
      "--segment-by",
      "channel",
      "--id-column",
      "paymentId",
    ]);
    expect(twoStep.code, twoStep.err).toBe(0);
    const a = await parseArtifact(await readFile(at("direct.json"), "utf8"));
    const b = await parseArtifact(await readFile(at("two-step.json"), "utf8"));
    expect(a.segments).toEqual(b.segments);
    expect(a.training.rowsUsed).toBe(b.training.rowsUsed);
    expect(a.record).toMatchObject(SPEC.record);
    expect(a.features.find((f) => f.name === "n24h")?.derive).toEqual({ count: { within: "1d" } });
    expect(b.record).toBeUndefined();
  });

  it("score reads a records ledger with a model that derives, and gives the scores of the derived features", async () => {
    expect((await run(scoreCommand, [at("direct.json"), at("records.csv"), "--out", at("scores-records.csv")])).code).toBe(0);
    expect((await run(scoreCommand, [at("direct.json"), at("features.csv"), "--out", at("scores-features.csv"), "--id-column", "paymentId"])).code).toBe(0);
    const records = await readFile(at("scores-records.csv"), "utf8");
    expect(records).toBe(await readFile(at("scores-features.csv"), "utf8"));
    expect(records.split("\n")[1]).toMatch(/^r0,/);
  });

  it("tune takes a labelled records ledger, and refit a records ledger, deriving on the way", async () => {
    const tuned = await run(tuneCommand, [
      at("records.csv"),
      "--model",
      at("direct.json"),
      "--id-column",
      "paymentId",
      "--label-column",
      "label",
      "--objective",
      "f1",
      "--out",
      at("tuned.json"),
    ]);
    expect(tuned.code, tuned.err).toBe(0);
    // The review export carries each payment's derived features: here, the derived rows with their labels.
    const [header, ...rows] = (await readFile(at("features.csv"), "utf8")).trimEnd().split("\n");
    const labels = [header.replace(",label,", ",outcome,"), ...rows.filter((_, i) => i % 10 === 0 || rows[i].includes(",fraud,"))];
    await writeFile(at("labels.csv"), labels.join("\n") + "\n");
    const refit = await run(refitCommand, [
      at("records.csv"),
      "--labels",
      at("labels.csv"),
      "--model",
      at("direct.json"),
      "--out",
      at("candidate.json"),
      "--labels-id-column",
      "paymentId",
    ]);
    expect(refit.code, refit.err).toBe(0);
    const candidate = await parseArtifact(await readFile(at("candidate.json"), "utf8"));
    expect(candidate.record).toMatchObject(SPEC.record);
  });
});
