/**
 * One place that turns a failed command into a message and an exit code:
 * 0 done, 1 the data cannot support the model (diagnostics, each with its remedy),
 * 2 a usage or input mistake (named option, file, line and column), 3 an internal error.
 */
import { ArtifactError } from "../shared-model/src/artifact";
import { FitRefusal } from "../shared-model/src/diagnostics";
import { FeatureSpecError } from "../shared-model/src/features";
import { FitInputError } from "../shared-model/src/fit";
import type { Diagnostic } from "../shared-model/src/types";
import { UsageError } from "./args";
import { CsvError } from "./csv";
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
 * A problem with something the user supplied that is not a CSV cell: a file that is missing or is
 * not JSON, a spec that breaks a rule, an output path that cannot be written.
 */
export class InputError extends Error {
  /** The option or file at fault, e.g. `--spec` or `model.json`. */
  readonly field: string;
  readonly rule: string;
  constructor(field: string, rule: string, message?: string) {
    super(message ?? `${field}: ${rule}`);
    this.name = "InputError";
    this.field = field;
    this.rule = rule;
  }
}

/**
 * Prints `error` for people on stderr and returns the exit code.
 * @param command the command as typed, e.g. `isodense fit`, used as the message prefix
 */
export function reportFailure(error: unknown, io: CommandIO, command: string): number {
  if (error instanceof UsageError) {
    writeLines(io.stderr, [`${command}: ${error.message}`, `run '${command} --help' for usage`]);
    return EXIT_USAGE;
  }
  if (error instanceof CsvError || error instanceof InputError || error instanceof FitInputError) {
    writeLines(io.stderr, [`${command}: ${error.message}`]);
    return EXIT_USAGE;
  }
  if (error instanceof FeatureSpecError) {
    writeLines(io.stderr, [`${command}: feature spec: ${error.message}`]);
    return EXIT_USAGE;
  }
  if (error instanceof ArtifactError) {
    writeLines(io.stderr, [`${command}: the model file was refused:`, ...error.problems.map((p) => `  ${p.path}: ${p.rule}`)]);
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
  const detail = error instanceof Error ? (process.env.ISODENSE_DEBUG ? error.stack ?? error.message : error.message) : String(error);
  writeLines(io.stderr, [`${command}: internal error: ${detail}`, "(set ISODENSE_DEBUG=1 for the stack trace)"]);
  return EXIT_INTERNAL;
}

/** A diagnostic as indented lines: severity and message, then the equation and the remedy. */
export function describeDiagnostic(d: Diagnostic): string[] {
  const lines = [`  ${d.severity} (${d.code}): ${d.message}`];
  if (d.equation) lines.push(`    equation: ${d.equation}`);
  if (d.remedy) lines.push(`    remedy: ${d.remedy}`);
  return lines;
}
