/** A small seeded PRNG (mulberry32, public domain) so simulations and tests repeat exactly. */
export function seededRandom(seed: number): () => number {
  let a = seed >>> 0
  return () => {
    a = (a + 0x6D2B79F5) >>> 0
    let t = a
    t = Math.imul(t ^ (t >>> 15), t | 1)
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61)
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296
  }
}

/** Standard normal deviates by the Box–Muller transform. */
export function seededNormal(seed: number): () => number {
  const uniform = seededRandom(seed)
  let spare: number | undefined
  return () => {
    if (spare !== undefined) { const s = spare; spare = undefined; return s }
    let u = 0
    while (u === 0) u = uniform()
    const v = uniform()
    const mag = Math.sqrt(-2 * Math.log(u))
    spare = mag * Math.sin(2 * Math.PI * v)
    return mag * Math.cos(2 * Math.PI * v)
  }
}

/**
 * Poisson deviates, seeded: Knuth's multiplication method for small means (Knuth, The Art of
 * Computer Programming vol. 2, 3rd ed. 1997, 3.4.1) and Hörmann's transformed rejection PTRS
 * for means of 10 and more (Hörmann, Insurance: Mathematics and Economics 12 (1993) 39).
 */
export function seededPoisson(seed: number): (mean: number) => number {
  const uniform = seededRandom(seed)
  return mu => poissonDeviate(mu, uniform)
}

/** One Poisson deviate of mean `mu` from a uniform source (the methods of seededPoisson). */
export function poissonDeviate(mu: number, uniform: () => number): number {
  if (!(mu > 0)) return 0
  if (mu < 10) {
    const limit = Math.exp(-mu)
    let k = 0
    let p = uniform()
    while (p > limit) { k++; p *= uniform() }
    return k
  }
  const smu = Math.sqrt(mu)
  const b = 0.931 + 2.53 * smu
  const a = -0.059 + 0.02483 * b
  const invAlpha = 1.1239 + 1.1328 / (b - 3.4)
  const vr = 0.9277 - 3.6224 / (b - 2)
  const logMu = Math.log(mu)
  for (;;) {
    const u = uniform() - 0.5
    const v = uniform()
    const us = 0.5 - Math.abs(u)
    const k = Math.floor((2 * a / us + b) * u + mu + 0.43)
    if (us >= 0.07 && v <= vr) return k
    if (k < 0 || (us < 0.013 && v > us)) continue
    if (Math.log(v) + Math.log(invAlpha) - Math.log(a / (us * us) + b) <= -mu + k * logMu - logFactorial(k)) return k
  }
}

/** ln k! by Stirling's series with three correction terms (exact sums below 10). */
function logFactorial(k: number): number {
  if (k < 10) { let s = 0; for (let i = 2; i <= k; i++) s += Math.log(i); return s }
  const x = k + 1
  return (x - 0.5) * Math.log(x) - x + 0.5 * Math.log(2 * Math.PI) + 1 / (12 * x) - 1 / (360 * x ** 3) + 1 / (1260 * x ** 5)
}
