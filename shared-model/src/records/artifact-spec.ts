/**
 * The record spec inside a model artifact: the artifact carries the spec's `record` and each
 * feature's derivation (`derive`), so a scorer can derive features from payment records with the
 * model alone. Artifacts without them read ready feature columns, as before.
 */
import type { FittedFeature } from "../types";
import { derivationJson, parseRecordSpec, recordMappingJson, type DerivationJson, type RecordMappingJson, type RecordSpec } from "./spec";

/** The artifact fields that hold a record spec (both optional). */
export interface ArtifactRecordFields {
  record?: RecordMappingJson;
  features: readonly (Pick<FittedFeature, "name" | "transform"> & { derive?: DerivationJson })[];
}

/**
 * Adds the spec's derivations to fitted features (`derive`, only where a feature does not simply
 * read the column of its name) and returns the `record` field, for the fit to store.
 * @example const { record, features } = withRecordSpec(spec, fitted)
 */
export function withRecordSpec<F extends FittedFeature>(
  spec: RecordSpec | undefined,
  fitted: readonly F[],
): { record?: RecordMappingJson; features: (F & { derive?: DerivationJson })[] } {
  if (spec === undefined) return { features: [...fitted] };
  const features = fitted.map((feature, i) => {
    const derive = derivationJson(feature.name, spec.features[i].derivation);
    return derive === null ? feature : { ...feature, derive };
  });
  const record = recordMappingJson(spec);
  return record === undefined ? { features } : { record, features };
}

/**
 * The record spec an artifact carries; null for an artifact that reads ready feature columns
 * (no `record`, no `derive`).
 * @throws {FeatureSpecError} when the stored spec breaks a rule (a `derive` that needs `record`, …)
 * @example const spec = recordSpecFromArtifact(artifact); if (spec?.record) deriveInto(spec, …)
 */
export function recordSpecFromArtifact(artifact: ArtifactRecordFields): RecordSpec | null {
  const derives = artifact.features.some((f) => f.derive !== undefined);
  if (artifact.record === undefined && !derives) return null;
  const features = artifact.features.map((f) => ({ name: f.name, transform: f.transform, ...f.derive }));
  return parseRecordSpec(artifact.record === undefined ? { features } : { record: artifact.record, features });
}
