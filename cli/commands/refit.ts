/**
 * `isodense refit <ledger> --labels labels.csv --model live.json --out candidate.json`: the
 * weekly refit. Fits a candidate with the live model's spec (features and transforms, covariance
 * shape, estimator, segments, flag rate of the cutoff) on the ledger of the training window,
 * leaving out every payment confirmed as fraud in the labels (joined by id) or labelled fraud in
 * the ledger itself, and keeping dismissed flags as normal traffic. Then backtests the live model
 * and the candidate on the labelled set (PR-AUC, recall at the live flag rate, flag overlap) and
 * writes the candidate. Publishing stays a separate, explicit step (`isodense publish`).
 */
import { basename, resolve } from "node:path";
import type { ModelArtifact } from "../../shared-model/src/artifact";
import { FitRefusal } from "../../shared-model/src/diagnostics";
import { fitModel, type FitReport, type FitRow, type RowSource } from "../../shared-model/src/fit";
import { compileModel, Scorer } from "../../shared-model/src/score";
import { operatingPoints, pointAtCutoff, pointAtFlagRate, type OperatingPoint, type OperatingTable } from "../../shared-model/src/tuning";
import type { Diagnostic, FeatureDeclaration } from "../../shared-model/src/types";
import { formatHelp, numberOption, parseArgs, stringOption, UsageError, type CommandSpec } from "../args";
import { EXIT_OK, InputError, reportFailure } from "../errors";
import { DriftTally } from "../drift-tally";
import { checkOutputPath, writeFileAtomic } from "../files";
import { processIO, writeLines, type CommandIO } from "../io";
import { EXPORT_SEGMENT_COLUMN, readLabels, type LabelSet } from "../labels";
import { openLedger, type LedgerRequest } from "../ledger";
import { StagedRowSource } from "../sources/row-stage";
import { type DataSource, resolveSource, SOURCE_KINDS_TEXT, SOURCE_OPTIONS, sourceFromArgs } from "../sources/source";
import { recordsOfModel } from "../records";
import { recordSpecFromArtifact } from "../../shared-model/src/records/artifact-spec";
import { formatCount, formatForPeople, formatPercent } from "../numbers";
import { createProgress } from "../progress";
import { loadArtifact } from "./score";
import { scoreLabels } from "./tune";

/** Command line of `isodense refit`. */
export const refitSpec: CommandSpec = {
  command: "isodense refit",
  summary:
    "Fits a candidate model with the live model's spec on a ledger, leaving out payments confirmed as fraud in the labels " +
    "(joined by id) or labelled fraud in the ledger and keeping dismissed flags as normal; backtests live and candidate on " +
    "the labels (PR-AUC, recall at the live flag rate, flag overlap) and writes the candidate. It does not publish it.",
  positionals: [{ name: "ledger", description: `payments of the training window, with an id column: ${SOURCE_KINDS_TEXT}` }],
  options: [
    ...SOURCE_OPTIONS,
    { name: "labels", kind: "string", valueName: "labels.csv", description: "the labelled set (review export), a .csv or .parquet file (required)" },
    { name: "model", kind: "string", valueName: "live.json", description: "the live model whose spec the candidate copies (required)" },
    { name: "out", kind: "string", valueName: "candidate.json", description: "where to write the candidate (required)" },
    { name: "id-column", kind: "string", valueName: "column", description: "payment id column of the ledger", defaultText: "id if present" },
    { name: "label-column", kind: "string", valueName: "column", description: "label column of the ledger (fraud rows are left out)", defaultText: "label if present" },
    { name: "labels-id-column", kind: "string", valueName: "column", description: "payment id column of the labels", defaultText: "transactionId, else id" },
    { name: "labels-label-column", kind: "string", valueName: "column", description: "outcome column of the labels", defaultText: "outcome" },
    { name: "weight-column", kind: "string", valueName: "column", description: "1 / inclusion probability in the labels", defaultText: "weight if present, else 1" },
    {
      name: "cutoff-rate",
      kind: "number",
      valueName: "rate",
      greaterThan: 0,
      lessThan: 1,
      description: "share of training rows the candidate's cutoff flags",
      defaultText: "the live flag rate, or the share the live cutoff flags",
    },
    {
      name: "seed",
      kind: "integer",
      valueName: "N",
      min: 0,
      max: 2 ** 32 - 1,
      description: "seed for sampling and the robust fit",
      defaultText: "the live model's robust seed, else 1",
    },
  ],
  notes: [
    "Exit codes: 0 written; 1 fit refused by diagnostics (nothing written); 2 usage or input error.",
    "The candidate is not live: review the comparison, then publish it with 'isodense publish <candidate.json> --activate'.",
  ],
};

