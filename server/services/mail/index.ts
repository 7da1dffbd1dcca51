// Mail: queued in the transaction that owes it, sent from the outbox with retries.
export { queueMail, linkMail, kickMailOutbox, type OutgoingMail } from './mail'
