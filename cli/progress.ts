/**
 * Progress line for long passes over a ledger, drawn on stderr only when stderr is a terminal, so
 * piped or logged output stays clean. Redraws at most every `intervalMs` to keep the cost of
 * reporting negligible next to the pass itself.
 */
import { formatCount } from "./numbers";

/** The part of a terminal stream the progress line needs (process.stderr satisfies it). */
export interface ProgressStream {
  isTTY?: boolean;
  columns?: number;
  write(text: string): unknown;
}

/** Receives progress reports and finishes the line when the work is done. */
export interface Progress {
  /** Reports that `rows` rows of pass `pass` are done. */
  update(pass: string, rows: number): void;
  /** Clears the progress line (call before printing the report). */
  done(): void;
}

/** Options for {@link createProgress}. */
export interface ProgressOptions {
  /** Minimum milliseconds between redraws (default 100). */
  intervalMs?: number;
  /** Clock in milliseconds; injectable so redraw throttling is testable. */
  now?: () => number;
}

const BAR_WIDTH = 24;

/**
 * Creates a progress line on `stream`. When the stream is not a TTY every call is a no-op.
 *
 * The first pass counts the rows; later passes show a bar and a percentage of that count.
 * @example
 * const progress = createProgress(process.stderr);
 * progress.update("moments", 120_000); progress.done();
 */
export function createProgress(stream: ProgressStream, options: ProgressOptions = {}): Progress {
  if (!stream.isTTY) return { update() {}, done() {} };
  const interval = options.intervalMs ?? 100;
  const now = options.now ?? Date.now;
  let total = 0;
  let currentPass = "";
  let passIndex = 0;
  let lastDraw = -Infinity;
  let drawn = false;

  // One column short of the terminal so the cursor never wraps; 80 when the width is unknown (0).
  function lineWidth(): number {
    const columns = stream.columns !== undefined && stream.columns > 0 ? stream.columns : 80;
    return Math.max(20, columns - 1);
  }

  function draw(pass: string, rows: number): void {
    let text = `pass ${passIndex} (${pass}) ${formatCount(rows)} rows`;
    if (total > 0 && passIndex > 1) {
      const fraction = Math.min(1, rows / total);
      const filled = Math.round(fraction * BAR_WIDTH);
      text = `pass ${passIndex} (${pass}) [${"#".repeat(filled)}${"-".repeat(BAR_WIDTH - filled)}] ${Math.floor(fraction * 100)
        .toString()
        .padStart(3)} %  ${formatCount(rows)} of ${formatCount(total)} rows`;
    }
    const width = lineWidth();
    stream.write(`\r${text.slice(0, width).padEnd(width)}`);
    drawn = true;
  }

  return {
    update(pass: string, rows: number): void {
      if (pass !== currentPass) {
        currentPass = pass;
        passIndex++;
        lastDraw = -Infinity;
      }
      if (passIndex === 1) total = Math.max(total, rows);
      const t = now();
      if (t - lastDraw < interval) return;
      lastDraw = t;
      draw(pass, rows);
    },
    done(): void {
      if (!drawn) return;
      stream.write(`\r${" ".repeat(lineWidth())}\r`);
      drawn = false;
    },
  };
}
