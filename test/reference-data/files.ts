/**
 * Where the tests find the reference data: published datasets, handbook tables and results of
 * general-purpose libraries, kept in this folder with their sources (SOURCES.md), the original files
 * they were converted from (provenance/) and the scripts that recompute and re-check them (scripts/).
 * Tests read these files only through here, so the suite reads nothing outside the repository.
 */
import { readFileSync } from "node:fs";
import { fileURLToPath } from "node:url";

/**
 * Absolute path of one reference file.
 * @example referenceDataPath("iris.csv") // → "/…/test/reference-data/iris.csv"
 */
export function referenceDataPath(file: string): string {
  return fileURLToPath(new URL(file, import.meta.url));
}

/**
 * Text of one reference file (UTF-8).
 * @example JSON.parse(readReferenceData("expected-values.json")).iris_setosa
 */
export function readReferenceData(file: string): string {
  return readFileSync(referenceDataPath(file), "utf8");
}
