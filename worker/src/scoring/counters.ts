/**
 * Per-isolate counters of things that went wrong without failing a request; reported by
 * `GET /v1/health` so that a silent degradation shows somewhere.
 */
export const counters = {
  /** Payments not scored in shadow because the shadow model needs a feature the request lacks or refuses a value. */
  shadowSkipped: 0,
  /** Shadow messages that could not be enqueued (best effort; the live answer is unaffected). */
  shadowSendFailures: 0,
  /** Review hand-offs that could not be enqueued (the payment was answered 503, retryable). */
  handoffSendFailures: 0,
  /** Payments scored without the durable idempotency check because its store could not be reached. */
  idempotencyUnavailable: 0,
  /** Conflicting repeats whose record could not be enqueued for the analysts (the 409 went out all the same). */
  conflictSendFailures: 0,
};
