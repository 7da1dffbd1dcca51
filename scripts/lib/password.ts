// Same scrypt PHC hashes as nuxt-auth-utils' hashPassword (it wraps @adonisjs/hash with the
// options of runtimeConfig.hash.scrypt: shared/passwordHashing.ts), for scripts that run
// outside the server.
import { Hash } from '@adonisjs/hash'
import { Scrypt } from '@adonisjs/hash/drivers/scrypt'
import { scryptParams } from '../../shared/passwordHashing'

const hash = new Hash(new Scrypt({ ...scryptParams }))

export function hashPassword(password: string): Promise<string> {
  return hash.make(password)
}
