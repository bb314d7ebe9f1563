/**
 * Demo ledger generator: the card-not-present payments of Orvenna Housewares, an invented
 * mid-size online shop for kitchen and household goods, over eight weeks, with labelled fraud.
 *
 * The ledger is simulated, not sampled row by row: every account has a history and payments arrive
 * as events in time order. The CSV holds payment records only (time, account, amount, basket,
 * shipping fee, account creation time, destination, channel); the model's features are derived
 * from them by demo-ledger/spec.json (isodense derive, and the edge). The generator still computes
 * its own figures of those features from the account's earlier rows in the ledger, as a check that
 * the derivation reproduces them.
 *
 * Pure TypeScript (no `node:*` imports): a browser can run it. Same seed → identical rows.
 */

import { EventQueue } from "./event-queue";
import { createRandom, type Random } from "./random";

/** CSV header of the ledger (payment records), in column order. */
export const LEDGER_COLUMNS = [
  "paymentId",
  "createdAt",
  "accountRef",
  "accountCreatedAt",
  "channel",
  "amount",
  "basketItems",
  "shippingFee",
  "shipDistanceKm",
  "shipTo",
  "label",
  "fraudPattern",
] as const;

/** One ledger column name. */
export type LedgerColumn = (typeof LEDGER_COLUMNS)[number];

/**
 * The demo model's features (demo-ledger/spec.json derives each from the records). The generator
 * keeps its own figure of each on {@link LedgerRow}, as a check on the derivation.
 */
export const LEDGER_FEATURES = [
  "amount",
  "basketItems",
  "shippingShare",
  "accountAgeDays",
  "hoursSincePrevious",
  "paymentsLast24h",
  "shipDistanceKm",
  "amountVsAccountAverage",
  "hourOfDay",
] as const;

/** One numeric feature column. */
export type LedgerFeature = (typeof LEDGER_FEATURES)[number];

/** Sales channels; they are the demo's segments. */
export const CHANNELS = ["web", "app", "phone"] as const;

/** A sales channel. */
export type Channel = (typeof CHANNELS)[number];

/**
 * Designed share of payments per channel (fractions summing to 1). The phone line is small on
 * purpose, yet at 50,000 rows still holds about 4,000 payments — enough for its own model.
 */
export const CHANNEL_DESIGN_SHARES: Readonly<Record<Channel, number>> = { web: 0.58, app: 0.34, phone: 0.08 };

/** Coined names of the fraud kinds in the ledger. */
export const FRAUD_PATTERNS = ["test-burst", "takeover-spike", "reship-haul", "ordinary-parts"] as const;

/** A fraud kind. */
export type FraudPattern = (typeof FRAUD_PATTERNS)[number];

/**
 * The combination kind: each of its feature values alone sits inside the legitimate 2nd–98th
 * percentile range; only the combination is rare.
 */
export const COMBINATION_PATTERN: FraudPattern = "ordinary-parts";

/** One-sentence description of each fraud kind, for reports and the README. */
export const FRAUD_PATTERN_NOTES: Readonly<Record<FraudPattern, string>> = {
  "test-burst": "A freshly opened account runs a quick burst of tiny payments (stolen cards being tried): high velocity, minutes apart.",
  "takeover-spike": "Someone else gets into a long-standing account and spends several times its usual amount, shipping far away.",
  "reship-haul": "A young account orders many items to a distant forwarding address, once or a few times within a day.",
  "ordinary-parts":
    "A day-old account pays a moderate amount for a single costly item at 3–5 a.m., by courier to a moderately distant address: every value ordinary alone, the mix rare.",
};

/** Label column values. */
export type Label = "fraud" | "legitimate";

/**
 * Hours since the previous payment written for an account's first payment in the ledger (the
 * spec's `sincePrevious.none`): a year, longer than any gap inside the eight weeks.
 */
export const NO_PREVIOUS_HOURS = 8760;

/**
 * One payment: the record written to the ledger, and the generator's own figures of the demo
 * features (rounded to 4 decimals; not written). Numbers are rounded to their printed precision.
 */
export interface LedgerRow {
  /** `pay-000001`, increasing with time. */
  paymentId: string;
  /** ISO 8601 UTC timestamp with milliseconds. */
  createdAt: string;
  /** Pseudonymous account id `acct-NNNNN`; never a card number or a name. */
  accountRef: string;
  /** When the account was opened, ISO 8601 UTC with milliseconds. */
  accountCreatedAt: string;
  channel: Channel;
  /** Total charged, currency units, 2 decimals (merchandise + shipping). */
  amount: number;
  /** Items in the basket, integer ≥ 1. */
  basketItems: number;
  /** Shipping fee charged, currency units, 2 decimals (part of `amount`). */
  shippingFee: number;
  /** Pseudonymous destination id `dst-NNNNNN` (an address book entry; never an address). */
  shipTo: string;
  /** Shipping fee / amount, in [0, 0.6], 4 decimals. */
  shippingShare: number;
  /** Days since the account was opened, ≥ 0, 4 decimals. */
  accountAgeDays: number;
  /** Hours since the account's previous payment in the ledger ({@link NO_PREVIOUS_HOURS} for its first), ≥ 0, 4 decimals. */
  hoursSincePrevious: number;
  /** The account's earlier payments in the ledger within the 24 h before this one (both ends included), integer ≥ 0. */
  paymentsLast24h: number;
  /** Billing-to-shipping address distance in km, ≥ 0, 2 decimals. */
  shipDistanceKm: number;
  /** amount / mean of the account's earlier amounts in the ledger (1 for its first payment), > 0, 4 decimals. */
  amountVsAccountAverage: number;
  /** Customer's local hour (UTC+01:00), fractional in [0, 24), 4 decimals. */
  hourOfDay: number;
  label: Label;
  /** Empty for legitimate payments; else the fraud kind (for analysis only, never a feature). */
  fraudPattern: FraudPattern | "";
}

