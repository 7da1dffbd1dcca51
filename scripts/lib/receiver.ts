// The demo partner receiver: a small webhook receiver on loopback, as a partner would run
// one. It verifies each message's Standard Webhooks signature with the endpoint's secret,
// keeps the first copy of each `webhook-id` (delivery is at least once), and shows what it
// received at http://127.0.0.1:<port>/.
import { createServer, type Server } from 'node:http'
import { Webhook } from 'standardwebhooks'

export interface ReceivedMessage {
  at: string
  partner: string
  webhookId: string
  type: string
  lab: string | null
  sequence: number | null
  runId: string | null
  verified: boolean
  problem: string | null
  copies: number
}

export interface Receiver { url: string, received: ReceivedMessage[], close: () => Promise<void> }

/** `secretsOf(partner)` gives the endpoint secret(s) to verify with, read when a message arrives. */
export async function startReceiver(port: number, secretsOf: (partner: string) => string[]): Promise<Receiver> {
  const received: ReceivedMessage[] = []
  const byId = new Map<string, ReceivedMessage>()
  const server: Server = createServer((req, res) => {
    const chunks: Buffer[] = []
    req.on('data', c => chunks.push(c as Buffer))
    req.on('end', () => {
      const match = /^\/hooks\/([a-z0-9-]+)$/.exec(req.url ?? '')
      if (req.method === 'POST' && match) {
        const body = Buffer.concat(chunks).toString('utf8')
        const headers = Object.fromEntries(Object.entries(req.headers).map(([k, v]) => [k, String(v)]))
        const id = headers['webhook-id'] ?? ''
        let problem: string | null = 'no secret for this partner'
        for (const secret of secretsOf(match[1]!)) {
          try { new Webhook(secret).verify(body, headers); problem = null; break }
          catch (error) { problem = (error as Error).message }
        }
        const seen = byId.get(id)
        if (seen && !problem) seen.copies++
        else {
          let parsed: { type?: string, data?: { lab?: string, sequence?: number, runId?: string } } = {}
          try { parsed = JSON.parse(body) }
          catch { /* shown as unverified */ }
          const msg: ReceivedMessage = { at: new Date().toISOString(), partner: match[1]!, webhookId: id, type: parsed.type ?? '?', lab: parsed.data?.lab ?? null, sequence: parsed.data?.sequence ?? null, runId: parsed.data?.runId ?? null, verified: !problem, problem, copies: 1 }
          received.unshift(msg)
          if (!problem) byId.set(id, msg)
          received.splice(500)
        }
        res.writeHead(problem ? 400 : 200, { 'content-type': 'application/json' }).end(JSON.stringify({ ok: !problem, problem }))
        return
      }
      // A partner's retired receiver: 410 Gone, so the demo shows an endpoint the worker disabled.
      if (req.method === 'POST' && /^\/retired\/[a-z0-9-]+$/.test(req.url ?? '')) {
        res.writeHead(410, { 'content-type': 'text/plain' }).end('this receiver was retired')
        return
      }
      if (req.method === 'GET' && req.url === '/messages') {
        res.writeHead(200, { 'content-type': 'application/json' }).end(JSON.stringify(received))
        return
      }
      if (req.method === 'GET' && req.url === '/') {
        res.writeHead(200, { 'content-type': 'text/html; charset=utf-8' }).end(page(received))
        return
      }
      res.writeHead(404).end()
    })
  })
  await new Promise<void>(resolve => server.listen(port, '127.0.0.1', resolve))
  return { url: `http://127.0.0.1:${port}`, received, close: () => new Promise(resolve => server.close(() => resolve())) }
}

function page(messages: ReceivedMessage[]) {
  const esc = (s: unknown) => String(s ?? '').replace(/[&<>"']/g, c => `&#${c.charCodeAt(0)};`)
  const rows = messages.map(m => `<tr><td>${esc(m.at)}</td><td>${esc(m.partner)}</td><td>${esc(m.type)}</td><td>${esc(m.lab)}</td><td>${esc(m.sequence)}</td><td>${esc(m.runId)}</td><td>${m.verified ? 'verified' : `refused: ${esc(m.problem)}`}</td><td>${m.copies}</td><td><code>${esc(m.webhookId)}</code></td></tr>`).join('')
  return `<!doctype html><html lang="en"><head><meta charset="utf-8"><meta http-equiv="refresh" content="5"><title>Demo partner receiver</title>
<style>body{font:14px system-ui,sans-serif;margin:2rem}table{border-collapse:collapse}td,th{border-bottom:1px solid #ccc;padding:4px 8px;text-align:left}</style></head>
<body><h1>Demo partner receiver</h1><p>Webhook messages from the local Arcwise, newest first, each checked against its endpoint's signing secret. Copies count repeats of one <code>webhook-id</code>. Refreshes every 5 s.</p>
<table><thead><tr><th>received</th><th>partner</th><th>type</th><th>lab</th><th>sequence</th><th>run</th><th>signature</th><th>copies</th><th>webhook-id</th></tr></thead><tbody>${rows || '<tr><td colspan="9">Nothing yet: post an acquisition with npm run lab:simulate.</td></tr>'}</tbody></table></body></html>`
}
