import type { Context } from 'hono';
import type { ContentfulStatusCode } from 'hono/utils/http-status';
import { InputError, type InputIssue } from '../schema/issues.js';

/** The one error the API throws: an HTTP status, a message, located issues and the cause. */
export class HttpError extends Error {
  override name = 'HttpError';
  readonly issues: InputIssue[];
  /** Extra fields for the error body (e.g. the failing checks of a refused release). */
  readonly extra: Record<string, unknown>;
  /** Response headers, e.g. WWW-Authenticate on a 401 or Content-Range on a 416. */
  readonly headers: Record<string, string>;

  constructor(
    readonly status: ContentfulStatusCode,
    message: string,
    options: { issues?: InputIssue[]; cause?: unknown; extra?: Record<string, unknown>; headers?: Record<string, string> } = {},
  ) {
    super(message, { cause: options.cause });
    this.issues = options.issues ?? [];
    this.extra = options.extra ?? {};
    this.headers = options.headers ?? {};
  }
}

export const badRequest = (message: string, issues: InputIssue[] = []) => new HttpError(400, message, { issues });
export const notFound = (what: string) => new HttpError(404, `${what} not found`);
export const conflict = (message: string, issues: InputIssue[] = []) => new HttpError(409, message, { issues });

/** The JSON body of every error response: `{error, issues: [{path, message}]}`. */
export interface ErrorBody {
  error: string;
  issues: InputIssue[];
  [extra: string]: unknown;
}

function isAbortError(error: unknown): boolean {
  const e = error as { name?: string; code?: string } | null;
  return e?.name === 'AbortError' || e?.code === 'ECONNRESET' || e?.code === 'ERR_STREAM_PREMATURE_CLOSE' || e?.code === 'ABORT_ERR';
}

export interface ErrorReporter {
  (error: unknown, c: Context): void;
}

/**
 * Renders any thrown error as the API's JSON error body. HttpError and InputError keep their status and
 * issues; anything else is a fault of the server: a 500 with a plain message, reported (never leaked).
 */
export function createErrorHandler(report: ErrorReporter) {
  return function handleError(error: unknown, c: Context) {
    if (error instanceof HttpError) {
      const body: ErrorBody = { ...error.extra, error: error.message, issues: error.issues };
      return c.json(body, error.status, error.headers);
    }
    if (error instanceof InputError) {
      return c.json({ error: error.message, issues: error.issues } satisfies ErrorBody, 400);
    }
    if (error instanceof URIError) {
      return c.json({ error: 'bad percent-encoding in the URL', issues: [{ path: 'url', message: c.req.path }] } satisfies ErrorBody, 400);
    }
    // The client went away (an upload cut, a closed tab): not a fault of the server, so not reported as one.
    // 499 is nginx's "client closed request"; nobody is left to read it.
    if (c.req.raw.signal.aborted || isAbortError(error)) {
      return c.json({ error: 'client closed the request', issues: [] } satisfies ErrorBody, 499 as ContentfulStatusCode);
    }
    report(error, c);
    return c.json({ error: 'internal server error', issues: [] } satisfies ErrorBody, 500);
  };
}
