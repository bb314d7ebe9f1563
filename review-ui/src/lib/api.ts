/**
 * The one door to the review API. `send()` is private: it adds the credential, talks JSON and maps
 * every HTTP failure to an {@link ApiError} with a sentence an analyst can act on. The exported
 * functions are thin wrappers, one per route.
 */
import type {
  AccountDecision,
  AccountDecisionRequest,
  AccountFlags,
  ActionResult,
  DaySummary,
  DecisionRequest,
  EventPage,
  Facets,
  HistogramData,
  ItemDetail,
  ModelPageData,
  OperatingData,
  Outcome,
  PointerChange,
  PublishCutoffRequest,
  PublishedCutoff,
  QueuePage,
  ReviewState,
  Selection,
  ShadowData,
  ShadowRequest,
  SortDirection,
  SortKey,
  StateCounts,
  WhoAmI,
} from "@contract";

/** A failed call, already worded for the person at the keyboard. */
export class ApiError extends Error {
  constructor(
    readonly status: number,
    message: string,
    /** Machine-readable code from the body when the server sent one (e.g. `claimed-by-other`). */
    readonly code: string | null,
    /** The whole JSON body, for callers that need a detail such as the claim holder. */
    readonly body: unknown,
  ) {
    super(message);
    this.name = "ApiError";
  }
}

let credential: string | null = null;
let onUnauthorized: () => void = () => {};

/** Sets the bearer credential used for every call (null signs out). */
export function useCredential(token: string | null): void {
  credential = token;
}

/** Registers what to do when the server rejects the credential (the session signs out). */
export function whenUnauthorized(handler: () => void): void {
  onUnauthorized = handler;
}

type Query = Record<string, string | number | null | undefined>;

async function send<T>(method: "GET" | "POST" | "PUT", path: string, body?: unknown, query?: Query): Promise<T> {
  const url = new URL(path, window.location.origin);
  for (const [key, value] of Object.entries(query ?? {})) {
    if (value !== null && value !== undefined && value !== "") url.searchParams.set(key, String(value));
  }
  const headers: Record<string, string> = { accept: "application/json" };
  if (credential) headers.authorization = `Bearer ${credential}`;
  if (body !== undefined) headers["content-type"] = "application/json";
  let response: Response;
  try {
    response = await fetch(url, { method, headers, body: body === undefined ? undefined : JSON.stringify(body) });
  } catch {
    throw new ApiError(0, "Cannot reach the review service. Check the connection and try again.", null, null);
  }
  const text = await response.text();
  let parsed: unknown = null;
  try {
    parsed = text ? JSON.parse(text) : null;
  } catch {
    parsed = null;
  }
  if (response.ok) return parsed as T;
  throw failure(response.status, parsed);
}

/** Maps a failed response to one readable sentence; this is the only place that knows status codes. */
function failure(status: number, body: unknown): ApiError {
  const detail = describeBody(body);
  const code = errorCode(body);
  if (status === 401) {
    onUnauthorized();
    return new ApiError(status, "This credential was not accepted. Sign in again.", code, body);
  }
  if (status === 403) return new ApiError(status, detail ?? "Your role does not allow this.", code, body);
  if (status === 404) return new ApiError(status, detail ?? "Not found.", code, body);
  if (status === 409) return new ApiError(status, detail ?? "Someone else changed this item first.", code, body);
  if (status >= 400 && status < 500) return new ApiError(status, detail ?? `The request was refused (${status}).`, code, body);
  return new ApiError(status, `The review service failed (${status}). Try again in a moment.`, code, body);
}

/** Error answers are `ErrorBody` of the contract: `{ error: <code>, problems: [{ field, rule }] }`. */
function errorObject(body: unknown): Record<string, unknown> | null {
  return body && typeof body === "object" ? (body as Record<string, unknown>) : null;
}

function errorCode(body: unknown): string | null {
  if (body && typeof body === "object" && typeof (body as { error?: unknown }).error === "string") return (body as { error: string }).error;
  return null;
}

