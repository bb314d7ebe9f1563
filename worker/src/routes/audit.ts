/**
 * `GET /v1/audit/verify` (admin): seals what is pending and walks the review audit trail's hash
 * chain, answering the head (to keep outside D1) and the first broken link, if any
 * (audit/audit-chain.ts). 200 either way: a broken chain is a finding, not a failed request.
 */
import { Hono } from "hono";
import type { AppEnv } from "../app-env";
import { verifyAuditTrail } from "../audit/audit-chain";
import type { ChainReport } from "../contract";
import { allow, authenticate } from "../middleware/auth";

/** Audit routes, mounted under `/v1`. */
export const auditRoutes = new Hono<AppEnv>();

auditRoutes.get("/audit/verify", authenticate(), allow("admin"), async (c) => {
  const report = await verifyAuditTrail(c.env);
  if (!report.ok) console.error(JSON.stringify({ event: "audit-chain-broken", firstBroken: report.firstBroken }));
  return c.json(report satisfies ChainReport);
});
