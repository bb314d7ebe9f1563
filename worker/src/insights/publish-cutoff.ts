/**
 * Publishing a new cutoff from the model page: the live artifact retuned with the chosen d² cutoff
 * (`retuneArtifact`: same parameters, new cutoff, new content-derived version, verified), stored as
 * a new immutable version, then activated — each step recorded in `model_events` before it is made,
 * with who and why. Rolling back is the existing `POST /v1/models/rollback`.
 */
import { retuneArtifact, TuningInputError, type ModelArtifact } from "../../../shared-model/src";
import type { Env, Problem } from "../env";
import { changePointer, loadModel, ModelLoadError } from "../scoring/model-cache";
import { activatedPointer, readArtifactText, readPointer, storeArtifact } from "../storage/model-store";
import { markModelEventFailed, recordModelEvent, type ModelEventAction } from "../storage/review-store";
import type { PublishedCutoff } from "../contract";
export type { PublishedCutoff };

/** A validated publish request (see `publishCutoffSchema`). */
export interface PublishCutoffInput {
  fromVersion: string;
  cutoffMahalanobisSq: number;
  flagRate: number | null;
  basis: "manual" | "f1" | "capacity" | "cost";
  reason: string;
  confirm: "publish";
}

/** Outcome: the new version, or a refusal for the route to answer. */
export type PublishOutcome = { ok: true; value: PublishedCutoff } | { ok: false; status: 404 | 409 | 422 | 503; error: string; problems: Problem[]; retryable?: boolean };

/** Two cutoffs closer than this are the same cutoff (a new version would change nothing). */
const SAME_CUTOFF = 1e-9;

/**
 * Retunes, stores and activates. Refuses when nothing is live, when another version went live since
 * the admin looked (`fromVersion`), when the cutoff equals the live one, or when the event log
 * cannot be written (nothing changes then).
 *
 * @throws the KV error when the artifact or pointer cannot be written (its event is marked failed).
 * @example
 * await publishCutoff(env, "ops-ana", { fromVersion: "m20261201-1f3a9c2e", cutoffMahalanobisSq: 26, flagRate: 0.004, basis: "manual", reason: "fewer flags on weekends", confirm: "publish" });
 */
export async function publishCutoff(env: Env, actor: string, input: PublishCutoffInput): Promise<PublishOutcome> {
  const pointer = await readPointer(env);
  if (pointer === null) {
    return refuse(409, "no-active-model", "fromVersion", "no model is live; a cutoff is retuned from the live model");
  }
  if (pointer.version !== input.fromVersion) {
    return refuse(
      409,
      "live-version-changed",
      "fromVersion",
      `must be the live version ${pointer.version} (another change went live since the page was loaded; reload it). Actual: ${input.fromVersion}`,
    );
  }
  let live: ModelArtifact;
  try {
    live = (await loadModel(env, pointer.version)).artifact;
  } catch (error) {
    if (error instanceof ModelLoadError && (error.code === "artifact-missing" || error.code === "artifact-invalid")) {
      return refuse(422, "artifact-refused", "fromVersion", `the stored artifact of ${pointer.version} cannot be loaded (${error.code})`);
    }
    throw error;
  }
  const fromCutoff = live.cutoff.mahalanobisSq;
  if (Math.abs(fromCutoff - input.cutoffMahalanobisSq) < SAME_CUTOFF) {
    return refuse(409, "same-cutoff", "cutoffMahalanobisSq", `must differ from the live cutoff ${fromCutoff}; publishing it again would change nothing`);
  }
  let tuned: ModelArtifact;
  try {
    tuned = await retuneArtifact(live, input.cutoffMahalanobisSq, input.basis, input.flagRate);
  } catch (error) {
    if (error instanceof TuningInputError) return refuse(409, "cutoff-refused", error.field === "cutoffMahalanobisSq" ? error.field : `cutoff.${error.field}`, error.rule);
    throw error;
  }
  if ((await readArtifactText(env, tuned.version)) !== null) {
    return refuse(
      409,
      "version-exists",
      "cutoffMahalanobisSq",
      `the retuned version ${tuned.version} is already stored; activate it with POST /v1/models/${tuned.version}/activate`,
    );
  }
  const why = `cutoff d² ${fromCutoff} → ${tuned.cutoff.mahalanobisSq} (${input.basis}) from ${live.version}; reason: ${input.reason}`;
  const stored = await withEvent(env, { actor, action: "upload", fromVersion: null, toVersion: tuned.version, detail: `${tuned.checksum}; ${why}` }, () =>
    storeArtifact(env, tuned.version, JSON.stringify(tuned), { createdAt: tuned.createdAt, checksum: tuned.checksum }),
  );
  if (stored) return stored;
  const next = activatedPointer(pointer, tuned.version, actor);
  const activated = await withEvent(env, { actor, action: "activate", fromVersion: pointer.version, toVersion: tuned.version, detail: why }, async () => {
    await changePointer(env, next);
  });
  if (activated) return activated;
  return {
    ok: true,
    value: {
      version: tuned.version,
      fromVersion: live.version,
      cutoff: {
        fromMahalanobisSq: fromCutoff,
        toMahalanobisSq: tuned.cutoff.mahalanobisSq,
        tailProbability: tuned.cutoff.tailProbability,
        flagRate: tuned.cutoff.flagRate,
        basis: tuned.cutoff.basis,
      },
      pointer: next,
      publishedBy: actor,
    },
  };
}

/** Records the event, then makes the change; null when done, a 503 refusal when the log is down. */
async function withEvent(
  env: Env,
  event: { actor: string; action: ModelEventAction; fromVersion: string | null; toVersion: string | null; detail: string },
  change: () => Promise<void>,
): Promise<PublishOutcome | null> {
  let id: number;
  try {
    id = await recordModelEvent(env, { ...event, at: new Date().toISOString() });
  } catch (error) {
    console.error(JSON.stringify({ event: "model-event-write-failed", action: event.action, error: String(error) }));
    return { ...refuse(503, "event-log-unavailable", "model_events", "the change could not be recorded in the review store, so it was not made; retry"), retryable: true };
  }
  try {
    await change();
    return null;
  } catch (error) {
    await markModelEventFailed(env, id, String(error)).catch((e: unknown) => console.error(JSON.stringify({ event: "model-event-update-failed", id, error: String(e) })));
    throw error;
  }
}

function refuse(status: 404 | 409 | 422 | 503, error: string, field: string, rule: string): Extract<PublishOutcome, { ok: false }> {
  return { ok: false, status, error, problems: [{ field, rule }] };
}
