import { fileURLToPath } from "node:url";
import { experimental_readRawConfig } from "wrangler";
import { describe, expect, it } from "vitest";
import {
  DeployInputError,
  type Inventory,
  SECRETS_FILE_PLACEHOLDER,
  deployTargetOf,
  emptyInventory,
  isCreateStep,
  migrationsCurrent,
  parseD1List,
  parseKvNamespaceList,
  parseQueueInfo,
  parseSecretList,
  planDeploy,
  REQUIRED_SECRETS,
} from "./deploy-plan";

/** The committed wrangler.toml, read by wrangler's own reader as the deploy script reads it. */
const committed = experimental_readRawConfig({ config: fileURLToPath(new URL("../wrangler.toml", import.meta.url)) }).rawConfig as Record<string, unknown>;

// Outputs in the shapes wrangler 4.86.0 prints them (node_modules/wrangler/wrangler-dist/cli.js:
// kv namespace list → JSON.stringify(list, null, "  "); d1 list --json → JSON.stringify(list, null, 2);
// queues info → "Queue Name: …" lines; errors → "✘ [ERROR] …" in colour on stderr). Ids are invented.
const kvListOutput = JSON.stringify(
  [
    { id: "5c0b6f1e2d3a4b5c6d7e8f9012345678", title: "another-app-cache", supports_url_encoding: true },
    { id: "0f2a9c1b8d7e6f5a4b3c2d1e0f9a8b7c", title: "isodense-models", supports_url_encoding: true },
  ],
  null,
  "  ",
);
const d1ListOutput = JSON.stringify(
  [{ uuid: "8e4f2a10-5b6c-4d7e-9f01-23456789abcd", name: "isodense-review", version: "production", created_at: "2026-11-30T09:12:44.000Z", file_size: 118784, num_tables: 9 }],
  null,
  2,
);
const queueInfo = (name: string, id: string) => ({
  code: 0,
  stdout: `Queue Name: ${name}\nQueue ID: ${id}\nCreated On: 2026-11-30T09:13:02.000Z\nLast Modified: 2026-11-30T09:13:02.000Z\nNumber of Producers: 1\nProducers: worker:isodense\nNumber of Consumers: 1\nConsumers: worker:isodense\n`,
  stderr: "",
});
const wranglerError = (message: string) => ({
  code: 1,
  stdout: "",
  stderr: `\u001b[31m✘ \u001b[41;31m[\u001b[41;97mERROR\u001b[41;31m]\u001b[0m \u001b[1m${message}\u001b[0m\n\n`,
});

/** An account holding everything the committed config needs, with all secrets set. */
function fullInventory(): Inventory {
  return {
    kvNamespaces: parseKvNamespaceList(kvListOutput),
    d1Databases: parseD1List(d1ListOutput),
    queues: new Map([
      ["isodense-flags", "q-flags-1"],
      ["isodense-flags-dead", "q-dead-1"],
    ]),
    worker: { exists: true, secretNames: [...REQUIRED_SECRETS] },
  };
}

