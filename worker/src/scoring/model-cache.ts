/**
 * The compiled models of this isolate, kept in module scope between requests.
 *
 * - The pointer (`pointer:active`) is re-read at most every MODEL_REFRESH_SECONDS; the artifact is
 *   fetched, verified (`parseArtifact`: schema, precision·covariance ≈ I, logDet, checksum) and
 *   compiled only when the pointer names a version this isolate has not compiled. Scoring itself
 *   never parses or inverts anything.
 * - Staleness: a new pointer reaches an isolate within MODEL_REFRESH_SECONDS plus KV's own
 *   propagation (KV is eventually consistent; up to ~60 s across locations in production).
 * - Failure: when KV cannot be read, or the pointer names a version that is missing or does not
 *   verify, the last good model keeps serving; the failure is counted and logged once per cause.
 *   With nothing ever loaded, {@link ModelCache.snapshot} returns null and the route answers 503.
 */
import { compileModel, parseArtifact, recordSpecFromArtifact, Scorer, ArtifactError } from "../../../shared-model/src";
import type { CompiledModel, ModelArtifact, RecordSpec } from "../../../shared-model/src";
import type { Env } from "../env";
import type { ModelPointer } from "../contract/wire";
import { PointerFormatError, readArtifactText, readPointer, writePointer } from "../storage/model-store";

/** A verified, compiled model ready to score. */
export interface LoadedModel {
  version: string;
  artifact: ModelArtifact;
  compiled: CompiledModel;
  /** Owns scratch buffers; safe to share because scoring is synchronous on one thread. */
  scorer: Scorer;
  /** ISO-8601 time this isolate compiled it. */
  loadedAt: string;
  /** How features derive from payment records (the `payment` form); null when the model reads ready features only. */
  recordSpec: RecordSpec | null;
}

/** Why a model could not be loaded. */
export type LoadFailureCode = "kv-read-failed" | "pointer-invalid" | "pointer-missing" | "artifact-missing" | "artifact-invalid";

/**
 * A model that cannot be loaded, with a code the health route reports and a message for logs
 * (never a secret: codes, versions and the verification problems).
 */
export class ModelLoadError extends Error {
  constructor(
    readonly code: LoadFailureCode,
    message: string,
    readonly problems: { field: string; rule: string }[] = [],
  ) {
    super(message);
    this.name = "ModelLoadError";
  }
}

/** Longest a request waits for a pointer refresh started by another request (ms). */
const SHARED_REFRESH_WAIT_MS = 2000;

/**
 * Fetches, verifies and compiles one stored version.
 *
 * @throws {ModelLoadError} `artifact-missing` when `model:<version>` is absent, `artifact-invalid`
 *   when it does not verify (with the problems), `kv-read-failed` when KV throws.
 * @example
 * const model = await loadModel(env, "m20261201-1f3a9c2e");
 */
export async function loadModel(env: Pick<Env, "MODELS">, version: string): Promise<LoadedModel> {
  let text: string | null;
  try {
    text = await readArtifactText(env, version);
  } catch (error) {
    throw new ModelLoadError("kv-read-failed", `reading model:${version} from KV failed: ${describe(error)}`);
  }
  if (text === null) throw new ModelLoadError("artifact-missing", `model:${version} is not stored in KV`);
  let artifact: ModelArtifact;
  try {
    artifact = await parseArtifact(text);
  } catch (error) {
    if (error instanceof ArtifactError) {
      const problems = error.problems.map((p) => ({ field: p.path, rule: p.rule }));
      throw new ModelLoadError("artifact-invalid", `model:${version} does not verify: ${error.message}`, problems);
    }
    throw error;
  }
  if (artifact.version !== version) {
    throw new ModelLoadError("artifact-invalid", `model:${version} holds an artifact whose version is ${artifact.version}`, [
      { field: "version", rule: `must equal the key's version ${version}. Actual: ${artifact.version}` },
    ]);
  }
  const compiled = compileModel(artifact);
  const recordSpec = recordSpecFromArtifact(artifact);
  return {
    version,
    artifact,
    compiled,
    scorer: new Scorer(compiled),
    loadedAt: new Date().toISOString(),
    recordSpec: recordSpec?.record ? recordSpec : null,
  };
}

