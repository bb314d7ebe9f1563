/**
 * The browser tests, as one file: the review app's suite, then the model page's. Each suite starts
 * its own wrangler dev and stops it before the next starts (two sessions side by side are avoided;
 * see vitest.config.ts), and as one file they run beside the other projects' files instead of after them.
 */
import "./review.suite";
import "./model-page.suite";
