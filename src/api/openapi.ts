import { z } from 'zod';
import { ROUTES, type RouteSpec } from './route-table.js';

const errorSchema = z.object({
  error: z.string(),
  issues: z.array(z.object({ path: z.string(), message: z.string() })),
});

function jsonSchema(schema: z.ZodType): unknown {
  return z.toJSONSchema(schema, { io: 'input', unrepresentable: 'any', target: 'openapi-3.0' });
}

function operation(spec: RouteSpec) {
  const pathParams = [...spec.path.matchAll(/:([A-Za-z0-9_]+)/g)].map((m) => ({
    name: m[1]!,
    in: 'path',
    required: true,
    schema: { type: 'string' },
  }));
  const queryParams = spec.query
    ? Object.entries(spec.query.shape).map(([name, field]) => ({
        name,
        in: 'query',
        required: !(field as z.ZodType).safeParse(undefined).success,
        schema: jsonSchema(field as z.ZodType),
      }))
    : [];
  const errors = Object.fromEntries(
    ['400', '401', '403', '404', '409', '413', '422']
      .filter((s) => spec.access !== 'public' || !['401', '403'].includes(s))
      .map((s) => [s, { description: 'error', content: { 'application/json': { schema: { $ref: '#/components/schemas/Error' } } } }]),
  );
  const requestBody = spec.binaryBody
    ? { required: true, content: { 'application/octet-stream': { schema: { type: 'string', format: 'binary' } } } }
    : spec.body
      ? { required: true, content: { 'application/json': { schema: jsonSchema(spec.body) } } }
      : undefined;
  const security =
    spec.access === 'public' ? [] : spec.access === 'viewer-or-device' ? [{ bearer: [] }, { deviceBasic: [] }] : [{ bearer: [] }];
  return {
    operationId: spec.key,
    summary: spec.summary,
    tags: [spec.tag],
    'x-ocellus-access': spec.access,
    security,
    parameters: [...pathParams, ...queryParams],
    ...(requestBody ? { requestBody } : {}),
    responses: { '200': { description: 'success' }, ...errors },
  };
}

/** The OpenAPI 3.0 document of the API, generated from the route table and the same zod schemas that check requests. */
export function openApiDocument(): Record<string, unknown> {
  const paths: Record<string, Record<string, unknown>> = {};
  for (const spec of ROUTES) {
    const path = spec.path.replace(/:([A-Za-z0-9_]+)/g, '{$1}');
    (paths[path] ??= {})[spec.method] = operation(spec);
  }
  return {
    openapi: '3.0.3',
    info: {
      title: 'Ocellus server',
      version: '1',
      description:
        'Per-task camera and compute profiles for robot fleets: documents, validated profile revisions, signed releases, devices. ' +
        'Roles: viewer < engineer < operator < admin; each route lists the least role it needs in x-ocellus-access.',
    },
    paths,
    components: {
      schemas: { Error: jsonSchema(errorSchema) },
      securitySchemes: {
        bearer: { type: 'http', scheme: 'bearer' },
        deviceBasic: { type: 'http', scheme: 'basic', description: "a device's id and MQTT password" },
      },
    },
  };
}