/** What the refit source counted in its last complete pass. */
export interface RefitCounts {
  rowsRead: number;
  /** Rows whose id is confirmed fraud in the labels. */
  excludedConfirmedFraud: number;
  /** Rows labelled fraud in the ledger (and not already counted as confirmed in the labels). */
  excludedLedgerFraud: number;
  /** Rows whose id was reviewed as legitimate in the labels (dismissed flags, audit draws), kept as normal traffic. */
  dismissedKept: number;
  /** Rows outside the training window (only when a window is given). */
  outsideWindow: number;
  rowsUsed: number;
}

/** A training window: payments with `fromMs < time ≤ toMs` (epoch milliseconds). */
export interface TimeWindow {
  fromMs: number;
  toMs: number;
}

/**
 * The ledger as the fit's row source, without confirmed fraud: each `pass()` re-reads the file and
 * skips rows whose id is in `confirmedFraud` or whose own label is fraud; `counts` holds the
 * numbers of the last complete pass.
 * @throws CsvError (from the ledger reader) naming file, line and column of a bad cell
 * @example const source = new RefitRowSource("ledger.csv", { features, idColumn: "paymentId" }, new Set(["pay-7"]), new Set());
 */
export class RefitRowSource implements RowSource {
  counts: RefitCounts = { rowsRead: 0, excludedConfirmedFraud: 0, excludedLedgerFraud: 0, dismissedKept: 0, outsideWindow: 0, rowsUsed: 0 };
  /** Confirmed-fraud ids seen in the ledger during the last complete pass. */
  confirmedFound = new Set<string>();

  constructor(
    private readonly path: string | DataSource,
    private readonly request: LedgerRequest,
    private readonly confirmedFraud: ReadonlySet<string>,
    private readonly dismissed: ReadonlySet<string>,
    private readonly window: TimeWindow | null = null,
  ) {}

  async *pass(): AsyncGenerator<FitRow, void, undefined> {
    const ledger = await openLedger(this.path, this.request);
    const counts: RefitCounts = { rowsRead: 0, excludedConfirmedFraud: 0, excludedLedgerFraud: 0, dismissedKept: 0, outsideWindow: 0, rowsUsed: 0 };
    const found = new Set<string>();
    const window = this.window;
    try {
      for await (const row of ledger.rows) {
        counts.rowsRead++;
        // A records ledger is read from its first row even so: earlier payments build the histories.
        if (window !== null && !(row.timeMs > window.fromMs && row.timeMs <= window.toMs)) {
          counts.outsideWindow++;
          continue;
        }
        if (this.confirmedFraud.has(row.id)) {
          counts.excludedConfirmedFraud++;
          found.add(row.id);
          continue;
        }
        if (row.label === "fraud") {
          counts.excludedLedgerFraud++;
          continue;
        }
        if (this.dismissed.has(row.id)) counts.dismissedKept++;
        counts.rowsUsed++;
        yield { values: row.values, segment: row.segment };
      }
    } finally {
      await ledger.rows.return();
    }
    this.counts = counts;
    this.confirmedFound = found;
  }
}

/**
 * Runs `isodense refit` with the words after `refit`.
 * @returns the exit code (0, 1 or 2; 3 for an internal error)
 * @example await refitCommand(["ledger.csv", "--labels", "labels.csv", "--model", "live.json", "--out", "candidate.json"])
 */
