/**
 * The API contract holds together: the OpenAPI document generated from it describes every answer
 * with a real schema (no bare `object`, no untyped value where a shape belongs) and every `$ref`
 * resolves; the wire schemas of figures computed by the model core have exactly the core's types.
 */
import { describe, expect, expectTypeOf, it } from "vitest";
import type { z } from "zod";
import type { DriftEntry, FlagRateCheck } from "../../../shared-model/src/drift";
import type { Estimate, RateEstimates } from "../../../shared-model/src/estimates";
import type { OperatingPoint } from "../../../shared-model/src/tuning";
import type { FittedFeature } from "../../../shared-model/src/types";
import type { driftEntrySchema, estimateSchema, flagRateCheckSchema, operatingPointSchema, rateEstimatesSchema } from "./insights";
import { openApiDocument } from "./openapi";
import { OPERATIONS, operationFor } from "./operations";
import type { PairAxis } from "./review";

type Json = Record<string, unknown>;
const doc = openApiDocument();
const schemas = doc.components.schemas as Record<string, Json>;

/** Paths inside `schema` where it says nothing about a value's shape (`{}`, or an object with no properties). */
function shapeless(schema: unknown, at: string, out: string[] = []): string[] {
  if (schema === null || typeof schema !== "object") return out;
  const node = schema as Json;
  if (Array.isArray(schema)) {
    schema.forEach((s, i) => shapeless(s, `${at}[${i}]`, out));
    return out;
  }
  const says = ["type", "$ref", "anyOf", "oneOf", "allOf", "const", "enum", "not"].some((k) => k in node);
  if (!says) out.push(at);
  if (node.type === "object" && !("properties" in node) && !("additionalProperties" in node) && !("propertyNames" in node)) out.push(`${at} (bare object)`);
  for (const key of ["properties", "$defs"]) {
    for (const [name, sub] of Object.entries((node[key] as Json | undefined) ?? {})) shapeless(sub, `${at}.${name}`, out);
  }
  for (const key of ["items", "additionalProperties", "anyOf", "oneOf", "allOf", "prefixItems"]) if (typeof node[key] === "object") shapeless(node[key], `${at}.${key}`, out);
  return out;
}

/** Every `$ref` under `value`. */
function refs(value: unknown, out: string[] = []): string[] {
  if (value === null || typeof value !== "object") return out;
  for (const [key, sub] of Object.entries(value)) {
    if (key === "$ref" && typeof sub === "string") out.push(sub);
    else refs(sub, out);
  }
  return out;
}

describe("the OpenAPI document generated from the contract", () => {
  it("describes every answer of every route: JSON answers by a named schema, the export by its media types", () => {
    for (const [path, methods] of Object.entries(doc.paths)) {
      for (const [method, operation] of Object.entries(methods)) {
        const responses = operation.responses as Record<string, { content?: Record<string, { schema?: Json }> }>;
        expect(Object.keys(responses).length, `${method} ${path}`).toBeGreaterThan(0);
        for (const [status, response] of Object.entries(responses)) {
          const content = response.content ?? {};
          expect(Object.keys(content).length, `${method} ${path} ${status} has no content`).toBeGreaterThan(0);
          for (const [type, media] of Object.entries(content)) {
            if (type === "application/json") expect(media.schema?.$ref, `${method} ${path} ${status}`).toMatch(/^#\/components\/schemas\/\w+$/);
            else expect(media.schema, `${method} ${path} ${status} ${type}`).toEqual({ type: "string" });
          }
        }
      }
    }
  });

  it("has no bare object and no untyped value in any answer schema", () => {
    const answerNames = new Set(OPERATIONS.flatMap((o) => Object.values(o.answers).flatMap((a) => ("name" in a ? [a.name] : []))));
    answerNames.add("Error");
    for (const name of answerNames) expect(shapeless(schemas[name], name), name).toEqual([]);
  });

  it("finds that check failing on a bare object, so the check above can fail", () => {
    expect(shapeless({ type: "object" }, "X")).toEqual(["X (bare object)"]);
    expect(shapeless({ type: "object", properties: { a: {} } }, "X")).toEqual(["X.a"]);
  });

  it("resolves every $ref to a component", () => {
    for (const target of refs(doc)) {
      expect(target, target).toMatch(/^#\/components\/schemas\/\w+$/);
      expect(schemas[target.slice("#/components/schemas/".length)], target).toBeDefined();
    }
  });

  it("documents requests with unknown keys refused and query parameters from the route's own schema", () => {
    expect(schemas.ScoreRequest.additionalProperties).toBe(false);
    expect(Object.keys(schemas.ScoreRequest.properties as Json)).toEqual(["transactionId", "features", "payment", "segment", "accountRef"]);
    const list = doc.paths["/v1/review/items"].get as { parameters: { name: string; in: string }[] };
    expect(list.parameters.map((p) => p.name)).toEqual(["segment", "modelVersion", "selection", "from", "to", "state", "sort", "direction", "limit", "cursor"]);
    // Requests as sent: a parameter with a default may be left out.
    expect((schemas.DecisionRequest.required as string[]) ?? []).toEqual(["outcome"]);
    expect(schemas.PublishCutoffRequest.required).not.toContain("basis");
  });

  it("finds a route by the path Hono registers or by its OpenAPI path", () => {
    expect(operationFor("GET", "/v1/review/items/:id")?.path).toBe("/v1/review/items/{id}");
    expect(operationFor("post", "/v1/review/items/{id}/decision")?.body?.name).toBe("DecisionRequest");
    expect(operationFor("GET", "/v1/nothing")).toBeUndefined();
  });
});

describe("wire schemas of the model core's figures", () => {
  it("have exactly the core's types, so a change on either side fails the typecheck", () => {
    expectTypeOf<z.output<typeof driftEntrySchema>>().toEqualTypeOf<DriftEntry>();
    expectTypeOf<z.output<typeof flagRateCheckSchema>>().toEqualTypeOf<FlagRateCheck>();
    expectTypeOf<z.output<typeof operatingPointSchema>>().toEqualTypeOf<OperatingPoint>();
    expectTypeOf<z.output<typeof estimateSchema>>().toEqualTypeOf<Estimate>();
    expectTypeOf<z.output<typeof rateEstimatesSchema>>().toEqualTypeOf<RateEstimates>();
    expectTypeOf<FittedFeature>().toExtend<PairAxis["feature"]>();
  });
});
