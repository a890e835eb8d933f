import type { Context } from 'hono';
import type { z } from 'zod';
import { jsonErrorPosition } from '../document-files/index.js';
import { zodIssues } from '../schema/issues.js';
import { HttpError } from './errors.js';

/** Yields the chunks of a web stream, cancelling it when the reader stops early (e.g. a size limit). */
export async function* streamChunks(body: ReadableStream<Uint8Array> | null): AsyncGenerator<Uint8Array> {
  if (!body) return;
  const reader = body.getReader();
  let done = false;
  try {
    for (;;) {
      const next = await reader.read();
      if (next.done) {
        done = true;
        return;
      }
      yield next.value;
    }
  } finally {
    if (!done) await reader.cancel().catch(() => undefined);
    reader.releaseLock();
  }
}

function tooLarge(maxBytes: number): HttpError {
  return new HttpError(413, `request body is larger than ${maxBytes} bytes`, { issues: [{ path: 'body', message: `at most ${maxBytes} bytes` }] });
}

/** Reads the whole JSON body (at most maxBytes), then checks it with a schema: 400 naming each bad field. */
export async function readJson<S extends z.ZodType>(c: Context, schema: S, maxBytes: number): Promise<z.infer<S>> {
  const declared = Number(c.req.header('content-length'));
  if (Number.isFinite(declared) && declared > maxBytes) throw tooLarge(maxBytes);
  const chunks: Uint8Array[] = [];
  let size = 0;
  for await (const chunk of streamChunks(c.req.raw.body)) {
    size += chunk.byteLength;
    if (size > maxBytes) throw tooLarge(maxBytes);
    chunks.push(chunk);
  }
  const text = Buffer.concat(chunks).toString('utf8');
  let json: unknown;
  try {
    json = JSON.parse(text);
  } catch (e) {
    const at = jsonErrorPosition(text, e);
    throw new HttpError(400, 'request body is not valid JSON', { issues: [{ path: 'body', ...at, message: (e as Error).message }] });
  }
  return parseInput(schema, json, 'request body');
}

/** Checks a value with a schema; a 400 naming each bad field when it does not fit. */
export function parseInput<S extends z.ZodType>(schema: S, value: unknown, what: string): z.infer<S> {
  const r = schema.safeParse(value);
  if (!r.success) throw new HttpError(400, `invalid ${what}`, { issues: zodIssues(r.error, value) });
  return r.data;
}

/** Query parameters (first value of each) checked with a schema. */
export function readQuery<S extends z.ZodType>(c: Context, schema: S): z.infer<S> {
  return parseInput(schema, c.req.query(), 'query parameters');
}