export async function refitCommand(argv: string[], io: CommandIO = processIO()): Promise<number> {
  const progress = createProgress(io.stderr);
  try {
    const args = parseArgs(argv, refitSpec);
    if (args.help) {
      io.stdout.write(formatHelp(refitSpec));
      return EXIT_OK;
    }
    const [ledgerPath] = args.positionals;
    const labelsPath = required(stringOption(args, "labels"), "--labels", "the labelled set");
    const modelPath = required(stringOption(args, "model"), "--model", "the live model");
    const out = required(stringOption(args, "out"), "--out", "where to write the candidate");
    for (const input of [ledgerPath, labelsPath, modelPath]) {
      if (resolve(out) === resolve(input)) {
        throw new UsageError("--out", "same as an input", `option --out names an input file (${out}); write the candidate to another file`);
      }
    }
    const live = await loadArtifact(modelPath);
    const givenRate = numberOption(args, "cutoff-rate");
    await checkOutputPath(out, "--out");

    const outcome = await refitCandidate({
      ledger: sourceFromArgs(args, ledgerPath),
      labelsPath,
      live,
      labelColumns: { idColumn: stringOption(args, "labels-id-column"), labelColumn: stringOption(args, "labels-label-column"), weightColumn: stringOption(args, "weight-column") },
      idColumn: stringOption(args, "id-column"),
      labelColumn: stringOption(args, "label-column"),
      cutoffRate: givenRate,
      seed: numberOption(args, "seed"),
      onProgress: (pass, rows) => progress.update(pass, rows),
    });
    progress.done();
    const { candidate } = outcome;
    await writeFileAtomic(out, JSON.stringify(candidate, null, 2) + "\n");
    writeLines(io.stdout, [
      ...refitLines(outcome),
      "",
      `wrote candidate ${candidate.version} to ${out}; it is not live: compare, then publish it with 'isodense publish ${out} --activate'`,
    ]);
    return EXIT_OK;
  } catch (error) {
    progress.done();
    return reportFailure(error, io, refitSpec.command);
  }
}

/** What {@link refitCandidate} needs: the ledger, the labels and the live model whose spec it copies. */
export interface RefitInput {
  /** The ledger: any source `fit` reads (CSV, Parquet, DuckDB or SQLite table or query). */
  ledger: DataSource;
  /** The labelled set, a .csv or .parquet file. */
  labelsPath: string;
  live: ModelArtifact;
  /** Columns of the labelled set (defaults as `readLabels`). */
  labelColumns: { idColumn?: string; labelColumn?: string; weightColumn?: string };
  /** Id, label and time columns of the ledger (defaults as `openLedger`). */
  idColumn?: string;
  labelColumn?: string;
  timeColumn?: string;
  /** Share of training rows the cutoff flags; default the live model's (see `sameCutoffRate`). */
  cutoffRate?: number;
  seed?: number;
  /**
   * Fit only the payments of the window of `lengthMs` that ends at `untilMs` (default: the latest
   * payment of the ledger). The whole ledger is still read: a records ledger's earlier payments
   * build the histories. The ledger needs a time column. The candidate's `createdAt` is then the
   * window's end, so the same window of the same ledger gives the same version.
   */
  window?: { lengthMs: number; untilMs?: number };
  /** The candidate's `createdAt`; default the window's end, else now. */
  createdAt?: string;
  onProgress?: (pass: string, rows: number) => void;
}

/** What {@link refitCandidate} found. */
export interface RefitOutcome {
  live: ModelArtifact;
  candidate: ModelArtifact;
  fitReport: FitReport;
  labels: LabelSet;
  counts: RefitCounts;
  /** Confirmed-fraud ids in the labels, and how many of them the ledger (window) held. */
  confirmedFraud: number;
  confirmedFound: number;
  cutoff: { rate: number; why: string };
  backtest: ReturnType<typeof compareOnLabels>;
  ledger: LedgerComparison;
  /** The training window as resolved (null without one). */
  window: TimeWindow | null;
}

/** What a refit had read when its candidate's fit was refused. */
export interface RefitReadSoFar {
  /** The ledger's label (file, table or query). */
  source: string;
  counts: RefitCounts;
  labels: Pick<LabelSet, "rows" | "fraudCount">;
  window: TimeWindow | null;
}

/**
 * The candidate's fit was refused by its diagnostics (exit 1, as any {@link FitRefusal}), with what
 * the refit had read by then, so `isodense renew` can report the window and rows behind the refusal.
 */
export class RefitRefusal extends FitRefusal {
  /** The ledger, counts, labels and window of the refused refit. */
  readonly read: RefitReadSoFar;

  /** @param diagnostics the refused fit's findings; @param read what the refit had read */
  constructor(diagnostics: Diagnostic[], read: RefitReadSoFar) {
    super(diagnostics);
    this.name = "RefitRefusal";
    this.read = read;
  }
}

