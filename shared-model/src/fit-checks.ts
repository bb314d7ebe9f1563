/** The fit's input checks: options before reading, every row as it is read, every pass against the first. */
import { checkRawValue } from "./features";
import { FitInputError, type FitOptions, type FitRow } from "./fit-types";
import type { FeatureDeclaration } from "./types";

/**
 * Checks the fit options before any row is read.
 * @throws FitInputError naming the option and the rule
 */
export function checkOptions(options: FitOptions): void {
  if (!Array.isArray(options.features) || options.features.length === 0) {
    throw new FitInputError("features", "must list at least one feature");
  }
  const names = new Set<string>();
  for (const f of options.features) {
    if (names.has(f.name)) throw new FitInputError("features", `'${f.name}' is listed twice; list each feature once`);
    names.add(f.name);
  }
  if (!["full", "diagonal", "auto"].includes(options.shape)) {
    throw new FitInputError("shape", `must be full, diagonal or auto; got '${String(options.shape)}'`);
  }
  if (!["classical", "shrinkage", "robust"].includes(options.estimator)) {
    throw new FitInputError("estimator", `must be classical, shrinkage or robust; got '${String(options.estimator)}'`);
  }
  if (!(typeof options.cutoffRate === "number" && options.cutoffRate > 0 && options.cutoffRate < 1)) {
    throw new FitInputError("cutoffRate", `must be a number with 0 < rate < 1; got ${String(options.cutoffRate)}`);
  }
  if (options.supportFraction !== undefined && !(options.supportFraction >= 0.5 && options.supportFraction <= 1)) {
    throw new FitInputError("supportFraction", `must be between 0.5 and 1; got ${String(options.supportFraction)}`);
  }
  if (options.supportFraction !== undefined && options.estimator !== "robust") {
    throw new FitInputError("supportFraction", `applies to the robust estimator only; the estimator is '${options.estimator}'`);
  }
  if (options.seed !== undefined && !(Number.isSafeInteger(options.seed) && options.seed >= 0 && options.seed < Number.MAX_SAFE_INTEGER)) {
    throw new FitInputError("seed", `must be a whole number ≥ 0; got ${String(options.seed)}`);
  }
  if (options.minSegmentRows !== undefined && !(Number.isSafeInteger(options.minSegmentRows) && options.minSegmentRows >= 1)) {
    throw new FitInputError("minSegmentRows", `must be a whole number ≥ 1; got ${String(options.minSegmentRows)}`);
  }
  if (options.segmentBy !== null && !(typeof options.segmentBy === "string" && options.segmentBy !== "")) {
    throw new FitInputError("segmentBy", "must be a column name or null");
  }
  if (options.createdAt !== undefined && !/^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}(\.\d+)?(Z|[+-]\d{2}:\d{2})$/.test(options.createdAt)) {
    throw new FitInputError("createdAt", `must be an ISO-8601 date-time such as 2026-12-01T09:30:00Z; got '${options.createdAt}'`);
  }
  if (options.version !== undefined && !(typeof options.version === "string" && options.version.length > 0 && options.version.length <= 200)) {
    throw new FitInputError("version", "must be a non-empty string of at most 200 characters");
  }
}

/**
 * Checks one row: one raw value per feature, each inside its transform's domain.
 * @throws FitInputError naming the row (1-based) and the feature
 */
export function checkRow(row: FitRow, decls: readonly FeatureDeclaration[], rowNumber: number): void {
  if (row.values.length !== decls.length) {
    throw new FitInputError("values", `must hold one raw value per feature (${decls.length}); got ${row.values.length}`, rowNumber);
  }
  for (let j = 0; j < decls.length; j++) {
    const problem = checkRawValue(decls[j], row.values[j]);
    if (problem !== null) throw new FitInputError(decls[j].name, problem, rowNumber);
  }
}

/**
 * Every pass must yield the rows of the first one.
 * @throws FitInputError when a pass yielded a different number of rows
 */
export function checkSameRows(pass: string, seen: number, expected: number): void {
  if (seen !== expected) {
    throw new FitInputError(
      "source",
      `pass '${pass}' yielded ${seen} rows but the first pass yielded ${expected}; every pass must restart from the first row and yield the same rows`,
    );
  }
}

/**
 * Rows read and rows left out as fraud, from the options (read after the last pass, so a source
 * may count while it streams); defaults rows used + excluded, and 0.
 * @throws FitInputError when they are not whole numbers or do not add up
 */
export function trainingCounts(options: FitOptions, rowsUsed: number): { rowsRead: number; rowsExcludedAsFraud: number } {
  const rowsExcludedAsFraud = options.rowsExcludedAsFraud ?? 0;
  const rowsRead = options.rowsRead ?? rowsUsed + rowsExcludedAsFraud;
  if (!(Number.isSafeInteger(rowsExcludedAsFraud) && rowsExcludedAsFraud >= 0)) {
    throw new FitInputError("rowsExcludedAsFraud", `must be a whole number ≥ 0; got ${String(rowsExcludedAsFraud)}`);
  }
  if (!(Number.isSafeInteger(rowsRead) && rowsRead >= rowsUsed + rowsExcludedAsFraud)) {
    throw new FitInputError("rowsRead", `must be a whole number ≥ rows used + rows excluded as fraud (${rowsUsed + rowsExcludedAsFraud}); got ${String(rowsRead)}`);
  }
  return { rowsRead, rowsExcludedAsFraud };
}
