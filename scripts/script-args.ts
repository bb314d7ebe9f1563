/**
 * Command-line handling shared by the npm scripts (`replay`, `demo:loop`, `deploy`): the CLI's
 * parser, with usage mistakes and `--help` answered in one place.
 */
import { formatHelp, parseArgs, type CommandSpec, type ParsedArgs, UsageError } from "../cli/args";

/**
 * Parses a script's arguments. On a usage mistake prints `<name>: <rule>` and returns exit code 2;
 * on `--help` prints the help and returns 0; otherwise returns the parsed arguments.
 *
 * @example const args = parseScriptArgs(process.argv.slice(2), spec, "replay"); if (typeof args === "number") return args;
 */
export function parseScriptArgs(argv: readonly string[], spec: CommandSpec, name: string): ParsedArgs | number {
  let args: ParsedArgs;
  try {
    args = parseArgs(argv, spec);
  } catch (error) {
    if (error instanceof UsageError) {
      process.stderr.write(`${name}: ${error.message}\n`);
      return 2;
    }
    throw error;
  }
  if (!args.help) return args;
  process.stdout.write(formatHelp(spec));
  return 0;
}
