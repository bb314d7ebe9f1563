import { readFileSync } from "node:fs";
import { beforeAll, describe, expect, it } from "vitest";
import { deriveInto } from "../shared-model/src/records/derive";
import { emptyHistory, recordPayment, type AccountHistory } from "../shared-model/src/records/history";
import { recordFromFields } from "../shared-model/src/records/record";
import { parseRecordSpec } from "../shared-model/src/records/spec";
import {
  CHANNEL_DESIGN_SHARES,
  CHANNELS,
  COMBINATION_PATTERN,
  DEFAULT_ROWS,
  FRAUD_PATTERNS,
  LEDGER_COLUMNS,
  LEDGER_FEATURES,
  LOCAL_UTC_OFFSET_HOURS,
  LedgerOptionError,
  NO_PREVIOUS_HOURS,
  csvHeader,
  formatCsvRow,
  generateLedger,
  ledgerCsvLines,
  resolveLedgerOptions,
  type LedgerFeature,
  type LedgerOptions,
} from "./generate";

const HOUR_MS = 3_600_000;
const DAY_MS = 86_400_000;

/** A record read back from its CSV line, with the time as epoch milliseconds. */
interface ParsedRecord {
  paymentId: string;
  createdAt: string;
  accountRef: string;
  accountCreatedAt: string;
  channel: string;
  amount: number;
  basketItems: number;
  shippingFee: number;
  shipDistanceKm: number;
  shipTo: string;
  label: string;
  fraudPattern: string;
  timeMs: number;
}

/** A record with the features demo-ledger/spec.json derives from it and the account's earlier records. */
type ParsedRow = ParsedRecord & Record<LedgerFeature, number>;

/** Field patterns of the CSV, column by column (what the README promises). */
const FIELD_PATTERNS: Record<(typeof LEDGER_COLUMNS)[number], RegExp> = {
  paymentId: /^pay-\d{6,}$/,
  createdAt: /^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}\.\d{3}Z$/,
  accountRef: /^acct-\d{5,}$/,
  accountCreatedAt: /^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}\.\d{3}Z$/,
  channel: /^(web|app|phone)$/,
  amount: /^\d+\.\d{2}$/,
  basketItems: /^[1-9]\d*$/,
  shippingFee: /^\d+\.\d{2}$/,
  shipDistanceKm: /^\d+\.\d{2}$/,
  shipTo: /^dst-\d{6,}$/,
  label: /^(fraud|legitimate)$/,
  fraudPattern: /^(|test-burst|takeover-spike|reship-haul|ordinary-parts)$/,
};

function parseLine(line: string): ParsedRecord {
  const f = line.split(",");
  if (f.length !== LEDGER_COLUMNS.length) throw new Error(`expected ${LEDGER_COLUMNS.length} fields, got ${f.length}: ${line}`);
  return {
    paymentId: f[0],
    createdAt: f[1],
    accountRef: f[2],
    accountCreatedAt: f[3],
    channel: f[4],
    amount: Number(f[5]),
    basketItems: Number(f[6]),
    shippingFee: Number(f[7]),
    shipDistanceKm: Number(f[8]),
    shipTo: f[9],
    label: f[10],
    fraudPattern: f[11],
    timeMs: Date.parse(f[1]),
  };
}

const spec = parseRecordSpec(JSON.parse(readFileSync(new URL("./spec.json", import.meta.url), "utf8")));

/** The CSV lines' records with their features as the pipeline derives them (lines in time order). */
function derived(csvLines: readonly string[]): ParsedRow[] {
  const histories = new Map<string, AccountHistory>();
  const out = new Float64Array(spec.features.length);
  return csvLines.map((line) => {
    const parsed = parseLine(line);
    const cells = line.split(",");
    const record = recordFromFields(spec, Object.fromEntries(LEDGER_COLUMNS.map((column, j) => [column, cells[j]])));
    const history = histories.get(record.account) ?? emptyHistory();
    histories.set(record.account, history);
    deriveInto(spec, history, record, out);
    recordPayment(spec, history, record);
    const row = { ...parsed } as ParsedRow;
    spec.features.forEach((f, j) => (row[f.name as LedgerFeature] = out[j]));
    return row;
  });
}