/** Options of {@link generateLedger}; every field is optional. */
export interface LedgerOptions {
  /** PRNG seed, integer in [0, 4294967295]. Default {@link DEFAULT_SEED}. */
  seed?: number;
  /** Number of payments, integer in [1, {@link MAX_ROWS}]. Default {@link DEFAULT_ROWS}. */
  rows?: number;
  /** First day, `YYYY-MM-DD` (UTC midnight) or a UTC timestamp ending in `Z`. Default {@link DEFAULT_START}. */
  start?: string;
  /**
   * A drifted period: from `from` (same forms as `start`) every price is `1 + rise` times what it
   * would have been (merchandise; the shipping fee follows its own table). The random stream is
   * untouched, so the ledger is the same payment for payment, only dearer from that day.
   */
  priceRise?: { from: string; rise: number };
}

/** Options after validation and defaults. */
export interface ResolvedLedgerOptions {
  seed: number;
  rows: number;
  /** As given (or the default). */
  start: string;
  /** `start` as epoch milliseconds. */
  startMs: number;
  /** The price rise and when it starts (epoch milliseconds); rise 0 from +∞ without one. */
  priceRise: { fromMs: number; rise: number };
}

/** Seed of the committed sample and of `npm run demo:ledger`. */
export const DEFAULT_SEED = 20261001;
/** Default number of payments: tens of thousands, enough for per-channel models. */
export const DEFAULT_ROWS = 60_000;
/** Default first day (UTC midnight). */
export const DEFAULT_START = "2026-10-01";
/** Upper bound on `rows`: the simulation keeps every account in memory (≈ 0.4 accounts per row). */
export const MAX_ROWS = 2_000_000;
/** Length of the simulated period in days; the last payment lands close to its end. */
export const LEDGER_DAYS = 56;
/** Offset of the customers' local time from UTC, in hours (the shop's home zone keeps no summer time). */
export const LOCAL_UTC_OFFSET_HOURS = 1;
/** Designed fraction of fraudulent payments. */
export const TARGET_FRAUD_RATE = 0.0075;
/**
 * From this many rows up every fraud kind appears at least once (a burst alone is ~10 rows, so
 * smaller ledgers get only the kinds their size warrants, keeping the fraud rate near target).
 */
export const EVERY_KIND_FROM_ROWS = 1_000;

/** Raised for an invalid generator option; names the option and the rule it broke. */
export class LedgerOptionError extends Error {
  /** Option name, e.g. `rows`. */
  readonly field: string;
  /** The rule, e.g. `must be an integer from 1 to 2000000`. */
  readonly rule: string;
  /** What came, as text. */
  readonly received: string;

  constructor(field: string, rule: string, received: unknown) {
    const shown = describe(received);
    super(`${field}: ${rule} (received ${shown})`);
    this.name = "LedgerOptionError";
    this.field = field;
    this.rule = rule;
    this.received = shown;
  }
}

function describe(value: unknown): string {
  if (typeof value === "string") return JSON.stringify(value);
  if (value === undefined) return "undefined";
  if (typeof value === "number" || typeof value === "boolean" || value === null) return String(value);
  return typeof value;
}

const DATE_ONLY = /^(\d{4})-(\d{2})-(\d{2})$/;
const UTC_TIMESTAMP = /^(\d{4})-(\d{2})-(\d{2})T(\d{2}):(\d{2}):(\d{2})(\.\d{1,3})?Z$/;
const START_RULE = "must be a calendar date YYYY-MM-DD or a UTC timestamp YYYY-MM-DDTHH:MM:SS[.sss]Z, year 1970 to 9999";

/**
 * Validates generator options and fills in defaults.
 * @throws LedgerOptionError naming the option and the rule (unknown option, non-integer or
 *   out-of-range seed/rows, malformed or impossible start date such as 2026-02-30)
 * @example resolveLedgerOptions({ rows: 500 }).startMs // Date.UTC(2026, 9, 1)
 */
export function resolveLedgerOptions(options: LedgerOptions = {}): ResolvedLedgerOptions {
  if (typeof options !== "object" || options === null || Array.isArray(options)) {
    throw new LedgerOptionError("options", "must be an object with optional seed, rows and start", options);
  }
  for (const key of Object.keys(options)) {
    if (key !== "seed" && key !== "rows" && key !== "start" && key !== "priceRise") {
      throw new LedgerOptionError(key, "is not an option; expected seed, rows, start or priceRise", (options as Record<string, unknown>)[key]);
    }
  }
  const seed = options.seed ?? DEFAULT_SEED;
  if (typeof seed !== "number" || !Number.isInteger(seed) || seed < 0 || seed > 0xffffffff) {
    throw new LedgerOptionError("seed", "must be an integer from 0 to 4294967295", seed);
  }
  const rows = options.rows ?? DEFAULT_ROWS;
  if (typeof rows !== "number" || !Number.isInteger(rows) || rows < 1 || rows > MAX_ROWS) {
    throw new LedgerOptionError("rows", `must be an integer from 1 to ${MAX_ROWS}`, rows);
  }
  const start = options.start ?? DEFAULT_START;
  if (typeof start !== "string") throw new LedgerOptionError("start", START_RULE, start);
  const startMs = parseStart(start);
  if (startMs === null) throw new LedgerOptionError("start", START_RULE, start);
  return { seed, rows, start, startMs, priceRise: resolvePriceRise(options.priceRise) };
}

