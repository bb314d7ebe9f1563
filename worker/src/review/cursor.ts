/**
 * Opaque keyset cursors for the queue list. A cursor remembers the order it was made for and the
 * last line of the page (its sort value and id); the next page starts strictly after that line.
 * Base64url of a small JSON document: opaque to clients, but nothing secret is in it.
 */
import type { ReviewState, SortDirection, SortKey } from "../contract";

export interface CursorPosition {
  sort: SortKey;
  direction: SortDirection;
  state: ReviewState;
  /** Sort value of the last line shown (priority_base, log10 tail probability, amount at risk or scored ms). */
  value: number;
  /** Item id of the last line shown. */
  id: number;
}

/** Encodes a position. @example encodeCursor({ sort: "tail", direction: "asc", state: "open", value: 1e-9, id: 42 }) */
export function encodeCursor(position: CursorPosition): string {
  const json = JSON.stringify([position.sort, position.direction, position.state, position.value, position.id]);
  return btoa(json).replace(/\+/g, "-").replace(/\//g, "_").replace(/=+$/, "");
}

/**
 * Decodes a cursor, or returns the rule it breaks.
 * @example decodeCursor("not a cursor") // { error: "is not a cursor returned by this API (…)" }
 */
export function decodeCursor(text: string): { position: CursorPosition } | { error: string } {
  let parsed: unknown;
  try {
    parsed = JSON.parse(atob(text.replace(/-/g, "+").replace(/_/g, "/")));
  } catch {
    return { error: "is not a cursor returned by this API (not base64url JSON); start again without a cursor" };
  }
  if (
    !Array.isArray(parsed) ||
    parsed.length !== 5 ||
    !["priority", "tail", "amount", "age"].includes(parsed[0]) ||
    !["asc", "desc"].includes(parsed[1]) ||
    !["open", "claimed", "decided"].includes(parsed[2]) ||
    typeof parsed[3] !== "number" ||
    !Number.isFinite(parsed[3]) ||
    !Number.isSafeInteger(parsed[4]) ||
    // The tail order walks log10 tail probabilities (never above 0); a larger value is a cursor from
    // before it did, made on the tail probability itself.
    (parsed[0] === "tail" && parsed[3] > 0)
  ) {
    return { error: "is not a cursor returned by this API (unexpected content); start again without a cursor" };
  }
  return { position: { sort: parsed[0], direction: parsed[1], state: parsed[2], value: parsed[3], id: parsed[4] } };
}
