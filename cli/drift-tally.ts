/**
 * Counting payments on a model's reference buckets, as the scoring service counts its traffic:
 * each model column's transformed value and the d² fall in the buckets of the training deciles.
 * Shared by `isodense drift` and the ledger pass of `refit`/`renew`; the table comes from
 * `driftEntriesFor`, the weekly report's own function.
 */
import type { ModelArtifact } from "../shared-model/src/artifact";
import { bucketIndex, driftEntriesFor, type DriftEntry } from "../shared-model/src/drift";
import { transformInto } from "../shared-model/src/features";

/**
 * Bucket counts of the payments added so far against one model's reference.
 * @example
 * const tally = new DriftTally(live);
 * tally.add(row.values, scorer.score(row.values, row.segment).mahalanobisSq);
 * tally.entries(); // PSI per column and for the score
 */
export class DriftTally {
  readonly columns: number[][];
  readonly score: number[];
  payments = 0;
  private readonly x: Float64Array;

  constructor(private readonly artifact: ModelArtifact) {
    const { columnEdges, scoreEdges } = artifact.reference;
    this.columns = columnEdges.map((edges) => new Array<number>(edges.length + 1).fill(0));
    this.score = new Array<number>(scoreEdges.length + 1).fill(0);
    this.x = new Float64Array(artifact.columns.length);
  }

  /** Adds one payment: its raw feature values and its d² under the model. */
  add(raw: Float64Array, mahalanobisSq: number): void {
    const { columnEdges, scoreEdges } = this.artifact.reference;
    transformInto(this.artifact.features, raw, this.x);
    for (let j = 0; j < this.x.length; j++) this.columns[j][bucketIndex(columnEdges[j], this.x[j])]++;
    this.score[bucketIndex(scoreEdges, mahalanobisSq)]++;
    this.payments++;
  }

  /** The drift table of the payments added, against the training share of each bucket. */
  entries(): DriftEntry[] {
    return driftEntriesFor(this.artifact.reference, this.artifact.columns, { columns: this.columns, score: this.score });
  }
}
