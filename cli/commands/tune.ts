/**
 * `isodense tune <labels> --model model.json --out tuned.json [--objective f1|capacity|cost] …`:
 * scores the labelled set under the model, prints a compact table of operating points around the
 * chosen cutoff with the PR-AUC, prints Horvitz–Thompson estimates for all traffic with intervals
 * and the too-few-labels verdict, and writes a new model version with the same parameters and the
 * chosen cutoff. Publishing stays a separate step (`isodense publish`).
 */
import { basename, resolve } from "node:path";
import { chiSquareSurvival } from "../../shared-model/src/distributions";
import { EstimateInputError, estimateRates, type Estimate, type RateEstimates } from "../../shared-model/src/estimates";
import { compileModel, Scorer, ScoreInputError } from "../../shared-model/src/score";
import {
  TuningInputError,
  cutoffModelOf,
  expectedCost,
  operatingPoints,
  pointAtCutoff,
  pointAtFlagRate,
  retuneArtifact,
  tuneCutoff,
  type OperatingPoint,
  type OperatingTable,
  type TunedCutoff,
  type TuningObjective,
} from "../../shared-model/src/tuning";
import type { ModelArtifact } from "../../shared-model/src/artifact";
import { formatHelp, numberOption, parseArgs, stringOption, UsageError, type CommandSpec, type ParsedArgs } from "../args";
import { CsvError } from "../csv";
import { EXIT_OK, InputError, reportFailure } from "../errors";
import { checkOutputPath, writeFileAtomic } from "../files";
import { processIO, writeLines, type CommandIO } from "../io";
import { EXPORT_SEGMENT_COLUMN, readLabels, type LabelSet } from "../labels";
import { formatCount, formatForPeople, formatPercent, parseStrictNumber } from "../numbers";
import { loadArtifact } from "./score";
import { recordsOfModel } from "../records";
import { SOURCE_KINDS_TEXT, SOURCE_OPTIONS, sourceFromArgs } from "../sources/source";

/** Command line of `isodense tune`. */
export const tuneSpec: CommandSpec = {
  command: "isodense tune",
  summary:
    "Chooses a new cutoff for a model from labelled payments (the review export: one row per decided payment with the model's " +
    "features, outcome fraud/legitimate or 1/0, weight = 1/inclusion probability, and the payment id), prints the operating " +
    "points, PR-AUC and estimates for all traffic, and writes a new model version with the chosen cutoff.",
  positionals: [{ name: "labels", description: `the labelled set (review export): ${SOURCE_KINDS_TEXT}` }],
  options: [
    ...SOURCE_OPTIONS,
    { name: "model", kind: "string", valueName: "model.json", description: "model to retune (required)" },
    { name: "out", kind: "string", valueName: "tuned.json", description: "where to write the new model version (required)" },
    { name: "objective", kind: "string", choices: ["f1", "capacity", "cost"], description: "what the cutoff should achieve", defaultText: "f1" },
    { name: "capacity", kind: "string", valueName: "N/day", description: "reviews the analysts can do per day (objective capacity), e.g. 400 or 400/day" },
    { name: "daily-payments", kind: "number", valueName: "N", greaterThan: 0, description: "payments scored per day (needed for capacity; adds flags/day and cost/day)" },
    {
      name: "costs",
      kind: "string",
      valueName: "review=…,fraud=…,friction=…",
      description: "cost per review, loss per missed fraud, friction per good customer flagged (objective cost)",
    },
    { name: "scored-payments", kind: "integer", valueName: "N", min: 1, description: "payments scored in the period the labels cover", defaultText: "Σ weights" },
    { name: "id-column", kind: "string", valueName: "column", description: "payment id column", defaultText: "transactionId, else id" },
    { name: "label-column", kind: "string", valueName: "column", description: "outcome column: fraud/legitimate or 1/0", defaultText: "outcome" },
    { name: "weight-column", kind: "string", valueName: "column", description: "1 / inclusion probability", defaultText: "weight if present, else 1 for every row" },
    { name: "segment-column", kind: "string", valueName: "column", description: "segment value per row", defaultText: "the model's segment column, else segment" },
  ],
  notes: [
    "Objectives: f1 = best F1; capacity = best recall whose expected flags per day (flag rate × --daily-payments) fit --capacity;",
    "cost = least expected cost (fraud × missed + review × flags + friction × good customers flagged).",
    "Exit codes: 0 written; 2 usage or input error (including a model file that fails verification).",
  ],
};

