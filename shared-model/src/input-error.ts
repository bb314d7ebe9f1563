/**
 * The one base class of input errors: bad input named by the field at fault and the rule it broke
 * (what was expected and what came). Every module's own input error (scoring, fitting, tuning,
 * drift, intervals, estimates, feature specs, records, artifacts, and the CLI's files and options)
 * extends it, so each caller maps all of them in one place: the CLI to exit 2, the worker to a 4xx
 * answer naming the field and the rule.
 */

/**
 * Bad input: `field` names what is at fault (`features.amount`, `--labels`, `labels.csv`), `rule`
 * the rule it broke. The message defaults to `field: rule`.
 *
 * @example
 * throw new InputError("cutoffRate", "must be strictly between 0 and 1. Actual: 1.5");
 */
export class InputError extends Error {
  /** What is at fault: a field path, an option, a file or a column. */
  readonly field: string;
  /** The rule it broke, with what was expected and what came. */
  readonly rule: string;

  constructor(field: string, rule: string, message = `${field}: ${rule}`) {
    super(message);
    this.name = new.target.name;
    this.field = field;
    this.rule = rule;
  }
}
