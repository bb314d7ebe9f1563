#!/usr/bin/env node
// Launcher: registers tsx so the CLI runs from its TypeScript sources, the same files the worker bundles.
import { register } from "tsx/esm/api";
register();
const { main } = await import("../cli/main.ts");
process.exitCode = await main(process.argv.slice(2));
