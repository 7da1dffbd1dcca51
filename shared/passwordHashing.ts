/**
 * scrypt parameters for console passwords: N = 2^17, r = 8, p = 1, the minimum the OWASP
 * Password Storage Cheat Sheet recommends for scrypt (OWASP Cheat Sheet Series, "Password
 * Storage", scrypt section, as read 2026-12). scrypt needs 128·N·r bytes = 128 MiB per hash;
 * maxMemory leaves room above that. Hashes made with other parameters still verify (the PHC
 * string carries them) and are re-made at the next successful sign-in.
 * In @adonisjs/hash's names (used by nuxt-auth-utils' hashPassword and by the scripts).
 */
export const scryptParams = {
  cost: 2 ** 17,
  blockSize: 8,
  parallelization: 1,
  maxMemory: 160 * 1024 * 1024,
} as const
