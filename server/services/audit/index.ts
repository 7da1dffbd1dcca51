// The audit log as the console reads it, in sentences with names (rows are written by recordAudit, server/utils/audit.ts).
export { listAudit, auditActions, auditTargetTypes, auditCsv, describeAudit } from './trail'