/**
 * Runs `isodense tune` with the words after `tune`.
 * @returns the exit code (0 or 2; 3 for an internal error)
 * @example await tuneCommand(["labels.csv", "--model", "model.json", "--out", "tuned.json", "--objective", "capacity", "--capacity", "400/day", "--daily-payments", "30000"])
 */
export async function tuneCommand(argv: string[], io: CommandIO = processIO()): Promise<number> {
  try {
    const args = parseArgs(argv, tuneSpec);
    if (args.help) {
      io.stdout.write(formatHelp(tuneSpec));
      return EXIT_OK;
    }
    const [labelsPath] = args.positionals;
    const modelPath = stringOption(args, "model");
    if (modelPath === undefined) throw new UsageError("--model", "required", "option --model is required (the model file to retune)");
    const out = stringOption(args, "out");
    if (out === undefined) throw new UsageError("--out", "required", "option --out is required (where to write the new model version)");
    for (const input of [labelsPath, modelPath]) {
      if (resolve(out) === resolve(input)) {
        throw new UsageError("--out", "same as an input", `option --out names an input file (${out}); write the new version to another file`);
      }
    }
    const objective = readObjective(args);
    const dailyPayments = numberOption(args, "daily-payments");
    const artifact = await loadArtifact(modelPath);
    await checkOutputPath(out, "--out");

    const labels = await readLabels(sourceFromArgs(args, labelsPath, "<labels>"), {
      features: artifact.features,
      idColumn: stringOption(args, "id-column"),
      labelColumn: stringOption(args, "label-column"),
      weightColumn: stringOption(args, "weight-column"),
      segmentColumn: stringOption(args, "segment-column"),
      segmentCandidates: artifact.segmentBy === null ? [] : [artifact.segmentBy, EXPORT_SEGMENT_COLUMN],
      records: recordsOfModel(artifact),
    });
    if (labels.fraudCount === 0) {
      throw new InputError(labelsPath, "no fraud", `${labels.file}: no row is labelled fraud in '${labels.labelColumn}'; a cutoff cannot be tuned without confirmed fraud`);
    }
    const scoredPayments = numberOption(args, "scored-payments");
    if (scoredPayments !== undefined && scoredPayments < labels.rows) {
      throw new UsageError(
        "--scored-payments",
        "fewer than the labels",
        `option --scored-payments (${scoredPayments}) is below the ${formatCount(labels.rows)} labelled payments; give every payment scored in the period`,
      );
    }
    const scores = scoreLabels(artifact, labels);
    const table = operatingPoints(scores, labels.fraud, labels.weights);
    const tuned = tuneCutoff(table, cutoffModelOf(artifact), objective);
    const live = pointAtCutoff(table, artifact.cutoff.mahalanobisSq);
    const flagged = Uint8Array.from(scores, (s) => (s > tuned.cutoff.mahalanobisSq ? 1 : 0));
    const estimates = estimateRates({ fraud: labels.fraud, flagged, weights: labels.weights }, { totalPayments: scoredPayments });

    const newArtifact = await retuneArtifact(artifact, tuned.cutoff.mahalanobisSq, objective.kind, tuned.point.flagRate);
    await writeFileAtomic(out, JSON.stringify(newArtifact, null, 2) + "\n");

    writeLines(io.stdout, [
      ...labelLines(labels, artifact),
      `PR-AUC (average precision, step-wise): ${formatForPeople(table.averagePrecision)}   (trapezoidal rule: ${formatForPeople(table.trapezoidArea)})`,
      `live cutoff d² > ${formatForPeople(artifact.cutoff.mahalanobisSq)}: ${pointSummary(live)}`,
      "",
      ...pointTable(table, tuned, objective, dailyPayments, artifact.columns.length),
      "",
      chosenLine(tuned, artifact, dailyPayments),
      ...estimateLines(estimates),
      "",
      `wrote model ${newArtifact.version} to ${out} (cutoff basis ${objective.kind}); it is not live until published with 'isodense publish'`,
    ]);
    return EXIT_OK;
  } catch (error) {
    return reportFailure(asInputError(error), io, tuneSpec.command);
  }
}

