// Line splitting of the ratio-series ingest on hostile input: a 64 MB file with no line end at all, fed in 64 KiB
// chunks (as busboy hands them on) into a discarding COPY sink. Prints the seconds until the ingest answers.
// Before linear scanning this took minutes (each chunk rescanned everything pending); the line-length limit now ends it
// at the first 64 KiB. Figures only; nothing fails on time.
import { Readable, Writable } from 'node:stream';
import { ingestRatioSeries } from '../../server/uploads/ingest';

const MB = Number(process.env.LINE_SPLIT_MB ?? 64);
const chunk = Buffer.alloc(64 * 1024, '1');
function* chunks() {
  for (let i = 0; i < (MB * 1024 * 1024) / chunk.length; i++) yield chunk;
}
const sink = new Writable({ write: (_c, _e, cb) => cb() });
const t0 = performance.now();
const summary = await ingestRatioSeries(Readable.from(chunks()), sink, {
  seriesId: '00000000-0000-4000-8000-000000000000',
  mapping: { epochColumn: 1, epochKind: 'mjd', valueColumn: 2, valueKind: 'offset' } as never,
  referenceRatio: '1', periodStartMjd: null, periodEndMjd: null,
});
const seconds = (performance.now() - t0) / 1000;
console.log(`${MB} MB without a line end: ingest answered in ${seconds.toFixed(2)} s; first issue: ${summary.issues[0]?.message ?? '(none)'}`);
