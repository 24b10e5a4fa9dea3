import crypto from 'node:crypto';
import type { DataSource } from 'typeorm';

// Walks the audit trail from its first event and recomputes every hash in Node (not with the database's own
// functions, which whoever owns the schema could replace), then compares the result with the append-only
// checkpoints and with the chain heads anchored in signed certificates. docs/operations.md, "Audit trail".

/** One event as the verifier reads it: every column as text, the time already in the canonical format. */
export type AuditChainRow = {
  id: string;
  at: string;
  actor_user_id: string | null;
  actor_label: string;
  action: string;
  entity_type: string;
  entity_id: string | null;
  institute_id: string | null;
  details: string;
  prev_hash: string | null;
  hash?: string;
  hash_version?: number;
};

/** The columns the version-2 canonical form covers; a column outside this list is reported as unhashed. */
export const HASHED_COLUMNS = ['id', 'at', 'actor_user_id', 'actor_label', 'action', 'entity_type', 'entity_id', 'institute_id', 'details', 'prev_hash'];
const CHAIN_COLUMNS = [...HASHED_COLUMNS, 'hash', 'hash_version'];

const sha256 = (s: string) => crypto.createHash('sha256').update(s, 'utf8').digest('hex');
const field = (v: string | null) => (v === null ? '-' : `${Buffer.byteLength(v, 'utf8')}:${v}`);

/** Version 1 (events stored before version 2): '|'-joined, without institute_id; time without the zone letter. */
export function canonicalAuditV1(r: AuditChainRow): string {
  return sha256(
    [r.prev_hash ?? '', r.id, r.at, r.actor_user_id ?? '', r.actor_label, r.action, r.entity_type, r.entity_id ?? '', r.details].join('|'),
  );
}

/** Version 2: every column, each as <byte length>:<text> ('-' for NULL), after a version line. */
export function canonicalAuditV2(r: AuditChainRow): string {
  return sha256(
    'chronolevel-audit-v2\n' +
      [r.prev_hash, r.id, `${r.at}Z`, r.actor_user_id, r.actor_label, r.action, r.entity_type, r.entity_id, r.institute_id, r.details].map(field).join(''),
  );
}

export type AuditProblem =
  | 'content-altered'
  | 'link-broken'
  | 'version-downgrade'
  | 'unknown-version'
  | 'checkpoint-head-missing'
  | 'checkpoint-head-changed'
  | 'checkpoint-count-mismatch'
  | 'certificate-anchor-missing'
  | 'unhashed-column';

export type AuditBreak = { problem: AuditProblem; eventId: string | null; position: number | null; detail: string };

export type AuditVerifyReport = {
  ok: boolean;
  events: number;
  head: { eventId: string; hash: string } | null;
  checkpointsChecked: number;
  certificateAnchorsChecked: number;
  unhashedColumns: string[];
  firstBreak: AuditBreak | null;
  breaks: AuditBreak[];
};

const BATCH = 5000;
const MAX_REPORTED = 50;

