/**
 * `npm run deploy`: puts isodense on a Cloudflare account, and can be run again at any time.
 *
 * 1. reads wrangler.toml with wrangler's own reader and the credentials secrets from
 *    `--secrets-file` or the environment (refused if they are the demo ones or break the
 *    worker's credential rules);
 * 2. asks the account what exists (`kv namespace list`, `d1 list --json`, `queues info`,
 *    `secret list --format json`) and plans (scripts/deploy-plan.ts): create only what is missing;
 * 3. creates the missing KV namespace, D1 database and queues, then lists again to learn their ids;
 * 4. writes wrangler.deploy.json (git-ignored): the committed config with those ids filled in, so
 *    wrangler.toml stays free of account-specific ids and keeps serving local development;
 * 5. applies the D1 migrations remotely (already applied ones are skipped by wrangler) and checks
 *    that none is left;
 * 6. deploys with `--secrets-file` (a 0600 temporary file, removed afterwards), which also applies
 *    the Durable Object migrations of the config. Secrets not provided stay as they are.
 *
 * `--plan` stops after step 2 and prints the commands; `--plan --assume-empty` plans a first
 * deploy without contacting Cloudflare. docs/deploy.md has the whole procedure.
 */
import { spawn } from "node:child_process";
import { existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { dirname, join, resolve } from "node:path";
import { fileURLToPath } from "node:url";
import { stringOption, type CommandSpec } from "../cli/args";
import { parseScriptArgs } from "./script-args";
import {
  type CommandResult,
  DeployInputError,
  type DeployPlan,
  type Inventory,
  SECRETS_FILE_PLACEHOLDER,
  deployTargetOf,
  describeStep,
  emptyInventory,
  isCreateStep,
  migrationsCurrent,
  parseD1List,
  parseKvNamespaceList,
  parseQueueInfo,
  parseSecretList,
  planDeploy,
} from "./deploy-plan";
import { demoTokenProblems, type SecretValues, secretsFileText, secretsFrom, workerRuleProblems } from "./deploy-secrets";

const root = resolve(dirname(fileURLToPath(import.meta.url)), "..");
const wranglerBin = join(root, "node_modules/.bin/wrangler");
/** The generated config, relative to the repository root so its paths resolve as wrangler.toml's do. */
const DEPLOY_CONFIG = "wrangler.deploy.json";
/** No telemetry or banner; wrangler still needs the network for the account's API. */
const wranglerEnv = { ...process.env, WRANGLER_SEND_METRICS: "false", WRANGLER_HIDE_BANNER: "true" };

const spec: CommandSpec = {
  command: "npm run deploy --",
  summary: "Provisions KV, D1 and the queues on a Cloudflare account if missing, sets the secrets, applies the D1 migrations and deploys.",
  positionals: [],
  options: [
    { name: "plan", kind: "switch", description: "print what would run (after reading what exists) and stop" },
    { name: "assume-empty", kind: "switch", description: "with --plan: plan a first deploy without contacting Cloudflare" },
    {
      name: "secrets-file",
      kind: "string",
      valueName: "path",
      description: "dotenv file with FLOW_CREDENTIALS, ANALYST_CREDENTIALS, ADMIN_CREDENTIALS",
      defaultText: "the environment variables of the same names",
    },
  ],
  notes: [
    "Log in first (`npx wrangler login`) or set CLOUDFLARE_API_TOKEN and CLOUDFLARE_ACCOUNT_ID.",
    "Exit codes: 0 deployed (or planned), 1 a step failed or the plan has problems, 2 usage.",
  ],
};

function say(line: string): void {
  process.stdout.write(`${line}\n`);
}

/** Runs wrangler with captured output (for the list commands). */
function capture(argv: string[]): Promise<CommandResult> {
  return new Promise((resolvePromise, reject) => {
    const child = spawn(wranglerBin, argv, { cwd: root, env: wranglerEnv, stdio: ["ignore", "pipe", "pipe"] });
    let stdout = "";
    let stderr = "";
    child.stdout.on("data", (chunk) => (stdout += chunk));
    child.stderr.on("data", (chunk) => (stderr += chunk));
    child.on("error", reject);
    child.on("close", (code) => resolvePromise({ code: code ?? 1, stdout, stderr }));
  });
}

/** Runs wrangler with the terminal attached (wrangler's own prompts and progress stay visible). */
function run(argv: string[], shown: string[] = argv): Promise<void> {
  say(`\n▸ wrangler ${shown.join(" ")}`);
  return new Promise((resolvePromise, reject) => {
    const child = spawn(wranglerBin, argv, { cwd: root, env: wranglerEnv, stdio: "inherit" });
    child.on("error", reject);
    child.on("close", (code) => (code === 0 ? resolvePromise() : reject(new Error(`wrangler ${shown.join(" ")} exited with ${code}`))));
  });
}

/** Asks the account what exists, with one read-only wrangler call per kind (one per queue). */
async function discover(raw: Record<string, unknown>): Promise<Inventory> {
  const target = deployTargetOf(raw);
  const kv = await capture(["kv", "namespace", "list"]);
  if (kv.code !== 0) throw new DeployInputError(`wrangler kv namespace list failed:\n${kv.stderr || kv.stdout}`);
  const d1 = await capture(["d1", "list", "--json"]);
  if (d1.code !== 0) throw new DeployInputError(`wrangler d1 list failed:\n${d1.stderr || d1.stdout}`);
  const queues = new Map<string, string>();
  for (const name of target.queues) {
    const id = parseQueueInfo(name, await capture(["queues", "info", name]));
    if (id) queues.set(name, id);
  }
  const worker = parseSecretList(target.workerName, await capture(["secret", "list", "--format", "json"]));
  return { kvNamespaces: parseKvNamespaceList(kv.stdout), d1Databases: parseD1List(d1.stdout), queues, worker };
}

function printPlan(plan: DeployPlan): void {
  for (const line of plan.summary) say(`  ${line}`);
  if (plan.problems.length > 0) {
    say("\nNot deploying:");
    for (const problem of plan.problems) say(`  ✗ ${problem}`);
    return;
  }
  say("\nSteps:");
  plan.steps.forEach((step, i) => say(`  ${i + 1}. ${describeStep(step)}`));
}

async function readSecrets(secretsFile: string | undefined): Promise<{ values: SecretValues; problems: string[] }> {
  if (secretsFile !== undefined && !existsSync(secretsFile)) return { values: {}, problems: [`--secrets-file ${secretsFile}: no such file`] };
  const values = secretsFrom(process.env, secretsFile === undefined ? undefined : readFileSync(secretsFile, "utf8"));
  const problems = [...demoTokenProblems(values, readFileSync(join(root, ".dev.vars.example"), "utf8")), ...(await workerRuleProblems(values, root))];
  return { values, problems };
}

async function main(): Promise<number> {
  const args = parseScriptArgs(process.argv.slice(2), spec, "deploy");
  if (typeof args === "number") return args;
  const planOnly = args.options.get("plan") === true;
  const assumeEmpty = args.options.get("assume-empty") === true;
  if (assumeEmpty && !planOnly) {
    process.stderr.write("deploy: --assume-empty only goes with --plan\n");
    return 2;
  }
  const secretsFile = stringOption(args, "secrets-file");
  const { experimental_readRawConfig } = await import("wrangler");
  const raw = experimental_readRawConfig({ config: join(root, "wrangler.toml") }).rawConfig as Record<string, unknown>;
  const secrets = await readSecrets(secretsFile === undefined ? undefined : resolve(secretsFile));

  say(`Deploy plan for Worker "${deployTargetOf(raw).workerName}"${assumeEmpty ? " on an empty account (nothing asked of Cloudflare)" : ""}:`);
  let inventory = assumeEmpty ? emptyInventory() : await discover(raw);
  let plan = planDeploy(raw, inventory, Object.keys(secrets.values), DEPLOY_CONFIG);
  plan.problems.push(...secrets.problems);
  printPlan(plan);
  if (plan.problems.length > 0) return 1;
  if (planOnly) return 0;

  for (const step of plan.steps.filter(isCreateStep)) if ("argv" in step) await run(step.argv);
  if (plan.steps.some(isCreateStep)) {
    inventory = await discover(raw);
    plan = planDeploy(raw, inventory, Object.keys(secrets.values), DEPLOY_CONFIG);
    const stillMissing = plan.steps.filter(isCreateStep);
    if (stillMissing.length > 0 || plan.deployConfig === null) {
      throw new DeployInputError(`created, but the account does not list: ${stillMissing.map(describeStep).join("; ")}`);
    }
  }
  if (plan.deployConfig === null) throw new DeployInputError("no resource ids to write the deploy config with");

  const secretsDir = mkdtempSync(join(tmpdir(), "isodense-deploy-"));
  const secretsPath = join(secretsDir, "secrets.json");
  try {
    for (const step of plan.steps) {
      if (step.kind === "write-config") {
        writeFileSync(join(root, step.path), `${JSON.stringify(plan.deployConfig, null, 2)}\n`);
        say(`\n▸ wrote ${step.path}`);
      } else if (step.kind === "migrate") await run(step.argv);
      else if (step.kind === "check-migrations") {
        if (!migrationsCurrent(step.database, await capture(step.argv))) {
          throw new DeployInputError(`${step.database} still has migrations to apply (declined?); not deploying code that needs them`);
        }
        say(`\n▸ ${step.database}: every migration applied`);
      } else if (step.kind === "deploy") {
        if (step.secrets.length > 0) writeFileSync(secretsPath, secretsFileText(secrets.values), { mode: 0o600 });
        await run(
          step.argv.map((a) => (a === SECRETS_FILE_PLACEHOLDER ? secretsPath : a)),
          step.argv,
        );
      }
    }
  } finally {
    rmSync(secretsDir, { recursive: true, force: true });
  }
  say("\nDeployed. Publish a model next: npx isodense publish model.json --url https://<worker>.workers.dev --token <admin token> --activate");
  return 0;
}

main().then(
  (code) => process.exit(code),
  (error) => {
    process.stderr.write(`deploy: ${error instanceof Error ? error.message : String(error)}\n`);
    process.exit(1);
  },
);
