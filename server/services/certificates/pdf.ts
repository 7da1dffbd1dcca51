import PDFDocument from 'pdfkit'
import type { CertificateDocument, CertifiedValue, ResultCertificateDocument, SequenceCertificateDocument } from './types'

// The certificate of analysis as a PDF, drawn from the signed document (pdfkit). Pure: the
// fonts come in as bytes (server/assets/fonts; tests read the same files from disk).

/** Each family is a list of font files tried in order for each character (Inter's subsets, then a fallback). */
export interface CertificateFonts { regular: Buffer[], bold: Buffer[] }

/** What the certificate's subject has become since it was issued (shown as a banner). */
export interface CertificateStatus {
  retracted: { at: string | null, reason: string | null } | null
  correctedBy: { version: number, reason: string | null, releasedAt: string | null } | null
}

/** How to check the certificate: the signing key, the canonical bytes' digest and where to verify. */
export interface CertificateSeal { kid: string, alg: string, sha256: string, jwksUrl: string, verifyUrl: string }

interface FontkitFace { hasGlyphForCodePoint(codePoint: number): boolean }

const MINUS = '\u2212'
const ink = { text: '#1f2933', muted: '#5f6b7a', accent: '#0f5f8a', bad: '#b42318', line: '#d5dbe1' }

/** Digits of value and u at u's second significant digit (GUM 7.2.6); far from 1, in powers of ten. */
export function formatMeasured(value: number, u: number | null): { value: string, u: string | null, decimals: number | null } {
  const sign = (s: string) => s.replace(/^-/, MINUS)
  if (u === null || !(u > 0) || !Number.isFinite(u)) return { value: sign(Number(value.toPrecision(7)).toString()), u: null, decimals: null }
  const uExp = Math.floor(Math.log10(u))
  // The scale is the larger of the value's and u's: a value that rounds to zero at u's digits
  // (a sample at δ ≈ 0 ‰) prints as 0.000 ± 0.025, not in the powers of ten of its last digits.
  const magnitude = value === 0 ? uExp : Math.max(uExp, Math.floor(Math.log10(Math.abs(value))))
  if (magnitude >= 6 || magnitude <= -4 || uExp <= -9) {
    const digits = Math.min(12, Math.max(1, magnitude - uExp + 1))
    const scale = 10 ** magnitude
    return { value: sign(`${(value / scale).toFixed(digits)}e${magnitude}`), u: `${(u / scale).toFixed(digits)}e${magnitude}`, decimals: null }
  }
  const decimals = Math.min(12, Math.max(0, 1 - uExp))
  const fixed = value.toFixed(decimals)
  // A negative value that rounds to zero prints without its sign (−0.000 says nothing more).
  return { value: sign(Number(fixed) === 0 ? fixed.replace(/^-/, '') : fixed), u: u.toFixed(decimals), decimals }
}

function formatK(k: number) {
  return Number.isInteger(k) ? String(k) : k.toFixed(2)
}

/** "value ± u unit (u), k = 2, U = … unit". */
export function describeValue(v: CertifiedValue): string {
  const unit = v.unit === '1' ? '' : ` ${v.unit}`
  const f = formatMeasured(v.value, v.u)
  if (f.u === null) return `${f.value}${unit} (u not estimated)`
  const U = v.U === null ? null : f.decimals === null ? formatMeasured(v.U, v.U / 100).value : v.U.toFixed(f.decimals)
  return `${f.value} ± ${f.u}${unit} (u), k = ${formatK(v.k)}, U = ${U}${unit}`
}

const utc = (iso: string | null) => (iso ? `${iso.slice(0, 16).replace('T', ' ')} UTC` : '–')

class Writer {
  private faces = new Map<string, FontkitFace>()
  constructor(private pdf: PDFKit.PDFDocument, fonts: CertificateFonts) {
    for (const [family, files] of Object.entries(fonts)) {
      files.forEach((file: Buffer, i: number) => {
        const name = `${family}-${i}`
        pdf.registerFont(name, file)
        pdf.font(name)
        // pdfkit exposes no glyph lookup; its embedded font wraps a fontkit face that has one.
        this.faces.set(name, (pdf as unknown as { _font: { font: FontkitFace } })._font.font)
      })
    }
  }

  /** Runs of characters, each in the first font of the family that has all their glyphs. */
  private runs(text: string, family: 'regular' | 'bold') {
    const names = [...this.faces.keys()].filter(n => n.startsWith(`${family}-`))
    const out: { font: string, text: string }[] = []
    for (const ch of text) {
      const cp = ch.codePointAt(0)!
      const last = out.at(-1)
      // Spaces stay in the run they are in, so a line is not cut into needless pieces.
      const font = last && /\s/.test(ch) ? last.font : (names.find(n => this.faces.get(n)!.hasGlyphForCodePoint(cp)) ?? names[0]!)
      if (last?.font === font) last.text += ch
      else out.push({ font, text: ch })
    }
    return out
  }

