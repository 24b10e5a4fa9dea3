import http from 'node:http';
import { simpleParser } from 'mailparser';
import { SMTPServer } from 'smtp-server';

// Local test mailbox for development and tests: accepts SMTP on loopback, keeps messages in memory and
// lists them over a small HTTP endpoint (GET /messages, DELETE /messages). Nothing leaves the machine.
// down() and up() stop and restart the SMTP side on the same port, so tests can stage a mail-server outage.

export type CaughtMessage = { id: number; receivedAt: string; from: string; to: string[]; subject: string; text: string; messageId: string };
export type FakeSmtp = {
  smtpUrl: string; mailboxUrl: string; messages: CaughtMessage[];
  /** stops accepting SMTP connections (connection refused) and drops the open ones */
  down: () => Promise<void>;
  /** listens again on the same port */
  up: () => Promise<void>;
  close: () => Promise<void>;
};

export async function startFakeSmtp(opts: { smtpPort: number; httpPort: number; host?: string }): Promise<FakeSmtp> {
  const host = opts.host ?? '127.0.0.1';
  const messages: CaughtMessage[] = [];
  let nextId = 1;
  const newSmtpServer = () => new SMTPServer({
    closeTimeout: 200,
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
            messageId: mail.messageId ?? '',
          });
          callback();
        })
        .catch((e: Error) => callback(e));
    },
  });
  const listen = (server: SMTPServer, port: number) =>
    new Promise<void>((resolve, reject) => {
      server.once('error', reject);
      server.listen(port, host, () => resolve());
    });
  let smtp = newSmtpServer();
  let smtpUp = true;
  await listen(smtp, opts.smtpPort);
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
  const stopSmtp = () => new Promise<void>((r) => smtp.close(() => r()));
  const httpPort = typeof webAddr === 'object' && webAddr ? webAddr.port : opts.httpPort;
  return {
    smtpUrl: `smtp://${host}:${smtpPort}`,
    mailboxUrl: `http://${host}:${httpPort}`,
    messages,
    down: async () => {
      if (!smtpUp) return;
      smtpUp = false;
      await stopSmtp();
    },
    up: async () => {
      if (smtpUp) return;
      smtp = newSmtpServer();
      await listen(smtp, smtpPort);
      smtpUp = true;
    },
    close: async () => {
      await new Promise<void>((r) => web.close(() => r()));
      if (smtpUp) await stopSmtp();
    },
  };
}
