/**
 * wrangler dev refuses to start when wrangler.toml serves static assets from a folder that does not
 * exist; on a fresh clone that folder is the review app's build output. One reading of that rule for
 * `npm start` and the benchmarks.
 */
import { existsSync, readFileSync } from "node:fs";
import { join } from "node:path";

/** wrangler.toml's `[assets] directory` when it is declared and missing under `root`, else null. */
export function missingAssetsDirectory(root: string): string | null {
  const config = readFileSync(join(root, "wrangler.toml"), "utf8");
  const section = /^\[assets\]\s*$([\s\S]*?)(?=^\[)/m.exec(config + "\n[");
  const directory = section ? /^\s*directory\s*=\s*"([^"]+)"/m.exec(section[1])?.[1] : undefined;
  return directory && !existsSync(join(root, directory)) ? directory : null;
}
