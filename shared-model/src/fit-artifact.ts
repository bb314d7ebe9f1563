/**
 * The end of a fit: the cutoff from the sampled d², the log-density cutoff per model, the drift
 * reference, the content-derived version, the seal, and a verification that the artifact loads.
 */
import { ArtifactError, canonicalJson, parseArtifact, sealArtifact, sha256Hex, type ArtifactSegment, type ModelArtifact, type UnsealedArtifact } from "./artifact";
import { outOfSampleCutoff, type LawCutoff } from "./cutoff-law";
import type { CutoffSample } from "./fit-cutoff-pass";
import type { ModelSlot, ModelSlots } from "./fit-slots";
import { decileReference, type DecileReference } from "./drift";
import type { FitOptions } from "./fit-types";
import { logDensityAt } from "./log-density";
import { withRecordSpec } from "./records/artifact-spec";
import type { CovarianceShape, Diagnostic, FittedFeature } from "./types";

/** Everything the artifact is made of, once the models are estimated and the d² sampled. */
export interface ArtifactInput {
  options: FitOptions;
  createdAt: string;
  features: FittedFeature[];
  columns: string[];
  shape: CovarianceShape;
  shapeReason: string;
  minSegmentRows: number;
  slots: ModelSlots;
  /** d² of sampled training rows, each under its own model, and the traffic per model. */
  cutoffSample: CutoffSample;
  /** Drift reference of each model column (edges and training shares). */
  columnReference: DecileReference[];
  training: { rowsRead: number; rowsUsed: number; rowsExcludedAsFraud: number };
}

/** The sealed artifact with the figures the report repeats. */
export interface SealedFit {
  artifact: ModelArtifact;
  fitted: ModelSlot[];
  diagnostics: Diagnostic[];
  cut: LawCutoff;
  logDensity: Record<string, number>;
}

/**
 * Builds, names, seals and verifies the artifact.
 * @throws Error (internal) when the sealed artifact does not verify: a defect in the fit
 */
export async function sealFit(input: ArtifactInput): Promise<SealedFit> {
  const { options, createdAt, columns, slots, cutoffSample } = input;
  const scoreSample = cutoffSample.inSample;
  const n = columns.length;
  const cut = outOfSampleCutoff({ ...cutoffSample, n, rate: options.cutoffRate });
  const fitted = slots.live();
  const logDensity: Record<string, number> = {};
  const segments: Record<string, ArtifactSegment> = {};
  const predictive = new Set(cut.predictiveKeys);
  for (const slot of fitted) {
    // The law its payments' tail probabilities are read from: the one that chose its share of the cutoff.
    segments[slot.key] = { ...slot.segment!, tailLaw: predictive.has(slot.key) && slot.segment!.rows > n ? "predictive" : "chi-square" };
    logDensity[slot.key] = logDensityAt(n, slot.segment!.logDet, cut.mahalanobisSq);
  }
  const segmentFallbacks: Record<string, string> = {};
  for (const key of [...slots.fallbacks.keys()].sort()) segmentFallbacks[key] = slots.fallbacks.get(key)!;
  const diagnostics = slots.warnings.filter((d) => d.severity !== "error");
  const content: Omit<UnsealedArtifact, "version"> = {
    format: "isodense.model/v1",
    createdAt,
    ...withRecordSpec(options.recordSpec, input.features),
    columns,
    covarianceShape: input.shape,
    shapeReason: input.shapeReason,
    estimator: options.estimator,
    segmentBy: options.segmentBy,
    minSegmentRows: input.minSegmentRows,
    segments,
    segmentFallbacks,
    cutoff: {
      mahalanobisSq: cut.mahalanobisSq,
      tailProbability: cut.tailProbability,
      logDensity,
      basis: "flag-rate",
      flagRate: cut.flagRate,
      law: cut.law,
    },
    training: { ...input.training, source: options.source ?? null },
    diagnostics,
    reference: referenceOf(input.columnReference, decileReference(scoreSample)),
  };
  const version = options.version ?? (await contentVersion(content, createdAt));
  const artifact = await sealArtifact({ ...content, version });
  try {
    await parseArtifact(artifact);
  } catch (error) {
    // A fit that cannot be loaded back is a defect in the fit, not in the data.
    if (error instanceof ArtifactError) throw new Error(`internal error: the fitted artifact does not verify: ${error.message}`);
    throw error;
  }
  return { artifact, fitted, diagnostics, cut, logDensity };
}

/** The artifact's drift reference: edges, and the training share of each bucket beside them. */
function referenceOf(columns: DecileReference[], score: DecileReference): ModelArtifact["reference"] {
  return {
    columnEdges: columns.map((c) => c.edges),
    scoreEdges: score.edges,
    columnShares: columns.map((c) => c.shares),
    scoreShares: score.shares,
  };
}

/**
 * The model id derived from the content: `m<yyyymmdd>-<8 hex>`, where the hex is the start of the
 * SHA-256 of {@link canonicalJson} of the artifact content without `version` and `checksum`, and
 * the date is the UTC date of `createdAt`. Shared by the fit and by cutoff retuning
 * (`retuneArtifact`), so every artifact version in the project is named the same way.
 * @param content every field of the artifact but `version` (and `checksum`)
 * @param createdAt ISO-8601 date-time whose UTC date goes into the id
 * @throws TypeError when the content holds a non-finite number or a non-JSON value
 * @example await contentVersion(content, "2026-12-01T09:30:00Z") // "m20261201-3fa94c0e"
 */
export async function contentVersion(content: Omit<UnsealedArtifact, "version">, createdAt: string): Promise<string> {
  const hash = await sha256Hex(canonicalJson(content));
  const day = new Date(createdAt).toISOString().slice(0, 10).replace(/-/g, "");
  return `m${day}-${hash.slice(0, 8)}`;
}
