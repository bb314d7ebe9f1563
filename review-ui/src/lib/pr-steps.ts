/**
 * The precision–recall curve as the steps it really is. Between two operating points no cutoff
 * exists, so a straight line between them shows precision–recall pairs no rule achieves (and
 * optimistic ones: Davis & Goadrich 2006, ICML). Each point holds its precision from the previous
 * point's recall to its own, which is also how average precision AP = Σₖ (Rₖ − Rₖ₋₁)·Pₖ is summed:
 * the area under the drawn steps equals the AP printed above the plot. scikit-learn's
 * `PrecisionRecallDisplay` draws the same steps (`drawstyle="steps-post"` on its decreasing-recall
 * arrays).
 */

/** A point of the curve: recall, and precision (null where the rule flags nothing). */
export interface PrPoint {
  recall: number;
  precision: number | null;
}

/**
 * Vertices of the step path through operating points given strictest first (recall
 * non-decreasing). From recall 0 at the first point's precision, each point adds a vertical move at
 * the previous recall to its precision and a horizontal move to its recall. Points that flag
 * nothing (precision null) are skipped, and repeated vertices are written once.
 * @example prSteps([{ recall: 0.5, precision: 1 }, { recall: 1, precision: 0.5 }])
 *   // [[0, 1], [0.5, 1], [0.5, 0.5], [1, 0.5]]
 */
export function prSteps(points: readonly PrPoint[]): [number, number][] {
  const path: [number, number][] = [];
  let recall = 0;
  for (const p of points) {
    if (p.precision === null) continue;
    push([recall, p.precision]);
    push([p.recall, p.precision]);
    recall = p.recall;
  }
  return path;

  function push(vertex: [number, number]): void {
    const last = path[path.length - 1];
    if (last === undefined || last[0] !== vertex[0] || last[1] !== vertex[1]) path.push(vertex);
  }
}

/**
 * Area under a path by the trapezoidal rule: for a step path, Σ (width × height) of its steps.
 * @example pathArea([[0, 1], [0.5, 1], [0.5, 0.5], [1, 0.5]]) // 0.75
 */
export function pathArea(path: readonly [number, number][]): number {
  let area = 0;
  for (let k = 1; k < path.length; k++) area += ((path[k][0] - path[k - 1][0]) * (path[k][1] + path[k - 1][1])) / 2;
  return area;
}