function resolvePriceRise(asked: LedgerOptions["priceRise"]): ResolvedLedgerOptions["priceRise"] {
  if (asked === undefined) return { fromMs: Number.POSITIVE_INFINITY, rise: 0 };
  const rise = asked.rise;
  if (typeof rise !== "number" || !Number.isFinite(rise) || rise <= -0.9 || rise > 10) {
    throw new LedgerOptionError("priceRise.rise", "must be a number above -0.9 and at most 10 (0.25 = prices up by a quarter)", rise);
  }
  const fromMs = typeof asked.from === "string" ? parseStart(asked.from) : null;
  if (fromMs === null) throw new LedgerOptionError("priceRise.from", START_RULE, asked.from);
  return { fromMs, rise };
}

function parseStart(text: string): number | null {
  const date = DATE_ONLY.exec(text);
  const stamp = date ? null : UTC_TIMESTAMP.exec(text);
  const parts = date ?? stamp;
  if (!parts) return null;
  const [year, month, day] = [Number(parts[1]), Number(parts[2]), Number(parts[3])];
  const [hour, minute, second] = stamp ? [Number(stamp[4]), Number(stamp[5]), Number(stamp[6])] : [0, 0, 0];
  const millis = stamp?.[7] ? Math.round(Number(stamp[7]) * 1000) : 0;
  if (year < 1970 || month < 1 || month > 12 || hour > 23 || minute > 59 || second > 59) return null;
  const ms = Date.UTC(year, month - 1, day, hour, minute, second, millis);
  // Date.UTC rolls 2026-02-30 over to March 2nd; a round trip catches impossible days.
  const back = new Date(ms);
  if (back.getUTCFullYear() !== year || back.getUTCMonth() !== month - 1 || back.getUTCDate() !== day) return null;
  return ms;
}

/**
 * Generates the ledger lazily, one payment at a time in time order, so it can be streamed.
 * Options are checked at the call, before the first row.
 * @throws LedgerOptionError for invalid options
 * @example
 * for (const row of generateLedger({ rows: 3 })) console.log(formatCsvRow(row));
 */
export function generateLedger(options: LedgerOptions = {}): IterableIterator<LedgerRow> {
  const resolved = resolveLedgerOptions(options);
  return simulate(resolved);
}

function* simulate(options: ResolvedLedgerOptions): Generator<LedgerRow, void, undefined> {
  const simulation = new Simulation(options);
  while (simulation.emitted < options.rows) {
    const row = simulation.step();
    if (row) yield row;
  }
}

/** The CSV header line (no newline). */
export function csvHeader(): string {
  return LEDGER_COLUMNS.join(",");
}

/**
 * Formats one row as a CSV line (no newline). No field can contain a comma or a quote, so none is
 * quoted.
 * @example formatCsvRow(row) // "pay-000001,2026-10-01T06:12:09.381Z,acct-01234,2025-07-14T18:02:11.000Z,web,42.50,2,3.90,…"
 */
export function formatCsvRow(row: LedgerRow): string {
  return [
    row.paymentId,
    row.createdAt,
    row.accountRef,
    row.accountCreatedAt,
    row.channel,
    row.amount.toFixed(2),
    String(row.basketItems),
    row.shippingFee.toFixed(2),
    row.shipDistanceKm.toFixed(2),
    row.shipTo,
    row.label,
    row.fraudPattern,
  ].join(",");
}

/**
 * The whole ledger as CSV lines (header first, no newlines), lazily.
 * @throws LedgerOptionError for invalid options
 */
export function ledgerCsvLines(options: LedgerOptions = {}): IterableIterator<string> {
  const rows = generateLedger(options);
  return (function* () {
    yield csvHeader();
    for (const row of rows) yield formatCsvRow(row);
  })();
}

// ---------------------------------------------------------------------------------------------
// The scenario's numbers. Medians and spreads are invented to look like an ordinary housewares
// shop; the comments say which relationship each one creates.

const MINUTE_MS = 60_000;
const HOUR_MS = 3_600_000;
const DAY_MS = 86_400_000;
const LOCAL_OFFSET_MS = LOCAL_UTC_OFFSET_HOURS * HOUR_MS;

interface ChannelProfile {
  /** Share of accounts that prefer this channel. */
  preferShare: number;
  /** Where a customer who preferred this channel goes when they use another one. */
  switchTo: Channel;
  /** Mean of the Poisson number of extra items (basket = 1 + Poisson). */
  extraItems: number;
  /** Median price of one item. */
  itemPriceMedian: number;
  /** Chance the customer picks express delivery (+6.50). */
  expressChance: number;
  /** Relative weight of each local hour 0–23 (night hours rarer; phone only while staffed). */
  hourWeights: readonly number[];
}

const CHANNEL_PROFILES: Readonly<Record<Channel, ChannelProfile>> = {
  web: {
    preferShare: 0.6,
    switchTo: "app",
    extraItems: 1.4,
    itemPriceMedian: 21,
    expressChance: 0.12,
    hourWeights: [0.9, 0.55, 0.35, 0.25, 0.2, 0.25, 0.45, 0.9, 1.5, 2.0, 2.3, 2.4, 2.6, 2.5, 2.4, 2.4, 2.5, 2.8, 3.2, 3.7, 4.0, 3.6, 2.7, 1.7],
  },
  app: {
    preferShare: 0.31,
    switchTo: "web",
    extraItems: 0.9,
    itemPriceMedian: 17,
    expressChance: 0.15,
    hourWeights: [1.2, 0.7, 0.4, 0.25, 0.2, 0.3, 0.7, 1.6, 2.2, 1.8, 1.7, 1.8, 2.4, 2.2, 1.9, 1.9, 2.2, 2.9, 3.3, 3.8, 4.3, 4.2, 3.4, 2.2],
  },
  phone: {
    // The order line is staffed 08:00–20:00 local time only.
    preferShare: 0.09,
    switchTo: "web",
    extraItems: 1.9,
    itemPriceMedian: 28,
    expressChance: 0.2,
    hourWeights: [0, 0, 0, 0, 0, 0, 0, 0, 1.5, 2.4, 2.6, 2.5, 2.0, 2.3, 2.4, 2.3, 2.1, 1.8, 1.4, 1.0, 0, 0, 0, 0],
  },
};

