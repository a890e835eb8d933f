import { createReadStream, createWriteStream, statSync, unlinkSync } from 'node:fs';
import { createHash } from 'node:crypto';
import { request as httpRequest, type IncomingMessage } from 'node:http';
import { request as httpsRequest } from 'node:https';

/** A download that did not complete (network, server, status); worth trying again later. */
export class FetchError extends Error {
  override readonly name = 'FetchError';
}

/** The server sent (or announced) more bytes than the release declares; nothing beyond the declared size was written. */
export class OversizeError extends Error {
  override readonly name = 'OversizeError';
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

/**
 * Streams the answer into the file, counting as it goes: at most `maxBytes` are ever written. A chunk
 * that would go past it ends the download (and the connection) before it is written.
 */
function save(res: IncomingMessage, path: string, append: boolean, maxBytes: number): Promise<void> {
  return new Promise((resolve, reject) => {
    const announced = Number(res.headers['content-length']);
    if (Number.isFinite(announced) && announced > maxBytes) {
      res.destroy();
      return reject(new OversizeError(`the server announced ${announced} bytes where ${maxBytes} were left to fetch`));
    }
    const out = createWriteStream(path, { flags: append ? 'a' : 'w' });
    let written = 0;
    let failed = false;
    const fail = (e: Error) => {
      if (failed) return;
      failed = true;
      res.unpipe(out);
      res.destroy();
      out.end(() => reject(e));
    };
    res.on('data', (chunk: Buffer) => {
      if (failed) return;
      if (written + chunk.length > maxBytes) return fail(new OversizeError(`the server sent more than the ${maxBytes} bytes left to fetch`));
      written += chunk.length;
      if (!out.write(chunk)) {
        res.pause();
        out.once('drain', () => res.resume());
      }
    });
    res.on('error', (e) => fail(new FetchError(`download interrupted: ${e.message}`)));
    out.on('error', (e) => {
      failed = true;
      res.destroy();
      reject(e);
    });
    res.on('end', () => {
      if (failed) return;
      out.end(() => {
        if (!res.complete) reject(new FetchError('download interrupted: connection closed early'));
        else resolve();
      });
    });
    res.on('close', () => {
      if (!failed && !res.complete) fail(new FetchError('download interrupted: connection closed early'));
    });
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
    return save(res, req.partPath, true, req.expectedBytes - from);
  }
  if (res.statusCode === 200) return save(res, req.partPath, false, req.expectedBytes);
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
