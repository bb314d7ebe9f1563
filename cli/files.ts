/**
 * Writing result files so that a reader never sees half a file: write to a temporary file in the
 * same directory, flush it to disk, then rename it over the target (rename is atomic within one
 * file system on POSIX).
 */
import { randomBytes } from "node:crypto";
import { createWriteStream, type WriteStream } from "node:fs";
import { open, rename, rm, stat } from "node:fs/promises";
import { basename, dirname, join, resolve } from "node:path";
import { InputError } from "./errors";

/**
 * Checks that `path` can be an output file: its directory exists and it is not a directory itself.
 * @param option the option that named it, e.g. `--out`
 * @throws InputError naming the option and the problem
 */
export async function checkOutputPath(path: string, option: string): Promise<void> {
  const dir = dirname(resolve(path));
  const dirStat = await stat(dir).catch(() => null);
  if (dirStat === null || !dirStat.isDirectory()) {
    throw new InputError(option, "directory does not exist", `${option} ${path}: the directory ${dirname(path)} does not exist`);
  }
  const own = await stat(path).catch(() => null);
  if (own?.isDirectory()) throw new InputError(option, "is a directory", `${option} ${path}: is a directory; give a file name`);
}

function temporaryPath(path: string): string {
  return join(dirname(path), `.${basename(path)}.${process.pid}.${randomBytes(4).toString("hex")}.tmp`);
}

/** Writes `text` to `path` atomically (temporary file, fsync, rename). */
export async function writeFileAtomic(path: string, text: string): Promise<void> {
  const temp = temporaryPath(path);
  try {
    const handle = await open(temp, "wx");
    try {
      await handle.writeFile(text, "utf8");
      await handle.sync();
    } finally {
      await handle.close();
    }
    await rename(temp, path);
  } catch (error) {
    await rm(temp, { force: true });
    throw error;
  }
}

/**
 * A file written line by line with back-pressure, published under its final name only by
 * `commit()`; `abort()` removes the partial file.
 */
export class AtomicLineWriter {
  private readonly temp: string;
  private readonly stream: WriteStream;
  private buffer = "";
  private failure: Error | null = null;

  constructor(private readonly path: string) {
    this.temp = temporaryPath(path);
    this.stream = createWriteStream(this.temp, { flags: "wx", encoding: "utf8" });
    this.stream.on("error", (error) => {
      this.failure = error;
    });
  }

  /** Queues text; resolves once the stream can take more (buffered in 64 KiB pieces). */
  async write(text: string): Promise<void> {
    if (this.failure) throw this.failure;
    this.buffer += text;
    if (this.buffer.length < 64 * 1024) return;
    await this.flush();
  }

  private async flush(): Promise<void> {
    const piece = this.buffer;
    this.buffer = "";
    if (piece === "") return;
    if (!this.stream.write(piece)) {
      await new Promise<void>((resolveDrain, reject) => {
        const onError = (error: Error): void => reject(error);
        this.stream.once("error", onError);
        this.stream.once("drain", () => {
          this.stream.off("error", onError);
          resolveDrain();
        });
      });
    }
    if (this.failure) throw this.failure;
  }

  /** Flushes, closes and renames the file to its final name. */
  async commit(): Promise<void> {
    await this.flush();
    await new Promise<void>((resolveEnd, reject) => {
      this.stream.once("error", reject);
      this.stream.end(() => resolveEnd());
    });
    if (this.failure) throw this.failure;
    await rename(this.temp, this.path);
  }

  /** Discards the partial file. */
  async abort(): Promise<void> {
    // Wait for the close: a stream destroyed before its file opened still creates the file.
    if (!this.stream.closed) {
      await new Promise<void>((resolveClose) => {
        this.stream.once("close", () => resolveClose());
        this.stream.destroy();
      });
    }
    await rm(this.temp, { force: true });
  }
}
