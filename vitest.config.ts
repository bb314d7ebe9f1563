import { defineConfig } from "vitest/config";

// Node-side suites: the shared model, the CLI, the demo ledger and cross-cutting checks.
// Worker suites that need workerd live in their own project (see worker/vitest.config.ts).
export default defineConfig({
  test: {
    // Most files wait on I/O (queues, workerd, a browser) more than they compute: three at a time
    // keep the two cores busy. Files that must run alone say so (fileParallelism: false).
    maxWorkers: 3,
    // Each project but the browser tests sets pool "threads": a file starts in a worker thread, not a
    // process of its own (Vitest's default), which cost the node project 158 s of CPU against 128 s
    // on the 2-core machine. The browser tests keep a process per file (test/e2e/vitest.config.ts).
    // Console output of passing tests is noise; that of a failing one is its evidence.
    silent: "passed-only",
    projects: [
      {
        test: {
          name: "node",
          environment: "node",
          pool: "threads",
          include: ["shared-model/**/*.test.ts", "cli/**/*.test.ts", "demo-ledger/**/*.test.ts", "test/node/**/*.test.ts", "scripts/**/*.test.ts"],
          testTimeout: 60_000,
        },
      },
      // Worker suites: unit and in-process route tests in Node, then the integration suites on workerd.
      "worker/vitest.config.ts",
      "worker/test/workerd/vitest.config.ts",
      // The review app's pure modules, then the browser tests against wrangler dev.
      "review-ui/vitest.config.ts",
      "test/e2e/vitest.config.ts",
    ],
  },
});