const PREFER_WEIGHTS = CHANNELS.map((c) => CHANNEL_PROFILES[c].preferShare);
/** Chance a payment uses a channel other than the account's preferred one. */
const SWITCH_CHANCE = 0.1;
/** Log-normal spread of one item's price around the channel median. */
const ITEM_PRICE_SIGMA = 0.5;
/** Mean purchases per day of an account (Gamma across accounts, so a few buy often). */
const MEAN_PURCHASE_RATE = 0.045;
const PURCHASE_RATE_SHAPE = 0.9;
/** Chance that a payment is followed within the hour by another (a forgotten item). */
const FOLLOW_UP_CHANCE = 0.07;
/** Share of payments that are the very first payment of an account opened minutes before. */
const NEW_ACCOUNT_SHARE = 0.12;
/** Delivery speed chosen at checkout. */
type Delivery = "standard" | "express" | "courier";
/** Added to the shipping fee: express parcel, or the before-9-a.m. courier. */
const DELIVERY_SURCHARGE: Readonly<Record<Delivery, number>> = { standard: 0, express: 6.5, courier: 19.9 };
/** Chance a legitimate customer books the courier (rare: it costs more than most baskets' items). */
const COURIER_CHANCE = 0.01;
/** Chance a customer ships to their usual address rather than somewhere else. */
const USUAL_ADDRESS_CHANCE = 0.85;

interface EpisodeDesign {
  /** Share of fraud rows this kind accounts for. */
  rowShare: number;
  /** Expected payments per episode (must match the draws in the episode code). */
  meanPayments: number;
}

const EPISODES: Readonly<Record<FraudPattern, EpisodeDesign>> = {
  "test-burst": { rowShare: 0.35, meanPayments: 10 }, // 5 + Poisson(5)
  "takeover-spike": { rowShare: 0.2, meanPayments: 1.6 }, // 1, 2, 3 with 0.55, 0.30, 0.15
  "reship-haul": { rowShare: 0.2, meanPayments: 1.85 }, // 1, 2, 3 with 0.40, 0.35, 0.25
  "ordinary-parts": { rowShare: 0.25, meanPayments: 1 },
};

// ---------------------------------------------------------------------------------------------
// Simulation state

interface Account {
  id: number;
  ref: string;
  createdAtMs: number;
  /** Fraudster accounts make only their episode's payments. */
  fraudster: boolean;
  preferred: Channel;
  /** Purchases per day. */
  ratePerDay: number;
  /** Log offset of this customer's item prices. */
  priceLevel: number;
  /** Multiplier of the extra-items mean. */
  basketLevel: number;
  /** Distance to the usual shipping address, km. */
  usualDistanceKm: number;
  /** Earlier payments (including history before the ledger window) and their amount sum. */
  count: number;
  sum: number;
  /** Time of the previous payment, or null when the account has never paid. */
  lastPaymentMs: number | null;
  /** The account's payments in the ledger so far, their amount sum and the time of the latest. */
  ledgerCount: number;
  ledgerSum: number;
  ledgerLastMs: number | null;
  /** Times of the account's ledger payments within the last 24 h, oldest first. */
  recent: number[];
  /** The destination the customer usually ships to. */
  homeShipTo: string;
}

interface PaymentDraft {
  channel: Channel;
  amount: number;
  basketItems: number;
  shippingFee: number;
  shippingShare: number;
  shipDistanceKm: number;
  shipTo: string;
  pattern: FraudPattern | "";
}

type SimEvent =
  | { type: "day"; dayStartMs: number }
  | { type: "arrival"; channel: Channel }
  | { type: "legit"; account: Account; channel: Channel; followUp: boolean }
  | { type: "burst"; account: Account; channel: Channel; distanceKm: number; shipTo: string; remaining: number }
  | { type: "takeover"; account: Account; channel: Channel; distanceKm: number; shipTo: string; remaining: number }
  | { type: "reship"; account: Account; channel: Channel; distanceKm: number; shipTo: string; remaining: number }
  | { type: "parts"; account: Account; channel: Channel };

/** Local hour of day in [0, 24) at an epoch-millisecond instant. */
const localHour = (timeMs: number): number => ((((timeMs + LOCAL_OFFSET_MS) % DAY_MS) + DAY_MS) % DAY_MS) / HOUR_MS;
const round2 = (x: number): number => Math.round(x * 100) / 100;
const round4 = (x: number): number => Math.round(x * 10_000) / 10_000;
/** Largest fee in whole cents that keeps fee / (merchandise + fee) ≤ 0.6 after rounding. */
const feeCap = (merchandise: number): number => Math.floor(merchandise * 150 + 1e-7) / 100;
const clamp = (x: number, low: number, high: number): number => Math.min(high, Math.max(low, x));