/** The latest week of a window: the last seven days before its end. */
export const LATEST_WEEK_MS = 7 * 86_400_000;

/**
 * The weekly refit, shared by `isodense refit` and `isodense renew`: reads the labels, fits a
 * candidate with the live model's spec on the ledger (window) without the confirmed fraud and with
 * the dismissed flags, and backtests both models on the labels and the ledger.
 * @throws InputError (exit 2) for a labelled set without fraud, a ledger without an id column, a
 *   window on a ledger without a time column; RefitRefusal (a FitRefusal) when the candidate's data cannot support it
 */
export async function refitCandidate(input: RefitInput): Promise<RefitOutcome> {
  const { live, ledger, labelsPath } = input;
  const progress = input.onProgress ?? (() => {});
  if (input.cutoffRate === undefined && live.cutoff.basis === "flag-rate" && !(live.cutoff.flagRate! > 0 && live.cutoff.flagRate! < 1)) {
    throw new UsageError(
      "--cutoff-rate",
      "required",
      `the live model records no usable flag rate (cutoff basis ${live.cutoff.basis}, flag rate ${String(live.cutoff.flagRate)}); give --cutoff-rate`,
    );
  }
  const labels = await readLabels(resolveSource(labelsPath, {}, "--labels"), {
    features: live.features,
    ...input.labelColumns,
    segmentCandidates: live.segmentBy === null ? [] : [live.segmentBy, EXPORT_SEGMENT_COLUMN],
    duplicates: "merge-agreeing",
    records: recordsOfModel(live),
  });
  // The backtest compares live and candidate on the labelled fraud: without any there is nothing
  // to compare, so say so now rather than after the whole fit.
  if (labels.fraudCount === 0) {
    throw new InputError(
      "--labels",
      "must hold at least one payment confirmed as fraud",
      `${labelsPath}: the labelled set holds no payment confirmed as fraud (${labels.rows} rows, all legitimate); the backtest needs at least one — export labels after fraud has been confirmed, or widen the export's time range`,
    );
  }
  const confirmedFraud = new Set<string>();
  const dismissed = new Set<string>();
  labels.ids.forEach((id, r) => (labels.fraud[r] === 1 ? confirmedFraud : dismissed).add(id));

  const features: FeatureDeclaration[] = live.features.map((f) => ({ name: f.name, transform: f.transform }));
  const request: LedgerRequest = {
    features,
    idColumn: input.idColumn,
    labelColumn: input.labelColumn,
    segmentColumn: live.segmentBy,
    records: recordsOfModel(live),
    timeColumn: input.timeColumn,
  };
  // Header and columns are checked before the first pass, so a typo fails at once.
  const probe = await openLedger(ledger, request);
  await probe.rows.return();
  const layout = probe.layout;
  if (layout.idColumn === null) {
    throw new InputError(
      "--id-column",
      "no id column",
      `${layout.file} has no id column to match the labels against; name it with --id-column (columns are: ${layout.header.join(", ")})`,
    );
  }
  if (input.window !== undefined && layout.timeColumn === null) {
    throw new InputError("--time-column", "required for a window", `${layout.file}: a training window needs each payment's time; name its column with --time-column`);
  }
  const window = input.window === undefined ? null : await resolveWindow(ledger, request, input.window);
  const source = new RefitRowSource(ledger, request, confirmedFraud, dismissed, window);
  // The cutoff rate and the fit's passes read one staged copy: the ledger is parsed (and derived) once.
  const rows = new StagedRowSource(source, features.length, live.segmentBy);
  const liveSeed = live.segments["*"].details.estimator === "robust" ? live.segments["*"].details.seed : undefined;
  let cutoff: { rate: number; why: string };
  let fitted: Awaited<ReturnType<typeof fitModel>>;
  try {
    cutoff = input.cutoffRate !== undefined ? { rate: input.cutoffRate, why: "as given with --cutoff-rate" } : await sameCutoffRate(live, rows);
    fitted = await fitModel(rows, {
      features,
      shape: live.covarianceShape,
      estimator: live.estimator,
      segmentBy: live.segmentBy,
      minSegmentRows: live.minSegmentRows,
      cutoffRate: cutoff.rate,
      seed: input.seed ?? liveSeed,
      source: ledger.label,
      recordSpec: recordSpecFromArtifact(live) ?? undefined,
      createdAt: input.createdAt ?? (window === null ? undefined : new Date(window.toMs).toISOString()),
      get rowsRead() {
        return source.counts.rowsRead - source.counts.outsideWindow;
      },
      get rowsExcludedAsFraud() {
        return source.counts.excludedConfirmedFraud + source.counts.excludedLedgerFraud;
      },
      onProgress: progress,
    }).catch((error: unknown) => {
      if (error instanceof FitRefusal) throw new RefitRefusal(error.diagnostics, { source: ledger.label, counts: { ...source.counts }, labels, window });
      throw error;
    });
  } finally {
    rows.remove();
  }
  const { artifact: candidate, report } = fitted;
  const backtest = compareOnLabels(live, candidate, labels);
  const ledgerComparison = await compareOnLedger(live, candidate, ledger, request, window, (window?.toMs ?? Number.NaN) - LATEST_WEEK_MS, (rows) => progress("compare", rows));
  return {
    live,
    candidate,
    fitReport: report,
    labels,
    counts: source.counts,
    confirmedFraud: confirmedFraud.size,
    confirmedFound: source.confirmedFound.size,
    cutoff,
    backtest,
    ledger: ledgerComparison,
    window,
  };
}

