// RFC 8785 JSON Canonicalization Scheme (JCS). No installed package implements it (the
// stable-stringify packages in node_modules sort keys but do not claim RFC 8785, and none
// refuses what JCS refuses), and the scheme is short: ECMAScript's own serialisation of
// strings and numbers (RFC 8785 §3.2.2.2, §3.2.2.3: JSON.stringify does exactly this),
// object members sorted by their names' UTF-16 code units (§3.2.3: what Array#sort compares
// by default), no whitespace. Input must be I-JSON (RFC 7493): finite numbers, no lone
// surrogates; anything else is refused rather than written in a form a verifier cannot rebuild.

const LONE_SURROGATE = /\p{Surrogate}/u

export class CanonicalJsonError extends Error {}

function canonicalString(s: string, path: string): string {
  if (LONE_SURROGATE.test(s)) throw new CanonicalJsonError(`${path}: a lone surrogate is not I-JSON (RFC 7493 §2.1)`)
  return JSON.stringify(s)
}

function write(value: unknown, path: string, out: string[]): void {
  if (value === null) { out.push('null'); return }
  switch (typeof value) {
    case 'boolean': out.push(value ? 'true' : 'false'); return
    case 'number':
      if (!Number.isFinite(value)) throw new CanonicalJsonError(`${path}: ${value} is not a JSON number`)
      // ECMAScript Number::toString, -0 written as 0 (RFC 8785 §3.2.2.3).
      out.push(JSON.stringify(value))
      return
    case 'string': out.push(canonicalString(value, path)); return
    case 'object': {
      if (Array.isArray(value)) {
        out.push('[')
        value.forEach((v, i) => { if (i) out.push(','); write(v === undefined ? null : v, `${path}[${i}]`, out) })
        out.push(']')
        return
      }
      if (typeof (value as { toJSON?: unknown }).toJSON === 'function') { write((value as { toJSON: () => unknown }).toJSON(), path, out); return }
      // Members whose value is undefined are absent, as JSON.stringify leaves them out.
      const keys = Object.keys(value).filter(k => (value as Record<string, unknown>)[k] !== undefined).sort()
      out.push('{')
      keys.forEach((k, i) => {
        if (i) out.push(',')
        out.push(canonicalString(k, path), ':')
        write((value as Record<string, unknown>)[k], `${path}.${k}`, out)
      })
      out.push('}')
      return
    }
    default: throw new CanonicalJsonError(`${path}: a ${typeof value} is not JSON`)
  }
}

/** The RFC 8785 canonical form of a JSON value, as a string (its UTF-8 bytes are what is signed). */
export function canonicalJson(value: unknown): string {
  const out: string[] = []
  write(value, '$', out)
  return out.join('')
}

/** Whether `text` is JSON already in its RFC 8785 canonical form (parse, re-canonicalise, compare). */
export function isCanonicalJson(text: string): boolean {
  try { return canonicalJson(JSON.parse(text)) === text }
  catch { return false }
}
