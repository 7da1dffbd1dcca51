// Certificates of analysis: the RFC 8785 canonical form that is signed, and the PDF's text as
// a reader's extractor sees it (fonts: the files the app ships in server/assets/fonts).
import { readFileSync } from 'node:fs'
import { join } from 'node:path'
import { extractText, getDocumentProxy } from 'unpdf'
import { describe, expect, it } from 'vitest'
import { canonicalJson, isCanonicalJson } from '../../server/services/certificates/canonical'
import type { ResultCertificateDocument, SequenceCertificateDocument } from '../../server/services/certificates/types'
import { certificatePdf, describeValue, formatMeasured, type CertificateFonts } from '../../server/services/certificates/pdf'
import { CAUTION, CAUTION_SHORT } from '../../shared/caution'

describe('RFC 8785 JSON canonicalisation', () => {
  it('writes the RFC\'s worked example byte for byte (RFC 8785 §3.2.4, from memory of the RFC)', () => {
    const input = JSON.parse('{"numbers": [333333333.33333329, 1E30, 4.50, 2e-3, 0.000000000000000000000000001], "string": "\\u20ac$\\u000F\\u000aA\'\\u0042\\u0022\\u005c\\\\\\"\\/", "literals": [null, true, false]}')
    expect(canonicalJson(input)).toBe('{"literals":[null,true,false],"numbers":[333333333.3333333,1e+30,4.5,0.002,1e-27],"string":"€$\\u000f\\nA\'B\\"\\\\\\\\\\"/"}')
  })

  it('sorts member names by UTF-16 code units, recursively (RFC 8785 §3.2.3)', () => {
    const input = { '\u20AC': 'Euro Sign', '\r': 'Carriage Return', '\uFB33': 'Hebrew Letter Dalet With Dagesh', '1': 'One', '\uD83D\uDE00': 'Emoji: Grinning Face', '\u0080': 'Control', '\u00F6': 'Latin Small Letter O With Diaeresis', 'b': { z: 1, a: [{ y: 2, x: 3 }] } }
    // Read the order off the text: Object.keys would put the array-index name "1" first.
    const text = canonicalJson(input)
    const at = ['\\r', '1', 'b', '\u0080', '\u00F6', '\u20AC', '\uD83D\uDE00', '\uFB33'].map(k => text.indexOf(`"${k}":`))
    expect(at.every(i => i >= 0)).toBe(true)
    expect(at).toEqual([...at].sort((a, b) => a - b))
    expect(canonicalJson(input.b)).toBe('{"a":[{"x":3,"y":2}],"z":1}')
  })

  it.each([
    [1e21, '1e+21'], [1e-7, '1e-7'], [0.000001, '0.000001'], [-0, '0'], [9007199254740992, '9007199254740992'],
    [295147905179352830000, '295147905179352830000'], [-1.5e-300, '-1.5e-300'], [0.1 + 0.2, '0.30000000000000004'],
  ])('numbers as ECMAScript writes them (RFC 8785 §3.2.2.3): %s', (n, text) => {
    expect(canonicalJson(n)).toBe(text)
  })

  it('refuses what is not I-JSON instead of writing something a verifier cannot rebuild', () => {
    expect(() => canonicalJson({ a: Number.NaN })).toThrow(/\$\.a/)
    expect(() => canonicalJson([Infinity])).toThrow()
    expect(() => canonicalJson({ s: '\uD800' })).toThrow(/surrogate/)
    expect(() => canonicalJson({ f: () => 1 })).toThrow()
  })

  it('tells canonical text from the same JSON written otherwise', () => {
    expect(isCanonicalJson('{"a":1,"b":[true,null]}')).toBe(true)
    expect(isCanonicalJson('{"b":[true,null],"a":1}')).toBe(false)
    expect(isCanonicalJson('{"a": 1}')).toBe(false)
    expect(isCanonicalJson('{"a":1.0}')).toBe(false)
    expect(isCanonicalJson('not json')).toBe(false)
  })
})

