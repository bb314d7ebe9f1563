/**
 * Talking to the scoring service from the CLI (`publish`, `renew`): the base URL and token checks,
 * one JSON call, and the two ways a call goes wrong — a refusal the service explains (exit 1) and a
 * service that cannot be reached or does not answer as the API does (exit 3).
 */
import { UsageError } from "../args";
import { InputError } from "../errors";

/** Environment variable read when `--token` is not given (keeps the token out of shell history). */
export const TOKEN_ENV = "ISODENSE_ADMIN_TOKEN";

/**
 * The service refused a call and said why (a credential it does not know, a version stored with
 * other content, no live model): an input error of the command's (exit 2), except where a command
 * reports refusals on their own (`publish`: exit 1).
 */
export class ServiceRefusal extends InputError {}

/** The service could not be reached, or answered something that is not the API (exit 3). */
export class UnreachableError extends Error {}

/** One answer: its status and its JSON body. */
export interface ServiceAnswer {
  status: number;
  body: unknown;
  path: string;
}

/** A service and the bearer token its calls carry. */
export interface ServiceTarget {
  base: URL;
  token: string;
}

/**
 * The service's base URL from `--url`.
 * @throws UsageError naming --url when it is missing or not an http(s) URL
 * @example serviceUrl("http://127.0.0.1:8787").origin // "http://127.0.0.1:8787"
 */
export function serviceUrl(raw: string | undefined): URL {
  if (raw === undefined) throw new UsageError("--url", "is required", "option --url is required: the service's base URL, e.g. http://127.0.0.1:8787");
  let url: URL;
  try {
    url = new URL(raw);
  } catch {
    throw new UsageError("--url", "not a URL", `option --url must be an http(s) URL; got '${raw}'`);
  }
  if (url.protocol !== "http:" && url.protocol !== "https:") {
    throw new UsageError("--url", "not http(s)", `option --url must be an http(s) URL; got '${raw}'`);
  }
  return url;
}

/**
 * The admin token from `--token`, else from the environment.
 * @throws UsageError naming --token when neither gives one
 */
export function serviceToken(raw: string | undefined): string {
  const token = raw ?? process.env[TOKEN_ENV];
  if (token === undefined || token === "") {
    throw new UsageError("--token", "is required", `option --token is required (or set ${TOKEN_ENV}): the admin bearer token`);
  }
  return token;
}

/**
 * Sends one call; the body is JSON when given. Answers whose body is text (the CSV export) come
 * back as the text itself.
 * @throws UnreachableError when the service cannot be reached or answers with something that is not JSON (unless `text`)
 */
export async function callService(target: ServiceTarget, method: string, path: string, body?: unknown, options: { text?: boolean } = {}): Promise<ServiceAnswer> {
  const { base, token } = target;
  const url = new URL(path.replace(/^\//, ""), base.href.endsWith("/") ? base.href : `${base.href}/`);
  let response: Response;
  try {
    response = await fetch(url, {
      method,
      headers: { ...(body === undefined ? {} : { "content-type": "application/json" }), authorization: `Bearer ${token}` },
      body: body === undefined ? undefined : JSON.stringify(body),
    });
  } catch (error) {
    const cause = (error as { cause?: { code?: string; message?: string } }).cause;
    throw new UnreachableError(`cannot reach ${url.origin}: ${cause?.code ?? cause?.message ?? (error as Error).message}`);
  }
  const text = await response.text();
  if (options.text && response.status === 200) return { status: response.status, body: text, path };
  try {
    return { status: response.status, body: JSON.parse(text) as unknown, path };
  } catch {
    throw new UnreachableError(`${method} ${url.pathname} answered ${response.status} with a body that is not JSON: ${text.slice(0, 200)}`);
  }
}

/**
 * The error for an answer that refused a step: the service's problems as lines, with a hint for
 * the common refusals; a 5xx or an answer without the API's error shape is "unreachable".
 * @param step what was asked, e.g. `upload`
 */
export function refusal(step: string, answer: ServiceAnswer): Error {
  const body = answer.body as { error?: string; problems?: { field: string; rule: string }[] };
  if (answer.status >= 500 || typeof body.error !== "string") {
    return new UnreachableError(`${step} failed: the service answered ${answer.status}${body.error ? ` (${body.error})` : ""}`);
  }
  const hint =
    answer.status === 401
      ? "the token is not a known credential"
      : answer.status === 403
        ? "the token does not belong to an admin"
        : answer.status === 409 && body.error === "version-exists"
          ? "versions are immutable: publish the new content under a new version (isodense fit derives the version from the content)"
          : null;
  return new ServiceRefusal(
    answer.status === 401 || answer.status === 403 ? "--token" : answer.path,
    `${answer.status} ${body.error}`,
    [`${step} refused: ${answer.status} ${body.error}`, ...(body.problems ?? []).slice(0, 20).map((p) => `  ${p.field}: ${p.rule}`), ...(hint ? [`  (${hint})`] : [])].join("\n"),
  );
}
