// Prints CI's plain "N passed, N failed" line from vitest's JSON report (test-output/vitest.json).
// vitest counts tests, so a test file that fails to load (an import that throws, a missing file, a
// failing beforeAll) would add nothing to "failed": each such file counts as one failure here, and
// is named. Exit 1 when the report is missing or holds no tests.
const fs = require("node:fs");
const path = require("node:path");

const file = process.argv[2] || "test-output/vitest.json";
let report;
try {
  report = JSON.parse(fs.readFileSync(file, "utf8"));
} catch (error) {
  console.log(`no test report at ${file} (${error.message})`);
  console.log("0 passed, 1 failed");
  process.exit(1);
}
const suites = report.testResults || [];
// A file that failed without a failed test of its own: it did not load, or a hook failed.
const brokenFiles = suites.filter((s) => s.status === "failed" && !(s.assertionResults || []).some((a) => a.status === "failed"));
for (const s of brokenFiles) {
  const where = path.relative(process.cwd(), s.name);
  console.log(
    `file failed outside its tests: ${where}: ${String(s.message || "no message")
      .split("\n")[0]
      .slice(0, 300)}`,
  );
}
const passed = report.numPassedTests || 0;
const failed = (report.numFailedTests || 0) + brokenFiles.length;
const skipped = (report.numPendingTests || 0) + (report.numTodoTests || 0);
console.log(`${passed} passed, ${failed} failed` + (skipped ? `, ${skipped} skipped` : ""));
if ((report.numTotalTests || 0) === 0 || failed > 0) process.exitCode = 1;
