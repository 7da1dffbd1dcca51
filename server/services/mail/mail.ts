import { and, eq, lte, sql } from 'drizzle-orm'
import nodemailer, { type Transporter } from 'nodemailer'
import pRetry from 'p-retry'
import { mailOutbox } from '../../database/schema'

export interface OutgoingMail { to: string, subject: string, text: string, html: string }

let transporter: Transporter | undefined
function useTransporter(): Transporter {
  const { smtp } = useRuntimeConfig()
  transporter ??= nodemailer.createTransport({ host: smtp.host, port: Number(smtp.port), secure: false, ignoreTLS: true })
  return transporter
}

/** Queues a message in the caller's transaction, so a change and the mail it owes commit together. */
export async function queueMail(db: Queryable, mail: OutgoingMail) {
  await db.insert(mailOutbox).values(mail)
}

// Attempts spaced out over about a day before a message is marked failed.
const retryMinutes = [1, 5, 15, 60, 180, 600, 1440]

/**
 * Sends due messages. Rows are claimed with SKIP LOCKED so several app processes can
 * flush at once without sending a message twice.
 */
export async function flushMailOutbox(limit = 20): Promise<number> {
  const db = useDb()
  let sent = 0
  await db.transaction(async (tx) => {
    const due = await tx.select().from(mailOutbox)
      .where(and(eq(mailOutbox.status, 'pending'), lte(mailOutbox.nextAttemptAt, new Date())))
      .orderBy(mailOutbox.id).limit(limit).for('update', { skipLocked: true })
    const { smtp } = useRuntimeConfig()
    for (const row of due) {
      try {
        // p-retry covers a passing hiccup (a reset connection); the outbox covers the rest.
        await pRetry(() => useTransporter().sendMail({ from: smtp.from, to: row.to, subject: row.subject, text: row.text, html: row.html }), { retries: 2, minTimeout: 200 })
        await tx.update(mailOutbox).set({ status: 'sent', sentAt: new Date(), attempts: row.attempts + 1, text: withoutLinks(row.text), html: withoutLinks(row.html) }).where(eq(mailOutbox.id, row.id))
        sent++
      }
      catch (error) {
        const attempts = row.attempts + 1
        const waitMinutes = retryMinutes[attempts - 1]
        await tx.update(mailOutbox).set({
          attempts,
          lastError: String((error as Error).message ?? error).slice(0, 500),
          status: waitMinutes === undefined ? 'failed' : 'pending',
          ...(waitMinutes === undefined ? { text: withoutLinks(row.text), html: withoutLinks(row.html) } : {}),
          nextAttemptAt: sql`now() + make_interval(mins => ${waitMinutes ?? 0})`,
        }).where(eq(mailOutbox.id, row.id))
      }
    }
  })
  return sent
}

/**
 * A message's text once it has left (or will never leave): its links, which carry one-time
 * reset and invitation tokens, are cut, so the outbox does not keep live links readable.
 */
export function withoutLinks(body: string): string {
  return body.replace(/https?:\/\/[^\s"'<>]+/g, '[link removed after sending]')
}

let flushing: Promise<unknown> | undefined
/** Flushes soon, without making the caller wait for SMTP. */
export function kickMailOutbox() {
  flushing ??= flushMailOutbox().catch(error => logError('[mail] flush failed', error)).finally(() => { flushing = undefined })
}

/** A plain message with one call to action, as text and as HTML. */
export function linkMail(to: string, subject: string, lines: string[], link: { label: string, url: string }): OutgoingMail {
  const escape = (s: string) => s.replace(/[&<>"']/g, c => `&#${c.charCodeAt(0)};`)
  return {
    to,
    subject,
    text: `${lines.join('\n\n')}\n\n${link.label}: ${link.url}\n\n— Arcwise`,
    html: `${lines.map(l => `<p>${escape(l)}</p>`).join('')}<p><a href="${escape(link.url)}">${escape(link.label)}</a></p><p>— Arcwise</p>`,
  }
}
