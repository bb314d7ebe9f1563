/**
 * One place that turns a failed command into a message and an exit code:
 * 0 done, 1 the data cannot support the model (diagnostics, each with its remedy),
 * 2 a usage or input mistake (named option, file, line and column), 3 an internal error.
 */
import { ArtifactError } from "../shared-model/src/artifact";
import { FitRefusal } from "../shared-model/src/diagnostics";
import { FeatureSpecError } from "../shared-model/src/features";
import { InputError } from "../shared-model/src/input-error";
import type { Diagnostic } from "../shared-model/src/types";
import { UsageError } from "./args";
import { writeLines, type CommandIO } from "./io";

/** Exit code: the command did what was asked. */
export const EXIT_OK = 0;
/** Exit code: the fit was refused by diagnostics; nothing was written. */
export const EXIT_REFUSED = 1;
/** Exit code: a usage or input mistake (option, file, line, column named). */
export const EXIT_USAGE = 2;
/** Exit code: an unexpected internal error. */
export const EXIT_INTERNAL = 3;

/**
 * A problem with something the user supplied (a file that is missing or is not JSON, a spec that
 * breaks a rule, an output path that cannot be written): the shared base of every input error,
 * re-exported here for the commands.
 */
export { InputError };

/**
 * Prints `error` for people on stderr and returns the exit code.
 * @param command the command as typed, e.g. `isodense fit`, used as the message prefix
 */
export function reportFailure(error: unknown, io: CommandIO, command: string): number {
  // Every input error (options, files, CSV cells, specs, artifacts, fit/score/tune inputs) is exit 2.
  if (error instanceof InputError) {
    writeLines(io.stderr, describeInputError(error, command));
    return EXIT_USAGE;
  }
  if (error instanceof FitRefusal) {
    const errors = error.diagnostics.filter((d) => d.severity === "error").length;
    writeLines(io.stderr, [
      `${command}: fit refused: ${errors} ${errors === 1 ? "problem" : "problems"} in the data; nothing was written`,
      ...error.diagnostics.filter((d) => d.severity !== "info").flatMap(describeDiagnostic),
    ]);
    return EXIT_REFUSED;
  }
  const detail = error instanceof Error ? (process.env.ISODENSE_DEBUG ? (error.stack ?? error.message) : error.message) : String(error);
  writeLines(io.stderr, [`${command}: internal error: ${detail}`, "(set ISODENSE_DEBUG=1 for the stack trace)"]);
  return EXIT_INTERNAL;
}

/** An input error as lines for people: the message, and what helps with this kind of mistake. */
function describeInputError(error: InputError, command: string): string[] {
  if (error instanceof UsageError) return [`${command}: ${error.message}`, `run '${command} --help' for usage`];
  if (error instanceof FeatureSpecError) return [`${command}: feature spec: ${error.message}`];
  if (error instanceof ArtifactError) return [`${command}: the model file was refused:`, ...error.problems.map((p) => `  ${p.path}: ${p.rule}`)];
  return [`${command}: ${error.message}`];
}

/** A diagnostic as indented lines: severity and message, then the equation and the remedy. */
export function describeDiagnostic(d: Diagnostic): string[] {
  const lines = [`  ${d.severity} (${d.code}): ${d.message}`];
  if (d.equation) lines.push(`    equation: ${d.equation}`);
  if (d.remedy) lines.push(`    remedy: ${d.remedy}`);
  return lines;
}