/**
 * The window of `lengthMs` ending at `untilMs`, or at the latest payment of the ledger (one pass).
 * @throws InputError naming --window when the ledger holds no payment in it
 */
async function resolveWindow(source: DataSource, request: LedgerRequest, asked: { lengthMs: number; untilMs?: number }): Promise<TimeWindow> {
  let latest = -Infinity;
  let inside = 0;
  const ledger = await openLedger(source, request);
  try {
    for await (const row of ledger.rows) {
      if (row.timeMs > latest) latest = row.timeMs;
      if (asked.untilMs !== undefined && row.timeMs > asked.untilMs - asked.lengthMs && row.timeMs <= asked.untilMs) inside++;
    }
  } finally {
    await ledger.rows.return();
  }
  // Without --until the window ends at the latest payment, which is inside it.
  const toMs = asked.untilMs ?? latest;
  const fromMs = toMs - asked.lengthMs;
  if (asked.untilMs === undefined ? latest === -Infinity : inside === 0) {
    throw new InputError(
      "--window",
      "no payment in the window",
      `${ledger.layout.file}: no payment falls in the window ${iso(fromMs)} – ${iso(toMs)}; widen --window or check --until`,
    );
  }
  return { fromMs, toMs };
}

function iso(ms: number): string {
  return Number.isFinite(ms) ? new Date(ms).toISOString() : String(ms);
}

/** The refit for people: what was read and left out, the spec, the fit report and the backtest. */
export function refitLines(outcome: RefitOutcome): string[] {
  const { counts: c, labels, live, candidate, cutoff } = outcome;
  const notInLedger = outcome.confirmedFraud - outcome.confirmedFound;
  const source = candidate.training.source;
  return [
    `ledger: ${formatCount(c.rowsRead)} rows read from ${source}` +
      (c.outsideWindow > 0 ? ` (${formatCount(c.outsideWindow)} outside the training window)` : "") +
      `; left out ${formatCount(c.excludedConfirmedFraud)} confirmed fraud ` +
      `(labels) and ${formatCount(c.excludedLedgerFraud)} labelled fraud (ledger); kept ${formatCount(c.dismissedKept)} payments reviewed as legitimate as normal traffic`,
    `labels: ${formatCount(labels.rows)} rows from ${basename(labels.file)} (${formatCount(labels.fraudCount)} fraud)` +
      (labels.duplicatesSkipped > 0 ? `, ${formatCount(labels.duplicatesSkipped)} repeated rows merged` : "") +
      (notInLedger > 0 ? `; ${formatCount(notInLedger)} confirmed-fraud ids are not in the ledger (outside the training window)` : ""),
    `candidate spec from ${live.version}: ${live.features.length} features, ${live.covarianceShape} covariance, ${live.estimator} estimator, ` +
      `${live.segmentBy === null ? "no segments" : `segments by '${live.segmentBy}'`}, cutoff at ${formatPercent(cutoff.rate)} of training rows (${cutoff.why})`,
    ...outcome.fitReport.lines,
    "",
    ...outcome.backtest.lines,
    `flag overlap on the ledger${c.outsideWindow > 0 ? " window" : ""} (Jaccard, own cutoffs): ${jaccardText(outcome.ledger.overlap)}`,
  ];
}

