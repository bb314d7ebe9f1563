/**
 * The decisions of `npm run deploy`, kept free of I/O so they can be tested against wrangler's real
 * output formats: what the committed wrangler config asks for, what the Cloudflare account already
 * holds (parsed from wrangler's list commands), and from the two the steps to run. Every step only
 * creates what is missing, so running the whole plan again changes nothing that exists.
 *
 * Output formats, as printed by wrangler 4.86.0 (node_modules/wrangler/wrangler-dist/cli.js):
 * - `wrangler kv namespace list` (src/kv/index.ts): `JSON.stringify(namespaces, null, "  ")`, the
 *   Cloudflare SDK's namespace objects `{ id, title, supports_url_encoding }`.
 * - `wrangler d1 list --json` (src/d1/list.ts): `JSON.stringify(databases, null, 2)`, the D1 API's
 *   `{ uuid, name, version, created_at, … }`.
 * - `wrangler queues info <name>` (src/queues/cli/commands/info.ts): `Queue Name: …` /
 *   `Queue ID: …` lines; a missing queue fails with `Queue "<name>" does not exist.` (`queues list`
 *   prints only a table and one page of it, so it is not used).
 * - `wrangler d1 migrations list <db> --remote` (src/d1/migrations/list.ts): `✅ No migrations to
 *   apply!` when the database is current, else `Migrations to be applied:` and a table.
 * - `wrangler secret list --format json` (src/secret/index.ts): `[{ "name", "type" }]`; a Worker
 *   never deployed fails with `Worker "<name>" not found.`
 */

/** Names of the Worker secrets the service reads (worker/src/middleware/credentials.ts). */
export const REQUIRED_SECRETS = ["FLOW_CREDENTIALS", "ANALYST_CREDENTIALS", "ADMIN_CREDENTIALS"] as const;

/** One Workers secret the service needs. */
export type SecretName = (typeof REQUIRED_SECRETS)[number];

/** A KV namespace binding of the config; `title` is the namespace's name on the account. */
export interface KvWant {
  binding: string;
  title: string;
  /** Set when the committed config pins the namespace id. */
  id?: string;
}

/** A D1 binding of the config. */
export interface D1Want {
  binding: string;
  databaseName: string;
  /** Set when the committed config pins the database id. */
  databaseId?: string;
}

/** A Durable Object binding of the config. */
export interface DurableObjectWant {
  binding: string;
  className: string;
  /** The `[[migrations]]` tag that introduces the class, or null when none does. */
  migrationTag: string | null;
}

/** What the committed wrangler config asks the account to hold. */
export interface DeployTarget {
  workerName: string;
  kv: KvWant[];
  d1: D1Want[];
  /** Every queue named by a producer, a consumer or a dead-letter setting, each once. */
  queues: string[];
  /** Durable Objects implemented by this Worker (bindings to another script's class are left out). */
  durableObjects: DurableObjectWant[];
}

/** What the account holds, as far as the deploy is concerned. */
export interface Inventory {
  kvNamespaces: { id: string; title: string }[];
  d1Databases: { uuid: string; name: string }[];
  /** Queue name → queue id, for the queues that exist. */
  queues: Map<string, string>;
  /** Whether the Worker has been deployed before, and the names of the secrets it already has. */
  worker: { exists: boolean; secretNames: string[] };
}

/** Exit status and output of one wrangler command. */
export interface CommandResult {
  code: number;
  stdout: string;
  stderr: string;
}

/** One step of the plan. `argv` are wrangler's arguments (after `wrangler`). */
export type DeployStep =
  | { kind: "create-kv"; title: string; argv: string[] }
  | { kind: "create-d1"; name: string; argv: string[] }
  | { kind: "create-queue"; name: string; argv: string[] }
  | { kind: "write-config"; path: string }
  | { kind: "migrate"; database: string; argv: string[] }
  | { kind: "check-migrations"; database: string; argv: string[] }
  | { kind: "deploy"; secrets: SecretName[]; argv: string[] };

