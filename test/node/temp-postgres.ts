/**
 * A throwaway PostgreSQL server for tests: a fresh cluster (initdb) in a temporary folder, listening
 * on a free loopback port with trust authentication, stopped and removed at the end. Uses Debian's
 * server binaries (`apt-get install -y postgresql`); as root the cluster runs as the `postgres` user.
 */
import { execFileSync } from "node:child_process";
import { chownSync, existsSync, mkdtempSync, readdirSync, rmSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import pg from "pg";
import { freePort } from "../e2e/stack";

/** A running server and a connected client. */
export interface TempPostgres {
  client: pg.Client;
  port: number;
  stop(): Promise<void>;
}

/** The folder of Debian's PostgreSQL server binaries, or null when none is installed. */
export function postgresBinaries(): string | null {
  const root = "/usr/lib/postgresql";
  if (!existsSync(root)) return null;
  const versions = readdirSync(root)
    .filter((v) => existsSync(join(root, v, "bin", "initdb")))
    .sort((a, b) => Number(b) - Number(a));
  return versions.length === 0 ? null : join(root, versions[0], "bin");
}

/**
 * Starts a server and connects to it.
 * @throws Error when the binaries are missing or the server does not start (its log is in the message)
 */
export async function startTempPostgres(): Promise<TempPostgres> {
  const bin = postgresBinaries();
  if (bin === null) throw new Error("PostgreSQL server binaries not found under /usr/lib/postgresql (apt-get install -y postgresql)");
  const dir = mkdtempSync(join(tmpdir(), "isodense-pg-"));
  const asRoot = process.getuid?.() === 0;
  if (asRoot) {
    const uid = Number(execFileSync("id", ["-u", "postgres"], { encoding: "utf8" }).trim());
    const gid = Number(execFileSync("id", ["-g", "postgres"], { encoding: "utf8" }).trim());
    chownSync(dir, uid, gid);
  }
  const run = (command: string, args: string[]) =>
    asRoot ? execFileSync("runuser", ["-u", "postgres", "--", join(bin, command), ...args], { stdio: "pipe" }) : execFileSync(join(bin, command), args, { stdio: "pipe" });
  const data = join(dir, "data");
  run("initdb", ["-D", data, "-A", "trust", "-U", "postgres", "--no-sync", "-E", "UTF8", "--locale", "C"]);
  const port = await freePort();
  try {
    run("pg_ctl", ["-D", data, "-l", join(dir, "server.log"), "-w", "-o", `-p ${port} -k ${dir} -c listen_addresses=127.0.0.1 -c fsync=off`, "start"]);
  } catch (error) {
    throw new Error(`PostgreSQL did not start: ${(error as { stderr?: Buffer }).stderr?.toString() ?? (error as Error).message}`);
  }
  const client = new pg.Client({ host: "127.0.0.1", port, user: "postgres", database: "postgres" });
  await client.connect();
  return {
    client,
    port,
    async stop() {
      await client.end().catch(() => {});
      try {
        run("pg_ctl", ["-D", data, "-m", "immediate", "-w", "stop"]);
      } finally {
        rmSync(dir, { recursive: true, force: true });
      }
    },
  };
}