/**
 * The candidate's cutoff rate: "the same cutoff flag rate" as the live model. A live cutoff chosen
 * by flag rate records the share of its training rows it flags: that share again. A tuned cutoff
 * (f1, capacity, cost, manual) records the share of all traffic it flags, fraud included, which is
 * not a share of normal rows; so the live model scores the candidate's training rows and the
 * candidate flags the same share of them as the live cutoff does (one extra pass).
 * @throws UsageError naming --cutoff-rate when that share is 0 or 1 (nothing to match)
 */
async function sameCutoffRate(live: ModelArtifact, source: RowSource): Promise<{ rate: number; why: string }> {
  if (live.cutoff.basis === "flag-rate") return { rate: live.cutoff.flagRate!, why: `the live model's flag rate` };
  const scorer = new Scorer(compileModel(live));
  let rows = 0;
  let flagged = 0;
  for await (const row of source.pass()) {
    rows++;
    if (scorer.score(row.values, row.segment).flagged) flagged++;
  }
  const rate = rows === 0 ? 0 : flagged / rows;
  if (!(rate > 0 && rate < 1)) {
    throw new UsageError(
      "--cutoff-rate",
      "required",
      `the live cutoff (basis ${live.cutoff.basis}, d² > ${formatForPeople(live.cutoff.mahalanobisSq)}) flags ${formatCount(flagged)} of the ${formatCount(rows)} training rows, ` +
        "so there is no share to match; give --cutoff-rate",
    );
  }
  return { rate, why: `the share of them the live cutoff d² > ${formatForPeople(live.cutoff.mahalanobisSq)} flags` };
}

function required(value: string | undefined, option: string, what: string): string {
  if (value === undefined) throw new UsageError(option, "required", `option ${option} is required (${what})`);
  return value;
}

/** Sizes of two flagged sets and their intersection. */
export interface Overlap {
  live: number;
  candidate: number;
  both: number;
}

/**
 * Jaccard index |A ∩ B| / |A ∪ B| of two flagged sets (1 when both are empty: they agree).
 * @example jaccard({ live: 10, candidate: 12, both: 8 }) // 8 / 14
 */
export function jaccard(o: Overlap): number {
  const union = o.live + o.candidate - o.both;
  return union === 0 ? 1 : o.both / union;
}

function jaccardText(o: Overlap): string {
  return `${formatForPeople(jaccard(o), 4)} (both ${formatCount(o.both)}; live ${formatCount(o.live)}, candidate ${formatCount(o.candidate)})`;
}

/**
 * Backtest of both models on the labelled set: each model's operating table, the flag overlap of
 * their own cutoffs on the labelled rows, and lines for people (PR-AUC, figures at each own
 * cutoff, recall of both at the live model's flag rate).
 * @throws CsvError naming the labels line of a row that cannot be scored
 * @example compareOnLabels(live, candidate, labels).lines.forEach((line) => console.log(line))
 */