/** The outcome of planning: steps to run, or the problems that stop the deploy. */
export interface DeployPlan {
  steps: DeployStep[];
  /** One line per resource: what exists and what will happen to it. */
  summary: string[];
  /** Reasons not to deploy; when non-empty, nothing is run. */
  problems: string[];
  /**
   * The config `wrangler deploy` reads: the committed one with the resource ids filled in; null
   * while a resource still has to be created (its id is known only afterwards).
   */
  deployConfig: Record<string, unknown> | null;
}

/** Placeholder printed for the temporary secrets file (its path and content are never shown). */
export const SECRETS_FILE_PLACEHOLDER = "<secrets file>";

/** A problem with the wrangler config or with wrangler's output. */
export class DeployInputError extends Error {
  constructor(message: string) {
    super(message);
    this.name = "DeployInputError";
  }
}

/**
 * Reads the deploy-relevant parts of a raw wrangler config (as parsed from wrangler.toml by
 * wrangler's own reader). A KV namespace is named `<worker>-<binding in lower case>` on the account,
 * e.g. `isodense-models`.
 *
 * @throws {DeployInputError} naming the field when the config lacks a name or a binding is malformed.
 * @example deployTargetOf({ name: "isodense", kv_namespaces: [{ binding: "MODELS" }] }).kv
 *   // → [{ binding: "MODELS", title: "isodense-models" }]
 */
export function deployTargetOf(raw: Record<string, unknown>): DeployTarget {
  const workerName = raw.name;
  if (typeof workerName !== "string" || workerName === "") throw new DeployInputError("wrangler config: `name` must name the Worker");
  const kv = tableList(raw.kv_namespaces, "kv_namespaces").map((entry, i): KvWant => {
    const binding = stringField(entry, "binding", `kv_namespaces[${i}]`);
    const id = optionalString(entry, "id", `kv_namespaces[${i}]`);
    return { binding, title: `${workerName}-${binding.toLowerCase().replace(/_/g, "-")}`, ...(id ? { id } : {}) };
  });
  const d1 = tableList(raw.d1_databases, "d1_databases").map((entry, i): D1Want => {
    const databaseId = optionalString(entry, "database_id", `d1_databases[${i}]`);
    return {
      binding: stringField(entry, "binding", `d1_databases[${i}]`),
      databaseName: stringField(entry, "database_name", `d1_databases[${i}]`),
      ...(databaseId ? { databaseId } : {}),
    };
  });
  const queueSection = (raw.queues ?? {}) as Record<string, unknown>;
  const queues: string[] = [];
  const addQueue = (name: string) => {
    if (!queues.includes(name)) queues.push(name);
  };
  tableList(queueSection.producers, "queues.producers").forEach((p, i) => addQueue(stringField(p, "queue", `queues.producers[${i}]`)));
  tableList(queueSection.consumers, "queues.consumers").forEach((c, i) => {
    addQueue(stringField(c, "queue", `queues.consumers[${i}]`));
    const deadLetter = optionalString(c, "dead_letter_queue", `queues.consumers[${i}]`);
    if (deadLetter) addQueue(deadLetter);
  });
  const introducedBy = new Map<string, string>();
  tableList(raw.migrations, "migrations").forEach((m, i) => {
    const tag = stringField(m, "tag", `migrations[${i}]`);
    for (const key of ["new_classes", "new_sqlite_classes"]) {
      for (const name of (m[key] as unknown[] | undefined) ?? []) if (typeof name === "string") introducedBy.set(name, tag);
    }
    for (const renamed of (m.renamed_classes as { to?: unknown }[] | undefined) ?? []) {
      if (typeof renamed?.to === "string") introducedBy.set(renamed.to, tag);
    }
  });
  const doSection = (raw.durable_objects ?? {}) as Record<string, unknown>;
  const durableObjects = tableList(doSection.bindings, "durable_objects.bindings")
    .filter((b) => b.script_name === undefined)
    .map((b, i): DurableObjectWant => {
      const className = stringField(b, "class_name", `durable_objects.bindings[${i}]`);
      return { binding: stringField(b, "name", `durable_objects.bindings[${i}]`), className, migrationTag: introducedBy.get(className) ?? null };
    });
  return { workerName, kv, d1, queues, durableObjects };
}

