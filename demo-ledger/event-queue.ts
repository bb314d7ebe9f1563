/**
 * Time-ordered queue of simulation events (a binary min-heap). Events at the same instant leave in
 * the order they were scheduled, so the ledger does not depend on heap internals and the same seed
 * always yields the same row order.
 */

interface Entry<T> {
  time: number;
  order: number;
  event: T;
}

/**
 * Min-heap of events keyed by time (any finite number, e.g. epoch milliseconds), ties broken by
 * scheduling order.
 * @example
 * const q = new EventQueue<string>();
 * q.schedule(20, "b"); q.schedule(10, "a");
 * q.pop(); // { time: 10, event: "a" }
 */
export class EventQueue<T> {
  private readonly heap: Entry<T>[] = [];
  private scheduled = 0;

  /** Number of events waiting. */
  get size(): number {
    return this.heap.length;
  }

  /**
   * Adds an event.
   * @throws RangeError when `time` is not finite
   */
  schedule(time: number, event: T): void {
    if (!Number.isFinite(time)) throw new RangeError(`time: must be a finite number, received ${String(time)}`);
    const heap = this.heap;
    heap.push({ time, order: this.scheduled++, event });
    let i = heap.length - 1;
    while (i > 0) {
      const parent = (i - 1) >> 1;
      if (!before(heap[i], heap[parent])) break;
      [heap[i], heap[parent]] = [heap[parent], heap[i]];
      i = parent;
    }
  }

  /** Removes and returns the earliest event, or `undefined` when the queue is empty. */
  pop(): { time: number; event: T } | undefined {
    const heap = this.heap;
    if (heap.length === 0) return undefined;
    const top = heap[0];
    const last = heap.pop() as Entry<T>;
    if (heap.length > 0) {
      heap[0] = last;
      let i = 0;
      for (;;) {
        const left = 2 * i + 1;
        const right = left + 1;
        let smallest = i;
        if (left < heap.length && before(heap[left], heap[smallest])) smallest = left;
        if (right < heap.length && before(heap[right], heap[smallest])) smallest = right;
        if (smallest === i) break;
        [heap[i], heap[smallest]] = [heap[smallest], heap[i]];
        i = smallest;
      }
    }
    return { time: top.time, event: top.event };
  }
}

function before<T>(x: Entry<T>, y: Entry<T>): boolean {
  return x.time < y.time || (x.time === y.time && x.order < y.order);
}