/** Linear-interpolation quantile (Hyndman & Fan type 7, the default of R and NumPy) of sorted values. */
function quantile(sorted: ArrayLike<number>, p: number): number {
  const h = (sorted.length - 1) * p;
  const lo = Math.floor(h);
  const hi = Math.min(lo + 1, sorted.length - 1);
  return sorted[lo] + (sorted[hi] - sorted[lo]) * (h - lo);
}

function pearson(a: readonly number[], b: readonly number[]): number {
  const n = a.length;
  let ma = 0;
  let mb = 0;
  for (let i = 0; i < n; i++) {
    ma += a[i] / n;
    mb += b[i] / n;
  }
  let sab = 0;
  let saa = 0;
  let sbb = 0;
  for (let i = 0; i < n; i++) {
    sab += (a[i] - ma) * (b[i] - mb);
    saa += (a[i] - ma) ** 2;
    sbb += (b[i] - mb) ** 2;
  }
  return sab / Math.sqrt(saa * sbb);
}

const csvOf = (options: LedgerOptions): string => [...ledgerCsvLines(options)].join("\n") + "\n";

// The default ledger (60,000 rows, default seed), read back from its CSV text so every check
// below is a check of what the file says.
let lines: string[];
let rows: ParsedRow[];
let legit: ParsedRow[];

beforeAll(() => {
  lines = [...ledgerCsvLines()];
  rows = derived(lines.slice(1));
  legit = rows.filter((r) => r.label === "legitimate");
}, 120_000);

describe("determinism", () => {
  it("produces byte-identical CSV for the same seed and a different CSV for another seed", () => {
    const first = csvOf({ seed: 42, rows: 8_000 });
    const second = csvOf({ seed: 42, rows: 8_000 });
    const other = csvOf({ seed: 43, rows: 8_000 });
    expect(second).toBe(first);
    expect(other).not.toBe(first);
    // Not just one differing byte: the two seeds give different accounts, amounts and times.
    const a = first.split("\n").slice(1, 200);
    const b = other.split("\n").slice(1, 200);
    expect(a.filter((line, i) => line === b[i]).length).toBe(0);
  });

  it("returns exactly the number of rows asked for, numbered from pay-000001", () => {
    for (const n of [1, 7, 250]) {
      const got = [...generateLedger({ rows: n, seed: 5 })];
      expect(got.length).toBe(n);
      expect(got[0].paymentId).toBe("pay-000001");
      expect(got[n - 1].paymentId).toBe(`pay-${String(n).padStart(6, "0")}`);
    }
  });
});

