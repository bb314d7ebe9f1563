import { gunzipSync, gzipSync } from "node:zlib";
import { describe, expect, it } from "vitest";
import { PAID_PLAN_COMPRESSED_LIMIT_BYTES, describeBundleSize, isUploadedModule, measureModules } from "./bundle-size";

describe("the worker bundle's size", () => {
  it("is one gzip over the modules joined end to end, as wrangler reports it", () => {
    const a = new TextEncoder().encode("export const a = 1;\n".repeat(200));
    const b = new TextEncoder().encode("export const b = 2;\n".repeat(200));
    const size = measureModules([a, b]);
    expect(size.uncompressed).toBe(a.byteLength + b.byteLength);
    expect(size.compressed).toBe(gzipSync(Buffer.concat([a, b])).byteLength);
    expect(gunzipSync(gzipSync(Buffer.concat([a, b]))).byteLength).toBe(size.uncompressed);
  });

  it("counts the code modules and leaves out source maps and wrangler's README", () => {
    expect(["index.js", "index.js.map", "README.md", "chunk-1.mjs", "kernel.wasm"].filter(isUploadedModule)).toEqual(["index.js", "chunk-1.mjs", "kernel.wasm"]);
  });

  it("is judged against 10 MiB after compression, the Workers Paid plan's limit", () => {
    // Cloudflare Workers docs, Limits → Worker size: 10 MB on the Paid plan (after compression).
    expect(PAID_PLAN_COMPRESSED_LIMIT_BYTES).toBe(10_485_760);
    expect(describeBundleSize({ uncompressed: 1_084_676, compressed: 200_274 }, PAID_PLAN_COMPRESSED_LIMIT_BYTES)).toBe(
      "worker bundle: 1059.3 KiB uncompressed, 195.6 KiB gzip (1.9 % of the Workers Paid plan's 10 MiB limit after compression)",
    );
  });
});
