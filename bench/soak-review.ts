/**
 * The soak's second process (bench/soak.ts starts it): an analyst working the review queue while
 * the payment flow scores at full load. Loops list → claim → decide (alternating outcomes) on
 * 127.0.0.1 until SIGTERM, then writes its counts and latencies as JSON to the given file.
 *
 * Any answer other than the expected one counts as an error, except a 409 on a claim (another
 * loop iteration may race for the same line) and an empty queue (flags arrive through the queue a
 * second after scoring), which are counted apart.
 *
 * Usage: run-ts.js bench/soak-review.ts <url> <analyst token> <out.json>
 */
import { writeFileSync } from "node:fs";

const [url, token, outFile] = process.argv.slice(2);
if (!url || !token || !outFile || !url.startsWith("http://127.0.0.1:")) {
  console.error("usage: soak-review.ts http://127.0.0.1:<port> <analyst token> <out.json>");
  process.exit(2);
}

const headers = { authorization: `Bearer ${token}`, "content-type": "application/json" };
const counts = { lists: 0, claims: 0, decisions: 0, claimConflicts: 0, emptyQueue: 0, errors: 0 };
const latencies: number[] = [];
const errorSamples: string[] = [];
let stopping = false;

async function timed(path: string, init: RequestInit = {}): Promise<Response> {
  const started = performance.now();
  const response = await fetch(`${url}${path}`, { ...init, headers });
  latencies.push(performance.now() - started);
  return response;
}

function error(what: string): void {
  counts.errors++;
  if (errorSamples.length < 10) errorSamples.push(what);
}

async function step(turn: number): Promise<void> {
  const list = await timed("/v1/review/items?state=open&limit=20");
  counts.lists++;
  if (list.status !== 200) return error(`list ${list.status} ${await list.text()}`);
  const page = (await list.json()) as { items: { id: number }[] };
  if (page.items.length === 0) {
    counts.emptyQueue++;
    await new Promise((r) => setTimeout(r, 250));
    return;
  }
  const id = page.items[turn % page.items.length].id;
  const claim = await timed(`/v1/review/items/${id}/claim`, { method: "POST" });
  if (claim.status === 409) {
    counts.claimConflicts++;
    await claim.arrayBuffer();
    return;
  }
  if (claim.status !== 200) return error(`claim ${claim.status} ${await claim.text()}`);
  await claim.arrayBuffer();
  counts.claims++;
  const outcome = turn % 2 === 0 ? "fraud" : "legitimate";
  const decision = await timed(`/v1/review/items/${id}/decision`, { method: "POST", body: JSON.stringify({ outcome, note: `soak decision ${turn}` }) });
  if (decision.status !== 200) return error(`decision ${decision.status} ${await decision.text()}`);
  await decision.arrayBuffer();
  counts.decisions++;
}

function finish(): void {
  const sorted = [...latencies].sort((a, b) => a - b);
  const at = (q: number) => (sorted.length ? Math.round(sorted[Math.min(sorted.length - 1, Math.ceil(q * sorted.length) - 1)] * 100) / 100 : null);
  writeFileSync(outFile, JSON.stringify({ ...counts, requests: latencies.length, latencyMs: { p50: at(0.5), p99: at(0.99) }, errorSamples }));
}

process.on("SIGTERM", () => {
  stopping = true;
});

for (let turn = 0; !stopping; turn++) {
  try {
    await step(turn);
  } catch (cause) {
    error(`network: ${String(cause)}`);
  }
}
finish();