describe("columns and types", () => {
  it("writes the twelve documented record columns in order, no feature column, every field in its documented format", () => {
    expect(lines[0]).toBe(csvHeader());
    expect(lines[0]).toBe("paymentId,createdAt,accountRef,accountCreatedAt,channel,amount,basketItems,shippingFee,shipDistanceKm,shipTo,label,fraudPattern");
    expect(lines.length).toBe(DEFAULT_ROWS + 1);
    const bad: string[] = [];
    for (let i = 1; i < lines.length && bad.length < 5; i++) {
      const fields = lines[i].split(",");
      LEDGER_COLUMNS.forEach((column, j) => {
        if (!FIELD_PATTERNS[column].test(fields[j])) bad.push(`line ${i + 1} ${column}=${JSON.stringify(fields[j])}`);
      });
    }
    expect(bad).toEqual([]);
  });

  it("keeps every number inside its documented range", () => {
    const broken: string[] = [];
    const check = (r: ParsedRow, column: string, ok: boolean): void => {
      if (!ok) broken.push(`${r.paymentId} ${column}=${String(r[column as keyof ParsedRow])}`);
    };
    for (const r of rows) {
      check(r, "amount", r.amount > 0);
      check(r, "basketItems", Number.isInteger(r.basketItems) && r.basketItems >= 1);
      // Derived as fee ÷ amount from the two written cents amounts: 0.6 up to one rounding step.
      check(r, "shippingShare", r.shippingShare >= 0 && r.shippingShare <= 0.6 + 1e-12);
      check(r, "accountAgeDays", r.accountAgeDays >= 0);
      check(r, "hoursSincePrevious", r.hoursSincePrevious >= 0);
      check(r, "paymentsLast24h", Number.isInteger(r.paymentsLast24h) && r.paymentsLast24h >= 0);
      check(r, "shipDistanceKm", r.shipDistanceKm >= 0);
      check(r, "amountVsAccountAverage", r.amountVsAccountAverage > 0);
      check(r, "hourOfDay", r.hourOfDay >= 0 && r.hourOfDay < 24);
      check(r, "fraudPattern", (r.fraudPattern === "") === (r.label === "legitimate"));
    }
    expect(broken.slice(0, 5)).toEqual([]);
  });

  it("numbers payments in time order and derives the local hour from the timestamp at UTC+01:00", () => {
    const broken: string[] = [];
    for (let i = 0; i < rows.length; i++) {
      const r = rows[i];
      if (r.paymentId !== `pay-${String(i + 1).padStart(6, "0")}`) broken.push(`row ${i + 1} is ${r.paymentId}`);
      if (i > 0 && r.timeMs < rows[i - 1].timeMs) broken.push(`${r.paymentId} is earlier than the row before`);
      const expected = (((r.timeMs / HOUR_MS + LOCAL_UTC_OFFSET_HOURS) % 24) + 24) % 24;
      if (!(Math.abs(r.hourOfDay - expected) < 1.01e-4)) broken.push(`${r.paymentId} hourOfDay ${r.hourOfDay} ≠ ${expected}`);
    }
    expect(broken.slice(0, 5)).toEqual([]);
  });

  it("formats a row so that parsing the line gives back the row's values", () => {
    const sample = [...generateLedger({ rows: 300, seed: 11 })];
    for (const row of sample) {
      const parsed = parseLine(formatCsvRow(row));
      for (const column of LEDGER_COLUMNS) expect(parsed[column]).toBe(row[column]);
    }
  });

  it("derives from its records, with demo-ledger/spec.json, the generator's own figure of every feature (to its 4 decimals)", () => {
    const own = [...generateLedger()];
    const broken: string[] = [];
    own.forEach((row, i) => {
      for (const feature of LEDGER_FEATURES) {
        // The figures are rounded to 4 decimals (hourOfDay floored); amounts and distances are exact.
        if (!(Math.abs(rows[i][feature] - row[feature]) <= 1.0001e-4 * Math.max(1, Math.abs(row[feature])))) {
          broken.push(`${row.paymentId} ${feature}: derived ${rows[i][feature]}, generator ${row[feature]}`);
        }
      }
    });
    expect(broken.slice(0, 5)).toEqual([]);
    expect(own.length).toBe(DEFAULT_ROWS);
  });

  it("writes the shipping fee as part of the amount and keeps it at most 0.6 of it", () => {
    for (const r of rows.slice(0, 5000)) {
      expect(r.shippingFee).toBeGreaterThanOrEqual(0);
      expect(r.shippingFee).toBeLessThanOrEqual(0.6 * r.amount + 1e-9);
    }
  });

  it("spans about eight weeks from the start date", () => {
    const startMs = Date.UTC(2026, 9, 1);
    expect(rows[0].timeMs).toBeGreaterThanOrEqual(startMs);
    const days = (rows[rows.length - 1].timeMs - startMs) / DAY_MS;
    expect(days).toBeGreaterThan(50);
    expect(days).toBeLessThan(63);
    const shifted = [...generateLedger({ rows: 50, start: "2027-03-15T12:00:00Z" })];
    expect(Date.parse(shifted[0].createdAt)).toBeGreaterThanOrEqual(Date.UTC(2027, 2, 15, 12));
  });
});

