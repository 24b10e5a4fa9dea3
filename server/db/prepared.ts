import crypto from 'node:crypto';
import type { DataSource } from 'typeorm';

// Hot read statements as named prepared statements (PostgreSQL extended protocol: Parse once per connection, then
// Bind/Execute). An unnamed statement is parsed and planned again on every request; for the campaign list that is
// about 1.5 ms of PostgreSQL's CPU per request, more than executing it. A named statement is parsed once per pooled
// connection and, after five executions, PostgreSQL may keep a generic plan for it (PostgreSQL 15 documentation,
// PREPARE, "Notes": choice between custom and generic plans).
//
// The statement still goes through dataSource.query, so read-replica routing (server/db/replicas.ts), its fallback
// to the primary and every observer of PostgresQueryRunner.query see it as before: the statement travels as a
// node-postgres query config ({ name, text }) whose string form is its text. The name is derived from the text, so
// two different texts never share a name on one connection.
//
// A prepared statement whose tables changed shape under it (a migration while the process runs) fails once with
// "cached plan must not change result type" (SQLSTATE 0A000); such a statement is then sent unnamed.

type NamedText = { name: string; text: string; toString(): string };

const names = new Map<string, NamedText>();
const MAX_NAMES = 512;

function namedText(text: string): NamedText {
  let named = names.get(text);
  if (!named) {
    if (names.size >= MAX_NAMES) names.clear();
    const name = `cl_${crypto.createHash('sha256').update(text).digest('hex').slice(0, 24)}`;
    named = { name, text, toString: () => text };
    names.set(text, named);
  }
  return named;
}

function planChanged(e: unknown): boolean {
  const code = (e as { code?: string; driverError?: { code?: string } }).driverError?.code ?? (e as { code?: string }).code;
  return code === '0A000';
}

/** Runs a read-only statement as a named prepared statement on whichever pooled connection the query gets. */
export async function preparedQuery<T>(ds: DataSource, text: string, parameters: unknown[]): Promise<T[]> {
  try {
    return await ds.query(namedText(text) as unknown as string, parameters);
  } catch (e) {
    if (!planChanged(e)) throw e;
    return ds.query(text, parameters);
  }
}
