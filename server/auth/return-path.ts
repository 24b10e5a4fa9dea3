/**
 * Where the browser may go after sign-in: a path of this site only. It must start with one `/` that is not followed
 * by `/` or `\` (browsers read `//host` and `/\host` as another host), and hold no control characters (browsers drop
 * tab and newline from URLs, which would turn `/\t/host` into `//host`). Anything else becomes `/`.
 */
export function safeReturnPath(value: unknown): string {
  if (typeof value !== 'string' || value.length > 2048) return '/';
  // eslint-disable-next-line no-control-regex
  return /^\/(?![/\\])[^\u0000-\u001f\u007f]*$/.test(value) ? value : '/';
}