/** What scores a request: the live model and, when set and loadable, the shadow. */
export interface ModelSnapshot {
  live: LoadedModel;
  shadow: LoadedModel | null;
}

/** A load failure as reported by the health route. */
export interface LoadFailure {
  code: LoadFailureCode;
  message: string;
  /** ISO-8601. */
  at: string;
}

/** The cache's state, for `GET /v1/health`. */
export interface ModelCacheStatus {
  live: { version: string; loadedAt: string } | null;
  shadow: { version: string; loadedAt: string } | null;
  /** Pointer as last read (null: never read, or nothing published). */
  pointer: { version: string; shadow: string | null } | null;
  lastCheckedAt: string | null;
  /** Failed loads of the live model (KV unreadable, missing or unverifiable artifact). */
  loadFailures: number;
  /** Failed loads of the shadow model (the live answer is unaffected). */
  shadowLoadFailures: number;
  lastFailure: LoadFailure | null;
}

/**
 * Compiled versions kept: quick switches (rollback, shadow promoted to live) and the versions the
 * review queue's evidence and the model page ask for. Versions are immutable, so a kept one is
 * never stale.
 */
const KEPT_VERSIONS = 8;
/** Distinct failure causes remembered for log-once; beyond this, causes are logged again. */
const LOGGED_CAUSES = 256;

/**
 * Per-isolate model cache with bounded staleness and last-good fallback.
 *
 * @example
 * const snapshot = await modelCache.snapshot(env, settings.MODEL_REFRESH_SECONDS * 1000);
 * if (!snapshot) return noModel(c);
 */
export class ModelCache {
  private live: LoadedModel | null = null;
  private shadow: LoadedModel | null = null;
  private kept = new Map<string, LoadedModel>();
  private pointer: ModelPointer | null = null;
  private checkedAt = Number.NEGATIVE_INFINITY;
  private refreshing: Promise<void> | null = null;
  private refreshingSince = 0;
  private loadFailures = 0;
  private shadowLoadFailures = 0;
  private lastFailure: LoadFailure | null = null;
  private loggedCauses = new Set<string>();

  /**
   * The models to score with, re-reading the pointer when it is older than `refreshMs`.
   * Concurrent callers share one refresh. Null only when no model has ever loaded here.
   */
  async snapshot(env: Pick<Env, "MODELS">, refreshMs: number, now: number = Date.now()): Promise<ModelSnapshot | null> {
    if (now - this.checkedAt >= refreshMs || this.live === null) {
      // Without a model, every request would otherwise hit KV; one attempt per second is enough.
      const due = this.live === null ? now - this.checkedAt >= Math.min(refreshMs, 1000) : true;
      // A load already under way (the first after an activation, say) is joined rather than
      // answered with "no model": otherwise the requests arriving while it reads and verifies the
      // artifact get a 503 that a moment later would have been scored.
      if (due || this.refreshing) await this.refresh(env, now);
    }
    return this.live ? { live: this.live, shadow: this.shadow } : null;
  }

  /**
   * The verified, compiled model of one version, from the versions kept in this isolate or else
   * from KV. Only finished loads are kept and shared: a load awaited across requests could hang
   * with the request that started it (see {@link ModelCache.refresh}).
   *
   * @throws {ModelLoadError} as {@link loadModel}.
   * @example const model = await modelCache.model(env, item.modelVersion);
   */
  async model(env: Pick<Env, "MODELS">, version: string): Promise<LoadedModel> {
    const known = this.kept.get(version);
    if (known) {
      // Refresh its place in the least-recently-used order.
      this.kept.delete(version);
      this.kept.set(version, known);
      return known;
    }
    const model = await loadModel(env, version);
    this.kept.set(version, model);
    if (this.kept.size > KEPT_VERSIONS) this.kept.delete(this.kept.keys().next().value as string);
    return model;
  }

  /** Forces the next {@link snapshot} to re-read the pointer (after an admin change here). */
  invalidate(): void {
    this.checkedAt = Number.NEGATIVE_INFINITY;
  }

  /** State for the health route. */
  status(): ModelCacheStatus {
    return {
      live: this.live ? { version: this.live.version, loadedAt: this.live.loadedAt } : null,
      shadow: this.shadow ? { version: this.shadow.version, loadedAt: this.shadow.loadedAt } : null,
      pointer: this.pointer ? { version: this.pointer.version, shadow: this.pointer.shadow } : null,
      lastCheckedAt: Number.isFinite(this.checkedAt) ? new Date(this.checkedAt).toISOString() : null,
      loadFailures: this.loadFailures,
      shadowLoadFailures: this.shadowLoadFailures,
      lastFailure: this.lastFailure,
    };
  }