describe('values as the certificate prints them', () => {
  it.each([
    [-1.23456, 0.0512, '−1.235', '0.051'],
    [43.98983, 0.0000123, '43.989830', '0.000012'],
    [0.0111802, 0.00000051, '0.01118020', '0.00000051'],
    [3.2e-5, 1.1e-7, '3.200e-5', '0.011e-5'],
    [2.5e-12, 3.1e-15, '2.5000e-12', '0.0031e-12'],
    [12.3, null, '12.3', null],
    // A sample at δ ≈ 0: printed at u's digits, not as 5.0e-7 ± 251069.5e-7 (seen in the demo).
    [5.0e-7, 0.0251, '0.000', '0.025'],
    [-2e-5, 0.0251, '0.000', '0.025'],
    [0, 0.0251, '0.000', '0.025'],
  ])('%s ± %s → %s ± %s (u to two significant digits, GUM 7.2.6)', (value, u, v, uText) => {
    const f = formatMeasured(value, u)
    expect(f.value).toBe(v)
    expect(f.u).toBe(uText)
  })

  it('states u, k and U = k·u', () => {
    expect(describeValue({ value: -4.2, u: 0.05, k: 2, U: 0.1, unit: '‰' })).toBe('−4.200 ± 0.050 ‰ (u), k = 2, U = 0.100 ‰')
    expect(describeValue({ value: 0.5, u: 0.01, k: 2.28, U: 0.0228, unit: '1' })).toBe('0.500 ± 0.010 (u), k = 2.28, U = 0.023')
  })
})

const fontDir = join(import.meta.dirname, '../../server/assets/fonts')
const font = (name: string) => readFileSync(join(fontDir, name))
const fonts: CertificateFonts = {
  regular: [font('inter-latin-400-normal.woff'), font('inter-greek-400-normal.woff'), font('DejaVuSans.ttf')],
  bold: [font('inter-latin-600-normal.woff'), font('inter-greek-600-normal.woff'), font('DejaVuSans.ttf')],
}
const seal = { kid: 'kid-123', alg: 'ES256', sha256: 'ab'.repeat(32), jwksUrl: 'https://hub.example/.well-known/jwks.json', verifyUrl: 'https://hub.example/console/certificates/verify' }
const versions = { geometry: [2], calibration: [1], method: null, engine: ['2.0.0'], constants: ['CODATA 2022'] }
const review = { state: 'released', releasedAt: '2026-12-03T10:00:00.000Z', reviewedBy: 'Rosa Lindqvist', version: 1, supersedes: null, correctionReason: null }

async function pdfText(buffer: Buffer) {
  const pdf = await getDocumentProxy(new Uint8Array(buffer))
  return (await extractText(pdf, { mergePages: true })).text as string
}

