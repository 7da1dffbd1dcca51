// The audit log as the console reads it (rows are written by recordAudit, server/utils/audit.ts).
export { listAudit, auditActions } from './trail'
