import { storeEnabled } from './client'
import { applyRetention, type ObjectStoreAccess } from './maintenance'
import { deleteObject, putObject } from './objects'

/** The server's store for the maintenance jobs (timed and counted like every other call). */
const access: ObjectStoreAccess = {
  put: async (kind, sha256, data, contentType) => { await putObject(kind, data, contentType, sha256) },
  remove: deleteObject,
}

/** Retention per lab, run by worker processes every runtimeConfig.store.retentionMinutes. */
export function runRetention() {
  return applyRetention(useSql(), storeEnabled() ? access : null)
}

let running: Promise<unknown> | undefined
export function kickRetention() {
  running ??= runRetention()
    .then((r) => { if (r.acquisitionsExpired || r.objectsDeleted) useLog().info({ ...r }, 'raw-data retention applied') })
    .catch(error => logError('[store] retention failed', error))
    .finally(() => { running = undefined })
}
