import { createReadStream, createWriteStream, statSync, unlinkSync } from 'node:fs';
import { createHash } from 'node:crypto';
import { request as httpRequest, type IncomingMessage } from 'node:http';
import { request as httpsRequest } from 'node:https';

/** A download that did not complete (network, server, status); worth trying again later. */
export class FetchError extends Error {
  override readonly name = 'FetchError';
}

export interface DownloadRequest {
  url: string;
  /** HTTP Basic credentials (device id and MQTT password). */
  username: string;
  password: string;
  /** Where bytes accumulate; an existing partial file is resumed with a Range request. */
  partPath: string;
  expectedBytes: number;
  timeoutMs?: number;
}

function sizeOf(path: string): number {
  try {
    return statSync(path).size;
  } catch {
    return 0;
  }
}

function get(req: DownloadRequest, headers: Record<string, string>): Promise<IncomingMessage> {
  const url = new URL(req.url);
  const send = url.protocol === 'https:' ? httpsRequest : httpRequest;
  return new Promise((resolve, reject) => {
    const r = send(url, { method: 'GET', headers, timeout: req.timeoutMs ?? 30_000 }, resolve);
    r.on('timeout', () => r.destroy(new FetchError(`no answer from ${url.origin} within ${req.timeoutMs ?? 30_000} ms`)));
    r.on('error', (e) => reject(e instanceof FetchError ? e : new FetchError(`${url.origin}: ${e.message}`)));
    r.end();
  });
}

function save(res: IncomingMessage, path: string, append: boolean): Promise<void> {
  return new Promise((resolve, reject) => {
    const out = createWriteStream(path, { flags: append ? 'a' : 'w' });
    res.on('error', (e) => {
      out.destroy();
      reject(new FetchError(`download interrupted: ${e.message}`));
    });
    out.on('error', (e) => reject(e));
    out.on('finish', () => {
      if (!res.complete) reject(new FetchError('download interrupted: connection closed early'));
      else resolve();
    });
    res.pipe(out);
  });
}

/**
 * Downloads (or finishes downloading) a file into `partPath`: asks for the bytes from the partial
 * file's size onward (RFC 9110 Range), appends a 206 answer, restarts on a 200, and treats 416 with
 * a complete file as done. Does not check the content; the caller hashes the result.
 */
export async function downloadWithResume(req: DownloadRequest): Promise<void> {
  const have = sizeOf(req.partPath);
  if (have > req.expectedBytes) unlinkSync(req.partPath);
  const from = have > req.expectedBytes ? 0 : have;
  if (from === req.expectedBytes && from > 0) return;
  const headers: Record<string, string> = { authorization: `Basic ${Buffer.from(`${req.username}:${req.password}`).toString('base64')}` };
  if (from > 0) headers.range = `bytes=${from}-`;
  const res = await get(req, headers);
  if (res.statusCode === 206 && from > 0) {
    const start = /^bytes (\d+)-/.exec(String(res.headers['content-range'] ?? ''))?.[1];
    if (Number(start) !== from) {
      res.resume();
      unlinkSync(req.partPath);
      throw new FetchError(`server resumed at byte ${start ?? '?'} instead of ${from}; starting over`);
    }
    return save(res, req.partPath, true);
  }
  if (res.statusCode === 200) return save(res, req.partPath, false);
  res.resume();
  if (res.statusCode === 416 && sizeOf(req.partPath) >= req.expectedBytes) return;
  if (res.statusCode === 416) unlinkSync(req.partPath);
  throw new FetchError(`GET ${new URL(req.url).pathname} answered ${res.statusCode}`);
}

export function sha256OfFile(path: string): Promise<string> {
  return new Promise((resolve, reject) => {
    const hash = createHash('sha256');
    createReadStream(path)
      .on('data', (chunk) => hash.update(chunk))
      .on('error', reject)
      .on('end', () => resolve(hash.digest('hex')));
  });
}