class Simulation {
  emitted = 0;
  private readonly rng: Random;
  private readonly queue = new EventQueue<SimEvent>();
  private readonly accounts: Account[] = [];
  private readonly triggers: { ordinal: number; kind: FraudPattern }[] = [];
  private nextTrigger = 0;
  private destinations = 0;
  private readonly newAccountsPerDay: number;
  private readonly startMs: number;
  private readonly priceRise: ResolvedLedgerOptions["priceRise"];
  /** Time of the event being processed. */
  private clockMs = 0;

  constructor(options: ResolvedLedgerOptions) {
    this.rng = createRandom(options.seed);
    this.startMs = options.startMs;
    this.priceRise = options.priceRise;
    const rows = options.rows;
    const legitRows = rows * (1 - TARGET_FRAUD_RATE);
    this.newAccountsPerDay = (NEW_ACCOUNT_SHARE * rows) / LEDGER_DAYS;

    // Size the existing customer base so that, with the new accounts, the expected number of
    // legitimate payments over LEDGER_DAYS equals `legitRows`. A primary purchase brings
    // 1/(1−p) payments on average with follow-ups; new accounts arrive evenly, so each buys
    // for LEDGER_DAYS/2 on average after its first payment.
    const perPrimary = 1 / (1 - FOLLOW_UP_CHANCE);
    const arrivals = this.newAccountsPerDay * LEDGER_DAYS;
    const fromNew = arrivals * perPrimary + arrivals * MEAN_PURCHASE_RATE * (LEDGER_DAYS / 2) * perPrimary;
    const perExisting = MEAN_PURCHASE_RATE * LEDGER_DAYS * perPrimary;
    const existing = Math.max(10, Math.round((legitRows - fromNew) / perExisting));
    for (let i = 0; i < existing; i++) {
      const account = this.openExistingAccount();
      this.schedulePrimary(account, this.startMs);
    }
    const firstDay = Math.floor((this.startMs + LOCAL_OFFSET_MS) / DAY_MS) * DAY_MS - LOCAL_OFFSET_MS;
    this.queue.schedule(this.startMs, { type: "day", dayStartMs: firstDay });
    this.planFraud(rows);
  }

  /** Processes the next event; returns the payment it produced, if any. */
  step(): LedgerRow | null {
    const next = this.queue.pop();
    if (!next) throw new Error("demo ledger: the event queue ran dry (the customer base is never empty)");
    const { time, event } = next;
    this.clockMs = time;
    switch (event.type) {
      case "day":
        this.openDay(event.dayStartMs);
        return null;
      case "arrival": {
        const account = this.openAccount(time - MINUTE_MS - Math.round(this.rng.exponential(12 * MINUTE_MS)), event.channel);
        const row = this.emit(account, time, this.legitDraft(account, event.channel, false));
        this.scheduleAfterLegit(account, time, event.channel);
        return row;
      }
      case "legit": {
        const row = this.emit(event.account, time, this.legitDraft(event.account, event.channel, event.followUp));
        this.scheduleAfterLegit(event.account, time, event.channel);
        return row;
      }
      case "burst":
        return this.burstPayment(time, event);
      case "takeover":
        return this.takeoverPayment(time, event);
      case "reship":
        return this.reshipPayment(time, event);
      case "parts":
        return this.emit(event.account, time, this.partsDraft(event.channel));
    }
  }

  // --- accounts ------------------------------------------------------------------------------

  private openAccount(createdAtMs: number, preferred: Channel, fraudster = false): Account {
    const rng = this.rng;
    const id = this.accounts.length + 1;
    const account: Account = {
      id,
      ref: `acct-${String(id).padStart(5, "0")}`,
      createdAtMs,
      fraudster,
      preferred,
      ratePerDay: rng.gamma(PURCHASE_RATE_SHAPE, MEAN_PURCHASE_RATE),
      priceLevel: 0.3 * rng.normal(),
      basketLevel: rng.gamma(5, 1),
      usualDistanceKm: this.freshDistance(),
      count: 0,
      sum: 0,
      lastPaymentMs: null,
      ledgerCount: 0,
      ledgerSum: 0,
      ledgerLastMs: null,
      recent: [],
      homeShipTo: this.freshDestination(),
    };
    this.accounts.push(account);
    return account;
  }

  /**
   * A customer who joined before the ledger window. Their earlier purchases are summarized
   * (count, amount sum, last time) and all lie more than 24 h before the window opens, so
   * `paymentsLast24h` depends on ledger rows only.
   */
  private openExistingAccount(): Account {
    const rng = this.rng;
    const ageDays = this.boundedLogNormal(420, 0.95, 2, 4000);
    const preferred = CHANNELS[rng.weighted(PREFER_WEIGHTS)];
    const account = this.openAccount(this.startMs - Math.round(ageDays * DAY_MS), preferred);
    // One in ten registered without buying; the others bought at their own rate.
    const priorCount = rng.chance(0.1) ? 0 : rng.poisson(Math.min(30, account.ratePerDay * Math.min(ageDays - 1, 730) * 0.8));
    if (priorCount > 0) {
      const typical = this.typicalAmount(account);
      account.count = priorCount;
      account.sum = round2(priorCount * typical * Math.exp((0.3 * rng.normal()) / Math.sqrt(priorCount)));
      const gapMs = Math.min(rng.exponential(DAY_MS / account.ratePerDay), (ageDays - 1.5) * DAY_MS);
      account.lastPaymentMs = Math.round(this.startMs - DAY_MS - gapMs);
    }
    return account;
  }

  /** Mean amount of this customer's ordinary purchase on their preferred channel. */
  private typicalAmount(account: Account): number {
    const profile = CHANNEL_PROFILES[account.preferred];
    const item = profile.itemPriceMedian * Math.exp(account.priceLevel + (ITEM_PRICE_SIGMA * ITEM_PRICE_SIGMA) / 2);
    return item * (1 + profile.extraItems * account.basketLevel) + 5;
  }

