/**
 * The HTTP API's contract: every request and answer shape as a zod schema, with its type. The
 * routes validate with these schemas, `/openapi.json` is generated from them (./openapi.ts) and the
 * review app imports the types through the `@contract` path alias. Pure zod and shared-model code:
 * nothing here may import the Workers runtime, Hono or the worker's storage.
 */
export * from "./insights";
export * from "./models";
export * from "./operations";
export * from "./privacy";
export * from "./review";
export * from "./scoring";
export * from "./wire";