/**
 * The objective from the options (`--objective`, `--capacity`, `--daily-payments`, `--costs`),
 * refusing options that belong to another objective.
 * @throws UsageError naming the option that is missing, misplaced or malformed
 * @example readObjective(parseArgs(["l.csv", "--objective", "capacity", "--capacity", "400/day", "--daily-payments", "30000"], tuneSpec))
 *   // { kind: "capacity", reviewsPerDay: 400, paymentsPerDay: 30000 }
 */
export function readObjective(args: ParsedArgs): TuningObjective {
  const kind = stringOption(args, "objective") ?? "f1";
  const capacityText = stringOption(args, "capacity");
  const costsText = stringOption(args, "costs");
  const dailyPayments = numberOption(args, "daily-payments");
  if (capacityText !== undefined && kind !== "capacity") {
    throw new UsageError("--capacity", "needs --objective capacity", "option --capacity is used only with --objective capacity");
  }
  if (costsText !== undefined && kind !== "cost") {
    throw new UsageError("--costs", "needs --objective cost", "option --costs is used only with --objective cost");
  }
  if (kind === "capacity") {
    if (capacityText === undefined) {
      throw new UsageError("--capacity", "required", "--objective capacity needs --capacity N/day (reviews the analysts can do per day)");
    }
    if (dailyPayments === undefined) {
      throw new UsageError("--daily-payments", "required", "--objective capacity needs --daily-payments N (payments scored per day) to turn a flag rate into flags per day");
    }
    return { kind, reviewsPerDay: parseCapacity(capacityText), paymentsPerDay: dailyPayments };
  }
  if (kind === "cost") {
    if (costsText === undefined) {
      throw new UsageError("--costs", "required", "--objective cost needs --costs review=…,fraud=…,friction=… (amounts in the shop's currency)");
    }
    return { kind, ...parseCosts(costsText), paymentsPerDay: dailyPayments };
  }
  return { kind: "f1" };
}

/**
 * Reviews per day from `400` or `400/day`.
 * @throws UsageError naming --capacity when the text is not a number ≥ 0 (with an optional /day)
 * @example parseCapacity("400/day") // 400
 */
export function parseCapacity(text: string): number {
  const bare = text.endsWith("/day") ? text.slice(0, -4) : text;
  const value = parseStrictNumber(bare);
  if (value === null || value < 0) {
    throw new UsageError("--capacity", "not a capacity", `option --capacity must be a number of reviews per day ≥ 0, e.g. 400 or 400/day; got '${text}'`);
  }
  return value;
}

const COST_KEYS = { review: "reviewCost", fraud: "missedFraudCost", friction: "frictionCost" } as const;

/**
 * The three costs from `review=4,fraud=180,friction=2`; all three are required.
 * @throws UsageError naming --costs and the key at fault (unknown, repeated, not a number ≥ 0, missing)
 * @example parseCosts("review=4,fraud=180,friction=2") // { reviewCost: 4, missedFraudCost: 180, frictionCost: 2 }
 */
export function parseCosts(text: string): { reviewCost: number; missedFraudCost: number; frictionCost: number } {
  const found: Partial<Record<keyof typeof COST_KEYS, number>> = {};
  for (const part of text.split(",")) {
    const eq = part.indexOf("=");
    const key = (eq < 0 ? part : part.slice(0, eq)).trim();
    if (!Object.hasOwn(COST_KEYS, key)) {
      throw new UsageError("--costs", "unknown key", `option --costs: '${key}' is not a cost; write review=…,fraud=…,friction=…`);
    }
    const name = key as keyof typeof COST_KEYS;
    if (found[name] !== undefined) throw new UsageError("--costs", "repeated key", `option --costs: ${key} is given twice`);
    const value = eq < 0 ? null : parseStrictNumber(part.slice(eq + 1).trim());
    if (value === null || value < 0) {
      throw new UsageError("--costs", "not an amount", `option --costs: ${key} must be an amount ≥ 0, e.g. ${key}=4; got '${part}'`);
    }
    found[name] = value;
  }
  const missing = (Object.keys(COST_KEYS) as (keyof typeof COST_KEYS)[]).filter((k) => found[k] === undefined);
  if (missing.length > 0) {
    throw new UsageError("--costs", "missing key", `option --costs is missing ${missing.join(", ")}; write review=…,fraud=…,friction=… (0 is allowed)`);
  }
  return { reviewCost: found.review!, missedFraudCost: found.fraud!, frictionCost: found.friction! };
}