  private async refresh(env: Pick<Env, "MODELS">, now: number): Promise<void> {
    // A shared refresh older than the wait below is abandoned: see the comment further down.
    if (this.refreshing && Date.now() - this.refreshingSince > SHARED_REFRESH_WAIT_MS) this.refreshing = null;
    if (!this.refreshing) {
      this.refreshingSince = Date.now();
      const attempt: Promise<void> = this.reload(env, now).finally(() => {
        if (this.refreshing === attempt) this.refreshing = null;
      });
      this.refreshing = attempt;
      return attempt;
    }
    // Another request's refresh. In workerd its KV I/O belongs to that request: if that request is
    // cancelled (its client went away), the promise never settles, and every request awaiting it
    // would hang until the runtime kills it (found by worker/test/fuzz-scoring.test.ts). So wait a
    // bounded time, then go on with the cached model.
    let timer: ReturnType<typeof setTimeout> | null = null;
    await Promise.race([this.refreshing, new Promise<void>((resolve) => (timer = setTimeout(resolve, SHARED_REFRESH_WAIT_MS)))]);
    if (timer !== null) clearTimeout(timer);
  }

  private async reload(env: Pick<Env, "MODELS">, now: number): Promise<void> {
    // Stamp first: a failing KV is retried after the interval, not on every request.
    this.checkedAt = now;
    let pointer: ModelPointer | null;
    try {
      pointer = await readPointer(env);
    } catch (error) {
      const code = error instanceof PointerFormatError ? "pointer-invalid" : "kv-read-failed";
      this.fail(new ModelLoadError(code, error instanceof PointerFormatError ? error.message : `reading the pointer from KV failed: ${describe(error)}`), false);
      return;
    }
    if (pointer === null) {
      if (this.live) this.fail(new ModelLoadError("pointer-missing", "pointer:active is absent from KV; keeping the last good model"), false);
      return;
    }
    this.pointer = pointer;
    if (this.live?.version !== pointer.version) {
      try {
        this.live = await this.model(env, pointer.version);
      } catch (error) {
        this.fail(asLoadError(error), false);
      }
    }
    const wanted = pointer.shadow;
    if (wanted === null) {
      this.shadow = null;
    } else if (this.shadow?.version !== wanted) {
      try {
        this.shadow = await this.model(env, wanted);
      } catch (error) {
        this.shadow = null;
        this.fail(asLoadError(error), true);
      }
    }
  }

  private fail(error: ModelLoadError, shadow: boolean): void {
    if (shadow) this.shadowLoadFailures++;
    else this.loadFailures++;
    this.lastFailure = { code: error.code, message: error.message, at: new Date().toISOString() };
    const cause = `${shadow ? "shadow" : "live"}:${error.code}:${error.message}`;
    if (this.loggedCauses.has(cause)) return;
    if (this.loggedCauses.size >= LOGGED_CAUSES) this.loggedCauses.clear();
    this.loggedCauses.add(cause);
    console.error(
      JSON.stringify({
        event: shadow ? "shadow-model-load-failed" : "model-load-failed",
        code: error.code,
        message: error.message,
        servingVersion: this.live?.version ?? null,
      }),
    );
  }
}

function asLoadError(error: unknown): ModelLoadError {
  return error instanceof ModelLoadError ? error : new ModelLoadError("artifact-invalid", `compiling the model failed: ${describe(error)}`);
}

function describe(error: unknown): string {
  return error instanceof Error ? error.message : String(error);
}

/** The isolate's cache (module scope: lives as long as the isolate). */
export const modelCache = new ModelCache();

/**
 * Makes a pointer change: writes it to KV and has this isolate re-read it on its next request
 * (other isolates follow within MODEL_REFRESH_SECONDS).
 *
 * @example await changePointer(env, activatedPointer(pointer, "m2", "ops-ana"));
 */
export async function changePointer(env: Pick<Env, "MODELS">, next: ModelPointer): Promise<void> {
  await writePointer(env, next);
  modelCache.invalidate();
}
