/**
 * A small command-line parser: `--flag value`, `--flag=value`, boolean switches, `--` to end the
 * options, positional arguments counted against the command's usage. Unknown options are rejected
 * by name; values are checked against the option's kind, choices and range, so a command receives
 * only well-formed input.
 */
import { InputError } from "../shared-model/src/input-error";
import { parseStrictNumber } from "./numbers";

/** A usage mistake on the command line; the CLI prints it with a pointer to `--help` and exits 2. */
export class UsageError extends InputError {}

/** How an option's value is read. */
export type OptionKind = "string" | "number" | "integer" | "switch";

/** One `--option` of a command. */
export interface OptionSpec {
  /** Name without the dashes, e.g. `cutoff-rate`. */
  name: string;
  kind: OptionKind;
  /** Placeholder shown in help, e.g. `rate`. */
  valueName?: string;
  /** One-line description for help. */
  description: string;
  /** Allowed values (string options only). */
  choices?: readonly string[];
  /** Inclusive lower bound for numbers. */
  min?: number;
  /** Inclusive upper bound for numbers. */
  max?: number;
  /** Exclusive lower bound for numbers (e.g. a rate must be > 0). */
  greaterThan?: number;
  /** Exclusive upper bound for numbers (e.g. a rate must be < 1). */
  lessThan?: number;
  /** Shown in help as the default; the command applies it. */
  defaultText?: string;
}

/** A positional argument. */
export interface PositionalSpec {
  /** Placeholder, e.g. `ledger.csv`. */
  name: string;
  description: string;
  /** May be left out (only the last positionals); the command says when it is needed. */
  optional?: boolean;
}

/** Everything needed to parse and explain one command. */
export interface CommandSpec {
  /** Full command as typed, e.g. `isodense fit`. */
  command: string;
  /** One-line summary. */
  summary: string;
  positionals: readonly PositionalSpec[];
  options: readonly OptionSpec[];
  /** Extra paragraphs shown at the end of `--help` (exit codes, notes). */
  notes?: readonly string[];
}

/** Parsed command line. Option values are keyed by option name (without dashes). */
export interface ParsedArgs {
  /** True when `--help` or `-h` was given; nothing else is validated then. */
  help: boolean;
  positionals: string[];
  options: Map<string, string | number | boolean>;
}

/**
 * Parses `argv` (the words after the command name) against `spec`.
 *
 * @throws UsageError naming the option or argument and the rule: unknown option, missing value,
 *   option given twice, value not a number / not an integer / out of range / not one of the choices,
 *   a value for a switch, or the wrong number of positional arguments.
 * @example parseArgs(["ledger.csv", "--out=m.json", "--seed", "7"], fitSpec)
 */
export function parseArgs(argv: readonly string[], spec: CommandSpec): ParsedArgs {
  if (argv.some((word, k) => (word === "--help" || word === "-h") && !argv.slice(0, k).includes("--"))) {
    return { help: true, positionals: [], options: new Map() };
  }
  const byName = new Map(spec.options.map((o) => [o.name, o]));
  const positionals: string[] = [];
  const options = new Map<string, string | number | boolean>();
  let onlyPositionals = false;
  for (let k = 0; k < argv.length; k++) {
    const word = argv[k];
    if (onlyPositionals || !word.startsWith("-") || word === "-") {
      positionals.push(word);
      continue;
    }
    if (word === "--") {
      onlyPositionals = true;
      continue;
    }
    if (!word.startsWith("--")) {
      throw new UsageError(word, "unknown option", `unknown option ${word} for '${spec.command}'; ${optionList(spec)}`);
    }
    const eq = word.indexOf("=");
    const name = word.slice(2, eq < 0 ? undefined : eq);
    const option = byName.get(name);
    if (option === undefined) {
      throw new UsageError(`--${name}`, "unknown option", `unknown option --${name} for '${spec.command}'; ${optionList(spec)}`);
    }
    if (options.has(name)) {
      throw new UsageError(`--${name}`, "given twice", `option --${name} is given twice; give it once`);
    }
    if (option.kind === "switch") {
      if (eq >= 0) throw new UsageError(`--${name}`, "takes no value", `option --${name} is a switch and takes no value`);
      options.set(name, true);
      continue;
    }
    let raw: string;
    if (eq >= 0) {
      raw = word.slice(eq + 1);
    } else {
      const next = argv[k + 1];
      if (next === undefined || next.startsWith("--")) {
        throw new UsageError(`--${name}`, "needs a value", `option --${name} needs a value (${describeValue(option)})`);
      }
      raw = next;
      k++;
    }
    options.set(name, readValue(option, raw));
  }
  const expected = spec.positionals.length;
  const required = spec.positionals.filter((p) => !p.optional).length;
  if (positionals.length < required || positionals.length > expected) {
    const names = spec.positionals.map((p) => (p.optional ? `[<${p.name}>]` : `<${p.name}>`)).join(" ");
    if (positionals.length < required) {
      const missing = spec.positionals[positionals.length];
      throw new UsageError(
        `<${missing.name}>`,
        "missing argument",
        `'${spec.command}' needs ${expected} ${expected === 1 ? "argument" : "arguments"} (${names}); <${missing.name}> is missing`,
      );
    }
    throw new UsageError(
      positionals[expected],
      "unexpected argument",
      `'${spec.command}' takes ${expected} ${expected === 1 ? "argument" : "arguments"} (${names}); unexpected '${positionals[expected]}'`,
    );
  }
  return { help: false, positionals, options };
}

