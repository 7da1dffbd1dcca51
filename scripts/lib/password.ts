// Same scrypt PHC hashes as nuxt-auth-utils' hashPassword (it wraps @adonisjs/hash with the
// default Scrypt options), for scripts that run outside the server.
import { Hash } from '@adonisjs/hash'
import { Scrypt } from '@adonisjs/hash/drivers/scrypt'

const hash = new Hash(new Scrypt({}))

export function hashPassword(password: string): Promise<string> {
  return hash.make(password)
}
