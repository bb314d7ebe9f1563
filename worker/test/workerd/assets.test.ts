/**
 * The review app's static files on workerd, through the real assets path of wrangler.toml
 * (`run_worker_first`, the single-page fallback and review-ui/public/_headers): only the runtime
 * serves them, so this stays out of the in-process suites.
 */
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import { startWorker, type RunningWorker } from "../harness";

let worker: RunningWorker;

beforeAll(async () => {
  worker = await startWorker();
});
afterAll(async () => {
  await worker?.dispose();
});

describe("the review app's static files", () => {
  test("carry the Content-Security-Policy and the other headers of review-ui/public/_headers", async () => {
    const index = await worker.fetch("/", { headers: { accept: "text/html" } });
    expect(index.status).toBe(200);
    expect(index.headers.get("content-type")).toMatch(/^text\/html/);
    const html = await index.text();
    expect(html).toContain("<script");
    const csp = index.headers.get("content-security-policy") ?? "";
    expect(csp).toContain("default-src 'self'");
    expect(csp).toContain("script-src 'self'");
    expect(csp).toContain("object-src 'none'");
    expect(csp).toContain("frame-ancestors 'none'");
    expect(csp).not.toContain("unsafe-inline");
    expect(index.headers.get("x-content-type-options")).toBe("nosniff");
    expect(index.headers.get("x-frame-options")).toBe("DENY");
    expect(index.headers.get("referrer-policy")).toBe("no-referrer");
    // A script the page loads comes through the same path with the same headers.
    const script = /src="([^"]+\.js)"/.exec(html)?.[1];
    expect(script, "index.html loads a script").toBeDefined();
    const asset = await worker.fetch(script!);
    expect((await asset.text()).length).toBeGreaterThan(0);
    expect(asset.status).toBe(200);
    expect(asset.headers.get("content-security-policy")).toBe(csp);
    // An app route (single-page fallback) gets the same policy.
    const deep = await worker.fetch("/queue/anything", { headers: { accept: "text/html" } });
    expect(deep.headers.get("content-security-policy")).toBe(csp);
    expect(await deep.text()).toBe(html);
  });
});
