// The upload templates the console offers for download (public/templates/), one per accepted
// format, each a real acquisition: a CO2 field sweep simulated by the engine's forward model
// on a 27 cm potential sector at 3 kV (seeded, so the files do not change between runs).
// `npx tsx scripts/upload-templates.ts` writes them; tests/unit/upload-templates.test.ts fails
// when the committed files differ from what this builds.
import { formulaSpecies, geometry, simulateFieldSweep } from '../../shared/engine'

const POINTS = 600
const sector = geometry.parse({ kind: 'potential-sector', analyzerRadius: { value: 27, unit: 'cm', u: 0.01 } })

function sweep() {
  return simulateFieldSweep({
    geometry: sector, acceleratingVoltageV: 3000, mzFrom: 43.5, mzTo: 46.5, points: POINTS, resolvingPower: 900, seed: 21,
    // 13C/12C near VPDB (0.011180, Brand et al. 2010, from memory) scaled by 0.99: a sample at about δ13C = −10 ‰.
    species: [{ species: formulaSpecies('CO2'), currentA: 4e-9 }, { species: formulaSpecies('[13C]O2'), currentA: 4e-9 * 0.0111802 * 0.99 }],
    noiseA: 2e-15, baselineA: 5e-15, currentUnit: 'fA',
  })
}

const round = (v: number, digits: number) => Number(v.toPrecision(digits))

export function uploadTemplates(): Record<string, string> {
  const raw = sweep()
  const field = Array.from(raw.sweep!.values, v => round(v, 9))
  const current = Array.from(raw.detectors[0]!.values, v => round(v, 6))

  const csv = [
    '# Arcwise acquisition, CSV. Lines starting with # are metadata ("# key: value") or comments.',
    '# Replace the instrument slug, run id, time and sample with your own, or choose them in the upload form.',
    '# instrument: ms-1',
    '# runId: CO2-2026-0412',
    '# acquiredAt: 2026-11-30T09:00:00Z',
    '# sampleRef: CARB-1187',
    '# acceleratingVoltage: 3 kV ± 0.0006',
    '# formulas: CO2, [13C]O2',
    '# ratio: VPDB:13C/12C [13C]O2 CO2',
    'field [T],detector [fA]',
    ...field.map((f, i) => `${f},${current[i]}`),
  ].join('\n') + '\n'

  const json = `${JSON.stringify({
    instrument: 'ms-1', runId: 'CO2-2026-0413', acquiredAt: '2026-11-30T09:20:00Z', sampleRef: 'CARB-1188',
    settings: { acceleratingVoltage: { value: 3, unit: 'kV', u: 0.0006 } },
    sweep: { reading: 'field', unit: 'T', values: field },
    detectors: [{ unit: 'fA', values: current }],
    processing: { formulas: ['CO2', '[13C]O2'], ratios: [{ id: 'VPDB:13C/12C', heavy: '[13C]O2', light: 'CO2' }] },
  }, null, 1)}\n`

  // JCAMP-DX 5.01 (IUPAC): X the field in tesla, Y the current in fA × YFACTOR, ten values a line.
  const delta = (field.at(-1)! - field[0]!) / (field.length - 1)
  const rows: string[] = []
  for (let i = 0; i < field.length; i += 10) rows.push(`${field[i]} ${current.slice(i, i + 10).map(y => Math.round(y * 1000)).join(' ')}`)
  const jcamp = [
    '##TITLE=CO2 sweep, Arcwise template', '##JCAMP-DX=5.01', '##DATA TYPE=MASS SPECTRUM', '##$INSTRUMENT=ms-1', '##$RUN ID=CO2-2026-0414',
    '##LONGDATE=2026-11-30T09:40:00Z', '##$SAMPLE REF=CARB-1189', '##$ACCELERATING VOLTAGE=3 kV', '##$FORMULAS=CO2 [13C]O2',
    '##XUNITS=T', '##YUNITS=FA', `##FIRSTX=${field[0]}`, `##LASTX=${field.at(-1)}`, `##DELTAX=${delta}`, '##XFACTOR=1', '##YFACTOR=0.001',
    `##NPOINTS=${field.length}`, '##XYDATA=(X++(Y..Y))', ...rows, '##END=',
  ].join('\n') + '\n'

  // mzML 1.1 (HUPO-PSI): the m/z axis as the lab's software computed it, base64 64-bit floats.
  const mz = new Float64Array(POINTS)
  const intensity = new Float64Array(POINTS)
  for (let i = 0; i < POINTS; i++) {
    mz[i] = 43.5 + 3 * i / (POINTS - 1)
    // CO2 at 43.98983 and 13CO2 at 44.99318 u (AME2020 atomic masses, from memory), σ 0.02 u.
    intensity[i] = round(12 + 4.0e6 * Math.exp(-0.5 * ((mz[i]! - 43.98983) / 0.02) ** 2) + 4.4e4 * Math.exp(-0.5 * ((mz[i]! - 44.99318) / 0.02) ** 2), 6)
  }
  const b64 = (a: Float64Array) => Buffer.from(a.buffer).toString('base64')
  const array = (accession: string, name: string, data: Float64Array) => `<binaryDataArray encodedLength="${b64(data).length}"><cvParam cvRef="MS" accession="MS:1000523" name="64-bit float"/><cvParam cvRef="MS" accession="MS:1000576" name="no compression"/><cvParam cvRef="MS" accession="${accession}" name="${name}"/><binary>${b64(data)}</binary></binaryDataArray>`
  const mzml = [
    '<?xml version="1.0" encoding="utf-8"?>',
    '<mzML xmlns="http://psi.hupo.org/ms/mzml" version="1.1.0">',
    '<run id="CO2-2026-0415" startTimeStamp="2026-11-30T10:00:00Z">',
    '<userParam name="instrument" value="ms-1"/><userParam name="runId" value="CO2-2026-0415"/><userParam name="sampleRef" value="CARB-1190"/><userParam name="formulas" value="CO2,[13C]O2"/>',
    `<spectrumList count="1"><spectrum index="0" id="scan=1" defaultArrayLength="${POINTS}"><binaryDataArrayList count="2">`,
    array('MS:1000514', 'm/z array', mz),
    array('MS:1000515', 'intensity array', intensity),
    '</binaryDataArrayList></spectrum></spectrumList></run></mzML>',
  ].join('\n') + '\n'

  return { 'acquisition.csv': csv, 'acquisition.json': json, 'acquisition.jdx': jcamp, 'acquisition.mzML': mzml }
}
