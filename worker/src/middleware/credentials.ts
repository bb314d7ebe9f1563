/**
 * Bearer credentials of the three roles, held as Workers secrets (`.dev.vars` locally):
 * `FLOW_CREDENTIALS`, `ANALYST_CREDENTIALS`, `ADMIN_CREDENTIALS`, each a comma-separated list of
 * `user:token` entries, so every caller has its own identity.
 *
 * Tokens are kept only as SHA-256 digests, and a presented token is hashed and compared with every
 * digest by a constant-time loop over all entries: the time taken does not depend on how many
 * leading bytes match, nor on which entry matched.
 */
import { ConfigError, type Env, type Problem } from "../env";

/** Roles: the payment flow scores; analysts work the review queue; admins may do everything. */
export type Role = "flow" | "analyst" | "admin";

/** Who is calling, as established from the bearer token. */
export interface Principal {
  role: Role;
  user: string;
}

/** Secret name of each role. */
export const CREDENTIAL_SECRETS: Record<Role, "FLOW_CREDENTIALS" | "ANALYST_CREDENTIALS" | "ADMIN_CREDENTIALS"> = {
  flow: "FLOW_CREDENTIALS",
  analyst: "ANALYST_CREDENTIALS",
  admin: "ADMIN_CREDENTIALS",
};

/** Shortest accepted token: 24 characters of a random alphabet is ≥ 128 bits for base64. */
export const MIN_TOKEN_LENGTH = 24;
const USER = /^[A-Za-z0-9][A-Za-z0-9._@-]{0,63}$/;
/** RFC 6750 b64token characters. */
const TOKEN = /^[A-Za-z0-9._~+/-]+=*$/;

interface Entry {
  principal: Principal;
  digest: Uint8Array;
}

/**
 * The parsed credential table.
 *
 * @example
 * const table = await CredentialTable.fromEnv(env);
 * const who = await table.identify("demo-flow-…"); // → { role: "flow", user: "checkout" } or null
 */
export class CredentialTable {
  private constructor(private readonly entries: readonly Entry[]) {}

  /**
   * Parses the three secrets. A missing or empty secret means the role has no users.
   *
   * @throws {ConfigError} naming the secret and the entry number (never the value) when an entry is
   *   not `user:token`, a user name or token breaks its rule, or a token is used twice.
   */
  static async fromEnv(env: Pick<Env, "FLOW_CREDENTIALS" | "ANALYST_CREDENTIALS" | "ADMIN_CREDENTIALS">): Promise<CredentialTable> {
    const problems: Problem[] = [];
    const parsed: { principal: Principal; token: string; secret: string; position: number }[] = [];
    for (const role of Object.keys(CREDENTIAL_SECRETS) as Role[]) {
      const secret = CREDENTIAL_SECRETS[role];
      const raw = env[secret];
      if (raw === undefined || raw.trim() === "") continue;
      raw.split(",").forEach((part, i) => {
        const entry = part.trim();
        const position = i + 1;
        const colon = entry.indexOf(":");
        if (colon < 0) {
          problems.push({ field: secret, rule: `entry ${position} must be user:token (no ':' found)` });
          return;
        }
        const user = entry.slice(0, colon);
        const token = entry.slice(colon + 1);
        if (!USER.test(user)) {
          problems.push({ field: secret, rule: `entry ${position}: the user name must be 1–64 of A–Z a–z 0–9 . _ @ - starting with a letter or digit` });
          return;
        }
        if (token.length < MIN_TOKEN_LENGTH || !TOKEN.test(token)) {
          problems.push({
            field: secret,
            rule: `entry ${position} (user ${user}): the token must be at least ${MIN_TOKEN_LENGTH} characters of A–Z a–z 0–9 - . _ ~ + / (RFC 6750)`,
          });
          return;
        }
        parsed.push({ principal: { role, user }, token, secret, position });
      });
    }
    const seen = new Map<string, string>();
    for (const p of parsed) {
      const earlier = seen.get(p.token);
      if (earlier) problems.push({ field: p.secret, rule: `entry ${p.position} (user ${p.principal.user}) reuses the token of ${earlier}; every token must be unique` });
      else seen.set(p.token, `${p.secret} entry ${p.position}`);
    }
    if (problems.length > 0) throw new ConfigError(problems);
    const entries = await Promise.all(parsed.map(async (p) => ({ principal: p.principal, digest: await sha256(p.token) })));
    return new CredentialTable(entries);
  }

  /** Number of configured users. */
  get size(): number {
    return this.entries.length;
  }

  /** The principal holding `token`, or null. Compares with every entry, in constant time each. */
  async identify(token: string): Promise<Principal | null> {
    const digest = await sha256(token);
    let found: Principal | null = null;
    for (const entry of this.entries) {
      // No early exit: every entry is compared in full whatever the outcome.
      if (digestsEqual(digest, entry.digest)) found = entry.principal;
    }
    return found;
  }
}

/**
 * Constant-time equality of two equal-length byte arrays (OR of XORs, no early exit).
 *
 * @example
 * digestsEqual(Uint8Array.of(1, 2), Uint8Array.of(1, 2)) // → true
 */
export function digestsEqual(a: Uint8Array, b: Uint8Array): boolean {
  if (a.length !== b.length) return false;
  let diff = 0;
  for (let i = 0; i < a.length; i++) diff |= a[i] ^ b[i];
  return diff === 0;
}

async function sha256(text: string): Promise<Uint8Array> {
  return new Uint8Array(await crypto.subtle.digest("SHA-256", new TextEncoder().encode(text)));
}

let cachedKey: string | undefined;
let cachedTable: Promise<CredentialTable> | undefined;

/**
 * The credential table for these secrets, parsed at first use and kept while the secrets stay
 * the same (a redeploy with new secrets starts new isolates anyway).
 *
 * @throws {ConfigError} as {@link CredentialTable.fromEnv}.
 */
export function credentialTable(env: Pick<Env, "FLOW_CREDENTIALS" | "ANALYST_CREDENTIALS" | "ADMIN_CREDENTIALS">): Promise<CredentialTable> {
  const key = [env.FLOW_CREDENTIALS, env.ANALYST_CREDENTIALS, env.ADMIN_CREDENTIALS].map((s) => s ?? "").join("\u0000");
  if (cachedTable === undefined || cachedKey !== key) {
    cachedKey = key;
    cachedTable = CredentialTable.fromEnv(env);
    // A malformed configuration is not cached as a rejected promise forever: retry next time.
    cachedTable.catch(() => {
      if (cachedKey === key) cachedTable = undefined;
    });
  }
  return cachedTable;
}
