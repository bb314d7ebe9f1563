import { readFileSync } from "node:fs";
import { fileURLToPath } from "node:url";
import { describe, expect, it } from "vitest";
import { demoTokenProblems, secretsFileText, secretsFrom, workerRuleProblems } from "./deploy-secrets";

const repoRoot = fileURLToPath(new URL("..", import.meta.url));
const demoText = readFileSync(new URL("../.dev.vars.example", import.meta.url), "utf8");
// Invented tokens of the accepted shape (≥ 24 characters of the RFC 6750 alphabet).
const flow = "checkout:9c1f0a7e3b5d48c2a6e1f0b9d8c7a6e5";
const analyst = "ana-k:4e7d1c0b9a8f7e6d5c4b3a2f1e0d9c8b";
const admin = "ops:b8a7f6e5d4c3b2a1f0e9d8c7b6a5f4e3";

describe("the secrets a deploy uploads", () => {
  it("comes from the environment when no file is given, leaving out empty values", () => {
    expect(secretsFrom({ FLOW_CREDENTIALS: flow, ANALYST_CREDENTIALS: "  ", PATH: "/usr/bin" }, undefined)).toEqual({ FLOW_CREDENTIALS: flow });
  });

  it("comes from the file alone when one is given, in .dev.vars syntax", () => {
    const file = `# production callers\nFLOW_CREDENTIALS="${flow}"\nADMIN_CREDENTIALS=${admin}\n`;
    expect(secretsFrom({ ANALYST_CREDENTIALS: analyst }, file)).toEqual({ FLOW_CREDENTIALS: flow, ADMIN_CREDENTIALS: admin });
  });

  it("refuses every token of .dev.vars.example, naming the secret and the user but not the token", () => {
    const problems = demoTokenProblems(secretsFrom({}, demoText), demoText);
    expect(problems).toHaveLength(5);
    expect(problems[0]).toBe("FLOW_CREDENTIALS (user checkout) uses a demo token from .dev.vars.example; generate a real one (openssl rand -hex 32)");
    expect(problems.join("\n")).not.toContain("demo-flow-");
    expect(demoTokenProblems({ FLOW_CREDENTIALS: flow, ANALYST_CREDENTIALS: analyst, ADMIN_CREDENTIALS: admin }, demoText)).toEqual([]);
  });

  it("is checked with the worker's own credential rules", async () => {
    expect(await workerRuleProblems({ FLOW_CREDENTIALS: flow, ANALYST_CREDENTIALS: analyst, ADMIN_CREDENTIALS: admin }, repoRoot)).toEqual([]);
    const problems = await workerRuleProblems({ FLOW_CREDENTIALS: "checkout:short", ADMIN_CREDENTIALS: flow }, repoRoot);
    expect(problems).toEqual([expect.stringMatching(/^FLOW_CREDENTIALS: entry 1 \(user checkout\): the token must be at least 24 characters/)]);
    const reused = await workerRuleProblems({ FLOW_CREDENTIALS: flow, ADMIN_CREDENTIALS: flow }, repoRoot);
    expect(reused).toEqual([expect.stringMatching(/^ADMIN_CREDENTIALS: entry 1 \(user checkout\) reuses the token/)]);
  });

  it("is written for wrangler as one JSON object of the given names only", () => {
    expect(JSON.parse(secretsFileText({ FLOW_CREDENTIALS: flow }))).toEqual({ FLOW_CREDENTIALS: flow });
  });
});
