/**
 * `npm run replay`: streams the demo ledger's payments to the running service
 * (`POST /v1/score/batch`), so that the review store fills with flags and audit-sample items.
 * When the live model derives its features from payment records (GET /v1/health lists
 * `paymentFields`), each payment is sent as it is in the ledger (the `payment` form: those columns
 * only, labels never) and the service derives the features from the account's history; requests
 * then go one at a time by default, so each account's payments arrive in ledger (time) order.
 * Otherwise the features are sent ready (`features`, derived locally when the ledger has no feature
 * columns), with the segment and the account from the ledger. A
 * ledger of payment records (the demo's) has its features derived in ledger order with --spec.
 *
 * Options: --url (default http://127.0.0.1:8787), --token (default: a flow credential from
 * .dev.vars), --ledger (default demo-ledger/data/ledger.csv), --spec (default demo-ledger/spec.json),
 * --limit N, --batch N (default 100), --batch-accounts N (payment records: most distinct accounts
 * per request, default 25 as the service's MAX_BATCH_ACCOUNTS), --parallel N requests in flight
 * (default 4).
 */
import { existsSync } from "node:fs";
import { dirname, join, resolve } from "node:path";
import { fileURLToPath } from "node:url";
import { numberOption, stringOption, type CommandSpec } from "../cli/args";
import { parseScriptArgs } from "./script-args";
import { credentialsOf, readDevVars } from "./dev-vars";
import { ledgerPayments, type LedgerPayment } from "./ledger-payments";

const root = resolve(dirname(fileURLToPath(import.meta.url)), "..");

const spec: CommandSpec = {
  command: "npm run replay --",
  summary: "Sends the demo ledger's payments to the scoring service in batches and counts the answers.",
  positionals: [],
  options: [
    { name: "url", kind: "string", valueName: "url", description: "service base URL", defaultText: "http://127.0.0.1:8787" },
    { name: "token", kind: "string", valueName: "token", description: "flow bearer token", defaultText: "the 'replay' (else first) flow user of .dev.vars" },
    { name: "ledger", kind: "string", valueName: "ledger.csv", description: "payments to send", defaultText: "demo-ledger/data/ledger.csv" },
    { name: "spec", kind: "string", valueName: "spec.json", description: "record spec deriving the features of a records ledger", defaultText: "demo-ledger/spec.json" },
    { name: "limit", kind: "integer", valueName: "N", min: 1, description: "send at most N payments", defaultText: "all" },
    { name: "batch", kind: "integer", valueName: "N", min: 1, max: 1000, description: "payments per request (≤ the service's MAX_BATCH)", defaultText: "100" },
    {
      name: "batch-accounts",
      kind: "integer",
      valueName: "N",
      min: 1,
      max: 1000,
      description: "payment records: most distinct accounts per request (≤ the service's MAX_BATCH_ACCOUNTS)",
      defaultText: "25",
    },
    {
      name: "parallel",
      kind: "integer",
      valueName: "N",
      min: 1,
      max: 32,
      description: "requests in flight",
      defaultText: "1 for payment records (time order per account), else 4",
    },
  ],
};

interface Tally {
  sent: number;
  scored: number;
  review: number;
  audit: number;
  refused: number;
  refusals: Map<string, number>;
}

interface BatchAnswer {
  results: { outcome: "scored" | "refused"; error?: string; result?: { decision: string; auditSample: boolean } }[];
}

