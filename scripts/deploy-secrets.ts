/**
 * The credentials secrets `npm run deploy` uploads: read from a dotenv-style file or from the
 * environment, refused when they are the demo values of `.dev.vars.example`, and checked with the
 * worker's own credential rules before anything reaches the account. Values are never printed;
 * messages name the secret and the entry only.
 */
import { pathToFileURL } from "node:url";
import { join } from "node:path";
import { REQUIRED_SECRETS, type SecretName } from "./deploy-plan";
import { credentialsOf, parseDevVars } from "./dev-vars";

/** Secret values for one deploy, by name; a name is present only when a value was given. */
export type SecretValues = Partial<Record<SecretName, string>>;

/**
 * Picks the credentials secrets out of a `--secrets-file` (when given) or else the environment.
 * Empty values count as not given.
 *
 * @example secretsFrom({ FLOW_CREDENTIALS: "checkout:…" }, undefined) // → { FLOW_CREDENTIALS: "checkout:…" }
 */
export function secretsFrom(environment: Record<string, string | undefined>, fileText: string | undefined): SecretValues {
  const source = fileText === undefined ? environment : parseDevVars(fileText);
  const values: SecretValues = {};
  for (const name of REQUIRED_SECRETS) {
    const value = source[name]?.trim();
    if (value) values[name] = value;
  }
  return values;
}

/**
 * Problems with the secrets that make them unfit to deploy: a token taken from the demo file.
 *
 * @param demoText - the text of `.dev.vars.example`, whose tokens must never reach an account.
 */
export function demoTokenProblems(values: SecretValues, demoText: string): string[] {
  const demo = parseDevVars(demoText);
  const demoTokens = new Set<string>();
  for (const name of REQUIRED_SECRETS) for (const { token } of credentialsOf(demo, name)) demoTokens.add(token);
  const problems: string[] = [];
  for (const name of REQUIRED_SECRETS) {
    for (const { user, token } of credentialsOf(values, name)) {
      if (demoTokens.has(token)) problems.push(`${name} (user ${user}) uses a demo token from .dev.vars.example; generate a real one (openssl rand -hex 32)`);
    }
  }
  return problems;
}

/**
 * Checks the secrets with the worker's credential parser (worker/src/middleware/credentials.ts),
 * so a deploy is refused for exactly the entries the service would refuse at its first request.
 * The module is loaded by path: it is typed for the Workers runtime, not for Node scripts.
 *
 * @returns one message per broken rule (secret, entry and rule; never the value).
 */
export async function workerRuleProblems(values: SecretValues, repoRoot: string): Promise<string[]> {
  const moduleUrl = pathToFileURL(join(repoRoot, "worker/src/middleware/credentials.ts")).href;
  const { CredentialTable } = (await import(moduleUrl)) as {
    CredentialTable: { fromEnv(env: SecretValues): Promise<unknown> };
  };
  try {
    await CredentialTable.fromEnv(values);
    return [];
  } catch (error) {
    const problems = (error as { problems?: { field: string; rule: string }[] }).problems;
    if (!problems) throw error;
    return problems.map((p) => `${p.field}: ${p.rule}`);
  }
}

/** The secrets as the JSON object `wrangler deploy --secrets-file` reads. */
export function secretsFileText(values: SecretValues): string {
  return JSON.stringify(values);
}
