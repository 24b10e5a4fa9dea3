import path from 'node:path';
import { startFakeTsa } from '../../server/dev/fake-tsa';

// Benchmarks that load the demo scenario need a time-stamping authority (the demo certificate is time-stamped):
// the local stand-in on a free port, announced through TSA_URL / TSA_ROOT_CERT_FILE to this process and its children.
const open: (() => Promise<void> | void)[] = [];

export async function startBenchTsa(dir: string): Promise<void> {
  const tsa = await startFakeTsa({ port: 0, keysDir: path.join(dir, 'tsa') });
  Object.assign(process.env, { TSA_URL: tsa.url, TSA_ROOT_CERT_FILE: tsa.rootCertFile });
  open.push(tsa.close);
}

export async function stopBenchTsa(): Promise<void> {
  for (const close of open.splice(0)) await close();
}
