import { describe, expect, it } from "vitest";
import { createRandom } from "../random";
import { deriveByName, deriveInto } from "./derive";
import { emptyHistory, recordPayment, type AccountHistory } from "./history";
import { localHourInZone } from "./local-hour";
import { RecordInputError, recordFromFields, type PaymentRecord } from "./record";
import { parseRecordSpec, type RecordSpec } from "./spec";
import { DAY_MS, HOUR_MS, MINUTE_MS } from "./time";

const RECORD = { id: "id", time: "at", account: "acct" };

const FEATURES = [
  { name: "amount", transform: "log" },
  { name: "share", transform: "none", ratio: ["shipping", "amount"] },
  { name: "ageDays", transform: "log1p", since: { column: "openedAt", unit: "days" } },
  { name: "n24h", transform: "log1p", count: { within: "24h" } },
  { name: "spent7d", transform: "log1p", sum: { column: "amount", within: "7d" } },
  { name: "places30d", transform: "log1p", distinct: { column: "shipTo", within: "30d" } },
  { name: "gapHours", transform: "log1p", sincePrevious: { unit: "hours", none: 8760 } },
  { name: "vsAverage", transform: "log", vsMean: { column: "amount", none: 1 } },
  { name: "hour", transform: "cyclic-hour", hourOfDay: { utcOffset: "+01:00" } },
];

const SPEC = parseRecordSpec({ record: RECORD, features: FEATURES });

function payment(id: string, at: string, amount: number, shipping: number, shipTo: string, acct = "a"): PaymentRecord {
  return recordFromFields(SPEC, { id, at, acct, amount, shipping, shipTo, openedAt: "2026-09-01T00:00:00Z" });
}

/** Derives the payment from the history, then records it (what the edge does atomically). */
function step(spec: RecordSpec, history: AccountHistory, record: PaymentRecord): Record<string, number> {
  const derived = deriveByName(spec, history, record);
  recordPayment(spec, history, record);
  return derived;
}