describe('the PDF', () => {
  const result: ResultCertificateDocument = {
    format: 'arcwise-certificate/1',
    certificate: { number: 'AW-2026-000042', issuedAt: '2026-12-03T11:00:00.000Z', issuer: 'https://hub.example' },
    subject: { type: 'result', id: 'r-1', acquisitionId: 'a-1', version: 1 },
    lab: { slug: 'saltmarsh', name: 'Saltmarsh Stable Isotope Lab', site: 'Harbour Road' },
    instrument: { slug: 'irms-north', name: 'IRMS North' },
    acquisition: { runId: 'carb-17', acquiredAt: '2026-11-30T10:00:00.000Z', sampleRef: 'CARB-7' },
    versions, calibrated: true, review,
    values: {
      ratios: [{ id: 'VPDB:13C/12C', numerator: '[13C]O2', denominator: 'CO2', ratio: { value: 0.0111, u: 0.0000051, k: 2, U: 0.0000102, unit: '1' }, delta: { value: -10.123, u: 0.0456, k: 2, U: 0.0912, unit: '‰', name: 'δ13C', scale: 'VPDB', uWithReference: 0.3 } }],
      peaks: [{ species: 'CO2', z: 1, mz: { value: 43.98983, u: 0.0000123, k: 2, U: 0.0000246, unit: 'u/e' }, area: { value: 2.5e-12, u: 3.1e-15, k: 2, U: 6.2e-15, unit: 'A·(u/e)' } }],
    },
    qc: [],
    caution: { short: CAUTION_SHORT, text: CAUTION },
  }

  it('holds the lab, the δ value with u, k and U in ‰, the reviewer, the number, the key and the caution', async () => {
    const text = await pdfText(await certificatePdf(result, seal, { retracted: null, correctedBy: null }, fonts))
    for (const expected of ['Certificate of analysis', 'AW-2026-000042', 'Saltmarsh Stable Isotope Lab', 'IRMS North', 'carb-17',
      'δ13C (VPDB) = −10.123 ± 0.046 ‰ (u), k = 2, U = 0.091 ‰', '43.989830 ± 0.000012 u/e', 'Rosa Lindqvist', 'kid-123', 'geometry', 'CODATA 2022']) {
      expect(text.replace(/\s+/g, ' ')).toContain(expected.replace('geometry', 'Geometry: v2'))
    }
    // The caution, whole (the extractor may break its lines anywhere).
    expect(text.replace(/\s+/g, ' ')).toContain(CAUTION)
  })

  it('carries the signed JSON and its JWS as embedded files', async () => {
    const canonical = canonicalJson(result)
    const bytes = await certificatePdf(result, seal, { retracted: null, correctedBy: null }, fonts, { canonical, jws: 'eyJhbGciOiJFUzI1NiJ9..c2ln' })
    // The catalogue's name tree of embedded files (PDF 1.7 §7.7.4) lists both; pdf.js as bundled
    // by unpdf does not read pdfkit's direct name-tree dictionary, so the tree is read as text.
    const raw = bytes.toString('latin1')
    const tree = raw.slice(raw.indexOf('/EmbeddedFiles'), raw.indexOf('/EmbeddedFiles') + 200)
    expect(tree).toContain('(AW-2026-000042.json)')
    expect(tree).toContain('(AW-2026-000042.jws)')
    expect(raw).toContain('/Subtype /application#2Fjson')
    expect((await pdfText(bytes)).replace(/\s+/g, ' ')).toContain('Both files are embedded in this PDF')
  })

  it('says so when the result was retracted or corrected since', async () => {
    const text = await pdfText(await certificatePdf(result, seal, { retracted: { at: '2026-12-04T09:00:00.000Z', reason: 'wrong reference gas' }, correctedBy: { version: 2, reason: 'back-dated calibration', releasedAt: '2026-12-05T09:00:00.000Z' } }, fonts))
    expect(text).toContain('RETRACTED')
    expect(text).toContain('wrong reference gas')
    expect(text).toContain('version 2 replaced this result')
  })

  it('prints each sample of a sequence on its scale', async () => {
    const sequence: SequenceCertificateDocument = {
      format: 'arcwise-certificate/1',
      certificate: { number: 'AW-2026-000043', issuedAt: '2026-12-03T11:00:00.000Z', issuer: 'https://hub.example' },
      subject: { type: 'sequence', id: 's-1', sequenceId: 'carb-2026-12-03' },
      lab: result.lab, instrument: result.instrument,
      sequence: { gas: 'CO2', acquisitions: 12, processedAt: '2026-12-03T10:00:00.000Z', accepted: true },
      versions: { ...versions, method: { name: 'Carbonates', version: 3 } }, calibrated: true, review,
      values: {
        samples: [{ position: 5, runId: 'carb-5', sampleRef: 'S-5', values: [{ quantity: 'δ18O', scale: 'VPDB', value: -2.345, u: 0.061, k: 2.11, U: 0.12871, unit: '‰' }] }],
        normalisation: [{ quantity: 'δ18O', scale: 'VPDB', slope: { value: 1.01, u: 0.004, k: 2, U: 0.008, unit: '1' }, intercept: { value: 0.2, u: 0.03, k: 2, U: 0.06, unit: '‰' }, anchors: ['NBS-19', 'LSVEC'] }],
      },
      qc: [], caution: { short: CAUTION_SHORT, text: CAUTION },
    }
    const text = (await pdfText(await certificatePdf(sequence, seal, { retracted: null, correctedBy: null }, fonts))).replace(/\s+/g, ' ')
    expect(text).toContain('δ18O (VPDB) = −2.345 ± 0.061 ‰ (u), k = 2.11, U = 0.129 ‰')
    expect(text).toContain('Carbonates, v3')
    expect(text).toContain('NBS-19, LSVEC')
  })
})
