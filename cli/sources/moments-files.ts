/**
 * `isodense fit --moments result.csv --sample sample.csv`: finishes a fit whose moments and sample
 * were computed by the user's own SQL engine from the queries of `isodense sql`.
 */
import type { ModelArtifact } from "../../shared-model/src/artifact";
import type { FitOptions, FitReport, FitRow } from "../../shared-model/src/fit";
import { fitFromMoments, type MomentsResult } from "../../shared-model/src/fit-from-moments";
import { MomentsTableError, readMomentsTable, type MomentCell } from "../../shared-model/src/moments-table";
import { openCsvTable } from "../csv";
import { InputError } from "../errors";
import { openLedger, type LedgerRequest } from "../ledger";

/**
 * Reads the moments result and the sample (both CSV with a header row) and fits.
 * @throws InputError naming the result file, segment and column of a bad cell; CsvError for a bad
 *   sample cell; FitRefusal and FitInputError as `fitModel` does
 */
export async function fitFromMomentsFiles(
  momentsPath: string,
  samplePath: string,
  request: LedgerRequest,
  options: FitOptions,
): Promise<{ artifact: ModelArtifact; report: FitReport }> {
  const table = await openCsvTable(momentsPath);
  const records: Record<string, MomentCell>[] = [];
  for await (const record of table.rows) {
    records.push(Object.fromEntries(table.header.map((name, i) => [name, record.cells[i]])));
  }
  let result: MomentsResult;
  try {
    result = readMomentsTable(records, request.features);
  } catch (error) {
    if (error instanceof MomentsTableError) throw new InputError("--moments", error.rule, `--moments ${momentsPath}: ${error.message}`);
    throw error;
  }
  // The sample holds rows already without fraud; its label column, if any, is read and checked too.
  const ledger = await openLedger(samplePath, { ...request, idColumn: undefined });
  const rows: FitRow[] = [];
  for await (const row of ledger.rows) if (row.label !== "fraud") rows.push({ values: row.values, segment: row.segment });
  return fitFromMoments(result, { rows }, options);
}