describe("no cardholder data", () => {
  it("has no run of 13 to 19 digits anywhere, so no field can pass for a card number", () => {
    const offending = lines.filter((line) => /\d{13,}/.test(line));
    expect(offending.slice(0, 3)).toEqual([]);
    // And the detector itself works: a line with a 16-digit run would be caught.
    expect(/\d{13,}/.test("pay-000001,4000123412341234")).toBe(true);
  });
});

describe("fraud", () => {
  it("keeps the fraud rate of the default ledger within the 0.5–1 % target band", () => {
    const rate = rows.filter((r) => r.label === "fraud").length / rows.length;
    expect(rate).toBeGreaterThanOrEqual(0.005);
    expect(rate).toBeLessThanOrEqual(0.01);
  });

  it("contains every fraud kind, in the default ledger and in a 2,000-row sample", () => {
    for (const kind of FRAUD_PATTERNS) expect(rows.filter((r) => r.fraudPattern === kind).length).toBeGreaterThanOrEqual(50);
    const small = [...generateLedger({ rows: 2_000 })];
    for (const kind of FRAUD_PATTERNS) expect(small.some((r) => r.fraudPattern === kind)).toBe(true);
  });

  it("places every feature of each combination payment inside the legitimate 2nd–98th percentile band, pooled and within its channel", () => {
    const combination = rows.filter((r) => r.fraudPattern === COMBINATION_PATTERN);
    expect(combination.length).toBeGreaterThan(50);
    const outside: string[] = [];
    for (const group of [null, ...CHANNELS]) {
      const reference = legit.filter((r) => group === null || r.channel === group);
      const members = combination.filter((r) => group === null || r.channel === group);
      for (const feature of LEDGER_FEATURES) {
        const sorted = Float64Array.from(reference, (r) => r[feature]).sort();
        const low = quantile(sorted, 0.02);
        const high = quantile(sorted, 0.98);
        for (const r of members) {
          if (r[feature] < low || r[feature] > high) outside.push(`${group ?? "pooled"} ${r.paymentId} ${feature}=${r[feature]} not in [${low}, ${high}]`);
        }
      }
    }
    expect(outside).toEqual([]);
  });

  it("makes the combination rare: at most a handful of legitimate payments join an account under three days old, 3–5 a.m. and one item for 95 or more", () => {
    const lookalike = (r: ParsedRow): boolean => r.accountAgeDays < 3 && r.hourOfDay >= 3 && r.hourOfDay < 5 && r.basketItems === 1 && r.amount >= 95;
    expect(rows.filter((r) => r.fraudPattern === COMBINATION_PATTERN).every(lookalike)).toBe(true);
    // Each ingredient alone is common enough among legitimate payments…
    expect(legit.filter((r) => r.accountAgeDays < 3).length).toBeGreaterThan(1_000);
    expect(legit.filter((r) => r.hourOfDay >= 3 && r.hourOfDay < 5).length).toBeGreaterThan(200);
    expect(legit.filter((r) => r.basketItems === 1 && r.amount >= 95).length).toBeGreaterThan(50);
    // …but together they (almost) never occur.
    expect(legit.filter(lookalike).length).toBeLessThanOrEqual(3);
  });

  it("gives each other fraud kind its signature: bursts of tiny fast payments, takeovers of old accounts, far many-item hauls", () => {
    const burst = rows.filter((r) => r.fraudPattern === "test-burst");
    expect(burst.every((r) => r.amount < 5 && r.basketItems === 1 && r.accountAgeDays < 0.1)).toBe(true);
    expect(Math.max(...burst.map((r) => r.paymentsLast24h))).toBeGreaterThanOrEqual(8);
    const takeover = rows.filter((r) => r.fraudPattern === "takeover-spike");
    expect(takeover.every((r) => r.accountAgeDays > 180 && r.shipDistanceKm > 50)).toBe(true);
    const ratios = takeover.map((r) => r.amountVsAccountAverage).sort((x, y) => x - y);
    expect(quantile(ratios, 0.5)).toBeGreaterThan(4);
    const legitRatioP98 = quantile(
      legit.map((r) => r.amountVsAccountAverage).sort((x, y) => x - y),
      0.98,
    );
    expect(quantile(ratios, 0.5)).toBeGreaterThan(legitRatioP98);
    // Takeovers hit accounts that also make legitimate payments.
    const takenOver = new Set(takeover.map((r) => r.accountRef));
    expect(legit.some((r) => takenOver.has(r.accountRef))).toBe(true);
    const haul = rows.filter((r) => r.fraudPattern === "reship-haul");
    expect(haul.every((r) => r.basketItems >= 6 && r.shipDistanceKm > 150 && r.accountAgeDays < 60)).toBe(true);
  });
});

