/**
 * The worker's own memory under `wrangler dev`: the V8 heap of its isolate, read over the
 * DevTools protocol that `wrangler dev --inspector-port` exposes.
 *
 * Why not only the process RSS: workerd's resident set also holds the simulator's own state
 * (SQLite page caches for local D1 and KV, in-memory queues, the HTTP machinery) and the
 * allocator's retained arenas, which grow with traffic whatever the worker does (bench/soak.ts
 * measures an echo route beside the scoring route to show it). A leak in the worker shows in its
 * isolate's heap; that is the figure the soak's memory target is judged on.
 *
 * workerd does not implement `HeapProfiler.collectGarbage`, but `takeHeapSnapshot` runs a full
 * garbage collection first, so "heap after a snapshot" is the live heap without garbage.
 */
import { createRequire } from "node:module";

/** The slice of the `ws` client this module uses (it ships no types of its own). */
interface Socket {
  on(event: "open", listener: () => void): void;
  on(event: "message", listener: (data: Buffer) => void): void;
  on(event: "error", listener: (error: Error) => void): void;
  send(data: string): void;
  close(): void;
}
const WebSocket = createRequire(import.meta.url)("ws") as new (url: string) => Socket;

/** V8 heap figures of one isolate, in MiB. */
export interface HeapFigures {
  usedMiB: number;
  totalMiB: number;
}

interface Reply {
  id?: number;
  result?: { usedSize?: number; totalSize?: number };
  error?: { message: string };
}

/** The DevTools WebSocket address of the worker behind `wrangler dev --inspector-port <port>`. */
async function debuggerUrl(inspectorPort: number): Promise<string> {
  const targets = (await (await fetch(`http://127.0.0.1:${inspectorPort}/json`)).json()) as { webSocketDebuggerUrl?: string }[];
  const url = targets.find((t) => t.webSocketDebuggerUrl)?.webSocketDebuggerUrl;
  if (!url) throw new Error(`no debuggable worker on inspector port ${inspectorPort}`);
  return url;
}

/**
 * Reads the isolate's heap; with `collect`, after the full collection a heap snapshot implies
 * (the snapshot's chunks are read and dropped). Connects for the one reading and disconnects, so
 * no debugger stays attached while the load runs.
 */
export async function isolateHeap(inspectorPort: number, collect: boolean, timeoutMs = 60_000): Promise<HeapFigures> {
  const socket = new WebSocket(await debuggerUrl(inspectorPort));
  try {
    await new Promise<void>((resolve, reject) => {
      socket.on("open", resolve);
      socket.on("error", reject);
    });
    const waiting = new Map<number, (reply: Reply) => void>();
    socket.on("message", (data) => {
      const reply = JSON.parse(data.toString()) as Reply;
      // Events carry no id. workerd answers takeHeapSnapshot, after the last chunk, with a message
      // that repeats the method and params instead of carrying a result: any message with the id
      // settles the call.
      if (reply.id !== undefined) waiting.get(reply.id)?.(reply);
    });
    let nextId = 0;
    const call = (method: string, params: Record<string, unknown> = {}) =>
      new Promise<Reply>((resolve, reject) => {
        const id = ++nextId;
        const timer = setTimeout(() => reject(new Error(`${method}: no answer within ${timeoutMs} ms`)), timeoutMs);
        waiting.set(id, (reply) => {
          clearTimeout(timer);
          if (reply.error) reject(new Error(`${method}: ${reply.error.message}`));
          else resolve(reply);
        });
        socket.send(JSON.stringify({ id, method, params }));
      });
    if (collect) {
      await call("HeapProfiler.enable");
      await call("HeapProfiler.takeHeapSnapshot", { reportProgress: false });
      await call("HeapProfiler.disable");
    }
    const usage = (await call("Runtime.getHeapUsage")).result ?? {};
    const mib = (bytes: number | undefined) => Math.round(((bytes ?? Number.NaN) / 1048576) * 100) / 100;
    return { usedMiB: mib(usage.usedSize), totalMiB: mib(usage.totalSize) };
  } finally {
    socket.close();
  }
}