  /** Log-normal draw redrawn until inside [low, high], so the bounds do not pile up as spikes. */
  private boundedLogNormal(median: number, sigma: number, low: number, high: number): number {
    for (;;) {
      const x = this.rng.logNormal(median, sigma);
      if (x >= low && x <= high) return x;
    }
  }

  private pickChannel(account: Account): Channel {
    return this.rng.chance(SWITCH_CHANCE) ? CHANNEL_PROFILES[account.preferred].switchTo : account.preferred;
  }

  // --- time ----------------------------------------------------------------------------------

  /** A local hour in [0, 24) drawn from the channel's daily profile. */
  private drawHour(channel: Channel): number {
    return this.rng.weighted(CHANNEL_PROFILES[channel].hourWeights) + this.rng.uniform();
  }

  /** Schedules one local day's new-account arrivals (a Poisson count), then the next day. */
  private openDay(dayStartMs: number): void {
    const count = this.rng.poisson(this.newAccountsPerDay);
    for (let i = 0; i < count; i++) {
      const channel = CHANNELS[this.rng.weighted(PREFER_WEIGHTS)];
      const time = Math.floor(dayStartMs + this.drawHour(channel) * HOUR_MS);
      // The first day may start mid-day: arrivals before the window opens are dropped.
      if (time >= this.startMs) this.queue.schedule(time, { type: "arrival", channel });
    }
    this.queue.schedule(dayStartMs + DAY_MS, { type: "day", dayStartMs: dayStartMs + DAY_MS });
  }

  /** Next ordinary purchase: an exponential gap in days, at an hour typical for the channel. */
  private schedulePrimary(account: Account, afterMs: number): void {
    const channel = this.pickChannel(account);
    const target = afterMs + this.rng.exponential(DAY_MS / account.ratePerDay);
    const dayStart = Math.floor((target + LOCAL_OFFSET_MS) / DAY_MS) * DAY_MS - LOCAL_OFFSET_MS;
    let time = Math.floor(dayStart + this.drawHour(channel) * HOUR_MS);
    if (time <= afterMs + 30 * MINUTE_MS) time += DAY_MS;
    this.queue.schedule(time, { type: "legit", account, channel, followUp: false });
  }

  private scheduleAfterLegit(account: Account, timeMs: number, channel: Channel): void {
    if (this.rng.chance(FOLLOW_UP_CHANCE)) {
      const time = timeMs + 2 * MINUTE_MS + Math.round(this.rng.exponential(28 * MINUTE_MS));
      // A second call after the order line has closed cannot happen: the customer waits instead.
      if (channel !== "phone" || CHANNEL_PROFILES.phone.hourWeights[Math.floor(localHour(time))] > 0) {
        this.queue.schedule(time, { type: "legit", account, channel, followUp: true });
        return;
      }
    }
    this.schedulePrimary(account, timeMs);
  }

  // --- legitimate payments -------------------------------------------------------------------

  /** A destination id never used before (counted, so the random stream is untouched). */
  private freshDestination(): string {
    this.destinations += 1;
    return `dst-${String(this.destinations).padStart(6, "0")}`;
  }

  /** Usual or one-off shipping address distance: mostly the billing address (geocoding jitter), some local, a few far. */
  private freshDistance(): number {
    const u = this.rng.uniform();
    if (u < 0.62) return round2(this.rng.logNormal(0.35, 0.7));
    if (u < 0.92) return round2(this.rng.logNormal(7, 0.9));
    return round2(this.rng.logNormal(110, 1.0));
  }

  /**
   * Shipping fee by distance band, +0.60 per extra item, +6.50 for express or +19.90 for the
   * before-9-a.m. courier; capped at 1.5 × the merchandise so the shipping share stays ≤ 0.6.
   * Mostly flat, so the share falls as amount rises.
   */
  private shippingFee(distanceKm: number, items: number, speed: Delivery, merchandise: number): number {
    const base = distanceKm < 40 ? 3.9 : distanceKm < 300 ? 5.9 : 8.9;
    const fee = base + 0.6 * Math.min(items - 1, 10) + DELIVERY_SURCHARGE[speed];
    return Math.min(round2(fee), feeCap(merchandise));
  }

  private finishDraft(channel: Channel, merchandise: number, items: number, distanceKm: number, shipTo: string, delivery: Delivery, pattern: FraudPattern | ""): PaymentDraft {
    const factor = this.clockMs >= this.priceRise.fromMs ? 1 + this.priceRise.rise : 1;
    const merch = Math.max(0.5, round2(merchandise * factor));
    const fee = this.shippingFee(distanceKm, items, delivery, merch);
    const amount = round2(merch + fee);
    return { channel, amount, basketItems: items, shippingFee: fee, shippingShare: round4(fee / amount), shipDistanceKm: distanceKm, shipTo, pattern };
  }

