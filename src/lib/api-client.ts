import type { Problem } from '../../shared/http';

/** A problem+json answer from the API, kept whole so forms can show field issues next to their inputs. */
export class ApiError extends Error {
  constructor(readonly status: number, readonly problem: Problem) {
    super(problem.detail || problem.title);
  }
}

let csrfToken: string | null = null;
export function setCsrfToken(token: string | null) {
  csrfToken = token;
}

type Options = { method?: string; body?: unknown; signal?: AbortSignal; formData?: FormData };

/** The one fetch wrapper: JSON in/out, the CSRF header on changes, problem+json turned into ApiError. */
export async function api<T>(path: string, opts: Options = {}): Promise<T> {
  const method = opts.method ?? (opts.body !== undefined || opts.formData ? 'POST' : 'GET');
  const headers: Record<string, string> = { accept: 'application/json' };
  if (opts.body !== undefined) headers['content-type'] = 'application/json';
  if (method !== 'GET' && csrfToken) headers['x-csrf-token'] = csrfToken;
  const res = await fetch(path, {
    method,
    headers,
    credentials: 'same-origin',
    body: opts.formData ?? (opts.body !== undefined ? JSON.stringify(opts.body) : undefined),
    signal: opts.signal,
  });
  if (res.status === 204) return undefined as T;
  const type = res.headers.get('content-type') ?? '';
  if (!res.ok) {
    const problem: Problem = type.includes('json')
      ? await res.json()
      : { type: 'about:blank', title: res.statusText, status: res.status, detail: await res.text(), code: 'http' };
    throw new ApiError(res.status, problem);
  }
  return (type.includes('json') ? res.json() : res.text()) as Promise<T>;
}

export function describeError(e: unknown): string {
  if (e instanceof ApiError) {
    const issues = e.problem.issues?.map((i) => `${i.path}${i.line ? ` (line ${i.line})` : ''}: ${i.message}`) ?? [];
    return [e.problem.detail, ...issues].join(' · ');
  }
  return e instanceof Error ? e.message : String(e);
}
