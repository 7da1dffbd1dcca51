// The local stand-in for an SMTP relay: it accepts every message on loopback, keeps it
// (in memory and in a JSON-lines file), and lists the kept messages over HTTP so the
// console's "Captured mail" page and the tests can read them.
import { appendFileSync, existsSync, mkdirSync, readFileSync } from 'node:fs'
import { createServer, type Server } from 'node:http'
import { dirname } from 'node:path'
import { randomUUID } from 'node:crypto'
import { SMTPServer } from 'smtp-server'
import { simpleParser } from 'mailparser'
import type { CapturedMail as CapturedMessage } from '../../shared/schemas/responses'

export type { CapturedMessage }

export interface MailFake {
  smtpPort: number
  httpUrl: string
  messages: CapturedMessage[]
  close: () => Promise<void>
}

export async function startMailFake(opts: { smtpPort: number, httpPort: number, file?: string }): Promise<MailFake> {
  const messages: CapturedMessage[] = []
  if (opts.file && existsSync(opts.file)) {
    for (const line of readFileSync(opts.file, 'utf8').split('\n')) if (line) messages.push(JSON.parse(line))
  }
  if (opts.file) mkdirSync(dirname(opts.file), { recursive: true })

  const smtp = new SMTPServer({
    authOptional: true,
    disabledCommands: ['STARTTLS'],
    banner: 'Arcwise local mail fake',
    logger: false,
    onData(stream, session, callback) {
      simpleParser(stream)
        .then((parsed) => {
          const message: CapturedMessage = {
            id: randomUUID(),
            receivedAt: new Date().toISOString(),
            from: session.envelope.mailFrom ? session.envelope.mailFrom.address : '',
            to: session.envelope.rcptTo.map(r => r.address),
            subject: parsed.subject ?? '',
            text: parsed.text ?? '',
            html: typeof parsed.html === 'string' ? parsed.html : '',
          }
          messages.push(message)
          if (opts.file) appendFileSync(opts.file, `${JSON.stringify(message)}\n`)
          callback()
        })
        .catch(callback)
    },
  })
  await new Promise<void>((resolve, reject) => {
    smtp.once('error', reject)
    smtp.listen(opts.smtpPort, '127.0.0.1', () => resolve())
  })

  const http: Server = createServer((req, res) => {
    if (req.url?.startsWith('/messages') && req.method === 'GET') {
      res.setHeader('content-type', 'application/json')
      res.end(JSON.stringify([...messages].reverse()))
      return
    }
    res.statusCode = 404
    res.end()
  })
  await new Promise<void>(resolve => http.listen(opts.httpPort, '127.0.0.1', () => resolve()))

  return {
    smtpPort: opts.smtpPort,
    httpUrl: `http://127.0.0.1:${opts.httpPort}/messages`,
    messages,
    close: async () => {
      await new Promise<void>(resolve => smtp.close(() => resolve()))
      await new Promise<void>(resolve => http.close(() => resolve()))
    },
  }
}
