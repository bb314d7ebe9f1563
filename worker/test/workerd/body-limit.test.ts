/**
 * An oversize body at the level of the bytes: a client still sending when the worker refuses must
 * receive the 413 as an answer, not have its connection reset under it (the answer is then lost
 * and the client cannot tell a refusal from a network fault).
 */
import { connect, type Socket } from "node:net";
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import { startWorker, type RunningWorker } from "../harness";

let worker: RunningWorker;
let port: number;

beforeAll(async () => {
  worker = await startWorker();
  port = Number(new URL(String(await worker.mf.ready)).port);
});
afterAll(async () => {
  await worker?.dispose();
});

/** Everything the server sends until `done` says enough, the socket closes or 15 s pass. */
function collect(socket: Socket, done: (text: string) => boolean): Promise<{ text: string; firstByteAt: number; error: string | null }> {
  return new Promise((resolve) => {
    let text = "";
    let firstByteAt = Number.NaN;
    let error: string | null = null;
    const finish = () => {
      clearTimeout(timer);
      socket.removeAllListeners("data");
      resolve({ text, firstByteAt, error });
    };
    const timer = setTimeout(finish, 15_000);
    socket.on("data", (chunk: Buffer) => {
      if (text === "") firstByteAt = performance.now();
      text += chunk.toString("latin1");
      if (done(text)) finish();
    });
    socket.on("error", (e) => (error = e.message));
    socket.on("close", finish);
  });
}

const statusLines = (text: string) => [...text.matchAll(/^HTTP\/1\.1 (\d{3})/gm)].map((m) => Number(m[1]));

/**
 * Sends `head` (request line and headers, with a Content-Length of `length`), then the body in ten
 * pieces with pauses, so the worker decides while the client is still sending; returns what came
 * back and when the first answer byte came relative to the last piece.
 */
async function sendSlowly(head: string, length: number): Promise<{ text: string; error: string | null; answeredAfterLastPiece: boolean }> {
  const socket = connect(port, "127.0.0.1");
  await new Promise<void>((resolve) => socket.once("connect", () => resolve()));
  const answer = collect(socket, (text) => /\r\n\r\n\{.*\}$/s.test(text));
  socket.write(`${head}Host: 127.0.0.1\r\nContent-Length: ${length}\r\n\r\n`);
  let lastPieceAt = 0;
  for (let k = 0; k < 10; k++) {
    await new Promise((r) => setTimeout(r, 20));
    lastPieceAt = performance.now();
    socket.write("x".repeat(length / 10));
  }
  const { text, firstByteAt, error } = await answer;
  socket.destroy();
  return { text, error, answeredAfterLastPiece: firstByteAt >= lastPieceAt };
}

describe("a body over the route's limit", () => {
  test("sent slowly with its length declared: the worker reads it to its end, then answers 413 naming the body (no reset)", async () => {
    // /v1/score takes at most 16 KiB. Before the worker read the body, the 413 went out right after
    // the headers and a client still writing could meet "write ECONNRESET".
    const { text, error, answeredAfterLastPiece } = await sendSlowly(
      `POST /v1/score HTTP/1.1\r\nContent-Type: application/json\r\nAuthorization: Bearer ${worker.tokens.flow}\r\n`,
      40_000,
    );
    expect(answeredAfterLastPiece).toBe(true);
    expect(error).toBeNull();
    expect(statusLines(text)).toEqual([413]);
    expect(text).toContain('"field":"body"');
    expect(text).toContain("must be at most 16384 bytes. Actual: 40000 bytes declared");
  });
});

describe("every answer that comes before the body is read", () => {
  // One mechanism (worker/src/middleware/drain-body.ts) reads the unread rest of any body before
  // the answer goes out; each case below answered without reading the body before it did.
  const cases = [
    { why: "no route (404)", status: 404, head: () => "POST /v1/no-such-route HTTP/1.1\r\nContent-Type: application/json\r\n", field: '"field":"path"' },
    { why: "no credential (401)", status: 401, head: () => "POST /v1/score HTTP/1.1\r\nContent-Type: application/json\r\n", field: '"field":"authorization"' },
    {
      why: "a role that may not (403)",
      status: 403,
      head: () => `POST /v1/models HTTP/1.1\r\nContent-Type: application/json\r\nAuthorization: Bearer ${worker.tokens.flow}\r\n`,
      field: '"field"',
    },
    {
      why: "the wrong media type (415)",
      status: 415,
      head: () => `POST /v1/score HTTP/1.1\r\nContent-Type: text/plain\r\nAuthorization: Bearer ${worker.tokens.flow}\r\n`,
      field: '"field":"content-type"',
    },
    { why: "a route that takes no body (GET with one)", status: 200, head: () => "GET /openapi.json HTTP/1.1\r\n", field: '"openapi"' },
  ];
  for (const c of cases) {
    test(`${c.why}: the answer comes after the whole body, on a connection that is not reset`, async () => {
      const { text, error, answeredAfterLastPiece } = await sendSlowly(c.head(), 8_000);
      expect(error).toBeNull();
      expect(statusLines(text)).toEqual([c.status]);
      expect(text).toContain(c.field);
      expect(answeredAfterLastPiece).toBe(true);
    });
  }
});
