/**
 * The demo ledger's payments as the scoring API's `features` form: each row's feature values by the
 * live model's names, read from the ledger's feature columns when it has them, else derived from
 * the payment records with the record spec (the code `isodense derive` and the edge run), in
 * ledger order so every account's history builds up as it did at the shop.
 */
import { readFileSync } from "node:fs";
import { parseRecordSpec, derivesFromRecords } from "../shared-model/src/records/spec";
import { openCsvTable } from "../cli/csv";
import { RecordDeriver } from "../cli/records";

/** One ledger row with the model's features. */
export interface LedgerPayment {
  /** The row's cell under a column name ("" when the ledger lacks the column). */
  cell(name: string): string;
  /** Raw feature values by the model's feature names. */
  features: Record<string, number>;
}

/**
 * Streams the ledger's rows with their features.
 * @param ledgerPath the ledger CSV (payment records, or rows with the feature columns)
 * @param featureNames the live model's features, in order
 * @param specPath the record spec that derives them (used when the ledger lacks a feature column)
 * @throws Error when the spec's features are not the model's, or (CsvError) a row breaks a rule
 */
export async function* ledgerPayments(ledgerPath: string, featureNames: readonly string[], specPath: string): AsyncGenerator<LedgerPayment> {
  const table = await openCsvTable(ledgerPath);
  try {
    const at = new Map(table.header.map((name, i) => [name, i]));
    let deriver: RecordDeriver | null = null;
    if (featureNames.some((name) => !at.has(name))) {
      const spec = parseRecordSpec(JSON.parse(readFileSync(specPath, "utf8")));
      const specNames = spec.features.map((f) => f.name);
      if (!derivesFromRecords(spec) || specNames.join(",") !== featureNames.join(",")) {
        throw new Error(
          `${ledgerPath} lacks the live model's feature columns, and ${specPath} does not derive them (it gives ${specNames.join(", ")}; the model has ${featureNames.join(", ")})`,
        );
      }
      deriver = new RecordDeriver(spec, table.file, table.header);
    }
    const values = new Float64Array(featureNames.length);
    for await (const row of table.rows) {
      const cells = row.cells;
      if (deriver !== null) deriver.derive(cells, row.line, values);
      else featureNames.forEach((name, j) => (values[j] = Number(cells[at.get(name)!])));
      yield {
        cell: (name) => {
          const i = at.get(name);
          return i === undefined ? "" : cells[i];
        },
        features: Object.fromEntries(featureNames.map((name, j) => [name, values[j]])),
      };
    }
  } finally {
    await table.rows.return(undefined);
  }
}
