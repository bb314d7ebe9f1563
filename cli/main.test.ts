import { describe, expect, it } from "vitest";
import type { CommandIO } from "./io";
import { COMMANDS, main, topLevelHelp } from "./main";

function capture(): { io: CommandIO; out: () => string; err: () => string } {
  let out = "";
  let err = "";
  return {
    io: { stdout: { write: (t: string) => (out += t) }, stderr: { isTTY: false, write: (t: string) => (err += t) } },
    out: () => out,
    err: () => err,
  };
}

describe("the isodense dispatcher", () => {
  it("lists fit, score, tune, refit, publish and demo-ledger in its help", async () => {
    expect(COMMANDS.map((c) => c.name)).toEqual(["fit", "score", "tune", "refit", "publish", "demo-ledger"]);
    const c = capture();
    expect(await main(["--help"], c.io)).toBe(0);
    expect(c.out()).toBe(topLevelHelp());
    expect(c.out()).toMatch(/^  demo-ledger  write a fictional demo ledger/m);
  });

  it("prints the help on stderr and exits 2 when no command is given", async () => {
    const c = capture();
    expect(await main([], c.io)).toBe(2);
    expect(c.err()).toContain("usage: isodense <command>");
    expect(c.out()).toBe("");
  });

  it("names an unknown command and lists the known ones", async () => {
    const c = capture();
    expect(await main(["tune-up"], c.io)).toBe(2);
    expect(c.err()).toBe("isodense: unknown command 'tune-up'; commands are: fit, score, tune, refit, publish, demo-ledger\nrun 'isodense --help' for usage\n");
  });

  it("runs a command's --help through 'isodense help <command>' and prints the version", async () => {
    const help = capture();
    expect(await main(["help", "fit"], help.io)).toBe(0);
    expect(help.out()).toContain("usage: isodense fit <ledger.csv> [options]");
    const version = capture();
    expect(await main(["--version"], version.io)).toBe(0);
    expect(version.out()).toMatch(/^isodense \d+\.\d+\.\d+\n$/);
  });
});