/**
 * d² of every labelled row under the model (segment per row; unknown and fallback segments score
 * with the pooled model, as in the worker), in label order.
 * @throws CsvError naming the line when a row cannot be scored
 * @example const d2 = scoreLabels(artifact, await readLabels("labels.csv", { features: artifact.features }));
 */
export function scoreLabels(artifact: ModelArtifact, labels: LabelSet): Float64Array {
  const scorer = new Scorer(compileModel(artifact));
  const k = artifact.features.length;
  const scores = new Float64Array(labels.rows);
  for (let r = 0; r < labels.rows; r++) {
    try {
      scores[r] = scorer.score(labels.values.subarray(r * k, r * k + k), labels.segments[r]).mahalanobisSq;
    } catch (error) {
      if (error instanceof ScoreInputError) throw new CsvError(labels.file, labels.lines[r], error.field, error.rule);
      throw error;
    }
  }
  return scores;
}

/** Tuning and estimate errors concern the labelled set: report them as input errors (exit 2). */
function asInputError(error: unknown): unknown {
  if (error instanceof TuningInputError || error instanceof EstimateInputError) {
    return new InputError(error.field, error.rule, `the labelled set cannot be used: ${error.message}`);
  }
  return error;
}

function labelLines(labels: LabelSet, artifact: ModelArtifact): string[] {
  const legit = labels.rows - labels.fraudCount;
  const weightNote =
    labels.weightColumn === null
      ? "no weight column: every label counts once (right only if the labels are every payment of the period)"
      : `weights from '${labels.weightColumn}' (Σ = ${formatCount(Math.round(labels.weights.reduce((s, w) => s + w, 0)))} payments represented)`;
  const lines = [
    `labels: ${formatCount(labels.rows)} rows from ${basename(labels.file)} (${formatCount(labels.fraudCount)} fraud, ${formatCount(legit)} legitimate); ${weightNote}`,
  ];
  if (artifact.segmentBy !== null) {
    lines.push(
      labels.segmentColumn === null
        ? `note: the model is segmented by '${artifact.segmentBy}' but the labels have neither '${artifact.segmentBy}' nor '${EXPORT_SEGMENT_COLUMN}': every row is scored by the pooled model`
        : `scored under model ${artifact.version}, segments from column '${labels.segmentColumn}'`,
    );
  } else {
    lines.push(`scored under model ${artifact.version}`);
  }
  return lines;
}

function pointSummary(p: OperatingPoint): string {
  const precision = p.precision === null ? "n/a" : formatForPeople(p.precision);
  return `precision ${precision}, recall ${formatForPeople(p.recall)}, F1 ${formatForPeople(p.f1)}, flag rate ${formatPercent(p.flagRate)}`;
}

/**
 * A handful of operating points around the chosen one: the points at ¼, ½, ¾, 1½, 2 and 4 times
 * its flag rate (each the loosest point within that rate), so the table shows the trade-off at a
 * glance instead of thousands of near-identical rows.
 */
function pointTable(table: OperatingTable, tuned: TunedCutoff, objective: TuningObjective, dailyPayments: number | undefined, n: number): string[] {
  const rate = tuned.point.flagRate;
  const targets = rate > 0 ? [0.25, 0.5, 0.75, 1.5, 2, 4].map((f) => f * rate) : [0.001, 0.005, 0.01, 0.02, 0.05];
  const picked = new Map<number, OperatingPoint>();
  for (const target of targets) {
    if (target > 1) continue;
    const p = pointAtFlagRate(table, target);
    picked.set(p.mahalanobisSq, p);
  }
  picked.set(tuned.point.mahalanobisSq, tuned.point);
  const rows = [...picked.values()].sort((a, b) => b.mahalanobisSq - a.mahalanobisSq);
  const perDay = dailyPayments ?? (objective.kind === "capacity" ? objective.paymentsPerDay : undefined);
  const header = ["", "d² >", "tail prob.", "flagged", "precision", "recall", "F1", "flag rate"];
  if (perDay !== undefined) header.push("flags/day");
  if (objective.kind === "cost") header.push(perDay !== undefined ? "cost/day" : "cost/payment");
  const body = rows.map((p) => {
    const chosen = p.mahalanobisSq === tuned.point.mahalanobisSq;
    const cells = [
      chosen ? "→" : "",
      formatForPeople(p.mahalanobisSq),
      formatForPeople(chiSquareSurvival(p.mahalanobisSq, n)),
      formatCount(p.flaggedRows),
      p.precision === null ? "n/a" : formatForPeople(p.precision),
      formatForPeople(p.recall),
      formatForPeople(p.f1),
      formatPercent(p.flagRate),
    ];
    if (perDay !== undefined) cells.push(formatForPeople(p.flagRate * perDay, 3));
    if (objective.kind === "cost") {
      const c = expectedCost(p, { ...objective, paymentsPerDay: perDay }, table.totalWeight);
      cells.push(formatForPeople(c.perDay ?? c.perPayment));
    }
    return cells;
  });
  return alignColumns([header, ...body]);
}

