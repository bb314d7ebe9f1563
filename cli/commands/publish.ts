/**
 * `isodense publish <model.json> --url <service URL> --token <admin token> [--activate]`: uploads a
 * model file to the scoring service (`POST /v1/models`) and, with `--activate`, makes it live
 * (`POST /v1/models/<version>/activate`). The file is verified locally first (the service verifies
 * it again), so a broken file fails here with every problem listed. Versions are immutable:
 * publishing the same file twice is harmless; other content under a published version is refused.
 */
import { formatHelp, parseArgs, stringOption, UsageError, type CommandSpec } from "../args";
import { EXIT_INTERNAL, EXIT_OK, EXIT_REFUSED, reportFailure } from "../errors";
import { processIO, writeLines, type CommandIO } from "../io";
import { loadArtifact } from "./score";

/** Environment variable read when `--token` is not given (keeps the token out of shell history). */
export const TOKEN_ENV = "ISODENSE_ADMIN_TOKEN";

/** Command line of `isodense publish`. */
export const publishSpec: CommandSpec = {
  command: "isodense publish",
  summary: "Uploads a model file to the scoring service and, with --activate, makes it the live model.",
  positionals: [{ name: "model.json", description: "model file written by isodense fit" }],
  options: [
    { name: "url", kind: "string", valueName: "url", description: "base URL of the service, e.g. http://127.0.0.1:8787 (required)" },
    { name: "token", kind: "string", valueName: "token", description: `admin bearer token`, defaultText: `$${TOKEN_ENV}` },
    { name: "activate", kind: "switch", description: "make the uploaded version live (the previous one stays available for rollback)" },
  ],
  notes: [
    "Exit codes: 0 published (and activated); 1 refused by the service (version stored with other content, artifact",
    "refused, credential refused); 2 usage or input error (including a model file that fails verification);",
    "3 the service could not be reached or answered unexpectedly.",
  ],
};

/** An answer of the service that the command reports as a refusal (exit 1). */
class ServiceRefusal extends Error {}

/**
 * Runs `isodense publish` with the words after `publish`.
 *
 * @returns the exit code
 * @example await publishCommand(["model.json", "--url", "http://127.0.0.1:8787", "--token", token, "--activate"]) // 0
 */
export async function publishCommand(argv: string[], io: CommandIO = processIO()): Promise<number> {
  try {
    const args = parseArgs(argv, publishSpec);
    if (args.help) {
      io.stdout.write(formatHelp(publishSpec));
      return EXIT_OK;
    }
    const base = serviceUrl(stringOption(args, "url"));
    const token = stringOption(args, "token") ?? process.env[TOKEN_ENV];
    if (token === undefined || token === "") {
      throw new UsageError("--token", "is required", `option --token is required (or set ${TOKEN_ENV}): the admin bearer token`);
    }
    const file = args.positionals[0];
    const artifact = await loadArtifact(file);
    const upload = await send(base, "POST", "/v1/models", token, artifact);
    if (upload.status === 201) writeLines(io.stdout, [`published ${artifact.version} (${artifact.checksum}) to ${base.origin}`]);
    else if (upload.status === 200) writeLines(io.stdout, [`${artifact.version} was already published with identical content`]);
    else throw refusal("upload", upload);
    if (args.options.get("activate") === true) {
      const activation = await send(base, "POST", `/v1/models/${encodeURIComponent(artifact.version)}/activate`, token, {});
      if (activation.status !== 200) throw refusal("activation", activation);
      const pointer = (activation.body as { pointer?: { version: string; previous: string[] }; changed?: boolean }).pointer;
      const before = pointer?.previous?.[0];
      writeLines(io.stdout, [
        (activation.body as { changed?: boolean }).changed === false
          ? `${artifact.version} is already the live model`
          : `activated ${artifact.version}${before ? ` (previous live version ${before} stays available for rollback)` : ""}`,
      ]);
    }
    return EXIT_OK;
  } catch (error) {
    if (error instanceof ServiceRefusal) {
      writeLines(io.stderr, error.message.split("\n"));
      return EXIT_REFUSED;
    }
    if (error instanceof UnreachableError) {
      writeLines(io.stderr, [`isodense publish: ${error.message}`]);
      return EXIT_INTERNAL;
    }
    return reportFailure(error, io, "isodense publish");
  }
}

/** The service could not be reached, or answered something that is not the API. */
class UnreachableError extends Error {}

function serviceUrl(raw: string | undefined): URL {
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

interface ServiceAnswer {
  status: number;
  body: unknown;
  path: string;
}

async function send(base: URL, method: string, path: string, token: string, body: unknown): Promise<ServiceAnswer> {
  const url = new URL(path.replace(/^\//, ""), base.href.endsWith("/") ? base.href : `${base.href}/`);
  let response: Response;
  try {
    response = await fetch(url, {
      method,
      headers: { "content-type": "application/json", authorization: `Bearer ${token}` },
      body: JSON.stringify(body),
    });
  } catch (error) {
    const cause = (error as { cause?: { code?: string; message?: string } }).cause;
    throw new UnreachableError(`cannot reach ${url.origin}: ${cause?.code ?? cause?.message ?? (error as Error).message}`);
  }
  const text = await response.text();
  try {
    return { status: response.status, body: JSON.parse(text) as unknown, path };
  } catch {
    throw new UnreachableError(`${method} ${url.pathname} answered ${response.status} with a body that is not JSON: ${text.slice(0, 200)}`);
  }
}

function refusal(step: string, answer: ServiceAnswer): Error {
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
    [
      `isodense publish: ${step} refused: ${answer.status} ${body.error}`,
      ...(body.problems ?? []).slice(0, 20).map((p) => `  ${p.field}: ${p.rule}`),
      ...(hint ? [`  (${hint})`] : []),
    ].join("\n"),
  );
}
