/**
 * Order statistics without a full sort: the drift reference needs nine deciles of each column of
 * a 100,000-row sample, and sorting every column costs far more than selecting the eighteen ranks
 * the deciles read.
 *
 * Hoare's FIND (Hoare 1961, "Algorithm 65: Find", CACM 4(7):321) with a median-of-three pivot,
 * applied to the middle wanted rank and then recursively to the ranks on either side of it (each
 * selection leaves smaller values to its left and larger ones to its right, so the two sides are
 * independent). Introselect's guard (Musser 1997, "Introspective sorting and selection
 * algorithms", Software: Practice and Experience 27(8):983–993): a range that does not shrink
 * within 2·log₂(length) partitions is sorted instead, so no input is quadratic.
 */

/**
 * Reorders `values` in place so that, for every rank k in `ranks`, `values[k]` holds the value a
 * sort would put there. Values must not be NaN (comparisons with NaN are all false).
 * @param values the array to reorder
 * @param ranks zero-based ranks, ascending, each below `values.length`
 * @example const a = Float64Array.of(5, 1, 4, 2, 3); selectRanks(a, [0, 2]); [a[0], a[2]] // [1, 3]
 */
export function selectRanks(values: Float64Array, ranks: readonly number[]): void {
  selectWithin(values, 0, values.length - 1, ranks, 0, ranks.length - 1);
}

/**
 * The k-th smallest (zero-based) of `values[0..end)`, which it reorders as {@link selectRanks} does.
 * @param end length of the prefix to select in; default all of `values`
 * @example selectRank(Float64Array.of(5, 1, 4, 2, 3), 1) // 2
 */
export function selectRank(values: Float64Array, k: number, end = values.length): number {
  selectOne(values, 0, end - 1, k);
  return values[k];
}

function selectWithin(a: Float64Array, left: number, right: number, ranks: readonly number[], first: number, last: number): void {
  if (first > last || left >= right) return;
  const middle = (first + last) >>> 1;
  const k = ranks[middle];
  selectOne(a, left, right, k);
  selectWithin(a, left, k - 1, ranks, first, middle - 1);
  selectWithin(a, k + 1, right, ranks, middle + 1, last);
}

/** Puts the value of rank `k` at index k, with no larger value before it and no smaller after it. */
function selectOne(a: Float64Array, left: number, right: number, k: number): void {
  let budget = 2 * Math.ceil(Math.log2(right - left + 2));
  while (right > left) {
    if (budget-- === 0) {
      a.subarray(left, right + 1).sort();
      return;
    }
    const mid = (left + right) >>> 1;
    // Median of three at the ends and the middle: sorted or reversed input still halves.
    if (a[mid] < a[left]) swap(a, mid, left);
    if (a[right] < a[left]) swap(a, right, left);
    if (a[right] < a[mid]) swap(a, right, mid);
    const pivot = a[mid];
    let i = left;
    let j = right;
    while (i <= j) {
      while (a[i] < pivot) i++;
      while (a[j] > pivot) j--;
      if (i <= j) {
        swap(a, i, j);
        i++;
        j--;
      }
    }
    // Now a[left..j] ≤ pivot ≤ a[i..right], and everything between j and i equals the pivot.
    if (k <= j) right = j;
    else if (k >= i) left = i;
    else return;
  }
}

function swap(a: Float64Array, i: number, j: number): void {
  const t = a[i];
  a[i] = a[j];
  a[j] = t;
}
