/**
 * `isodense publish` against the real worker listening on 127.0.0.1 (Miniflare's HTTP server):
 * upload and activation, idempotent re-publish, refusals, a tampered file stopped before upload,
 * and an unreachable service.
 */
import { once } from "node:events";
import { mkdtemp, readFile, rm, writeFile } from "node:fs/promises";
import { createServer, type AddressInfo } from "node:net";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, expect, test } from "vitest";
import { publishCommand } from "../../../cli/commands/publish";
import type { CommandIO } from "../../../cli/io";
import { startWorker, type RunningWorker } from "../harness";
import { fitShopModel } from "../fixtures";

let worker: RunningWorker;
let url: string;
let dir: string;
let modelFile: string;

beforeAll(async () => {
  worker = await startWorker({ vars: { MODEL_REFRESH_SECONDS: "0" } });
  url = (await worker.mf.ready).origin;
  dir = await mkdtemp(join(tmpdir(), "isodense-publish-"));
  modelFile = join(dir, "model.json");
  await writeFile(modelFile, JSON.stringify(await fitShopModel({ version: "mpub-1" }), null, 2));
});
afterAll(async () => {
  await worker?.dispose();
  await rm(dir, { recursive: true, force: true });
});

function capture(): { io: CommandIO; out: () => string; err: () => string } {
  let out = "";
  let err = "";
  return {
    io: { stdout: { write: (t: string) => (out += t) }, stderr: { write: (t: string) => (err += t), isTTY: false } as never },
    out: () => out,
    err: () => err,
  };
}

test("publishes and activates a model file, and publishing it again changes nothing", async () => {
  const first = capture();
  expect(await publishCommand([modelFile, "--url", url, "--token", worker.tokens.admin, "--activate"], first.io), first.err()).toBe(0);
  expect(first.out()).toMatch(/^published mpub-1 \(sha256:[0-9a-f]{64}\) to http:\/\/127\.0\.0\.1:\d+\nactivated mpub-1\n$/);
  const health = (await (await worker.fetch("/v1/health")).json()) as { model: { version: string } };
  expect(health.model.version).toBe("mpub-1");
  const again = capture();
  expect(await publishCommand([modelFile, "--url", `${url}/`, "--token", worker.tokens.admin, "--activate"], again.io)).toBe(0);
  expect(again.out()).toBe("mpub-1 was already published with identical content\nmpub-1 is already the live model\n");
});

test("reports a refused credential with exit code 1", async () => {
  const run = capture();
  expect(await publishCommand([modelFile, "--url", url, "--token", worker.tokens.flow], run.io)).toBe(1);
  expect(run.err()).toContain("upload refused: 403 forbidden");
  expect(run.err()).toContain("the token does not belong to an admin");
});

test("stops a tampered file before upload with exit code 2 and the checksum problem", async () => {
  const artifact = JSON.parse(await readFile(modelFile, "utf8"));
  artifact.version = "mpub-evil";
  const evil = join(dir, "evil.json");
  await writeFile(evil, JSON.stringify(artifact));
  const run = capture();
  expect(await publishCommand([evil, "--url", url, "--token", worker.tokens.admin], run.io)).toBe(2);
  expect(run.err()).toMatch(/checksum: must equal the SHA-256/);
  expect((await worker.fetch("/v1/models/mpub-evil", { token: worker.tokens.admin })).status).toBe(404);
});

test("names the missing option, and reports an unreachable service with exit code 3", async () => {
  const noUrl = capture();
  expect(await publishCommand([modelFile, "--token", "x".repeat(30)], noUrl.io)).toBe(2);
  expect(noUrl.err()).toContain("--url is required");
  // A loopback port that was free a moment ago: nothing listens there now.
  const server = createServer().listen(0, "127.0.0.1");
  await once(server, "listening");
  const port = (server.address() as AddressInfo).port;
  server.close();
  await once(server, "close");
  const closed = capture();
  expect(await publishCommand([modelFile, "--url", `http://127.0.0.1:${port}`, "--token", worker.tokens.admin], closed.io)).toBe(3);
  expect(closed.err()).toContain(`cannot reach http://127.0.0.1:${port}: ECONNREFUSED`);
});
