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
import type { ModelSlot } from "./fit-slots";

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
 * Keeps, for rows offered with the model that scores them, a bounded seeded reservoir of their d²
 * (and deleted distances) and counts the rows each model scored: the input of the cutoff law.
 */
export class CutoffSampler {
  private readonly sample: Reservoir;
  private readonly diff: Float64Array;
  private readonly triple = new Float64Array(3);
  private readonly traffic: ScoringModelTraffic[] = [];
  private readonly indexOf = new Map<string, number>();

  /**
   * @param seed the fit's seed (the d² sample draws from seed + 1)
   * @param withDeleted also keep each row's deleted distance (classical full-covariance fits)
   */
  constructor(
    private readonly n: number,
    seed: number,
    private readonly withDeleted: boolean,
  ) {
    this.sample = new Reservoir(3, CUTOFF_SAMPLE_ROWS, createRandom(seed + 1));
    this.diff = new Float64Array(n);
  }

  /** Scores one transformed row under `model` (its `precision` and `mean` set) and offers it. */
  offer(model: ModelSlot, x: Float64Array): void {
    let index = this.indexOf.get(model.key);
    if (index === undefined) {
      index = this.traffic.length;
      this.indexOf.set(model.key, index);
      this.traffic.push({ key: model.key, rows: model.rows, scored: 0 });
    }
    this.traffic[index].scored++;
    const triple = this.triple;
    triple[0] = mahalanobisSq(model.precision!, model.mean!, x, this.n, this.diff);
    triple[1] = this.withDeleted ? deletedDistance(triple[0], model.rows) : 0;
    triple[2] = index;
    this.sample.offer(triple);
  }

  /** The sampled d² values, the model of each, and the rows each scoring model scored. */
  result(): CutoffSample {
    const rows = this.sample.rows();
    const m = rows.length / 3;
    const inSample = new Float64Array(m);
    const deleted = this.withDeleted ? new Float64Array(m) : null;
    const model = new Uint16Array(m);
    for (let i = 0; i < m; i++) {
      inSample[i] = rows[3 * i];
      if (deleted) deleted[i] = rows[3 * i + 1];
      model[i] = rows[3 * i + 2];
    }
    return { inSample, deleted, model, traffic: this.traffic };
  }
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
  const sampler = new CutoffSampler(n, seed, withDeleted);
  await transformedPass(pass, "cutoff", (row, x) => sampler.offer(slots.scoring(row), x));
  return sampler.result();
}
