import { describe, expect, test } from "vitest";
import { ConfigError } from "../env";
import { CredentialTable, digestsEqual } from "./credentials";

const FLOW = "flow-token-0123456789abcdef0123";
const FLOW2 = "flow-token-fedcba9876543210fedc";
const ADMIN = "admin-token-0123456789abcdef012";

describe("CredentialTable", () => {
  test("identifies each user of each role by token, and nobody by an unknown token", async () => {
    const table = await CredentialTable.fromEnv({ FLOW_CREDENTIALS: `checkout:${FLOW}, replay:${FLOW2}`, ADMIN_CREDENTIALS: `ops-ana:${ADMIN}` });
    expect(table.size).toBe(3);
    expect(await table.identify(FLOW)).toEqual({ role: "flow", user: "checkout" });
    expect(await table.identify(FLOW2)).toEqual({ role: "flow", user: "replay" });
    expect(await table.identify(ADMIN)).toEqual({ role: "admin", user: "ops-ana" });
    expect(await table.identify(`${FLOW}x`)).toBeNull();
    expect(await table.identify("")).toBeNull();
  });

  test("treats a missing or empty secret as a role without users", async () => {
    const table = await CredentialTable.fromEnv({ FLOW_CREDENTIALS: "", ANALYST_CREDENTIALS: "  " });
    expect(table.size).toBe(0);
    expect(await table.identify(FLOW)).toBeNull();
  });

  test("names the secret and the entry of every malformed entry without showing the token", async () => {
    const shortToken = "short";
    const error = await CredentialTable.fromEnv({
      FLOW_CREDENTIALS: `checkout:${FLOW},no-colon-here,bad user:${FLOW2}`,
      ANALYST_CREDENTIALS: `rosa:${shortToken}`,
    }).catch((e: unknown) => e);
    expect(error).toBeInstanceOf(ConfigError);
    const problems = (error as ConfigError).problems;
    expect(problems.map((p) => p.field)).toEqual(["FLOW_CREDENTIALS", "FLOW_CREDENTIALS", "ANALYST_CREDENTIALS"]);
    expect(problems[0].rule).toBe("entry 2 must be user:token (no ':' found)");
    expect(problems[1].rule).toMatch(/^entry 3: the user name must be/);
    expect(problems[2].rule).toMatch(/^entry 1 \(user rosa\): the token must be at least 24 characters/);
    expect(JSON.stringify(problems)).not.toContain(FLOW2);
    expect(JSON.stringify(problems)).not.toContain(shortToken + ",");
  });

  test("refuses a token used by two entries, even across roles", async () => {
    const error = (await CredentialTable.fromEnv({ FLOW_CREDENTIALS: `checkout:${FLOW}`, ADMIN_CREDENTIALS: `ops-ana:${FLOW}` }).catch((e: unknown) => e)) as ConfigError;
    expect(error.problems).toEqual([{ field: "ADMIN_CREDENTIALS", rule: "entry 1 (user ops-ana) reuses the token of FLOW_CREDENTIALS entry 1; every token must be unique" }]);
  });
});

describe("digestsEqual", () => {
  test("is true only for equal bytes of equal length", () => {
    expect(digestsEqual(Uint8Array.of(1, 2, 3), Uint8Array.of(1, 2, 3))).toBe(true);
    expect(digestsEqual(Uint8Array.of(1, 2, 3), Uint8Array.of(1, 2, 4))).toBe(false);
    expect(digestsEqual(Uint8Array.of(9, 2, 3), Uint8Array.of(1, 2, 3))).toBe(false);
    expect(digestsEqual(Uint8Array.of(1, 2), Uint8Array.of(1, 2, 3))).toBe(false);
  });
});
