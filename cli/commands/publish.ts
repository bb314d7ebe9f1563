/**
 * `isodense publish <model.json> --url <service URL> --token <admin token> [--activate]`: uploads a
 * model file to the scoring service (`POST /v1/models`) and, with `--activate`, makes it live
 * (`POST /v1/models/<version>/activate`). The file is verified locally first (the service verifies
 * it again), so a broken file fails here with every problem listed. Versions are immutable:
 * publishing the same file twice is harmless; other content under a published version is refused.
 */
import { formatHelp, parseArgs, stringOption, type CommandSpec } from "../args";
import { EXIT_INTERNAL, EXIT_OK, EXIT_REFUSED, reportFailure } from "../errors";
import { processIO, writeLines, type CommandIO } from "../io";
import { callService, refusal, ServiceRefusal, serviceToken, serviceUrl, TOKEN_ENV, UnreachableError } from "../service/client";
import { loadArtifact } from "./score";

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
    const target = { base, token: serviceToken(stringOption(args, "token")) };
    const file = args.positionals[0];
    const artifact = await loadArtifact(file);
    const upload = await callService(target, "POST", "/v1/models", artifact);
    if (upload.status === 201) writeLines(io.stdout, [`published ${artifact.version} (${artifact.checksum}) to ${base.origin}`]);
    else if (upload.status === 200) writeLines(io.stdout, [`${artifact.version} was already published with identical content`]);
    else throw refusal("upload", upload);
    if (args.options.get("activate") === true) {
      const activation = await callService(target, "POST", `/v1/models/${encodeURIComponent(artifact.version)}/activate`, {});
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
      writeLines(io.stderr, `isodense publish: ${error.message}`.split("\n"));
      return EXIT_REFUSED;
    }
    if (error instanceof UnreachableError) {
      writeLines(io.stderr, [`isodense publish: ${error.message}`]);
      return EXIT_INTERNAL;
    }
    return reportFailure(error, io, "isodense publish");
  }
}
