import fc from "fast-check";
import { describe, expect, it } from "vitest";
import { EventQueue } from "./event-queue";

describe("EventQueue", () => {
  it("releases events in time order, and same-time events in the order they were scheduled", () => {
    fc.assert(
      fc.property(fc.array(fc.integer({ min: 0, max: 20 }), { maxLength: 200 }), (times) => {
        const queue = new EventQueue<number>();
        times.forEach((time, index) => queue.schedule(time, index));
        const out: { time: number; event: number }[] = [];
        for (let next = queue.pop(); next; next = queue.pop()) out.push(next);
        const expected = times.map((time, index) => ({ time, event: index })).sort((a, b) => a.time - b.time || a.event - b.event);
        expect(out).toEqual(expected);
        expect(queue.size).toBe(0);
      }),
    );
  });

  it("keeps order when events are scheduled while others are being taken out", () => {
    const queue = new EventQueue<string>();
    queue.schedule(10, "a");
    queue.schedule(30, "c");
    expect(queue.pop()).toEqual({ time: 10, event: "a" });
    queue.schedule(20, "b");
    queue.schedule(30, "d");
    expect([queue.pop(), queue.pop(), queue.pop(), queue.pop()]).toEqual([{ time: 20, event: "b" }, { time: 30, event: "c" }, { time: 30, event: "d" }, undefined]);
  });

  it("refuses a time that is not a finite number, naming the field", () => {
    const queue = new EventQueue<string>();
    expect(() => queue.schedule(Number.NaN, "x")).toThrow(/time: must be a finite number, received NaN/);
    expect(() => queue.schedule(Number.POSITIVE_INFINITY, "x")).toThrow(/time: must be a finite number/);
  });
});
