import { defineConfig } from "vitest/config";

// Worker suites. Unit tests of pure modules run in Node beside the code (worker/src/**/*.test.ts);
// integration tests (worker/test/**/*.test.ts) run the bundled worker on workerd through Miniflare
// with real local KV, D1 and Queues. Files run one at a time: each starts its own workerd, and the
// queue timings they wait for need the machine's two cores.
export default defineConfig({
  test: {
    name: "worker",
    root: new URL("..", import.meta.url).pathname,
    environment: "node",
    include: ["worker/src/**/*.test.ts", "worker/test/**/*.test.ts"],
    // Bundles the worker and reads wrangler.toml once per run (worker/test/global-setup.ts).
    globalSetup: ["worker/test/global-setup.ts"],
    testTimeout: 60_000,
    hookTimeout: 60_000,
    fileParallelism: false,
  },
});
