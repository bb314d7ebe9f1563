/**
 * Request-validation benchmark: score requests per second through `validatePayment` (the API
 * contract's request schema, then the live model's feature checks), beside scoring the same
 * payments (`Scorer.score` + `explain`, what the route does next) in the same run. The ratio
 * validation ÷ scoring time is the figure to compare before and after a change to the contract:
 * both sides feel the machine's load alike. zod runs jitless, as on workerd (no `new Function`
 * there), and again with its JIT, as in Node. Sides alternate for ROUNDS rounds; each keeps its
 * best, because neighbours on this shared machine make single rounds vary.
 *
 * `node bin/run-ts.js bench/validate-request.ts` prints the figures and writes
 * bench/results/validate-request.json.
 */
import { mkdirSync, writeFileSync } from "node:fs";
import { z } from "zod";
import { compileModel, Scorer } from "../shared-model/src";
import type { LoadedModel } from "../worker/src/scoring/model-cache";
import { validatePayment } from "../worker/src/scoring/score-payment";
import { fitShopModel, scoreBody, shopPayments } from "../worker/test/fixtures";

const ROUNDS = 5;
const ROUND_MS = 600;
const POOL = 512;

/** Calls per second of `run` over the pool, for about ROUND_MS. */
function perSecond(run: (i: number) => void): number {
  let calls = 0;
  const start = performance.now();
  let elapsed = 0;
  while (elapsed < ROUND_MS) {
    for (let i = 0; i < POOL; i++) run(i);
    calls += POOL;
    elapsed = performance.now() - start;
  }
  return (calls * 1000) / elapsed;
}

const artifact = await fitShopModel({ version: "bench-validate" });
const compiled = compileModel(artifact);
const model: LoadedModel = { version: artifact.version, artifact, compiled, scorer: new Scorer(compiled), loadedAt: new Date().toISOString(), recordSpec: null };
const bodies = shopPayments(POOL, 7).map((p, i) => scoreBody(`bench-tx-${i}`, p, { accountRef: `acct-${i % 97}` }));
const clock = { nowMs: Date.now(), toleranceMs: 0 };
const valid = bodies.map((body) => {
  const checked = validatePayment(body, model, "", clock);
  if (!checked.ok || "record" in checked.value) throw new Error(`benchmark body ${JSON.stringify(body)} did not validate`);
  return checked.value;
});

function validate(i: number): void {
  validatePayment(bodies[i], model, "", clock);
}
function score(i: number): void {
  const payment = valid[i];
  model.scorer.score(payment.raw, payment.segment);
  model.scorer.explain(payment.raw, payment.segment, 3);
}

const figures: Record<string, { validatePerSecond: number; scorePerSecond: number; validateToScoreTime: number }> = {};
for (const mode of ["jitless", "jit"] as const) {
  z.config({ jitless: mode === "jitless" });
  // Warm-up so the optimizing compiler has settled before the clock starts.
  for (let i = 0; i < 20; i++) {
    for (let k = 0; k < POOL; k++) {
      validate(k);
      score(k);
    }
  }
  let bestValidate = 0;
  let bestScore = 0;
  for (let round = 0; round < ROUNDS; round++) {
    bestValidate = Math.max(bestValidate, perSecond(validate));
    bestScore = Math.max(bestScore, perSecond(score));
  }
  figures[mode] = { validatePerSecond: Math.round(bestValidate), scorePerSecond: Math.round(bestScore), validateToScoreTime: Number((bestScore / bestValidate).toFixed(3)) };
  console.log(
    `zod ${mode.padEnd(7)}  validate ${figures[mode].validatePerSecond.toLocaleString("en")} /s   score + explain ${figures[mode].scorePerSecond.toLocaleString("en")} /s   validation time ÷ scoring time ${figures[mode].validateToScoreTime}`,
  );
}

const results = new URL("results/", import.meta.url);
mkdirSync(results, { recursive: true });
writeFileSync(new URL("validate-request.json", results), `${JSON.stringify({ measuredAt: new Date().toISOString(), features: compiled.features.length, figures }, null, 2)}\n`);