async function main(): Promise<number> {
  const args = parseScriptArgs(process.argv.slice(2), spec, "replay");
  if (typeof args === "number") return args;
  const url = (stringOption(args, "url") ?? "http://127.0.0.1:8787").replace(/\/$/, "");
  const ledger = resolve(stringOption(args, "ledger") ?? join(root, "demo-ledger/data/ledger.csv"));
  const specPath = resolve(stringOption(args, "spec") ?? join(root, "demo-ledger/spec.json"));
  const limit = numberOption(args, "limit") ?? Number.POSITIVE_INFINITY;
  const batchSize = numberOption(args, "batch") ?? 100;
  const batchAccounts = numberOption(args, "batch-accounts") ?? 25;
  const parallelOption = numberOption(args, "parallel");
  let token = stringOption(args, "token");
  if (token === undefined) {
    const devVars = join(root, ".dev.vars");
    if (!existsSync(devVars)) {
      process.stderr.write("replay: no --token and no .dev.vars (run npm start first)\n");
      return 2;
    }
    const flows = credentialsOf(readDevVars(devVars), "FLOW_CREDENTIALS");
    token = (flows.find((c) => c.user === "replay") ?? flows[0])?.token;
    if (!token) {
      process.stderr.write("replay: .dev.vars has no FLOW_CREDENTIALS entry\n");
      return 2;
    }
  }

  let health: { model: { version: string; features: string[]; segmentBy: string | null; paymentFields?: string[] | null } | null };
  try {
    health = (await (await fetch(`${url}/v1/health`)).json()) as typeof health;
  } catch (error) {
    process.stderr.write(`replay: cannot reach ${url} (${(error as Error).message}); is the service running (npm start)?\n`);
    return 3;
  }
  if (!health.model) {
    process.stderr.write(`replay: the service at ${url} has no live model yet\n`);
    return 1;
  }
  const model = health.model;
  const paymentFields = model.paymentFields ?? null;
  const parallel = parallelOption ?? (paymentFields ? 1 : 4);

  const form = paymentFields ? "payment records" : "ready features";
  process.stdout.write(`replaying ${ledger} to ${url} as ${form} (model ${model.version}, ${batchSize} per request, ${parallel} in flight)\n`);
  const tally: Tally = { sent: 0, scored: 0, review: 0, audit: 0, refused: 0, refusals: new Map() };
  const started = Date.now();
  const inFlight = new Set<Promise<void>>();
  let batch: Record<string, unknown>[] = [];
  /** Accounts the payment records of `batch` name: each is one history call at the service. */
  let accounts = new Set<string>();

  let failure: Error | null = null;
  const send = (payments: Record<string, unknown>[]): void => {
    const request = (async () => {
      const response = await fetch(`${url}/v1/score/batch`, {
        method: "POST",
        headers: { "content-type": "application/json", authorization: `Bearer ${token}` },
        body: JSON.stringify({ payments }),
      });
      const body = (await response.json()) as BatchAnswer & { error?: string; problems?: { field: string; rule: string }[] };
      if (response.status !== 200) {
        throw new Error(`the service answered ${response.status} ${body.error ?? ""}: ${JSON.stringify(body.problems ?? []).slice(0, 300)}`);
      }
      for (const r of body.results) {
        if (r.outcome === "scored" && r.result) {
          tally.scored++;
          if (r.result.decision === "review") tally.review++;
          if (r.result.auditSample) tally.audit++;
        } else {
          tally.refused++;
          tally.refusals.set(r.error ?? "?", (tally.refusals.get(r.error ?? "?") ?? 0) + 1);
        }
      }
    })()
      .catch((error: unknown) => {
        failure ??= error instanceof Error ? error : new Error(String(error));
      })
      .finally(() => inFlight.delete(request));
    inFlight.add(request);
  };

  const payments = ledgerPayments(ledger, model.features, specPath);
  try {
    for await (const payment of payments) {
      if (tally.sent >= limit || failure) break;
      const account = payment.cell("accountRef");
      if (paymentFields && !accounts.has(account) && accounts.size === batchAccounts) {
        send(batch);
        [batch, accounts] = [[], new Set()];
        if (inFlight.size >= parallel) await Promise.race(inFlight);
      }
      accounts.add(account);
      batch.push(paymentFields ? paymentRecordBody(payment, paymentFields) : readyFeaturesBody(payment, model.segmentBy));
      tally.sent++;
      if (batch.length === batchSize) {
        send(batch);
        [batch, accounts] = [[], new Set()];
        if (inFlight.size >= parallel) await Promise.race(inFlight);
        if (tally.sent % (batchSize * 20) === 0) {
          process.stdout.write(`  ${tally.sent} sent, ${tally.review} to review, ${tally.audit} audit sample\n`);
        }
      }
    }
    if (batch.length > 0 && !failure) send(batch);
    await Promise.all(inFlight);
  } finally {
    await payments.return(undefined);
  }
  if (failure) {
    process.stderr.write(`replay: stopped after ${tally.scored + tally.refused} answers: ${(failure as Error).message}\n`);
    return 3;
  }
  const seconds = (Date.now() - started) / 1000;
  process.stdout.write(
    [
      `done in ${seconds.toFixed(1)} s (${Math.round(tally.sent / seconds)} payments/s)`,
      `  sent:          ${tally.sent}`,
      `  scored:        ${tally.scored}`,
      `  to review:     ${tally.review} flagged (${((100 * tally.review) / Math.max(1, tally.scored)).toFixed(2)} %)`,
      `  audit sample:  ${tally.audit} passing payments drawn for review`,
      `  refused:       ${tally.refused}${tally.refused ? ` (${[...tally.refusals].map(([k, v]) => `${k} ${v}`).join(", ")})` : ""}`,
      "The flagged and audit-sampled payments reach the review store (D1 table review_items) through the queue within seconds.",
      "",
    ].join("\n"),
  );
  return tally.refused > 0 ? 1 : 0;
}

/** The `payment` form: the record's own cells under the model's payment fields (the first is the id). */
function paymentRecordBody(payment: LedgerPayment, fields: readonly string[]): Record<string, unknown> {
  const [idColumn, ...rest] = fields;
  return { transactionId: payment.cell(idColumn), payment: Object.fromEntries(rest.map((c) => [c, payment.cell(c)]).filter(([, v]) => v !== "")) };
}

/** The `features` form: the features by the model's names, the segment and the account. */
function readyFeaturesBody(payment: LedgerPayment, segmentBy: string | null): Record<string, unknown> {
  const accountRef = payment.cell("accountRef");
  return {
    transactionId: payment.cell("paymentId"),
    features: payment.features,
    ...(segmentBy ? { segment: payment.cell(segmentBy) } : {}),
    ...(accountRef !== "" ? { accountRef } : {}),
  };
}

process.exitCode = await main();
