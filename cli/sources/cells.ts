/**
 * Helpers shared by the database readers of {@link openSourceTable}: a database value as a text
 * cell, and row generators that release their database whether they are read to the end or closed
 * before the first row.
 */

/**
 * A database value as a cell: empty for NULL, numbers in JavaScript's shortest round-trip form,
 * other values (text, dates, decimals) as their text.
 * @example cellText(0.1) // "0.1"
 * @example cellText(null) // ""
 */
export function cellText(value: unknown): string {
  if (value === null || value === undefined) return "";
  if (typeof value === "string") return value;
  if (value instanceof Uint8Array) return Buffer.from(value).toString("utf8");
  return String(value);
}

/**
 * Wraps a row generator so that `release` runs exactly once: when the rows end, fail, or are
 * closed with `return()`, also before the first row (a generator closed before it starts never
 * runs its own `finally`).
 */
export function releasing<T>(rows: AsyncGenerator<T, void, undefined>, release: () => void): AsyncGenerator<T, void, undefined> {
  let released = false;
  const once = (): void => {
    if (!released) {
      released = true;
      release();
    }
  };
  async function* guarded(): AsyncGenerator<T, void, undefined> {
    try {
      yield* rows;
    } finally {
      once();
    }
  }
  const wrapped = guarded();
  const close = wrapped.return.bind(wrapped);
  wrapped.return = async (value) => {
    try {
      return await close(value);
    } finally {
      await rows.return();
      once();
    }
  };
  return wrapped;
}