/**
 * Parses `wrangler kv namespace list`.
 *
 * @throws {DeployInputError} when the output holds no JSON array of `{ id, title }`.
 * @example parseKvNamespaceList('[\n  {\n    "id": "0f…",\n    "title": "isodense-models"\n  }\n]')
 */
export function parseKvNamespaceList(stdout: string): { id: string; title: string }[] {
  return jsonArray(stdout, "wrangler kv namespace list").map((item, i) => ({
    id: stringField(item, "id", `kv namespace list[${i}]`),
    title: stringField(item, "title", `kv namespace list[${i}]`),
  }));
}

/**
 * Parses `wrangler d1 list --json`.
 *
 * @throws {DeployInputError} when the output holds no JSON array of `{ uuid, name }`.
 */
export function parseD1List(stdout: string): { uuid: string; name: string }[] {
  return jsonArray(stdout, "wrangler d1 list --json").map((item, i) => ({
    uuid: stringField(item, "uuid", `d1 list[${i}]`),
    name: stringField(item, "name", `d1 list[${i}]`),
  }));
}

/**
 * Reads `wrangler queues info <name>`: the queue's id when it exists, null when wrangler says it
 * does not.
 *
 * @throws {DeployInputError} with wrangler's message for any other failure (no login, no network).
 */
export function parseQueueInfo(name: string, result: CommandResult): string | null {
  const text = stripAnsi(`${result.stdout}\n${result.stderr}`);
  if (result.code === 0) {
    const id = /^Queue ID:\s*(\S+)/m.exec(text)?.[1];
    if (!id) throw new DeployInputError(`wrangler queues info ${name}: no "Queue ID:" line in its output`);
    return id;
  }
  if (text.includes(`Queue "${name}" does not exist`)) return null;
  throw new DeployInputError(`wrangler queues info ${name} failed: ${lastLines(text)}`);
}

/**
 * Reads `wrangler secret list --format json`: whether the Worker exists and its secret names.
 *
 * @throws {DeployInputError} with wrangler's message for any failure other than "not found".
 */
export function parseSecretList(workerName: string, result: CommandResult): Inventory["worker"] {
  if (result.code !== 0) {
    const text = stripAnsi(`${result.stdout}\n${result.stderr}`);
    if (text.includes(`Worker "${workerName}"`) && text.includes("not found")) return { exists: false, secretNames: [] };
    throw new DeployInputError(`wrangler secret list failed: ${lastLines(text)}`);
  }
  const secretNames = jsonArray(result.stdout, "wrangler secret list").map((item, i) => stringField(item, "name", `secret list[${i}]`));
  return { exists: true, secretNames };
}

/**
 * Reads `wrangler d1 migrations list <db> --remote`: true when no migration is left to apply.
 *
 * @throws {DeployInputError} with wrangler's message when the command failed.
 */
export function migrationsCurrent(database: string, result: CommandResult): boolean {
  const text = stripAnsi(`${result.stdout}\n${result.stderr}`);
  if (result.code === 0 && text.includes("No migrations to apply")) return true;
  if (result.code === 0 && text.includes("Migrations to be applied")) return false;
  throw new DeployInputError(`wrangler d1 migrations list ${database} failed: ${lastLines(text)}`);
}

/** An inventory of an account that holds nothing yet (for `--plan --assume-empty`). */
export function emptyInventory(): Inventory {
  return { kvNamespaces: [], d1Databases: [], queues: new Map(), worker: { exists: false, secretNames: [] } };
}

