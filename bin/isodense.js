#!/usr/bin/env -S node --max-semi-space-size=1
// Launcher: registers tsx so the CLI runs from its TypeScript sources, the same files the worker bundles.
// A small young generation (1 MB semi-spaces): DuckDB frees a result chunk only when its JavaScript
// wrapper is collected, so frequent minor collections keep a streaming fit's memory near its floor
// (1M × 32 CSV: about 270 MiB peak instead of 350; bench/sources.ts runs the fit the same way).
import { register } from "tsx/esm/api";
register();
const { main } = await import("../cli/main.ts");
process.exitCode = await main(process.argv.slice(2));