  line(text: string, opts: { bold?: boolean, size?: number, color?: string, indent?: number, gap?: number } = {}) {
    const runs = this.runs(text, opts.bold ? 'bold' : 'regular')
    const x = this.pdf.page.margins.left + (opts.indent ?? 0)
    const width = this.pdf.page.width - this.pdf.page.margins.right - x
    runs.forEach((run, i) => {
      this.pdf.font(run.font).fontSize(opts.size ?? 10).fillColor(opts.color ?? ink.text)
      const more = i < runs.length - 1
      if (i === 0) this.pdf.text(run.text, x, this.pdf.y, { width, continued: more, lineGap: 2 })
      else this.pdf.text(run.text, { continued: more })
    })
    if (opts.gap) this.pdf.moveDown(opts.gap)
  }

  heading(text: string) {
    this.pdf.moveDown(0.6)
    this.line(text, { bold: true, size: 11.5, color: ink.accent })
    const y = this.pdf.y + 1
    this.pdf.moveTo(this.pdf.page.margins.left, y).lineTo(this.pdf.page.width - this.pdf.page.margins.right, y).lineWidth(0.5).strokeColor(ink.line).stroke()
    this.pdf.moveDown(0.35)
  }

  field(label: string, value: string) {
    this.line(`${label}: ${value}`, { indent: 0 })
  }
}

const MAX_PEAKS = 40

const isResult = (doc: CertificateDocument): doc is ResultCertificateDocument => doc.subject.type === 'result'

function resultValues(w: Writer, doc: ResultCertificateDocument) {
  w.heading('Isotope ratios and δ values')
  if (!doc.values.ratios.length) w.line('No ratio was asked for with this acquisition.', { color: ink.muted })
  for (const r of doc.values.ratios) {
    w.line(`${r.delta.name} (${r.delta.scale}) = ${describeValue(r.delta)}`, { bold: true })
    const uRef = formatMeasured(r.delta.value, r.delta.uWithReference).u
    w.line(`${r.numerator} / ${r.denominator} = ${describeValue(r.ratio)}; u(δ) with the accepted ratio's own u: ${uRef ?? '–'} ‰`, { indent: 12, color: ink.muted, gap: 0.2 })
  }
  w.heading('Peaks')
  if (!doc.values.peaks.length) w.line('No peak rose above the noise.', { color: ink.muted })
  for (const p of doc.values.peaks.slice(0, MAX_PEAKS)) {
    const who = p.species ? `${p.species}${p.z && p.z > 1 ? ` (z = ${p.z})` : ''}` : 'unassigned'
    w.line(`m/z ${describeValue(p.mz)} · ${who}`)
    w.line(`area ${describeValue(p.area)}`, { indent: 12, color: ink.muted })
  }
  if (doc.values.peaks.length > MAX_PEAKS) w.line(`… and ${doc.values.peaks.length - MAX_PEAKS} more peaks, all in the signed JSON.`, { color: ink.muted })
}

function sequenceValues(w: Writer, doc: SequenceCertificateDocument) {
  w.heading('Samples, normalised to the international scales')
  if (!doc.values.samples.length) w.line('The sequence has no sample.', { color: ink.muted })
  for (const s of doc.values.samples) {
    w.line(`Position ${s.position} · ${s.runId}${s.sampleRef ? ` · sample ${s.sampleRef}` : ''}`, { bold: true })
    for (const v of s.values) w.line(`${v.quantity} (${v.scale}) = ${describeValue(v)}`, { indent: 12 })
  }
  if (doc.values.normalisation.length) {
    w.heading('Normalisation (true = intercept + slope · measured)')
    for (const n of doc.values.normalisation) {
      w.line(`${n.quantity} on ${n.scale}: slope ${describeValue(n.slope)}; intercept ${describeValue(n.intercept)}`)
      w.line(`anchors: ${n.anchors.join(', ')}`, { indent: 12, color: ink.muted })
    }
  }
}

/**
 * The PDF of a certificate: the document's content, its status now, and how to verify it.
 * With `files`, the signed JSON and its JWS ride along as embedded files (PDF 1.7 §7.11.4),
 * so the PDF alone is enough to verify.
 */
