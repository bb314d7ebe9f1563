import { defineConfig } from "vitest/config";

// Browser tests: the review app in Debian's Chromium against `wrangler dev` with the demo queue.
// One file at a time; each starts its own wrangler dev on a free loopback port.
export default defineConfig({
  test: {
    name: "e2e",
    root: new URL("../..", import.meta.url).pathname,
    environment: "node",
    include: ["test/e2e/**/*.e2e.ts"],
    testTimeout: 120_000,
    hookTimeout: 300_000,
    fileParallelism: false,
  },
});
