#!/usr/bin/env node
// Runs a TypeScript entry point (scripts, benchmarks) with tsx, passing the remaining arguments on.
import { register } from "tsx/esm/api";
import { pathToFileURL } from "node:url";
import { resolve } from "node:path";
register();
const [entry, ...rest] = process.argv.slice(2);
if (!entry) {
  console.error("usage: run-ts.js <file.ts> [args...]");
  process.exit(2);
}
process.argv = [process.argv[0], entry, ...rest];
await import(pathToFileURL(resolve(entry)).href);