function describeBody(body: unknown): string | null {
  const error = errorObject(body);
  if (!error) return null;
  if (typeof error.message === "string") return error.message;
  const problems = Array.isArray(error.problems) ? error.problems : Array.isArray(error.errors) ? error.errors : null;
  if (problems && problems.length > 0) {
    return problems
      .map((p: { field?: string; path?: string; rule?: string; message?: string }) => `${p.field ?? p.path ?? "request"}: ${p.rule ?? p.message ?? "invalid"}`)
      .join("; ");
  }
  return null;
}

/** Filters and order of the queue list; empty strings mean "any". */
export interface ListQuery {
  state: ReviewState;
  segment: string;
  modelVersion: string;
  selection: Selection | "";
  from: string;
  to: string;
  sort: SortKey;
  direction: SortDirection;
  limit: number;
  cursor: string | null;
}

export const whoAmI = (): Promise<WhoAmI> => send("GET", "/v1/review/me");
export const listItems = (q: ListQuery): Promise<QueuePage> => send("GET", "/v1/review/items", undefined, { ...q });
export const countItems = (q: Omit<ListQuery, "state" | "sort" | "direction" | "limit" | "cursor">): Promise<StateCounts> =>
  send("GET", "/v1/review/counts", undefined, {
    segment: q.segment,
    modelVersion: q.modelVersion,
    selection: q.selection,
    from: q.from,
    to: q.to,
  });
export const getItem = (id: number): Promise<ItemDetail> => send("GET", `/v1/review/items/${id}`);
export const listEvents = (id: number, before: number, limit = 50): Promise<EventPage> => send("GET", `/v1/review/items/${id}/events`, undefined, { before, limit });
export const claimItem = (id: number): Promise<ActionResult> => send("POST", `/v1/review/items/${id}/claim`, {});
export const releaseItem = (id: number): Promise<ActionResult> => send("POST", `/v1/review/items/${id}/release`, {});
export const decideItem = (id: number, outcome: Outcome, note?: string): Promise<ActionResult> =>
  send("POST", `/v1/review/items/${id}/decision`, (note ? { outcome, note } : { outcome }) satisfies DecisionRequest);
export const undoDecision = (id: number): Promise<ActionResult> => send("POST", `/v1/review/items/${id}/undo`, {});
export const accountFlags = (id: number): Promise<AccountFlags> => send("GET", `/v1/review/items/${id}/account-flags`);
export const decideAccount = (id: number, ids: number[], outcome: Outcome, note?: string): Promise<AccountDecision> =>
  send("POST", `/v1/review/items/${id}/account-decision`, (note ? { ids, outcome, note } : { ids, outcome }) satisfies AccountDecisionRequest);
export const daySummary = (): Promise<DaySummary> => send("GET", "/v1/review/summary");
export const facets = (): Promise<Facets> => send("GET", "/v1/review/facets");

// The model page (`/v1/insights`, worker/src/routes/insights.ts); rollback is the models route.
export const modelPage = (): Promise<ModelPageData> => send("GET", "/v1/insights/model");
export const operatingTable = (version: string): Promise<OperatingData> => send("GET", "/v1/insights/operating", undefined, { version });
export const shadowComparison = (): Promise<ShadowData> => send("GET", "/v1/insights/shadow");
export const scoreHistogram = (): Promise<HistogramData> => send("GET", "/v1/insights/histogram");
export const publishCutoff = (body: PublishCutoffRequest): Promise<PublishedCutoff> => send("POST", "/v1/insights/publish-cutoff", body);
export const rollbackModel = (): Promise<PointerChange> => send("POST", "/v1/models/rollback", {});
/** Promotes the shadow: the audited activate of its version. */
export const activateModel = (version: string): Promise<PointerChange> => send("POST", `/v1/models/${encodeURIComponent(version)}/activate`, {});
/** Discards the shadow: the audited shadow-clear (the version stays stored). */
export const clearShadow = (): Promise<PointerChange> => send("PUT", "/v1/models/shadow", { version: null } satisfies ShadowRequest);
