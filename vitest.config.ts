import { defineConfig } from "vitest/config";

// Node-side suites: the shared model, the CLI, the demo ledger and cross-cutting checks.
// Worker suites that need workerd live in their own project (see worker/vitest.config.ts).
export default defineConfig({
  test: {
    projects: [
      {
        test: {
          name: "node",
          environment: "node",
          include: ["shared-model/**/*.test.ts", "cli/**/*.test.ts", "demo-ledger/**/*.test.ts", "test/node/**/*.test.ts", "scripts/**/*.test.ts"],
          testTimeout: 60_000,
        },
      },
      // Worker suites (unit tests of worker/src in Node, integration tests on workerd).
      "worker/vitest.config.ts",
      // The review app's pure modules, then the browser tests against wrangler dev.
      "review-ui/vitest.config.ts",
      "test/e2e/vitest.config.ts",
    ],
  },
});
