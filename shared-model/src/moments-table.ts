/**
 * Reading the result of `momentsQuery` (one row per segment, `*` pooled), whatever engine ran it
 * and however it travelled (a CSV export, a driver's rows), into moment accumulators that
 * `fitFromMoments` finishes. Every cell is checked; problems name the segment and the column.
 */
import { modelColumns } from "./features";
import type { MomentsResult } from "./fit-from-moments";
import { MomentAccumulator } from "./moments";
import { MOMENT_COLUMNS as C, POOLED_SEGMENT } from "./sql-moments";
import type { FeatureDeclaration } from "./types";

/** A cell as it comes: text from a CSV file, a number or bigint from a driver, or missing. */
export type MomentCell = string | number | bigint | null | undefined;

/** A problem in a moments result, naming the segment row and the column. */
export class MomentsTableError extends Error {
  constructor(
    readonly segment: string | null,
    readonly column: string,
    readonly rule: string,
  ) {
    super(`${segment === null ? "" : `segment '${segment}', `}column '${column}': ${rule}`);
    this.name = "MomentsTableError";
  }
}

/** Domain rules the query counts, by transform, for the refusal message. */
const DOMAIN: Record<string, string> = {
  log: "a finite number > 0 (log transform)",
  log1p: "a finite number > -1 (log1p transform)",
  "cyclic-hour": "an hour of day in [0, 24) (cyclic-hour transform)",
  none: "a finite number",
  "yeo-johnson": "a finite number",
};

/**
 * Reads the rows of a moments result.
 * @param records one object per result row, keyed by column name (names compared case-insensitively:
 *   some engines fold unquoted aliases to upper or lower case)
 * @param features the declarations the query was written for, in the same order
 * @throws MomentsTableError for a missing column, a cell that is not a number, a segment listed
 *   twice, no pooled row, or rows that broke a domain rule or carried an unknown label
 * @example readMomentsTable(rowsFromCsv, spec.features)
 */
export function readMomentsTable(records: readonly Record<string, MomentCell>[], features: readonly FeatureDeclaration[]): MomentsResult {
  const n = modelColumns(features).length;
  const k = features.length;
  const moments = new Map<string, MomentAccumulator>();
  const pooled = new MomentAccumulator(n);
  const invalid = new Array<number>(k).fill(0);
  const observedMin = new Array<number>(k).fill(Infinity);
  const observedMax = new Array<number>(k).fill(-Infinity);
  const lambdas: (number | undefined)[] = features.map(() => undefined);
  let invalidLabels = 0;
  let fraudRows = 0;
  let unsegmented = 0;
  if (records.length === 0) throw new MomentsTableError(null, C.segment, "the result has no rows; is this the result of isodense sql moments?");
  for (const original of records) {
    const record = lowerKeys(original);
    if (!(C.segment in record)) throw new MomentsTableError(null, C.segment, "is missing; is this the result of isodense sql moments?");
    const segmentCell = record[C.segment];
    const segment = segmentCell === null || segmentCell === undefined || String(segmentCell) === "" ? null : String(segmentCell);
    if (segment === POOLED_SEGMENT) throw new MomentsTableError(segment, C.segment, "'*' is reserved for the pooled model and cannot be a segment value");
    if (segment === null ? unsegmented++ > 0 : moments.has(segment)) {
      throw new MomentsTableError(segment, C.segment, "appears twice; each segment value must have one row");
    }
    const where = segment ?? "(none)";
    const cell = (column: string) => numberCell(record, where, column);
    const rows = cell(C.rows);
    if (!Number.isSafeInteger(rows) || rows < 0) throw new MomentsTableError(where, C.rows, `must be a whole number ≥ 0; got ${rows}`);
    const mean = new Array<number>(n).fill(0);
    const comoment = new Array<number>(n * n).fill(0);
    if (rows > 0) {
      for (let i = 0; i < n; i++) {
        mean[i] = cell(C.mean(i));
        for (let j = i; j < n; j++) {
          const c = cell(C.covariance(i, j)) * rows;
          comoment[i * n + j] = c;
          comoment[j * n + i] = c;
        }
      }
      features.forEach((_, j) => {
        observedMin[j] = Math.min(observedMin[j], cell(C.min(j)));
        observedMax[j] = Math.max(observedMax[j], cell(C.max(j)));
      });
    }
    const accumulator = MomentAccumulator.fromJSON({ n, count: rows, mean, comoment });
    // The pooled model is the exact merge of the segments' moments (Chan, Golub & LeVeque 1979).
    pooled.merge(accumulator);
    if (segment !== null) moments.set(segment, accumulator);
    features.forEach((f, j) => {
      invalid[j] += cell(C.invalid(j));
      if (f.transform === "yeo-johnson") {
        const lambda = cell(C.lambda(j));
        if (lambdas[j] !== undefined && lambdas[j] !== lambda) throw new MomentsTableError(where, C.lambda(j), "differs between rows; run one query");
        lambdas[j] = lambda;
      }
    });
    invalidLabels += cell(C.invalidLabels);
    fraudRows += cell(C.fraudRows);
  }
  const problems: string[] = [];
  features.forEach((f, j) => {
    if (invalid[j] > 0) problems.push(`${invalid[j]} rows of ${f.name} are not ${DOMAIN[f.transform] ?? "valid"}`);
  });
  if (invalidLabels > 0) problems.push(`${invalidLabels} rows carry a label other than fraud, legitimate, 1, 0 or empty`);
  if (problems.length > 0) {
    throw new MomentsTableError(null, "invalid", `the source has rows the fit cannot use: ${problems.join("; ")}; correct or filter them at the source and run the query again`);
  }
  moments.set(POOLED_SEGMENT, pooled);
  return { moments, observedMin, observedMax, lambdas, fraudRows };
}

function lowerKeys(record: Record<string, MomentCell>): Record<string, MomentCell> {
  const out: Record<string, MomentCell> = {};
  for (const [key, value] of Object.entries(record)) out[key.toLowerCase()] = value;
  return out;
}

/** A finite number from a cell: text in plain decimal or exponent form, a number, or a bigint. */
function numberCell(record: Record<string, MomentCell>, segment: string, column: string): number {
  if (!(column in record)) throw new MomentsTableError(segment, column, "is missing; is this the result of isodense sql moments for the same features?");
  const cell = record[column];
  let value: number;
  if (typeof cell === "number") value = cell;
  else if (typeof cell === "bigint") value = Number(cell);
  else if (typeof cell === "string" && /^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$/.test(cell.trim())) value = Number(cell.trim());
  else throw new MomentsTableError(segment, column, `must be a finite number; got ${cell === null || cell === undefined || cell === "" ? "an empty cell" : `'${String(cell)}'`}`);
  if (!Number.isFinite(value)) throw new MomentsTableError(segment, column, `must be a finite number; got ${String(cell)}`);
  return value;
}
