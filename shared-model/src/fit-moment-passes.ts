/**
 * Passes 2 and 3 of the fit. Pass 2 transforms each row and accumulates count, mean and co-moment
 * per model (Welford 1962; memory O(n²) per model, flat in rows); the robust estimator also holds
 * the transformed rows of each model, O(m·n), since FAST-MCD needs the data. Pass 3 (shrinkage
 * only) accumulates Σ‖x − x̄‖⁴ around each model's mean (Ledoit & Wolf 2004).
 */
import { FourthMomentAccumulator } from "./estimators";
import { transformInto } from "./features";
import { checkRow, checkSameRows } from "./fit-checks";
import type { ModelSlots } from "./fit-slots";
import { PROGRESS_EVERY, type FitRow, type RowSource } from "./fit-types";
import type { FeatureDeclaration, FittedFeature } from "./types";

/** What a moment pass reads and where it reports. */
export interface PassInput {
  source: RowSource;
  decls: readonly FeatureDeclaration[];
  features: readonly FittedFeature[];
  slots: ModelSlots;
  /** Rows of the first pass; every pass must yield as many. */
  rowsUsed: number;
  /** Model columns. */
  n: number;
  progress: (pass: string, rows: number) => void;
}

/**
 * One pass over the source: checks every row, transforms it into `x` and hands both to `visit`,
 * with progress under `name`; checks at the end that the pass yielded the first pass's rows.
 * @throws FitInputError for a bad row or a pass that differs from the first
 */
export async function transformedPass(
  { source, decls, features, rowsUsed, n, progress }: PassInput,
  name: string,
  visit: (row: FitRow, x: Float64Array, rowNumber: number) => void,
): Promise<void> {
  const x = new Float64Array(n);
  let seen = 0;
  for await (const row of source.pass()) {
    seen++;
    checkRow(row, decls, seen);
    transformInto(features, row.values, x);
    visit(row, x, seen);
    if (seen % PROGRESS_EVERY === 0) progress(name, seen);
  }
  progress(name, seen);
  checkSameRows(name, seen, rowsUsed);
}

/**
 * Pass 2: moments of every model (and the rows themselves for robust).
 * @throws FitInputError for a bad row or a pass that differs from the first
 */
export async function momentsPass(pass: PassInput): Promise<void> {
  const { slots, n } = pass;
  await transformedPass(pass, "moments", (row, x, rowNumber) => {
    for (const slot of slots.feeding(row, rowNumber)) {
      slot.moments.push(x);
      if (slot.data !== null) {
        slot.data.set(x, slot.filled * n);
        slot.filled++;
      }
    }
  });
}

/**
 * Pass 3 (shrinkage): Σ‖x − x̄‖⁴ around each live model's pass-2 mean.
 * @throws FitInputError for a bad row or a pass that differs from the first
 */
export async function fourthMomentsPass(pass: PassInput): Promise<void> {
  const { slots } = pass;
  for (const slot of slots.live()) slot.fourth = new FourthMomentAccumulator(slot.moments.mean);
  await transformedPass(pass, "fourth-moments", (row, x, rowNumber) => {
    for (const slot of slots.feeding(row, rowNumber)) slot.fourth?.push(x);
  });
}
