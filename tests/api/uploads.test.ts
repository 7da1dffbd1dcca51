import { request as httpRequest } from 'node:http'
import { url } from '@nuxt/test-utils/e2e'
import { describe, expect, it } from 'vitest'
import { formulaSpecies, geometry, simulateFieldSweep } from '../../shared/engine'
import { acquisitionView, uploadAccepted, uploadStatusView } from '../../shared/schemas/responses'
import { bearer, labWithInstrument, sectorGeometry } from '../support/lab'
import { ConsoleClient, unique, useArcwise } from '../support/server'

await useArcwise()

function co2Sweep(points = 3000) {
  return simulateFieldSweep({
    geometry: geometry.parse(sectorGeometry), acceleratingVoltageV: 3000, mzFrom: 43, mzTo: 46.5, points, resolvingPower: 900, seed: 8,
    species: [{ species: formulaSpecies('CO2'), currentA: 4e-9 }, { species: formulaSpecies('[13C]O2'), currentA: 4e-11 }], noiseA: 1e-15, currentUnit: 'fA',
  })
}

function csvFile(runId: string, points = 3000, eol = '\r\n') {
  const raw = co2Sweep(points)
  const lines = ['\uFEFF# instrument: ms-1', `# runId: ${runId}`, '# acquiredAt: 2026-11-30T09:00:00Z', '# acceleratingVoltage: 3 kV ± 0.0006', '# formulas: CO2, [13C]O2', 'field [T],detector [fA]']
  for (let i = 0; i < raw.sweep!.values.length; i++) lines.push(`${raw.sweep!.values[i]},${raw.detectors[0]!.values[i]}`)
  return lines.join(eol) + eol
}

const upload = (secret: string, body: string | Buffer | FormData, type?: string) =>
  fetch(url('/api/v1/acquisitions'), { method: 'POST', headers: { ...bearer(secret), ...(type ? { 'content-type': type } : {}) }, body: body as BodyInit }).then(async r => ({ status: r.status, body: await r.json() as any }))

