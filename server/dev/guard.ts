import type { AppConfig } from '../config';

// The local identity provider signs in anyone who clicks a name, and the test mailbox shows every message to
// anyone who asks: demo stand-ins for a machine's own loopback interface only.

/** True for http(s) URLs on a loopback host (127.0.0.0/8, ::1, localhost). */
export function isLoopbackUrl(url: string): boolean {
  let host: string;
  try {
    host = new URL(url).hostname.toLowerCase();
  } catch {
    return false;
  }
  if (host === 'localhost' || host.endsWith('.localhost')) return true;
  if (host === '[::1]' || host === '::1') return true;
  return /^127\.\d{1,3}\.\d{1,3}\.\d{1,3}$/.test(host);
}

export const DEMO_STAND_IN_NOTICE =
  'The local identity provider and the test mailbox are DEMO STAND-INS: anyone who reaches them can sign in as any demo person or read every mail. ' +
  'Use your institute\'s identity provider and mail server in production (CHRONOLEVEL_DEV_SERVICES=0).';

/** Refuses to start the stand-ins when the service is published beyond loopback, unless explicitly allowed. */
export function assertDevServicesAllowed(config: Pick<AppConfig, 'publicUrl' | 'devServicesOffLoopback'>): void {
  if (isLoopbackUrl(config.publicUrl) || config.devServicesOffLoopback) return;
  throw new Error(
    `PUBLIC_URL ${config.publicUrl} is not a loopback address, so the demo stand-ins (local identity provider, test mailbox) will not start. ` +
      'Set CHRONOLEVEL_DEV_SERVICES=0 and configure IDP_URL, IDP_CERT_FILE and SMTP_URL for real services, ' +
      'or set DEV_SERVICES_OFF_LOOPBACK=1 to start the stand-ins anyway (demonstrations on a closed network only).',
  );
}
