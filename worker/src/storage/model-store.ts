/**
 * Models in KV. Two kinds of keys:
 * - `model:<version>`: the artifact JSON, written once and never changed (immutable versions);
 * - `pointer:active`: which version scores live, which one scores in shadow, and the versions a
 *   rollback returns to, newest first.
 *
 * KV has no compare-and-set: two admins changing the pointer at the same instant both succeed and
 * the last write wins. Admin changes are rare and each one is logged in `model_events`.
 */
import { MAX_PREVIOUS_VERSIONS, modelPointerSchema, type ModelPointer } from "../contract/wire";
import type { Env } from "../env";

/** KV key of the active-model pointer. */
export const POINTER_KEY = "pointer:active";
/** Prefix of the artifact keys. */
export const MODEL_KEY_PREFIX = "model:";

/** KV key of one artifact. */
export function modelKey(version: string): string {
  return `${MODEL_KEY_PREFIX}${version}`;
}

/** The pointer in KV is not a pointer document (written by hand, or by another tool). */
export class PointerFormatError extends Error {
  constructor(detail: string) {
    super(`${POINTER_KEY} is not a valid pointer document: ${detail}`);
    this.name = "PointerFormatError";
  }
}

/**
 * Reads the pointer; null when nothing has been activated yet.
 *
 * @throws {PointerFormatError} when the stored value is not a pointer document.
 * @throws the KV error when KV cannot be read.
 * @example
 * const pointer = await readPointer(env); // { version: "m20261201-1f3a9c2e", shadow: null, previous: [], … }
 */
export async function readPointer(env: Pick<Env, "MODELS">): Promise<ModelPointer | null> {
  const text = await env.MODELS.get(POINTER_KEY, "text");
  if (text === null) return null;
  let value: unknown;
  try {
    value = JSON.parse(text);
  } catch (error) {
    throw new PointerFormatError(`not JSON (${(error as Error).message})`);
  }
  const parsed = modelPointerSchema.safeParse(value);
  if (!parsed.success) {
    throw new PointerFormatError(parsed.error.issues.map((i) => `${i.path.join(".") || "(root)"}: ${i.message}`).join("; "));
  }
  return parsed.data;
}

/**
 * Writes the pointer.
 *
 * @example
 * await writePointer(env, { version: "m2", shadow: null, previous: ["m1"], updatedAt: now, updatedBy: "ops-ana" });
 */
export async function writePointer(env: Pick<Env, "MODELS">, pointer: ModelPointer): Promise<void> {
  await env.MODELS.put(POINTER_KEY, JSON.stringify(pointer));
}

/**
 * The pointer after `version` goes live: the version that was live heads the rollback list (each
 * version once, at most {@link MAX_PREVIOUS_VERSIONS}), and a shadow that goes live ends its run.
 *
 * @example activatedPointer({ version: "m1", shadow: "m2", previous: [], … }, "m2", "ops-ana")
 *   // → { version: "m2", shadow: null, previous: ["m1"], updatedBy: "ops-ana", … }
 */
export function activatedPointer(pointer: ModelPointer | null, version: string, by: string, at: Date = new Date()): ModelPointer {
  const previous = pointer ? [pointer.version, ...pointer.previous.filter((v) => v !== pointer.version && v !== version)] : [];
  return {
    version,
    shadow: pointer?.shadow === version ? null : (pointer?.shadow ?? null),
    previous: previous.slice(0, MAX_PREVIOUS_VERSIONS),
    updatedAt: at.toISOString(),
    updatedBy: by,
  };
}

/**
 * Reads an artifact's JSON text; null when the version is not stored.
 *
 * @example
 * const text = await readArtifactText(env, "m20261201-1f3a9c2e");
 */
export async function readArtifactText(env: Pick<Env, "MODELS">, version: string): Promise<string | null> {
  return env.MODELS.get(modelKey(version), "text");
}

/** Small summary kept as KV metadata beside each artifact (KV allows 1,024 bytes). */
export interface ArtifactMetadata {
  createdAt: string;
  checksum: string;
}

/**
 * Stores an artifact under its version. The caller has verified it and checked that the version is
 * not stored yet (immutability is enforced by the route, not by KV).
 *
 * @example
 * await storeArtifact(env, artifact.version, JSON.stringify(artifact), { createdAt: artifact.createdAt, checksum: artifact.checksum });
 */
export async function storeArtifact(env: Pick<Env, "MODELS">, version: string, text: string, metadata: ArtifactMetadata): Promise<void> {
  await env.MODELS.put(modelKey(version), text, { metadata });
}

/** One page of stored versions. */
export interface VersionPage {
  versions: string[];
  /** Pass back to get the next page; null on the last page. */
  cursor: string | null;
}

/**
 * Lists stored versions, one page at a time, in key order.
 *
 * @param limit versions per page, 1–1000.
 * @example
 * const { versions, cursor } = await listVersions(env, 50, null);
 */
export async function listVersions(env: Pick<Env, "MODELS">, limit: number, cursor: string | null): Promise<VersionPage> {
  const page = await env.MODELS.list({ prefix: MODEL_KEY_PREFIX, limit, ...(cursor ? { cursor } : {}) });
  return {
    versions: page.keys.map((k) => k.name.slice(MODEL_KEY_PREFIX.length)),
    cursor: page.list_complete ? null : page.cursor,
  };
}
