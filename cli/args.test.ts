import { describe, expect, it } from "vitest";
import { formatHelp, parseArgs, UsageError, type CommandSpec } from "./args";

const spec: CommandSpec = {
  command: "isodense try",
  summary: "A command for the parser's tests.",
  positionals: [{ name: "input.csv", description: "input" }],
  options: [
    { name: "out", kind: "string", valueName: "file", description: "output" },
    { name: "shape", kind: "string", choices: ["full", "diagonal", "auto"], description: "shape", defaultText: "auto" },
    { name: "rate", kind: "number", greaterThan: 0, lessThan: 1, description: "rate" },
    { name: "seed", kind: "integer", min: 0, description: "seed" },
    { name: "dry-run", kind: "switch", description: "do nothing" },
  ],
};

function usageError(argv: string[]): UsageError {
  try {
    parseArgs(argv, spec);
  } catch (error) {
    if (error instanceof UsageError) return error;
    throw error;
  }
  throw new Error("expected a UsageError");
}

describe("the command-line parser", () => {
  it("reads --flag value and --flag=value alike, with positionals anywhere", () => {
    const a = parseArgs(["--out", "m.json", "in.csv", "--rate=0.05", "--seed", "7", "--dry-run"], spec);
    expect(a.help).toBe(false);
    expect(a.positionals).toEqual(["in.csv"]);
    expect(Object.fromEntries(a.options)).toEqual({ out: "m.json", rate: 0.05, seed: 7, "dry-run": true });
    const b = parseArgs(["in.csv", "--out=m.json", "--shape=full"], spec);
    expect(b.options.get("out")).toBe("m.json");
    expect(b.options.get("shape")).toBe("full");
  });

  it("keeps an '=' inside a value and takes a negative number as a value", () => {
    expect(parseArgs(["in.csv", "--out=a=b.json"], spec).options.get("out")).toBe("a=b.json");
    expect(usageError(["in.csv", "--seed", "-1"]).message).toBe("option --seed must be ≥ 0; got -1");
  });

  it("rejects an unknown option by name and lists the known ones", () => {
    const error = usageError(["in.csv", "--colour", "red"]);
    expect(error.field).toBe("--colour");
    expect(error.message).toBe("unknown option --colour for 'isodense try'; options are: --out, --shape, --rate, --seed, --dry-run, --help");
    expect(usageError(["in.csv", "-x"]).message).toContain("unknown option -x");
  });

  it("rejects a missing value, a repeated option and a value given to a switch", () => {
    expect(usageError(["in.csv", "--out"]).message).toBe("option --out needs a value (file)");
    expect(usageError(["in.csv", "--out", "--seed", "1"]).message).toBe("option --out needs a value (file)");
    expect(usageError(["in.csv", "--out", "a", "--out", "b"]).message).toBe("option --out is given twice; give it once");
    expect(usageError(["in.csv", "--dry-run=yes"]).message).toBe("option --dry-run is a switch and takes no value");
    expect(usageError(["in.csv", "--out="]).message).toBe("option --out needs a non-empty value (file)");
  });

  it("checks choices, numbers, whole numbers and ranges", () => {
    expect(usageError(["in.csv", "--shape", "round"]).message).toBe("option --shape must be one of full, diagonal, auto; got 'round'");
    expect(usageError(["in.csv", "--rate", "abc"]).message).toBe("option --rate must be a number; got 'abc'");
    expect(usageError(["in.csv", "--rate", "1"]).message).toBe("option --rate must be > 0 and < 1; got 1");
    expect(usageError(["in.csv", "--rate", "0"]).rule).toBe("out of range");
    expect(usageError(["in.csv", "--seed", "1.5"]).message).toBe("option --seed must be a whole number; got '1.5'");
    expect(usageError(["in.csv", "--seed", "0x10"]).rule).toBe("not a number");
  });

  it("counts positional arguments against the usage", () => {
    expect(usageError([]).message).toBe("'isodense try' needs 1 argument (<input.csv>); <input.csv> is missing");
    expect(usageError(["a.csv", "b.csv"]).message).toBe("'isodense try' takes 1 argument (<input.csv>); unexpected 'b.csv'");
  });

  it("treats everything after -- as positional", () => {
    expect(parseArgs(["--", "--odd-name.csv"], spec).positionals).toEqual(["--odd-name.csv"]);
  });

  it("answers --help or -h without validating anything else", () => {
    expect(parseArgs(["--colour", "--help"], spec).help).toBe(true);
    expect(parseArgs(["-h"], spec).help).toBe(true);
  });

  it("writes help with the usage line, every option and its default", () => {
    const help = formatHelp(spec);
    expect(help.startsWith("usage: isodense try <input.csv> [options]\n")).toBe(true);
    expect(help).toContain("--shape <full|diagonal|auto>");
    expect(help).toContain("(default: auto)");
    expect(help).toContain("--dry-run");
    expect(help).toContain("--help");
  });
});
