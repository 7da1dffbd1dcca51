// `npm run keys:rotate`: re-seals every sealed secret (token signing keys, webhook secrets)
// with the newest key of NUXT_SEALING_KEYS. First give every app process the new keyring
// (the new key appended last, the old ones kept), then run this, then drop the old keys.
// With DATABASE_URL it works on that database with NUXT_SEALING_KEYS (and the session
// password, NUXT_SESSION_PASSWORD, for values sealed before the keyring); without, on the
// database of `npm start` with the keyring of .data/secrets.json.
import { parseSealingKeys } from '../server/utils/keyring'
import { runDatabaseCommand } from './lib/database-command'
import { localSecrets, log } from './lib/paths'
import { rotateSealedValues } from './lib/rotate-keys'

await runDatabaseCommand(async ({ sql, external }) => {
  const local = external ? undefined : localSecrets()
  const keys = process.env.NUXT_SEALING_KEYS ?? local?.sealingKeys ?? ''
  const legacy = process.env.NUXT_SEALING_SECRET || process.env.NUXT_SESSION_PASSWORD || local?.sessionPassword
  const ring = parseSealingKeys(keys, legacy)
  const { resealed, current } = await rotateSealedValues(sql, ring)
  log(`re-sealed ${resealed} value(s) with key "${ring.keys.at(-1)!.id}"; ${current} already used it`)
})