export function certificatePdf(doc: CertificateDocument, seal: CertificateSeal, status: CertificateStatus, fonts: CertificateFonts, files?: { canonical: string, jws: string }): Promise<Buffer> {
  const pdf = new PDFDocument({
    size: 'A4', margin: 50,
    info: { Title: `Certificate of analysis ${doc.certificate.number}`, Author: doc.lab.name, Subject: isResult(doc) ? doc.acquisition.runId : doc.subject.sequenceId, Creator: 'Arcwise' },
  })
  const chunks: Buffer[] = []
  pdf.on('data', (c: Buffer) => chunks.push(c))
  const done = new Promise<Buffer>((resolve, reject) => {
    pdf.on('end', () => resolve(Buffer.concat(chunks)))
    pdf.on('error', reject)
  })
  const w = new Writer(pdf, fonts)

  w.line('Arcwise', { bold: true, color: ink.accent })
  w.line('Certificate of analysis', { bold: true, size: 20, gap: 0.1 })
  w.line(`No. ${doc.certificate.number} · issued ${utc(doc.certificate.issuedAt)} by ${doc.certificate.issuer}`, { color: ink.muted, gap: 0.4 })
  if (status.retracted) w.line(`RETRACTED ${utc(status.retracted.at)}: ${status.retracted.reason ?? 'no reason given'}. This certificate no longer stands.`, { bold: true, color: ink.bad, gap: 0.3 })
  if (status.correctedBy) w.line(`CORRECTED: version ${status.correctedBy.version} replaced this result ${utc(status.correctedBy.releasedAt)}${status.correctedBy.reason ? ` (${status.correctedBy.reason})` : ''}; ask for its certificate.`, { bold: true, color: ink.bad, gap: 0.3 })

  w.heading(isResult(doc) ? 'What was measured' : 'Sequence')
  w.field('Laboratory', `${doc.lab.name} (${doc.lab.slug}), ${doc.lab.site}`)
  w.field('Instrument', `${doc.instrument.name} (${doc.instrument.slug})`)
  if (isResult(doc)) {
    w.field('Run', `${doc.acquisition.runId}${doc.acquisition.sampleRef ? ` · sample ${doc.acquisition.sampleRef}` : ''}`)
    w.field('Acquired', utc(doc.acquisition.acquiredAt))
    w.field('Result', `version ${doc.subject.version} (${doc.subject.id})`)
  }
  else {
    w.field('Sequence', `${doc.subject.sequenceId} · ${doc.sequence.gas} · ${doc.sequence.acquisitions} acquisitions · processed ${utc(doc.sequence.processedAt)}`)
  }

  w.heading('Method and versions')
  const list = <T>(xs: T[], none: string) => (xs.length ? xs.map(x => `v${x}`).join(', ') : none)
  w.field('Geometry', list(doc.versions.geometry, '–'))
  w.field('Calibration', doc.calibrated ? `calibrated, ${list(doc.versions.calibration, '–')}` : 'not calibrated')
  w.field('Method', doc.versions.method ? `${doc.versions.method.name}, v${doc.versions.method.version}` : 'none (a single acquisition, computed by the engine alone)')
  w.field('Engine', `${doc.versions.engine.join(', ')} · constants ${doc.versions.constants.join(', ')}`)

  w.heading('Review and release')
  w.field('Released', `${utc(doc.review.releasedAt)} ${doc.review.reviewedBy ? `by ${doc.review.reviewedBy}` : 'automatically, by the lab\'s release rule'}`)
  if (doc.review.supersedes) w.field('Corrects', `result ${doc.review.supersedes}${doc.review.correctionReason ? `: ${doc.review.correctionReason}` : ''}`)

  if (isResult(doc)) resultValues(w, doc)
  else sequenceValues(w, doc)
  pdf.moveDown(0.2)
  w.line('u: standard uncertainty (GUM, JCGM 100:2008); U = k·u, the expanded uncertainty at a coverage of about 95 %.', { size: 8.5, color: ink.muted })

  if (doc.qc.length) {
    w.heading('Quality flags')
    for (const f of doc.qc) w.line(`${f.code}: ${f.message}`)
  }

  w.heading('Caution')
  w.line(doc.caution.text)

  w.heading('Verify this certificate')
  w.line(`Signed by the hub with key ${seal.kid} (${seal.alg}), published at ${seal.jwksUrl}: a detached JWS (RFC 7515, Appendix F) over the RFC 8785 canonical JSON of what is certified, SHA-256 ${seal.sha256}.`, { size: 9 })
  w.line(`Check it at ${seal.verifyUrl} with the certificate number ${doc.certificate.number}, or with the .json and .jws files, by POST /api/v1/certificates/verify or with any JOSE library.`, { size: 9 })
  if (files) {
    w.line('Both files are embedded in this PDF as attachments.', { size: 9 })
    // Buffers: pdfkit reads a string as a path or a data URI.
    pdf.file(Buffer.from(files.canonical, 'utf8'), { name: `${doc.certificate.number}.json`, type: 'application/json', description: 'The certified content, RFC 8785 canonical JSON (the signed bytes)' })
    pdf.file(Buffer.from(files.jws, 'utf8'), { name: `${doc.certificate.number}.jws`, type: 'application/jose', description: 'Detached JWS (RFC 7515 Appendix F) over the JSON' })
  }
  pdf.end()
  return done
}