describe('acquisitions as files', () => {
  it('takes a CSV with a byte-order mark, CRLF line ends, settings in comments and units in the header', async () => {
    const { key } = await labWithInstrument()
    const res = await upload(key.secret, csvFile(unique('csv')), 'text/csv')
    expect(res.status, JSON.stringify(res.body).slice(0, 300)).toBe(201)
    acquisitionView.parse(res.body)
    expect(res.body.result.points).toBe(3000)
    expect(res.body.result.peaks.map((p: any) => p.assignment?.species)).toEqual(expect.arrayContaining(['CO2', '[13C]O2']))
  })

  it('keeps every CSV value in its place across the parser\'s blocks of 65,536 rows', async () => {
    const { key, lab, admin } = await labWithInstrument()
    const points = 140_000 // two block boundaries and a partial third block
    const file = csvFile(unique('csv-blocks'), points, '\n')
    const rows = file.split('\n').filter(l => /^[\d.-]/.test(l)).map(l => l.split(',').map(Number))
    const res = await upload(key.secret, file, 'text/csv')
    expect(res.status, JSON.stringify(res.body).slice(0, 300)).toBe(201)
    expect(res.body.result.points).toBe(points)
    const payload = await fetch(url(`/api/console/labs/${lab.id}/acquisitions/${res.body.id}/payload.json`), { headers: { cookie: admin.cookie } }).then(r => r.json()) as any
    expect(payload.sweep.values).toEqual(rows.map(r => r[0]))
    expect(payload.detectors[0].values).toEqual(rows.map(r => r[1]))
  })

  it('takes the same CSV as a multipart part', async () => {
    const { key } = await labWithInstrument()
    const form = new FormData()
    form.append('file', new Blob([csvFile(unique('mp'), 2000, '\n')], { type: 'text/csv' }), 'run.csv')
    const res = await upload(key.secret, form)
    expect(res.status, JSON.stringify(res.body).slice(0, 300)).toBe(201)
  })

  it.each([
    ['only a header', '# instrument: ms-1\n# runId: x\n# acquiredAt: 2026-11-30T09:00:00Z\n# acceleratingVoltage: 3 kV\nfield [T],detector [fA]\n', 'csv'],
    ['a column without a unit', '# instrument: ms-1\nfield,detector [fA]\n0.4,1\n', 'csv.header.0'],
    ['an unknown unit', '# instrument: ms-1\n# runId: x\n# acquiredAt: 2026-11-30T09:00:00Z\n# acceleratingVoltage: 3 kV\nfield [furlongs],detector [fA]\n0.40,1\n0.41,2\n0.42,1\n', 'sweep.unit'],
    ['a cell that is not a number', '# instrument: ms-1\nfield [T],detector [fA]\n0.4,1\n0.41,abc\n', 'csv.line.4'],
  ])('refuses a CSV with %s, naming %s', async (_what, text, path) => {
    const { key, sql, lab } = await labWithInstrument()
    const res = await upload(key.secret, text, 'text/csv')
    expect(res.status).toBe(422)
    expect(res.body.errors.map((e: any) => e.path)).toContain(path)
    const [{ n }] = await sql<[{ n: number }]>`select count(*)::int as n from acquisitions where lab_id = ${lab.id}`
    expect(n).toBe(0)
  })

  it('takes JCAMP-DX with the field as X, and refuses a truncated block', async () => {
    const { key } = await labWithInstrument()
    const raw = co2Sweep(2000)
    const x = raw.sweep!.values
    const y = raw.detectors[0]!.values
    const delta = (x[x.length - 1]! - x[0]!) / (x.length - 1)
    const rows: string[] = []
    for (let i = 0; i < x.length; i += 10) rows.push(`${x[i]} ${Array.from({ length: Math.min(10, y.length - i) }, (_, k) => Math.round(y[i + k]! * 1000)).join(' ')}`)
    const jdx = ['##TITLE=co2 run', '##JCAMP-DX=5.01', '##DATA TYPE=MASS SPECTRUM', '##$INSTRUMENT=ms-1', `##$RUN ID=${unique('jdx')}`, '##LONGDATE=2026-11-30T09:00:00Z', '##$ACCELERATING VOLTAGE=3 kV',
      '##$FORMULAS=CO2 [13C]O2', '##XUNITS=T', '##YUNITS=FA', `##FIRSTX=${x[0]}`, `##LASTX=${x[x.length - 1]}`, `##DELTAX=${delta}`, '##XFACTOR=1', '##YFACTOR=0.001', `##NPOINTS=${x.length}`, '##XYDATA=(X++(Y..Y))', ...rows, '##END=']
    const ok = await upload(key.secret, jdx.join('\n'), 'chemical/x-jcamp-dx')
    expect(ok.status, JSON.stringify(ok.body).slice(0, 300)).toBe(201)
    expect(ok.body.result.peaks.some((p: any) => p.assignment?.species === 'CO2')).toBe(true)
    const cut = await upload(key.secret, jdx.slice(0, 40).join('\n'), 'chemical/x-jcamp-dx')
    expect(cut.status).toBe(422)
    expect(cut.body.errors[0].path).toBe('jcamp')
  })

  it('takes mzML 1.1 with base64 arrays (HUPO-PSI), and never resolves an XML entity', async () => {
    const { key } = await labWithInstrument()
    const n = 4000
    const mz = new Float64Array(n)
    const intensity = new Float64Array(n)
    for (let i = 0; i < n; i++) {
      mz[i] = 43 + 3.5 * i / (n - 1)
      intensity[i] = 10 + 5e5 * Math.exp(-0.5 * ((mz[i]! - 43.9893) / 0.02) ** 2) + 6e3 * Math.exp(-0.5 * ((mz[i]! - 44.9926) / 0.02) ** 2)
    }
    const b64 = (a: Float64Array) => Buffer.from(a.buffer).toString('base64')
    const array = (acc: string, data: Float64Array) => `<binaryDataArray encodedLength="0"><cvParam cvRef="MS" accession="MS:1000523" name="64-bit float"/><cvParam cvRef="MS" accession="MS:1000576" name="no compression"/><cvParam cvRef="MS" accession="${acc}" name="array"/><binary>${b64(data)}</binary></binaryDataArray>`
    const mzml = `<?xml version="1.0" encoding="utf-8"?>
<mzML xmlns="http://psi.hupo.org/ms/mzml" version="1.1.0"><run id="r1" startTimeStamp="2026-11-30T09:00:00Z"><userParam name="instrument" value="ms-1"/><userParam name="runId" value="${unique('mzml')}"/><userParam name="formulas" value="CO2,[13C]O2"/>
<spectrumList count="1"><spectrum index="0" id="scan=1" defaultArrayLength="${n}"><binaryDataArrayList count="2">${array('MS:1000514', mz)}${array('MS:1000515', intensity)}</binaryDataArrayList></spectrum></spectrumList></run></mzML>`
    const ok = await upload(key.secret, mzml, 'application/mzml+xml')
    expect(ok.status, JSON.stringify(ok.body).slice(0, 400)).toBe(201)
    expect(ok.body.result.qc.map((q: any) => q.code)).toContain('external-mz')
    expect(ok.body.result.peaks.find((p: any) => p.assignment?.species === 'CO2')).toBeDefined()

    const xxe = `<?xml version="1.0"?><!DOCTYPE mzML [<!ENTITY leak SYSTEM "file:///etc/passwd">]><mzML><run><userParam name="runId" value="&leak;"/></run></mzML>`
    const refused = await upload(key.secret, xxe, 'application/mzml+xml')
    expect(refused.status).toBe(422)
    expect(JSON.stringify(refused.body)).not.toContain('root:')
  })

  it('an unsupported type is 415; a body declared larger than the limit is 413 before it is read', async () => {
    const { key } = await labWithInstrument()
    const plain = await upload(key.secret, 'hello', 'text/plain')
    expect(plain.status).toBe(415)
    expect(plain.body.type).toBe('urn:arcwise:problem:unsupported-media-type')
    const status = await new Promise<number>((resolve, reject) => {
      const req = httpRequest(url('/api/v1/acquisitions'), { method: 'POST', headers: { ...bearer(key.secret), 'content-type': 'text/csv', 'content-length': String(70 * 1024 * 1024) } }, res => resolve(res.statusCode ?? 0))
      req.on('error', reject)
      req.write('field [T],detector [fA]\n')
    })
    expect(status).toBe(413)
  })

  it('an upload of more than 250,000 points answers 202 with a status URL, and is processed in the background', async () => {
    const { key } = await labWithInstrument()
    const res = await upload(key.secret, csvFile(unique('big'), 260_000, '\n'), 'text/csv')
    expect(res.status, JSON.stringify(res.body).slice(0, 300)).toBe(202)
    uploadAccepted.parse(res.body)
    let state: any
    for (let i = 0; i < 120; i++) {
      state = (await new ConsoleClient().request('GET', res.body.statusUrl, undefined, bearer(key.secret))).body
      if (state.status === 'processed' || state.status === 'failed') break
      await new Promise(r => setTimeout(r, 500))
    }
    uploadStatusView.parse(state)
    expect(state.status).toBe('processed')
    const acq = await new ConsoleClient().request('GET', state.acquisitionUrl, undefined, bearer(key.secret))
    expect(acq.body.result.points).toBe(260_000)
  })
})