describe("reading wrangler's output", () => {
  it("takes the id and title of every KV namespace from the JSON list, even after a notice line", () => {
    expect(parseKvNamespaceList(`▲ [WARNING] a notice\n${kvListOutput}`)).toEqual([
      { id: "5c0b6f1e2d3a4b5c6d7e8f9012345678", title: "another-app-cache" },
      { id: "0f2a9c1b8d7e6f5a4b3c2d1e0f9a8b7c", title: "isodense-models" },
    ]);
  });

  it("takes the uuid and name of every D1 database from `d1 list --json`", () => {
    expect(parseD1List(d1ListOutput)).toEqual([{ uuid: "8e4f2a10-5b6c-4d7e-9f01-23456789abcd", name: "isodense-review" }]);
  });

  it("reads an empty account's empty lists as nothing found", () => {
    expect(parseKvNamespaceList("[]")).toEqual([]);
    expect(parseD1List("[]\n")).toEqual([]);
  });

  it("refuses output that is not the expected JSON list, quoting it", () => {
    expect(() => parseD1List("┌──────┐\n│ uuid │\n└──────┘")).toThrow(/d1 list --json: expected a JSON array/);
    expect(() => parseKvNamespaceList('[{"title":"x"}]')).toThrow(/`id` must be a non-empty string/);
  });

  it("reads a queue's id from `queues info`, and wrangler's does-not-exist error as a missing queue", () => {
    expect(parseQueueInfo("isodense-flags", queueInfo("isodense-flags", "4b0c1d"))).toBe("4b0c1d");
    const missing = wranglerError('Queue "isodense-flags" does not exist. To create it, run: wrangler queues create isodense-flags');
    expect(parseQueueInfo("isodense-flags", missing)).toBeNull();
  });

  it("treats any other `queues info` failure (no login, no network) as an error, not as a missing queue", () => {
    const noAuth = wranglerError("In a non-interactive environment, it's necessary to set a CLOUDFLARE_API_TOKEN environment variable for wrangler to work.");
    expect(() => parseQueueInfo("isodense-flags", noAuth)).toThrow(DeployInputError);
    expect(() => parseQueueInfo("isodense-flags", noAuth)).toThrow(/CLOUDFLARE_API_TOKEN/);
  });

  it("reads the secret names of a deployed Worker and 'not found' as a Worker never deployed", () => {
    const listed = { code: 0, stdout: JSON.stringify([{ name: "ADMIN_CREDENTIALS", type: "secret_text" }], null, "  "), stderr: "" };
    expect(parseSecretList("isodense", listed)).toEqual({ exists: true, secretNames: ["ADMIN_CREDENTIALS"] });
    const notFound = wranglerError('Worker "isodense" not found.\n\nIf this is a new Worker, run `wrangler deploy` first to create it.');
    expect(parseSecretList("isodense", notFound)).toEqual({ exists: false, secretNames: [] });
    expect(() => parseSecretList("isodense", wranglerError("Authentication error [code: 10000]"))).toThrow(/secret list failed: .*Authentication error/);
  });
});

