/**
 * Fixes a race in Miniflare's synchronous binding proxy, run by `postinstall` (`npm ci`).
 *
 * `SynchronousFetcher.fetch` sets a shared flag to 0, posts a request to its helper thread and
 * waits once on the flag; the helper posts the answer, sets the flag to 1, then notifies. When
 * the helper thread is descheduled between setting the flag and notifying, the caller reads the
 * answer (the flag is already 1, so its wait returns at once), starts the next call and goes to
 * sleep; the late notify of the previous call then wakes it before the new answer exists, it
 * finds no message, and fails `assert(message?.id === id)`. Every later call of that proxy then
 * reads the answer meant for the one before it. On a busy 2-core machine this showed as whole
 * test files failing at a `db.prepare()` or `.bind()` (privacy.test.ts, once per few runs).
 *
 * The fix waits until the flag is really 1 (a wake-up with the flag still 0 is a stale one), the
 * usual way to use a futex. The script is idempotent and fails loudly if Miniflare's code no
 * longer has the shape it patches, so an upgrade is looked at rather than silently unpatched.
 * With `--check` it changes nothing and fails unless the installed copy is patched (the worker
 * tests' global setup runs that, so a tree installed without the script is named, not flaky).
 */
import { readFileSync, writeFileSync } from "node:fs";
import { createRequire } from "node:module";

const MARKER = "/* isodense: wait until the answer is really there */";
const UNPATCHED = /(\n[ \t]*)Atomics\.wait\(\s*this\.#notifyHandle,\s*\/\* index \*\/\s*0,\s*\/\* value \*\/\s*0\s*\);/;

const require = createRequire(import.meta.url);
let file;
try {
  file = require.resolve("miniflare");
} catch {
  console.log("patch-miniflare-sync: miniflare is not installed; nothing to patch");
  process.exit(0);
}
const source = readFileSync(file, "utf8");
if (process.argv.includes("--check")) {
  if (!source.includes(MARKER)) {
    console.error(`patch-miniflare-sync: ${file} is not patched; run npm ci (or node scripts/patch-miniflare-sync.js)`);
    process.exit(1);
  }
} else if (source.includes(MARKER)) {
  console.log(`patch-miniflare-sync: ${file} already patched`);
} else if (UNPATCHED.test(source)) {
  const patched = source.replace(UNPATCHED, (_, indent) => `${indent}${MARKER}${indent}while (Atomics.load(this.#notifyHandle, 0) === 0) Atomics.wait(this.#notifyHandle, 0, 0);`);
  writeFileSync(file, patched);
  console.log(`patch-miniflare-sync: patched ${file}`);
} else {
  console.error(
    `patch-miniflare-sync: ${file} no longer has the SynchronousFetcher wait this script fixes; ` +
      "check whether the new Miniflare still has the race (see the comment in scripts/patch-miniflare-sync.js) and update or remove the patch",
  );
  process.exit(1);
}
