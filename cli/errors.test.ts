import { describe, expect, it } from "vitest";
import { ArtifactError } from "../shared-model/src/artifact";
import { FitRefusal } from "../shared-model/src/diagnostics";
import { UsageError } from "./args";
import { CsvError } from "./csv";
import { EXIT_INTERNAL, EXIT_REFUSED, EXIT_USAGE, InputError, reportFailure } from "./errors";
import { captureIO } from "./capture-io";

describe("turning failures into messages and exit codes", () => {
  it("prints a refused fit's diagnostics with equation and remedy and returns 1", () => {
    const c = captureIO();
    const code = reportFailure(
      new FitRefusal([
        { code: "condition-number", severity: "info", message: "condition number 12" },
        {
          code: "linear-dependency",
          severity: "error",
          message: "total is a linear function of subtotal and shipping",
          equation: "total ≈ 1.00·subtotal + 1.00·shipping",
          remedy: "drop one of subtotal, shipping, total, or use --estimator shrinkage",
        },
      ]),
      c.io,
      "isodense fit",
    );
    expect(code).toBe(EXIT_REFUSED);
    expect(c.err()).toBe(
      [
        "isodense fit: fit refused: 1 problem in the data; nothing was written",
        "  error (linear-dependency): total is a linear function of subtotal and shipping",
        "    equation: total ≈ 1.00·subtotal + 1.00·shipping",
        "    remedy: drop one of subtotal, shipping, total, or use --estimator shrinkage",
        "",
      ].join("\n"),
    );
    expect(c.out()).toBe("");
  });

  it("returns 2 for usage, CSV and input mistakes, pointing usage mistakes at --help", () => {
    const usage = captureIO();
    expect(reportFailure(new UsageError("--out", "required", "option --out is required"), usage.io, "isodense score")).toBe(EXIT_USAGE);
    expect(usage.err()).toBe("isodense score: option --out is required\nrun 'isodense score --help' for usage\n");
    const csv = captureIO();
    expect(reportFailure(new CsvError("ledger.csv", 4, "amount", "'x' is not a number"), csv.io, "isodense fit")).toBe(EXIT_USAGE);
    expect(csv.err()).toBe("isodense fit: ledger.csv line 4, column 'amount': 'x' is not a number\n");
    const input = captureIO();
    expect(reportFailure(new InputError("--spec", "not JSON", "--spec s.json is not valid JSON"), input.io, "isodense fit")).toBe(EXIT_USAGE);
  });

  it("lists every problem of a refused model file and returns 2", () => {
    const c = captureIO();
    const error = new ArtifactError([
      { path: "checksum", rule: "must equal the SHA-256 of the canonical content" },
      { path: "segments.web.logDet", rule: "must equal ln|covariance|" },
    ]);
    expect(reportFailure(error, c.io, "isodense score")).toBe(EXIT_USAGE);
    expect(c.err()).toContain("  checksum: must equal the SHA-256 of the canonical content\n  segments.web.logDet: must equal ln|covariance|\n");
  });

  it("reports anything else as an internal error with exit 3", () => {
    const c = captureIO();
    expect(reportFailure(new TypeError("x is undefined"), c.io, "isodense fit")).toBe(EXIT_INTERNAL);
    expect(c.err()).toContain("isodense fit: internal error: x is undefined");
  });
});
