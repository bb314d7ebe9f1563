import { defineConfig } from "vitest/config";

// Worker suites in Node: unit tests of pure modules beside the code (worker/src/**/*.test.ts) and
// the in-process route suites (worker/test/*.test.ts: the Hono app through `app.request()` with
// real local KV, D1, Queues and Durable Objects from Miniflare, worker/test/in-process.ts).
// Suites that need the runtime itself are in the `workerd` project (worker/test/workerd/).
export default defineConfig({
  test: {
    name: "worker",
    pool: "threads",
    root: new URL("..", import.meta.url).pathname,
    environment: "node",
    include: ["worker/src/**/*.test.ts", "worker/test/*.test.ts"],
    // Bundles the worker and reads wrangler.toml once per run (worker/test/global-setup.ts).
    globalSetup: ["worker/test/global-setup.ts"],
    testTimeout: 60_000,
    hookTimeout: 60_000,
  },
});