function readValue(option: OptionSpec, raw: string): string | number {
  const flag = `--${option.name}`;
  if (option.kind === "string") {
    if (raw === "") throw new UsageError(flag, "empty value", `option ${flag} needs a non-empty value (${describeValue(option)})`);
    if (option.choices && !option.choices.includes(raw)) {
      throw new UsageError(flag, "not one of the choices", `option ${flag} must be one of ${option.choices.join(", ")}; got '${raw}'`);
    }
    return raw;
  }
  const value = parseStrictNumber(raw);
  if (value === null) throw new UsageError(flag, "not a number", `option ${flag} must be a number; got '${raw}'`);
  if (option.kind === "integer" && !Number.isSafeInteger(value)) {
    throw new UsageError(flag, "not an integer", `option ${flag} must be a whole number; got '${raw}'`);
  }
  const range = describeRange(option);
  const outside =
    (option.min !== undefined && value < option.min) ||
    (option.max !== undefined && value > option.max) ||
    (option.greaterThan !== undefined && !(value > option.greaterThan)) ||
    (option.lessThan !== undefined && !(value < option.lessThan));
  if (outside) throw new UsageError(flag, "out of range", `option ${flag} must be ${range}; got ${raw}`);
  return value;
}

function describeRange(option: OptionSpec): string {
  const parts: string[] = [];
  if (option.greaterThan !== undefined) parts.push(`> ${option.greaterThan}`);
  if (option.min !== undefined) parts.push(`≥ ${option.min}`);
  if (option.lessThan !== undefined) parts.push(`< ${option.lessThan}`);
  if (option.max !== undefined) parts.push(`≤ ${option.max}`);
  return parts.join(" and ");
}

function describeValue(option: OptionSpec): string {
  if (option.choices) return option.choices.join("|");
  if (option.kind === "integer") return `a whole number${describeRange(option) ? " " + describeRange(option) : ""}`;
  if (option.kind === "number") return `a number${describeRange(option) ? " " + describeRange(option) : ""}`;
  return option.valueName ?? "text";
}

function optionList(spec: CommandSpec): string {
  return `options are: ${spec.options.map((o) => `--${o.name}`).join(", ")}, --help`;
}

/**
 * The text of `<command> --help`: usage line, arguments, options with defaults, notes.
 * @example formatHelp(fitSpec).startsWith("usage: isodense fit")
 */
export function formatHelp(spec: CommandSpec): string {
  const usage = [spec.command, ...spec.positionals.map((p) => (p.optional ? `[<${p.name}>]` : `<${p.name}>`)), "[options]"].join(" ");
  const lines = [`usage: ${usage}`, "", spec.summary, ""];
  if (spec.positionals.length > 0) {
    lines.push("arguments:");
    for (const p of spec.positionals) lines.push(`  ${pad(`<${p.name}>`, 28)}${p.description}`);
    lines.push("");
  }
  lines.push("options:");
  for (const o of spec.options) {
    const left = o.kind === "switch" ? `--${o.name}` : `--${o.name} <${o.choices ? o.choices.join("|") : (o.valueName ?? "value")}>`;
    const def = o.defaultText ? ` (default: ${o.defaultText})` : "";
    lines.push(`  ${pad(left, 28)}${o.description}${def}`);
  }
  lines.push(`  ${pad("--help", 28)}show this help`);
  if (spec.notes && spec.notes.length > 0) lines.push("", ...spec.notes);
  return lines.join("\n") + "\n";
}

function pad(text: string, width: number): string {
  return text.length >= width - 1 ? text + "\n" + " ".repeat(width + 2) : text.padEnd(width);
}

/** Reads a string option, or `undefined` when absent. */
export function stringOption(args: ParsedArgs, name: string): string | undefined {
  const value = args.options.get(name);
  return typeof value === "string" ? value : undefined;
}

/** Reads a numeric option, or `undefined` when absent. */
export function numberOption(args: ParsedArgs, name: string): number | undefined {
  const value = args.options.get(name);
  return typeof value === "number" ? value : undefined;
}
