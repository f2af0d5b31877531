// Upload with progress: fetch cannot report request-body progress, XMLHttpRequest can.
import { CONSOLE_HEADER } from './client';
import { ApiError, isProblem } from './problem';

export interface UploadOptions {
  method?: 'POST' | 'PUT';
  url: string;
  body: string | Blob;
  contentType: string;
  headers?: Record<string, string>;
  /** Fraction sent, 0…1. */
  onProgress?: (fraction: number) => void;
}

export function upload<T>(opts: UploadOptions): Promise<T> {
  return new Promise<T>((resolve, reject) => {
    const xhr = new XMLHttpRequest();
    xhr.open(opts.method ?? 'POST', opts.url);
    xhr.withCredentials = true;
    xhr.setRequestHeader('Content-Type', opts.contentType);
    xhr.setRequestHeader('Accept', 'application/json, application/problem+json');
    xhr.setRequestHeader(CONSOLE_HEADER, '1');
    for (const [k, v] of Object.entries(opts.headers ?? {})) xhr.setRequestHeader(k, v);
    xhr.upload.onprogress = (e) => {
      if (e.lengthComputable && e.total > 0) opts.onProgress?.(e.loaded / e.total);
    };
    xhr.upload.onload = () => opts.onProgress?.(1);
    xhr.onload = () => {
      let body: unknown = null;
      try {
        body = xhr.responseText ? JSON.parse(xhr.responseText) : null;
      } catch {
        body = xhr.responseText;
      }
      if (xhr.status >= 200 && xhr.status < 300) return resolve(body as T);
      reject(new ApiError(isProblem(body) ? body : { type: 'about:blank', title: xhr.statusText || `HTTP ${xhr.status}`, status: xhr.status }));
    };
    xhr.onerror = () =>
      reject(new ApiError({ type: 'about:blank', title: 'The upload did not reach the service', status: 0, detail: 'Check the connection and try again.' }));
    xhr.send(opts.body);
  });
}