/**
 * Decides what to run: create each missing KV namespace, D1 database and queue; once every id is
 * known, write the deploy config, apply the D1 migrations remotely, then deploy with the provided
 * secrets. Durable Objects need no step of their own: `wrangler deploy` applies the config's
 * `[[migrations]]`.
 *
 * @param raw - the committed wrangler config, parsed (its resource ids are filled into a copy).
 * @param providedSecrets - names of the secrets given for this run (values never reach the plan).
 * @param deployConfigPath - where the deploy config is written, relative to the repository root.
 * @example planDeploy(raw, emptyInventory(), ["FLOW_CREDENTIALS"], "wrangler.deploy.json").problems
 *   // → ["ANALYST_CREDENTIALS is not set on the Worker and was not provided …", …]
 */
export function planDeploy(raw: Record<string, unknown>, inventory: Inventory, providedSecrets: readonly string[], deployConfigPath: string): DeployPlan {
  const target = deployTargetOf(raw);
  const steps: DeployStep[] = [];
  const summary: string[] = [];
  const problems: string[] = [];
  const kvIds = new Map<string, string>();
  const d1Ids = new Map<string, string>();

  for (const want of target.kv) {
    const found = inventory.kvNamespaces.map((ns) => ({ id: ns.id, name: ns.title }));
    const id = resolveId(`KV namespace ${want.binding}`, want.title, want.id, found, summary);
    if (id) kvIds.set(want.binding, id);
    else steps.push({ kind: "create-kv", title: want.title, argv: ["kv", "namespace", "create", want.title, "--update-config=false"] });
  }
  for (const want of target.d1) {
    const found = inventory.d1Databases.map((db) => ({ id: db.uuid, name: db.name }));
    const id = resolveId(`D1 database ${want.binding}`, want.databaseName, want.databaseId, found, summary);
    if (id) d1Ids.set(want.binding, id);
    else steps.push({ kind: "create-d1", name: want.databaseName, argv: ["d1", "create", want.databaseName, "--update-config=false"] });
  }
  for (const name of target.queues) {
    const id = inventory.queues.get(name);
    if (id) summary.push(`queue ${name}: exists (id ${id})`);
    else {
      summary.push(`queue ${name}: missing → create`);
      steps.push({ kind: "create-queue", name, argv: ["queues", "create", name] });
    }
  }
  for (const durable of target.durableObjects) {
    if (durable.migrationTag === null) problems.push(`Durable Object ${durable.binding}: class ${durable.className} is introduced by no [[migrations]] entry (new_sqlite_classes)`);
    else summary.push(`Durable Object ${durable.binding} (${durable.className}): created or kept by wrangler deploy (migration "${durable.migrationTag}")`);
  }
  const secretsNow: SecretName[] = [];
  for (const name of REQUIRED_SECRETS) {
    if (providedSecrets.includes(name)) {
      secretsNow.push(name);
      summary.push(`secret ${name}: provided → uploaded with the deploy`);
    } else if (inventory.worker.secretNames.includes(name)) summary.push(`secret ${name}: already set on the Worker → kept`);
    else problems.push(`${name} is not set on the Worker and was not provided (environment variable or --secrets-file)`);
  }

  const allKnown = target.kv.every((w) => kvIds.has(w.binding)) && target.d1.every((w) => d1Ids.has(w.binding));
  const deployConfig = allKnown ? withResourceIds(raw, kvIds, d1Ids) : null;
  steps.push({ kind: "write-config", path: deployConfigPath });
  for (const want of target.d1) {
    steps.push({ kind: "migrate", database: want.databaseName, argv: ["d1", "migrations", "apply", want.databaseName, "--remote", "--config", deployConfigPath] });
    // Declining wrangler's confirmation still exits 0, so the deploy goes on only once none is left.
    steps.push({ kind: "check-migrations", database: want.databaseName, argv: ["d1", "migrations", "list", want.databaseName, "--remote", "--config", deployConfigPath] });
  }
  const deployArgv = ["deploy", "--config", deployConfigPath];
  if (secretsNow.length > 0) deployArgv.push("--secrets-file", SECRETS_FILE_PLACEHOLDER);
  steps.push({ kind: "deploy", secrets: secretsNow, argv: deployArgv });
  return { steps, summary, problems, deployConfig };
}

