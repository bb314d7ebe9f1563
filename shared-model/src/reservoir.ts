/**
 * Uniform samples of a stream of unknown length, and type-7 quantiles of a sample: what the fit
 * keeps of the rows it does not hold (Yeo–Johnson λ, drift edges, the cutoff quantile).
 */
import type { RandomSource } from "./random";
import { selectRanks } from "./order-statistics";

/**
 * A uniform random sample of at most `capacity` rows of `width` values from a stream of unknown
 * length (Vitter 1985, "Random sampling with a reservoir", ACM TOMS 11(1):37–57, Algorithm R:
 * row t, 0-based, replaces a random slot with probability capacity/(t+1)). Storage grows by
 * doubling, so a small source never pays for the full capacity.
 * @example
 * const r = new Reservoir(2, 100_000, createRandom(1));
 * r.offer([1, 2]); r.rows() // Float64Array [1, 2]
 */
export class Reservoir {
  private data: Float64Array;
  /** Rows offered so far. */
  private seen = 0;
  /** Rows held (min(seen, capacity)). */
  size = 0;

  constructor(
    private readonly width: number,
    private readonly capacity: number,
    private readonly random: RandomSource,
  ) {
    this.data = new Float64Array(Math.min(capacity, 1024) * width);
  }

  /**
   * Offers one row; the values are copied when the row is kept.
   * @returns the slot the row now occupies, or -1 when it was not kept
   */
  offer(values: ArrayLike<number>): number {
    const slot = this.claim();
    if (slot < 0) return -1;
    const w = this.width;
    for (let j = 0; j < w; j++) this.data[slot * w + j] = values[j];
    return slot;
  }

  /**
   * Offers row `r` of a block held column by column (`columns[j][r]`), with the same draw as
   * {@link offer}: a stream offered either way keeps the same sample.
   * @returns the slot the row now occupies, or -1 when it was not kept
   */
  offerColumns(columns: readonly ArrayLike<number>[], r: number): number {
    const slot = this.claim();
    if (slot < 0) return -1;
    const w = this.width;
    for (let j = 0; j < w; j++) this.data[slot * w + j] = columns[j][r];
    return slot;
  }

  /** Algorithm R's step for the next row: the slot it takes, or -1; grows the storage while filling. */
  private claim(): number {
    const t = this.seen++;
    if (t >= this.capacity) {
      const slot = Math.floor(this.random.next() * (t + 1));
      return slot < this.capacity ? slot : -1;
    }
    if ((t + 1) * this.width > this.data.length) {
      const grown = new Float64Array(Math.min(this.capacity, 2 * (this.data.length / this.width)) * this.width);
      grown.set(this.data);
      this.data = grown;
    }
    this.size = t + 1;
    return t;
  }

  /** The sampled rows, row-major (`size` rows of `width` values). */
  rows(): Float64Array {
    return this.data.subarray(0, this.size * this.width);
  }
}

/**
 * Type-7 quantiles (linear interpolation; Hyndman & Fan 1996, R's default) of `values` at the
 * probabilities `ps`.
 * @example quantiles(Float64Array.of(1, 2, 3, 4), [0.5]) // [2.5]
 */
export function quantiles(values: Float64Array, ps: readonly number[]): number[] {
  const m = values.length;
  const positions = ps.map((p) => {
    const h = (m - 1) * p;
    const lo = Math.floor(h);
    return { h, lo, hi: Math.min(lo + 1, m - 1) };
  });
  // Only the ranks read below need their sorted values: select them rather than sort (same values
  // bit for bit; a sort still handles NaN, which selection cannot order).
  const ordered = values.slice();
  if (ordered.some(Number.isNaN)) ordered.sort();
  else
    selectRanks(
      ordered,
      [...new Set(positions.flatMap(({ lo, hi }) => [lo, hi]))].sort((a, b) => a - b),
    );
  return positions.map(({ h, lo, hi }) => ordered[lo] + (h - lo) * (ordered[hi] - ordered[lo]));
}
