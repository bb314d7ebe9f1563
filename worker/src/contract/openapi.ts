/**
 * The OpenAPI 3.1 document of the API, generated from the route table (./operations.ts) and its zod
 * schemas with zod 4's `z.toJSONSchema`: requests as they are sent (`io: "input"`: defaults are
 * optional), answers as they come (`io: "output"`). Named schemas become components and refer to
 * each other by `$ref`; every operation but the public ones declares the bearer scheme.
 */
import { z } from "zod";
import { OPERATIONS, type Answer, type Operation } from "./operations";
import { errorSchema, jsonValueSchema } from "./wire";

type JsonSchema = Record<string, unknown>;

const COMPONENT = "#/components/schemas/";
const ref = (name: string) => ({ $ref: `${COMPONENT}${name}` });

/** JSON Schemas of named zod schemas, each a component; shared names must name the same schema. */
function components(named: Map<string, z.ZodType>, io: "input" | "output"): Record<string, JsonSchema> {
  const registry = z.registry<{ id: string }>();
  registry.add(jsonValueSchema, { id: "JsonValue" });
  for (const [id, schema] of named) registry.add(schema, { id });
  const { schemas } = z.toJSONSchema(registry, { target: "draft-2020-12", unrepresentable: "any", io, uri: (id) => `${COMPONENT}${id}` }) as {
    schemas: Record<string, JsonSchema>;
  };
  for (const schema of Object.values(schemas)) {
    delete schema.$schema;
    delete schema.$id;
  }
  return schemas;
}

/** Adds `name → schema` to `named`, refusing one name for two schemas. */
function register(named: Map<string, z.ZodType>, name: string, schema: z.ZodType): void {
  const held = named.get(name);
  if (held !== undefined && held !== schema) throw new Error(`OpenAPI component ${name} is declared with two different schemas`);
  named.set(name, schema);
}

function parameterSchema(schema: z.ZodType): JsonSchema {
  const generated = z.toJSONSchema(schema, { target: "draft-2020-12", unrepresentable: "any", io: "input" }) as JsonSchema;
  delete generated.$schema;
  return generated;
}

function parameters(operation: Operation): JsonSchema[] {
  const path = Object.entries(operation.params ?? {}).map(([name, schema]) => ({ name, in: "path", required: true, schema: parameterSchema(schema) }));
  const properties = operation.query ? ((parameterSchema(operation.query).properties ?? {}) as Record<string, JsonSchema>) : {};
  const query = Object.entries(properties).map(([name, schema]) => ({ name, in: "query", required: false, schema }));
  return [...path, ...query];
}

function response(answer: Answer): JsonSchema {
  if ("error" in answer) return { description: answer.description, content: { "application/json": { schema: ref("Error") } } };
  if ("mediaTypes" in answer) return { description: answer.description, content: Object.fromEntries(answer.mediaTypes.map((type) => [type, { schema: { type: "string" } }])) };
  return { description: answer.description, content: { "application/json": { schema: ref(answer.name) } } };
}

/**
 * Builds the document.
 *
 * @example
 * const doc = openApiDocument(); doc.paths["/v1/score"].post.summary // → "Score one payment"
 */
export function openApiDocument() {
  const requests = new Map<string, z.ZodType>();
  const answers = new Map<string, z.ZodType>([["Error", errorSchema]]);
  const paths: Record<string, Record<string, JsonSchema>> = {};
  for (const operation of OPERATIONS) {
    if (operation.body) register(requests, operation.body.name, operation.body.schema);
    for (const answer of Object.values(operation.answers)) if ("schema" in answer) register(answers, answer.name, answer.schema);
    const params = parameters(operation);
    paths[operation.path] ??= {};
    paths[operation.path][operation.method] = {
      summary: operation.summary,
      ...(operation.description ? { description: operation.description } : {}),
      security: operation.public ? [] : [{ bearer: [] }],
      ...(params.length > 0 ? { parameters: params } : {}),
      ...(operation.body ? { requestBody: { required: true, content: { "application/json": { schema: ref(operation.body.name) } } } } : {}),
      responses: Object.fromEntries(Object.entries(operation.answers).map(([status, answer]) => [status, response(answer)])),
    };
  }
  for (const name of requests.keys()) if (answers.has(name) && answers.get(name) !== requests.get(name)) throw new Error(`OpenAPI component ${name} names a request and an answer`);
  return {
    openapi: "3.1.0" as const,
    info: {
      title: "isodense edge scoring service",
      version: "1",
      description:
        "Scores card-not-present payments with a multivariate Gaussian, flags the unusual ones for human review and never declines a payment. " +
        "Roles: flow (score), analyst (review queue), admin (models; may do everything).",
    },
    servers: [{ url: "/" }],
    components: {
      securitySchemes: { bearer: { type: "http", scheme: "bearer", description: "Per-user token from FLOW_CREDENTIALS, ANALYST_CREDENTIALS or ADMIN_CREDENTIALS." } },
      schemas: { ...components(answers, "output"), ...components(requests, "input") },
    },
    paths,
  };
}