  private legitDraft(account: Account, channel: Channel, followUp: boolean): PaymentDraft {
    const rng = this.rng;
    const profile = CHANNEL_PROFILES[channel];
    // A follow-up adds the forgotten item or two, so it is a small basket.
    const items = 1 + rng.poisson(profile.extraItems * account.basketLevel * (followUp ? 0.3 : 1));
    const itemMedian = profile.itemPriceMedian * Math.exp(account.priceLevel);
    let merchandise = 0;
    for (let i = 0; i < items; i++) merchandise += rng.logNormal(itemMedian, ITEM_PRICE_SIGMA);
    // Spending settles as an account matures: the first purchases vary more, which is what
    // gives young accounts their wide spread of amountVsAccountAverage.
    merchandise *= Math.exp((0.42 / Math.sqrt(1 + account.count)) * rng.normal());
    const usual = rng.chance(USUAL_ADDRESS_CHANCE);
    const distanceKm = usual ? round2(account.usualDistanceKm * Math.exp(0.04 * rng.normal())) : this.freshDistance();
    const shipTo = usual ? account.homeShipTo : this.freshDestination();
    const delivery: Delivery = rng.chance(COURIER_CHANCE) ? "courier" : rng.chance(profile.expressChance) ? "express" : "standard";
    return this.finishDraft(channel, merchandise, items, distanceKm, shipTo, delivery, "");
  }

  // --- fraud episodes ------------------------------------------------------------------------

  /**
   * Fixes how many episodes of each kind happen and at which payment ordinal each begins, so the
   * fraud rate stays near its target and, from {@link EVERY_KIND_FROM_ROWS} rows up, every kind
   * appears at least once. Episodes start before 97 % of the rows so that they finish inside the
   * window.
   */
  private planFraud(rows: number): void {
    const last = Math.max(1, Math.floor(0.97 * rows));
    const first = Math.min(last, Math.max(1, Math.ceil(0.01 * rows)));
    const atLeast = rows >= EVERY_KIND_FROM_ROWS ? 1 : 0;
    for (const kind of FRAUD_PATTERNS) {
      const design = EPISODES[kind];
      const episodes = Math.max(atLeast, Math.round((TARGET_FRAUD_RATE * rows * design.rowShare) / design.meanPayments));
      for (let i = 0; i < episodes; i++) this.triggers.push({ ordinal: this.rng.integer(first, last), kind });
    }
    this.triggers.sort((x, y) => x.ordinal - y.ordinal); // stable: same-ordinal episodes keep kind order
  }

  private startEpisode(kind: FraudPattern, nowMs: number): void {
    const rng = this.rng;
    switch (kind) {
      case "test-burst": {
        const start = nowMs + Math.round(rng.exponential(20 * MINUTE_MS));
        const channel: Channel = rng.chance(0.75) ? "web" : "app";
        const account = this.openAccount(start - 2 * MINUTE_MS - Math.round(rng.exponential(8 * MINUTE_MS)), channel, true);
        const remaining = 5 + rng.poisson(5);
        this.queue.schedule(start, { type: "burst", account, channel, distanceKm: round2(rng.logNormal(40, 1.3)), shipTo: this.freshDestination(), remaining });
        return;
      }
      case "takeover-spike": {
        const start = nowMs + Math.round(rng.exponential(40 * MINUTE_MS));
        const account = this.pickTakeoverVictim(start);
        const u = rng.uniform();
        const remaining = u < 0.55 ? 1 : u < 0.85 ? 2 : 3;
        const channel: Channel = rng.chance(0.6) ? "app" : "web";
        this.queue.schedule(start, { type: "takeover", account, channel, distanceKm: round2(rng.logNormal(650, 0.5)), shipTo: this.freshDestination(), remaining });
        return;
      }
      case "reship-haul": {
        const start = nowMs + Math.round(rng.exponential(45 * MINUTE_MS));
        const channel: Channel = rng.chance(0.85) ? "web" : "app";
        const ageMs = Math.round((0.3 + rng.exponential(5)) * DAY_MS);
        const account = this.openAccount(start - ageMs, channel, true);
        const u = rng.uniform();
        const remaining = u < 0.4 ? 1 : u < 0.75 ? 2 : 3;
        this.queue.schedule(start, { type: "reship", account, channel, distanceKm: round2(rng.logNormal(1100, 0.45)), shipTo: this.freshDestination(), remaining });
        return;
      }
      case "ordinary-parts": {
        // The next 03:00–05:00 local after now, on an account opened 12–72 h earlier.
        const localNow = nowMs + LOCAL_OFFSET_MS;
        let time = Math.floor(localNow / DAY_MS) * DAY_MS + Math.floor(rng.between(3, 5) * HOUR_MS) - LOCAL_OFFSET_MS;
        if (time <= nowMs) time += DAY_MS;
        const channel: Channel = rng.chance(0.65) ? "web" : "app";
        const account = this.openAccount(time - Math.round(rng.between(12, 72) * HOUR_MS), channel, true);
        this.queue.schedule(time, { type: "parts", account, channel });
        return;
      }
    }
  }

  /** A long-standing customer with a purchase history; retries at random, then falls back to a scan. */
  private pickTakeoverVictim(atMs: number): Account {
    const rng = this.rng;
    // At least two payments in the ledger, so the spike shows against the account's mean there.
    const suitable = (a: Account): boolean => !a.fraudster && a.count >= 3 && a.ledgerCount >= 2 && atMs - a.createdAtMs > 180 * DAY_MS;
    for (let tries = 0; tries < 64; tries++) {
      const candidate = this.accounts[rng.integer(0, this.accounts.length - 1)];
      if (suitable(candidate)) return candidate;
    }
    const customers = this.accounts.filter((a) => !a.fraudster);
    const pool = customers.filter(suitable);
    if (pool.length > 0) return pool[rng.integer(0, pool.length - 1)];
    // Tiny ledgers only: take the oldest customer.
    return customers.reduce((oldest, a) => (a.createdAtMs < oldest.createdAtMs ? a : oldest));
  }

