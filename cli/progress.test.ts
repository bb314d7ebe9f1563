import { describe, expect, it } from "vitest";
import { createProgress } from "./progress";

function terminal(isTTY: boolean) {
  const writes: string[] = [];
  return { stream: { isTTY, columns: 100, write: (text: string) => writes.push(text) }, writes };
}

describe("the progress line", () => {
  it("writes nothing when stderr is not a terminal", () => {
    const { stream, writes } = terminal(false);
    const progress = createProgress(stream);
    progress.update("read", 10_000);
    progress.update("moments", 5_000);
    progress.done();
    expect(writes).toEqual([]);
  });

  it("counts rows in the first pass and shows a bar with the share of that count later", () => {
    const { stream, writes } = terminal(true);
    let now = 0;
    const progress = createProgress(stream, { now: () => now });
    progress.update("read", 8_192);
    now += 200;
    progress.update("read", 20_000);
    now += 200;
    progress.update("moments", 5_000);
    expect(writes[0]).toContain("pass 1 (read) 8,192 rows");
    expect(writes[1]).toContain("pass 1 (read) 20,000 rows");
    expect(writes[2]).toContain("pass 2 (moments) [######------------------]  25 %  5,000 of 20,000 rows");
    expect(writes.every((w) => w.startsWith("\r") && !w.includes("\n"))).toBe(true);
  });

  it("redraws at most once per interval within a pass, but always on a new pass", () => {
    const { stream, writes } = terminal(true);
    let now = 1_000;
    const progress = createProgress(stream, { intervalMs: 100, now: () => now });
    progress.update("read", 1);
    now += 10;
    progress.update("read", 2);
    progress.update("moments", 1);
    now += 150;
    progress.update("moments", 2);
    expect(writes.length).toBe(3);
  });

  it("clears the line when done, so the report starts on a clean line", () => {
    const { stream, writes } = terminal(true);
    const progress = createProgress(stream);
    progress.update("read", 1);
    progress.done();
    expect(writes[writes.length - 1]).toMatch(/^\r +\r$/);
    progress.done();
    expect(writes.length).toBe(2);
  });
});

describe("the progress line width", () => {
  it("uses 80 columns when the terminal does not report its width", () => {
    const writes: string[] = [];
    const progress = createProgress({ isTTY: true, columns: 0, write: (text: string) => writes.push(text) });
    progress.update("read", 123_456);
    expect(writes[0]).toBe(`\r${"pass 1 (read) 123,456 rows".padEnd(79)}`);
  });
});
