import { defineConfig } from "vitest/config";

// Integration suites that need the runtime itself: the bundled worker on workerd through Miniflare
// (worker/test/harness.ts `startWorker`), with real local KV, D1, Queues and Durable Objects. Raw
// sockets against the body drain, the static assets path, queues and cron end to end, restarts on
// persisted state, the CLI over HTTP, and the demo loop and parity runs.
export default defineConfig({
  test: {
    name: "workerd",
    pool: "threads",
    root: new URL("../../..", import.meta.url).pathname,
    environment: "node",
    include: ["worker/test/workerd/**/*.test.ts"],
    globalSetup: ["worker/test/global-setup.ts"],
    testTimeout: 60_000,
    hookTimeout: 60_000,
  },
});