function chosenLine(tuned: TunedCutoff, artifact: ModelArtifact, dailyPayments: number | undefined): string {
  const n = artifact.columns.length;
  let text =
    `chosen (${describeObjective(tuned)}): flag when d² > ${formatForPeople(tuned.cutoff.mahalanobisSq)} ` +
    `(tail probability P(χ²${n} > d²) < ${formatForPeople(tuned.cutoff.tailProbability)}); ${pointSummary(tuned.point)}`;
  const daily = tuned.expectedDailyFlags ?? (dailyPayments === undefined ? null : tuned.point.flagRate * dailyPayments);
  if (daily !== null) text += `; about ${formatForPeople(daily, 3)} flags per day`;
  if (tuned.expectedCost !== null) {
    text += `; expected cost ${formatForPeople(tuned.expectedCost.perPayment)} per payment`;
    if (tuned.expectedCost.perDay !== null) text += ` (${formatForPeople(tuned.expectedCost.perDay)} per day)`;
  }
  return text;
}

function describeObjective(tuned: TunedCutoff): string {
  switch (tuned.objective) {
    case "f1":
      return "best F1";
    case "capacity":
      return "best recall within capacity";
    case "cost":
      return "least expected cost";
  }
}

function estimateLines(e: RateEstimates): string[] {
  const level = Math.round(e.confidence * 100);
  const source = e.totalPaymentsSource === "given" ? "given with --scored-payments" : "Σ weights";
  const lines = [
    `estimates for all traffic at the chosen cutoff (Horvitz–Thompson, ${level} % intervals; ${formatCount(Math.round(e.totalPayments))} payments, ${source}):`,
    `  prevalence  ${shareText(e.prevalence, true)}`,
    `  recall      ${shareText(e.recall, false)}`,
    `  precision   ${shareText(e.precision, false)}`,
    `  (intervals about this period's payments; exact Poisson limits for the sampled frauds. For future traffic, as binomial shares:`,
    `   recall ${shareText(e.future.recall, false)}, precision ${shareText(e.future.precision, false)})`,
  ];
  if (e.tooFewLabels) {
    lines.push(`  too few labels to trust these estimates: ${e.reasons.join("; ")}`);
  } else {
    const behind = e.auditFrauds > 0 ? `${formatForPeople(e.effectiveAuditFrauds, 3)} effective audit-sample frauds` : "labels cover every payment";
    lines.push(`  labels: enough (${behind})`);
  }
  return lines;
}

function shareText(estimate: Estimate, asPercent: boolean): string {
  if (estimate.value === null) return "n/a";
  const show = (x: number): string => (asPercent ? formatPercent(x) : formatForPeople(x));
  if (estimate.exact) return `${show(estimate.value)}  (exact: every flag decided)`;
  if (estimate.low === null || estimate.high === null) return `${show(estimate.value)}  (no interval: no audit sample)`;
  return `${show(estimate.value)}  (${show(estimate.low)} – ${show(estimate.high)})`;
}

/** Pads every column to its widest cell; the first column (marker) is left as is. */
function alignColumns(rows: string[][]): string[] {
  const widths = rows[0].map((_, c) => Math.max(...rows.map((r) => (r[c] ?? "").length)));
  return rows.map((r) =>
    r
      .map((cell, c) => (c === 0 ? cell.padEnd(widths[0]) : cell.padStart(widths[c])))
      .join("  ")
      .trimEnd(),
  );
}