export function compareOnLabels(
  live: ModelArtifact,
  candidate: ModelArtifact,
  labels: LabelSet,
): { live: OperatingTable; candidate: OperatingTable; overlap: Overlap; liveFlagRate: number; recallAtLiveRate: { live: number; candidate: number }; lines: string[] } {
  const liveScores = scoreLabels(live, labels);
  const candidateScores = scoreLabels(candidate, labels);
  const liveTable = operatingPoints(liveScores, labels.fraud, labels.weights);
  const candidateTable = operatingPoints(candidateScores, labels.fraud, labels.weights);
  const liveOwn = pointAtCutoff(liveTable, live.cutoff.mahalanobisSq);
  const candidateOwn = pointAtCutoff(candidateTable, candidate.cutoff.mahalanobisSq);
  const rate = liveOwn.flagRate;
  const liveAtRate = pointAtFlagRate(liveTable, rate);
  const candidateAtRate = pointAtFlagRate(candidateTable, rate);
  const overlap: Overlap = { live: 0, candidate: 0, both: 0 };
  for (let r = 0; r < labels.rows; r++) {
    const a = liveScores[r] > live.cutoff.mahalanobisSq;
    const b = candidateScores[r] > candidate.cutoff.mahalanobisSq;
    if (a) overlap.live++;
    if (b) overlap.candidate++;
    if (a && b) overlap.both++;
  }
  const weighting = labels.weightColumn === null ? "unweighted" : `weighted by '${labels.weightColumn}'`;
  const rows: string[][] = [
    ["", `live ${live.version}`, `candidate ${candidate.version}`],
    ["PR-AUC (average precision)", formatForPeople(liveTable.averagePrecision), formatForPeople(candidateTable.averagePrecision)],
    ["own cutoff d² >", formatForPeople(live.cutoff.mahalanobisSq), formatForPeople(candidate.cutoff.mahalanobisSq)],
    ["flag rate at own cutoff", formatPercent(liveOwn.flagRate), formatPercent(candidateOwn.flagRate)],
    ["precision at own cutoff", precisionText(liveOwn), precisionText(candidateOwn)],
    ["recall at own cutoff", formatForPeople(liveOwn.recall), formatForPeople(candidateOwn.recall)],
    [`recall at the live flag rate (≤ ${formatPercent(rate)})`, formatForPeople(liveAtRate.recall), formatForPeople(candidateAtRate.recall)],
  ];
  const widths = [0, 1, 2].map((c) => Math.max(...rows.map((r) => r[c].length)));
  return {
    live: liveTable,
    candidate: candidateTable,
    overlap,
    liveFlagRate: rate,
    recallAtLiveRate: { live: liveAtRate.recall, candidate: candidateAtRate.recall },
    lines: [
      `backtest on ${formatCount(labels.rows)} labelled payments (${weighting}):`,
      ...rows.map((r) => `  ${r[0].padEnd(widths[0])}  ${r[1].padStart(widths[1])}  ${r[2].padStart(widths[2])}`.trimEnd()),
      `flag overlap on the labelled payments (Jaccard, own cutoffs): ${jaccardText(overlap)}`,
    ],
  };
}

/** What the one scoring pass over the ledger (window) found with both models. */
export interface LedgerComparison {
  /** Flags of each model and of both, on the window's payments. */
  overlap: Overlap;
  /** The latest week (`latestFromMs` < time ≤ the window's end): payments and each model's flags. */
  latestWeek: { payments: number; live: number; candidate: number };
  /** The window's payments not labelled fraud on the live model's reference buckets (drift of the window). */
  drift: DriftTally;
}

/**
 * Scores every ledger row of the window with both models: their flag overlap, their flags on the
 * latest week, and the window's drift against the live model's training traffic.
 */
async function compareOnLedger(
  live: ModelArtifact,
  candidate: ModelArtifact,
  source: DataSource,
  request: LedgerRequest,
  window: TimeWindow | null,
  latestFromMs: number,
  onProgress: (rows: number) => void,
): Promise<LedgerComparison> {
  const liveScorer = new Scorer(compileModel(live));
  const candidateScorer = new Scorer(compileModel(candidate));
  const ledger = await openLedger(source, request);
  const overlap: Overlap = { live: 0, candidate: 0, both: 0 };
  const latestWeek = { payments: 0, live: 0, candidate: 0 };
  const drift = new DriftTally(live);
  let rows = 0;
  try {
    for await (const row of ledger.rows) {
      if (window !== null && !(row.timeMs > window.fromMs && row.timeMs <= window.toMs)) continue;
      const liveScore = liveScorer.score(row.values, row.segment);
      const a = liveScore.flagged;
      const b = candidateScorer.score(row.values, row.segment).flagged;
      if (a) overlap.live++;
      if (b) overlap.candidate++;
      if (a && b) overlap.both++;
      if (row.timeMs > latestFromMs) {
        latestWeek.payments++;
        if (a) latestWeek.live++;
        if (b) latestWeek.candidate++;
      }
      if (row.label !== "fraud") drift.add(row.values, liveScore.mahalanobisSq);
      if (++rows % 8192 === 0) onProgress(rows);
    }
  } finally {
    await ledger.rows.return();
  }
  return { overlap, latestWeek, drift };
}

function precisionText(p: OperatingPoint): string {
  return p.precision === null ? "n/a" : formatForPeople(p.precision);
}
