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
