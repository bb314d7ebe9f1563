import { defineConfig } from "vitest/config";

// Browser tests: the review app in Debian's Chromium against `wrangler dev` with the demo queue.
// One file (browser.e2e.ts) runs the suites one after the other, each with its own wrangler dev on
// a free loopback port, on the app the global setup builds once. Never two sessions at once:
// wrangler dev sessions on one machine register with each other (its dev registry), and in one run
// of two files side by side a page reload hung for a minute, cause not pinned down. As one file
// it runs beside the other projects' files (a project without file parallelism runs after all the
// others, alone). A process of its own (forks), as its suites start and stop child processes.
export default defineConfig({
  test: {
    name: "e2e",
    root: new URL("../..", import.meta.url).pathname,
    environment: "node",
    include: ["test/e2e/**/*.e2e.ts"],
    testTimeout: 120_000,
    hookTimeout: 300_000,
    pool: "forks",
    globalSetup: ["test/e2e/global-setup.ts"],
  },
});