describe("deriving features from a payment and the account's earlier payments", () => {
  it("matches values worked out by hand, window edges included", () => {
    const history = emptyHistory();
    // First payment: no earlier payment, so sincePrevious and vsMean take their `none`.
    expect(step(SPEC, history, payment("p1", "2026-10-01T10:00:00Z", 20, 2, "X"))).toEqual({
      amount: 20,
      share: 0.1,
      ageDays: 30 + 10 / 24,
      n24h: 0,
      spent7d: 0,
      places30d: 0,
      gapHours: 8760,
      vsAverage: 1,
      hour: 11,
    });
    // Exactly 24 h later: a window includes its start, so p1 counts.
    expect(step(SPEC, history, payment("p2", "2026-10-02T10:00:00Z", 40, 4, "Y"))).toEqual({
      amount: 40,
      share: 0.1,
      ageDays: 31 + 10 / 24,
      n24h: 1,
      spent7d: 20,
      places30d: 1,
      gapHours: 24,
      vsAverage: 2,
      hour: 11,
    });
    // Same instant as p2: strictly earlier payments only, so p2 is not seen.
    expect(step(SPEC, history, payment("p3", "2026-10-02T10:00:00Z", 60, 6, "X"))).toMatchObject({ n24h: 1, spent7d: 20, places30d: 1, gapHours: 24, vsAverage: 3 });
    // 7 d + 1 ms after p1: p1 has just left the 7-day window; the mean is over all earlier payments.
    expect(step(SPEC, history, payment("p4", "2026-10-08T10:00:00.001Z", 30, 3, "Z"))).toEqual({
      amount: 30,
      share: 0.1,
      ageDays: 37 + 10 / 24 + 1 / DAY_MS,
      n24h: 0,
      spent7d: 100,
      places30d: 2,
      gapHours: 144 + 1 / HOUR_MS,
      vsAverage: 30 / 40,
      hour: 11 + 1 / HOUR_MS,
    });
  });

  it("derives a late payment from what the account had before its own time, not from later ones", () => {
    const history = emptyHistory();
    step(SPEC, history, payment("a", "2026-10-01T10:00:00Z", 50, 5, "X"));
    step(SPEC, history, payment("c", "2026-10-01T10:40:00Z", 500, 5, "Y"));
    // b happened at 10:20 but arrives after c.
    expect(step(SPEC, history, payment("b", "2026-10-01T10:20:00Z", 25, 5, "Z"))).toMatchObject({ n24h: 1, spent7d: 50, places30d: 1, gapHours: 1 / 3, vsAverage: 0.5 });
    // A later payment sees all three, in time order: its previous payment is c.
    expect(step(SPEC, history, payment("d", "2026-10-01T11:00:00Z", 100, 5, "X"))).toMatchObject({
      n24h: 3,
      spent7d: 575,
      places30d: 3,
      gapHours: 1 / 3,
      vsAverage: 100 / (575 / 3),
    });
  });

  it("counts a repeated payment id once", () => {
    const history = emptyHistory();
    const first = payment("p1", "2026-10-01T10:00:00Z", 20, 2, "X");
    expect(recordPayment(SPEC, history, first)).toBe(true);
    const before = JSON.stringify(history);
    expect(recordPayment(SPEC, history, first)).toBe(false);
    expect(recordPayment(SPEC, history, { ...first, timeMs: first.timeMs + MINUTE_MS })).toBe(false);
    expect(JSON.stringify(history)).toBe(before);
    expect(deriveByName(SPEC, history, payment("p2", "2026-10-01T11:00:00Z", 20, 2, "X"))).toMatchObject({ n24h: 1, spent7d: 20 });
  });

  it("refuses a zero denominator, naming the column and the feature", () => {
    const out = new Float64Array(SPEC.features.length);
    const zero = payment("p1", "2026-10-01T10:00:00Z", 0, 2, "X");
    expect(() => deriveInto(SPEC, emptyHistory(), zero, out)).toThrow(new RecordInputError("amount", 'must not be 0: it divides shipping in feature "share"'));
  });

  it("refuses a mean of zero over the earlier payments, and takes `none` when there are none", () => {
    const spec = parseRecordSpec({ record: RECORD, features: [{ name: "vs", transform: "none", vsMean: { column: "amount", none: -1 } }] });
    const history = emptyHistory();
    const at = (id: string, iso: string, amount: number) => recordFromFields(spec, { id, at: iso, acct: "a", amount });
    expect(step(spec, history, at("p1", "2026-10-01T10:00:00Z", 0))).toEqual({ vs: -1 });
    expect(() => deriveByName(spec, history, at("p2", "2026-10-01T11:00:00Z", 5))).toThrow(/has a mean of 0 over the account's earlier payments, so feature "vs"/);
  });

  it("treats an account idle for longer than the retention as new; exactly the retention still counts", () => {
    const history = emptyHistory();
    step(SPEC, history, payment("p1", "2026-10-01T10:00:00Z", 20, 2, "X"));
    // Retention defaults to 30 d (and the longest window here is 30 d).
    expect(deriveByName(SPEC, history, payment("p2", "2026-10-31T10:00:00Z", 40, 4, "X"))).toMatchObject({ gapHours: 720, vsAverage: 2, places30d: 1 });
    expect(step(SPEC, history, payment("p3", "2026-10-31T10:00:00.001Z", 40, 4, "X"))).toMatchObject({ gapHours: 8760, vsAverage: 1, places30d: 0, n24h: 0 });
    expect(history.entries.map((e) => e.id)).toEqual(["p3"]);
  });

  it("gives local hours across a daylight-saving change in an IANA zone", () => {
    const spec = parseRecordSpec({ record: RECORD, features: [{ name: "hour", transform: "cyclic-hour", hourOfDay: { timeZone: "Europe/Berlin" } }] });
    const at = (iso: string) => deriveByName(spec, emptyHistory(), recordFromFields(spec, { id: "p", at: iso, acct: "a" })).hour;
    // EU summer time 2026 begins 29 March 01:00 UTC (Directive 2000/84/EC): clocks go from 02:00 to 03:00.
    expect(at("2026-03-29T00:45:00Z")).toBe(1.75);
    expect(at("2026-03-29T01:15:00Z")).toBe(3.25);
    expect(at("2026-03-29T01:15:00+01:00")).toBe(1.25);
  });
});

describe("account history", () => {
  it("stays bounded by the payments inside the longest window plus the lateness", () => {
    const spec = parseRecordSpec({
      record: RECORD,
      features: [
        { name: "n", transform: "none", count: { within: "24h" } },
        { name: "vs", transform: "none", vsMean: { column: "amount", none: 1 } },
      ],
    });
    const history = emptyHistory();
    const start = Date.UTC(2026, 9, 1);
    let largest = 0;
    for (let i = 0; i < 2000; i++) {
      const record = recordFromFields(spec, { id: `p${i}`, at: new Date(start + i * HOUR_MS).toISOString(), acct: "a", amount: 1 + (i % 7) });
      const derived = step(spec, history, record);
      if (i > 30) expect(derived.n).toBe(24);
      largest = Math.max(largest, history.entries.length);
    }
    // One payment an hour: 24 h + 1 h of lateness keeps at most 26 (both ends included).
    expect(largest).toBeLessThanOrEqual(26);
    expect(history.foldedCount + history.entries.length).toBe(2000);
  });

  it("refuses a payment so late that its window reaches into folded history, and accepts one within the lateness", () => {
    const spec = parseRecordSpec({ record: RECORD, features: [{ name: "n", transform: "none", count: { within: "24h" } }] });
    const history = emptyHistory();
    const at = (id: string, iso: string) => recordFromFields(spec, { id, at: iso, acct: "a" });
    step(spec, history, at("p", "2026-10-01T10:00:00Z"));
    step(spec, history, at("q", "2026-10-03T10:00:00Z"));
    expect(history.foldedCount).toBe(1);
    expect(() => deriveByName(spec, history, at("r", "2026-10-02T09:30:00Z"))).toThrow(/may arrive at most 60 minutes late/);
    expect(() => recordPayment(spec, history, at("r", "2026-10-02T09:30:00Z"))).toThrow(RecordInputError);
    expect(step(spec, history, at("s", "2026-10-03T09:30:00Z"))).toEqual({ n: 0 });
  });
});

/** The definition, computed the slow way: every payment the account had recorded, no folding. */
function referenceDerive(spec: RecordSpec, arrived: PaymentRecord[], record: PaymentRecord): number[] {
  const t = record.timeMs;
  const earlier = arrived.filter((p) => p.timeMs < t).sort((x, y) => x.timeMs - y.timeMs);
  const inWindow = (w: number) => earlier.filter((p) => p.timeMs >= t - w);
  return spec.features.map(({ derivation: d }) => {
    switch (d.kind) {
      case "read":
        return record.values[d.column] as number;
      case "ratio":
        return (record.values[d.numerator] as number) / (record.values[d.denominator] as number);
      case "since":
        return (t - (record.values[d.column] as number)) / d.unitMs;
      case "count":
        return inWindow(d.withinMs).length;
      case "sum":
        return inWindow(d.withinMs).reduce((s, p) => s + (p.values[d.column] as number), 0);
      case "distinct":
        return new Set(inWindow(d.withinMs).map((p) => String(p.values[d.column]))).size;
      case "sincePrevious":
        return earlier.length === 0 ? d.none : (t - earlier[earlier.length - 1].timeMs) / d.unitMs;
      case "vsMean":
        return earlier.length === 0 ? d.none : (record.values[d.column] as number) / (earlier.reduce((s, p) => s + (p.values[d.column] as number), 0) / earlier.length);
      case "hourOfDay":
        return "timeZone" in d ? localHourInZone(t, d.timeZone) : (((t / HOUR_MS + d.utcOffsetMinutes / 60) % 24) + 24) % 24;
    }
  });
}

describe("derivation against the definition computed the slow way", () => {
  it("agrees on a seeded stream with late arrivals, repeats, idle gaps and a JSON round trip of every history", () => {
    const spec = parseRecordSpec({
      record: { ...RECORD, lateness: "2h", retention: "10d" },
      features: [...FEATURES.slice(0, 8), { name: "hour", transform: "cyclic-hour", hourOfDay: { timeZone: "America/New_York" } }],
    });
    const random = createRandom(20261204);
    // Payments in time order on three accounts, gaps from seconds to two weeks.
    const payments: PaymentRecord[] = [];
    let t = Date.UTC(2026, 2, 1);
    for (let i = 0; i < 600; i++) {
      t += Math.floor(-Math.log(1 - random.next()) * (random.next() < 0.1 ? 5 * DAY_MS : 3 * HOUR_MS));
      payments.push(
        recordFromFields(spec, {
          id: `p${i}`,
          at: new Date(t).toISOString(),
          acct: `a${random.int(3)}`,
          amount: 1 + random.int(20_000) / 100,
          shipping: random.int(900) / 100,
          shipTo: `s${random.int(4)}`,
          openedAt: "2025-01-01T00:00:00Z",
        }),
      );
    }
    // Arrival order: each payment may be overtaken by later ones within 100 minutes (lateness is 2 h).
    const arrival = payments.map((p, i) => ({ p, key: p.timeMs + random.next() * 100 * MINUTE_MS, i })).sort((x, y) => x.key - y.key || x.i - y.i);
    const histories = new Map<string, AccountHistory>();
    const reference = new Map<string, PaymentRecord[]>();
    const out = new Float64Array(spec.features.length);
    let compared = 0;
    for (const { p } of arrival) {
      for (const record of random.next() < 0.05 ? [p, p] : [p]) {
        const history = JSON.parse(JSON.stringify(histories.get(record.account) ?? emptyHistory())) as AccountHistory;
        let arrived = reference.get(record.account) ?? [];
        const latest = Math.max(-Infinity, ...arrived.map((q) => q.timeMs));
        if (record.timeMs - latest > spec.retentionMs) arrived = [];
        const repeat = arrived.some((q) => q.id === record.id);
        deriveInto(spec, history, record, out);
        const expected = referenceDerive(spec, arrived, record);
        expected.forEach((value, f) => {
          const scale = Math.max(1, Math.abs(value));
          if (Math.abs(out[f] - value) > 1e-12 * scale) throw new Error(`${record.id} ${spec.features[f].name}: ${out[f]} vs ${value}`);
        });
        compared += 1;
        expect(recordPayment(spec, history, record)).toBe(!repeat);
        if (!repeat) arrived = [...arrived, record];
        reference.set(record.account, arrived);
        histories.set(record.account, history);
      }
    }
    expect(compared).toBeGreaterThan(600);
    // Something was folded, or the bounded path went untested.
    expect([...histories.values()].some((h) => h.foldedCount > 0)).toBe(true);
  });
});