describe("per-account consistency", () => {
  /** Rows grouped by account, in ledger order. */
  const byAccount = (): Map<string, ParsedRow[]> => {
    const map = new Map<string, ParsedRow[]>();
    for (const r of rows) {
      const list = map.get(r.accountRef);
      if (list) list.push(r);
      else map.set(r.accountRef, [r]);
    }
    return map;
  };

  it("ages each account by exactly the time between its payments and measures the gap to the previous one in the ledger", () => {
    const broken: string[] = [];
    let pairs = 0;
    for (const list of byAccount().values()) {
      for (let i = 1; i < list.length; i++) {
        const gapMs = list[i].timeMs - list[i - 1].timeMs;
        const ageStep = list[i].accountAgeDays - list[i - 1].accountAgeDays;
        if (!(Math.abs(ageStep - gapMs / DAY_MS) <= 1.0001e-4)) broken.push(`${list[i].paymentId} aged ${ageStep} d in ${gapMs} ms`);
        if (!(Math.abs(list[i].hoursSincePrevious - gapMs / HOUR_MS) <= 0.51e-4)) {
          broken.push(`${list[i].paymentId} hoursSincePrevious ${list[i].hoursSincePrevious} after ${gapMs} ms`);
        }
        pairs++;
      }
      // The account's first payment in the ledger has no previous one: the spec's `none`, and a mean ratio of 1.
      const first = list[0];
      if (first.hoursSincePrevious !== NO_PREVIOUS_HOURS || first.amountVsAccountAverage !== 1) {
        broken.push(`${first.paymentId} first payment: ${first.hoursSincePrevious} h, ratio ${first.amountVsAccountAverage}`);
      }
    }
    expect(broken.slice(0, 5)).toEqual([]);
    expect(pairs).toBeGreaterThan(20_000);
  });

  it("counts in paymentsLast24h exactly the account's earlier rows of the last 24 hours, both ends included", () => {
    const broken: string[] = [];
    for (const list of byAccount().values()) {
      for (let i = 0; i < list.length; i++) {
        let earlier = 0;
        for (let j = i - 1; j >= 0 && list[i].timeMs - list[j].timeMs <= DAY_MS; j--) if (list[j].timeMs < list[i].timeMs) earlier++;
        if (list[i].paymentsLast24h !== earlier) broken.push(`${list[i].paymentId}: ${list[i].paymentsLast24h} written, ${earlier} earlier rows`);
      }
    }
    expect(broken.slice(0, 5)).toEqual([]);
    expect(rows.filter((r) => r.paymentsLast24h >= 2).length).toBeGreaterThan(100);
  });

  it("divides each amount by the running average of the account's earlier amounts in the ledger", () => {
    const broken: string[] = [];
    let checked = 0;
    for (const list of byAccount().values()) {
      const first = list[0];
      let sum = first.amount;
      for (let i = 1; i < list.length; i++) {
        const expected = list[i].amount / (sum / i);
        if (!(Math.abs(list[i].amountVsAccountAverage - expected) <= 1e-12 * expected)) {
          broken.push(`${list[i].paymentId}: ${list[i].amountVsAccountAverage} written, ${expected} from earlier rows`);
        }
        sum += list[i].amount;
        checked++;
      }
    }
    expect(broken.slice(0, 5)).toEqual([]);
    expect(checked).toBeGreaterThan(2_000);
  });

  it("spreads amountVsAccountAverage wider for young accounts than for long-standing ones", () => {
    const spread = (values: number[]): number => {
      const logs = values.map(Math.log);
      const mean = logs.reduce((a, b) => a + b, 0) / logs.length;
      return Math.sqrt(logs.reduce((a, b) => a + (b - mean) ** 2, 0) / logs.length);
    };
    const young = legit.filter((r) => r.accountAgeDays < 30 && r.amountVsAccountAverage !== 1);
    const old = legit.filter((r) => r.accountAgeDays > 365);
    expect(spread(young.map((r) => r.amountVsAccountAverage))).toBeGreaterThan(1.2 * spread(old.map((r) => r.amountVsAccountAverage)));
  });
});