  private burstPayment(time: number, event: Extract<SimEvent, { type: "burst" }>): LedgerRow {
    const rng = this.rng;
    // The cheapest thing in the shop, by letter post: a few currency units all told. The
    // letter-post fee (1.20–2.20) replaces the parcel bands, still capped at 1.5 × merchandise.
    const merch = round2(rng.between(0.5, 2.5));
    const fee = Math.min(round2(rng.between(1.2, 2.2)), feeCap(merch));
    const amount = round2(merch + fee);
    const draft: PaymentDraft = {
      channel: event.channel,
      amount,
      basketItems: 1,
      shippingFee: fee,
      shippingShare: round4(fee / amount),
      shipDistanceKm: event.distanceKm,
      shipTo: event.shipTo,
      pattern: "test-burst",
    };
    const row = this.emit(event.account, time, draft);
    if (event.remaining > 1) {
      const gap = 15_000 + Math.round(rng.exponential(70_000));
      this.queue.schedule(time + gap, { ...event, remaining: event.remaining - 1 });
    }
    return row;
  }

  private takeoverPayment(time: number, event: Extract<SimEvent, { type: "takeover" }>): LedgerRow {
    const rng = this.rng;
    const account = event.account;
    const usual = account.count > 0 ? account.sum / account.count : this.typicalAmount(account);
    // Several times the account's usual spend, in a few costly items.
    const merchandise = clamp(usual * rng.logNormal(7, 0.35), 120, 4000);
    const items = 1 + rng.poisson(1);
    const draft = this.finishDraft(event.channel, merchandise, items, event.distanceKm, event.shipTo, rng.chance(0.6) ? "express" : "standard", "takeover-spike");
    const row = this.emit(account, time, draft);
    if (event.remaining > 1) {
      const gap = 5 * MINUTE_MS + Math.round(rng.exponential(25 * MINUTE_MS));
      this.queue.schedule(time + gap, { ...event, remaining: event.remaining - 1 });
    }
    return row;
  }

  private reshipPayment(time: number, event: Extract<SimEvent, { type: "reship" }>): LedgerRow {
    const rng = this.rng;
    const items = 6 + rng.poisson(5);
    let merchandise = 0;
    for (let i = 0; i < items; i++) merchandise += rng.logNormal(24, 0.35);
    const draft = this.finishDraft(event.channel, merchandise, items, event.distanceKm, event.shipTo, rng.chance(0.3) ? "express" : "standard", "reship-haul");
    const row = this.emit(event.account, time, draft);
    if (event.remaining > 1) {
      const gap = HOUR_MS + Math.round(rng.exponential(6 * HOUR_MS));
      this.queue.schedule(time + gap, { ...event, remaining: event.remaining - 1 });
    }
    return row;
  }

  /** One costly item, by courier, to a moderately distant address: each value ordinary on its own. */
  private partsDraft(channel: Channel): PaymentDraft {
    const rng = this.rng;
    // Priced against the channel's own legitimate amounts (app baskets run smaller), so the
    // total stays inside that channel's 2nd–98th percentile band as well as the pooled one.
    const merchandise = channel === "web" ? rng.between(110, 160) : rng.between(75, 98);
    const distanceKm = round2(this.boundedLogNormal(36, 0.3, 18, 70));
    return this.finishDraft(channel, merchandise, 1, distanceKm, this.freshDestination(), "courier", "ordinary-parts");
  }

  // --- the ledger row ------------------------------------------------------------------------

  /**
   * Writes one payment: computes the generator's figures of the features from the account's
   * earlier payments in the ledger (as the spec defines them: strictly earlier, windows including
   * their start), then records this payment in the account's history.
   */
  private emit(account: Account, timeMs: number, draft: PaymentDraft): LedgerRow {
    const windowStart = timeMs - DAY_MS;
    const recent = account.recent;
    while (recent.length > 0 && recent[0] < windowStart) recent.shift();
    let last24h = 0;
    for (const t of recent) if (t < timeMs) last24h++;

    const row: LedgerRow = {
      paymentId: `pay-${String(this.emitted + 1).padStart(6, "0")}`,
      createdAt: new Date(timeMs).toISOString(),
      accountRef: account.ref,
      accountCreatedAt: new Date(account.createdAtMs).toISOString(),
      channel: draft.channel,
      amount: draft.amount,
      basketItems: draft.basketItems,
      shippingFee: draft.shippingFee,
      shipTo: draft.shipTo,
      shippingShare: draft.shippingShare,
      accountAgeDays: round4(Math.max(0, timeMs - account.createdAtMs) / DAY_MS),
      hoursSincePrevious: account.ledgerLastMs === null ? NO_PREVIOUS_HOURS : round4((timeMs - account.ledgerLastMs) / HOUR_MS),
      paymentsLast24h: last24h,
      shipDistanceKm: draft.shipDistanceKm,
      amountVsAccountAverage: account.ledgerCount === 0 ? 1 : Math.max(0.0001, round4(draft.amount / (account.ledgerSum / account.ledgerCount))),
      // Floor, not round, so 23.99999 h never prints as 24.0000.
      hourOfDay: Math.floor(localHour(timeMs) * 10_000) / 10_000,
      label: draft.pattern === "" ? "legitimate" : "fraud",
      fraudPattern: draft.pattern,
    };

    account.count += 1;
    account.sum += draft.amount;
    account.lastPaymentMs = timeMs;
    account.ledgerCount += 1;
    account.ledgerSum += draft.amount;
    account.ledgerLastMs = timeMs;
    recent.push(timeMs);
    this.emitted += 1;
    while (this.nextTrigger < this.triggers.length && this.triggers[this.nextTrigger].ordinal <= this.emitted) {
      this.startEpisode(this.triggers[this.nextTrigger].kind, timeMs);
      this.nextTrigger += 1;
    }
    return row;
  }
}
