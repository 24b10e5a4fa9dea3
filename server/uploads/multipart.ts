import type { Readable } from 'node:stream';
import busboy from 'busboy';
import type { Request } from 'express';
import { Invalid } from '../http/errors';

export type FileInfo = { filename: string; mimeType: string };

/**
 * Streams one multipart request: form fields are collected as they come (they must precede the file part) and the
 * single file part is handed to `onFile` as a stream. Resolves with what `onFile` returned once the body is read.
 */
export function receiveMultipart<T>(
  req: Request,
  limits: { fileBytes: number },
  onFile: (file: Readable & { truncated?: boolean }, info: FileInfo, fields: Record<string, string>) => Promise<T>,
): Promise<{ fields: Record<string, string>; result: T | undefined }> {
  return new Promise((resolve, reject) => {
    let bb: busboy.Busboy;
    try {
      bb = busboy({ headers: req.headers, limits: { files: 1, fileSize: limits.fileBytes, fields: 30, fieldSize: 2000 } });
    } catch {
      reject(new Invalid('Send the file as multipart/form-data.', [{ path: 'file', message: 'expected a multipart/form-data body' }]));
      return;
    }
    // Field names come from the client: a prototype-less object so `__proto__` or `constructor` is just a name.
    const fields = Object.create(null) as Record<string, string>;
    let work: Promise<T> | null = null;
    let settled = false;
    const fail = (e: unknown) => {
      if (settled) return;
      settled = true;
      req.unpipe(bb);
      req.resume(); // let the client finish sending so it can read the answer
      reject(e);
    };
    bb.on('field', (name, value) => (fields[name] = value));
    bb.on('file', (_name, file, info) => {
      if (work) {
        file.resume();
        return;
      }
      work = onFile(file, { filename: info.filename || 'upload.csv', mimeType: info.mimeType }, { ...fields });
      work.catch((e) => {
        file.resume();
        fail(e);
      });
    });
    bb.on('error', fail);
    bb.on('close', () => {
      if (settled) return;
      if (!work) {
        settled = true;
        resolve({ fields, result: undefined });
        return;
      }
      work.then((result) => {
        if (settled) return;
        settled = true;
        resolve({ fields, result });
      }, fail);
    });
    req.on('aborted', () => fail(new Invalid('The upload was interrupted.', [{ path: 'file', message: 'the connection closed before the file was complete' }])));
    req.pipe(bb);
  });
}