describe("segments and realism", () => {
  it("splits payments over web, app and phone as designed, with at least 2,000 phone payments in 50,000 rows", () => {
    for (const channel of CHANNELS) {
      const share = rows.filter((r) => r.channel === channel).length / rows.length;
      expect(Math.abs(share - CHANNEL_DESIGN_SHARES[channel])).toBeLessThan(0.025);
    }
    const fifty = [...generateLedger({ rows: 50_000, seed: 8 })];
    expect(fifty.filter((r) => r.channel === "phone").length).toBeGreaterThanOrEqual(2_000);
  });

  it("takes phone orders only while the line is staffed and makes night hours rarer than evening ones", () => {
    const phone = rows.filter((r) => r.channel === "phone");
    expect(phone.every((r) => r.hourOfDay >= 8 && r.hourOfDay < 20)).toBe(true);
    const between = (low: number, high: number): number => legit.filter((r) => r.hourOfDay >= low && r.hourOfDay < high).length;
    expect(between(2, 5)).toBeLessThan(0.2 * between(18, 21));
  });

  it("raises amount with basket size, lowers the shipping share as amount rises and ties velocity to short gaps", () => {
    const logAmount = legit.map((r) => Math.log(r.amount));
    expect(
      pearson(
        logAmount,
        legit.map((r) => Math.log1p(r.basketItems)),
      ),
    ).toBeGreaterThan(0.6);
    expect(
      pearson(
        logAmount,
        legit.map((r) => r.shippingShare),
      ),
    ).toBeLessThan(-0.6);
    expect(
      pearson(
        legit.map((r) => Math.log1p(r.hoursSincePrevious)),
        legit.map((r) => r.paymentsLast24h),
      ),
    ).toBeLessThan(-0.3);
  });

  it("skews every positive feature to the right before its transform", () => {
    const skewness = (values: number[]): number => {
      const mean = values.reduce((a, b) => a + b, 0) / values.length;
      let m2 = 0;
      let m3 = 0;
      for (const v of values) {
        m2 += (v - mean) ** 2;
        m3 += (v - mean) ** 3;
      }
      return m3 / values.length / (m2 / values.length) ** 1.5;
    };
    const positive: LedgerFeature[] = ["amount", "basketItems", "hoursSincePrevious", "shipDistanceKm", "amountVsAccountAverage", "accountAgeDays"];
    // An account's first payment in the ledger has no gap (the spec's `none`); the gaps themselves are skewed.
    const measured = (r: ParsedRow, feature: LedgerFeature) => feature !== "hoursSincePrevious" || r.hoursSincePrevious !== NO_PREVIOUS_HOURS;
    for (const feature of positive) expect(skewness(legit.filter((r) => measured(r, feature)).map((r) => r[feature]))).toBeGreaterThan(1);
  });

  it("brings back many accounts with several payments each", () => {
    const counts = new Map<string, number>();
    for (const r of rows) counts.set(r.accountRef, (counts.get(r.accountRef) ?? 0) + 1);
    const repeat = [...counts.values()].filter((c) => c >= 3).length;
    expect(repeat).toBeGreaterThan(5_000);
    expect(counts.size).toBeLessThan(rows.length / 2);
  });
});