export async function verifyAuditChain(ds: DataSource): Promise<AuditVerifyReport> {
  const breaks: AuditBreak[] = [];
  const report = (b: AuditBreak) => {
    if (breaks.length < MAX_REPORTED) breaks.push(b);
  };

  const cols = (await ds.query(`SELECT column_name FROM information_schema.columns WHERE table_schema = 'public' AND table_name = 'audit_event'`)) as { column_name: string }[];
  const unhashedColumns = cols.map((c) => c.column_name).filter((c) => !CHAIN_COLUMNS.includes(c)).sort();
  for (const c of unhashedColumns) report({ problem: 'unhashed-column', eventId: null, position: null, detail: `column ${c} of audit_event is not covered by the hash chain` });

  const checkpoints = (await ds.query(
    `SELECT id::text, head_event_id::text AS head, head_hash, event_count::text AS count FROM audit_checkpoint c ORDER BY c.head_event_id, c.id`,
  )) as { id: string; head: string; head_hash: string; count: string }[];
  let cpIndex = 0;

  let position = 0;
  let prev: { id: string; hash: string } | null = null;
  let highestVersion = 0;
  let lastId = '0';
  for (;;) {
    const rows = (await ds.query(
      `SELECT id::text, to_char(at AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.US') AS at, actor_user_id::text, actor_label, action,
              entity_type, entity_id, institute_id::text, details::text AS details, prev_hash, hash, hash_version
         FROM audit_event WHERE audit_event.id > $1 ORDER BY audit_event.id LIMIT ${BATCH}`,
      [lastId],
    )) as (AuditChainRow & { hash: string; hash_version: number })[];
    for (const r of rows) {
      position++;
      // checkpoints whose head lies before this event but was never met: that event is gone
      while (cpIndex < checkpoints.length && BigInt(checkpoints[cpIndex].head) < BigInt(r.id)) {
        const cp = checkpoints[cpIndex++];
        report({ problem: 'checkpoint-head-missing', eventId: cp.head, position: null, detail: `checkpoint ${cp.id} names event ${cp.head} (${cp.count} events) as the head, and that event is missing` });
      }
      if (r.hash_version < highestVersion) {
        report({ problem: 'version-downgrade', eventId: r.id, position, detail: `event ${r.id} claims hash version ${r.hash_version} after version ${highestVersion}` });
      }
      highestVersion = Math.max(highestVersion, r.hash_version);
      const expectedPrev = prev?.hash ?? null;
      if (r.prev_hash !== expectedPrev) {
        report({
          problem: 'link-broken', eventId: r.id, position,
          detail: prev
            ? `event ${r.id} links to ${r.prev_hash ?? 'nothing'}, but the event before it (event ${prev.id}) has hash ${prev.hash}: an event between them was removed, or event ${prev.id} was rewritten`
            : `the first event ${r.id} links to ${r.prev_hash}: earlier events were removed`,
        });
      }
      let recomputed: string | null = null;
      if (r.hash_version === 1) recomputed = canonicalAuditV1(r);
      else if (r.hash_version === 2) recomputed = canonicalAuditV2(r);
      else report({ problem: 'unknown-version', eventId: r.id, position, detail: `event ${r.id} has unknown hash version ${r.hash_version}` });
      if (recomputed !== null && recomputed !== r.hash) {
        report({ problem: 'content-altered', eventId: r.id, position, detail: `event ${r.id} stores hash ${r.hash}, but its columns hash to ${recomputed}: its content was changed after it was written` });
      }
      while (cpIndex < checkpoints.length && checkpoints[cpIndex].head === r.id) {
        const cp = checkpoints[cpIndex++];
        if (cp.head_hash !== r.hash) report({ problem: 'checkpoint-head-changed', eventId: r.id, position, detail: `checkpoint ${cp.id} recorded hash ${cp.head_hash} for event ${r.id}, which now has ${r.hash}` });
        if (cp.count !== String(position)) report({ problem: 'checkpoint-count-mismatch', eventId: r.id, position, detail: `checkpoint ${cp.id} counted ${cp.count} events up to event ${r.id}; the trail holds ${position}` });
      }
      prev = { id: r.id, hash: r.hash };
      lastId = r.id;
    }
    if (rows.length < BATCH) break;
  }
  for (; cpIndex < checkpoints.length; cpIndex++) {
    const cp = checkpoints[cpIndex];
    report({ problem: 'checkpoint-head-missing', eventId: cp.head, position: null, detail: `checkpoint ${cp.id} names event ${cp.head} (${cp.count} events) as the head, and the trail ends before it${prev ? ` at event ${prev.id}` : ''}: its tail was removed` });
  }

  const anchors = (await ds.query(
    `SELECT c.number, c.snapshot->>'auditChainHead' AS head, EXISTS (SELECT 1 FROM audit_event e WHERE e.hash = c.snapshot->>'auditChainHead') AS found
       FROM certificate c WHERE c.snapshot->>'auditChainHead' IS NOT NULL AND c.snapshot->>'auditChainHead' <> repeat('0', 64) ORDER BY c.number`,
  )) as { number: string; head: string; found: boolean }[];
  for (const a of anchors) {
    if (!a.found) report({ problem: 'certificate-anchor-missing', eventId: null, position: null, detail: `certificate ${a.number} anchors chain head ${a.head}, and no event has that hash: the trail was cut or rewritten after it` });
  }

  return {
    ok: breaks.length === 0,
    events: position,
    head: prev ? { eventId: prev.id, hash: prev.hash } : null,
    checkpointsChecked: checkpoints.length,
    certificateAnchorsChecked: anchors.length,
    unhashedColumns,
    firstBreak: breaks.find((b) => b.eventId !== null && b.position !== null) ?? breaks[0] ?? null,
    breaks,
  };
}

/** Writes a checkpoint of the current head; null when nothing was added since the last one. */
export async function writeAuditCheckpoint(ds: DataSource, reason: string): Promise<string | null> {
  const [r] = await ds.query(`SELECT audit_write_checkpoint($1)::text AS id`, [reason]);
  return r.id as string | null;
}

/** The text `npm run admin -- audit-verify` prints. */
export function formatAuditReport(r: AuditVerifyReport): string {
  const lines = [
    `${r.events} events walked; ${r.checkpointsChecked} checkpoints and ${r.certificateAnchorsChecked} certificate anchors compared`,
    r.head ? `head: event ${r.head.eventId}, hash ${r.head.hash}` : 'the trail is empty',
  ];
  if (r.ok) lines.push('audit trail intact');
  else {
    const f = r.firstBreak!;
    lines.push(`AUDIT TRAIL BROKEN: first break at ${f.eventId ? `event ${f.eventId}` : 'the trail as a whole'}${f.position ? `, position ${f.position}` : ''} (${f.problem}): ${f.detail}`);
    for (const b of r.breaks.filter((b) => b !== f)) lines.push(`  also: ${b.problem}${b.eventId ? ` at event ${b.eventId}` : ''}: ${b.detail}`);
  }
  return lines.join('\n');
}
