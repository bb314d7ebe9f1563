/**
 * Vitest global setup of the browser tests: builds the review app once for every file of the run
 * (each browser suite then starts its own wrangler dev on it).
 */
import { buildUi } from "./stack";

export default async function setup(): Promise<void> {
  await buildUi();
}
