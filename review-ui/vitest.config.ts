import { defineConfig } from "vitest/config";
import { contractAlias } from "./vite.config.ts";

// Unit tests of the review app's pure modules (formatting, plot geometry, keys). The screens
// themselves are tested in a real browser by test/e2e.
export default defineConfig({
  test: {
    name: "review-ui",
    pool: "threads",
    root: new URL("..", import.meta.url).pathname,
    environment: "node",
    include: ["review-ui/src/**/*.test.ts"],
  },
  resolve: { alias: contractAlias },
});
