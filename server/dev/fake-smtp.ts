import http from 'node:http';
import { simpleParser } from 'mailparser';
import { SMTPServer } from 'smtp-server';

// Local test mailbox for development and tests: accepts SMTP on loopback, keeps messages in memory and
// lists them over a small HTTP endpoint (GET /messages, DELETE /messages). Nothing leaves the machine.

export type CaughtMessage = { id: number; receivedAt: string; from: string; to: string[]; subject: string; text: string };
export type FakeSmtp = { smtpUrl: string; mailboxUrl: string; messages: CaughtMessage[]; close: () => Promise<void> };

export async function startFakeSmtp(opts: { smtpPort: number; httpPort: number; host?: string }): Promise<FakeSmtp> {
  const host = opts.host ?? '127.0.0.1';
  const messages: CaughtMessage[] = [];
  let nextId = 1;
  const smtp = new SMTPServer({
    authOptional: true,
    disabledCommands: ['STARTTLS', 'AUTH'],
    logger: false,
    onData(stream, session, callback) {
      simpleParser(stream)
        .then((mail) => {
          messages.push({
            id: nextId++,
            receivedAt: new Date().toISOString(),
            from: session.envelope.mailFrom ? session.envelope.mailFrom.address : '',
            to: session.envelope.rcptTo.map((r) => r.address),
            subject: mail.subject ?? '',
            text: mail.text ?? '',
          });
          callback();
        })
        .catch((e: Error) => callback(e));
    },
  });
  await new Promise<void>((resolve, reject) => {
    smtp.once('error', reject);
    smtp.listen(opts.smtpPort, host, () => resolve());
  });
  const web = http.createServer((req, res) => {
    if (req.url === '/messages' && req.method === 'GET') {
      res.setHeader('content-type', 'application/json');
      res.end(JSON.stringify(messages));
    } else if (req.url === '/messages' && req.method === 'DELETE') {
      messages.length = 0;
      res.statusCode = 204;
      res.end();
    } else {
      res.statusCode = 404;
      res.end();
    }
  });
  await new Promise<void>((resolve) => web.listen(opts.httpPort, host, resolve));
  const smtpAddr = smtp.server.address();
  const webAddr = web.address();
  const smtpPort = typeof smtpAddr === 'object' && smtpAddr ? smtpAddr.port : opts.smtpPort;
  const httpPort = typeof webAddr === 'object' && webAddr ? webAddr.port : opts.httpPort;
  return {
    smtpUrl: `smtp://${host}:${smtpPort}`,
    mailboxUrl: `http://${host}:${httpPort}`,
    messages,
    close: async () => {
      await new Promise<void>((r) => web.close(() => r()));
      await new Promise<void>((r) => smtp.close(() => r()));
    },
  };
}
