/**
 * Pass 4 of the fit: d² of every training row under its own model (and, for classical
 * full-covariance fits, its deleted distance), kept in a bounded seeded reservoir; the cutoff comes
 * from them (`cutoff-law.ts`), and the in-sample deciles are the score's drift reference.
 */
import { deletedDistance, type ScoringModelTraffic } from "./cutoff-law";
import { transformedPass, type PassInput } from "./fit-moment-passes";
import { CUTOFF_SAMPLE_ROWS } from "./fit-types";
import { createRandom } from "./random";
import { Reservoir } from "./reservoir";
import { mahalanobisSq } from "./score";

/** The d² sample of pass 4 and the traffic each scoring model saw. */
export interface CutoffSample {
  /** In-sample d² of sampled training rows (the drift reference for the score). */
  inSample: Float64Array;
  /** Deleted (leave-one-out) d² of the same rows; null when the estimator has no closed form. */
  deleted: Float64Array | null;
  /** Index into `traffic` of the model that scored each sampled row. */
  model: Uint16Array;
  traffic: ScoringModelTraffic[];
}

/**
 * Runs pass 4; every live slot must have its `precision` and `mean` set.
 * @param seed the fit's seed (the d² sample draws from seed + 1)
 * @param withDeleted also keep each row's deleted distance (classical full-covariance fits)
 * @returns the sampled d² values, the model of each, and the rows each scoring model scored
 * @throws FitInputError for a bad row or a pass that differs from the first
 */
export async function cutoffPass(pass: PassInput, seed: number, withDeleted: boolean): Promise<CutoffSample> {
  const { slots, n } = pass;
  const sample = new Reservoir(3, CUTOFF_SAMPLE_ROWS, createRandom(seed + 1));
  const diff = new Float64Array(n);
  const triple = new Float64Array(3);
  const traffic: ScoringModelTraffic[] = [];
  const indexOf = new Map<string, number>();
  await transformedPass(pass, "cutoff", (row, x) => {
    const model = slots.scoring(row);
    let index = indexOf.get(model.key);
    if (index === undefined) {
      index = traffic.length;
      indexOf.set(model.key, index);
      traffic.push({ key: model.key, rows: model.rows, scored: 0 });
    }
    traffic[index].scored++;
    triple[0] = mahalanobisSq(model.precision!, model.mean!, x, n, diff);
    triple[1] = withDeleted ? deletedDistance(triple[0], model.rows) : 0;
    triple[2] = index;
    sample.offer(triple);
  });
  const rows = sample.rows();
  const m = rows.length / 3;
  const inSample = new Float64Array(m);
  const deleted = withDeleted ? new Float64Array(m) : null;
  const model = new Uint16Array(m);
  for (let i = 0; i < m; i++) {
    inSample[i] = rows[3 * i];
    if (deleted) deleted[i] = rows[3 * i + 1];
    model[i] = rows[3 * i + 2];
  }
  return { inSample, deleted, model, traffic };
}