/** True for the steps that create a resource on the account. */
export function isCreateStep(step: DeployStep): boolean {
  return step.kind === "create-kv" || step.kind === "create-d1" || step.kind === "create-queue";
}

/** How a step reads on the terminal: the wrangler command, or what the script itself does. */
export function describeStep(step: DeployStep): string {
  if (step.kind === "write-config") return `write ${step.path} (the committed config with the resource ids filled in)`;
  return `wrangler ${step.argv.join(" ")}`;
}

/**
 * The id of a bound resource: pinned in the committed config, else found by name on the account
 * (names of KV namespaces and D1 databases are unique per account); null when it must be created.
 */
function resolveId(label: string, name: string, pinned: string | undefined, found: { id: string; name: string }[], summary: string[]): string | null {
  if (pinned) {
    summary.push(`${label}: id ${pinned} pinned in the committed config`);
    return pinned;
  }
  const id = found.find((resource) => resource.name === name)?.id ?? null;
  summary.push(id ? `${label}: "${name}" exists (id ${id})` : `${label}: "${name}" missing → create`);
  return id;
}

function withResourceIds(raw: Record<string, unknown>, kvIds: Map<string, string>, d1Ids: Map<string, string>): Record<string, unknown> {
  const copy = structuredClone(raw) as Record<string, unknown>;
  for (const entry of tableList(copy.kv_namespaces, "kv_namespaces")) entry.id = kvIds.get(entry.binding as string);
  for (const entry of tableList(copy.d1_databases, "d1_databases")) entry.database_id = d1Ids.get(entry.binding as string);
  return copy;
}

function tableList(value: unknown, field: string): Record<string, unknown>[] {
  if (value === undefined) return [];
  if (!Array.isArray(value) || value.some((v) => typeof v !== "object" || v === null)) {
    throw new DeployInputError(`wrangler config: \`${field}\` must be a list of tables ([[${field}]])`);
  }
  return value as Record<string, unknown>[];
}

function stringField(entry: Record<string, unknown>, key: string, where: string): string {
  const value = entry[key];
  if (typeof value !== "string" || value === "") throw new DeployInputError(`${where}: \`${key}\` must be a non-empty string, got ${JSON.stringify(value)}`);
  return value;
}

function optionalString(entry: Record<string, unknown>, key: string, where: string): string | undefined {
  return entry[key] === undefined ? undefined : stringField(entry, key, where);
}

/** The JSON array in a command's output (wrangler may print notices before it). */
function jsonArray(stdout: string, command: string): Record<string, unknown>[] {
  const start = /^\[/m.exec(stdout)?.index ?? -1;
  let parsed: unknown;
  try {
    parsed = start >= 0 ? JSON.parse(stdout.slice(start)) : undefined;
  } catch {
    parsed = undefined;
  }
  if (!Array.isArray(parsed) || parsed.some((v) => typeof v !== "object" || v === null)) {
    throw new DeployInputError(`${command}: expected a JSON array of objects in its output, got: ${lastLines(stdout)}`);
  }
  return parsed as Record<string, unknown>[];
}

function stripAnsi(text: string): string {
  // biome-ignore lint/suspicious/noControlCharactersInRegex: ANSI colour codes start with ESC.
  return text.replace(/\u001b\[[0-9;]*m/g, "");
}

function lastLines(text: string): string {
  const lines = stripAnsi(text)
    .trim()
    .split("\n")
    .filter((l) => l.trim() !== "");
  return lines.slice(-3).join(" / ") || "(no output)";
}
