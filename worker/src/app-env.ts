/** Hono environment of the app: the worker bindings and the per-request variables. */
import type { Env } from "./env";
import type { Principal } from "./middleware/credentials";

/** Bindings and context variables shared by every route and middleware. */
export interface AppEnv {
  Bindings: Env;
  Variables: {
    /** Set by `authenticate()`. */
    principal: Principal;
    /** Parsed JSON body, set by `jsonBody()`. */
    body: unknown;
  };
}
