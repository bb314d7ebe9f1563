/**
 * Where a command writes: its report on stdout, errors and progress on stderr. Commands take an
 * `CommandIO` so tests can run them in-process and read what they printed.
 */
import type { ProgressStream } from "./progress";

/** Output streams of a command. */
export interface CommandIO {
  /** Results and reports. */
  stdout: { write(text: string): unknown };
  /** Errors, warnings and the progress line (drawn only when this is a TTY). */
  stderr: ProgressStream;
}

/** The process's own streams. */
export function processIO(): CommandIO {
  return { stdout: process.stdout, stderr: process.stderr };
}

/** Writes lines (each followed by a newline) to a stream. */
export function writeLines(stream: { write(text: string): unknown }, lines: readonly string[]): void {
  if (lines.length > 0) stream.write(lines.join("\n") + "\n");
}
