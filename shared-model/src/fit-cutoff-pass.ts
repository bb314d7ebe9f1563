/**
 * Pass 4 of the fit: d² of every training row under its own model, kept in a bounded seeded
 * reservoir; the cutoff is the sample's upper quantile for the requested flag rate, and the
 * sample's deciles are the score's drift reference.
 */
import { transformedPass, type PassInput } from "./fit-moment-passes";
import { CUTOFF_SAMPLE_ROWS } from "./fit-types";
import { createRandom } from "./random";
import { Reservoir } from "./reservoir";
import { mahalanobisSq } from "./score";

/**
 * Runs pass 4; every live slot must have its `precision` and `mean` set.
 * @param seed the fit's seed (the d² sample draws from seed + 1)
 * @returns the sampled d² values
 * @throws FitInputError for a bad row or a pass that differs from the first
 */
export async function cutoffPass(pass: PassInput, seed: number): Promise<Float64Array> {
  const { slots, n } = pass;
  const sample = new Reservoir(1, CUTOFF_SAMPLE_ROWS, createRandom(seed + 1));
  const diff = new Float64Array(n);
  const d2 = new Float64Array(1);
  await transformedPass(pass, "cutoff", (row, x) => {
    const model = slots.scoring(row);
    d2[0] = mahalanobisSq(model.precision!, model.mean!, x, n, diff);
    sample.offer(d2);
  });
  return sample.rows();
}
