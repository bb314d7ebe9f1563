import { describe, expect, it } from "vitest";
import { COMMANDS, main, topLevelHelp } from "./main";
import { captureIO } from "./capture-io";

describe("the isodense dispatcher", () => {
  it("lists derive, fit, score, tune, refit, renew, drift, sql, publish and demo-ledger in its help", async () => {
    expect(COMMANDS.map((c) => c.name)).toEqual(["derive", "fit", "score", "tune", "refit", "renew", "drift", "sql", "publish", "demo-ledger"]);
    const c = captureIO();
    expect(await main(["--help"], c.io)).toBe(0);
    expect(c.out()).toBe(topLevelHelp());
    expect(c.out()).toMatch(/^ {2}demo-ledger {2}write a fictional demo ledger/m);
  });

  it("prints the help on stderr and exits 2 when no command is given", async () => {
    const c = captureIO();
    expect(await main([], c.io)).toBe(2);
    expect(c.err()).toContain("usage: isodense <command>");
    expect(c.out()).toBe("");
  });

  it("names an unknown command and lists the known ones", async () => {
    const c = captureIO();
    expect(await main(["tune-up"], c.io)).toBe(2);
    expect(c.err()).toBe(
      "isodense: unknown command 'tune-up'; commands are: derive, fit, score, tune, refit, renew, drift, sql, publish, demo-ledger\nrun 'isodense --help' for usage\n",
    );
  });

  it("runs a command's --help through 'isodense help <command>' and prints the version", async () => {
    const help = captureIO();
    expect(await main(["help", "fit"], help.io)).toBe(0);
    expect(help.out()).toContain("usage: isodense fit [<ledger>] [options]");
    const version = captureIO();
    expect(await main(["--version"], version.io)).toBe(0);
    expect(version.out()).toMatch(/^isodense \d+\.\d+\.\d+\n$/);
  });
});