describe("options", () => {
  const refused: [LedgerOptions | Record<string, unknown>, string, string][] = [
    [{ rows: 0 }, "rows", "must be an integer from 1 to 2000000"],
    [{ rows: 12.5 }, "rows", "must be an integer from 1 to 2000000"],
    [{ rows: "100" }, "rows", "must be an integer from 1 to 2000000"],
    [{ rows: 2_000_001 }, "rows", "must be an integer from 1 to 2000000"],
    [{ seed: -1 }, "seed", "must be an integer from 0 to 4294967295"],
    [{ seed: 2 ** 32 }, "seed", "must be an integer from 0 to 4294967295"],
    [{ seed: Number.NaN }, "seed", "must be an integer from 0 to 4294967295"],
    [{ start: "2026-02-30" }, "start", "must be a calendar date YYYY-MM-DD"],
    [{ start: "01/10/2026" }, "start", "must be a calendar date YYYY-MM-DD"],
    [{ start: "2026-10-01T00:00:00+02:00" }, "start", "must be a calendar date YYYY-MM-DD"],
    [{ start: "1969-12-31" }, "start", "year 1970 to 9999"],
    [{ days: 30 }, "days", "is not an option; expected seed, rows, start or priceRise"],
    [{ priceRise: { from: "2026-10-20", rise: -1 } }, "priceRise.rise", "must be a number above -0.9"],
    [{ priceRise: { from: "next week", rise: 0.2 } }, "priceRise.from", "must be a calendar date"],
  ];

  it.each(refused)("refuses %j, naming the option %s and the rule", (options, field, rule) => {
    let caught: unknown;
    try {
      generateLedger(options as LedgerOptions);
    } catch (error) {
      caught = error;
    }
    expect(caught).toBeInstanceOf(LedgerOptionError);
    const error = caught as LedgerOptionError;
    expect(error.field).toBe(field);
    expect(error.message).toContain(`${field}: `);
    expect(error.message).toContain(rule);
    expect(error.message).toContain("received");
  });

  it("makes a drifted ledger: the same payments, dearer from the rise's first day on", () => {
    const plain = [...generateLedger({ rows: 2000 })];
    const drifted = [...generateLedger({ rows: 2000, priceRise: { from: "2026-10-29", rise: 0.5 } })];
    const riseMs = Date.UTC(2026, 9, 29);
    expect(drifted.map((r) => r.paymentId)).toEqual(plain.map((r) => r.paymentId));
    expect(drifted.map((r) => r.createdAt)).toEqual(plain.map((r) => r.createdAt));
    const before = plain.filter((r) => Date.parse(r.createdAt) < riseMs);
    expect(drifted.slice(0, before.length)).toEqual(before);
    const after = drifted.slice(before.length);
    const ratio = after.reduce((a, r, i) => a + (r.amount - r.shippingFee) / (plain[before.length + i].amount - plain[before.length + i].shippingFee), 0) / after.length;
    expect(after.length).toBeGreaterThan(100);
    expect(ratio).toBeGreaterThan(1.45);
    expect(ratio).toBeLessThan(1.55);
  });

  it("accepts a date or a UTC timestamp as start and fills in the defaults", () => {
    expect(resolveLedgerOptions()).toEqual({
      seed: 20261001,
      rows: 60_000,
      start: "2026-10-01",
      startMs: Date.UTC(2026, 9, 1),
      priceRise: { fromMs: Number.POSITIVE_INFINITY, rise: 0 },
    });
    expect(resolveLedgerOptions({ start: "2028-02-29" }).startMs).toBe(Date.UTC(2028, 1, 29));
    expect(resolveLedgerOptions({ start: "2026-10-01T06:30:00.250Z" }).startMs).toBe(Date.UTC(2026, 9, 1, 6, 30, 0, 250));
  });
});
