import { fileURLToPath } from "node:url";
import { defineConfig } from "vite";
import { svelte } from "@sveltejs/vite-plugin-svelte";

// The app is served by the worker as static assets, so it lives on the same origin as /v1/review.
// During `vite dev` the API calls go to a local `wrangler dev` on port 8787.
const root = fileURLToPath(new URL(".", import.meta.url));
/** The API contract's types (`@contract`, also in tsconfig.json `paths`): the one declaration of every request and answer. */
export const contractAlias = { "@contract": fileURLToPath(new URL("../worker/src/contract/index.ts", import.meta.url)) };

export default defineConfig({
  root,
  base: "/",
  plugins: [svelte()],
  resolve: { alias: contractAlias },
  build: {
    outDir: fileURLToPath(new URL("./dist", import.meta.url)),
    emptyOutDir: true,
    target: "es2022",
    sourcemap: false,
  },
  server: {
    host: "127.0.0.1",
    port: 5173,
    proxy: { "/v1": "http://127.0.0.1:8787" },
  },
});
