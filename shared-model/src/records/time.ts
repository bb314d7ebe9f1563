/**
 * Units of time in a record spec: window durations (`"24h"`), the units a time difference is
 * expressed in (`"hours"`), UTC offsets (`"+01:00"`) and the ISO 8601 timestamps of a ledger.
 * All instants are milliseconds since the Unix epoch, UTC.
 */

/** Milliseconds in one minute, hour and day (a day is 24 h here: windows count elapsed time, not calendar days). */
export const MINUTE_MS = 60_000;
/** Milliseconds in one hour. */
export const HOUR_MS = 60 * MINUTE_MS;
/** Milliseconds in one day of 24 hours. */
export const DAY_MS = 24 * HOUR_MS;

/** Units a time difference may be expressed in (`since`, `sincePrevious`). */
export const TIME_UNITS = { seconds: 1000, minutes: MINUTE_MS, hours: HOUR_MS, days: DAY_MS } as const;

/** A unit name of {@link TIME_UNITS}. */
export type TimeUnit = keyof typeof TIME_UNITS;

const DURATION_UNITS: Readonly<Record<string, number>> = { m: MINUTE_MS, h: HOUR_MS, d: DAY_MS };

/** A window duration: a positive whole number and `m`, `h` or `d`. */
export const DURATION_PATTERN = /^([1-9][0-9]{0,5})(m|h|d)$/;

/**
 * Parses a window duration.
 * @returns milliseconds, or null when the text is not a duration such as `"30m"`, `"24h"`, `"7d"`
 * @example parseDuration("24h") // 86400000
 */
export function parseDuration(text: string): number | null {
  const match = DURATION_PATTERN.exec(text);
  return match ? Number(match[1]) * DURATION_UNITS[match[2]] : null;
}

/** A fixed UTC offset: sign, hours 00–14, minutes 00–59. */
export const UTC_OFFSET_PATTERN = /^([+-])(0[0-9]|1[0-4]):([0-5][0-9])$/;

/**
 * Parses a fixed UTC offset.
 * @returns minutes east of UTC, or null when the text is not `±HH:MM` within ±14:00
 * @example parseUtcOffset("-03:30") // -210
 */
export function parseUtcOffset(text: string): number | null {
  const match = UTC_OFFSET_PATTERN.exec(text);
  if (!match) return null;
  const minutes = Number(match[2]) * 60 + Number(match[3]);
  if (minutes > 14 * 60) return null;
  return match[1] === "-" ? -minutes : minutes;
}

/**
 * ISO 8601 timestamps accepted in a ledger or a payment: a date-time with seconds (fraction
 * optional) and `Z` or an offset, or a bare date (midnight UTC). A local time without an offset
 * is refused: it would mean a different instant on every machine.
 */
const TIMESTAMP_PATTERN = /^(\d{4})-(\d{2})-(\d{2})(?:[T ](\d{2}):(\d{2})(?::(\d{2})(\.\d{1,9})?)?(Z|[+-]\d{2}:\d{2}))?$/;

/**
 * Parses an ISO 8601 timestamp.
 * @returns milliseconds since the epoch, or null when the text is not an accepted timestamp or
 *   names an impossible date (`2026-02-30`)
 * @example parseTimestamp("2026-10-01T00:52:35.056Z") // 1790815955056
 */
export function parseTimestamp(text: string): number | null {
  const match = TIMESTAMP_PATTERN.exec(text);
  if (!match) return null;
  const [, y, mo, d, h, mi, s, fraction, zone] = match;
  if (h !== undefined && zone === undefined) return null;
  const year = Number(y);
  const month = Number(mo);
  const day = Number(d);
  const hour = h === undefined ? 0 : Number(h);
  const minute = mi === undefined ? 0 : Number(mi);
  const second = s === undefined ? 0 : Number(s);
  if (month < 1 || month > 12 || day < 1 || hour > 23 || minute > 59 || second > 59) return null;
  const local = Date.UTC(year, month - 1, day, hour, minute, second);
  // Date.UTC rolls 2026-02-30 over to March; a date that does not survive the round trip is impossible.
  if (new Date(local).getUTCDate() !== day) return null;
  const millis = fraction === undefined ? 0 : Math.floor(Number(`0${fraction}`) * 1000 + 1e-6);
  let offsetMinutes = 0;
  if (zone !== undefined && zone !== "Z") {
    const parsed = parseUtcOffset(zone);
    if (parsed === null) return null;
    offsetMinutes = parsed;
  }
  return local + millis - offsetMinutes * MINUTE_MS;
}
