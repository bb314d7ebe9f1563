/**
 * Reads the local secrets file (.dev.vars, dotenv syntax) that wrangler dev gives the worker, so
 * the scripts use the same demo credentials as the service.
 */
import { readFileSync } from "node:fs";

/** A `user:token` entry of a credentials secret. */
export interface Credential {
  user: string;
  token: string;
}

/**
 * Parses `KEY=value` / `KEY="value"` lines; `#` comments and blank lines are skipped.
 *
 * @example parseDevVars('A="x"\n# note\nB=y') // → { A: "x", B: "y" }
 */
export function parseDevVars(text: string): Record<string, string> {
  const vars: Record<string, string> = {};
  for (const raw of text.split(/\r?\n/)) {
    const line = raw.trim();
    if (line === "" || line.startsWith("#")) continue;
    const eq = line.indexOf("=");
    if (eq < 1) continue;
    const key = line.slice(0, eq).trim();
    let value = line.slice(eq + 1).trim();
    if ((value.startsWith('"') && value.endsWith('"')) || (value.startsWith("'") && value.endsWith("'"))) value = value.slice(1, -1);
    vars[key] = value;
  }
  return vars;
}

/** The entries of one credentials secret (`user:token,user:token`). */
export function credentialsOf(vars: Record<string, string>, name: string): Credential[] {
  return (vars[name] ?? "")
    .split(",")
    .map((entry) => entry.trim())
    .filter((entry) => entry.includes(":"))
    .map((entry) => ({ user: entry.slice(0, entry.indexOf(":")), token: entry.slice(entry.indexOf(":") + 1) }));
}

/** Reads and parses a .dev.vars file. */
export function readDevVars(path: string): Record<string, string> {
  return parseDevVars(readFileSync(path, "utf8"));
}
