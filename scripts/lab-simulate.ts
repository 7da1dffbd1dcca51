// `npm run lab:simulate -- --lab saltmarsh-isotopes --rate 2 --count 20`: posts simulated
// acquisitions (the engine's forward model) with the lab's key, as its lab system would.
// The key comes from --key, ARCWISE_LAB_KEY, or the demo seed's .data/demo-keys.json.
import { parseArgs } from 'node:util'
import { demoInstruments } from './lib/demo-instruments'
import { postAcquisition } from './lib/lab-system'
import { readDemoKeys } from './lib/seed'

const { values } = parseArgs({ options: {
  lab: { type: 'string', default: 'saltmarsh-isotopes' },
  url: { type: 'string', default: process.env.ARCWISE_URL ?? 'http://localhost:3000' },
  key: { type: 'string' },
  rate: { type: 'string', default: '1' },
  count: { type: 'string', default: '10' },
} })
const instrument = demoInstruments.find(i => i.lab === values.lab)
if (!instrument) { console.error(`--lab must be one of ${demoInstruments.map(i => i.lab).join(', ')}`); process.exit(2) }
const secret = values.key ?? process.env.ARCWISE_LAB_KEY ?? readDemoKeys()[values.lab!]
if (!secret) { console.error(`no key for ${values.lab}: pass --key or run npm start once to seed the demo`); process.exit(2) }
const rate = Math.max(0.01, Number(values.rate))
const count = Math.max(1, Math.floor(Number(values.count)))
const stamp = Date.now().toString(36)
for (let k = 0; k < count; k++) {
  const started = Date.now()
  const runId = `sim-${stamp}-${k + 1}`
  const res = await postAcquisition(values.url!, secret, instrument.acquisition(runId, new Date(), Number.parseInt(stamp, 36) % 1000 + k), runId)
  const result = res.body.result as { peaks?: { assignment?: { species: string } | null }[], ratios?: { deltaName: string, deltaPermil: number }[] } | undefined
  const summary = res.status < 300
    ? `${result?.peaks?.length ?? 0} peaks (${result?.peaks?.map(p => p.assignment?.species ?? '?').join(', ')}) ${result?.ratios?.map(r => `${r.deltaName} ${r.deltaPermil.toFixed(2)} ‰`).join(' ') ?? ''}`
    : JSON.stringify(res.body)
  console.log(`${runId} → ${res.status} ${summary}`)
  await new Promise(r => setTimeout(r, Math.max(0, 1000 / rate - (Date.now() - started))))
}