describe("reading whether the database is current", () => {
  it("goes on only when wrangler says no migration is left to apply", () => {
    expect(migrationsCurrent("isodense-review", { code: 0, stdout: "\u2705 No migrations to apply!\n", stderr: "" })).toBe(true);
    const pending =
      "Migrations to be applied:\n┌──────────────────────────┐\n│ Name                     │\n├──────────────────────────┤\n│ 0006_add_limits.sql      │\n└──────────────────────────┘\n";
    expect(migrationsCurrent("isodense-review", { code: 0, stdout: pending, stderr: "" })).toBe(false);
    expect(() => migrationsCurrent("isodense-review", wranglerError("Couldn't find a D1 DB with the name or binding 'isodense-review'"))).toThrow(/Couldn't find a D1 DB/);
  });
});

describe("what the committed config asks for", () => {
  it("names the KV namespace after the Worker and binding, and lists each queue once, dead-letter included", () => {
    const target = deployTargetOf(committed);
    expect(target.workerName).toBe("isodense");
    expect(target.kv).toEqual([{ binding: "MODELS", title: "isodense-models" }]);
    expect(target.d1).toEqual([{ binding: "DB", databaseName: "isodense-review" }]);
    expect(target.queues).toEqual(["isodense-flags", "isodense-flags-dead"]);
  });

  it("finds for every Durable Object the committed config declares the migration that introduces its class", () => {
    for (const durable of deployTargetOf(committed).durableObjects) expect(durable.migrationTag, durable.className).not.toBeNull();
  });

  it("refuses a Durable Object class that no [[migrations]] entry introduces, naming the binding", () => {
    const raw = { ...committed, durable_objects: { bindings: [{ name: "LIMITS", class_name: "CallerLimits" }] }, migrations: [{ tag: "v1", new_sqlite_classes: ["Other"] }] };
    expect(planDeploy(raw, fullInventory(), [], "wrangler.deploy.json").problems).toEqual([
      "Durable Object LIMITS: class CallerLimits is introduced by no [[migrations]] entry (new_sqlite_classes)",
    ]);
  });

  it("names the field when the config lacks the Worker's name or a binding is malformed", () => {
    expect(() => deployTargetOf({})).toThrow(/`name` must name the Worker/);
    expect(() => deployTargetOf({ name: "x", d1_databases: [{ binding: "DB" }] })).toThrow(/d1_databases\[0\]: `database_name` must be a non-empty string/);
  });
});

describe("planning a deploy", () => {
  it("creates everything on an empty account, then migrates and deploys with the provided secrets", () => {
    const plan = planDeploy(committed, emptyInventory(), REQUIRED_SECRETS, "wrangler.deploy.json");
    expect(plan.problems).toEqual([]);
    expect(plan.steps.map((s) => ("argv" in s ? s.argv.join(" ") : `write ${s.path}`))).toEqual([
      "kv namespace create isodense-models --update-config=false",
      "d1 create isodense-review --update-config=false",
      "queues create isodense-flags",
      "queues create isodense-flags-dead",
      "write wrangler.deploy.json",
      "d1 migrations apply isodense-review --remote --config wrangler.deploy.json",
      "d1 migrations list isodense-review --remote --config wrangler.deploy.json",
      `deploy --config wrangler.deploy.json --secrets-file ${SECRETS_FILE_PLACEHOLDER}`,
    ]);
    expect(plan.deployConfig).toBeNull();
  });

  it("creates nothing when everything exists, so running the deploy again changes no resource", () => {
    const plan = planDeploy(committed, fullInventory(), [], "wrangler.deploy.json");
    expect(plan.problems).toEqual([]);
    expect(plan.steps.filter(isCreateStep)).toEqual([]);
    expect(plan.steps.at(-1)).toEqual({ kind: "deploy", secrets: [], argv: ["deploy", "--config", "wrangler.deploy.json"] });
  });

  it("creates only what is missing: the dead-letter queue alone", () => {
    const inventory = fullInventory();
    inventory.queues.delete("isodense-flags-dead");
    const creates = planDeploy(committed, inventory, [], "wrangler.deploy.json").steps.filter(isCreateStep);
    expect(creates).toEqual([{ kind: "create-queue", name: "isodense-flags-dead", argv: ["queues", "create", "isodense-flags-dead"] }]);
  });

  it("writes the found ids into a copy of the committed config and leaves everything else as it is", () => {
    const plan = planDeploy(committed, fullInventory(), [], "wrangler.deploy.json");
    const config = plan.deployConfig as Record<string, unknown>;
    expect(config.kv_namespaces).toEqual([{ binding: "MODELS", id: "0f2a9c1b8d7e6f5a4b3c2d1e0f9a8b7c" }]);
    expect((config.d1_databases as Record<string, unknown>[])[0]).toMatchObject({
      binding: "DB",
      database_name: "isodense-review",
      database_id: "8e4f2a10-5b6c-4d7e-9f01-23456789abcd",
    });
    const { kv_namespaces: _kv, d1_databases: _d1, ...rest } = config;
    const { kv_namespaces: _kv0, d1_databases: _d10, ...committedRest } = committed;
    expect(rest).toEqual(committedRest);
    expect((committed.kv_namespaces as Record<string, unknown>[])[0].id).toBeUndefined();
  });

  it("keeps an id the committed config pins instead of looking the resource up", () => {
    const raw = { ...committed, kv_namespaces: [{ binding: "MODELS", id: "pinned0000" }] };
    const plan = planDeploy(raw, { ...fullInventory(), kvNamespaces: [] }, [], "wrangler.deploy.json");
    expect(plan.steps.filter(isCreateStep)).toEqual([]);
    expect((plan.deployConfig as { kv_namespaces: unknown }).kv_namespaces).toEqual([{ binding: "MODELS", id: "pinned0000" }]);
  });

  it("keeps secrets already set, uploads the provided ones, and refuses a first deploy without them", () => {
    const partly = fullInventory();
    partly.worker.secretNames = ["FLOW_CREDENTIALS", "ANALYST_CREDENTIALS"];
    const plan = planDeploy(committed, partly, ["ADMIN_CREDENTIALS"], "wrangler.deploy.json");
    expect(plan.problems).toEqual([]);
    expect(plan.steps.at(-1)).toMatchObject({ kind: "deploy", secrets: ["ADMIN_CREDENTIALS"] });
    expect(plan.summary).toContain("secret FLOW_CREDENTIALS: already set on the Worker → kept");

    const first = planDeploy(committed, emptyInventory(), ["FLOW_CREDENTIALS"], "wrangler.deploy.json");
    expect(first.problems).toEqual([
      "ANALYST_CREDENTIALS is not set on the Worker and was not provided (environment variable or --secrets-file)",
      "ADMIN_CREDENTIALS is not set on the Worker and was not provided (environment variable or --secrets-file)",
    ]);
  });
});
