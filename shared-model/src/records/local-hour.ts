/**
 * The local hour of day of an instant, with minutes and seconds as a fraction (14:30 → 14.5), at a
 * fixed UTC offset or in an IANA time zone. Zones go through `Intl.DateTimeFormat`, which Node and
 * workerd both carry with the IANA database, so the ledger and the edge agree across a
 * daylight-saving change.
 */
import { DAY_MS, HOUR_MS, MINUTE_MS } from "./time";

/**
 * Whether a text names a time zone this runtime knows.
 * @example isKnownTimeZone("Europe/Berlin") // true
 */
export function isKnownTimeZone(timeZone: string): boolean {
  try {
    formatterFor(timeZone);
    return true;
  } catch {
    return false;
  }
}

/**
 * Local hour of day in [0, 24) at a fixed offset.
 * @param timeMs instant, ms since the epoch
 * @param utcOffsetMinutes minutes east of UTC
 * @example localHourAtOffset(Date.UTC(2026, 0, 1, 23, 30), 60) // 0.5
 */
export function localHourAtOffset(timeMs: number, utcOffsetMinutes: number): number {
  const local = timeMs + utcOffsetMinutes * MINUTE_MS;
  return (((local % DAY_MS) + DAY_MS) % DAY_MS) / HOUR_MS;
}

/**
 * Local hour of day in [0, 24) in an IANA time zone (daylight saving included).
 * @throws RangeError for a zone the runtime does not know
 * @example localHourInZone(Date.UTC(2026, 2, 29, 1, 30), "Europe/Berlin") // 3.5 (summer time began at 01:00 UTC)
 */
export function localHourInZone(timeMs: number, timeZone: string): number {
  return localHourAtOffset(timeMs, zoneOffsetMinutes(timeMs, timeZone));
}

const formatters = new Map<string, Intl.DateTimeFormat>();

function formatterFor(timeZone: string): Intl.DateTimeFormat {
  let formatter = formatters.get(timeZone);
  if (formatter === undefined) {
    formatter = new Intl.DateTimeFormat("en-US", {
      timeZone,
      hourCycle: "h23",
      year: "numeric",
      month: "2-digit",
      day: "2-digit",
      hour: "2-digit",
      minute: "2-digit",
      second: "2-digit",
    });
    formatters.set(timeZone, formatter);
  }
  return formatter;
}

/** The zone's offset at an instant, from the wall-clock fields Intl gives for it. */
function offsetFromIntl(timeMs: number, timeZone: string): number {
  const parts = formatterFor(timeZone).formatToParts(timeMs);
  const field = (type: Intl.DateTimeFormatPartTypes): number => Number(parts.find((p) => p.type === type)?.value);
  const wall = Date.UTC(field("year"), field("month") - 1, field("day"), field("hour"), field("minute"), field("second"));
  const wholeSeconds = Math.floor(timeMs / 1000) * 1000;
  return Math.round((wall - wholeSeconds) / MINUTE_MS);
}

/**
 * Offsets by zone and hour. Formatting is slow next to arithmetic, and a zone changes offset at most
 * once in any hour, so an hour whose two ends share an offset shares it throughout; an hour with a
 * change is asked minute by minute.
 */
const hourOffsets = new Map<string, Map<number, number | null>>();
const MAX_CACHED_HOURS = 4096;

function zoneOffsetMinutes(timeMs: number, timeZone: string): number {
  let cache = hourOffsets.get(timeZone);
  if (cache === undefined) {
    cache = new Map();
    hourOffsets.set(timeZone, cache);
  }
  const hour = Math.floor(timeMs / HOUR_MS);
  let offset = cache.get(hour);
  if (offset === undefined) {
    const atStart = offsetFromIntl(hour * HOUR_MS, timeZone);
    const atEnd = offsetFromIntl((hour + 1) * HOUR_MS - 1, timeZone);
    offset = atStart === atEnd ? atStart : null;
    if (cache.size >= MAX_CACHED_HOURS) cache.clear();
    cache.set(hour, offset);
  }
  return offset ?? offsetFromIntl(timeMs, timeZone);
}
