/**
 * Bindings, variables and secrets of the edge scoring service, and the error a deployment mistake
 * raises. `Env` is generated from wrangler.toml by `wrangler types` (`npm run env-types` writes
 * `worker/worker-configuration.d.ts`; `npm run check:env-types` fails when it is stale); secrets take
 * their names from `.dev.vars.example`. The `[vars]` are parsed in one place: `./settings.ts`.
 */
import type { Problem } from "./contract/wire";

/**
 * Worker bindings (KV `MODELS`, D1 `DB`, Queue `FLAGS`, `ASSETS`), plain-text variables (`[vars]`,
 * read through `readSettings`) and secrets (`FLOW_CREDENTIALS`, `ANALYST_CREDENTIALS`,
 * `ADMIN_CREDENTIALS`: comma-separated `user:token` entries per role).
 */
export type Env = Omit<Cloudflare.Env, Secret> & Partial<Pick<Cloudflare.Env, Secret>>;

/** Secrets (named in `.dev.vars.example`): a deployment may leave a role without credentials. */
type Secret = "FLOW_CREDENTIALS" | "ANALYST_CREDENTIALS" | "ADMIN_CREDENTIALS";

/** A field/rule pair: what was wrong and which rule it broke (declared in the API contract). */
export type { Problem };

/**
 * A deployment mistake (malformed variable or secret). Answered as a 500 that names the variable
 * and the rule, never its value.
 *
 * @example
 * throw new ConfigError([{ field: "MAX_BATCH", rule: "must be an integer from 1 to 1000 (received a non-integer)" }]);
 */
export class ConfigError extends Error {
  readonly problems: Problem[];
  constructor(problems: Problem[]) {
    super(`configuration error: ${problems.map((p) => `${p.field} ${p.rule}`).join("; ")}`);
    this.name = "ConfigError";
    this.problems = problems;
  }
}
