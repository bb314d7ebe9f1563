/**
 * Plain-words formatting for numbers, probabilities and times shown to analysts.
 * Everything returns text; nothing here builds markup.
 */
import type { WireReason } from "@contract";

import { formatCount } from "../../../shared-model/src/format-count";
import { formatForPeople } from "../../../shared-model/src/format-number";

export { formatCount };

/**
 * A raw feature value with sensible precision: whole numbers from 100 up, three significant
 * digits below.
 * @example formatValue(1240.4) // "1,240"; formatValue(0.0731) // "0.0731"
 */
export function formatValue(value: number | null | undefined): string {
  if (value === null || value === undefined || !Number.isFinite(value)) return "—";
  const magnitude = Math.abs(value);
  if (magnitude === 0) return "0";
  const text = magnitude >= 100 ? formatCount(Math.round(value)) : formatForPeople(value, 3);
  // A true minus sign: "−0.17–0.87" reads as a range from a negative number, "-0.17–0.87" does not.
  return text.replace("-", "\u2212");
}

const SUPERSCRIPT: Record<string, string> = { "0": "⁰", "1": "¹", "2": "²", "3": "³", "4": "⁴", "5": "⁵", "6": "⁶", "7": "⁷", "8": "⁸", "9": "⁹", "-": "⁻" };

/** 10 to a power, with a superscript exponent: power10(16) // "10¹⁶" */
function power10(exponent: number): string {
  return `10${[...String(exponent)].map((c) => SUPERSCRIPT[c] ?? c).join("")}`;
}

/**
 * Rarest tail the display spells out. Gaussian tails that far out say more about the model's
 * shape than about the payment (real payments are heavier-tailed), so past it the text only says
 * "rarer than"; it also keeps tails that underflow a double (0, subnormals) from printing as
 * "1 in Infinity".
 */
export const RAREST_SHOWN_TAIL = 1e-15;

/**
 * A tail probability (P(χ²ₙ > d²), or a small segment's predictive law; shared-model/src/tail-law.ts) as "1 in N" for small values (easier to weigh than 1.2e-7),
 * capped at {@link RAREST_SHOWN_TAIL}.
 * @example formatTail(0.00021) // "1 in 4,800"; formatTail(2e-10) // "1 in 5.0 × 10⁹"; formatTail(4.4e-17) // "rarer than 1 in 10¹⁵"
 */
export function formatTail(p: number): string {
  if (!Number.isFinite(p) || p < 0) return "—";
  if (p < RAREST_SHOWN_TAIL) return `rarer than 1 in ${power10(15)}`;
  if (p >= 0.01) return `${(p * 100).toFixed(p >= 0.1 ? 0 : 1)} %`;
  const oneIn = 1 / p;
  if (oneIn >= 1e9) {
    const [mantissa, exponent] = oneIn.toExponential(1).split("e+");
    return `1 in ${mantissa} × ${power10(Number(exponent))}`;
  }
  const rounded = Number(oneIn.toPrecision(2));
  return `1 in ${formatCount(rounded)}`;
}

/**
 * "How rare" from log10 of the tail probability, the figure that stays finite where the tail
 * probability underflows; null (not known: stored before it was kept, tail underflowed) is below
 * 1e-308 and so past the cap.
 * @example formatLog10Tail(-3.678) // "1 in 4,800"; formatLog10Tail(-434.2) // "rarer than 1 in 10¹⁵"
 */
export function formatLog10Tail(log10p: number | null): string {
  if (log10p === null || log10p < Math.log10(RAREST_SHOWN_TAIL)) return `rarer than 1 in ${power10(15)}`;
  return formatTail(10 ** log10p);
}

/** Time of day in the analyst's locale, 24-hour. */
export function formatClock(iso: string): string {
  const date = new Date(iso);
  return date.toLocaleTimeString("en-GB", { hour: "2-digit", minute: "2-digit" });
}

/** Short date and time, e.g. "3 Dec 14:05". */
export function formatWhen(iso: string): string {
  const date = new Date(iso);
  const day = date.toLocaleDateString("en-GB", { day: "numeric", month: "short" });
  return `${day} ${formatClock(iso)}`;
}

/**
 * How long ago, in the largest whole unit.
 * @example formatAge("2026-12-01T10:00:00Z", Date.parse("2026-12-01T13:30:00Z")) // "3 h"
 */
export function formatAge(iso: string, now: number = Date.now()): string {
  const minutes = Math.max(0, Math.floor((now - Date.parse(iso)) / 60_000));
  if (minutes < 60) return `${minutes} min`;
  const hours = Math.floor(minutes / 60);
  if (hours < 48) return `${hours} h`;
  return `${Math.floor(hours / 24)} d`;
}

/**
 * One reason in plain words: "amount 1,240 — expected 60–140 given the other features".
 * The range is the central 95 % of the feature given all the others, in raw units.
 */
export function describeReason(reason: WireReason): string {
  const { low, high, outsideTraining } = reason.expected;
  const expected = outsideTraining
    ? `expected ${outsideTraining} anything seen in training`
    : low === high && Number.isFinite(low)
      ? // Stored before the scorer said which side: a range clipped to one end of the training data.
        `expected at the edge of what training saw (${formatValue(low)})`
      : `expected ${describeRange(low, high)}`;
  return `${reason.feature} ${formatValue(reason.actual)} — ${expected} given the other features`;
}

/**
 * How far a value lies from its expected value given the other features, in conditional standard
 * deviations (the size of the standardized residual; the reason's words say which side).
 * @example formatDistanceFromExpected(-5.43) // "5.4 SD from expected"
 */
export function formatDistanceFromExpected(standardizedResidual: number | null): string {
  if (standardizedResidual === null || !Number.isFinite(standardizedResidual)) return "";
  return `${Math.abs(standardizedResidual).toFixed(1)} SD from expected`;
}

/**
 * "60–140"; "−1 to −0.99" once a minus sign would sit next to the dash; "up to 140" or "60 or
 * more" when an end is unbounded (sent as null by models fitted before ranges were clipped to
 * the training data: the inverse of a Yeo–Johnson transform can run to infinity).
 */
function describeRange(low: number | null, high: number | null): string {
  const bounded = (v: number | null): v is number => v !== null && Number.isFinite(v);
  if (!bounded(low) && !bounded(high)) return "any value";
  if (!bounded(low)) return `up to ${formatValue(high as number)}`;
  if (!bounded(high)) return `${formatValue(low)} or more`;
  return low < 0 || high < 0 ? `${formatValue(low)} to ${formatValue(high)}` : `${formatValue(low)}–${formatValue(high)}`;
}
