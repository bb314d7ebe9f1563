/**
 * The end of every fit, streamed (`fit.ts`) or finished from a SQL engine's moments
 * (`fit-from-moments.ts`): seal the artifact, then report on what was sealed.
 */
import type { ModelArtifact } from "./artifact";
import { sealFit, type ArtifactInput } from "./fit-artifact";
import { fitReport } from "./fit-report";
import type { FitReport } from "./fit-types";

/** What sealing needs, and what the report adds: rows per segment value, the seed, a robust note. */
export interface FinishInput extends ArtifactInput {
  segmentCounts: Map<string, number>;
  seed: number;
  /** Where the robust estimator ran when not on every row; omitted otherwise. */
  robustNote?: string;
}

/**
 * Seals and verifies the artifact (`sealFit`) and writes the fit's report (`fitReport`).
 * @throws Error (internal) when the sealed artifact does not verify: a defect in the fit
 * @example const { artifact, report } = await finishFit({ ...artifactInput, segmentCounts, seed });
 */
export async function finishFit(input: FinishInput): Promise<{ artifact: ModelArtifact; report: FitReport }> {
  const sealed = await sealFit(input);
  const { options, slots, training, shape, shapeReason, segmentCounts, minSegmentRows, seed, robustNote } = input;
  const report = fitReport({ options, sealed, slots, training, shape, shapeReason, segmentCounts, n: input.columns.length, minSegmentRows, seed, robustNote });
  return { artifact: sealed.artifact, report };
}
